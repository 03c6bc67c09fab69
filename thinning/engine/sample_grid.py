"""The half-plane grid of pattern samples that both pattern engines hand over.

The half plane u ≥ 0 of a regular u-v grid (|AF(−u, −v)| = |AF(u, v)| for real
excitations), columns ``c`` at ``u = c·du`` and storage rows ``s`` holding the signed row
``r`` at ``v = r·dv``, with row 0 and column 0 at the beam peak; periodic in u and v for the
FFT grid (:mod:`thinning.engine.region` counts each sample's aliases in the region).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

__all__ = ["SampleGrid"]


@dataclass(frozen=True)
class SampleGrid:
    """Geometry of a half-plane grid of pattern samples.

    Parameters
    ----------
    nr, nc : int
        Storage rows and columns.
    du, dv : float  [1]
        Sample spacing in direction cosines (dv = 0 for a linear array: one row at v = 0).
    period : (float, float or None) or None  [1]
        (Tu, Tv) for a periodic (FFT) grid, None for a direct grid.
    n_full_cols : int
        Columns of the full (not half) grid: the FFT length along u for a periodic grid,
        ``2·nc − 1`` for a direct grid.
    full : bool
        The whole period is stored (columns wrap like rows), for complex excitations whose
        pattern has no mirror symmetry. Periodic grids only.
    """

    nr: int
    nc: int
    du: float
    dv: float
    period: tuple[float, float | None] | None
    n_full_cols: int
    full: bool = False

    @property
    def periodic(self) -> bool:
        return self.period is not None

    @property
    def max_row(self) -> int:
        """Largest |r| that one storage row represents without ambiguity."""
        return (self.nr - 1) // 2

    @property
    def signed_rows(self) -> np.ndarray:
        """Signed row index of each storage row (row s holds r = s, or s − nr past the middle)."""
        s = np.arange(self.nr)
        return np.where(s <= self.nr // 2, s, s - self.nr)

    @property
    def signed_cols(self) -> np.ndarray:
        """Signed column index of each storage column (wrapped like rows on a full grid)."""
        c = np.arange(self.nc)
        return np.where(c <= self.nc // 2, c, c - self.nc) if self.full else c

    @property
    def max_col(self) -> int:
        """Largest |c| (full grid) or c (half plane) one storage column represents."""
        return (self.nc - 1) // 2 if self.full else self.nc - 1

    @property
    def u(self) -> np.ndarray:
        return self.signed_cols * self.du

    @property
    def v(self) -> np.ndarray:
        return self.signed_rows * self.dv

    @property
    def col_mult(self) -> np.ndarray:
        """How many directions each column stands for: 2 where the mirror (−u, −v) is not stored."""
        if self.full:
            return np.ones(self.nc)
        m = np.full(self.nc, 2.0)
        m[0] = 1.0
        if self.periodic and self.n_full_cols % 2 == 0:
            m[-1] = 1.0  # the Nyquist column is its own mirror
        return m

    def flat(self, r, c) -> np.ndarray:
        """Storage index of signed row r and column c."""
        c = np.asarray(c) % self.nc if self.full else np.asarray(c)
        return (np.asarray(r) % self.nr) * self.nc + c

    def neighbour(self, r, c, dr: int, dc: int) -> np.ndarray:
        """Storage index of the neighbour (r + dr, c + dc), or −1 where the grid has none.

        Columns left of u = 0 are read from their mirror images; a periodic grid wraps.
        """
        r2 = np.asarray(r) + dr
        c2 = np.asarray(c) + dc
        if self.full:
            ok = np.ones(np.shape(c2), dtype=bool) if self.nr > 1 else (r2 == 0)
            return np.where(ok, self.flat(r2, c2), -1)
        left = c2 < 0
        r2 = np.where(left, -r2, r2)
        c2 = np.where(left, -c2, c2)
        ok = np.ones(np.shape(c2), dtype=bool)
        if self.nr == 1:
            ok &= r2 == 0
        if self.periodic:
            right = c2 > self.nc - 1
            r2 = np.where(right, -r2, r2)
            c2 = np.where(right, self.n_full_cols - c2, c2)
        else:
            ok &= (c2 <= self.nc - 1) & (np.abs(r2) <= self.max_row)
        idx = self.flat(r2, np.clip(c2, 0, self.nc - 1))
        return np.where(ok, idx, -1)
