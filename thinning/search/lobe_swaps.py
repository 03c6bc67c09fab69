"""Swap moves aimed at the worst lobes: a local search that scales to 262,000 sites.

Switching the site at grid index (j, i) on or off adds ±exp(−2πi(r·j/Pr + c·i/Pc)) to the
transform sample (r, c) of the layout (the stored half plane of the zero-padded transform of
:class:`thinning.engine.pattern.FFTPatternEngine`), and ±exp(j(kx_i·u + ky_j·v)) to the array
factor at any direction (u, v): the change of a lobe's value for switching a site is one
complex exponential. A local search can therefore follow the worst lobes of a layout exactly
without transforming it again:

1. **Worst lobes** (:class:`WorstLobes`). One full transform of the layout gives every
   sample; its main beam is cut by the engine's rule (along each ray to the first null) and
   the samples of the sidelobe region within ``lobe_depth_db`` of the highest one (at most
   ``lobe_count``) are kept with their complex values AF_s. The local maxima among them are
   the lobes: each placed at the vertex of a parabola (in dB) through its samples, the
   :data:`CLIMB` highest climbed on the exact pattern, and their exact values taken there
   (the parabola alone misses a peak by up to 0.1 dB).
2. **Scores of every site.** The change of Φ = Σ_s w_s |AF_s|², w_s = (|AF_s|²/max)^(κ−1),
   for switching site n is ±G_n + Σ w exactly, with

   .. math::  G_n = 2\\,\\mathrm{Re} \\sum_s w_s\\, \\overline{AF_s}\\, e^{-2\\pi i (r_s j_n/P_r
              + c_s i_n/P_c)},

   K·N terms for K lobes and N sites, computed for all sites at once as one pruned inverse
   transform of the K weighted lobe values (the rows of the columns that hold a lobe, then the
   rows of the grid), O(P log P) whatever K.
3. **Moves.** The best candidates (the on-genes of largest G, the off-genes of the same class
   of smallest G) enter a linear programme that lowers the highest kept value to first order
   (:meth:`WorstLobes.lp_move`); failing that, the candidates are paired best first and the
   prefix of pairs with the lowest Φ (the soft-max of the kept values, the highest of which
   must fall) is taken (:meth:`WorstLobes.best_move`). Either move is checked on the exact
   values of every kept sample and lobe after it: AF + Σ (phasors switched on − off), from
   exact tables of exp(−2πi t/P) and the peaks' row and column factors. Every sample outside
   the kept ones stood below the threshold amplitude A_t and moves by at most one per switched
   site (and, as a random walk, rarely by more than :data:`DRIFT`·√S after S switched sites):
   while A_t plus that drift stays below the highest kept value, the kept values hold the
   highest sample; then (or when no move helps) the round ends.
4. **Check.** The layout is evaluated in full (the transform, the candidate lobes refined on
   the exact pattern: :meth:`thinning.search.Tracker.evaluate`), which counts it and keeps the
   best; the next round starts from a new transform. A round that does not improve the
   objective returns to the best layout and moves more cautiously (the drift bound four times
   larger, then the strict one), then digs deeper (``lobe_depth_db`` + 1 dB, twice the lobes), and
   after :data:`STALL_ROUNDS` fruitless rounds at the deepest lets the caller go on.

So a full transform is taken once per round, and a round moves as many sites as the margin of
the kept lobes allows (tens to hundreds on a large aperture). :func:`polish` is the API other
methods call on their best layout; the ``density`` method calls it after its start
(:mod:`thinning.search.density`). The robust objective and ``objective = "asl"`` are not
served (the moves aim at peaks of the nominal pattern): :func:`polish` then returns at once.
"""

from __future__ import annotations

import math
import numbers

import numpy as np
import scipy.fft

from ..errors import SpecError, where

__all__ = ["WorstLobes", "polish", "POLISH_OPTIONS"]

#: Options of :func:`polish` and their defaults.
POLISH_OPTIONS = {
    "lobe_depth_db": 1.5,  # kept samples: within this of the highest  [dB]
    "lobe_count": 4096,  # at most this many kept samples
    "lobe_focus": 8.0,  # κ: weight (|AF|²/max)^κ of each kept sample
    "lobe_step": 256,  # at most this many swaps in one move
}
#: Deepest kept band and most kept samples the search digs to when a round fails  [dB].
MAX_DEPTH_DB, MAX_LOBES = 4.0, 8192
#: Kept samples × swaps of one move scored together, at most (the move's phasor table).
MOVE_TABLE = 1 << 22
#: The samples outside the kept ones are taken to drift by at most DRIFT·√S after S switched
#: sites (a random walk of unit steps; at most S in any case); four times that after a failed
#: round, up to MAX_DRIFT, past which the strict bound S holds.
DRIFT, MAX_DRIFT = 3.0, 40.0
#: Lobe peaks kept per round (placed by parabolas), and how many of the highest are climbed on
#: the exact pattern.
PEAKS, CLIMB = 512, 16
#: Candidate genes (per side and class) and highest kept values of a programmed move.
LP_CANDIDATES, LP_LOBES = 64, 128
#: The programme's candidates of each side over all classes, in units of LP_CANDIDATES: a
#: tiled panel has a class per tile (1,024 at 65,536 sites), and 64 per class would give
#: HiGHS tens of thousands of columns for one move.
LP_CLASS_CAP = 16
#: Rounds without improvement, at the deepest band, that end the polish.
STALL_ROUNDS = 2


def _options(problem, options: dict | None) -> dict:
    src = getattr(problem, "source", None)
    out = dict(POLISH_OPTIONS)
    for key, default in POLISH_OPTIONS.items():
        v = (options or {}).get(key, default)
        integer = isinstance(default, int)
        bad = isinstance(v, bool) or not isinstance(v, numbers.Real) or not math.isfinite(v)
        if not bad:
            bad = v <= 0 or (integer and not float(v).is_integer())
        if bad:
            what = "a whole number >= 1" if integer else "a positive number"
            raise SpecError(f"{where(src, f'search.{key}')}{v!r}: expected {what}")
        out[key] = int(v) if integer else float(v)
    return out


def _twiddle_table(tw, index, n) -> np.ndarray:
    """tw[(index[k]·t) mod P] for t < n, (len(index), n), built a block of rows at a time."""
    out = np.empty((index.size, n), dtype=tw.dtype)
    t = np.arange(n, dtype=np.int64)
    for a in range(0, index.size, 1024):
        out[a : a + 1024] = tw[np.outer(index[a : a + 1024], t) % tw.size]
    return out


def _transform(grid, pad, dtype) -> np.ndarray:
    """The engine's stored half plane of the padded transform, (Pr, nc), in ``dtype``."""
    pr, pc = pad
    a = np.asarray(grid, dtype=dtype)
    f = scipy.fft.rfft(a, n=pc, axis=-1)
    if pr > 1:
        f = scipy.fft.fft(f, n=pr, axis=-2)
    return f


class WorstLobes:
    """The worst lobes of one layout, their exact values, and what swaps do to them.

    Parameters
    ----------
    problem : ThinningProblem   (its FFT engine's grid and sidelobe region are used)
    genome : (G,) bool
    depth_db : float  [dB]   keep the sidelobe samples within this of the highest
    max_lobes : int          ... at most this many (the highest)
    dtype : numpy float dtype   precision of the transform (float64 for exact checks)

    Attributes
    ----------
    rows, cols : (K,) int    storage row and column of each kept sample
    af : (K,) complex128     its transform value (|af|² is |AF|² there)
    peak : float             |Σa|², the beam peak (kept by swaps)
    threshold : float        amplitude below which every other sidelobe sample stood
    switched : int           sites switched since the transform
    """

    def __init__(
        self,
        problem,
        genome,
        depth_db=1.5,
        max_lobes=4096,
        max_peaks=1024,
        climb=64,
        dtype=np.float32,
        drift=DRIFT,
    ):
        from ..engine import fastpath

        eng = problem.engine
        self.problem = problem
        self.genome = np.asarray(genome, dtype=bool).copy()
        mask = problem.to_masks(self.genome)[0]
        grid = problem.sites.to_grid(mask, dtype=dtype)
        f = _transform(grid, eng.pad, dtype)
        nc = f.shape[1]
        flat_f = f.reshape(-1)
        p = np.abs(flat_f)
        p *= p
        region = eng.region
        tables = region.fast_tables(np.float32)
        lev, removed = fastpath.call(
            fastpath.main_beam_cut,
            p,
            tables.w_flat,
            tables.w_parent,
            tables.w_rim,
            tables.w_w0,
            tables.w_capped,
            tables.w_start,
        )
        win = tables.windows[lev]
        level = np.where(region.weight > 0, p, 0)
        gone = win.flat[(win.weight - np.asarray(removed)) <= 0]
        level[gone] = 0
        top = float(level.max())
        thr = top * 10 ** (-float(depth_db) / 10)
        idx = np.flatnonzero(level >= thr)
        if idx.size > max_lobes:
            idx = idx[np.argpartition(-level[idx], max_lobes - 1)[:max_lobes]]
            thr = float(level[idx].min())
        self.flat = idx
        self.rows = idx // nc
        self.cols = idx % nc
        self.af = flat_f[idx].astype(np.complex128)
        self.peak = float(mask.sum()) ** 2
        self._peaks(problem, p, level, idx, tables, mask, max_peaks, climb)
        self.threshold = math.sqrt(thr)
        self.switched = 0
        self._drift = drift
        pr, pc = eng.pad
        self.pad = (pr, pc)
        self._tw_r = np.exp(-2j * np.pi * np.arange(pr) / pr)
        self._tw_c = np.exp(-2j * np.pi * np.arange(pc) / pc)
        r0, c0 = problem.sites.grid_corner
        table = problem.gene_sites()
        self._gene_j = np.where(table >= 0, problem.sites.row[np.maximum(table, 0)] - r0, 0)
        self._gene_i = np.where(table >= 0, problem.sites.col[np.maximum(table, 0)] - c0, 0)
        self._gene_ok = table >= 0
        self._width = int((table >= 0).sum(axis=1).max()) if table.size else 1
        self.grid_shape = grid.shape
        # exp(−2πi r·j/Pr) and exp(−2πi c·i/Pc) of every kept sample for every grid row and
        # column: a site's phasor at a sample is one product of two table entries
        cdt = np.complex128 if np.dtype(dtype) == np.float64 else np.complex64
        nr, ncol = grid.shape
        self._tr = _twiddle_table(self._tw_r.astype(cdt), self.rows, nr)
        self._tc = _twiddle_table(self._tw_c.astype(cdt), self.cols, ncol)

    def _peaks(self, problem, p, level, idx, tables, mask, max_peaks, climb):
        """The lobes among the kept samples (local maxima of the region), their peaks placed
        by a parabola through the samples (in dB, along u and v) and their exact values."""

        eng = problem.engine
        g = eng.grid
        nb = tables.nbr[idx]
        vals = np.where(nb >= 0, level[np.maximum(nb, 0)], -1.0)
        top = idx[level[idx] >= vals.max(axis=1)]
        if top.size > max_peaks:
            top = top[np.argpartition(-level[top], max_peaks - 1)[:max_peaks]]
        nb = tables.nbr[top]
        logc = np.log(np.maximum(p[top].astype(np.float64), 1e-300))

        def vertex(lo_k, hi_k):
            lo = np.where(nb[:, lo_k] >= 0, p[np.maximum(nb[:, lo_k], 0)], p[top])
            hi = np.where(nb[:, hi_k] >= 0, p[np.maximum(nb[:, hi_k], 0)], p[top])
            lo = np.log(np.maximum(lo.astype(np.float64), 1e-300))
            hi = np.log(np.maximum(hi.astype(np.float64), 1e-300))
            den = lo - 2 * logc + hi
            d = np.where(den < 0, 0.5 * (lo - hi) / np.where(den < 0, den, -1.0), 0.0)
            return np.clip(d, -0.5, 0.5)

        s_, c_ = np.divmod(top, g.nc)
        u = (g.signed_cols[c_] + vertex(3, 4)) * g.du
        v = (g.signed_rows[s_] + (vertex(1, 6) if g.nr > 1 else 0.0)) * g.dv
        self._kx, self._ky = problem.engine._phases()  # centred as in GridExact
        a = problem.sites.to_grid(mask, dtype=np.float64)

        def values(u, v):
            """AF at the points: Σ_j e^{j ky v} Σ_i a e^{j kx u}, two matrix products."""
            ex = np.exp(1j * np.outer(u, self._kx))  # (L, C)
            ey = np.exp(1j * np.outer(v, self._ky))  # (L, R)
            t = a @ ex.T  # (R, L)
            return np.einsum("lj,jl->l", ey, t), ex, ey

        ap, self._ex, self._ey = values(u, v)
        # the highest few climbed on the exact pattern (the parabola misses a peak by up to
        # 0.1 dB), their values taken again where they end
        if climb > 0 and ap.size:
            from ..engine.exact import GridExact, refine_peaks

            k = min(climb, ap.size)
            hi = np.argpartition(-np.abs(ap), k - 1)[:k]
            ex = GridExact(problem.sites.to_grid(mask, dtype=np.float64), eng.pitch, eng.wavelength)
            _, u[hi], v[hi] = refine_peaks(
                ex, u[hi], v[hi], (g.du, g.dv), eng.radius, linear=eng.linear, iterations=4
            )
            ap[hi], self._ex[hi], self._ey[hi] = values(u[hi], v[hi])
        self.peak_u, self.peak_v, self.ap = u, v, ap

    # -- values ---------------------------------------------------------------------------
    @property
    def amplitude(self) -> np.ndarray:
        return np.abs(np.concatenate([self.af, self.ap]))

    @property
    def highest(self) -> float:
        """Highest kept amplitude |AF|, samples and lobe peaks (the highest of the sidelobe
        region, refined, while the margin holds)."""
        a = self.amplitude
        return float(a.max()) if a.size else 0.0

    @property
    def margin_holds(self) -> bool:
        """Does every sample outside the kept ones still stand below the highest kept one?"""
        return self.threshold + self.drift(self.switched) <= self.highest

    def drift(self, switched):
        """How far a sample outside the kept ones may have risen after ``switched`` sites:
        at most one per site; a random walk of unit steps rarely passes 3·√S (:data:`DRIFT`)."""
        s = np.asarray(switched, dtype=float)
        return s if self._drift is None else np.minimum(s, self._drift * np.sqrt(s))

    def phasors(self, genes, which=None) -> np.ndarray:
        """Σ over each gene's sites of exp(−2πi(r·j/Pr + c·i/Pc)) at every kept sample (or
        the samples ``which``): what switching the gene on adds to them, (K, len(genes))."""
        genes = np.atleast_1d(np.asarray(genes, dtype=np.int64))
        tr = self._tr if which is None else self._tr[which]
        tc = self._tc if which is None else self._tc[which]
        out = np.zeros((tr.shape[0], genes.size), dtype=np.complex128)
        for s in range(self._width):
            ok = self._gene_ok[genes, s]
            if not ok.any():
                continue
            ph = tr[:, self._gene_j[genes, s]] * tc[:, self._gene_i[genes, s]]
            out += np.where(ok[None, :], ph, 0)
        return out

    def peak_phasors(self, genes, which=None) -> np.ndarray:
        """What switching each gene on adds to the lobe peaks (or the peaks ``which``): Σ over
        its sites of exp(j(kx·u + ky·v)), one complex exponential per site and peak (a product
        of the row and column factors kept per peak), (L, len(genes))."""
        genes = np.atleast_1d(np.asarray(genes, dtype=np.int64))
        ex = self._ex if which is None else self._ex[which]
        ey = self._ey if which is None else self._ey[which]
        out = np.zeros((ex.shape[0], genes.size), dtype=np.complex128)
        for s in range(self._width):
            ok = self._gene_ok[genes, s]
            if not ok.any():
                continue
            ph = ex[:, self._gene_i[genes, s]] * ey[:, self._gene_j[genes, s]]
            out += np.where(ok[None, :], ph, 0)
        return out

    def swap_values(self, off_genes, on_genes) -> np.ndarray:
        """Exact values of the kept samples and lobe peaks (stacked) after each of K single
        swaps (gene ``off[k]`` switched off, ``on[k]`` on): (K_samples + L, K) complex."""
        return np.concatenate([self.af, self.ap])[:, None] + self.move_phasors(off_genes, on_genes)

    def move_phasors(self, off_genes, on_genes) -> np.ndarray:
        """Change of the kept samples and lobe peaks (stacked) by each swap, (K + L, n)."""
        return np.vstack(
            [
                self.phasors(on_genes) - self.phasors(off_genes),
                self.peak_phasors(on_genes) - self.peak_phasors(off_genes),
            ]
        )

    # -- scores of every site -------------------------------------------------------------
    def gene_scores(self, focus: float = 8.0) -> tuple[np.ndarray, float]:
        """G for every gene (the sum over its sites, see the module docstring) and Σ w.

        Switching a gene off changes Φ by about −G + w·Σw and on by +G + w·Σw (w sites)."""
        pr, pc = self.pad
        amp2 = np.abs(self.af) ** 2
        w = (amp2 / amp2.max()) ** (focus - 1.0) if amp2.size else amp2
        c = w * self.af
        cols, col_at = np.unique(self.cols, return_inverse=True)
        h = np.zeros((pr, cols.size), dtype=np.complex128)
        np.add.at(h, (self.rows, col_at), c)
        nr, ncol = self.grid_shape
        h1 = scipy.fft.ifft(h, axis=0)[:nr] * pr if pr > 1 else h
        y = np.zeros((nr, pc), dtype=np.complex128)
        y[:, cols] = h1
        g = 2.0 * (scipy.fft.ifft(y, axis=1)[:, :ncol].real * pc)
        table = self.problem.gene_sites()
        mask = self.problem.sites.flat_index
        flat_g = g.reshape(-1)[mask]  # per site
        per_site = np.where(table >= 0, flat_g[np.maximum(table, 0)], 0.0)
        return per_site.sum(axis=1), float(w.sum())

    # -- moves ----------------------------------------------------------------------------
    def best_move(self, focus: float, max_step: int):
        """The best prefix of the pairs ordered by score: (off genes, on genes, new values)
        or None when no prefix lowers the highest kept sample."""
        prob = self.problem
        g_score, _ = self.gene_scores(focus)
        offs, ons, gains = [], [], []
        for idx in prob.class_members():
            on_now = idx[self.genome[idx]]
            off_now = idx[~self.genome[idx]]
            k = min(max_step, on_now.size, off_now.size)
            if k == 0:
                continue
            a = on_now[np.argpartition(-g_score[on_now], k - 1)[:k]]
            a = a[np.argsort(-g_score[a], kind="stable")]
            b = off_now[np.argpartition(g_score[off_now], k - 1)[:k]]
            b = b[np.argsort(g_score[b], kind="stable")]
            offs.append(a)
            ons.append(b)
            gains.append(g_score[a] - g_score[b])
        if not offs:
            return None
        off = np.concatenate(offs)
        on = np.concatenate(ons)
        step = max(1, min(max_step, MOVE_TABLE // max(self.af.size + self.ap.size, 1)))
        order = np.argsort(-np.concatenate(gains), kind="stable")[:step]
        off, on = off[order], on[order]
        delta = np.cumsum(self.move_phasors(off, on), axis=1)  # (K + L, m)
        ref = self.highest
        both = np.concatenate([self.af, self.ap])
        now = self.softmax(both, focus, ref)
        new = both[:, None] + delta
        after = self.softmax(new, focus, ref)
        highest = np.abs(new).max(axis=0)
        after[highest >= self.highest] = np.inf  # the highest must fall
        # ... and the other samples still below the highest kept one
        width = prob.orbit_size[prob.gene_orbit[off]] + prob.orbit_size[prob.gene_orbit[on]]
        after[self.threshold + self.drift(self.switched + np.cumsum(width)) > highest] = np.inf
        m = int(np.argmin(after))
        if not after[m] < now * (1.0 - 1e-12):
            return None
        return off[: m + 1], on[: m + 1], both + delta[:, m]

    def lp_move(self, focus: float, candidates: int = 256, lobes: int = 1024):
        """A coordinated move: which of the best candidate genes to switch so that the highest
        of the kept samples and lobe peaks falls most, as a linear programme.

        Each kept value moves to first order along its own phase, |AF + Δ| ≈ |AF| +
        Re(e^{−j arg AF} Δ), so with x ∈ [0, 1] for switching each candidate (the on-genes of
        largest score G and the off-genes of smallest, ``candidates`` of each per class)

        .. math::  \\min t \\quad |AF_s| + \\mathrm{Re}\bigl(e^{-j\arg AF_s}
                   \textstyle\\sum_n x_n \\Delta_{s,n}\bigr) \\le t,
                   \\quad \\sum_{\\mathrm{off}} x = \\sum_{\\mathrm{on}} x \\ \text{(per class)},
                   \\quad \\sum w_n x_n \\le \text{margin},

        over the ``lobes`` highest kept values (solved by HiGHS); the solution, rounded
        (x ≥ 1/2, the counts matched by dropping the least-wanted extras), is checked on the
        exact values of every kept sample and peak. Returns (off, on, values) or None."""
        from scipy.optimize import linprog

        prob = self.problem
        g_score, _ = self.gene_scores(focus)
        offs, ons, cls = [], [], []
        for c, idx in enumerate(prob.class_members()):
            on_now = idx[self.genome[idx]]
            off_now = idx[~self.genome[idx]]
            k = min(candidates, on_now.size, off_now.size)
            if k == 0:
                continue
            offs.append(on_now[np.argpartition(-g_score[on_now], k - 1)[:k]])
            ons.append(off_now[np.argpartition(g_score[off_now], k - 1)[:k]])
            cls.append(c)
        if not offs:
            return None
        # many classes (a tile each): the programme keeps the best LP_CLASS_CAP·candidates of
        # each side over all classes, and the classes left with both sides
        cap = LP_CLASS_CAP * candidates
        if sum(o.size for o in offs) > cap:
            all_off, all_on = np.concatenate(offs), np.concatenate(ons)
            keep = np.zeros(prob.n_genes, dtype=bool)
            keep[all_off[np.argpartition(-g_score[all_off], cap - 1)[:cap]]] = True
            keep[all_on[np.argpartition(g_score[all_on], cap - 1)[:cap]]] = True
            kept = []
            for o, p_, c in zip(offs, ons, cls, strict=True):
                o, p_ = o[keep[o]], p_[keep[p_]]
                if o.size and p_.size:
                    kept.append((o, p_, c))
            if not kept:
                return None
            offs, ons, cls = (list(t) for t in zip(*kept, strict=True))
        both = np.concatenate([self.af, self.ap])
        amp = np.abs(both)
        rows = np.argsort(-amp)[: min(lobes, amp.size)]
        genes = np.concatenate(offs + ons)
        sign = np.concatenate(
            [-np.ones(sum(o.size for o in offs)), np.ones(sum(o.size for o in ons))]
        )
        ph = self.move_phasors_of(genes, rows) * sign[None, :]  # (R, n)
        rot = np.exp(-1j * np.angle(both[rows]))
        a_ub = np.hstack([(ph * rot[:, None]).real, -np.ones((rows.size, 1))])
        b_ub = -amp[rows]
        width = prob.orbit_size[prob.gene_orbit[genes]].astype(float)
        margin = self.highest - self.threshold
        if margin <= self.drift(self.switched):
            return None
        # the most sites the move may switch: the drift of the samples outside stays within
        d = self._drift
        margin = (margin / d) ** 2 - self.switched if d else margin - self.switched
        a_ub = np.vstack([a_ub, np.append(width, 0.0)])
        b_ub = np.append(b_ub, 0.5 * margin)
        n = genes.size
        a_eq = np.zeros((len(cls), n + 1))
        start = 0
        for k, o in enumerate(offs):
            a_eq[k, start : start + o.size] = 1.0
            start += o.size
        for k, o in enumerate(ons):
            a_eq[k, start : start + o.size] = -1.0
            start += o.size
        cost = np.zeros(n + 1)
        cost[-1] = 1.0
        res = linprog(
            cost,
            A_ub=a_ub,
            b_ub=b_ub,
            A_eq=a_eq,
            b_eq=np.zeros(len(cls)),
            bounds=[(0.0, 1.0)] * n + [(None, None)],
            method="highs",
        )
        if res.status != 0:
            return None
        x = res.x[:n]
        n_off = sum(o.size for o in offs)
        take_off, take_on = [], []
        a0 = 0
        b0 = n_off
        for o, p_ in zip(offs, ons, strict=True):
            xo, xn = x[a0 : a0 + o.size], x[b0 : b0 + p_.size]
            k = int(min((xo >= 0.5).sum(), (xn >= 0.5).sum()))
            if k:
                take_off.append(o[np.argsort(-xo, kind="stable")[:k]])
                take_on.append(p_[np.argsort(-xn, kind="stable")[:k]])
            a0 += o.size
            b0 += p_.size
        if not take_off:
            return None
        off = np.concatenate(take_off)
        on = np.concatenate(take_on)
        new = both + self.move_phasors(off, on).sum(axis=1)
        highest = float(np.abs(new).max())
        w = prob.orbit_size[prob.gene_orbit[np.concatenate([off, on])]].sum()
        if highest >= self.highest or self.threshold + self.drift(self.switched + w) > highest:
            return None
        return off, on, new

    def move_phasors_of(self, genes, rows) -> np.ndarray:
        """What switching each gene on adds to the kept values ``rows`` (of the stacked
        samples and peaks), (len(rows), len(genes))."""
        ks = self.af.size
        out = np.zeros((rows.size, np.size(genes)), dtype=np.complex128)
        out[rows < ks] = self.phasors(genes, rows[rows < ks])
        out[rows >= ks] = self.peak_phasors(genes, rows[rows >= ks] - ks)
        return out

    @staticmethod
    def softmax(values, focus: float, ref: float):
        """Φ = Σ (|AF_s|/ref)^(2κ) over the kept samples (along axis 0): a smooth stand-in
        for the highest, whose gradient is the weighted sum of :meth:`gene_scores`."""
        a = np.abs(values) / ref
        return np.sum(a ** (2.0 * focus), axis=0)

    def apply(self, off, on, values) -> None:
        """Take a move: the genome, the kept values and the switched count."""
        self.genome[off] = False
        self.genome[on] = True
        self.af, self.ap = values[: self.af.size], values[self.af.size :]
        width = self.problem.orbit_size[self.problem.gene_orbit[np.concatenate([off, on])]]
        self.switched += int(width.sum())


def polish(problem, tracker, genome, options: dict | None = None, until: float | None = None):
    """Lower the PSL of a layout by swap moves aimed at its worst lobes.

    Evaluates only through ``tracker.evaluate`` (one full evaluation per round), so the
    tracker counts the rounds, keeps the best layout and enforces its limits.

    Parameters
    ----------
    problem : ThinningProblem
    tracker : thinning.search.Tracker
    genome : (G,) bool   the start
    options : dict, optional   ``lobe_depth_db``, ``lobe_count``, ``lobe_focus``, ``lobe_step``
    until : float, optional  [s]   stop when ``tracker.elapsed`` reaches it

    Returns
    -------
    (G,) bool   the best genome this polish saw
    """
    opts = _options(problem, options)
    g = np.asarray(genome, dtype=bool).copy()
    best_g = g.copy()
    best = float(tracker.evaluate(g[None]).objective[0])
    if problem.robust is not None or problem.objective != "psl":
        return best_g
    depth, count = opts["lobe_depth_db"], opts["lobe_count"]
    drift = DRIFT
    stalls = 0
    while not _done(tracker, until):
        lobes = WorstLobes(problem, g, depth, count, PEAKS, CLIMB, drift=drift)
        moved = 0
        while not _done(tracker, until):
            move = lobes.lp_move(opts["lobe_focus"], LP_CANDIDATES, LP_LOBES)
            if move is None:
                move = lobes.best_move(opts["lobe_focus"], opts["lobe_step"])
            if move is None:
                break
            lobes.apply(*move)
            moved += move[0].size
            if not lobes.margin_holds:
                break
        if moved:
            value = float(tracker.evaluate(lobes.genome[None]).objective[0])
            if value < best:
                best, best_g, g = value, lobes.genome.copy(), lobes.genome.copy()
                stalls = 0
                drift = DRIFT
                continue
            g = best_g.copy()
        # nothing gained: smaller moves (a stricter bound on the samples outside), a deeper
        # band; give up after a few rounds at the strictest and deepest
        if drift is not None:
            drift = 4.0 * drift if 4.0 * drift < MAX_DRIFT else None
        elif depth < MAX_DEPTH_DB or count < MAX_LOBES:
            depth = min(MAX_DEPTH_DB, depth + 1.0)
            count = min(MAX_LOBES, 2 * count)
        else:
            stalls += 1
            if stalls >= STALL_ROUNDS:
                break
    return best_g


def _done(tracker, until) -> bool:
    if tracker.should_stop():
        return True
    return until is not None and tracker.elapsed >= until
