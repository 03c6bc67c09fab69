"""Array-factor power patterns on u-v sample grids, and the sidelobe figures they give.

Two engines hand the same kind of sample grid to :class:`thinning.engine.region.SampledRegion`:

* :class:`FFTPatternEngine` for excitations on a rectangular index grid (rectangular lattices
  directly, triangular lattices as a checkerboard of the grid of pitch (dx/2, dy), linear
  lattices as one row). The zero-padded transform is taken in two pruned steps: a real FFT
  along x of the R occupied rows, then a complex FFT along y of the result. Only the half
  plane u ≥ 0 is kept, since |AF(−u, −v)| = |AF(u, v)| for real excitations.
* :class:`DirectPatternEngine` for positions off any regular grid: the array factor is summed
  directly on a half-plane u-v grid covering the sidelobe disc, as a chunked complex matrix
  product (the sum separates into exp(j k x u)·exp(j k y v)).

Either way the PSL is found on the samples and then refined on the exact pattern
(:mod:`thinning.engine.exact`) so that it is within 0.05 dB of the true maximum. The search's
evaluations of lattice layouts run the same rules in compiled loops
(:mod:`thinning.engine.fastpath`); the numpy route here is the reference they are tested against.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
import scipy.fft

from .exact import CHUNK, GridExact, PointExact, refine_peaks
from .region import SampledRegion, SampleGrid

__all__ = ["FFTPatternEngine", "DirectPatternEngine", "Scores", "PatternDetail"]

#: Candidates within this many dB of the highest sample are refined (2-D, 1-D). Between
#: samples 4× apart a lobe can stand at most ≈0.7 dB per axis above its best sample, so a
#: lobe that could beat the highest one is never left out.
MARGIN_DB = (1.5, 1.0)
#: At most this many candidate lobes are refined per pattern in a detailed evaluation.
MAX_CANDIDATES = 64
#: ... and in the search's fast evaluation (2-D, 1-D): the highest few lobes by their
#: parabolic peak estimate, so that a search cannot hide its worst lobe between two samples.
#: An optimised layout has many lobes near its peak level: with 3 in 2-D the genetic search's
#: figure stood up to 0.24 dB below the scored one on an 829-site circle (5 seeds); with 10
#: it equalled it, for 20 % more time per evaluation (the compiled route climbs only the
#: lobes that can still reach the PSL found). On the 200-site linear case with 8 the
#: annealing's best layouts stood up to 0.16 dB below the scored figure (the worst lobe was
#: the first sidelobe, beside the main-beam cut, ninth by its estimate); with 16 they equal it.
FAST_CANDIDATES = (10, 16)

#: Sidelobe discs of other radii or centres an engine keeps (:meth:`FFTPatternEngine.region_for`).
REGIONS_KEPT = 2

_NO_GRIDS = np.zeros((1, 1, 1))  # stands in for the excitations when nothing is refined


@dataclass
class Scores:
    """Sidelobe figures of a stack of patterns.

    Attributes
    ----------
    psl : (B,) array  [1]   peak sidelobe, normalised power (refined unless asked not to)
    asl : (B,) array  [1]   average sidelobe, normalised power
    psl_uv : (B, 2) array  [1]   where the peak sidelobe is
    """

    psl: np.ndarray
    asl: np.ndarray
    psl_uv: np.ndarray

    @property
    def psl_db(self) -> np.ndarray:
        with np.errstate(divide="ignore"):
            return 10 * np.log10(self.psl)

    @property
    def asl_db(self) -> np.ndarray:
        with np.errstate(divide="ignore"):
            return 10 * np.log10(self.asl)


@dataclass
class PatternDetail:
    """Everything a detailed evaluation of one pattern found.

    Attributes
    ----------
    psl : float  [1]        refined peak sidelobe
    psl_uv : (float, float)  [1]
    psl_sampled : float  [1]   highest sample of the sidelobe region
    asl : float  [1]
    refined : int          candidate lobes refined
    power : (nr·nc,) array  |AF|² samples normalised to the peak
    sidelobe_weight : (nr·nc,) array  region weight of each sample with the main beam removed
    grid : SampleGrid
    """

    psl: float
    psl_uv: tuple[float, float]
    psl_sampled: float
    asl: float
    refined: int
    power: np.ndarray
    sidelobe_weight: np.ndarray
    grid: SampleGrid


class _Engine:
    """What both engines share: the region, the reductions and the refinement."""

    region: SampledRegion
    linear: bool
    radius: float

    @property
    def margin_db(self) -> float:
        """Candidates within this many dB of the highest sample are refined  [dB]."""
        return MARGIN_DB[1] if self.linear else MARGIN_DB[0]

    @property
    def fast_candidates(self) -> int:
        """How many candidate lobes the search's fast evaluation refines per pattern."""
        return FAST_CANDIDATES[1] if self.linear else FAST_CANDIDATES[0]

    def _refine(self, exact, red, b, flats, region):
        """Refine candidate samples (pattern b[k], sample flats[k]) on the exact pattern."""
        uv = region.alias_points(flats, region.removed_weight(red, b, flats))
        g = region.grid
        geff, box = region.refine_terms(red, b, flats)
        p, u, v = refine_peaks(
            exact,
            uv[:, 0],
            uv[:, 1],
            (g.du, g.dv),
            region.radius,
            which=b,
            linear=self.linear,
            centre=region.centre,
            box=box,
            project=region.disc,
        )
        if geff is not None:
            p = p * geff  # the refined lobe against its sample's limit
        return p, np.column_stack([u, v])

    def _scores(self, exact, power, red, region, cap) -> tuple[Scores, int]:
        """Per pattern: the best of its refined candidate lobes (never below its samples)."""
        n = red.peak.size
        b, flats = region.candidates(power, red, self.margin_db, cap)
        psl = red.psl.copy()
        uv = region.alias_points(red.argmax, region.removed_weight(red, np.arange(n), red.argmax))
        if b.size:
            p, at = self._refine(exact, red, b, flats, region)
            order = np.lexsort((-p, b))
            b, p, at = b[order], p[order], at[order]
            first = np.flatnonzero(np.r_[True, b[1:] != b[:-1]])
            best_b, best_p = b[first], p[first]
            up = best_p > psl[best_b]
            psl[best_b[up]] = best_p[up]
            uv[best_b[up]] = at[first][up]
        return Scores(psl, red.asl.copy(), uv), int(b.size)

    def _detail(self, exact, power, red, region) -> PatternDetail:
        scores, refined = self._scores(exact, power, red, region, MAX_CANDIDATES)
        return PatternDetail(
            psl=float(scores.psl[0]),
            psl_uv=(float(scores.psl_uv[0, 0]), float(scores.psl_uv[0, 1])),
            psl_sampled=float(red.psl[0]),
            asl=float(red.asl[0]),
            refined=refined,
            power=power[0] / red.peak[0],
            sidelobe_weight=region.effective_weight(red, 0),
            grid=region.grid,
        )


class FFTPatternEngine(_Engine):
    """Pattern engine for excitations on a rectangular index grid.

    Parameters
    ----------
    shape : (int, int)
        (R, C) of the excitation grids; R = 1 for a linear array.
    pitch : (float, float)  [m]
        Grid pitch (gx, gy); gy is ignored for a linear array.
    wavelength : float  [m]
    scan_max : float  [rad]
        Half-angle of the scan cone; the sidelobe region is the disc of radius 1 + sin θmax.
    oversampling : float
        Padded transform length per grid length along each axis (≥ 4 by default).
    linear : bool
        One row along x: the pattern depends on u alone.
    pad : (int, int), optional
        Transform lengths (Pr, Pc) instead of the ones the oversampling gives (for checks
        that need samples at exact places).
    workers : int
        Threads for scipy.fft.
    dtype : numpy dtype
        float32 (default) or float64 for the transform and the sample figures; the refined
        PSL is always computed in float64.
    full : bool
        Keep the whole u-v period instead of the half plane u ≥ 0: needed for complex
        excitations (errors, steering phases), whose pattern has no mirror symmetry, and for
        sidelobe discs off the origin (:meth:`region_for`).
    compiled : bool
        Score the search's evaluations with the compiled loops of :mod:`thinning.engine.fastpath`
        (default) instead of the numpy route; both give the same figures.
    region_map : thinning.engine.mask.RegionMap, optional
        The sidelobe region of a scan set over a band, and a mask's limits
        (:class:`thinning.engine.region.SampledRegion`); ``scan_max`` is then ignored.
    """

    def __init__(
        self,
        shape,
        pitch,
        wavelength,
        scan_max=0.0,
        oversampling=4.0,
        linear=False,
        pad=None,
        workers=1,
        dtype=np.float32,
        full=False,
        compiled=True,
        region_map=None,
    ):
        region_shape = region_map
        r, c = int(shape[0]), int(shape[1])
        self.full = bool(full)
        self.linear = bool(linear)
        self.shape = (r, c)
        self.pitch = (float(pitch[0]), float(pitch[1]))
        self.wavelength = float(wavelength)
        self.scan_max = float(scan_max)
        self.radius = 1.0 + math.sin(self.scan_max)
        if region_shape is not None:
            self.radius = float(region_shape.reach)
        self.workers = workers
        self.dtype = np.dtype(dtype)
        if self.full:
            self.dtype = np.dtype(np.complex64 if self.dtype == np.float32 else np.complex128)
        s = float(oversampling)
        if pad is not None:
            pr, pc = int(pad[0]), int(pad[1])
        else:
            pc = scipy.fft.next_fast_len(int(math.ceil(s * c)), real=True)
            pr = 1 if self.linear else scipy.fft.next_fast_len(int(math.ceil(s * r)))
        if self.linear:
            pr = 1
        self.pad = (pr, pc)
        gx, gy = self.pitch
        tu = self.wavelength / gx
        tv = None if self.linear else self.wavelength / gy
        grid = SampleGrid(
            nr=pr,
            nc=pc if self.full else pc // 2 + 1,
            du=tu / pc,
            dv=0.0 if self.linear else tv / pr,
            period=(tu, tv),
            n_full_cols=pc,
            full=self.full,
        )
        # main-beam window in samples: the oversampling actually achieved on the finer axis
        self.window_oversampling = max(pc / c, 1.0 if self.linear else pr / r)
        self.region = SampledRegion(grid, self.radius, self.window_oversampling, shape=region_shape)
        self._regions = {}
        self._kxy = None
        self._buffers = {}
        self.compiled = compiled

    def release(self) -> None:
        """Drop what the engine keeps between calls (other discs, work buffers, the last
        pattern, the region's windows and tables); everything is rebuilt when next needed."""
        self._regions = {}
        self._buffers = {}
        self._last_power = None
        self.region.release()

    def region_for(self, radius: float, centre=(0.0, 0.0)) -> SampledRegion:
        """A sidelobe disc of another radius or centre on this engine's grid (cached).

        A beam steered to (u₀, v₀) sees the visible region |(u, v)| ≤ 1 as the disc of
        radius 1 centred at (−u₀, −v₀) in the coordinates of the unsteered array factor.
        """
        key = (float(radius), float(centre[0]), float(centre[1]))
        if key not in self._regions:
            # a region holds a few arrays of the grid's size: keep the last few only (a scan
            # table asks for one disc after another)
            while len(self._regions) >= REGIONS_KEPT:
                self._regions.pop(next(iter(self._regions)))
            self._regions[key] = SampledRegion(self.grid, radius, self.window_oversampling, centre)
        return self._regions[key]

    @property
    def grid(self) -> SampleGrid:
        return self.region.grid

    def _as_stack(self, grids):
        a = np.asarray(grids, dtype=self.dtype)
        if self.linear:
            a = a.reshape(-1, 1, self.shape[1])
        elif a.ndim == 2:
            a = a[None]
        if a.shape[1:] != self.shape:
            raise ValueError(
                f"excitation grids of shape {a.shape[1:]}, engine built for {self.shape}"
            )
        return a

    def power(self, grids) -> np.ndarray:
        """|AF|² samples of a stack of excitation grids, shape (B, nr·nc), peak at sample 0."""
        return self.power_of(self.transform(grids))

    @staticmethod
    def power_of(f) -> np.ndarray:
        """|f|² of transforms from :meth:`transform`, flattened to (B, nr·nc)."""
        p = np.abs(f)  # abs then square in place: the fastest numpy route to |f|²
        p *= p
        return p.reshape(p.shape[0], -1)

    def transform(self, grids) -> np.ndarray:
        """The stored half of the padded transform, (B, nr, nc) complex: sample (r, c) is
        Σ a[j, i]·exp(−2πi (r·j/Pr + c·i/Pc)), whose magnitude is |AF| at (c·du, r·dv)."""
        a = self._as_stack(grids)
        pr, pc = self.pad
        if self.full:
            f = scipy.fft.fft(a, n=pc, axis=-1, workers=self.workers)
        else:
            f = scipy.fft.rfft(a, n=pc, axis=-1, workers=self.workers)
        if pr > 1:
            f = scipy.fft.fft(f, n=pr, axis=-2, workers=self.workers)
        return f

    def exact(self, grids) -> GridExact:
        a = self._as_stack(grids)
        pitch = (self.pitch[0], 0.0 if self.linear else self.pitch[1])
        return GridExact(a, pitch, self.wavelength)

    def evaluate(self, grids, refine=True, region=None) -> Scores:
        """PSL and ASL of a stack of excitation grids (the search's call).

        The PSL is refined on the exact pattern around each pattern's highest sample; use
        :meth:`detail` for the full candidate search of a reported figure.
        """
        return self.evaluate_power(grids, None, refine, region)

    def evaluate_power(self, grids, power=None, refine=True, region=None) -> Scores:
        """:meth:`evaluate` with the |AF|² samples already known (e.g. updated in place)."""
        region = self.region if region is None else region
        a = self._as_stack(grids)
        if power is None and self.compiled and (not refine or not np.iscomplexobj(a)):
            return self._evaluate_compiled(a, refine, region)
        power = self.power(a) if power is None else power
        return self._evaluate_numpy(a, power, refine, region)

    def _evaluate_compiled(self, a, refine, region) -> Scores:
        """:meth:`evaluate` by :func:`thinning.engine.fastpath.fast_scores` from the transform."""
        from . import fastpath

        f = self.transform(a)
        b = f.shape[0]
        parts = np.ascontiguousarray(f).view(f.real.dtype).reshape(b, -1)
        grids = np.ascontiguousarray(a, dtype=np.float64) if refine else _NO_GRIDS
        kx, ky = self._phases()
        tables = region.fast_tables(parts.dtype)
        psl, asl, uv = fastpath.call(
            fastpath.fast_scores,
            parts,
            grids,
            bool(refine),
            self.fast_candidates,
            10 ** (-self.margin_db / 10),
            *tables.region,
            *tables.levels,
            kx,
            ky,
            self.linear,
            *self._work(parts.dtype, parts.shape[1] // 2),
        )
        return Scores(psl, asl, uv)

    def _work(self, dtype, n):
        """Work buffers of :func:`thinning.engine.fastpath.fast_scores` (kept between calls)."""
        key = (np.dtype(dtype), n)
        if key not in self._buffers:
            self._buffers[key] = (np.empty(n, dtype=dtype), np.empty(n, dtype=np.int64))
        return self._buffers[key]

    def _phases(self):
        """Phase per unit u (v) of each grid column (row)  [rad], as :class:`GridExact`."""
        if self._kxy is None:
            ex = self.exact(np.zeros((1,) + self.shape, dtype=np.float64))
            self._kxy = (ex.kx, ex.ky)
        return self._kxy

    def _evaluate_numpy(self, a, power, refine, region) -> Scores:
        red = region.reduce(power)
        if not refine:
            n = red.peak.size
            uv = region.alias_points(
                red.argmax, region.removed_weight(red, np.arange(n), red.argmax)
            )
            return Scores(red.psl.copy(), red.asl.copy(), uv)
        return self._scores(self.exact(a), power, red, region, self.fast_candidates)[0]

    def detail(self, grid, region=None) -> PatternDetail:
        """Detailed evaluation of one excitation grid: every candidate lobe refined."""
        region = self.region if region is None else region
        a = self._as_stack(grid)[:1]
        key = hash(a.tobytes())  # the same excitation asked about for several discs
        last = getattr(self, "_last_power", None)
        if last is not None and last[0] == key and np.array_equal(last[1], a):
            power = last[2]
        else:
            power = self.power(a)
            self._last_power = (key, a, power)
        return self._detail(self.exact(a), power, region.reduce(power), region)


class DirectPatternEngine(_Engine):
    """Pattern engine for elements at arbitrary positions (direct summation).

    Parameters
    ----------
    x, y : (N,) arrays  [m]
    weights : (N,) array
    wavelength : float  [m]
    scan_max : float  [rad]
    oversampling : float
        Samples per λ/L, L the array's extent along each axis.
    linear : bool
        All elements on one line along x.
    region_map : thinning.engine.mask.RegionMap, optional
        As for :class:`FFTPatternEngine`.
    """

    def __init__(
        self,
        x,
        y,
        weights,
        wavelength,
        scan_max=0.0,
        oversampling=4.0,
        linear=False,
        region_map=None,
    ):
        shape = region_map
        self.linear = bool(linear)
        self.wavelength = float(wavelength)
        self.radius = 1.0 + math.sin(float(scan_max))
        if shape is not None:
            self.radius = float(shape.reach)
        self.pexact = PointExact(x, y, weights, wavelength)
        x = np.asarray(x, dtype=float)
        y = np.asarray(y, dtype=float)
        s = float(oversampling)
        lx = max(float(np.ptp(x)), wavelength / 2)
        du = wavelength / (s * lx)
        nc = int(math.ceil(self.radius / du)) + 1
        if self.linear:
            dv, nr = 0.0, 1
        else:
            ly = max(float(np.ptp(y)), wavelength / 2)
            dv = wavelength / (s * ly)
            half = int(math.ceil(self.radius / dv)) + 1
            nr = 2 * half + 1
        grid = SampleGrid(nr=nr, nc=nc, du=du, dv=dv, period=None, n_full_cols=2 * nc - 1)
        self.region = SampledRegion(grid, self.radius, s, shape=shape)

    @property
    def grid(self) -> SampleGrid:
        return self.region.grid

    def power(self) -> np.ndarray:
        """|AF|² on the half-plane grid, shape (1, nr·nc), peak at sample 0."""
        g = self.grid
        pe = self.pexact
        af = np.zeros((g.nr, g.nc), dtype=complex)
        step = max(1, CHUNK // (g.nr + g.nc))
        for s in range(0, pe.kx.size, step):
            ex = np.exp(1j * np.outer(pe.kx[s : s + step], g.u)) * pe.w[s : s + step, :1]
            ey = np.exp(1j * np.outer(g.v, pe.ky[s : s + step]))  # (nr, n)
            af += ey @ ex
        p = np.abs(af) ** 2
        return p.reshape(1, -1)

    def detail(self) -> PatternDetail:
        power = self.power()
        return self._detail(self.pexact, power, self.region.reduce(power), self.region)
