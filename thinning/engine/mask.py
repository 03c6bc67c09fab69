r"""Sidelobe masks: limits in observation directions, carried onto the broadside pattern.

A mask entry limits the pattern of every beam of the scan set, at every frequency of the
band, in a range of observation directions θ ∈ [θ₁, θ₂], φ ∈ [φ₁, φ₂], to a level relative to
the peak of the beam being steered (``level_db``), or to an absolute gain (``level_dbi``).
``[requirements] psl_db`` is the limit everywhere else (and everywhere, with no mask).

**Relative limits.** With the embedded element gain g_e(w)  [dBi], the gain toward w of an
array of N_eff = (Σa)²/Σa² elements is element gain plus array gain,

.. math::  G(w) = g_e(w) + 10\log_{10} N_\mathrm{eff} + P(t)\ \text{[dB]},

P the normalised array-factor power (conventions.md; the embedded element pattern already
holds what coupling does to each element's gain). A ``level_dbi`` entry L is therefore the
relative limit L − g_e(w) − 10 log₁₀ N_eff: lower where the element radiates more.

**The per-sample limit** (the erosion of the mask over the scan set and band). Every beam
(w₀, f) reads the broadside pattern at t(w) (:mod:`thinning.engine.coverage`), so the pattern
value at t is judged against every limit whose directions reach t for some beam:

.. math::  \ell(t) = \min\{\,L(w) : t = t(w; w_0, f),\ w_0 \in S,\ f \in B,\ |w| \le 1\,\}.

For a mask entry X of constant level that is the polygon T(X) of
:meth:`thinning.engine.coverage.Coverage.image`; ℓ(t) is the lowest level of the zones T(X)
that hold t. A ``level_dbi`` entry is cut into bands of θ over which the element gain varies
by at most :data:`DBI_STEP_DB`, each with the highest element gain in it (so the limit is never
above the exact one by more than the polygons' tolerance). Then

.. math::  \max_t\ \big[P(t) - \ell(t)\big] = \max_{w_0, f, w}\ \big[P(t(w)) - L(w)\big],

the worst excess over the mask of any beam at any frequency is a weighted maximum over the
broadside pattern, max P·g with g = 10^{−ℓ/10} (0 where no limit applies).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np
import shapely

from ..errors import SpecError, where
from .coverage import Coverage, polar_rectangle

__all__ = [
    "MaskEntry",
    "SidelobeLimits",
    "RegionMap",
    "DBI_STEP_DB",
    "mask_from_spec",
    "swap_floor",
]

#: Largest variation of the element gain  [dB] within one band of θ of a ``level_dbi`` entry.
DBI_STEP_DB = 1.0


def _wrap(phi):
    return np.mod(phi, 2 * math.pi)


@dataclass(frozen=True)
class MaskEntry:
    """One entry of a sidelobe mask.

    Attributes
    ----------
    theta : (float, float)  [rad]   0 ≤ θ₁ ≤ θ₂ ≤ π/2
    phi : (float, float)  [rad]    φ₁ ≤ φ₂ ≤ φ₁ + 2π (taken modulo 2π)
    level : float  [dB or dBi]
    absolute : bool   ``level_dbi`` (absolute gain) instead of ``level_db`` (relative to the
        beam's peak)
    """

    theta: tuple[float, float]
    phi: tuple[float, float]
    level: float
    absolute: bool = False

    @property
    def full_circle(self) -> bool:
        return self.phi[1] - self.phi[0] >= 2 * math.pi - 1e-12

    def contains(self, u, v) -> np.ndarray:
        """Which visible directions (u, v) the entry covers (edges included)."""
        u = np.asarray(u, dtype=float)
        v = np.asarray(v, dtype=float)
        s = np.hypot(u, v)
        eps = 1e-12
        ok = (s >= math.sin(self.theta[0]) - eps) & (s <= math.sin(self.theta[1]) + eps)
        ok &= s <= 1.0 + eps
        if self.full_circle:
            return ok
        rel = _wrap(np.arctan2(v, u) - self.phi[0])
        span = self.phi[1] - self.phi[0]
        return ok & ((rel <= span + eps) | (rel >= 2 * math.pi - eps) | (s <= eps))

    def polygon(self):
        """The directions covered, as a polygon in u-v (an outer approximation)."""
        return polar_rectangle(math.sin(self.theta[0]), math.sin(self.theta[1]), *self.phi)

    def describe(self) -> str:
        t1, t2 = (math.degrees(x) for x in self.theta)
        p1, p2 = (math.degrees(x) for x in self.phi)
        unit = "dBi" if self.absolute else "dB"
        return f"θ {t1:g}°–{t2:g}°, φ {p1:g}°–{p2:g}°: {self.level:g} {unit}"

    def to_dict(self) -> dict:
        key = "level_dbi" if self.absolute else "level_db"
        return {
            "theta_deg": [round(math.degrees(x), 9) for x in self.theta],
            "phi_deg": [round(math.degrees(x), 9) for x in self.phi],
            key: self.level,
        }


@dataclass
class SidelobeLimits:
    """The requirement on the sidelobes: the mask entries, and ``psl_db`` elsewhere.

    Parameters
    ----------
    entries : sequence of MaskEntry
    psl_db : float or None  [dB]   the limit where no entry applies (None: no limit there)
    element : ElementPattern or None   the embedded element gain (``level_dbi`` entries)
    elements : float   N_eff of the array (``level_dbi`` entries)
    """

    entries: tuple = ()
    psl_db: float | None = None
    element: object = None
    elements: float = 1.0
    _zones: dict = field(default_factory=dict, repr=False)

    @property
    def any(self) -> bool:
        return bool(self.entries)

    def _element_dbi(self, u, v) -> np.ndarray:
        if self.element is None:
            raise ValueError("a level_dbi mask entry needs an element pattern")
        return self.element.gain_dbi(u, v)

    def at(self, u, v) -> np.ndarray:
        """The relative limit  [dB] in visible directions (u, v): the lowest level of the
        entries that cover each, else ``psl_db``, else +∞."""
        u = np.asarray(u, dtype=float)
        v = np.asarray(v, dtype=float)
        out = np.full(np.broadcast(u, v).shape, np.inf)
        covered = np.zeros(out.shape, dtype=bool)
        for e in self.entries:
            inside = e.contains(u, v)
            if not inside.any():
                continue
            covered |= inside
            level = np.full(out.shape, float(e.level))
            if e.absolute:
                level = e.level - self._element_dbi(u, v) - 10 * math.log10(self.elements)
            out = np.where(inside, np.minimum(out, level), out)
        if self.psl_db is not None:
            out = np.where(covered, out, self.psl_db)
        return out

    def _bands(self, e: MaskEntry) -> list[tuple[float, float, float]]:
        """(θ₁, θ₂, relative level) pieces of an entry: one for ``level_db``; bands of θ with
        at most DBI_STEP_DB of element-gain variation, each at its highest gain, for
        ``level_dbi``."""
        if not e.absolute:
            return [(e.theta[0], e.theta[1], float(e.level))]
        t1, t2 = e.theta
        nt = max(2, int(math.ceil(math.degrees(t2 - t1) / 0.1)) + 1)
        th = np.linspace(t1, min(t2, math.radians(89.999)), nt)
        p1, p2 = e.phi
        nphi = max(2, int(math.ceil(math.degrees(p2 - p1) / 1.0)) + 1)
        ph = np.linspace(p1, p2, nphi)
        tt, pp = np.meshgrid(th, ph, indexing="ij")
        g = self._element_dbi(np.sin(tt) * np.cos(pp), np.sin(tt) * np.sin(pp))
        gmax = g.max(axis=1)  # highest gain at each θ over the entry's φ range
        out = []
        start = 0
        while start < nt - 1:
            end = start + 1
            lo = hi = gmax[start]
            while end < nt - 1:
                nlo, nhi = min(lo, gmax[end + 1]), max(hi, gmax[end + 1])
                if nhi - nlo > DBI_STEP_DB:
                    break
                lo, hi, end = nlo, nhi, end + 1
            top = max(gmax[start : end + 1])
            hi_t = th[end] if end < nt - 1 else t2
            out.append((float(th[start]), float(hi_t), float(e.level - top)))
            start = end
        offset = 10 * math.log10(self.elements)
        return [(a, b, lvl - offset) for a, b, lvl in out]

    def zones(self, coverage: Coverage, guard: float = 0.0) -> list[tuple[float, object]]:
        """(relative level, prepared shapely geometry in t) of every zone: where each limit
        reaches the broadside pattern (module docstring), grown by ``guard`` (direction
        cosines). Cached per coverage and guard."""
        key = (coverage, float(guard))
        if key in self._zones:
            return self._zones[key]
        if guard > 0:
            zones = [
                (level, geom.buffer(guard, quad_segs=8)) for level, geom in self.zones(coverage)
            ]
            for _, geom in zones:
                shapely.prepare(geom)
            self._zones[key] = zones
            return zones
        zones = []
        for e in self.entries:
            for a, b, level in self._bands(e):
                geom = coverage.image(math.sin(a), math.sin(b), e.phi[0], e.phi[1])
                zones.append((level, geom))
        if self.psl_db is not None:  # the directions no entry covers
            rest = polar_rectangle(0.0, 1.0, 0.0, 2 * math.pi).difference(
                shapely.union_all([e.polygon() for e in self.entries])
            )
            if not rest.is_empty:
                zones.append((float(self.psl_db), coverage.image_of(rest)))
        for _, geom in zones:
            shapely.prepare(geom)
        self._zones[key] = zones
        return zones

    def limits_on(
        self, coverage: Coverage, u, v, linear: bool = False, guard: float = 0.0
    ) -> np.ndarray:
        """ℓ(t)  [dB] at broadside-pattern points t = (u, v): the lowest level of the zones
        that hold each point (+∞ where none does). ``linear``: the pattern of a line array
        depends on u alone, so a zone holds u when it holds any point (u, v)."""
        u = np.asarray(u, dtype=float).ravel()
        v = np.asarray(v, dtype=float).ravel()
        out = np.full(u.shape, np.inf)
        for level, geom in self.zones(coverage, guard):
            if u.size == 0:
                break
            if linear:
                inside = _in_projection(geom, u) & (level < out)
                out[inside] = level
                continue
            x0, y0, x1, y1 = geom.bounds
            near = (u >= x0) & (u <= x1) & (v >= y0) & (v <= y1) & (level < out)
            if not near.any():
                continue
            idx = np.flatnonzero(near)
            inside = shapely.contains_xy(geom, u[idx], v[idx])
            out[idx[inside]] = level
        return out

    def describe(self) -> list[str]:
        return [e.describe() for e in self.entries]


def _in_projection(geom, u) -> np.ndarray:
    """Which u lie in the projection of a polygon (or several) onto the u axis."""
    out = np.zeros(np.shape(u), dtype=bool)
    for part in getattr(geom, "geoms", [geom]):
        x0, _, x1, _ = part.bounds  # a connected polygon projects onto one interval
        out |= (u >= x0) & (u <= x1)
    return out


class RegionMap:
    """The sidelobe region of a coverage, and the per-direction weight of its limits, as the
    sample grids of :mod:`thinning.engine.region` need them.

    Parameters
    ----------
    coverage : Coverage
    limits : SidelobeLimits or None
        None: every direction of the region has weight g = 1 (the PSL over the region).
    guard_samples : float
        For the search: grow the region (when it is not a disc) and every limit zone by this
        many sample diagonals hypot(du, dv) of the grid it is sampled on. With ½ every point
        of a zone has its nearest sample inside the grown zone, so a lobe standing just
        across an edge, between two samples, is judged against the limit it may reach (the
        search would otherwise learn to hide lobes there: by 2.6 dB on the example spec).
        The reported figures use the exact edges (:mod:`thinning.analysis.scan_figures`).
    """

    def __init__(self, coverage: Coverage, limits: SidelobeLimits | None = None, guard_samples=0.0):
        self.coverage = coverage
        self.limits = limits if (limits is not None and limits.any) else None
        self.reach = coverage.reach
        self.disc = coverage.disc_radius
        self.guard_samples = float(guard_samples)
        self.guard = 0.0
        self._poly = None

    @classmethod
    def for_search(cls, coverage, limits, scan_max: float, frequency: float):
        """The search's map: the coverage (the cone ``scan_max`` at ``frequency`` when None)
        with the mask, grown by half a sample diagonal (``guard_samples``); None for the
        plain cone at one frequency without a mask (the engine's own disc)."""
        masked = limits is not None and limits.any
        if coverage is None and not masked:
            return None
        cov = coverage or Coverage.cone(scan_max, frequency)
        if cov.is_disc and cov.band is None and not masked:
            return None
        return cls(cov, limits if masked else None, guard_samples=0.5)

    def guarded(self, distance: float) -> RegionMap:
        """This map with its edges grown by ``distance`` (direction cosines)."""
        out = RegionMap(self.coverage, self.limits)
        out.guard = float(distance)
        if out.disc is None:
            out.reach = self.reach + out.guard
        return out

    @property
    def masked(self) -> bool:
        return self.limits is not None

    def polygon(self):
        if self._poly is None:
            self._poly = self.coverage.region_polygon()
            if self.guard > 0:
                self._poly = self._poly.buffer(self.guard, quad_segs=8)
            shapely.prepare(self._poly)
        return self._poly

    def contains(self, u, v, linear: bool = False) -> np.ndarray:
        """Which broadside-pattern points t = (u, v) lie in the sidelobe region (the disc with
        the rule of :class:`thinning.engine.region.SampledRegion` for a cone). ``linear``:
        which u lie in its projection onto the u axis (a line array's pattern)."""
        u = np.asarray(u, dtype=float)
        v = np.asarray(v, dtype=float)
        if self.disc is not None:
            if linear:
                return np.broadcast_to(u**2 <= self.disc**2 * (1 + 1e-12), np.broadcast(u, v).shape)
            return (u**2 + v**2) <= self.disc**2 * (1 + 1e-12)
        if linear:
            return np.broadcast_to(_in_projection(self.polygon(), u), np.broadcast(u, v).shape)
        shape = np.broadcast(u, v).shape
        uu, vv = np.broadcast_to(u, shape).ravel(), np.broadcast_to(v, shape).ravel()
        x0, y0, x1, y1 = self.polygon().bounds
        out = np.zeros(uu.size, dtype=bool)
        near = np.flatnonzero((uu >= x0) & (uu <= x1) & (vv >= y0) & (vv <= y1))
        if near.size:
            out[near] = shapely.contains_xy(self.polygon(), uu[near], vv[near])
        return out.reshape(shape)

    def weight(self, u, v, inside=None, linear: bool = False) -> np.ndarray:
        """g = 10^{−ℓ(t)/10} at points t in the region (1 without a mask; 0 outside the
        region and where no limit applies)."""
        inside = self.contains(u, v, linear) if inside is None else inside
        if self.limits is None:
            return inside.astype(float)
        shape = inside.shape
        g = np.zeros(inside.size)
        idx = np.flatnonzero(inside.ravel())
        if idx.size:
            uu = np.broadcast_to(np.asarray(u, float), shape).ravel()[idx]
            vv = np.broadcast_to(np.asarray(v, float), shape).ravel()[idx]
            lim = self.limits.limits_on(self.coverage, uu, vv, linear, self.guard)
            finite = np.isfinite(lim)
            g[idx] = np.where(finite, 10.0 ** (-np.where(finite, lim, 0.0) / 10), 0.0)
        return g.reshape(shape)


def mask_from_spec(value, src, pair, number) -> tuple:
    """``[requirements] mask`` of a spec: a list of {theta_deg, phi_deg (default the whole
    circle), level_db | level_dbi}, checked key by key (``pair``, ``number``: the spec's
    checks, :mod:`thinning.spec`)."""
    key = "requirements.mask"
    if not isinstance(value, list) or not value:
        raise SpecError(
            f"{where(src, key)}expected a list of entries "
            "{theta_deg = [t1, t2], phi_deg = [p1, p2], level_db = L}"
        )
    out = []
    for i, e in enumerate(value):
        k = f"{key}[{i}]"
        if not isinstance(e, dict):
            raise SpecError(f"{where(src, k)}expected a table {{theta_deg, phi_deg, level_db}}")
        unknown = set(e) - {"theta_deg", "phi_deg", "level_db", "level_dbi"}
        if unknown:
            raise SpecError(
                f"{where(src, f'{k}.{sorted(unknown)[0]}')}unknown key (known: level_db, "
                "level_dbi, phi_deg, theta_deg)"
            )
        if ("level_db" in e) == ("level_dbi" in e):
            raise SpecError(
                f"{where(src, k)}give exactly one of level_db (relative to the beam's peak) "
                "or level_dbi (absolute gain)"
            )
        if "theta_deg" not in e:
            raise SpecError(f"{where(src, f'{k}.theta_deg')}missing (required)")
        t1, t2 = pair(e["theta_deg"], src, f"{k}.theta_deg", 0.0, 90.0)
        p1, p2 = pair(e.get("phi_deg", [0.0, 360.0]), src, f"{k}.phi_deg", -360.0, 720.0)
        if p2 - p1 > 360.0:
            raise SpecError(
                f"{where(src, f'{k}.phi_deg')}{e['phi_deg']!r}: spans more than 360 deg"
            )
        absolute = "level_dbi" in e
        name = "level_dbi" if absolute else "level_db"
        level = number(e[name], src, f"{k}.{name}", lo=-200, hi=100 if absolute else 0)
        out.append(
            MaskEntry(
                (math.radians(t1), math.radians(t2)),
                (math.radians(p1), math.radians(p2)),
                float(level),
                absolute,
            )
        )
    return tuple(out)


def swap_floor(p0, geff, inside, dmax: float, margin_db: float) -> np.ndarray:
    r"""The least amplitude a sample must have for a swap move to make it a candidate under a
    mask (:meth:`thinning.search.problem.ThinningProblem.evaluate_swaps`).

    A move switching w sites each way changes every sample's amplitude by at most
    dmax = 2w, so the moves' highest P·g is at least (a_top − dmax)²·g_top, and a sample j
    can come within the candidates' margin of it only if (a_j + dmax)²·g_j reaches that
    much less the margin:

    .. math::  a_j \ge \sqrt{(a_{top} - d)^2\, g_{top}\, 10^{-m/10} / g_j} - d .
    """
    pg = np.where(inside, p0 * geff, 0.0)
    top = int(np.argmax(pg))
    keep = max(0.0, math.sqrt(p0[top]) - dmax) ** 2 * geff[top] * 10 ** (-margin_db / 10)
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.sqrt(keep / geff) - dmax
