r"""Figures of a layout over its scan set and band: the mask margin, the widest beam, the gain.

The search judges a mask on the samples of the broadside pattern, each with the lowest limit
of the directions it stands for (:mod:`thinning.engine.mask`). A reported margin must not
depend on where the samples fall, so :func:`mask_figure` takes the worst excess over every
limit zone Z_j (a polygon of the broadside pattern, :meth:`thinning.engine.mask.
SidelobeLimits.zones`) on the continuous pattern:

.. math::

    \max_{w_0, f, w}\,[P(t(w)) - L(w)]
        = \max_j \Big[\max_{t \in Z_j \setminus \mathrm{MB}} P(t) - \ell_j\Big],

and the maximum of P over a closed zone is at a lobe inside it or on its edge. Around every
sample whose pattern comes within :data:`POLISH_DB` of the worst excess (judged with the
tightest limit within one sample, so that a zone edge passing between samples is not
missed), each direction it stands for is climbed on the exact pattern (a lobe inside the
zone), and the zone's edge within 1.5 samples is walked on the exact pattern, densely, then
refined by golden sections along it (a lobe cut by the edge). The beam and frequency that
meet the worst point are found among the beams of the scan set and the band, as is the
direction it is seen in (θ, φ).
"""

from __future__ import annotations

import math

import numpy as np
import shapely

from ..engine.coverage import Coverage
from ..engine.exact import refine_peaks
from ..engine.mask import RegionMap, SidelobeLimits
from ..engine.metrics import half_power_offsets

__all__ = [
    "POLISH_DB",
    "polished_max",
    "mask_figure",
    "realising_beam",
    "widest_beam",
    "gain_figures",
    "scan_set_keys",
]

#: Samples whose pattern (with the tightest limit within a sample) comes within this many dB
#: of the worst excess are polished on the exact pattern.
POLISH_DB = 1.5
#: ... at most this many of them (the highest first).
POLISH_CAP = 48
#: Points per sample spacing along a zone edge walked on the exact pattern.
EDGE_DENSITY = 16


def _r(x, digits=6):
    return None if x is None or not np.isfinite(x) else round(float(x), digits)


def scan_set_keys(coverage: Coverage) -> dict:
    """``scan_set``, ``band_ghz``, ``steering`` of the figures."""
    return {
        "scan_set": coverage.scan.to_dict(),
        "band_ghz": None if coverage.band is None else [round(f / 1e9, 9) for f in coverage.band],
        "steering": coverage.steering,
    }


# -- the mask ---------------------------------------------------------------------------------
def _max3(a2d: np.ndarray, linear: bool) -> np.ndarray:
    """3 × 3 (3 × 1 for one row) maximum filter, wrapping round the grid."""
    out = a2d.copy()
    shifts = (
        [(0, -1), (0, 1)]
        if linear
        else [(dr, dc) for dr in (-1, 0, 1) for dc in (-1, 0, 1) if dr or dc]
    )
    for dr, dc in shifts:
        out = np.maximum(out, np.roll(a2d, (dr, dc), axis=(0, 1)))
    return out


def _golden(f, a: float, b: float, iterations: int = 30) -> tuple[float, float]:
    """Maximum of a unimodal f on [a, b] by golden sections: (x, f(x))."""
    g = (math.sqrt(5) - 1) / 2
    c, d = b - g * (b - a), a + g * (b - a)
    fc, fd = f(c), f(d)
    for _ in range(iterations):
        if fc >= fd:
            b, d, fd = d, c, fc
            c = b - g * (b - a)
            fc = f(c)
        else:
            a, c, fc = c, d, fd
            d = a + g * (b - a)
            fd = f(d)
    return (c, fc) if fc >= fd else (d, fd)


class _Pattern:
    """The exact normalised pattern at points, and whether a point is in the main beam."""

    def __init__(self, exact, detail, region, linear):
        self.exact = exact
        self.linear = linear
        g = detail.grid
        self.grid = g
        self.mb = (region.weight > 0) & (detail.sidelobe_weight < region.weight)
        self.mb_own = self.mb & (region.w0 > 0)

    def __call__(self, u, v) -> np.ndarray:
        u = np.atleast_1d(np.asarray(u, dtype=float))
        v = np.zeros_like(u) if self.linear else np.atleast_1d(np.asarray(v, dtype=float))
        return self.exact.evaluate(u, v, derivatives=False)

    def in_main_beam(self, u, v) -> np.ndarray:
        """The nearest sample of the principal direction t is in the main beam."""
        g = self.grid
        u = np.atleast_1d(np.asarray(u, dtype=float))
        v = np.atleast_1d(np.asarray(v, dtype=float))
        c = np.rint(u / g.du).astype(np.int64)
        r = np.zeros_like(c) if self.linear or g.dv == 0 else np.rint(v / g.dv).astype(np.int64)
        flip = (c < 0) & (not g.full)
        c, r = np.where(flip, -c, c), np.where(flip, -r, r)
        ok = (np.abs(c) <= g.max_col) & (np.abs(r) <= max(g.max_row, 0))
        flat = g.flat(np.where(ok, r, 0), np.where(ok, c, 0))
        return ok & self.mb_own[flat]


def _edge_points(zone, t, half, linear):
    """Points of the zone's edge within ``half`` = (hu, hv) of t, EDGE_DENSITY per sample,
    with each point's neighbours along the edge (for the golden refinement)."""
    hu, hv = half
    if linear:
        pts = []
        for part in getattr(zone, "geoms", [zone]):
            x0, _, x1, _ = part.bounds
            pts += [x for x in (x0, x1) if abs(x - t[0]) <= hu]
        return [(np.array([[x, 0.0]]), None) for x in pts]
    box = shapely.box(t[0] - hu, t[1] - hv, t[0] + hu, t[1] + hv)
    edge = zone.boundary.intersection(box)
    out = []
    for line in getattr(edge, "geoms", [edge]):
        if line.is_empty or line.geom_type not in ("LineString", "LinearRing"):
            continue
        n = max(2, int(math.ceil(line.length / min(hu, hv) * 1.5 * EDGE_DENSITY)) + 1)
        d = np.linspace(0.0, line.length, n)
        pts = shapely.get_coordinates(shapely.line_interpolate_point(line, d))
        out.append((pts, (line, d)))
    return out


def _polish(pat: _Pattern, zones, t, step, linear, coverage_map) -> tuple[float, tuple, float]:
    """The highest P·g near direction t over the zones within 1.5 samples: (P·g, point,
    zone level)."""
    du, dv = step
    half = (1.5 * du, 1.5 * (dv if dv > 0 else du))
    best = (0.0, (float(t[0]), float(t[1])), math.nan)
    pt = shapely.Point(float(t[0]), float(t[1]))
    for level, zone in zones:
        g = 10 ** (-level / 10)
        if linear:
            near = any(
                part.bounds[0] - half[0] <= t[0] <= part.bounds[2] + half[0]
                for part in getattr(zone, "geoms", [zone])
            )
        else:
            near = zone.distance(pt) <= max(half)
        if not near:
            continue

        def inside(u, v, zone=zone):
            u = np.atleast_1d(u)
            v = np.atleast_1d(v)
            if linear:
                from ..engine.mask import _in_projection

                ok = _in_projection(zone, u)
            else:
                ok = shapely.contains_xy(zone, u, v) | shapely.intersects_xy(zone.boundary, u, v)
            return ok & ~pat.in_main_beam(u, v)

        # a lobe inside the zone, climbed from the sample
        p, u, v = refine_peaks(
            pat.exact,
            np.array([t[0]]),
            np.array([0.0 if linear else t[1]]),
            (du, dv),
            coverage_map.reach,
            linear=linear,
            box=np.array([1.0]),
            project=False,
        )
        for pp, uu, vv in ((p[0], u[0], v[0]), (pat(t[0], t[1])[0], t[0], t[1])):
            if inside(uu, vv)[0] and pp * g > best[0]:
                best = (pp * g, (float(uu), float(0.0 if linear else vv)), level)
        # a lobe cut by the zone's edge
        for pts, line in _edge_points(zone, t, half, linear):
            keep = ~pat.in_main_beam(pts[:, 0], pts[:, 1])
            if not keep.any():
                continue
            vals = np.where(keep, pat(pts[:, 0], pts[:, 1]), 0.0)
            i = int(np.argmax(vals))
            val, at = float(vals[i]), pts[i]
            if line is not None and len(pts) > 2:
                geom, d = line
                a, b = d[max(i - 1, 0)], d[min(i + 1, len(d) - 1)]

                def f(s, geom=geom):
                    q = shapely.get_coordinates(shapely.line_interpolate_point(geom, s))[0]
                    return float(pat(q[0], q[1])[0])

                s_best, v_best = _golden(f, a, b)
                if v_best > val:
                    val = v_best
                    at = shapely.get_coordinates(shapely.line_interpolate_point(geom, s_best))[0]
            if val * g > best[0]:
                best = (val * g, (float(at[0]), float(at[1])), level)
    return best


def polished_max(engine, grid, exact, zones, linear, detail=None):
    """max over the zones of P·g on the continuous pattern (module docstring).

    Parameters
    ----------
    engine : a pattern engine whose region holds the zones (its samples' g, their limits)
    grid : excitation grid (FFT engine) or None (direct engine)
    exact : its exact evaluator
    zones : list of (level [dB], polygon in t)   g = 10^{−level/10} in each
    linear : bool
    detail : the engine's detail of the layout, when already known

    Returns
    -------
    (value, point, level, sampled) : the highest P·g, where (t) and in which zone's level
        (point None when no sample came near), and the engine's own sampled figure
    """
    region = engine.region
    if detail is None:
        detail = engine.detail(grid) if grid is not None else engine.detail()
    sampled = detail.psl
    pat = _Pattern(exact, detail, region, linear)
    g = detail.grid
    removed = region.weight - detail.sidelobe_weight
    geff = np.where(removed > 0, region.galias, region.gain)
    geff = np.where(detail.sidelobe_weight > 0, geff, 0.0)
    near = _max3(geff.reshape(g.nr, g.nc), linear or g.nr == 1).ravel()
    score = detail.power * near
    thr = sampled * 10 ** (-POLISH_DB / 10)
    cand = np.flatnonzero(score >= thr)
    cand = cand[np.argsort(-score[cand])][:POLISH_CAP]
    rmap = region.shape
    best = (sampled, None, math.nan)
    tops = []
    for flat in cand:
        s, c = divmod(int(flat), g.nc)
        u0, v0 = g.signed_cols[c] * g.du, g.signed_rows[s] * g.dv
        dirs = _directions_of(g, u0, v0, rmap.reach)
        for uu, vv in dirs:
            if not rmap.contains(np.array([uu]), np.array([vv]), linear)[0]:
                continue
            val, at, level = _polish(pat, zones, (uu, vv), (g.du, g.dv), linear, rmap)
            tops.append((val, at, level))
    if tops:
        best = max(tops, key=lambda x: x[0])
    return best + (sampled,)


def mask_figure(engine, grid, exact, coverage: Coverage, limits: SidelobeLimits, linear):
    """The worst excess of a layout's pattern over the mask, on the continuous pattern.

    Parameters
    ----------
    engine : a pattern engine built with ``RegionMap(coverage, limits)`` at f₀
    grid : excitation grid (FFT engine) or None (direct engine)
    exact : its exact evaluator
    linear : bool

    Returns
    -------
    dict
        ``margin_db`` (limit − level at the worst point: positive = met with room),
        ``level_db`` (the pattern there, relative to its beam's peak), ``limit_db``,
        ``sampled_margin_db`` (the search's figure: per-sample limits), ``t_uv`` (the point
        of the broadside pattern), and the beam that meets it (:func:`realising_beam`).
    """
    val, at, level, sampled = polished_max(engine, grid, exact, limits.zones(coverage), linear)
    if at is None:  # nothing polished: the search's figure and its sample
        return {
            "margin_db": _r(-10 * math.log10(sampled)) if sampled > 0 else None,
            "sampled_margin_db": _r(-10 * math.log10(sampled)) if sampled > 0 else None,
        }
    out = {
        "margin_db": _r(-10 * math.log10(val)),
        "level_db": _r(level + 10 * math.log10(val)),
        "limit_db": _r(level),
        "sampled_margin_db": _r(-10 * math.log10(sampled)) if sampled > 0 else None,
        "t_uv": [_r(at[0]), _r(at[1])],
    }
    out.update(realising_beam(coverage, limits, at, level, linear))
    return out


def _directions_of(g, u0, v0, reach):
    """The directions (u, v) within ``reach`` that sample (u0, v0) stands for: its aliases
    on a periodic grid, and their mirrors (−u, −v) on a half plane."""
    pts = [(u0, v0)]
    if g.periodic:
        tu, tv = g.period
        n_u = int(math.ceil(reach / tu)) + 1
        n_v = 0 if tv is None else int(math.ceil(reach / tv)) + 1
        pts = [
            (u0 + p * tu, v0 + (0.0 if tv is None else q * tv))
            for p in range(-n_u, n_u + 1)
            for q in range(-n_v, n_v + 1)
        ]
    if not g.full and u0 > 0:
        pts += [(-u, -v) for u, v in pts]
    return [(u, v) for u, v in pts if math.hypot(u, v) <= reach * (1 + 1e-9)]


def realising_beam(
    coverage: Coverage, limits: SidelobeLimits, t, level: float, linear: bool = False
) -> dict:
    """A beam (w₀, f) and the direction w in which it sees the broadside point t under the
    tightest limit: among the scan set's beams (a fine grid) and frequencies across the band
    (for a line array, whose pattern depends on u alone, over every v of the direction too).

    Returns
    -------
    dict   ``beam`` (u0, v0, azimuth_deg, elevation_deg, theta_deg, phi_deg),
           ``frequency_ghz``, ``direction`` (u, v, theta_deg, phi_deg), ``beam_limit_db``
    """
    w0 = np.vstack([coverage.scan.beams(41), coverage.scan.edge(128)])
    freqs = (
        [coverage.frequency]
        if coverage.band is None
        else sorted(set(np.linspace(*coverage.band, 17)) | {coverage.frequency})
    )
    best = None
    t = np.asarray(t, dtype=float)
    beams = w0
    for f in freqs:
        w0 = beams
        w = coverage.to_w(t[None, :], w0, f)
        if linear:  # every direction of the cone u = const holds the same pattern value
            u = np.repeat(w[:, 0], 65)
            v = np.tile(np.linspace(-1, 1, 65), len(w)) * np.sqrt(np.maximum(0, 1 - u**2))
            w0 = np.repeat(w0, 65, axis=0)
            w = np.column_stack([u, v])
        vis = np.hypot(w[:, 0], w[:, 1]) <= 1.0
        if not vis.any():
            continue
        lim = limits.at(w[vis, 0], w[vis, 1])
        i = int(np.argmin(lim))
        key = (float(lim[i]), float(np.hypot(*w0[vis][i])))
        if best is None or key < best[0]:
            best = (key, w0[vis][i], f, w[vis][i])
    if best is None:
        return {}
    (lim, _), b, f, w = best
    s = math.hypot(*w)
    sb = math.hypot(*b)
    return {
        "beam": {
            "u0": _r(b[0]),
            "v0": _r(b[1]),
            "azimuth_deg": _r(
                math.degrees(
                    math.asin(
                        max(-1.0, min(1.0, b[0] / max(math.sqrt(max(0.0, 1 - b[1] ** 2)), 1e-300)))
                    )
                )
            ),
            "elevation_deg": _r(math.degrees(math.asin(max(-1.0, min(1.0, b[1]))))),
            "theta_deg": _r(math.degrees(math.asin(min(1.0, sb)))),
            "phi_deg": _r(math.degrees(math.atan2(b[1], b[0])) % 360.0),
        },
        "frequency_ghz": _r(f / 1e9, 9),
        "direction": {
            "u": _r(w[0]),
            "v": _r(w[1]),
            "theta_deg": _r(math.degrees(math.asin(min(1.0, s)))),
            "phi_deg": _r(math.degrees(math.atan2(w[1], w[0])) % 360.0),
        },
        "beam_limit_db": _r(lim),
        "zone_limit_db": _r(level),
    }


# -- beamwidth and gain -------------------------------------------------------------------------
def widest_beam(exact, step, linear: bool, coverage: Coverage, d_u=None, d_v=None) -> dict:
    """The widest half-power beamwidth over the scan set's edge and centre at the band's
    edges and f₀ (:meth:`thinning.engine.coverage.Coverage.beamwidths`), and its beam.
    ``d_u``, ``d_v``: the broadside half-power offsets when already known."""
    du, dv = step
    if d_u is None:
        d_u = half_power_offsets(exact, (1.0, 0.0), 0.5 * du)
    if d_v is None and not linear:
        d_v = half_power_offsets(exact, (0.0, 1.0), 0.5 * dv)
    if linear:
        d_v = None
    if not all(math.isfinite(x) for x in d_u + (d_v or (0.0,))):
        return {"hpbw_widest_deg": None}
    widths, beams = coverage.beamwidths(
        (np.array([d_u[0]]), np.array([d_u[1]])),
        None if d_v is None else (np.array([d_v[0]]), np.array([d_v[1]])),
    )
    if widths.size == 0:
        return {"hpbw_widest_deg": None}
    k = int(np.argmax(widths[0]))
    u0, v0, f = beams[k]
    return {
        "hpbw_widest_deg": _r(widths[0, k], 4),
        "hpbw_widest_beam": {
            "u0": _r(u0),
            "v0": _r(v0),
            "theta_deg": _r(math.degrees(math.asin(min(1.0, math.hypot(u0, v0))))),
            "phi_deg": _r(math.degrees(math.atan2(v0, u0)) % 360.0),
            "frequency_ghz": _r(f / 1e9, 9),
        },
    }


def gain_figures(element, weights, coverage: Coverage) -> dict:
    """Gain with an embedded element pattern: element gain plus array gain at broadside,
    G = g(0) + 10·log₁₀ N_eff  [dBi] (N_eff = (Σa)²/Σa²), and the largest scan loss over the
    scan set's edge, g(0) − g(w₀) (positive)."""
    a = np.asarray(weights, dtype=float)
    n_eff = float(a.sum()) ** 2 / float((a**2).sum())
    g0 = float(element.gain_dbi(0.0, 0.0))
    edge = coverage.scan.edge(64)
    ge = element.gain_dbi(edge[:, 0], edge[:, 1]) if coverage.scan.max_sin > 0 else np.array([g0])
    return {
        "gain_dbi": _r(g0 + 10 * math.log10(n_eff)),
        "gain_scan_min_dbi": _r(float(ge.min()) + 10 * math.log10(n_eff)),
        "scan_loss_max_db": _r(g0 - float(ge.min())),
    }


def region_map(coverage: Coverage | None, limits: SidelobeLimits | None = None):
    """The RegionMap of a coverage (None for the plain cone at one frequency, no mask)."""
    if coverage is None:
        return None
    if coverage.is_disc and coverage.band is None and (limits is None or not limits.any):
        return None
    return RegionMap(coverage, limits)
