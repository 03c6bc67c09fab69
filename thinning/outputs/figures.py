"""Figures of a layout and its pattern, for reports and the command line.

Each ``fig_*`` function returns a :class:`matplotlib.figure.Figure` drawn on an Agg canvas
(no pyplot, no display needed); :func:`png_bytes` renders one to PNG. The data behind the
pattern figures comes from functions of :mod:`thinning.outputs.pattern_data` (re-exported
here) that return plain arrays, so that it can be checked on its own:

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
from matplotlib.backends.backend_agg import FigureCanvasAgg
from matplotlib.figure import Figure
from matplotlib.patches import Circle

from ..geometry.layout import Layout
from .fill_image import LARGE_ELEMENTS, draw_fill
from .pattern_data import (
    FLOOR_DB,
    MAP_PIXELS,
    main_beam_radius,
    principal_cuts,
    scan_psl_table,
    uv_power_map,
)

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
