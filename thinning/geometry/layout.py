"""A layout: the positions (and optional weights) of the active elements of one array.

A :class:`Layout` is what a design produces and what ``thinning score`` reads. Positions are in
metres. :meth:`Layout.grid_fit` finds out whether the elements sit on one axis-aligned regular
rectangular grid (within 1 µm), so that the pattern can be computed with an FFT; when they do
not, the caller falls back to exact direct summation.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from ..errors import LayoutError, where

__all__ = ["Layout", "GridFit", "GRID_TOL", "MAX_GRID_POINTS"]

#: Default position tolerance of grid fitting and duplicate detection  [m] (1 µm).
GRID_TOL = 1e-6

#: A grid with more points than this is refused by :meth:`Layout.grid_fit` (FFT too large).
MAX_GRID_POINTS = 50_000_000

#: Pitch given to a grid axis along which every element has the same coordinate, when the
#: other axis does not define one either (a single element)  [m].
_SINGLE_POINT_PITCH = 1e-3

#: Candidate pitches are the smallest gap between distinct coordinates divided by 1 … 8.
_MAX_DIVISOR = 8


@dataclass(frozen=True)
class GridFit:
    """The regular rectangular grid a layout sits on.

    Element ``i`` sits at ``origin + (col[i]·gx, row[i]·gy)`` within :attr:`residual`.

    Parameters
    ----------
    pitch : (float, float)  [m]
        Grid pitch (gx, gy). ``gy = 0.0`` for a linear array (all y equal).
    origin : (float, float)  [m]
        Position of grid index (0, 0): the grid point of the smallest x and the smallest y.
    col, row : numpy.ndarray of int64
        Grid indices of each element, ≥ 0, in the layout's order.
    residual : float  [m]
        Largest distance between an element and its grid point.
    linear : bool
        All elements have the same y (within the tolerance); ``row`` is all zero.
    """

    pitch: tuple[float, float]
    origin: tuple[float, float]
    col: np.ndarray
    row: np.ndarray
    residual: float
    linear: bool

    @property
    def shape(self) -> tuple[int, int]:
        """(rows, cols) of the index box ``[0, row.max()] × [0, col.max()]``."""
        return (int(self.row.max()) + 1, int(self.col.max()) + 1)


def _as_1d(value, dtype, n, source, name) -> np.ndarray:
    try:
        arr = np.asarray(value, dtype=dtype)
    except (TypeError, ValueError):
        raise LayoutError(
            f"{where(source, name)}cannot be read as {np.dtype(dtype).name} values"
        ) from None
    if arr.ndim != 1:
        arr = arr.ravel()
    if n is not None and arr.size != n:
        raise LayoutError(f"{where(source, name)}has {arr.size} values for {n} elements")
    return arr


@dataclass(eq=False)
class Layout:
    """Positions and weights of the active elements of one array.

    Parameters
    ----------
    x, y : numpy.ndarray of float  [m]
        Element positions in the array plane.
    amplitude : numpy.ndarray of float or None  [1]
        Linear amplitude weights (≥ 0); None means every element has weight 1.
    ids : numpy.ndarray of str or None
        Element names; None means "1" … "N" in this order (see :attr:`element_ids`).
    row, col : numpy.ndarray of int or None
        Indices on the lattice's rectangular index grid (see :mod:`thinning.geometry.lattice`), when
        known.
    source : str or None
        Where the layout came from (a file name), for messages.

    Raises
    ------
    LayoutError
        Arrays of different lengths, no elements, non-finite positions, negative or all-zero
        amplitudes.
    """

    x: np.ndarray
    y: np.ndarray
    amplitude: np.ndarray | None = None
    ids: np.ndarray | None = None
    row: np.ndarray | None = None
    col: np.ndarray | None = None
    source: str | None = None

    def __post_init__(self):
        src = self.source
        self.x = _as_1d(self.x, np.float64, None, src, "x")
        n = self.x.size
        self.y = _as_1d(self.y, np.float64, n, src, "y")
        if n == 0:
            raise LayoutError(f"{where(src, None)}a layout needs at least one element")
        if not (np.isfinite(self.x).all() and np.isfinite(self.y).all()):
            raise LayoutError(f"{where(src, 'x/y')}element positions must be finite")
        if self.amplitude is not None:
            a = _as_1d(self.amplitude, np.float64, n, src, "amplitude")
            if not np.isfinite(a).all() or (a < 0).any():
                raise LayoutError(f"{where(src, 'amplitude')}weights must be finite and >= 0")
            if not a.any():
                raise LayoutError(f"{where(src, 'amplitude')}every weight is zero")
            self.amplitude = a
        if self.ids is not None:
            self.ids = _as_1d([str(i) for i in np.ravel(self.ids)], np.str_, n, src, "ids")
        for name in ("row", "col"):
            v = getattr(self, name)
            if v is not None:
                arr = np.asarray(v)
                if arr.dtype.kind == "f":
                    if not (np.isfinite(arr).all() and (arr == np.round(arr)).all()):
                        raise LayoutError(f"{where(src, name)}grid indices must be integers")
                setattr(self, name, _as_1d(arr, np.int64, n, src, name))

    def __len__(self) -> int:
        return int(self.x.size)

    @property
    def weights(self) -> np.ndarray:
        """Amplitude weights as float64, ones when :attr:`amplitude` is None  [1]."""
        if self.amplitude is None:
            return np.ones(len(self), dtype=np.float64)
        return self.amplitude

    @property
    def element_ids(self) -> list[str]:
        """Element names: :attr:`ids`, or "1" … "N" when it is None."""
        if self.ids is None:
            return [str(i) for i in range(1, len(self) + 1)]
        return [str(i) for i in self.ids]

    @property
    def is_linear(self) -> bool:
        """True when every y is the same within 1 µm: a linear array along x."""
        return bool(np.ptp(self.y) <= GRID_TOL)

    def duplicate_pairs(self, tol: float = GRID_TOL) -> list[tuple[int, int]]:
        """Pairs (i, j), i < j, of elements closer than ``tol``, sorted.

        Parameters
        ----------
        tol : float  [m]
        """
        from scipy.spatial import cKDTree

        tree = cKDTree(np.column_stack([self.x, self.y]))
        return sorted(tuple(sorted(p)) for p in tree.query_pairs(r=tol))

    @classmethod
    def from_sites(cls, sites, mask=None, amplitude=None, source: str | None = None) -> Layout:
        """The layout of the chosen sites of a :class:`thinning.geometry.lattice.Sites`.

        Parameters
        ----------
        sites : thinning.geometry.lattice.Sites
        mask : array_like of bool, optional
            One flag per site (``len(sites)``); True = the site gets an element. None = all.
        amplitude : array_like of float, optional  [1]
            One weight per element, or one per site (then masked).
        source : str, optional

        Returns
        -------
        Layout
            Elements in the Sites order (ids "1" … "N" in that order), with the sites'
            grid ``row`` and ``col``.
        """
        m = len(sites)
        if mask is None:
            keep = np.ones(m, dtype=bool)
        else:
            keep = np.asarray(mask)
            if keep.dtype != bool or keep.shape != (m,):
                raise LayoutError(
                    f"{where(source, 'mask')}needs one True/False flag per site "
                    f"({m}), got shape {keep.shape} of {keep.dtype}"
                )
        if amplitude is not None:
            amplitude = np.asarray(amplitude, dtype=np.float64).ravel()
            if amplitude.size == m and m != int(keep.sum()):
                amplitude = amplitude[keep]
        return cls(
            x=sites.x[keep],
            y=sites.y[keep],
            amplitude=amplitude,
            row=sites.row[keep],
            col=sites.col[keep],
            source=source,
        )

    def grid_fit(self, tol: float = GRID_TOL) -> GridFit | None:
        """Find the axis-aligned regular rectangular grid the elements sit on, if any.

        Per axis: the sorted coordinates are grouped into clusters (a gap > ``tol`` starts a
        new one); with g the smallest gap between cluster centres, the pitches g/d for
        d = 1 … 8 are tried in turn. For each, the clusters get integer indices (grown
        outward from the smallest coordinate, refitting the pitch as the span grows), the
        origin and pitch are refined by least squares over all elements, and the pitch is
        accepted when every coordinate is within ``tol`` of its grid line. Finally every
        element must lie within ``tol`` of its grid point (distance in the plane) and no two
        elements may share one.

        Degenerate axes: all y equal (a linear array) gives ``gy = 0`` and row 0 for all.
        All x equal (a column of elements along y) gives ``gx = gy``. A single element (or
        all elements within ``tol`` of one point) gives pitch (1 mm, 0), i.e. a linear array
        of one element. Along such an axis the pattern is constant, so any pitch is exact.

        Parameters
        ----------
        tol : float  [m]
            Position tolerance (default 1 µm). A pitch must exceed 4·tol to be accepted.

        Returns
        -------
        GridFit or None
            None when no such grid exists, it would have more than 50 million points, or two
            elements fall on the same grid point; the caller then sums the pattern directly.
        """
        tol = float(tol)
        if not (math.isfinite(tol) and tol > 0):
            raise ValueError(f"grid_fit: tol = {tol!r} must be a finite length > 0 [m]")
        linear = bool(np.ptp(self.y) <= tol)
        fx = _fit_axis(self.x, tol)
        if fx is None:
            return None
        if linear:
            fy = (float(np.mean(self.y)), None, np.zeros(len(self), dtype=np.int64))
        else:
            fy = _fit_axis(self.y, tol)
            if fy is None:
                return None
        (ox, gx, col), (oy, gy, row) = fx, fy
        if gx is None and gy is None:
            gx, gy, linear = _SINGLE_POINT_PITCH, 0.0, True
        elif gy is None:
            gy = 0.0
        elif gx is None:
            gx = gy
        n_rows, n_cols = int(row.max()) + 1, int(col.max()) + 1
        if n_rows * n_cols > MAX_GRID_POINTS:
            return None
        flat = row * n_cols + col
        if np.unique(flat).size != flat.size:
            return None
        residual = float(np.max(np.hypot(self.x - (ox + col * gx), self.y - (oy + row * gy))))
        if residual > tol:
            return None
        return GridFit(
            pitch=(float(gx), float(gy)),
            origin=(float(ox), float(oy)),
            col=col,
            row=row,
            residual=residual,
            linear=linear,
        )


def _fit_axis(c: np.ndarray, tol: float):
    """Fit coordinates ``c`` to ``origin + k·pitch`` with integer k ≥ 0.

    Returns ``(origin, pitch, k)``, with pitch None when all coordinates form one cluster, or
    None when no candidate pitch fits.
    """
    order = np.argsort(c, kind="stable")
    s = c[order]
    starts = np.concatenate([[0], np.flatnonzero(np.diff(s) > tol) + 1])
    counts = np.diff(np.concatenate([starts, [s.size]]))
    centres = np.add.reduceat(s, starts) / counts
    label_sorted = np.repeat(np.arange(starts.size), counts)
    label = np.empty_like(label_sorted)
    label[order] = label_sorted
    if centres.size == 1:
        if np.ptp(c) > tol:
            return None
        return float(centres[0]), None, np.zeros(c.size, dtype=np.int64)
    g = float(np.min(np.diff(centres)))
    span = float(centres[-1] - centres[0])
    for d in range(1, _MAX_DIVISOR + 1):
        p = g / d
        if p <= 4 * tol or span / p > MAX_GRID_POINTS:
            break
        k_cl = _cluster_indices(centres, p)
        if k_cl is None:
            continue
        k = k_cl[label]
        origin, pitch = _line_fit(k, c)
        if pitch <= 4 * tol:
            continue
        if np.max(np.abs(c - (origin + k * pitch))) <= tol:
            return origin, pitch, k.astype(np.int64)
    return None


def _line_fit(k: np.ndarray, c: np.ndarray) -> tuple[float, float]:
    """Least-squares (origin, pitch) of c ≈ origin + k·pitch (k has ≥ 2 distinct values)."""
    kf = k.astype(np.float64)
    km, cm = kf.mean(), c.mean()
    dk = kf - km
    pitch = float(np.dot(dk, c - cm) / np.dot(dk, dk))
    return float(cm - pitch * km), pitch


def _cluster_indices(centres: np.ndarray, p: float) -> np.ndarray | None:
    """Integer index of each (sorted) cluster centre for a pitch near ``p``, or None.

    Indices are assigned over a window that doubles in span, refitting the pitch on the
    clusters assigned so far, so that a small error in the starting pitch does not build up
    into a wrong index far from the first cluster. A centre more than a quarter pitch from
    its grid line rejects the pitch.
    """
    rel = centres - centres[0]
    origin, pitch = 0.0, p
    limit = 16.0 * p
    while True:
        n = int(np.searchsorted(rel, limit, side="right"))
        q = (rel[:n] - origin) / pitch
        k = np.round(q)
        if np.any(np.abs(q - k) > 0.25):
            return None
        if k[-1] > k[0]:
            origin, pitch = _line_fit(k.astype(np.int64), rel[:n])
            if pitch <= 0:
                return None
        if n == rel.size:
            k = k.astype(np.int64)
            return k - k[0]
        limit *= 2.0
