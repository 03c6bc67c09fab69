"""Lattices of element sites, the sites that fall inside an aperture, and grating lobes.

Every lattice is described by one rectangular *index grid* of pitch (gx, gy): a site sits at
``origin + (col·gx, row·gy)`` for integer (col, row). A rectangular lattice is its own grid; a
triangular lattice (rows at pitch dy, sites at pitch dx, every other row shifted by dx/2) is the
checkerboard ``col ≡ row (mod 2)`` of the grid of pitch (dx/2, dy); a linear lattice is one row.
The FFT pattern engine works on that grid, so it sees all three the same way.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from ..errors import GeometryError, where

__all__ = [
    "LATTICE_KINDS",
    "Lattice",
    "Sites",
    "generated_lattice",
    "reciprocal_basis",
    "grating_lobe_positions",
]

LATTICE_KINDS = ("rectangular", "triangular", "linear")


def _positive(value, source, field_name) -> float:
    try:
        v = float(value)
    except (TypeError, ValueError):
        raise GeometryError(f"{where(source, field_name)}{value!r} is not a number") from None
    if not math.isfinite(v) or v <= 0:
        raise GeometryError(
            f"{where(source, field_name)}{value!r}: a lattice spacing must be a finite length > 0"
        )
    return v


@dataclass(frozen=True)
class Lattice:
    """A lattice of candidate element sites.

    Parameters
    ----------
    kind : {"rectangular", "triangular", "linear"}
    dx : float  [m]
        Pitch along x (within a row for the triangular lattice).
    dy : float  [m]
        Row pitch; ignored for the linear lattice. For an equilateral triangular lattice
        ``dy = dx·√3/2``.
    origin : (float, float)  [m]
        Position of the site with index (0, 0).
    """

    kind: str
    dx: float
    dy: float = 0.0
    origin: tuple[float, float] = (0.0, 0.0)

    def __post_init__(self):
        if self.kind not in LATTICE_KINDS:
            raise GeometryError(f"lattice: {self.kind!r} is not one of {', '.join(LATTICE_KINDS)}")
        object.__setattr__(self, "dx", _positive(self.dx, None, "lattice dx"))
        if self.kind != "linear":
            object.__setattr__(self, "dy", _positive(self.dy, None, "lattice dy"))
        try:
            ox, oy = (float(o) for o in self.origin)
        except (TypeError, ValueError):
            raise GeometryError(
                f"lattice origin: {self.origin!r} is not an (x, y) pair in metres"
            ) from None
        if not (math.isfinite(ox) and math.isfinite(oy)):
            raise GeometryError(f"lattice origin: {self.origin!r} is not a finite point")
        object.__setattr__(self, "origin", (ox, oy))

    @classmethod
    def from_mm(cls, kind, spacing_mm, origin_mm=(0.0, 0.0), source=None) -> Lattice:
        """Build a lattice from spec values in millimetres, with messages naming the key."""
        if kind not in LATTICE_KINDS:
            raise GeometryError(
                f"{where(source, 'array.lattice')}{kind!r} is not one of {', '.join(LATTICE_KINDS)}"
            )
        if kind == "linear":
            sp = spacing_mm[0] if isinstance(spacing_mm, list | tuple) else spacing_mm
            dx = _positive(sp, source, "array.spacing_mm")
            dy = 0.0
        else:
            if not isinstance(spacing_mm, list | tuple) or len(spacing_mm) != 2:
                raise GeometryError(
                    f"{where(source, 'array.spacing_mm')}{spacing_mm!r}: a {kind} lattice "
                    "needs [dx, dy] in mm"
                )
            dx = _positive(spacing_mm[0], source, "array.spacing_mm[0]")
            dy = _positive(spacing_mm[1], source, "array.spacing_mm[1]")
        try:
            ox, oy = (float(o) for o in origin_mm)
        except (TypeError, ValueError):
            raise GeometryError(
                f"{where(source, 'array.origin_mm')}{origin_mm!r} is not an [x, y] pair in mm"
            ) from None
        if not (math.isfinite(ox) and math.isfinite(oy)):
            raise GeometryError(f"{where(source, 'array.origin_mm')}{origin_mm!r} is not finite")
        return cls(kind, dx * 1e-3, dy * 1e-3, (ox * 1e-3, oy * 1e-3))

    # -- the index grid -------------------------------------------------------------------
    @property
    def grid_pitch(self) -> tuple[float, float]:
        """Pitch (gx, gy) of the rectangular index grid the lattice lives on  [m]."""
        if self.kind == "triangular":
            return (self.dx / 2.0, self.dy)
        if self.kind == "linear":
            return (self.dx, self.dx)
        return (self.dx, self.dy)

    @property
    def basis(self) -> np.ndarray:
        """Primitive vectors as the columns of a 2×2 matrix  [m] (linear: first column only)."""
        if self.kind == "triangular":
            return np.array([[self.dx, self.dx / 2.0], [0.0, self.dy]])
        if self.kind == "linear":
            return np.array([[self.dx, 0.0], [0.0, 0.0]])
        return np.array([[self.dx, 0.0], [0.0, self.dy]])

    @property
    def cell_area(self) -> float | None:
        """Area per site  [m²]; None for a linear lattice."""
        return None if self.kind == "linear" else self.dx * self.dy

    def position(self, col, row):
        """Positions of grid indices  [m]."""
        gx, gy = self.grid_pitch
        x = self.origin[0] + np.asarray(col) * gx
        y = self.origin[1] + (0.0 if self.kind == "linear" else np.asarray(row) * gy)
        return x, np.broadcast_to(y, np.shape(x)).astype(float)

    def lattice_index(self, col, row):
        """(i, j) lattice indices of grid indices: i counts sites along the row, j counts rows.

        For the triangular lattice ``col = 2·i + (j mod 2)``; otherwise (i, j) = (col, row).
        """
        col = np.asarray(col)
        row = np.asarray(row)
        if self.kind == "triangular":
            return (col - np.mod(row, 2)) // 2, row
        return col, row

    def grid_index(self, i, j):
        """Inverse of :meth:`lattice_index`."""
        i = np.asarray(i)
        j = np.asarray(j)
        if self.kind == "triangular":
            return 2 * i + np.mod(j, 2), j
        return i, j

    # -- sites ------------------------------------------------------------------------------
    def sites_in(self, aperture, source=None) -> Sites:
        """The lattice sites that the aperture accepts (inside, clear of edges and holes).

        Raises
        ------
        GeometryError
            If no site fits, or the aperture would hold an unreasonable number of sites.
        """
        gx, gy = self.grid_pitch
        x0, y0 = self.origin
        xmin, ymin, xmax, ymax = aperture.bounds
        eps = 1e-9
        c0 = math.ceil((xmin - x0) / gx - eps)
        c1 = math.floor((xmax - x0) / gx + eps)
        if self.kind == "linear":
            r0 = r1 = 0
        else:
            r0 = math.ceil((ymin - y0) / gy - eps)
            r1 = math.floor((ymax - y0) / gy + eps)
        n_box = (c1 - c0 + 1) * (r1 - r0 + 1)
        if n_box > 50_000_000:
            raise GeometryError(
                f"{where(source, 'array.spacing_mm')}the aperture spans {n_box:,} grid points at "
                "this spacing; check the units (millimetres) of the spacing and the outline"
            )
        cols, rows = np.meshgrid(np.arange(c0, c1 + 1), np.arange(r0, r1 + 1))
        cols = cols.ravel()
        rows = rows.ravel()
        if self.kind == "triangular":
            keep = (cols - rows) % 2 == 0
            cols, rows = cols[keep], rows[keep]
        x, y = self.position(cols, rows)
        ok = aperture.contains_sites(x, y)
        if not ok.any():
            raise GeometryError(
                f"{where(source, 'aperture')}no lattice site fits inside the outline with "
                f"{aperture.edge_clearance * 1e3:g} mm clearance at this spacing and origin"
            )
        return Sites(self, cols[ok], rows[ok])

    def linear_sites(self, count: int, source=None) -> Sites:
        """``count`` sites of a linear lattice, at ``origin + i·dx`` for i = 0 … count − 1."""
        if self.kind != "linear":
            raise GeometryError(
                f"{where(source, 'aperture.sites')}only a linear lattice takes a count"
            )
        if isinstance(count, bool) or not isinstance(count, int | np.integer) or count < 1:
            raise GeometryError(
                f"{where(source, 'aperture.sites')}{count!r}: needs a whole number of sites >= 1"
            )
        cols = np.arange(int(count))
        return Sites(self, cols, np.zeros_like(cols))


@dataclass(frozen=True, eq=False)
class Sites:
    """The candidate sites of one design, in a fixed order.

    The order is rows from the top (largest y first), left to right within a row; element ids
    in layout files follow it.

    Parameters
    ----------
    lattice : Lattice
    col, row : numpy.ndarray of int
        Grid indices of each site (see :class:`Lattice`).
    """

    lattice: Lattice
    col: np.ndarray
    row: np.ndarray

    def __post_init__(self):
        col = np.asarray(self.col, dtype=np.int64).ravel()
        row = np.asarray(self.row, dtype=np.int64).ravel()
        order = np.lexsort((col, -row))
        object.__setattr__(self, "col", col[order])
        object.__setattr__(self, "row", row[order])

    def __len__(self) -> int:
        return int(self.col.size)

    @property
    def x(self) -> np.ndarray:
        """Site x positions  [m]."""
        return self.lattice.position(self.col, self.row)[0]

    @property
    def y(self) -> np.ndarray:
        """Site y positions  [m]."""
        return self.lattice.position(self.col, self.row)[1]

    @property
    def grid_shape(self) -> tuple[int, int]:
        """(rows, cols) of the smallest index box holding every site."""
        return (
            int(self.row.max() - self.row.min() + 1),
            int(self.col.max() - self.col.min() + 1),
        )

    @property
    def grid_corner(self) -> tuple[int, int]:
        """(row, col) grid index of element [0, 0] of :meth:`to_grid` arrays."""
        return int(self.row.min()), int(self.col.min())

    @property
    def flat_index(self) -> np.ndarray:
        """Index of each site in a flattened ``grid_shape`` array (row-major, rows up in y)."""
        r0, c0 = self.grid_corner
        return (self.row - r0) * self.grid_shape[1] + (self.col - c0)

    def to_grid(self, values, dtype=np.float32) -> np.ndarray:
        """Scatter per-site values (shape (..., M)) into grids (..., R, C); zeros elsewhere."""
        values = np.asarray(values)
        lead = values.shape[:-1]
        R, C = self.grid_shape
        out = np.zeros(lead + (R * C,), dtype=dtype)
        out[..., self.flat_index] = values
        return out.reshape(lead + (R, C))


def _egcd(a: int, b: int) -> tuple[int, int, int]:
    """Extended Euclid: (g, s, t) with s·a + t·b = g = gcd(a, b) ≥ 0."""
    s0, s1, t0, t1 = 1, 0, 0, 1
    while b:
        q, a, b = a // b, b, a - (a // b) * b
        s0, s1 = s1, s0 - q * s1
        t0, t1 = t1, t0 - q * t1
    if a < 0:
        a, s0, t0 = -a, -s0, -t0
    return a, s0, t0


def generated_lattice(col, row) -> np.ndarray:
    """Basis of the integer lattice spanned by the differences of a set of grid indices.

    The array factor of elements on these indices is periodic exactly with the reciprocal of
    this lattice, so its grating lobes are where that reciprocal lattice says. A thinned
    triangular layout, for example, generates the checkerboard lattice {(2, 0), (1, 1)}.

    Parameters
    ----------
    col, row : array_like of int

    Returns
    -------
    numpy.ndarray, shape (2, 2), int
        Columns are the basis vectors (col, row), in Hermite normal form
        ``[[h, p], [0, g]]`` with 0 ≤ p < h. A zero column stands for a missing dimension
        (all indices on one row, or a single index).
    """
    col = np.asarray(col, dtype=np.int64).ravel()
    row = np.asarray(row, dtype=np.int64).ravel()
    if col.size < 2:
        return np.zeros((2, 2), dtype=np.int64)
    dc = (col - col[0]).tolist()
    dr = (row - row[0]).tolist()
    pivot = None  # vector with the gcd of the row components
    h = 0  # gcd of the column components of vectors with zero row component
    for c, r in zip(dc, dr, strict=True):
        if r == 0:
            h = math.gcd(h, c)
            continue
        if pivot is None:
            pivot = (c, r)
            continue
        pc, pr = pivot
        g, s, t = _egcd(pr, r)
        h = math.gcd(h, (r // g) * pc - (pr // g) * c)
        pivot = (s * pc + t * c, g)
    basis = np.zeros((2, 2), dtype=np.int64)
    basis[0, 0] = abs(h)
    if pivot is not None:
        pc, pr = pivot
        if pr < 0:
            pc, pr = -pc, -pr
        if h:
            pc %= abs(h)
        basis[:, 1] = (pc, pr)
    return basis


def reciprocal_basis(basis: np.ndarray, wavelength: float) -> np.ndarray:
    """Reciprocal lattice in direction cosines: columns b with bᵢ·aⱼ = λ·δᵢⱼ.

    Parameters
    ----------
    basis : (2, 2) array  [m]
        Lattice vectors as columns; a zero second column means a linear lattice along the
        first vector.
    wavelength : float  [m]

    Returns
    -------
    (2, 2) array  [1]
        For a lattice of rank one (either column of ``basis`` zero) the single reciprocal
        vector ``λ·a/|a|²`` of the non-zero column ``a`` comes first and the second column is
        zero; both are zero for a zero basis (a single site).
    """
    basis = np.asarray(basis, dtype=float)
    a1, a2 = basis[:, 0], basis[:, 1]
    if not np.any(a2) or not np.any(a1):
        # One row or one column of sites (or a single site): the array factor varies along
        # the one lattice vector only, and its replicas are lines through m·λ·a/|a|².
        a = a2 if not np.any(a1) else a1
        if not np.any(a):
            return np.zeros((2, 2))
        return np.column_stack([wavelength * a / float(a @ a), np.zeros(2)])
    return wavelength * np.linalg.inv(basis).T


def grating_lobe_positions(basis: np.ndarray, wavelength: float, scan_max: float) -> np.ndarray:
    """Grating lobes that enter the visible region for some scan direction in the cone.

    With phase steering to (u₀, v₀) the array factor's replicas sit at G + (u₀, v₀) for every
    reciprocal-lattice vector G ≠ 0; one becomes visible (|·| ≤ 1) for some |(u₀, v₀)| ≤
    sin θmax exactly when |G| ≤ 1 + sin θmax (Mailloux, ch. 1; references.md row 10). A lobe
    exactly on the horizon counts as entering.

    Parameters
    ----------
    basis : (2, 2) array  [m]
    wavelength : float  [m]
    scan_max : float  [rad]

    Returns
    -------
    numpy.ndarray, shape (k, 2)
        The offending G vectors (u, v), nearest first; empty when the cone is free of them.
    """
    b = reciprocal_basis(basis, wavelength)
    radius = 1.0 + math.sin(scan_max)
    # G = m·b₁ + n·b₂ has m = G·a₁/λ and n = G·a₂/λ (a: the direct basis), so
    # |m| ≤ radius·|a₁|/λ and |n| ≤ radius·|a₂|/λ; for rank one |a| = λ/|b|.
    if not np.any(b[:, 0]):
        return np.zeros((0, 2))
    if np.any(b[:, 1]):
        a = np.asarray(basis, dtype=float)
        n1 = int(math.ceil(radius * np.linalg.norm(a[:, 0]) / wavelength)) + 1
        n2 = int(math.ceil(radius * np.linalg.norm(a[:, 1]) / wavelength)) + 1
    else:
        n1 = int(math.ceil(radius / np.linalg.norm(b[:, 0]))) + 1
        n2 = 0
    m, n = np.meshgrid(np.arange(-n1, n1 + 1), np.arange(-n2, n2 + 1), indexing="ij")
    g = np.outer(m.ravel(), b[:, 0]) + np.outer(n.ravel(), b[:, 1])
    r = np.hypot(g[:, 0], g[:, 1])
    keep = (r > 1e-12) & (r <= radius * (1 + 1e-12))
    g, r = g[keep], r[keep]
    return g[np.argsort(r, kind="stable")]
