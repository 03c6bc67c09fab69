"""The per-tile count map of a tiled layout: inline SVG for the report, ``tiles.png`` for the
file set.

Each tile is drawn as its boundary rectangle shaded by its element count (white = 0, dark blue
= the most any tile may carry), with the count and the board (pattern) id written in it; a
partial tile (cut by the outline, a hole or the clearance) has a dashed border. The panel's
outline and holes are drawn over the tiles. The SVG is written by hand in millimetres (y up,
drawn with y negated, as :mod:`thinning.outputs.svg_drawing` does); the PNG is drawn with
matplotlib (Agg), imported only by :func:`fig_tile_map`.
"""

from __future__ import annotations

import os
from pathlib import Path

import numpy as np

from .svg_drawing import _e, _f, _path

__all__ = ["tile_map_svg", "fig_tile_map", "write_tile_map_png", "tile_shade"]

#: The shade of an empty tile and of a tile at the top of the scale (RGB, 0..1).
_LIGHT = np.array([0.969, 0.984, 1.0])
_DARK = np.array([0.031, 0.188, 0.420])


def _top(tiling) -> int:
    """The top of the shade scale: the largest tile limit, or the largest count."""
    grid = tiling.grid
    top = int(max(np.max(grid.limit, initial=0), np.max(tiling.table.count, initial=0)))
    return max(top, 1)


def tile_shade(count: int, top: int) -> tuple[np.ndarray, bool]:
    """(rgb, dark): the fill of a tile with ``count`` elements on a scale to ``top``, and
    whether its text should be white."""
    s = float(np.clip(count / top, 0.0, 1.0))
    return _LIGHT + s * (_DARK - _LIGHT), s > 0.55


def _hex(rgb) -> str:
    return "#" + "".join(f"{int(round(255 * c)):02x}" for c in rgb)


def _boxes_mm(grid) -> np.ndarray:
    return np.array([grid.corners(t) for t in range(grid.n_tiles)]).reshape(-1, 4, 2) * 1e3


def tile_map_svg(tiling, aperture=None, title: str = "elements per tile") -> str:
    """The count map as one ``<svg>`` element whose user unit is the millimetre.

    Parameters
    ----------
    tiling : thinning.geometry.tiles.Tiling
    aperture : thinning.geometry.aperture.Aperture, optional   outline and holes
    title : str

    Returns
    -------
    str
    """
    grid, table = tiling.grid, tiling.table
    boxes = _boxes_mm(grid)
    lo, hi = boxes.reshape(-1, 2).min(axis=0), boxes.reshape(-1, 2).max(axis=0)
    if aperture is not None:
        xmin, ymin, xmax, ymax = (b * 1e3 for b in aperture.bounds)
        lo, hi = np.minimum(lo, [xmin, ymin]), np.maximum(hi, [xmax, ymax])
    span = float(max(hi - lo))
    lw = max(span / 600, 0.05)
    text = 0.022 * span
    pad = 0.02 * span
    top = _top(tiling)
    vx, vy = lo[0] - pad, -hi[1] - pad
    vw, vh = hi[0] - lo[0] + 2 * pad, hi[1] - lo[1] + 2 * pad + 2.2 * text
    parts = [
        f'<svg viewBox="{_f(vx)} {_f(vy)} {_f(vw)} {_f(vh)}" role="img" '
        f'aria-label="{_e(title)}" class="tile-map">',
        f"<title>{_e(title)}</title>",
    ]
    for t, box in enumerate(boxes):
        (x0, y0), (x1, y1) = box.min(axis=0), box.max(axis=0)
        count = int(table.count[t])
        rgb, dark = tile_shade(count, top)
        full = bool(grid.full[t])
        dash = "" if full else f' stroke-dasharray="{_f(4 * lw)} {_f(3 * lw)}"'
        w, h = x1 - x0, y1 - y0
        size = min(0.3 * min(w, h), 3 * text)
        cx, cy = (x0 + x1) / 2, -(y0 + y1) / 2
        ink = "#fff" if dark else "#111"
        parts.append(
            f'<g class="tile"><title>tile {t + 1} ({int(grid.a[t])}, {int(grid.b[t])}): '
            f"{count} of {int(grid.limit[t])} elements, board {int(table.pattern[t])} "
            f"{_e(table.orientation[t])}{'' if full else ', partial'}</title>"
            f'<rect x="{_f(x0)}" y="{_f(-y1)}" width="{_f(w)}" height="{_f(h)}" '
            f'fill="{_hex(rgb)}" stroke="#555" stroke-width="{_f(lw)}"{dash}/>'
            f'<text x="{_f(cx)}" y="{_f(cy)}" font-size="{_f(size)}" fill="{ink}" '
            f'text-anchor="middle" dominant-baseline="central">{count}</text>'
            f'<text x="{_f(cx)}" y="{_f(cy + 0.75 * size)}" font-size="{_f(0.45 * size)}" '
            f'fill="{ink}" text-anchor="middle" dominant-baseline="central">'
            f"board {int(table.pattern[t])}</text></g>"
        )
    if aperture is not None:
        parts.append(
            f'<path class="outline" d="{_path(aperture.outline_mm())}" fill="none" '
            f'stroke="#000" stroke-width="{_f(2.5 * lw)}"/>'
        )
        for hole in aperture.holes_mm():
            parts.append(
                f'<path class="hole" d="{_path(hole)}" fill="none" stroke="#c00" '
                f'stroke-width="{_f(2 * lw)}"/>'
            )
    parts.append(
        f'<text x="{_f(lo[0])}" y="{_f(-lo[1] + pad + 1.2 * text)}" font-size="{_f(text)}">'
        f"Shade: elements per tile, white 0 to dark {top}; the small number is the board; "
        "a dashed border marks a partial tile.</text>"
    )
    parts.append("</svg>")
    return "".join(parts)


def fig_tile_map(tiling, aperture=None, title: str = "Elements per tile"):
    """The count map as a matplotlib figure (Agg canvas, no pyplot)."""
    from matplotlib.backends.backend_agg import FigureCanvasAgg
    from matplotlib.colors import LinearSegmentedColormap, Normalize
    from matplotlib.figure import Figure
    from matplotlib.patches import Polygon, Rectangle

    grid, table = tiling.grid, tiling.table
    boxes = _boxes_mm(grid)
    top = _top(tiling)
    fig = Figure(figsize=(8.0, 6.5), layout="constrained")
    FigureCanvasAgg(fig)
    ax = fig.add_subplot()
    cmap = LinearSegmentedColormap.from_list("tiles", [_LIGHT, _DARK])
    norm = Normalize(0, top)
    lo, hi = boxes.reshape(-1, 2).min(axis=0), boxes.reshape(-1, 2).max(axis=0)
    span = float(max(hi - lo))
    for t, box in enumerate(boxes):
        (x0, y0), (x1, y1) = box.min(axis=0), box.max(axis=0)
        count = int(table.count[t])
        _, dark = tile_shade(count, top)
        ax.add_patch(
            Rectangle(
                (x0, y0),
                x1 - x0,
                y1 - y0,
                facecolor=cmap(norm(count)),
                edgecolor="0.35",
                lw=0.6,
                ls="-" if grid.full[t] else "--",
            )
        )
        fs = float(np.clip(0.3 * min(x1 - x0, y1 - y0) / span * 300, 4, 11))
        ax.text(
            (x0 + x1) / 2,
            (y0 + y1) / 2,
            f"{count}\nboard {int(table.pattern[t])}",
            ha="center",
            va="center",
            fontsize=fs,
            color="white" if dark else "black",
            linespacing=1.1,
        )
    if aperture is not None:
        ax.add_patch(Polygon(aperture.outline_mm(), closed=True, fill=False, lw=1.4, ec="k"))
        for hole in aperture.holes_mm():
            ax.add_patch(Polygon(hole, closed=True, fill=False, lw=1.0, ec="#c00"))
        xmin, ymin, xmax, ymax = (b * 1e3 for b in aperture.bounds)
        lo, hi = np.minimum(lo, [xmin, ymin]), np.maximum(hi, [xmax, ymax])
    pad = 0.03 * span
    ax.set_xlim(lo[0] - pad, hi[0] + pad)
    ax.set_ylim(lo[1] - pad, hi[1] + pad)
    ax.set_aspect("equal", adjustable="box")
    ax.set_xlabel("x [mm]")
    ax.set_ylabel("y [mm]")
    from matplotlib.cm import ScalarMappable

    fig.colorbar(ScalarMappable(norm, cmap), ax=ax, label="elements per tile", shrink=0.8)
    ax.set_title(
        f"{title}: {grid.n_tiles} tiles ({int(np.sum(grid.full))} full), "
        f"{table.full_boards} full-tile board{'s' if table.full_boards != 1 else ''}"
    )
    return fig


def write_tile_map_png(
    path: str | os.PathLike, tiling, aperture=None, title: str = "Elements per tile"
) -> Path:
    """Write the count map as a PNG atomically (:func:`thinning.outputs.drawing.save_figure`)."""
    from .drawing import save_figure

    return save_figure(fig_tile_map(tiling, aperture, title), Path(path), "png")
