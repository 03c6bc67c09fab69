"""A layout of many thousand elements drawn as an image of its local fill.

Above :data:`LARGE_ELEMENTS` elements, circles stop being readable on an A4 sheet (131,000 of
them would cover it and take minutes to draw). The drawings (:mod:`thinning.outputs.drawing`,
the report's layout figure) then show the panel's outline and holes over an image of the local
fill: the panel cut into square cells of a few lattice pitches, each coloured by the share of
its candidate sites that hold an element (or, without the candidate sites, by its element
count over the most any cell holds). The element positions themselves are all in the CSV and
the DXF.
"""

from __future__ import annotations

import math

import numpy as np

__all__ = ["LARGE_ELEMENTS", "CELLS_ACROSS", "fill_grid", "draw_fill"]

#: Above this many elements a drawing shows the local fill instead of every element.
LARGE_ELEMENTS = 20000
#: Cells across the larger side of the image, about.
CELLS_ACROSS = 160


def fill_grid(x_mm, y_mm, sites_mm=None, cells: int = CELLS_ACROSS):
    """Local fill on a grid of square cells.

    Parameters
    ----------
    x_mm, y_mm : (N,) arrays  [mm]   element centres
    sites_mm : (M, 2) array, optional  [mm]   every candidate site
    cells : int   cells across the larger side

    Returns
    -------
    fill : (ny, nx) array  [1]   elements / sites per cell (NaN: no site), or elements over
        the largest cell count without sites
    extent : (x0, x1, y0, y1)  [mm]   of the image
    cell : float  [mm]   the cell's side
    """
    pts = np.column_stack([x_mm, y_mm])
    ref = pts if sites_mm is None else np.asarray(sites_mm, dtype=float)
    lo, hi = ref.min(axis=0), ref.max(axis=0)
    span = float(max(hi - lo)) or 1.0
    cell = span / max(int(cells), 1)
    nx = max(1, int(math.ceil((hi[0] - lo[0]) / cell + 1e-9)) + 1)
    ny = max(1, int(math.ceil((hi[1] - lo[1]) / cell + 1e-9)) + 1)
    x0, y0 = lo[0] - cell / 2, lo[1] - cell / 2

    def counts(p):
        ix = np.clip(((p[:, 0] - x0) / cell).astype(np.int64), 0, nx - 1)
        iy = np.clip(((p[:, 1] - y0) / cell).astype(np.int64), 0, ny - 1)
        return np.bincount(iy * nx + ix, minlength=nx * ny).reshape(ny, nx).astype(float)

    el = counts(pts)
    if sites_mm is None:
        fill = el / max(float(el.max()), 1.0)
        fill[el == 0] = np.nan
    else:
        st = counts(ref)
        with np.errstate(invalid="ignore", divide="ignore"):
            fill = np.where(st > 0, el / st, np.nan)
    return fill, (x0, x0 + nx * cell, y0, y0 + ny * cell), cell


def draw_fill(ax, layout, sites_mm=None, cells: int = CELLS_ACROSS):
    """Draw the local fill of a layout on a matplotlib axes (in mm); returns the image."""
    fill, extent, cell = fill_grid(layout.x * 1e3, layout.y * 1e3, sites_mm, cells)
    im = ax.imshow(
        fill,
        origin="lower",
        extent=extent,
        cmap="Blues",
        vmin=0.0,
        vmax=1.0,
        interpolation="nearest",
        zorder=1,
    )
    what = "elements / sites" if sites_mm is not None else "elements / most in a cell"
    im.set_label(f"local fill ({what}) in {cell:.3g} mm cells, {len(layout)} elements")
    return im
