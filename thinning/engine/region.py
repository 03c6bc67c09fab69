"""The sidelobe region on a grid of pattern samples, and the figures taken over it.

Both pattern engines (FFT on a lattice, direct summation off it) hand over the power pattern
on the same kind of grid: the half plane u ≥ 0 of a regular u-v grid (|AF(−u, −v)| =
|AF(u, v)| for real excitations, so the other half adds nothing), columns ``c`` at
``u = c·du`` and storage rows ``s`` holding the signed row ``r`` at ``v = r·dv``, with row 0
and column 0 at the beam peak. For the FFT grid the pattern is periodic in u and v; each
sample then stands for every alias of its direction, and the region counts how many of
those aliases fall in the disc of radius 1 + sin θmax (conventions.md, "Pattern"). A grating
lobe that enters the disc is therefore sidelobe region, as it should be.

The main beam is cut ray by ray: every sample in a window around the peak has a parent one
step closer to the peak along the same ray; a sample belongs to the main beam when the pattern
never rises along its chain of parents back to the peak (the ray has not yet passed its first
local minimum). The chains are resolved for a whole stack of patterns at once by pointer
jumping, in log₂(window radius) vectorised steps.
"""

from __future__ import annotations

import dataclasses
import math
from dataclasses import dataclass, field

import numpy as np

from .region_shape import refine_terms, shape_weights
from .sample_grid import SampleGrid

__all__ = ["SampleGrid", "SampledRegion", "Reduction", "FastTables"]

#: Radius of the first main-beam window, in samples per oversampling factor. The first null
#: of a uniformly filled aperture lies about one oversampling factor of samples from the peak;
#: a window three times wider holds the main beam of tapered and thinned apertures too, and is
#: doubled (for the patterns that need it) when a beam reaches its rim.
WINDOW_NULLS = 3.0


@dataclass
class _Window:
    """Samples around the peak where the main beam is looked for, with their ray parents."""

    radius: float
    flat: np.ndarray  # storage index of each window sample, nearest to the peak first
    rows: np.ndarray
    cols: np.ndarray
    parent: np.ndarray  # position (in this window) of each sample's parent
    rim: np.ndarray = None  # samples on the outermost ring
    capped: bool = False  # the window already spans the whole grid
    weight: np.ndarray = None  # region weight of each window sample
    w0: np.ndarray = None  # weight of the peak's own alias (the one the main beam removes)
    region_gain: np.ndarray = None  # the region's g of every sample (shared, not copied)
    pos: np.ndarray = None  # position in the window of every storage index (−1 outside)
    gain: np.ndarray = None  # g of each window sample (region's limit weight)
    galias: np.ndarray = None  # ... and without its own direction (the main beam's)
    _jumps: list = field(default=None, repr=False)
    _outer: np.ndarray = field(default=None, repr=False)

    @property
    def jumps(self) -> list:
        """parent^(2^k) for k = 0, 1, ... until every chain reaches the peak (built on first
        use: only the numpy route needs them, and for a window spanning a large grid they are
        a dozen arrays of its size)."""
        if self._jumps is None:
            jumps, j = [], self.parent
            while True:
                jumps.append(j)
                if not j.any():  # every sample's 2^k-th ancestor is the peak (position 0)
                    break
                j = j[j]
            self._jumps = jumps
        return self._jumps

    @property
    def outer_mask(self) -> np.ndarray:
        """g for region samples outside the window (1 without a mask), else 0 (float32; built on
        first use)."""
        if self._outer is None:
            outer = self.region_gain.astype(np.float32)  # g: 1 in the region without a mask
            outer[self.flat] = 0.0
            self._outer = outer
        return self._outer

    def main_beam(self, pw: np.ndarray) -> np.ndarray:
        """Main-beam membership of the window samples of a stack of patterns (B, n)."""
        ok = pw <= pw[:, self.parent]
        for jump in self.jumps:
            ok &= ok[:, jump]
        return ok


@dataclass
class Reduction:
    """Figures of a stack of patterns over the sidelobe region (normalised to the peak).

    Attributes
    ----------
    peak : (B,) array   the beam peak, |Σa|²
    psl : (B,) array  [1]   largest sample in the sidelobe region (not refined)
    asl : (B,) array  [1]   weighted mean over the sidelobe region
    argmax : (B,) array of int   storage index of the largest sample
    main_beam_weight : list of arrays   per pattern, the weight the main beam removed from
        each window sample (for candidate searches)
    windows : list   per pattern, the window used
    """

    peak: np.ndarray
    psl: np.ndarray
    asl: np.ndarray
    argmax: np.ndarray
    main_beam_weight: list
    windows: list
    groups: list | None = None  # per distinct window: (window, members, removed weights)


@dataclass(frozen=True, eq=False)
class FastTables:
    """The region and its main-beam windows as flat arrays (:meth:`SampledRegion.fast_tables`).

    Attributes
    ----------
    weight : (N,) array        region weight of each sample
    nbr : (N, 8) int           its neighbours (−1: none), rows −1, 0, +1 by columns −1, 0, +1
    srows, scols : int arrays  signed row (column) of each storage row (column)
    geom : (15,) float         nc, du, dv, periodic, tu, tv, n_v aliases, radius, cu, cv,
                               Newton iterations, Σ weight, disc (1: project a climbing lobe
                               onto the disc), masked (1: limits weigh the samples), sampled
                               edge (1: a lobe next to a sample outside the region stays in
                               its own cell)
    gain, galias : (N,) arrays  g of each sample, and without its own direction (the
                               region's indicator, 1 or 0, without a mask)
    outer : (L, N) array       g for region samples outside window k, else 0
    w_flat, w_parent, w_rim, w_weight, w_w0 : (Σ W_k,) arrays   the L windows one after the
                               other (parents counted within their window)
    w_pos : (L, N) int         position of each sample in window k (−1 outside)
    w_capped : (L,) bool       window k spans the grid
    w_start : (L + 1,) int     where window k starts in the stacked arrays
    windows : tuple of the windows
    """

    weight: np.ndarray
    nbr: np.ndarray
    srows: np.ndarray
    scols: np.ndarray
    geom: np.ndarray
    outer: np.ndarray
    w_flat: np.ndarray
    w_parent: np.ndarray
    w_rim: np.ndarray
    w_weight: np.ndarray
    w_w0: np.ndarray
    w_pos: np.ndarray
    w_capped: np.ndarray
    w_start: np.ndarray
    windows: tuple
    gain: np.ndarray = None
    galias: np.ndarray = None

    @property
    def region(self) -> tuple:
        return (self.weight, self.gain, self.galias, self.nbr, self.srows, self.scols, self.geom)

    @property
    def levels(self) -> tuple:
        return (
            self.outer,
            self.w_flat,
            self.w_parent,
            self.w_rim,
            self.w_weight,
            self.w_w0,
            self.w_pos,
            self.w_capped,
            self.w_start,
        )


def _alias_count(u, v, period, r2, radius, centre) -> np.ndarray:
    """How many aliases (u + p·Tu, v + q·Tv) of each sample lie in the disc u² + v² ≤ r2
    (coordinates relative to the disc's centre), shape (len(v), len(u)).

    For each alias row offset q and column offset p the samples of a row that fall in the disc
    form one interval of u; the intervals are marked at their ends on the sorted u axis and
    summed along it, so the work is O(aliases · rows) plus one pass over the grid (instead of
    a pass over the whole grid per alias).
    """
    tu, tv = period
    reach = radius + math.hypot(*centre)
    n_u = int(math.ceil(reach / tu)) + 1
    n_v = 0 if tv is None else int(math.ceil(reach / tv)) + 1
    order = np.argsort(u, kind="stable")
    us = u[order]
    diff = np.zeros((v.size, u.size + 1), dtype=np.int32)
    rows = np.arange(v.size)
    for q in range(-n_v, n_v + 1):
        vv = v if tv is None else v + q * tv
        rem = r2 - vv**2
        inside = rem >= 0
        if not inside.any():
            continue
        w = np.sqrt(np.where(inside, rem, 0.0))
        for p in range(-n_u, n_u + 1):
            # (u + p·Tu)² ≤ rem  ⇔  −p·Tu − w ≤ u ≤ −p·Tu + w
            lo = np.searchsorted(us, -p * tu - w, side="left")
            hi = np.searchsorted(us, -p * tu + w, side="right")
            ok = inside & (hi > lo)
            if ok.any():
                np.add.at(diff, (rows[ok], lo[ok]), 1)
                np.add.at(diff, (rows[ok], hi[ok]), -1)
    count = np.empty((v.size, u.size))
    count[:, order] = np.cumsum(diff[:, :-1], axis=1)
    return count


class SampledRegion:
    """The sidelobe region (a disc in u-v, less the main beam) on a :class:`SampleGrid`.

    Parameters
    ----------
    grid : SampleGrid
    radius : float  [1]
        Radius of the disc: 1 + sin θmax (or 1 for broadside only).
    oversampling : float
        Samples per first-null width, which sets the size of the main-beam window.
    shape : thinning.engine.mask.RegionMap, optional
        The region of a scan sector or band and the limits of a mask instead of the disc
        (``radius`` is then its reach). Each sample carries, besides its weight, the weight
        g of its limit (:attr:`gain`): the largest 10^{−ℓ/10} over the directions it stands
        for in the region (1 without a mask), and :attr:`galias`, the same without the
        sample's own direction (and its mirror), which the main beam takes. The sidelobe
        figure is then max p·g (the worst excess over the limits) and the ASL is unchanged.
        A region that is not a disc (a sector) has no disc to project a climbing lobe onto:
        a lobe at its edge is refined within its own sample cell (half a sample each way),
        as is a lobe on the edge between two limits.
    """

    def __init__(
        self,
        grid: SampleGrid,
        radius: float,
        oversampling: float,
        centre=(0.0, 0.0),
        shape=None,
    ):
        self.grid = grid
        self.radius = float(radius)
        self.oversampling = float(oversampling)
        self.centre = (float(centre[0]), float(centre[1]))
        if shape is not None and shape.guard_samples > 0:
            shape = shape.guarded(shape.guard_samples * math.hypot(grid.du, grid.dv))
        self.shape = shape
        #: the region is the disc (projection onto it in the refinement), not a sampled shape
        self.disc = shape is None or shape.disc is not None
        #: the samples carry mask limits (g ≠ the region's indicator)
        self.masked = shape is not None and shape.masked
        if self.centre != (0.0, 0.0) and not grid.full:
            raise ValueError("an off-centre sidelobe disc needs a full (not half-plane) grid")
        if not self.disc:
            self.radius = float(shape.reach)
            self.weight, self.w0, self.gain, self.galias = shape_weights(self, shape, True)
            self.total_weight = float(self.weight.sum())
            self.in_disc = self.weight > 0
            self._windows = {}
            return
        cu, cv = self.centre
        u = grid.u[None, :] - cu
        v = grid.v[:, None] - cv
        r2 = self.radius**2 * (1 + 1e-12)
        principal = (u**2 + v**2) <= r2
        if grid.periodic:
            count = _alias_count(grid.u - cu, grid.v - cv, grid.period, r2, self.radius, (cu, cv))
        else:
            count = principal.astype(float)
        mult = grid.col_mult[None, :]
        self.weight = (count * mult).ravel()
        self.w0 = (principal * mult).ravel()
        self.total_weight = float(self.weight.sum())
        self.in_disc = count.ravel() > 0
        self._windows: dict[float, _Window] = {}
        self.gain = (self.weight > 0).astype(np.float64)
        self.galias = (self.weight - self.w0 > 0).astype(np.float64)
        if self.masked:
            _, _, self.gain, self.galias = shape_weights(self, shape, False)

    def effective_gain(self, removed: np.ndarray, flat) -> np.ndarray:
        """g of samples ``flat`` with the main beam's removed weights ``removed`` there."""
        flat = np.asarray(flat)
        return np.where(np.asarray(removed) > 0, self.galias[flat], self.gain[flat])

    # -- the main-beam window -------------------------------------------------------------
    def window(self, radius: float | None = None) -> _Window:
        """The main-beam window of the given radius in samples (cached)."""
        g = self.grid
        if radius is None:
            radius = WINDOW_NULLS * self.oversampling
        cmax = g.max_col
        rmax = g.max_row if g.nr > 1 else 0
        radius = float(min(radius, max(cmax, rmax) + 1.0))
        if radius in self._windows:
            return self._windows[radius]
        c_lo = -min(cmax, int(radius)) if g.full else 0
        c_hi = min(cmax, int(radius))
        r_hi = min(rmax, int(radius))
        cc, rr = np.meshgrid(np.arange(c_lo, c_hi + 1), np.arange(-r_hi, r_hi + 1))
        cc, rr = cc.ravel(), rr.ravel()
        rho = np.hypot(cc, rr)
        keep = rho <= radius
        cc, rr, rho = cc[keep], rr[keep], rho[keep]
        order = np.lexsort((rr, cc, rho))
        cc, rr, rho = cc[order], rr[order], rho[order]
        scale = np.where(rho > 0, (rho - 1.0) / np.where(rho > 0, rho, 1.0), 0.0)
        # the parent one step nearer the peak along the ray: |parent| < |sample| (rounding
        # moves it by at most 1/√2), so it lies in the window and comes before the sample
        pc = np.rint(cc * scale).astype(np.int64)
        pr = np.rint(rr * scale).astype(np.int64)
        where = np.full((2 * r_hi + 1, c_hi - c_lo + 1), -1, dtype=np.int64)
        where[rr + r_hi, cc - c_lo] = np.arange(cc.size)
        parent = where[pr + r_hi, pc - c_lo]
        del where, scale, pc, pr
        capped = radius >= cmax and (g.nr == 1 or radius >= rmax)
        flat = g.flat(rr, cc)
        w = _Window(
            radius=radius,
            flat=flat,
            rows=rr,
            cols=cc,
            parent=parent,
            rim=(rho > radius - 1.0) & (np.abs(cc) < cmax) & ~capped,
            capped=capped,
            weight=self.weight[flat],
            w0=self.w0[flat],
            gain=self.gain[flat],
            galias=self.galias[flat],
            region_gain=self.gain,
        )
        self._windows[radius] = w
        return w

    # -- tables for the compiled route ------------------------------------------------------
    def release(self) -> None:
        """Drop the main-beam windows and the compiled route's tables (rebuilt when next
        asked for): on a 262,000-site panel they hold about 0.6 GB after a search."""
        self._windows = {}
        self._fast = None

    def fast_tables(self, dtype=np.float32) -> FastTables:
        """The region and its main-beam windows as flat arrays, for :mod:`thinning.engine.fastpath`
        (cached; the sample weights in ``dtype``)."""
        dtype = np.dtype(dtype)
        if getattr(self, "_fast", None) is None:
            self._fast = {}
        if dtype in self._fast:
            return self._fast[dtype]
        if self._fast:  # only the sample weights depend on the precision
            any_tables = next(iter(self._fast.values()))
            self._fast[dtype] = dataclasses.replace(
                any_tables,
                weight=self.weight.astype(dtype),
                outer=any_tables.outer.astype(dtype),
                gain=self.gain.astype(dtype),
                galias=self.galias.astype(dtype),
            )
            return self._fast[dtype]
        g = self.grid
        n = g.nr * g.nc
        # the windows the numpy route would try, in order: each twice the last, until one
        # spans the grid
        wins = [self.window()]
        while not wins[-1].capped:
            wins.append(self.window(2.0 * wins[-1].radius))
        for win in wins:
            if np.any(win.parent[1:] >= np.arange(1, win.parent.size)):
                raise AssertionError("a window sample comes before its parent")
        # int32 tables: at 262,000 sites the grid holds 2.8 million samples
        pos = np.full((len(wins), n), -1, dtype=np.int32)
        for k, win in enumerate(wins):
            pos[k, win.flat] = np.arange(win.flat.size, dtype=np.int32)
        s, c = np.divmod(np.arange(n), g.nc)
        r = g.signed_rows[s]
        nbr = np.full((n, 8), -1, dtype=np.int32)
        offsets = [(dr, dc) for dr in (-1, 0, 1) for dc in (-1, 0, 1) if dr or dc]
        for k, (dr, dc) in enumerate(offsets):
            if g.nr > 1 or dr == 0:
                nbr[:, k] = g.neighbour(r, c, dr, dc)
        tu, tv = g.period if g.periodic else (0.0, None)
        reach = self.radius + math.hypot(*self.centre)
        n_v = 0 if (not g.periodic or tv is None) else int(math.ceil(reach / tv)) + 1
        geom = np.array(
            [
                g.nc,
                g.du,
                g.dv,
                1.0 if g.periodic else 0.0,
                tu,
                0.0 if tv is None else tv,
                n_v,
                self.radius,
                self.centre[0],
                self.centre[1],
                12,  # Newton iterations, as refine_peaks
                self.total_weight,
                1.0 if self.disc else 0.0,
                1.0 if self.masked else 0.0,
                0.0 if self.disc else 1.0,
            ]
        )
        self._fast[dtype] = FastTables(
            weight=self.weight.astype(dtype),
            nbr=nbr,
            srows=g.signed_rows.astype(np.int64),
            scols=g.signed_cols.astype(np.int64),
            geom=geom,
            outer=((self.weight > 0)[None, :] & (pos < 0)).astype(dtype),
            w_flat=np.concatenate([w.flat for w in wins]).astype(np.int64),
            w_parent=np.concatenate([w.parent for w in wins]).astype(np.int64),
            w_rim=np.concatenate([np.asarray(w.rim, dtype=np.bool_) for w in wins]),
            w_weight=np.concatenate([w.weight for w in wins]).astype(np.float64),
            w_w0=np.concatenate([w.w0 for w in wins]).astype(np.float64),
            w_pos=pos,
            w_capped=np.array([w.capped for w in wins], dtype=np.bool_),
            w_start=np.cumsum([0] + [w.flat.size for w in wins]).astype(np.int64),
            windows=tuple(wins),
            gain=self.gain.astype(dtype),
            galias=self.galias.astype(dtype),
        )
        return self._fast[dtype]

    # -- reductions -----------------------------------------------------------------------
    def reduce(self, power: np.ndarray) -> Reduction:
        """PSL (on the samples) and ASL of a stack of power patterns.

        Parameters
        ----------
        power : (B, nr·nc) array
            |AF|² on the grid, not normalised; sample 0 must be the beam peak.
        """
        power = np.atleast_2d(power)
        b = power.shape[0]
        out = Reduction(
            peak=power[:, 0].astype(np.float64),
            psl=np.zeros(b),
            asl=np.zeros(b),
            argmax=np.zeros(b, dtype=np.int64),
            main_beam_weight=[None] * b,
            windows=[None] * b,
        )
        todo = np.arange(b)
        radius = None
        while todo.size:
            win = self.window(radius)
            p = power[todo]
            pw = p[:, win.flat]
            mb = win.main_beam(pw)
            over = (mb & win.rim).any(axis=1) if not win.capped else np.zeros(todo.size, bool)
            done = ~over
            if done.any():
                self._finish(out, todo[done], p[done], pw[done], mb[done], win)
            todo = todo[over]
            radius = 2.0 * win.radius
        return out

    def _finish(self, out, idx, p, pw, mb, win):
        removed = mb * win.w0[None, :]
        weff = win.weight[None, :] - removed
        if self.masked:  # the worst excess over the limits: max p·g
            geff = np.where(mb, win.galias[None, :], win.gain[None, :]).astype(pw.dtype)
            in_win = np.where(weff > 0, pw * geff, 0)
        else:
            in_win = np.where(weff > 0, pw, 0)
        outer = p * win.outer_mask.astype(p.dtype)[None, :]
        o_arg = outer.argmax(axis=1)
        w_arg = in_win.argmax(axis=1)
        o_max = outer[np.arange(len(idx)), o_arg].astype(np.float64)
        w_max = in_win[np.arange(len(idx)), w_arg].astype(np.float64)
        # einsum, not BLAS: a threaded gemv is erratic on a loaded machine for this size;
        # summed in float64 (as the compiled route does) whatever the samples' precision
        total = np.einsum("ij,j->i", p, self.weight, dtype=np.float64)
        total -= (removed * pw).sum(axis=1, dtype=np.float64)
        wsum = self.total_weight - removed.sum(axis=1)
        peak = out.peak[idx]
        with np.errstate(invalid="ignore", divide="ignore"):
            out.psl[idx] = np.maximum(o_max, w_max) / peak
            out.asl[idx] = np.where(wsum > 0, total / np.where(wsum > 0, wsum, 1) / peak, 0.0)
        out.argmax[idx] = np.where(o_max >= w_max, o_arg, win.flat[w_arg])
        for k, i in enumerate(idx):
            out.main_beam_weight[i] = removed[k]
            out.windows[i] = win

    # -- peak candidates for refinement ---------------------------------------------------
    def effective_weight(self, red: Reduction, i: int) -> np.ndarray:
        """Region weight of every sample of pattern i, with its main beam removed."""
        w = self.weight.copy()
        win = red.windows[i]
        w[win.flat] -= red.main_beam_weight[i]
        return w

    def removed_weight(self, red: Reduction, b, flat) -> np.ndarray:
        """Weight the main beam of pattern ``b[k]`` removed at sample ``flat[k]`` (0 outside
        its window), for many (pattern, sample) pairs at once."""
        b = np.asarray(b, dtype=np.int64)
        flat = np.asarray(flat, dtype=np.int64)
        out = np.zeros(flat.shape)
        for win, mine, removed in self._window_groups(red):
            sel = mine[b] & (win.pos[flat] >= 0)
            if sel.any():
                out[sel] = removed[b[sel], win.pos[flat[sel]]]
        return out

    def _window_groups(self, red: Reduction):
        """(window, patterns using it, (B, W) removed weights) for each distinct window."""
        if red.groups is None:
            red.groups = []
            n = len(red.windows)
            for win in {id(w): w for w in red.windows}.values():
                if win.pos is None:
                    win.pos = np.full(self.grid.nr * self.grid.nc, -1, dtype=np.int64)
                    win.pos[win.flat] = np.arange(win.flat.size)
                mine = np.array([red.windows[i] is win for i in range(n)])
                removed = np.zeros((n, win.flat.size))
                for i in np.flatnonzero(mine):
                    removed[i] = red.main_beam_weight[i]
                red.groups.append((win, mine, removed))
        return red.groups

    def candidates(self, power, red: Reduction, margin_db: float, cap: int):
        """Local maxima of a stack of patterns in their sidelobe regions worth refining.

        For every pattern, each sample of its sidelobe region that is at least as high as its
        neighbours in the region and within ``margin_db`` of the pattern's highest region
        sample, ranked by a parabolic (in dB) estimate of its lobe's peak along u and v; at
        most ``cap`` per pattern.

        Parameters
        ----------
        power : (B, nr·nc) array   |AF|² samples (the array given to :meth:`reduce`)
        red : Reduction            its reduction

        Returns
        -------
        b, flat : int arrays   pattern and storage index of each candidate, best first
                               within each pattern
        """
        g = self.grid
        power = np.atleast_2d(power)
        top = red.psl * red.peak
        thr = top * 10 ** (-margin_db / 10)
        if self.masked:  # local maxima of p·g within the margin of the highest p·g
            scaled = power * self.gain.astype(power.dtype)[None, :]
            b, idx = np.nonzero(scaled >= thr[:, None].astype(power.dtype))
            ok = (top[b] > 0) & self._eligible(red, b, idx)
            b, idx = b[ok], idx[ok]
            val = power[b, idx] * self._geff(red, b, idx).astype(power.dtype)
            ok = val >= thr[b].astype(power.dtype)
            b, idx = b[ok], idx[ok]
        else:
            b, idx = np.nonzero(power >= thr[:, None].astype(power.dtype))
            ok = (top[b] > 0) & self._eligible(red, b, idx)
            b, idx = b[ok], idx[ok]
        s, c = np.divmod(idx, g.nc)
        r = g.signed_rows[s]
        here = power[b, idx]
        if self.masked:
            here_g = here * self._geff(red, b, idx).astype(power.dtype)
        is_max = np.ones(idx.size, dtype=bool)
        offsets = (
            [(0, -1), (0, 1)]
            if g.nr == 1
            else [(dr, dc) for dr in (-1, 0, 1) for dc in (-1, 0, 1) if dr or dc]
        )
        nb = {}
        for dr, dc in offsets:
            n = g.neighbour(r, c, dr, dc)
            nb[(dr, dc)] = n
            n0 = np.maximum(n, 0)
            if self.masked:
                pn = power[b, n0] * self._geff(red, b, n0).astype(power.dtype)
                val = np.where((n >= 0) & self._eligible(red, b, n0), pn, -1.0)
                is_max &= here_g >= val
            else:
                val = np.where((n >= 0) & self._eligible(red, b, n0), power[b, n0], -1.0)
                is_max &= here >= val
        b, idx, here = b[is_max], idx[is_max], here[is_max]
        logc = np.log(np.maximum(here.astype(np.float64), 1e-300))
        est = logc.copy()
        axes = [((0, -1), (0, 1))] if g.nr == 1 else [((0, -1), (0, 1)), ((-1, 0), (1, 0))]
        for lo, hi in axes:
            vals = []
            for off in (lo, hi):
                n = nb[off][is_max]
                v = np.where(n >= 0, power[b, np.maximum(n, 0)], here).astype(np.float64)
                vals.append(np.log(np.maximum(v, 1e-300)))
            lo_v, hi_v = vals
            den = lo_v - 2 * logc + hi_v
            delta = np.where(den < 0, 0.5 * (lo_v - hi_v) / np.where(den < 0, den, -1), 0.0)
            est += np.where(den < 0, -0.25 * (lo_v - hi_v) * delta, 0.0)
        est -= np.log(red.peak[b])
        if self.masked:
            est += np.log(np.maximum(self._geff(red, b, idx).astype(power.dtype), 1e-300))
        order = np.lexsort((-est, b))
        b, idx = b[order], idx[order]
        first = np.searchsorted(b, b)  # rank within each pattern
        keep = np.arange(b.size) - first < cap
        return b[keep], idx[keep]

    def _eligible(self, red, b, flat) -> np.ndarray:
        """Is sample ``flat`` in the sidelobe region of pattern ``b``?"""
        return (self.weight[flat] - self.removed_weight(red, b, flat)) > 0

    def _geff(self, red, b, flat) -> np.ndarray:
        """g of sample ``flat`` of pattern ``b`` (its main beam's direction taken out)."""
        return self.effective_gain(self.removed_weight(red, b, flat), flat)

    def refine_terms(self, red: Reduction, b, flat):
        """For candidates (pattern ``b``, sample ``flat``): the g their refined peak is
        weighted by, and how far (in samples, each way) the refinement may move
        (:func:`thinning.engine.region_shape.refine_terms`); (None, None) for the disc
        without a mask."""
        return refine_terms(self, red, b, flat)

    def alias_points(self, flats, removed) -> np.ndarray:
        """Directions (u, v) in the disc that samples stand for, outside the main beam.

        Of each sample's aliases inside the disc, the one nearest its centre; the peak's own
        alias is skipped where the main beam removed weight from the sample.

        Returns
        -------
        (n, 2) array
        """
        g = self.grid
        s, c = np.divmod(np.asarray(flats, dtype=np.int64), g.nc)
        u0 = g.signed_cols[c] * g.du
        v0 = g.signed_rows[s] * g.dv
        if not g.periodic:
            return np.column_stack([u0, v0])
        tu, tv = g.period
        cu, cv = self.centre
        reach = self.radius + math.hypot(cu, cv)
        n_u = int(math.ceil(reach / tu)) + 1
        n_v = 0 if tv is None else int(math.ceil(reach / tv)) + 1
        pp, qq = np.meshgrid(np.arange(-n_u, n_u + 1), np.arange(-n_v, n_v + 1), indexing="ij")
        pp, qq = pp.ravel(), qq.ravel()
        uu = u0[:, None] + pp[None, :] * tu
        vv = v0[:, None] + (0.0 if tv is None else qq[None, :] * tv)
        vv = np.broadcast_to(vv, uu.shape)
        rr = np.hypot(uu - cu, vv - cv)
        bad = rr > self.radius * (1 + 1e-12)
        bad |= ((pp == 0) & (qq == 0))[None, :] & (np.asarray(removed) > 0)[:, None]
        rr = np.where(bad, np.inf, rr)
        k = np.argmin(rr, axis=1)
        none = ~np.isfinite(rr[np.arange(k.size), k])
        pick = np.column_stack([uu[np.arange(k.size), k], vv[np.arange(k.size), k]])
        pick[none] = np.column_stack([u0, v0])[none]
        return pick
