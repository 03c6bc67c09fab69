r"""Scan sets and operating bands, and where their sidelobes fall on the broadside pattern.

A design serves a *scan set* of beam directions w₀ = (u₀, v₀) (a cone about boresight, or an
azimuth-elevation sector with u₀ = cos e·sin a, v₀ = sin e) over a band of frequencies f, the
steering commanded at the design frequency f₀ (conventions.md, "Contract additions").

**Phase steering.** The phase shifter of element n applies −k₀ rₙ·w₀ whatever the frequency,
so at f, in the visible direction w (|w| ≤ 1), the array factor is

.. math::

    AF(w) = \sum_n a_n\, e^{j (k\, r_n\cdot w - k_0\, r_n\cdot w_0)}
          = AF_0(t),\qquad t = \frac{f}{f_0}\,w - w_0 ,

with AF₀ the broadside array factor at f₀. Every beam and frequency therefore reads the *same*
broadside pattern, over the disc of radius ρ = f/f₀ centred at −w₀; the main beam sits at
t = 0 for every one of them (its direction w = w₀·f₀/f squints with frequency: sin θ =
(f₀/f)·sin θ₀). **True time delay** applies −k rₙ·w₀ at every frequency:
t = (f/f₀)(w − w₀), the disc of radius ρ centred at −ρ·w₀, and no squint.

**The sidelobe region** is the union of those discs over the scan set S and the band
ρ ∈ [ρ_lo, ρ_hi]. Discs of one centre are nested, so for phase steering the union is the
Minkowski sum

.. math::  R = (-S) \oplus D(\rho_{hi}) = \{t : \operatorname{dist}(t, -S) \le \rho_{hi}\},

and for time delay, since ρ(−w₀ + d) with |w₀| ≤ 1, |d| ≤ 1 stays in (−S) ⊕ D(1) for ρ ≤ 1,
R = ρ_hi·((−S) ⊕ D(1)). A cone of half-angle θmax gives the centred disc of radius
ρ_hi + sin θmax (phase) or ρ_hi·(1 + sin θmax) (delay), the disc of conventions.md at f₀. A
sector gives a far smaller set than the cone that encloses it (tests/test_coverage.py).

**A set X of observation directions** (a mask entry) reaches the broadside pattern at

.. math::

    T(X) = \bigcup_{\rho,\,w_0} \big(\rho X - c_\rho w_0\big)
         = \begin{cases} \big(\textstyle\bigcup_\rho \rho X\big) \oplus (-S) & \text{phase}
           \\ \textstyle\bigcup_\rho \rho\,\big(X \oplus (-S)\big) & \text{delay}\end{cases}

(c_ρ = 1 for phase steering, ρ for time delay). :meth:`Coverage.image` builds it as a shapely
polygon: a polar rectangle r ∈ [r₁, r₂], φ ∈ [φ₁, φ₂] swept over ρ is the polar rectangle
[ρ_lo r₁, ρ_hi r₂] × [φ₁, φ₂]; a Minkowski sum with a convex piece K of −S is

.. math::  X \oplus K = (X + k_0) \cup \bigcup_{e \in \partial X} \operatorname{hull}(e + K)

(a segment from a point of X + K back to X + k₀ crosses ∂X + K), and a sweep over ρ of a
polygon Y is ρ_lo·Y ∪ ρ_hi·Y ∪ the quadrilaterals that its edges sweep. Every polygon is an
outer approximation within :data:`TOLERANCE` of the exact set (arcs drawn with their chords
outside the circle), so a limit is never applied short of where it belongs.
"""

from __future__ import annotations

import functools
import math
from dataclasses import dataclass

import numpy as np
import shapely
from shapely.geometry import MultiPoint, Polygon

from ..errors import SpecError, where

__all__ = [
    "STEERINGS",
    "TOLERANCE",
    "ScanSet",
    "Coverage",
    "polar_rectangle",
    "coverage_from_spec",
]

STEERINGS = ("phase", "delay")

#: Largest distance in direction cosines by which a polygon of a scan set, mask zone or
#: sidelobe region may stand outside the exact set (never inside it): a hundredth of a sample
#: spacing of a 100-wavelength aperture at 4× oversampling.
TOLERANCE = 1e-5

#: Quadrant segments of a shapely buffer: its arcs' vertices on the circle of radius
#: r / cos(π / (4·180)) stand at most 9.5e-6·r outside the exact circle.
_QUAD_SEGS = 180


def _arc_step(radius: float) -> float:
    """Angular step  [rad] whose chord stands at most :data:`TOLERANCE` from an arc."""
    if radius <= 0:
        return math.pi / 8
    return min(math.pi / 8, math.sqrt(8 * TOLERANCE / radius))


def _arc(radius: float, phi1: float, phi2: float, outward: bool) -> np.ndarray:
    """Points along an arc, drawn so that the polyline lies outside the circle (``outward``,
    vertices on radius r/cos(Δ/2)) or inside it (vertices on the circle)."""
    n = max(2, int(math.ceil((phi2 - phi1) / _arc_step(radius))) + 1)
    phi = np.linspace(phi1, phi2, n)
    r = radius / math.cos(0.5 * (phi2 - phi1) / (n - 1)) if outward else radius
    return np.column_stack([r * np.cos(phi), r * np.sin(phi)])


def polar_rectangle(r1: float, r2: float, phi1: float, phi2: float):
    """The set r₁ ≤ |w| ≤ r₂, φ₁ ≤ arg w ≤ φ₂ as a polygon (an outer approximation).

    Parameters
    ----------
    r1, r2 : float  [1]   radii in direction cosines (r₁ ≥ 0)
    phi1, phi2 : float  [rad]   φ₂ − φ₁ ≥ 2π is the whole annulus
    """
    r1, r2 = max(0.0, float(r1)), float(r2)
    if phi2 - phi1 >= 2 * math.pi - 1e-12:
        outer = _arc(r2, 0.0, 2 * math.pi, outward=True)[:-1]
        holes = [] if r1 <= 0 else [_arc(r1, 0.0, 2 * math.pi, outward=False)[:-1]]
        return Polygon(outer, holes)
    outer = _arc(r2, phi1, phi2, outward=True)
    if r1 <= 0:
        ring = np.vstack([[0.0, 0.0], outer])
    else:
        ring = np.vstack([outer, _arc(r1, phi2, phi1, outward=False)])
    poly = Polygon(ring)
    return poly if poly.is_valid else poly.buffer(0)


@dataclass(frozen=True)
class ScanSet:
    """The directions the beam is steered to: a cone or an azimuth-elevation sector.

    Attributes
    ----------
    kind : str   "cone" or "sector"
    max_angle : float  [rad]   half-angle of a cone
    azimuth, elevation : (float, float)  [rad]   limits of a sector; a beam at azimuth a and
        elevation e points at u₀ = cos e·sin a, v₀ = sin e
    """

    kind: str = "cone"
    max_angle: float = 0.0
    azimuth: tuple[float, float] = (0.0, 0.0)
    elevation: tuple[float, float] = (0.0, 0.0)

    @classmethod
    def cone(cls, max_angle: float) -> ScanSet:
        return cls("cone", float(max_angle))

    @classmethod
    def sector(cls, azimuth, elevation) -> ScanSet:
        a1, a2 = (float(x) for x in azimuth)
        e1, e2 = (float(x) for x in elevation)
        return cls("sector", 0.0, (a1, a2), (e1, e2))

    # -- the set of w₀ --------------------------------------------------------------------
    @property
    def max_sin(self) -> float:
        """Largest |w₀| over the set: sin of the half-angle of the cone that encloses it.

        For a sector |w₀|² = 1 − cos²e·cos²a, largest at its farthest corner.
        """
        if self.kind == "cone":
            return math.sin(self.max_angle)
        am = max(abs(a) for a in self.azimuth)
        em = max(abs(e) for e in self.elevation)
        return math.sqrt(max(0.0, 1.0 - (math.cos(am) * math.cos(em)) ** 2))

    @property
    def enclosing_angle(self) -> float:
        """Half-angle  [rad] of the smallest cone about boresight that holds the set."""
        return math.asin(min(1.0, self.max_sin))

    def contains(self, u, v) -> np.ndarray:
        """Which directions (u₀, v₀) belong to the set (a sector: sin e₁ ≤ v₀ ≤ sin e₂ and
        sin a₁ ≤ u₀/√(1 − v₀²) ≤ sin a₂)."""
        u = np.asarray(u, dtype=float)
        v = np.asarray(v, dtype=float)
        eps = 1e-12
        if self.kind == "cone":
            return u**2 + v**2 <= self.max_sin**2 * (1 + eps) + eps
        (a1, a2), (e1, e2) = self.azimuth, self.elevation
        c = np.sqrt(np.maximum(0.0, 1.0 - v**2))
        ok = (v >= math.sin(e1) - eps) & (v <= math.sin(e2) + eps)
        return ok & (u >= math.sin(a1) * c - eps) & (u <= math.sin(a2) * c + eps)

    def beams(self, n: int = 9) -> np.ndarray:
        """Beam directions spread over the set, its edge included: (m, 2) (u₀, v₀).

        A cone: the axis and ``n`` rings of 4n directions; a sector: an n × n grid in
        azimuth and elevation (corners included).
        """
        n = max(2, int(n))
        if self.kind == "cone":
            pts = [(0.0, 0.0)]
            if self.max_angle > 0:
                for th in np.linspace(self.max_angle / n, self.max_angle, n):
                    phi = np.arange(4 * n) * (2 * math.pi / (4 * n))
                    s = math.sin(th)
                    pts += list(zip(s * np.cos(phi), s * np.sin(phi), strict=True))
            return np.asarray(pts, dtype=float)
        a = np.linspace(*self.azimuth, n)
        e = np.linspace(*self.elevation, n)
        aa, ee = np.meshgrid(a, e)
        return np.column_stack([(np.cos(ee) * np.sin(aa)).ravel(), np.sin(ee).ravel()])

    def edge(self, n: int = 64) -> np.ndarray:
        """Directions along the set's edge (for the widest beam): (m, 2) (u₀, v₀)."""
        if self.kind == "cone":
            phi = np.arange(4 * n) * (2 * math.pi / (4 * n))
            s = self.max_sin
            return np.column_stack([s * np.cos(phi), s * np.sin(phi)])
        (a1, a2), (e1, e2) = self.azimuth, self.elevation
        a = np.linspace(a1, a2, n)
        e = np.linspace(e1, e2, n)
        side = [
            (a, np.full(n, e1)),
            (np.full(n, a2), e),
            (a[::-1], np.full(n, e2)),
            (np.full(n, a1), e[::-1]),
        ]
        pts = [np.column_stack([np.cos(ee) * np.sin(aa), np.sin(ee)]) for aa, ee in side]
        return np.vstack(pts)

    def _sector_curve(self, a: float, e1: float, e2: float) -> np.ndarray:
        """The edge of constant azimuth a from e₁ to e₂: (cos e·sin a, sin e), vertices close
        enough that a chord stands within :data:`TOLERANCE` of the curve."""
        n = max(2, int(math.ceil(abs(e2 - e1) / math.sqrt(8 * TOLERANCE))) + 1)
        e = np.linspace(e1, e2, n)
        return np.column_stack([np.cos(e) * math.sin(a), np.sin(e)])

    def convex_pieces(self) -> list[np.ndarray]:
        """Convex polygons (vertex arrays) whose union holds the set within TOLERANCE.

        A cone is one disc. A sector's edges of constant elevation are straight (v₀ = sin e)
        and its edges of constant azimuth are arcs of the ellipse u₀²/sin²a + v₀² = 1,
        which bulge outward when the sector spans a = 0 (the sector is then convex: one
        piece, the hull of its edge). When it lies on one side (0 < a₁ or a₂ < 0) the inner
        edge bulges inward; the sector is cut into bands of elevation, each replaced by its
        hull, which oversteps the inner edge by at most the sagitta of its chord.
        """
        if self.kind == "cone":
            pts = _arc(self.max_sin, 0.0, 2 * math.pi, outward=True)[:-1]
            return [pts]
        (a1, a2), (e1, e2) = self.azimuth, self.elevation
        if a1 <= 0.0 <= a2 or e1 == e2:
            ring = np.vstack([self._sector_curve(a2, e1, e2), self._sector_curve(a1, e2, e1)])
            return [ring]
        inner = a1 if a1 > 0 else a2
        # sagitta of a chord over Δe on the inner edge ≤ |sin a|·Δe²/8 (curvature ≤ 1)
        step = math.sqrt(8 * TOLERANCE / max(abs(math.sin(inner)), 1e-9))
        n = int(min(256, max(1, math.ceil((e2 - e1) / step))))
        edges = np.linspace(e1, e2, n + 1)
        pieces = []
        for lo, hi in zip(edges[:-1], edges[1:], strict=True):
            ring = np.vstack([self._sector_curve(a2, lo, hi), self._sector_curve(a1, hi, lo)])
            pieces.append(np.asarray(MultiPoint(ring).convex_hull.exterior.coords)[:-1])
        return pieces

    def describe(self) -> str:
        """ "cone 45°" or "sector azimuth −45° to 45°, elevation 0° to 20°"."""
        if self.kind == "cone":
            return f"cone {math.degrees(self.max_angle):g}°"
        a1, a2 = (math.degrees(a) for a in self.azimuth)
        e1, e2 = (math.degrees(e) for e in self.elevation)
        return f"sector azimuth {a1:g}° to {a2:g}°, elevation {e1:g}° to {e2:g}°"

    def to_dict(self) -> dict:
        """The set in degrees, as the spec gives it."""
        if self.kind == "cone":
            return {"kind": "cone", "max_deg": round(math.degrees(self.max_angle), 9)}
        return {
            "kind": "sector",
            "azimuth_deg": [round(math.degrees(a), 9) for a in self.azimuth],
            "elevation_deg": [round(math.degrees(e), 9) for e in self.elevation],
        }


def _angle_deg(a: np.ndarray, b: np.ndarray) -> np.ndarray:
    """Angle  [deg] between the directions of direction-cosine pairs a and b (…, 2); a point
    past the horizon (|w| > 1) is taken on it."""

    def unit(w):
        r = np.hypot(w[..., 0], w[..., 1])
        w = np.where((r > 1.0)[..., None], w / np.maximum(r, 1e-300)[..., None], w)
        z = np.sqrt(np.maximum(0.0, 1.0 - w[..., 0] ** 2 - w[..., 1] ** 2))
        return np.stack([w[..., 0], w[..., 1], z], axis=-1)

    c = np.clip(np.sum(unit(a) * unit(b), axis=-1), -1.0, 1.0)
    return np.degrees(np.arccos(c))


def _minkowski_convex(geom, piece: np.ndarray):
    """geom ⊕ K for a convex polygon K (vertex array), as the union of geom + k₀ and the
    hulls that K sweeps along every edge of geom (module docstring)."""
    parts = [shapely.affinity.translate(geom, float(piece[0, 0]), float(piece[0, 1]))]
    rings = []
    for poly in getattr(geom, "geoms", [geom]):
        rings.append(np.asarray(poly.exterior.coords))
        rings += [np.asarray(r.coords) for r in poly.interiors]
    k = piece[None, :, :]
    for ring in rings:
        a = ring[:-1, None, :] + k
        b = ring[1:, None, :] + k
        pts = np.concatenate([a, b], axis=1)  # (edges, 2·|K|, 2)
        parts.extend(shapely.convex_hull(shapely.multipoints(pts)))
    return shapely.union_all(parts)


def _sweep(geom, lo: float, hi: float):
    """⋃ ρ·geom over ρ ∈ [lo, hi]: the two ends and the quadrilaterals each edge sweeps."""
    if hi - lo <= 1e-15:
        return shapely.affinity.scale(geom, hi, hi, origin=(0, 0))
    parts = [
        shapely.affinity.scale(geom, lo, lo, origin=(0, 0)),
        shapely.affinity.scale(geom, hi, hi, origin=(0, 0)),
    ]
    for poly in getattr(geom, "geoms", [geom]):
        rings = [np.asarray(poly.exterior.coords)] + [np.asarray(r.coords) for r in poly.interiors]
        for ring in rings:
            a, b = ring[:-1], ring[1:]
            quads = np.stack([lo * a, lo * b, hi * b, hi * a], axis=1)
            parts.extend(shapely.convex_hull(shapely.multipoints(quads)))
    return shapely.union_all(parts)


@dataclass(frozen=True)
class Coverage:
    """A scan set over a band: every beam a design must serve.

    Attributes
    ----------
    scan : ScanSet
    frequency : float  [Hz]   the design frequency f₀, where the steering is set
    band : (float, float)  [Hz]   the band's edges (f₀ within them); (f₀, f₀) for one frequency
    steering : str   "phase" (phase shifters, set at f₀) or "delay" (true time delay)
    """

    scan: ScanSet
    frequency: float
    band: tuple[float, float] | None = None
    steering: str = "phase"

    @classmethod
    def cone(cls, max_angle: float, frequency: float) -> Coverage:
        return cls(ScanSet.cone(max_angle), float(frequency))

    @property
    def rho(self) -> tuple[float, float]:
        """(f_lo/f₀, f_hi/f₀)."""
        if self.band is None:
            return (1.0, 1.0)
        return (self.band[0] / self.frequency, self.band[1] / self.frequency)

    @property
    def frequencies(self) -> tuple[float, ...]:
        """The band's edges and f₀, lowest first (f₀ alone without a band)  [Hz]."""
        if self.band is None:
            return (self.frequency,)
        return tuple(sorted({self.band[0], self.frequency, self.band[1]}))

    @property
    def is_disc(self) -> bool:
        """The sidelobe region is a disc about the origin (a cone, at any band)."""
        return self.scan.kind == "cone"

    @property
    def reach(self) -> float:
        """Largest |t| of the sidelobe region  [1]."""
        lo, hi = self.rho
        s = self.scan.max_sin
        return hi + s if self.steering == "phase" else hi * (1.0 + s)

    @property
    def disc_radius(self) -> float | None:
        """Radius of the region when it is a disc about the origin, else None."""
        return self.reach if self.is_disc else None

    def beam_direction(self, w0, f: float) -> np.ndarray:
        """Where the beam commanded to ``w0`` points at frequency ``f``: w₀·f₀/f with phase
        steering (the squint sin θ = (f₀/f)·sin θ₀), w₀ with time delay."""
        w0 = np.asarray(w0, dtype=float)
        return w0 * (self.frequency / f) if self.steering == "phase" else w0

    def to_t(self, w, w0, f: float) -> np.ndarray:
        """The broadside-pattern coordinate t of direction w for the beam (w₀, f)."""
        rho = f / self.frequency
        w = np.asarray(w, dtype=float)
        w0 = np.asarray(w0, dtype=float)
        return rho * w - w0 if self.steering == "phase" else rho * (w - w0)

    def to_w(self, t, w0, f: float) -> np.ndarray:
        """The direction w that reads the broadside pattern at t for the beam (w₀, f)."""
        rho = f / self.frequency
        t = np.asarray(t, dtype=float)
        w0 = np.asarray(w0, dtype=float)
        return (t + w0) / rho if self.steering == "phase" else t / rho + w0

    # -- polygons ---------------------------------------------------------------------------
    def _plus_minus_scan(self, geom):
        """geom ⊕ (−S)."""
        if self.scan.kind == "cone":
            s = self.scan.max_sin
            if s <= 0:
                return geom
            return geom.buffer(s / math.cos(math.pi / (4 * _QUAD_SEGS)), quad_segs=_QUAD_SEGS)
        pieces = [-p for p in self.scan.convex_pieces()]
        return shapely.union_all([_minkowski_convex(geom, p) for p in pieces])

    def image(self, r1: float, r2: float, phi1: float, phi2: float):
        """T(X) of the polar rectangle X = [r₁, r₂] × [φ₁, φ₂] of observation directions
        (module docstring), as a shapely geometry in t (an outer approximation)."""
        lo, hi = self.rho
        if self.steering == "phase":
            swept = polar_rectangle(lo * r1, hi * r2, phi1, phi2)
            return self._plus_minus_scan(swept)
        return _sweep(self._plus_minus_scan(polar_rectangle(r1, r2, phi1, phi2)), lo, hi)

    def image_of(self, geom):
        """T(X) of any polygon X of observation directions (slower than :meth:`image`)."""
        lo, hi = self.rho
        if self.steering == "phase":
            return self._plus_minus_scan(_sweep(geom, lo, hi))
        return _sweep(self._plus_minus_scan(geom), lo, hi)

    def region_polygon(self):
        """The sidelobe region T(visible disc) as a shapely geometry (kept per coverage)."""
        return _region_polygon(self)

    # -- beamwidth over the scan set and band ------------------------------------------------
    def beamwidths(self, d_u, d_v=None, edge: int = 32, beams=None):
        """Half-power beamwidths  [deg] of the beams of the scan set's edge and centre at the
        band's edges and f₀, from the broadside pattern's half-power offsets.

        Every beam reads the same broadside pattern, at t = ρw − w₀ (phase) or ρ(w − w₀)
        (delay): its half-power points lie at w_b ± d/ρ, with w_b the beam's direction
        (:meth:`beam_direction`). The width along u is the angle between the directions
        (u_b + d₊/ρ, v_b) and (u_b − d₋/ρ, v_b) (both on the unit sphere; a point past the
        horizon is taken at it), which for a beam in the x-z plane is
        arcsin(u_b + d₊/ρ) − arcsin(u_b − d₋/ρ) (references.md row 8); along v likewise.

        Parameters
        ----------
        d_u, d_v : ((B,) array, (B,) array)  [1]   (d₊, d₋) along u and along v for B
            patterns; d_v None for a line array (no width across it)
        beams : (K, 3) array, optional   (u₀, v₀, f) of the beams (default: the scan set's
            edge and centre at the band's edges and f₀, those that stay visible)

        Returns
        -------
        widths : (B, K) array  [deg]   the wider of the two widths of each of K beams
        beams : (K, 3) array   (u₀, v₀, f [Hz]) of each beam
        """
        beams = self._hpbw_beams(edge) if beams is None else np.asarray(beams, dtype=float)
        rho = beams[:, 2] / self.frequency
        wb = beams[:, :2] / rho[:, None] if self.steering == "phase" else beams[:, :2]

        def width(dp, dm, axis):
            dp = np.asarray(dp, dtype=float)[:, None] / rho[None, :]
            dm = np.asarray(dm, dtype=float)[:, None] / rho[None, :]
            a = np.broadcast_to(wb[None, :, :], dp.shape + (2,)).copy()
            b = a.copy()
            a[..., axis] += dp
            b[..., axis] -= dm
            return _angle_deg(a, b)

        w = width(d_u[0], d_u[1], 0)
        if d_v is not None:
            w = np.maximum(w, width(d_v[0], d_v[1], 1))
        return w, beams

    def _hpbw_beams(self, edge: int) -> np.ndarray:
        """(u₀, v₀, f) of the beams of :meth:`beamwidths` that stay visible (kept)."""
        kept = self.__dict__.setdefault("_beams", {})
        if edge not in kept:
            pts = np.vstack([self.scan.edge(edge), self.scan.beams(3)])
            rows = []
            for f in self.frequencies:
                wb = self.beam_direction(pts, f)
                vis = np.hypot(wb[:, 0], wb[:, 1]) <= 1.0
                rows.append(np.column_stack([pts[vis], np.full(int(vis.sum()), f)]))
            kept[edge] = np.vstack(rows)
        return kept[edge]

    def describe(self) -> str:
        text = self.scan.describe()
        if self.band is not None:
            lo, hi = (f / 1e9 for f in self.band)
            f0 = self.frequency / 1e9
            text += f", {lo:g}–{hi:g} GHz ({self.steering} steering set at {f0:g} GHz)"
        return text


@functools.lru_cache(maxsize=16)
def _region_polygon(coverage: Coverage):
    return coverage.image(0.0, 1.0, 0.0, 2 * math.pi)


def coverage_from_spec(scan: dict, band, frequency: float, scan_deg: float, src, pair, choice):
    """The scan set (``[scan] max_deg``, or ``azimuth_deg`` and ``elevation_deg``) over the
    ``[band]`` of a spec, checked key by key (``pair``, ``choice``: the spec's checks of
    a [low, high] pair and of a choice, :mod:`thinning.spec`).

    Parameters
    ----------
    scan, band : dict   the tables as read (band None when absent)
    frequency : float  [Hz]   ``array.frequency_ghz``
    scan_deg : float  [deg]   ``scan.max_deg`` (checked)
    """
    if "azimuth_deg" in scan or "elevation_deg" in scan:
        if "max_deg" in scan:
            raise SpecError(
                f"{where(src, 'scan')}give max_deg (a cone) or azimuth_deg and elevation_deg "
                "(a sector), not both"
            )
        az = pair(scan.get("azimuth_deg", [0.0, 0.0]), src, "scan.azimuth_deg", -89.9, 89.9)
        el = pair(scan.get("elevation_deg", [0.0, 0.0]), src, "scan.elevation_deg", -89.9, 89.9)
        scan_set = ScanSet.sector(np.radians(az), np.radians(el))
    else:
        scan_set = ScanSet.cone(math.radians(scan_deg))
    if band is None:
        return Coverage(scan_set, frequency)
    if "ghz" not in band:
        raise SpecError(f"{where(src, 'band.ghz')}missing (required in [band])")
    lo, hi = pair(band["ghz"], src, "band.ghz", 1e-9, 1e6)
    f0 = frequency / 1e9
    if not lo * (1 - 1e-12) <= f0 <= hi * (1 + 1e-12):
        raise SpecError(
            f"{where(src, 'band.ghz')}{band['ghz']!r}: the band must hold "
            f"array.frequency_ghz ({f0:g}), where the steering is set"
        )
    steering = choice(band.get("steering", "phase"), STEERINGS, src, "band.steering")
    return Coverage(scan_set, frequency, (lo * 1e9, hi * 1e9), steering)
