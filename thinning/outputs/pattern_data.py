"""The data behind the pattern figures, as plain arrays (no matplotlib).

* :func:`uv_power_map`: the normalised power |AF|²/(Σa)² on a dense u-v grid. On a lattice
  it is one zero-padded 2-D FFT of the excitation, read periodically; off any lattice it is
  the exact sum (:mod:`thinning.engine.exact`) on a regular grid.
* :func:`principal_cuts`: the exact pattern along v = 0 (x-z plane) and u = 0 (y-z plane)
  against the angle θ from boresight.
* :func:`main_beam_radius`: the main beam's first-null radius along rays of a pattern.
* :func:`scan_psl_table`: the worst sidelobe of the sampled pattern for beams steered across
  the scan cone.

Powers are in dB relative to the beam peak and clipped at a floor; array-factor figures
(isotropic elements), as PSL and ASL are in conventions.md.
"""

from __future__ import annotations

import math

import numpy as np
import scipy.fft

from ..analysis.score import layout_engine
from ..geometry.layout import Layout

__all__ = ["FLOOR_DB", "uv_power_map", "principal_cuts", "main_beam_radius", "scan_psl_table"]

#: Default display floor of the pattern figures  [dB].
FLOOR_DB = -60.0

#: Floor of the pattern data (keeps exact nulls finite in dB)  [dB].
DATA_FLOOR_DB = -150.0

#: Largest direct (off-lattice) u-v grid per axis: its cost is N elements × points².
MAX_DIRECT_POINTS = 601

#: Rays along which the main-beam edge (first null) is located.
MAIN_BEAM_RAYS = 120

#: Above this many grid sites the u-v map is taken at the engine's 4× sampling in single
#: precision (at 262,000 sites the 8× map would be 42 million samples), the table of the worst
#: sidelobe across the scan cone reads the highest samples first, and the map is drawn from
#: the maxima of blocks of samples.
LARGE_MAP = 1 << 16
#: Highest samples :func:`scan_psl_table` tries first.
SCAN_TOP = 200_000
#: Most samples per axis the u-v map figure draws (blocks of samples shown by their maximum).
MAP_PIXELS = 1200


def _db(p, floor_db=DATA_FLOOR_DB):
    with np.errstate(divide="ignore"):
        out = np.maximum(p, 0.0)
        out = np.log10(out, out=out) if out.dtype == np.float32 else np.log10(out)
        out *= 10.0
        return np.maximum(out, floor_db, out=out)


def _extent_of(extent, scan_max):
    return float(extent) if extent is not None else 1.0 + math.sin(float(scan_max))


def uv_power_map(
    layout: Layout,
    wavelength: float,
    extent: float | None = None,
    n: int = 301,
    *,
    scan_max: float = 0.0,
    oversampling: float = 8.0,
    floor_db: float = DATA_FLOOR_DB,
):
    """Normalised power pattern |AF(u, v)|²/(Σa)² on a regular grid over [−extent, extent]².

    On a lattice (the layout fits a rectangular index grid of pitch (gx, gy), a triangular
    lattice as a checkerboard) the array factor at the samples u = c·du, v = r·dv with
    du = λ/(gx·Pc), dv = λ/(gy·Pr) is a term of the zero-padded DFT F of the excitation:

    .. math::

        AF(c\\,du, r\\,dv) = \\sum_{m,n} a_{mn}\\, e^{+2\\pi j (n c / P_c + m r / P_r)}
                         = \\overline{F[r, c]}

    for real weights, so |AF| = |F| (no mirror). The pattern is periodic with periods
    λ/gx in u and λ/gy in v, so the samples over the extent are read from F with indices
    taken modulo (Pr, Pc); this is the full-plane transform shifted and tiled. Off any
    lattice the exact sum is evaluated on a grid of ``n`` (or more, up to
    :data:`MAX_DIRECT_POINTS`) points per axis.

    Parameters
    ----------
    layout : Layout
    wavelength : float  [m]
    extent : float, optional  [1]
        Half-width of the u-v square; default 1 + sin θmax (the sidelobe disc of the cone).
    n : int
        Least number of samples per axis across the square.
    scan_max : float  [rad]
        Half-angle of the scan cone (for the default extent).
    oversampling : float
        Least number of samples per λ/L (L the array's extent along the axis); 8 keeps a
        lobe within ≈0.2 dB per axis of its highest sample.
    floor_db : float  [dB]
        Values below are set to it (keeps nulls finite).

    Returns
    -------
    u : (nu,) array  [1]
    v : (nv,) array or None  [1]
        None for a linear array (the pattern depends on u alone).
    p_db : (nv, nu) array, or (nu,) for a linear array  [dB]
        Rows along v, columns along u; 0 dB at the beam peak (u, v) = (0, 0).
    """
    ext = _extent_of(extent, scan_max)
    if not (math.isfinite(ext) and ext > 0):
        raise ValueError(f"uv_power_map: extent = {extent!r} must be a finite number > 0")
    engine, grid, exact, fit = layout_engine(layout, wavelength, scan_max)
    n = max(int(n), 3)
    if grid is not None:
        rows, cols = grid.shape
        gx, gy = engine.pitch
        if rows * cols > LARGE_MAP:  # the engine's 4× samples, in single precision
            oversampling = min(oversampling, 4.0)
            grid = grid.astype(np.float32)

        def axis(pad, size, period):
            """Transform length (≥ the engine's, ≥ n samples over ±extent), the sample
            indices within ±extent, and their direction cosines."""
            length = max(
                pad, math.ceil(oversampling * size), math.ceil((n - 1) * period / (2 * ext))
            )
            length = scipy.fft.next_fast_len(int(length))
            d = period / length
            q = np.arange(-math.floor(ext / d + 1e-9), math.floor(ext / d + 1e-9) + 1)
            return length, q, q * d

        pc, qu, u = axis(engine.pad[1], cols, wavelength / gx)
        if fit.linear:
            f = scipy.fft.fft(grid[0], n=pc)
            p = (f.real**2 + f.imag**2) / float(grid.sum()) ** 2
            return u, None, _db(p[qu % pc], floor_db)
        pr, qv, v = axis(engine.pad[0], rows, wavelength / gy)
        f = scipy.fft.fft2(grid, s=(pr, pc), workers=-1)
        p = f.real**2 + f.imag**2
        del f
        p = p[np.ix_(qv % pr, qu % pc)] / np.float32(float(grid.sum()) ** 2)
        return u, v, _db(p, floor_db)

    # off any lattice: the exact sum on a regular grid (an odd count keeps u = 0 a sample)
    def count(span):
        need = math.ceil(2 * ext * oversampling * max(span, wavelength / 2) / wavelength) + 1
        m = max(n, min(need, MAX_DIRECT_POINTS))
        return m + (1 - m % 2)

    u = np.linspace(-ext, ext, count(np.ptp(layout.x)))
    if layout.is_linear:
        p = exact.evaluate(u, np.zeros_like(u), derivatives=False)
        return u, None, _db(p, floor_db)
    v = np.linspace(-ext, ext, count(np.ptp(layout.y)))
    uu, vv = np.meshgrid(u, v)
    p = np.empty(uu.shape)
    rows_per = max(1, 65536 // u.size)
    for s in range(0, v.size, rows_per):
        p[s : s + rows_per] = exact.evaluate(
            uu[s : s + rows_per].ravel(), vv[s : s + rows_per].ravel(), derivatives=False
        ).reshape(-1, u.size)
    return u, v, _db(p, floor_db)


def _line_power(weights, phase) -> np.ndarray:
    """|Σ_c w_c e^{j c φ}|² / (Σ w)² at each phase step φ  [1] (Horner's rule)."""
    z = np.exp(1j * np.asarray(phase, dtype=float))
    acc = np.zeros(z.size, dtype=np.complex128)
    for w in np.asarray(weights, dtype=float)[::-1]:
        acc *= z
        acc += w
    return (acc.real**2 + acc.imag**2) / float(np.sum(weights)) ** 2


def principal_cuts(layout: Layout, wavelength: float, n: int | None = None) -> dict:
    """The exact pattern in the principal planes against θ.

    Parameters
    ----------
    layout : Layout
    wavelength : float  [m]
    n : int, optional
        Samples over −90° … 90°; by default about 60 per lobe at broadside (at least 1801).

    Returns
    -------
    dict
        ``theta_deg`` (n,) [deg]; ``cuts``: {"x-z": p_db, "y-z": p_db} (one entry, "x-z", for
        a linear array), each (n,) [dB] of |AF|²/(Σa)² with u = sin θ, v = 0 (x-z plane) or
        u = 0, v = sin θ (y-z plane), unclipped down to −150 dB.
    """
    _, grid, exact, fit = layout_engine(layout, wavelength, 0.0)
    span = max(float(np.ptp(layout.x)), float(np.ptp(layout.y)), wavelength / 2)
    if n is None:
        n = int(min(max(1801, 60 * math.pi * span / wavelength), 40001))
    n += 1 - n % 2
    theta = np.linspace(-90.0, 90.0, n)
    s = np.sin(np.radians(theta))
    zero = np.zeros_like(s)
    if grid is not None and grid.shape[0] > 1:
        # on a grid each cut is the pattern of a projection (column or row sums), summed by
        # Horner's rule in the phasor of one pitch: O(C) products per angle, no exponentials
        k = 2 * math.pi / wavelength
        cuts = {
            "x-z": _db(_line_power(grid.sum(axis=0), k * fit.pitch[0] * s)),
            "y-z": _db(_line_power(grid.sum(axis=1), k * fit.pitch[1] * s)),
        }
        return {"theta_deg": theta, "cuts": cuts}
    cuts = {"x-z": _db(exact.evaluate(s, zero, derivatives=False))}
    if not layout.is_linear:
        cuts["y-z"] = _db(exact.evaluate(zero, s, derivatives=False))
    return {"theta_deg": theta, "cuts": cuts}


def main_beam_radius(exact, step: float, linear: bool, limit: float, rays: int = MAIN_BEAM_RAYS):
    """Distance from the beam peak to the first null along rays, from the exact pattern.

    Marches outward along each ray in steps of step/4 and stops at the first sample after
    which the pattern rises (conventions.md, "Main-beam region").

    Parameters
    ----------
    exact : GridExact or PointExact
    step : float  [1]   sample spacing of the pattern grid (sets the marching step)
    linear : bool       rays along ±u only
    limit : float  [1]  largest radius searched (a ray without a null gets this)
    rays : int

    Returns
    -------
    psi : (K,) array  [rad]   ray directions from the +u axis
    radius : (K,) array  [1]
    """
    psi = np.array([0.0, math.pi]) if linear else np.arange(rays) * (2 * math.pi / rays)
    cu, cv = np.cos(psi), (np.zeros_like(psi) if linear else np.sin(psi))
    dr = step / 4.0
    j = 64
    while True:
        r = np.arange(j + 1) * dr
        p = exact.evaluate(np.outer(cu, r).ravel(), np.outer(cv, r).ravel(), derivatives=False)
        p = p.reshape(psi.size, j + 1)
        rising = p[:, 1:] > p[:, :-1] * (1 + 1e-12)
        found = rising.any(axis=1)
        if found.all() or r[-1] >= limit:
            break
        j *= 2
    radius = np.where(found, np.argmax(rising, axis=1) * dr, limit)
    return psi, np.minimum(radius, limit)


def scan_psl_table(
    layout: Layout,
    wavelength: float,
    scan_max: float,
    steps: int = 11,
    *,
    phis_deg=(0.0, 45.0, 90.0),
    uv_map=None,
) -> dict:
    """Worst sidelobe of the sampled pattern for beams steered across the scan cone.

    A beam steered to (u₀, v₀) = sin θ₀ (cos φ, sin φ) has the pattern AF(u − u₀, v − v₀)
    (phase steering, conventions.md). Its sidelobe region is the visible disc
    (u, v)² ≤ 1, i.e. the disc of radius 1 centred on (−u₀, −v₀) in the coordinates of the
    broadside pattern, less the broadside main beam (out to the first null along each ray,
    :func:`main_beam_radius`). The maximum is taken over the samples of
    :func:`uv_power_map` and is not refined between samples, so it can be slightly low.

    Parameters
    ----------
    layout : Layout
    wavelength : float  [m]
    scan_max : float  [rad]
    steps : int
        Scan angles θ₀ from 0 to θmax, ends included (one at θmax = 0).
    phis_deg : sequence of float  [deg]
        Scan planes φ; a linear array is scanned in φ = 0 only.
    uv_map : (u, v, p_db), optional
        A map from :func:`uv_power_map` covering at least 1 + sin θmax, to reuse.

    Returns
    -------
    dict
        ``theta_deg`` (K,) [deg], ``phi_deg`` (F,) [deg], ``psl_db`` (K, F) [dB],
        ``psl_uv`` (K, F, 2) [1] (direction of that lobe, steered frame), ``worst_db`` (K,)
        [dB] (worst over the planes), ``sampled`` True.
    """
    scan_max = float(scan_max)
    need = 1.0 + math.sin(scan_max)
    if uv_map is None or np.max(np.abs(uv_map[0])) < need - 1e-6:
        uv_map = uv_power_map(layout, wavelength, need, scan_max=scan_max)
    u, v, p_db = uv_map
    engine, _, exact, _ = layout_engine(layout, wavelength, scan_max)
    linear = v is None
    g = engine.grid
    step = g.du if linear or g.dv <= 0 else min(g.du, g.dv)
    psi, rad = main_beam_radius(exact, step, linear, need)
    p = 10.0 ** (np.asarray(p_db) / 10.0)
    if linear:
        phis = np.array([0.0])
        mb = np.abs(u) <= np.where(u >= 0, rad[0], rad[1])
        vv = np.zeros(1)
        p = p[None, :]
        mb = mb[None, :]
    else:
        phis = np.asarray(phis_deg, dtype=float)
        # the main beam lies within the largest radius: only that block is looked at
        cs = np.flatnonzero(np.abs(u) <= rad.max())
        rs = np.flatnonzero(np.abs(v) <= rad.max())
        uu, vv2 = np.meshgrid(u[cs], v[rs])
        ang = np.mod(np.arctan2(vv2, uu), 2 * math.pi)
        rr = np.interp(ang, np.append(psi, 2 * math.pi), np.append(rad, rad[0]))
        mb = np.zeros(p.shape, dtype=bool)
        mb[np.ix_(rs, cs)] = np.hypot(uu, vv2) <= rr
        vv = v
    k = max(int(steps), 1) if scan_max > 0 else 1
    theta = np.linspace(0.0, scan_max, k)
    psl = np.full((k, phis.size), -np.inf)
    where = np.full((k, phis.size, 2), np.nan)
    # the highest samples outside the main beam, highest first: a steered beam's worst
    # sidelobe is the first of them inside its visible disc (the whole map read only when
    # none is)
    pm = np.where(mb, -1.0, p).ravel()
    top = min(pm.size, SCAN_TOP)
    cand = np.argpartition(-pm, top - 1)[:top] if top < pm.size else np.arange(pm.size)
    cand = cand[np.argsort(-pm[cand], kind="stable")]
    cand = cand[pm[cand] > 0]
    cr, cc = np.divmod(cand, u.size)
    cu_, cv_ = u[cc], vv[cr]
    for i, t in enumerate(theta):
        for j, ph in enumerate(np.radians(phis)):
            u0, v0 = math.sin(t) * math.cos(ph), math.sin(t) * math.sin(ph)
            first = np.flatnonzero((cu_ + u0) ** 2 + (cv_ + v0) ** 2 <= 1.0 + 1e-12)
            if first.size:
                a = first[0]
                psl[i, j] = 10.0 * math.log10(pm[cand[a]])
                where[i, j] = (cu_[a] + u0, cv_[a] + v0)
                continue
            cs = np.flatnonzero(np.abs(u + u0) <= 1.0 + 1e-12)
            rs = np.flatnonzero(np.abs(vv + v0) <= 1.0 + 1e-12)
            su, sv = u[cs] + u0, vv[rs] + v0
            inside = (su[None, :] ** 2 + sv[:, None] ** 2 <= 1.0 + 1e-12) & ~mb[np.ix_(rs, cs)]
            if not inside.any():
                continue
            block = np.where(inside, p[np.ix_(rs, cs)], -1.0)
            a = int(np.argmax(block))
            r_, c_ = divmod(a, cs.size)
            psl[i, j] = 10.0 * math.log10(block.flat[a]) if block.flat[a] > 0 else -np.inf
            where[i, j] = (su[c_], sv[r_])
    return {
        "theta_deg": np.degrees(theta),
        "phi_deg": phis,
        "psl_db": psl,
        "psl_uv": where,
        "worst_db": psl.max(axis=1),
        "sampled": True,
    }


# -- figures -----------------------------------------------------------------------------------
