"""The state a swap move starts from: one layout's stored transform, power and region.

:meth:`thinning.search.problem.ThinningProblem.evaluate_swaps` scores K moves of one layout
from this state without an FFT per move (its docstring gives the algebra); after an accepted
move the state is advanced by the separable terms of the switched sites
(:meth:`SwapBase.advance`) instead of being transformed again.
"""

from __future__ import annotations

import numpy as np

__all__ = ["SwapBase", "SWAP_ADVANCE_GENES"]

#: a base layout this many genes (or fewer) from the last one is updated, not transformed
SWAP_ADVANCE_GENES = 4


class SwapBase:
    """One layout's stored transform, power and sidelobe region, shared by its swap moves.

    Parameters
    ----------
    engine : FFTPatternEngine
    genome : (G,) bool
    grid : (R, C) array   the layout's excitation grid
    f0 : (nr, nc) complex array, optional   its stored transform (computed if not given)
    shared : dict, optional   what every layout of the problem shares (twiddle factors, the
        transform of the region weights), filled on first use
    """

    def __init__(self, engine, genome, grid, f0=None, shared=None):
        from ..engine import fastpath

        region = engine.region
        g = region.grid
        self.engine, self.genome = engine, genome
        self.shared = {} if shared is None else shared
        self.grid = np.ascontiguousarray(grid, dtype=np.float64)
        if f0 is None:
            f0 = engine.transform(self.grid.astype(np.float32))[0].astype(np.complex128)
        self.f0 = f0
        self.f_parts = np.ascontiguousarray(f0.ravel().view(np.float64).reshape(-1, 2))
        self.p0 = (f0.real**2 + f0.imag**2).ravel()
        self.peak = float(self.p0[0])  # a swap keeps Σa, so the beam peak
        t = region.fast_tables(np.float64)
        lev, removed = fastpath.call(
            fastpath.main_beam_cut,
            self.p0,
            t.w_flat,
            t.w_parent,
            t.w_rim,
            t.w_w0,
            t.w_capped,
            t.w_start,
        )
        win = t.windows[lev]
        self.pos = t.w_pos[lev]
        self.removed = np.asarray(removed, dtype=np.float64)
        self.weff = region.weight.copy()
        self.weff[win.flat] -= self.removed
        self.inside = self.weff > 0
        amp = np.sqrt(self.p0)
        self.amp = amp
        self.top = float(amp[self.inside].max()) if self.inside.any() else 0.0
        # under a mask: g of every sample with this layout's main beam taken out
        self.geff = region.gain.copy()
        self.geff[win.flat] = region.effective_gain(self.removed, win.flat)
        self.wsum = float(self.weff.sum())
        self.total = float(self.weff @ self.p0)
        # for the moves' ASL: the layout's elements and its main-beam samples
        on_r, on_c = np.nonzero(self.grid)
        self.on = (on_r.astype(np.int64), on_c.astype(np.int64), self.grid[on_r, on_c].copy())
        mb = self.removed > 0
        flats = win.flat[mb]
        self.main_beam = (
            (flats // g.nc).astype(np.int64),
            (flats % g.nc).astype(np.int64),
            self.removed[mb],
            np.ascontiguousarray(self.f_parts[flats]),
        )
        self.h_cache = np.zeros(self.grid.shape + (2,))
        self.h_have = np.zeros(self.grid.shape, dtype=np.bool_)
        self._ext = {}

    def twiddles(self):
        """exp(−2πi t/Pr) and exp(−2πi t/Pc) for t < P, complex and as (P, 2) real and
        imaginary parts."""
        if "twiddles" not in self.shared:
            pr, pc = self.engine.pad
            tr = np.exp(-2j * np.pi * np.arange(pr) / pr)
            tc = np.exp(-2j * np.pi * np.arange(pc) / pc)
            self.shared["twiddles"] = (
                tr,
                tc,
                np.ascontiguousarray(np.column_stack([tr.real, tr.imag])),
                np.ascontiguousarray(np.column_stack([tc.real, tc.imag])),
            )
        return self.shared["twiddles"]

    def region_transform(self):
        """Ŵ = fft2(region weights) on the padded grid, (Pr, Pc, 2) real and imaginary."""
        if "region" not in self.shared:
            import scipy.fft

            g = self.engine.region.grid
            w = scipy.fft.fft2(self.engine.region.weight.reshape(g.nr, g.nc), s=self.engine.pad)
            self.shared["region"] = np.ascontiguousarray(np.stack([w.real, w.imag], axis=-1))
        return self.shared["region"]

    def advance(self, genome, rows, cols, signs) -> SwapBase:
        """The layout with the grid sites (rows, cols) switched by ±1 (``signs``): its
        transform by the separable updates F += ±exp(−2πi(s·j/Pr + c·i/Pc)), no FFT."""
        pr, pc = self.engine.pad
        g = self.engine.region.grid
        s_idx = np.arange(g.nr)
        c_idx = np.arange(g.nc)
        tr, tc = self.twiddles()[:2]
        f0 = self.f0.copy()
        grid = self.grid.copy()
        for j, i, sg in zip(rows, cols, signs, strict=True):
            ey = sg * tr[(s_idx * j) % pr]
            ex = tc[(c_idx * i) % pc]
            f0 += ey[:, None] * ex[None, :]
            grid[j, i] += sg
        return SwapBase(self.engine, genome, grid, f0, self.shared)

    def ext(self, w: int) -> np.ndarray:
        """Samples that can hold the highest or a candidate lobe of a move switching w sites
        each way, with their neighbours."""
        if w not in self._ext:
            eng = self.engine
            dmax = 2.0 * w
            if eng.region.masked:  # the same bound on p·g (engine.mask.swap_floor)
                from ..engine.mask import swap_floor

                low = swap_floor(self.p0, self.geff, self.inside, dmax, eng.margin_db)
                near = np.flatnonzero(self.inside & (self.geff > 0) & (self.amp >= low))
            else:
                low = max(0.0, (self.top - dmax) * 10 ** (-eng.margin_db / 20) - dmax)
                near = np.flatnonzero(self.inside & (self.amp >= low))
            nbr = eng.region.fast_tables(np.float64).nbr  # the 8 neighbours of each sample
            ext = np.unique(np.concatenate([near, nbr[near].ravel()]))
            self._ext[w] = ext[ext >= 0].astype(np.int64)
        return self._ext[w]

    def asl_change(self, rows, cols, signs):
        """Σ w|F + Δ|² − Σ w|F|² of each move (:func:`thinning.engine.fastpath.swap_asl_terms`)."""
        from ..engine import fastpath

        cross, quad = fastpath.call(
            fastpath.swap_asl_terms,
            *self.on,
            self.region_transform(),
            *self.main_beam,
            *self.twiddles()[2:],
            rows,
            cols,
            signs,
            self.h_cache,
            self.h_have,
        )
        return cross + quad
