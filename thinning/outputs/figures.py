"""Figures of a layout and its pattern, for reports and the command line.

Each ``fig_*`` function returns a :class:`matplotlib.figure.Figure` drawn on an Agg canvas
(no pyplot, no display needed); :func:`png_bytes` renders one to PNG. The data behind the
pattern figures comes from functions that return plain arrays, so that it can be checked on
its own:

* :func:`uv_power_map` — the normalised power |AF|²/(Σa)² on a dense u-v grid. On a lattice
  it is one zero-padded 2-D FFT of the excitation, read periodically; off any lattice it is
  the exact sum (:mod:`thinning.engine.exact`) on a regular grid.
* :func:`principal_cuts` — the exact pattern along v = 0 (x-z plane) and u = 0 (y-z plane)
  against the angle θ from boresight.
* :func:`scan_psl_table` — the worst sidelobe of the sampled pattern for beams steered across
  the scan cone.

All pattern figures are array-factor figures (isotropic elements), as PSL and ASL are in
conventions.md; powers are in dB relative to the beam peak and clipped at a floor.

This module imports matplotlib; only commands and :mod:`thinning.outputs.report` import it.
"""

from __future__ import annotations

import io
import math

import numpy as np
import scipy.fft
from matplotlib.backends.backend_agg import FigureCanvasAgg
from matplotlib.figure import Figure
from matplotlib.patches import Circle

from ..analysis.score import layout_engine
from ..geometry.layout import Layout
from .fill_image import LARGE_ELEMENTS, draw_fill

__all__ = [
    "FLOOR_DB",
    "uv_power_map",
    "principal_cuts",
    "main_beam_radius",
    "scan_psl_table",
    "fig_uv_map",
    "fig_principal_cuts",
    "fig_scan_psl",
    "fig_convergence",
    "fig_comparison",
    "fig_layout",
    "png_bytes",
]

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


def _new_figure(size) -> Figure:
    fig = Figure(figsize=size, layout="constrained")
    FigureCanvasAgg(fig)
    return fig


def png_bytes(fig: Figure, dpi: int = 110) -> bytes:
    """Render a figure to PNG.

    Parameters
    ----------
    fig : matplotlib.figure.Figure
    dpi : int  [dots per inch]

    Returns
    -------
    bytes
        The PNG file.
    """
    buf = io.BytesIO()
    fig.savefig(buf, format="png", dpi=dpi)
    return buf.getvalue()


# -- pattern data ------------------------------------------------------------------------------
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
def _circle(ax, r, style, label):
    ax.add_patch(Circle((0, 0), r, fill=False, lw=1.2, ls=style, ec="white", label=label))
    ax.add_patch(Circle((0, 0), r, fill=False, lw=0.6, ls=style, ec="black"))


def fig_uv_map(
    layout: Layout,
    wavelength: float,
    scan_max: float = 0.0,
    *,
    uv_map=None,
    floor_db: float = FLOOR_DB,
    psl_db: float | None = None,
    marks=None,
) -> Figure:
    """The u-v power map with the visible region, scan cone and sidelobe region marked.

    Parameters
    ----------
    layout : Layout
    wavelength : float  [m]
    scan_max : float  [rad]
    uv_map : (u, v, p_db), optional   from :func:`uv_power_map`, to reuse
    floor_db : float  [dB]   display floor (raised to PSL − 30 dB when ``psl_db`` is given
        and that is higher)
    psl_db : float, optional  [dB]
    marks : (K, 2) array, optional  [1]   where the PSL lobe is (and its repeats), marked ×
    """
    s = math.sin(float(scan_max))
    marks = np.zeros((0, 2)) if marks is None else np.asarray(marks, dtype=float).reshape(-1, 2)
    label = "highest sidelobe" + (f" ({psl_db:.2f} dB)" if psl_db is not None else "")
    if uv_map is None:
        uv_map = uv_power_map(layout, wavelength, 1.0 + s, scan_max=scan_max)
    u, v, p_db = uv_map
    floor = float(floor_db)
    if psl_db is not None and math.isfinite(psl_db):
        floor = max(floor, psl_db - 30.0)
    if v is None:  # linear array: a line against u
        fig = _new_figure((7.0, 4.4))
        ax = fig.add_subplot()
        ax.plot(u, np.maximum(p_db, floor), lw=0.9, color="C0", label="|AF|²")
        lines = [(1.0, "k", "-", "visible region |u| = 1")]
        if s > 0:
            lines += [
                (s, "C2", ":", f"scan cone |u| = sin {math.degrees(scan_max):.3g}°"),
                (1.0 + s, "C3", "--", "sidelobe region |u| = 1 + sin θmax"),
            ]
        for x, col, ls, lab in lines:
            ax.axvline(x, color=col, ls=ls, lw=1.0, label=lab)
            ax.axvline(-x, color=col, ls=ls, lw=1.0)
        if len(marks):
            at = marks[:, 0]
            ax.plot(at, np.full(at.shape, psl_db or 0.0), "x", color="C3", ms=8, label=label)
        ax.set_xlim(u[0], u[-1])
        ax.set_ylim(floor, 3.0)
        ax.set_xlabel("u = sin θ cos φ  [1]")
        ax.set_ylabel("normalised |AF|²  [dB]")
        ax.set_title("Array factor along u (linear array, isotropic elements)")
        fig.legend(loc="outside lower center", ncols=2, fontsize=7)
        ax.grid(alpha=0.3)
        return fig
    if max(p_db.shape) > MAP_PIXELS:  # drawn from the maxima of blocks of samples
        b = -(-max(p_db.shape) // MAP_PIXELS)
        nv, nu = p_db.shape[0] // b * b, p_db.shape[1] // b * b
        p_db = p_db[:nv, :nu].reshape(nv // b, b, nu // b, b).max(axis=(1, 3))
        u = u[:nu].reshape(-1, b).mean(axis=1)
        v = v[:nv].reshape(-1, b).mean(axis=1)
    fig = _new_figure((6.6, 6.0))
    ax = fig.add_subplot()
    hu = (u[1] - u[0]) / 2 if u.size > 1 else 0.5
    hv = (v[1] - v[0]) / 2 if v.size > 1 else 0.5
    im = ax.imshow(
        np.maximum(p_db, floor),
        origin="lower",
        extent=(u[0] - hu, u[-1] + hu, v[0] - hv, v[-1] + hv),
        cmap="viridis",
        vmin=floor,
        vmax=0.0,
        interpolation="nearest",
        aspect="equal",
    )
    cb = fig.colorbar(im, ax=ax, shrink=0.85)
    cb.set_label("normalised |AF|²  [dB]")
    _circle(ax, 1.0, "-", "visible region (u² + v² = 1)")
    if s > 0:
        _circle(ax, s, ":", f"scan cone (radius sin {math.degrees(scan_max):.3g}°)")
        _circle(ax, 1.0 + s, "--", f"sidelobe region (radius 1 + sin θmax = {1 + s:.3f})")
    if len(marks):
        ax.plot(marks[:, 0], marks[:, 1], "x", color="red", ms=9, mew=2, label=label)
    ax.set_xlabel("u = sin θ cos φ  [1]")
    ax.set_ylabel("v = sin θ sin φ  [1]")
    ax.set_title("Array factor in u-v (broadside beam, isotropic elements)")
    fig.legend(loc="outside lower center", ncols=2, fontsize=7, facecolor="0.85")
    return fig


def fig_principal_cuts(
    layout: Layout,
    wavelength: float,
    scan_max: float = 0.0,
    filled_layout: Layout | None = None,
    *,
    floor_db: float = FLOOR_DB,
    cuts=None,
) -> Figure:
    """Exact pattern cuts in the x-z and y-z planes, with the filled aperture overlaid.

    Parameters
    ----------
    layout : Layout
    wavelength : float  [m]
    scan_max : float  [rad]   the scan cone ±θmax is shaded
    filled_layout : Layout, optional   every candidate site, for comparison
    floor_db : float  [dB]
    cuts : dict, optional   from :func:`principal_cuts`, to reuse
    """
    data = cuts if cuts is not None else principal_cuts(layout, wavelength)
    filled = principal_cuts(filled_layout, wavelength) if filled_layout is not None else None
    planes = list(data["cuts"])
    fig = _new_figure((6.4 * len(planes), 4.3) if len(planes) > 1 else (7.0, 4.3))
    deg = math.degrees(float(scan_max))
    for i, plane in enumerate(planes):
        ax = fig.add_subplot(1, len(planes), i + 1)
        if deg > 0:  # where the beam peak can be steered: not a band of observation angles
            ax.annotate(
                "",
                xy=(-deg, 4.5),
                xytext=(deg, 4.5),
                arrowprops={"arrowstyle": "<->", "color": "C2", "lw": 1.2},
            )
            ax.text(0, 5.5, f"beam steering range ±{deg:.3g}°", ha="center", color="C2", fontsize=8)
        if filled is not None and plane in filled["cuts"]:
            ax.plot(
                filled["theta_deg"],
                np.maximum(filled["cuts"][plane], floor_db),
                color="0.55",
                lw=0.8,
                label=f"filled aperture ({len(filled_layout)} sites)",
            )
        ax.plot(
            data["theta_deg"],
            np.maximum(data["cuts"][plane], floor_db),
            color="C0",
            lw=0.9,
            label=f"layout ({len(layout)} elements)",
        )
        ax.set_xlim(-90, 90)
        ax.set_ylim(floor_db, 9.0 if deg > 0 else 3.0)
        ax.set_xticks(np.arange(-90, 91, 30))
        ax.set_xlabel("observation angle θ from boresight  [deg]")
        ax.set_ylabel("normalised |AF|²  [dB]")
        what = "v = 0" if plane == "x-z" else "u = 0"
        ax.set_title(f"{plane} plane ({what}), exact, isotropic elements", fontsize=10)
        ax.grid(alpha=0.3)
        ax.legend(loc="upper center", bbox_to_anchor=(0.5, -0.16), ncols=2, fontsize=7)
    return fig


def fig_scan_psl(table: dict, psl_db: float | None = None) -> Figure:
    """Worst sidelobe against scan angle, one curve per scan plane.

    Parameters
    ----------
    table : dict   from :func:`scan_psl_table`
    psl_db : float, optional  [dB]   the refined PSL over the whole cone, drawn for reference
    """
    fig = _new_figure((6.4, 4.0))
    ax = fig.add_subplot()
    th = table["theta_deg"]
    marker = "o" if th.size < 25 else None
    psl = np.where(np.isfinite(table["psl_db"]), table["psl_db"], np.nan)
    if np.all(np.isnan(psl)) or np.nanmax(psl) - np.nanmin(psl) <= 0.005:  # one line for all
        planes = ", ".join(f"{ph:g}°" for ph in table["phi_deg"])
        ax.plot(th, psl[:, 0], marker=marker, ms=3, lw=1.0, label=f"every plane (φ = {planes})")
    else:
        for j, ph in enumerate(table["phi_deg"]):
            ax.plot(th, psl[:, j], marker=marker, ms=3, lw=1.0, label=f"φ = {ph:g}°")
    if psl_db is not None and math.isfinite(psl_db):
        ax.axhline(
            psl_db, color="k", ls="--", lw=0.9, label=f"PSL over the cone {psl_db:.2f} dB (refined)"
        )
    ax.set_xlabel("scan angle θ₀  [deg]")
    ax.set_ylabel("worst sidelobe  [dB]")
    ax.set_title("Worst sidelobe vs scan angle (sampled, not refined)", fontsize=10)
    if th.size > 1:
        ax.set_xlim(th[0], th[-1])
    ax.grid(alpha=0.3)
    ax.legend(fontsize=8)
    return fig


def _history_xy(history):
    pts = [
        (float(h["evaluations"]), float(h["best_psl_db"]))
        for h in history or ()
        if h.get("evaluations", 0)
        and h.get("best_psl_db") is not None
        and math.isfinite(float(h["best_psl_db"]))
    ]
    if not pts:
        return None
    x, y = np.array(pts).T
    return x, np.minimum.accumulate(y)


def fig_convergence(history, baseline_history=None) -> Figure:
    """Best PSL found against evaluations (log scale), with best-of-random when given.

    Parameters
    ----------
    history : list of dict   ``evaluations`` and ``best_psl_db`` [dB] per record
    baseline_history : list of dict, optional   the same for best-of-random
    """
    fig = _new_figure((6.4, 4.0))
    ax = fig.add_subplot()
    any_line = False
    for hist, label, col in (
        (history, "design search", "C0"),
        (baseline_history, "best of random", "C1"),
    ):
        xy = _history_xy(hist)
        if xy is None:
            continue
        ax.step(*xy, where="post", color=col, lw=1.2, label=label)
        ax.plot(xy[0][-1:], xy[1][-1:], "o", color=col, ms=4)
        any_line = True
    if any_line:
        ax.set_xscale("log")
        ax.legend(fontsize=8)
    else:
        ax.text(0.5, 0.5, "no history recorded", ha="center", va="center", transform=ax.transAxes)
    ax.set_xlabel("evaluations")
    ax.set_ylabel("best PSL so far  [dB]")
    ax.set_title("Convergence (PSL as the search saw it)", fontsize=10)
    ax.grid(alpha=0.3, which="both")
    return fig


def fig_comparison(design: dict, baseline: dict | None = None) -> Figure:
    """Bar chart of PSL and ASL: the design against best-of-random.

    Parameters
    ----------
    design : dict   ``psl_db``, ``asl_db``  [dB]
    baseline : dict, optional   the same for best-of-random
    """
    fig = _new_figure((5.6, 3.8))
    ax = fig.add_subplot()
    keys = [("psl_db", "PSL"), ("asl_db", "ASL")]
    rows = [("design", design, "C0")]
    if baseline is not None:
        rows.append(("best of random", baseline, "C1"))
    width = 0.8 / len(rows)
    x = np.arange(len(keys))
    low = 0.0
    for i, (label, d, col) in enumerate(rows):
        vals = [d.get(k) for k, _ in keys]
        vals = [float(a) if a is not None and math.isfinite(float(a)) else np.nan for a in vals]
        pos = x + (i - (len(rows) - 1) / 2) * width
        ax.bar(pos, vals, width, color=col, label=label)
        for xp, val in zip(pos, vals, strict=True):
            if math.isfinite(val):
                ax.text(xp, val, f"{val:.2f}", ha="center", va="top", fontsize=8, color="k")
                low = min(low, val)
    ax.set_xticks(x, [name for _, name in keys])
    ax.set_ylabel("level relative to the beam peak  [dB]")
    ax.set_ylim(low * 1.15 - 1.0, 0.0)
    ax.axhline(0, color="k", lw=0.6)
    ax.set_title("Design vs best-of-random (lower is better)", fontsize=10)
    ax.legend(fontsize=8, loc="lower right")
    ax.grid(alpha=0.3, axis="y")
    return fig


def fig_layout(layout: Layout, aperture=None, sites=None) -> Figure:
    """Drawing of the layout: active elements, empty candidate sites, the aperture outline.

    Parameters
    ----------
    layout : Layout
    aperture : thinning.geometry.aperture.Aperture, optional
    sites : (M, 2) array, optional  [m]   every candidate site
    """
    x, y = layout.x * 1e3, layout.y * 1e3
    m = len(sites) if sites is not None else len(layout)
    size = float(np.clip(6000.0 / max(m, 1), 1.5, 40.0))
    linear = layout.is_linear and (sites is None or np.ptp(np.asarray(sites)[:, 1]) <= 1e-6)
    fig = _new_figure((7.0, 2.6) if linear else (6.2, 5.6))
    ax = fig.add_subplot()
    if aperture is not None:
        ring = aperture.outline_mm()
        ax.plot(ring[:, 0], ring[:, 1], color="k", lw=1.0, label="aperture outline")
        for h in aperture.holes_mm():
            ax.plot(h[:, 0], h[:, 1], color="k", lw=0.8)
    if len(layout) > LARGE_ELEMENTS:  # the local fill as an image (fill_image)
        s = None if sites is None else np.asarray(sites, dtype=float).reshape(-1, 2) * 1e3
        im = draw_fill(ax, layout, s)
        fig.colorbar(im, ax=ax, shrink=0.8, label="local fill")
        ax.set_aspect("equal")
        ax.set_xlabel("x  [mm]")
        ax.set_ylabel("y  [mm]")
        ax.set_title(f"{len(layout)} elements on {m} sites (local fill)", fontsize=10)
        return fig
    if sites is not None:
        s = np.asarray(sites, dtype=float).reshape(-1, 2) * 1e3
        ax.scatter(
            s[:, 0],
            s[:, 1],
            s=size,
            facecolors="none",
            edgecolors="0.6",
            lw=0.5,
            label=f"empty site ({len(s) - len(layout)})",
        )
    ax.scatter(x, y, s=size, color="C0", lw=0, label=f"element ({len(layout)})")
    ax.set_xlabel("x  [mm]")
    if linear:
        ax.set_yticks([])
        ax.set_ylabel(f"y = {float(np.mean(y)):.3g} mm")
    else:
        ax.set_ylabel("y  [mm]")
        ax.set_aspect("equal")
    title = f"{len(layout)} elements" + (f" on {m} sites" if sites is not None else "")
    ax.set_title(title, fontsize=10)
    ax.legend(fontsize=7, loc="upper right", framealpha=0.9)
    return fig
