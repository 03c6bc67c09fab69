"""Drawings of a layout for people: an A4 sheet in SVG, PNG or PDF made with matplotlib.

The sheet shows the panel outline, its holes, the clearance boundary (dashed), every element as
a circle of its footprint diameter, optionally every candidate lattice site as a grey dot (so
that the thinned-out sites show), element ids for small arrays, a legend and a title. Axes are
in millimetres. The DXF for mechanical CAD is written by :mod:`thinning.outputs.dxf`; both use the
same default footprint (:func:`default_footprint_mm`).

matplotlib is imported inside the functions that draw, so importing this module is cheap. The
figures are made with :class:`matplotlib.figure.Figure` directly, without pyplot, so no global
figure state is touched and no GUI backend is needed.
"""

from __future__ import annotations

import io
import os
from collections.abc import Iterable, Sequence
from pathlib import Path
from typing import TYPE_CHECKING

import numpy as np

from ..io.atomic import atomic_write
from .fill_image import LARGE_ELEMENTS, draw_fill

if TYPE_CHECKING:
    from matplotlib.figure import Figure

__all__ = [
    "A4_LANDSCAPE_IN",
    "PNG_DPI",
    "LABEL_LIMIT",
    "FIGURE_FORMATS",
    "default_footprint_mm",
    "layout_title",
    "layout_figure",
    "save_figure",
    "write_layout_drawings",
]

#: Sheet size of the figures, A4 landscape (297 × 210 mm)  [in].
A4_LANDSCAPE_IN = (11.69, 8.27)

#: Resolution of PNG output  [dots per inch]; 1754 × 1240 pixels for A4, readable when printed.
PNG_DPI = 150

#: With ``labels=None`` element ids are drawn when there are at most this many elements.
LABEL_LIMIT = 400

#: File formats :func:`save_figure` writes.
FIGURE_FORMATS = ("svg", "png", "pdf")

#: Footprint diameter as a fraction of the smallest element-to-element distance.
_FOOTPRINT_FRACTION = 0.8

#: Footprint diameter used when no two elements are apart (a single element)  [mm].
_FALLBACK_FOOTPRINT_MM = 10.0

#: Metadata that would make output differ from run to run, switched off per format.
_METADATA = {"svg": {"Date": None}, "png": {"Software": None}, "pdf": {"CreationDate": None}}


def _positions_mm(layout) -> np.ndarray:
    """Element centres as an (N, 2) array  [mm]."""
    return np.column_stack([layout.x, layout.y]) * 1e3


def default_footprint_mm(layout) -> float:
    """The drawn element diameter: 0.8 × the smallest distance between two elements  [mm].

    The distance is found with :class:`scipy.spatial.cKDTree` (nearest neighbour of every
    element). Elements at the same position are counted once; a layout of a single position
    gets 10 mm.

    Parameters
    ----------
    layout : thinning.geometry.layout.Layout

    Returns
    -------
    float  [mm]
    """
    from scipy.spatial import cKDTree

    xy = np.unique(_positions_mm(layout), axis=0)
    if len(xy) < 2:
        return _FALLBACK_FOOTPRINT_MM
    dist, _ = cKDTree(xy).query(xy, k=2)
    return _FOOTPRINT_FRACTION * float(dist[:, 1].min())


def _footprint(layout, footprint_mm) -> float:
    """Checked footprint diameter  [mm]: the given one, or the default."""
    if footprint_mm is None:
        return default_footprint_mm(layout)
    d = float(footprint_mm)
    if not (np.isfinite(d) and d > 0):
        raise ValueError(f"footprint_mm = {footprint_mm!r}: a diameter must be finite and > 0 mm")
    return d


def layout_title(
    layout,
    *,
    frequency_hz: float | None = None,
    lattice=None,
    date=None,
    name: str = "",
) -> str:
    """A one-line title for drawings: name, frequency, lattice, element count, date.

    Parameters
    ----------
    layout : thinning.geometry.layout.Layout
    frequency_hz : float, optional  [Hz]
        Shown in GHz.
    lattice : thinning.geometry.lattice.Lattice or str, optional
        A Lattice is shown as its kind and pitch in mm.
    date : datetime.date or str, optional
        Left out when None, so that the same inputs give the same drawing.
    name : str, optional
        Put first (a panel or project name).

    Returns
    -------
    str
        For example ``"panel A, 10 GHz, triangular 17 × 14.722 mm, 256 elements, 2024-05-01"``.
    """
    parts = [name] if name else []
    if frequency_hz is not None:
        parts.append(f"{float(frequency_hz) * 1e-9:g} GHz")
    if lattice is not None:
        if isinstance(lattice, str):
            parts.append(lattice)
        elif lattice.kind == "linear":
            parts.append(f"linear {lattice.dx * 1e3:g} mm")
        else:
            parts.append(f"{lattice.kind} {lattice.dx * 1e3:g} × {lattice.dy * 1e3:g} mm")
    n = len(layout)
    parts.append(f"{n} element" + ("" if n == 1 else "s"))
    if date is not None:
        parts.append(date.isoformat() if hasattr(date, "isoformat") else str(date))
    return ", ".join(parts)


def _sites_mm(sites) -> np.ndarray | None:
    """Candidate sites as an (M, 2) array  [mm] from an (M, 2) array [m] or a ``Sites``."""
    if sites is None:
        return None
    if hasattr(sites, "x") and hasattr(sites, "y"):
        xy = np.column_stack([np.asarray(sites.x), np.asarray(sites.y)])
    else:
        xy = np.asarray(sites, dtype=np.float64)
    if xy.ndim != 2 or xy.shape[1] != 2:
        raise ValueError(f"sites: expected an (M, 2) array of positions in metres, got {xy.shape}")
    return xy * 1e3


def _rings_mm(geom) -> list[np.ndarray]:
    """Exterior and interior rings of a shapely (Multi)Polygon in metres, as arrays  [mm]."""
    if geom is None or geom.is_empty:
        return []
    polys = getattr(geom, "geoms", [geom])
    rings = []
    for p in polys:
        rings.append(np.asarray(p.exterior.coords) * 1e3)
        rings.extend(np.asarray(r.coords) * 1e3 for r in p.interiors)
    return rings


def _label_fontsize(d: float, width: float, height: float) -> float:
    """Font size [pt] of element ids: about 30 % of the drawn circle, between 2 and 8 pt.

    The circle's size on paper is estimated from the share of the sheet the axes get (about
    75 % of the width, beside the legend, and 85 % of the height) and the data span  [mm].
    """
    w_pt, h_pt = (72.0 * s for s in A4_LANDSCAPE_IN)
    pt_per_mm = min(0.75 * w_pt / width, 0.85 * h_pt / height)
    return float(np.clip(0.3 * d * pt_per_mm, 2.0, 8.0))


def layout_figure(
    layout,
    aperture=None,
    *,
    footprint_mm: float | None = None,
    title: str = "",
    labels: bool | None = None,
    sites=None,
) -> Figure:
    """Draw a layout on an A4 landscape sheet.

    Parameters
    ----------
    layout : thinning.geometry.layout.Layout
    aperture : thinning.geometry.aperture.Aperture, optional
        Outline, holes and (when ``edge_clearance > 0``) the clearance boundary, dashed.
        Without it only the elements are drawn.
    footprint_mm : float, optional  [mm]
        Diameter of the element circles; default :func:`default_footprint_mm`.
    title : str, optional
        Default: the element count (see :func:`layout_title` for a fuller one).
    labels : bool, optional
        Draw element ids. None: only when there are at most :data:`LABEL_LIMIT` elements.
    sites : (M, 2) array_like or thinning.geometry.lattice.Sites, optional  [m]
        All candidate sites, drawn as small grey dots beneath the elements.

    Returns
    -------
    matplotlib.figure.Figure
        11.69 × 8.27 in, one axes with equal aspect, in mm.
    """
    from matplotlib.collections import EllipseCollection
    from matplotlib.figure import Figure
    from matplotlib.lines import Line2D

    xy = _positions_mm(layout)
    d = _footprint(layout, footprint_mm)
    n = len(layout)
    if labels is None:
        labels = n <= LABEL_LIMIT

    fig = Figure(figsize=A4_LANDSCAPE_IN, layout="constrained")
    ax = fig.add_subplot()
    handles = []

    if aperture is not None:
        ring = aperture.outline_mm()
        ax.plot(ring[:, 0], ring[:, 1], color="black", lw=1.0, label="outline")
        for i, ring in enumerate(aperture.holes_mm()):
            ax.plot(
                ring[:, 0], ring[:, 1], color="tab:red", lw=0.8, label="hole" if i == 0 else None
            )
        if aperture.edge_clearance > 0:
            clear = f"clearance {aperture.edge_clearance * 1e3:g} mm"
            for i, ring in enumerate(_rings_mm(aperture.usable)):
                ax.plot(
                    ring[:, 0],
                    ring[:, 1],
                    color="tab:green",
                    lw=0.6,
                    ls="--",
                    label=clear if i == 0 else None,
                )
        handles.extend(ln for ln in ax.get_lines() if not ln.get_label().startswith("_"))

    site_xy = _sites_mm(sites)
    large = n > LARGE_ELEMENTS  # the local fill as an image (fill_image), not every circle
    if large:
        im = draw_fill(ax, layout, site_xy)
        fig.colorbar(im, ax=ax, shrink=0.6, label="local fill")
        handles.append(Line2D([], [], ls="none", marker="s", label=im.get_label()))
        labels = False
    if site_xy is not None and len(site_xy) and not large:
        (dots,) = ax.plot(
            site_xy[:, 0],
            site_xy[:, 1],
            ls="none",
            marker=".",
            ms=1.5,
            color="0.6",
            label=f"candidate site ({len(site_xy)})",
            zorder=1,
        )
        handles.append(dots)

    circles = EllipseCollection(
        widths=d,
        heights=d,
        angles=0.0,
        units="xy",
        offsets=xy[:0] if large else xy,
        offset_transform=ax.transData,
        facecolors="tab:blue",
        edgecolors="navy",
        linewidths=0.3,
        alpha=0.8,
        zorder=2,
    )
    ax.add_collection(circles)
    # The legend cannot draw an EllipseCollection, so a marker stands in for it.
    handles.append(
        Line2D(
            [],
            [],
            ls="none",
            marker="o",
            markerfacecolor="tab:blue",
            markeredgecolor="navy",
            label=f"element ({n}), Ø {d:.4g} mm",
        )
    )

    lo, hi = xy.min(axis=0) - d / 2, xy.max(axis=0) + d / 2
    if aperture is not None:
        xmin, ymin, xmax, ymax = (b * 1e3 for b in aperture.bounds)
        lo, hi = np.minimum(lo, [xmin, ymin]), np.maximum(hi, [xmax, ymax])
    if site_xy is not None and len(site_xy):
        lo, hi = np.minimum(lo, site_xy.min(axis=0)), np.maximum(hi, site_xy.max(axis=0))
    pad = 0.03 * float(max(hi - lo)) + d
    if labels:
        size = _label_fontsize(d, hi[0] - lo[0] + 2 * pad, hi[1] - lo[1] + 2 * pad)
        for (x, y), text in zip(xy, layout.element_ids, strict=True):
            ax.text(x, y, text, fontsize=size, ha="center", va="center", zorder=3)
    ax.set_xlim(lo[0] - pad, hi[0] + pad)
    ax.set_ylim(lo[1] - pad, hi[1] + pad)
    ax.set_aspect("equal", adjustable="box")
    ax.set_xlabel("x [mm]")
    ax.set_ylabel("y [mm]")
    ax.grid(True, lw=0.3, color="0.85", zorder=0)
    ax.set_axisbelow(True)
    ax.legend(handles=handles, loc="upper left", bbox_to_anchor=(1.01, 1.0), fontsize=8)
    ax.set_title(title or layout_title(layout))
    return fig


def save_figure(fig: Figure, path: str | os.PathLike, fmt: str | None = None) -> Path:
    """Write a figure to a file atomically.

    The figure is rendered to memory and then written with
    :func:`thinning.io.atomic.atomic_write`, so the file appears complete or not at all.
    Dates and software versions are left out of the file metadata and SVG ids are salted with a
    fixed string, so the same figure gives the same bytes with the same matplotlib.

    Parameters
    ----------
    fig : matplotlib.figure.Figure
    path : str or os.PathLike
    fmt : {"svg", "png", "pdf"}, optional
        Default: the file suffix. PNG is rendered at :data:`PNG_DPI`.

    Returns
    -------
    pathlib.Path
        The path written.

    Raises
    ------
    OutputError
        The folder is missing or not writable, or ``path`` is a folder.
    ValueError
        An unknown format.
    """
    import matplotlib

    path = Path(path)
    fmt = (fmt or path.suffix.lstrip(".")).lower()
    if fmt not in FIGURE_FORMATS:
        raise ValueError(f"{path}: format {fmt!r} is not one of {', '.join(FIGURE_FORMATS)}")
    buf = io.BytesIO()
    with matplotlib.rc_context({"svg.hashsalt": "thinning"}):
        fig.savefig(buf, format=fmt, dpi=PNG_DPI, metadata=_METADATA[fmt])
    atomic_write(path, buf.getvalue())
    return path


def write_layout_drawings(
    out_dir: str | os.PathLike,
    layout,
    aperture=None,
    *,
    stem: str = "layout",
    footprint_mm: float | None = None,
    title: str = "",
    sites=None,
    formats: Iterable[str] = ("svg", "png"),
) -> list[Path]:
    """Draw a layout (see :func:`layout_figure`) and write it as ``out_dir/stem.<fmt>``.

    Parameters
    ----------
    out_dir : str or os.PathLike
        An existing folder.
    layout : thinning.geometry.layout.Layout
    aperture : thinning.geometry.aperture.Aperture, optional
    stem : str
        File name without suffix.
    footprint_mm : float, optional  [mm]
    title : str, optional
    sites : (M, 2) array_like or thinning.geometry.lattice.Sites, optional  [m]
    formats : iterable of {"svg", "png", "pdf"}

    Returns
    -------
    list of pathlib.Path
        The files written, in the order of ``formats``.

    Raises
    ------
    OutputError
        A file cannot be written (the ones already written stay).
    """
    formats = _check_formats(formats)
    fig = layout_figure(layout, aperture, footprint_mm=footprint_mm, title=title, sites=sites)
    out = Path(out_dir)
    return [save_figure(fig, out / f"{stem}.{fmt}", fmt) for fmt in formats]


def _check_formats(formats: Iterable[str]) -> Sequence[str]:
    if isinstance(formats, str):
        formats = [formats]
    formats = [str(f).lower().lstrip(".") for f in formats]
    bad = [f for f in formats if f not in FIGURE_FORMATS]
    if bad:
        raise ValueError(
            f"formats: {', '.join(map(repr, bad))} not among {', '.join(FIGURE_FORMATS)}"
        )
    return formats
