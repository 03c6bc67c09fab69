"""Tiles: the boards a panel is built from, and the rules on how many elements each carries.

A tile is an ``nx × ny`` block of lattice positions (``[tiles] size``). With (i, j) the lattice
indices of a site (i along a row, j across rows; :meth:`Lattice.lattice_index`) and (i0, j0)
the index of the lattice point nearest ``origin_mm`` (default: the smallest i and j among the
candidate sites), the site belongs to tile (a, b) = (⌊(i − i0)/nx⌋, ⌊(j − j0)/ny⌋) and sits at
the tile's local position (i − i0 − a·nx, j − j0 − b·ny). Tile ids count from 1 in the order
of (b, a): the bottom row of tiles first, left to right.

Full and partial tiles. A tile is *full* when all nx·ny of its positions are usable sites
(inside the outline, outside every hole, clear of the edges, not forbidden and, under a
symmetry, not left without a partner). A tile cut by the outline, a hole, the clearance or a
forbidden site is *partial*: it is a depopulated variant of the board, and its limit is the
tile's limit scaled by the share of positions it keeps, rounded down (and down to a whole chip
with ``whole_chips``): ⌊K · usable / (nx·ny)⌋. A partial tile's count is free up to that limit
in every mode; ``elements_per_tile`` and ``patterns`` bind the full tiles only.

Orientations. A board can be mounted turned or mirrored: the allowed transforms of the local
(ny, nx) occupancy array are ``"none"`` (identity), ``"rotate-180"`` and ``"all"`` (the 8
symmetries of a square tile on a square lattice, the 4 of any other rectangular tile). On a
triangular lattice rows alternate their offset, so ny must be even (every tile then has the
same row offsets), and only the 180° turn maps the lattice onto itself (``"all"`` is refused).
Two tiles are the same board when one occupancy is an allowed transform of the other; the
*canonical* occupancy of a class is the smallest of its transforms as packed bytes.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from ..errors import SpecError, where
from .lattice import Sites

__all__ = [
    "ORIENTATION_SETS",
    "TRANSFORMS",
    "TileRules",
    "TileGrid",
    "TileTable",
    "transform",
    "canonical",
    "allowed_transforms",
    "Tiling",
]

ORIENTATION_SETS = ("none", "rotate-180", "all")

#: The 8 symmetries of a square, as functions of a (ny, nx) array indexed [j, i]. Names:
#: ``r0`` identity, ``r90``/``r180``/``r270`` counter-clockwise turns, ``mx`` mirror in x
#: (i → nx−1−i), ``my`` mirror in y, ``d`` transpose, ``ad`` anti-transpose.
TRANSFORMS = {
    "r0": lambda a: a,
    "r90": lambda a: np.rot90(a, 1),
    "r180": lambda a: a[::-1, ::-1],
    "r270": lambda a: np.rot90(a, 3),
    "mx": lambda a: a[:, ::-1],
    "my": lambda a: a[::-1, :],
    "d": lambda a: a.T,
    "ad": lambda a: np.rot90(a, 2).T,
}
INVERSE = {"r90": "r270", "r270": "r90"}


def transform(arr: np.ndarray, name: str) -> np.ndarray:
    """The occupancy ``arr`` (ny, nx) mounted with transform ``name`` (:data:`TRANSFORMS`)."""
    return np.ascontiguousarray(TRANSFORMS[name](np.asarray(arr)))


def allowed_transforms(orientations: str, size, lattice_kind: str, square_pitch: bool) -> list:
    """The transforms an ``orientations`` setting allows for tiles of ``size`` (nx, ny)."""
    if orientations == "none":
        return ["r0"]
    if orientations == "rotate-180":
        return ["r0", "r180"]
    nx, ny = size
    if lattice_kind == "triangular":
        return ["r0", "r180"]
    if nx == ny and square_pitch:
        return list(TRANSFORMS)
    return ["r0", "r180", "mx", "my"]


def canonical(arr: np.ndarray, transforms) -> tuple[bytes, str]:
    """(key, orientation): the canonical occupancy's key (the smallest packed transform) and
    the transform that mounts the canonical board as ``arr``."""
    best, best_t = None, "r0"
    for t in transforms:
        b = transform(arr, t)
        key = bytes(np.asarray(b.shape, np.int16).tobytes()) + np.packbits(b.ravel()).tobytes()
        if best is None or key < best:
            best, best_t = key, t
    return best, INVERSE.get(best_t, best_t)


@dataclass(frozen=True)
class TileRules:
    """The ``[tiles]`` table of a spec.

    Attributes
    ----------
    size : (nx, ny)   lattice positions per tile along a row and across rows
    origin_mm : (x, y) or None
    elements_per_tile : int or None   exact count in every full tile (identical boards)
    max_elements_per_tile : int or None   capacity of every tile (chips × channels)
    channels_per_chip : int or None
    whole_chips : bool   every tile's count a multiple of ``channels_per_chip``
    patterns : int or None   at most this many distinct full-tile boards
    orientations : str   one of :data:`ORIENTATION_SETS`
    compare_unconstrained : bool   also run an unconstrained design of the same budget
    """

    size: tuple
    origin_mm: tuple | None = None
    elements_per_tile: int | None = None
    max_elements_per_tile: int | None = None
    channels_per_chip: int | None = None
    whole_chips: bool = False
    patterns: int | None = None
    orientations: str = "none"
    compare_unconstrained: bool = False

    @property
    def limit(self) -> int | None:
        """The per-tile limit K of a full tile (exact or capacity)."""
        if self.elements_per_tile is not None:
            return self.elements_per_tile
        return self.max_elements_per_tile

    @property
    def step(self) -> int:
        """The granularity of a tile's count: a chip's channels with ``whole_chips``, else 1."""
        return int(self.channels_per_chip) if self.whole_chips else 1

    @property
    def mode(self) -> str:
        """``patterns``, ``exact``, ``whole-chips``, ``capacity`` or ``free``."""
        if self.patterns is not None:
            return "patterns"
        if self.elements_per_tile is not None:
            return "exact"
        if self.whole_chips:
            return "whole-chips"
        if self.max_elements_per_tile is not None:
            return "capacity"
        return "free"

    def to_dict(self) -> dict:
        return {
            "size": list(self.size),
            "origin_mm": None if self.origin_mm is None else list(self.origin_mm),
            "elements_per_tile": self.elements_per_tile,
            "max_elements_per_tile": self.max_elements_per_tile,
            "channels_per_chip": self.channels_per_chip,
            "whole_chips": self.whole_chips,
            "patterns": self.patterns,
            "orientations": self.orientations,
            "mode": self.mode,
        }


@dataclass
class TileTable:
    """The boards of one layout: per tile its count, board (pattern) id and orientation.

    ``pattern[t]`` numbers the distinct boards from 1, full tiles first (by first use), then
    the partial tiles' own boards; ``orientation[t]`` is the transform that mounts the board's
    canonical occupancy as this tile's."""

    count: np.ndarray
    pattern: np.ndarray
    orientation: list
    full_boards: int
    partial_boards: int


@dataclass
class TileGrid:
    """The tiles over a panel's candidate sites (module docstring).

    Attributes
    ----------
    sites : Sites
    rules : TileRules
    origin_index : (i0, j0)
    tile_of_site : (M,) int   0-based tile of each site
    local_i, local_j : (M,) int   the site's position in its tile
    a, b : (T,) int   tile indices
    """

    sites: Sites
    rules: TileRules
    source: str | None = None
    usable: np.ndarray | None = None
    origin_index: tuple = field(init=False)

    def __post_init__(self):
        src = self.source
        nx, ny = (int(v) for v in self.rules.size)
        lat = self.sites.lattice
        if lat.kind == "triangular" and ny % 2:
            raise SpecError(
                f"{where(src, 'tiles.size')}[{nx}, {ny}]: on a triangular lattice the rows "
                "per tile must be even, so that every tile has the same row offsets"
            )
        if lat.kind == "linear" and ny != 1:
            raise SpecError(
                f"{where(src, 'tiles.size')}[{nx}, {ny}]: a linear array's tiles are 1 row"
            )
        if lat.kind == "triangular" and self.rules.orientations == "all":
            raise SpecError(
                f"{where(src, 'tiles.orientations')}'all': on a triangular lattice only the "
                "180-degree turn maps a tile onto the lattice; use 'rotate-180' or 'none'"
            )
        i, j = lat.lattice_index(self.sites.col, self.sites.row)
        i, j = np.asarray(i, np.int64), np.asarray(j, np.int64)
        if self.rules.origin_mm is None:
            i0, j0 = int(i.min()), int(j.min())
        else:
            i0, j0 = self._nearest_index(*self.rules.origin_mm)
        self.origin_index = (i0, j0)
        ta = np.floor_divide(i - i0, nx)
        tb = np.floor_divide(j - j0, ny)
        keys, inv = np.unique(np.stack([tb, ta], axis=1), axis=0, return_inverse=True)
        self.b, self.a = keys[:, 0], keys[:, 1]
        self.tile_of_site = inv.ravel()
        self.local_i = i - i0 - ta * nx
        self.local_j = j - j0 - tb * ny
        self.nx, self.ny = nx, ny
        m = len(self.sites)
        usable = np.ones(m, bool) if self.usable is None else np.asarray(self.usable, bool)
        self.usable = usable
        self.usable_count = np.bincount(self.tile_of_site[usable], minlength=self.n_tiles)
        self.full = self.usable_count == nx * ny
        self.transforms = allowed_transforms(
            self.rules.orientations,
            (nx, ny),
            lat.kind,
            lat.kind == "rectangular" and abs(lat.dx - lat.dy) <= 1e-9 * max(lat.dx, lat.dy),
        )
        self.limit = self._limits()

    def _nearest_index(self, x_mm, y_mm) -> tuple[int, int]:
        """The lattice index (i, j) of the lattice point nearest (x, y) mm."""
        lat = self.sites.lattice
        gx, gy = lat.grid_pitch
        x, y = x_mm * 1e-3 - lat.origin[0], y_mm * 1e-3 - lat.origin[1]
        c0 = int(round(x / gx))
        r0 = 0 if lat.kind == "linear" else int(round(y / gy))
        best, best_d = None, np.inf
        for dc in range(-2, 3):
            for dr in range(-1, 2) if lat.kind != "linear" else (0,):
                c, r = c0 + dc, r0 + dr
                if lat.kind == "triangular" and (c - r) % 2:
                    continue
                d = (c * gx - x) ** 2 + (0 if lat.kind == "linear" else (r * gy - y) ** 2)
                if d < best_d:
                    best, best_d = (c, r), d
        i, j = lat.lattice_index(best[0], best[1])
        return int(i), int(j)

    @property
    def n_tiles(self) -> int:
        return int(self.a.size)

    @property
    def positions(self) -> int:
        return self.nx * self.ny

    def _limits(self) -> np.ndarray:
        """The most elements each tile may carry (module docstring: partial tiles scaled)."""
        k = self.rules.limit
        cap = self.usable_count.copy()
        if k is not None:
            scaled = (k * self.usable_count) // self.positions
            cap = np.minimum(cap, np.where(self.full, k, scaled))
        step = self.rules.step
        return (cap // step) * step

    # -- occupancy ---------------------------------------------------------------------------
    def counts(self, mask) -> np.ndarray:
        """Elements per tile (T,) of a site mask (M,) or masks (B, M) -> (B, T)."""
        mask = np.asarray(mask, bool)
        if mask.ndim == 1:
            return np.bincount(self.tile_of_site[mask], minlength=self.n_tiles)
        out = np.zeros((mask.shape[0], self.n_tiles), np.int64)
        for k in range(mask.shape[0]):
            out[k] = np.bincount(self.tile_of_site[mask[k]], minlength=self.n_tiles)
        return out

    def occupancy(self, mask, t: int) -> np.ndarray:
        """The (ny, nx) occupancy of tile t (0-based) in a site mask."""
        arr = np.zeros((self.ny, self.nx), bool)
        sel = self.tile_of_site == t
        arr[self.local_j[sel], self.local_i[sel]] = np.asarray(mask, bool)[sel]
        return arr

    def site_table(self) -> np.ndarray:
        """(T, ny, nx) site index at each tile position (−1 where the panel has no usable
        site)."""
        table = np.full((self.n_tiles, self.ny, self.nx), -1, np.int64)
        u = np.flatnonzero(self.usable)
        table[self.tile_of_site[u], self.local_j[u], self.local_i[u]] = u
        return table

    def describe(self, mask) -> TileTable:
        """Counts, boards and orientations of a layout's tiles (:class:`TileTable`)."""
        count = self.counts(mask)
        pattern = np.zeros(self.n_tiles, np.int64)
        orient = ["r0"] * self.n_tiles
        ids: dict = {}
        for part in (True, False):  # full tiles' boards first
            for t in np.flatnonzero(self.full == part):
                arr = self.occupancy(mask, t)
                if part:
                    key, o = canonical(arr, self.transforms)
                else:  # a partial board is its own variant: its cut is part of it
                    cut = self.occupancy(self.usable, t)
                    key, o = canonical(np.stack([arr, cut]).reshape(2 * self.ny, self.nx), ["r0"])
                    key = b"p" + key
                pattern[t] = ids.setdefault(key, len(ids) + 1)
                orient[t] = o
        n_full = len({pattern[t] for t in np.flatnonzero(self.full)})
        return TileTable(count, pattern, orient, n_full, len(ids) - n_full)

    # -- geometry ----------------------------------------------------------------------------
    def corners(self, t: int) -> np.ndarray:
        """The tile's boundary rectangle (4, 2)  [m]: its positions' extent plus half a pitch
        on every side (a triangular tile's rows are staggered; the rectangle encloses them)."""
        lat = self.sites.lattice
        i0, j0 = self.origin_index
        ii = i0 + self.a[t] * self.nx + np.arange(self.nx)
        jj = j0 + self.b[t] * self.ny + np.arange(self.ny)
        gi, gj = np.meshgrid(ii, jj)
        col, row = lat.grid_index(gi, gj)
        x, y = lat.position(col, row)
        hx = lat.dx / 2
        hy = (lat.dy if lat.kind != "linear" else lat.dx) / 2
        x0, x1 = x.min() - hx, x.max() + hx
        y0, y1 = y.min() - hy, y.max() + hy
        return np.array([[x0, y0], [x1, y0], [x1, y1], [x0, y1]])

    def centre(self, t: int) -> np.ndarray:
        """The centre of the tile's boundary rectangle  [m]."""
        return self.corners(t).mean(axis=0)

    def period(self) -> tuple[float, float]:
        """The tile period (Lx, Ly)  [m]: nx·dx along x and ny·dy along y."""
        lat = self.sites.lattice
        return self.nx * lat.dx, self.ny * (lat.dy if lat.kind != "linear" else 0.0)


@dataclass
class Tiling:
    """A finished layout's tiles and chips, for the files and the report.

    Attributes
    ----------
    grid : TileGrid
    table : TileTable   counts, boards and orientations of the layout's tiles
    element_site : (N,) int   the site of each layout element (layout order = site order)
    element_tile : (N,) int   0-based tile of each element
    chips : ChipGroups or None   :func:`thinning.geometry.chips.group_chips` (with
        ``channels_per_chip``)
    """

    grid: TileGrid
    table: TileTable
    element_site: np.ndarray
    element_tile: np.ndarray
    chips: object = None

    @classmethod
    def of_mask(cls, grid: TileGrid, mask, chips=None) -> Tiling:
        site = np.flatnonzero(np.asarray(mask, bool))
        return cls(grid, grid.describe(mask), site, grid.tile_of_site[site], chips)


TILE_KEYS = {
    "size",
    "origin_mm",
    "elements_per_tile",
    "max_elements_per_tile",
    "channels_per_chip",
    "whole_chips",
    "patterns",
    "orientations",
    "compare_unconstrained",
}


def tiles_from_spec(table, src, number, choice, kind: str) -> TileRules:
    """The :class:`TileRules` of a spec's ``[tiles]`` table (``number``/``choice``: the spec's
    value checkers), every key checked with its field named."""
    size = table.get("size")
    if size is None:
        raise SpecError(f"{where(src, 'tiles.size')}missing: give [nx, ny] sites per tile")
    if isinstance(size, int) and not isinstance(size, bool):
        size = [size, size if kind != "linear" else 1]
    if not (isinstance(size, list) and len(size) in (1, 2)):
        raise SpecError(f"{where(src, 'tiles.size')}{size!r}: expected [nx, ny]")
    if len(size) == 1:
        size = [size[0], 1]
    nx, ny = (number(v, src, "tiles.size", lo=1, integer=True) for v in size)
    origin = table.get("origin_mm")
    if origin is not None:
        if not (isinstance(origin, list) and len(origin) == 2):
            raise SpecError(f"{where(src, 'tiles.origin_mm')}{origin!r}: expected [x, y] in mm")
        origin = tuple(number(v, src, "tiles.origin_mm") for v in origin)
    exact = table.get("elements_per_tile")
    cap = table.get("max_elements_per_tile")
    if exact is not None and cap is not None:
        raise SpecError(
            f"{where(src, 'tiles')}give one of elements_per_tile (identical counts) or "
            "max_elements_per_tile (a capacity), not both"
        )
    if exact is not None:
        exact = number(exact, src, "tiles.elements_per_tile", lo=1, hi=nx * ny, integer=True)
    if cap is not None:
        cap = number(cap, src, "tiles.max_elements_per_tile", lo=1, hi=nx * ny, integer=True)
    chan = table.get("channels_per_chip")
    if chan is not None:
        chan = number(chan, src, "tiles.channels_per_chip", lo=1, hi=nx * ny, integer=True)
    whole = table.get("whole_chips", False)
    compare = table.get("compare_unconstrained", False)
    for key, v in (("whole_chips", whole), ("compare_unconstrained", compare)):
        if not isinstance(v, bool):
            raise SpecError(f"{where(src, f'tiles.{key}')}{v!r}: expected true or false")
    if whole and chan is None:
        raise SpecError(f"{where(src, 'tiles.whole_chips')}needs tiles.channels_per_chip")
    for key, k in (("elements_per_tile", exact), ("max_elements_per_tile", cap)):
        if whole and k is not None and k % chan:
            raise SpecError(
                f"{where(src, f'tiles.{key}')}{k}: not a whole number of {chan}-channel chips"
            )
    patterns = table.get("patterns")
    if patterns is not None:
        patterns = number(patterns, src, "tiles.patterns", lo=1, integer=True)
    orient = choice(table.get("orientations", "none"), ORIENTATION_SETS, src, "tiles.orientations")
    return TileRules(
        (nx, ny), origin, exact, cap, chan, bool(whole), patterns, orient, bool(compare)
    )
