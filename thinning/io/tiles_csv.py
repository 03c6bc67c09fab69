"""The tiles of a tiled layout: ``tiles.csv`` and the ``tile``/``chip``/``channel`` columns of
``layout.csv``.

``tiles.csv`` (UTF-8, comma-separated, a header row, ``\\n`` line endings) has one row per tile
of the panel, in tile-id order:

``id``
    Tile id, from 1: the bottom row of tiles first, left to right
    (:class:`thinning.geometry.tiles.TileGrid`).
``a``, ``b``
    The tile's indices along a row and across rows (0 = the tile at the grid's origin).
``pattern``
    The board the tile carries, from 1: the distinct full-tile boards first, then the partial
    tiles' own variants (:class:`thinning.geometry.tiles.TileTable`).
``orientation``
    How the board is mounted: ``r0`` (as designed), ``r90``/``r180``/``r270`` (turned
    counter-clockwise), ``mx``/``my`` (mirrored in x / in y), ``d``/``ad`` (mirrored in a
    diagonal).
``count``
    Elements on the tile.
``limit``
    The most elements the tile may carry (a partial tile's limit scaled by the positions it
    keeps).
``full``
    1 for a full tile, 0 for a partial one (cut by the outline, a hole, the clearance or a
    forbidden site).
``chips``
    Chips on the tile (only when the layout has chips: ``channels_per_chip``).
``x_mm``, ``y_mm``
    The centre of the tile's boundary rectangle  [mm].

The element columns added to ``layout.csv`` (:func:`tile_columns`) are ``tile`` (the tile id),
and with chips ``chip`` (the global chip id, numbered tile by tile) and ``channel`` (the
channel within the chip), all integers from 1.
"""

from __future__ import annotations

import csv
import os

import numpy as np

from ..units import m_to_mm
from .atomic import atomic_open
from .layout_csv import _fmt_mm

__all__ = ["TILES_COLUMNS", "tile_columns", "write_tiles_csv"]

#: Columns of tiles.csv (``chips`` only when the layout has chips).
TILES_COLUMNS = (
    "id",
    "a",
    "b",
    "pattern",
    "orientation",
    "count",
    "limit",
    "full",
    "chips",
    "x_mm",
    "y_mm",
)


def tile_columns(tiling) -> dict[str, list[int]]:
    """The ``tile`` (and with chips ``chip``, ``channel``) column of every element, 1-based,
    in layout order, for :func:`thinning.io.layout_csv.write_layout_csv` ``extra_columns``.

    Parameters
    ----------
    tiling : thinning.geometry.tiles.Tiling

    Returns
    -------
    dict of str to list of int
    """
    cols = {"tile": [int(t) + 1 for t in tiling.element_tile]}
    chips = tiling.chips
    if chips is not None:
        cols["chip"] = [int(c) for c in chips.chip]
        cols["channel"] = [int(c) for c in chips.channel]
    return cols


def write_tiles_csv(path: str | os.PathLike, tiling) -> None:
    """Write ``tiles.csv`` atomically (format in the module docstring).

    Parameters
    ----------
    path : str or os.PathLike
    tiling : thinning.geometry.tiles.Tiling

    Raises
    ------
    OutputError
        The file cannot be written (nothing is left behind).
    """
    grid, table = tiling.grid, tiling.table
    chips = tiling.chips
    header = [c for c in TILES_COLUMNS if c != "chips" or chips is not None]
    centres = m_to_mm(np.array([grid.centre(t) for t in range(grid.n_tiles)]).reshape(-1, 2))
    with atomic_open(path, "w", newline="") as f:
        w = csv.writer(f, lineterminator="\n")
        w.writerow(header)
        for t in range(grid.n_tiles):
            rec = [
                t + 1,
                int(grid.a[t]),
                int(grid.b[t]),
                int(table.pattern[t]),
                table.orientation[t],
                int(table.count[t]),
                int(grid.limit[t]),
                int(bool(grid.full[t])),
            ]
            if chips is not None:  # per_tile may stop at the last tile with elements
                rec.append(int(chips.per_tile[t]) if t < len(chips.per_tile) else 0)
            rec += [_fmt_mm(centres[t, 0]), _fmt_mm(centres[t, 1])]
            w.writerow(rec)
