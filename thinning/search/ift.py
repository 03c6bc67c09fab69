"""Iterative Fourier thinning: many short trials of clip-and-threshold iterations.

Each trial starts from a random excitation and alternates between the pattern and the
aperture, after Keizer, "Linear array thinning using iterative FFT techniques", IEEE TAP
56(8), 2008, and its planar form, Keizer, IEEE TAP 57(12), 2009 (both from memory):

1. the array factor of the current excitation aₙ on the zero-padded grid of the problem's
   engine, by FFT (the excitations are real, so the half plane u ≥ 0 holds the whole period;
   see :class:`IFTPlan`);
2. in the sidelobe region — the samples with an alias in the disc of radius 1 + sin θmax, less
   the main beam of the current pattern cut at its first null (the region the score uses,
   :class:`thinning.engine.region.SampledRegion`) — every sample above the clip level L is scaled
   down to it, its phase kept:

   .. math::  AF'(u, v) = AF(u, v)\\,\\min\\bigl(1,\\ \\sqrt{L}\\,/\\,|AF(u, v)|\\bigr);

3. the inverse FFT, truncated to the aperture, gives an excitation eₙ at the sites;
4. the layout: within each symmetry class c, the ``class_ones[c]`` genes with the largest sum
   of Re eₙ over their sites are on, the others off (pinned sites always on, forbidden and
   unavailable ones off), so every iterate has the exact budget;
5. the next excitation is eₙ clipped to [0, 1] (pinned sites 1, unavailable sites 0).

A trial ends when the layout of step 4 is the same as the step before, or after
``iterations`` steps. Its last layout is evaluated through the tracker: one evaluation per
trial. The patterns computed inside the iteration drive the update and are never used to
compare layouts, so they are not counted.

**The clip level.** Keizer clips at a fixed level relative to the main-beam peak, set below
what the array can reach; ``ift_sll_db`` does that. By default each trial draws its own level,
in dB below the peak,

.. math::  \\ell = \\ell_0 + \\Delta, \\qquad
           \\ell_0 = -10\\log_{10}\\frac{M - N}{N (M - 1)},
           \\qquad \\Delta \\in [-2, 20]\\ \\text{dB},

where ℓ₀ is the expected average sidelobe level of N elements drawn at random from the M
available sites (references.md row 5: Lo 1964; Skolnik, Sherman & Ogg 1964). The best fixed
level depends on the budget — about ℓ₀ at 77 % fill, 9–12 dB below it at 50 % and deeper at
20 % (measured on 100- and 200-site linear arrays) — so Δ is drawn uniformly from the range for
half of the trials and, for the other half, from a normal distribution of 1 dB standard
deviation about the Δ of the best trial so far (clipped to the range); without a tracker
(:func:`ift_genomes`) Δ is always uniform.

Differences from the papers, besides the exact per-class count and the level rule: step 5
carries the clipped continuous excitation into the next step, where Keizer (as recalled) sets
it to the 0/1 layout. With the 0/1 reset, trials here stopped at their first or second
layout (the clipped sidelobes moved no excitation across the on/off gap): on the 200-element
case of references.md row 13, the best of 512 trials was −21.1 dB at the best fixed level
tried (−35 dB; −19.7 dB at −25 dB), against −22.3 dB with the continuous excitation
(−27 dB). Not implemented: amplitude-tapered variants and the edge-element rules of the 2009
paper (pin the sites instead).

Options
-------
trials : int
    Most trials (by default: until the run's evaluation or time limit, or 1000 trials when
    it has neither).
iterations : int
    Most steps per trial (default 30). Measured: trials on 100- and 200-site linear arrays
    settle in 4–6 steps on average; on an 800-site planar aperture a batch of 32 trials runs
    about 19 steps until its last trial settles.
ift_batch : int
    Trials iterated together in one stack of FFTs and evaluated together (default 32, fewer on
    a large panel: at most :data:`BATCH_SAMPLES` transform samples in a stack, so that one
    step and one evaluation of a batch stay short against a time limit; 65,000 sites: 4).
ift_sll_db : float  [dB]
    A fixed clip level for every trial, as a positive number of dB below the main-beam peak;
    0 (the default) draws a level per trial as above.
ift_density_fraction : float  [1]
    Share of the trials that start from a density-tapered draw
    (:func:`thinning.search.density.draw`, with the ``taper…`` options) instead of uniform
    random amplitudes on the available sites (default 0).
"""

from __future__ import annotations

import math
import numbers
import time

import numpy as np
import scipy.fft

from ..errors import SpecError, where

__all__ = [
    "IFTOptions",
    "IFTPlan",
    "ift_genomes",
    "iterate",
    "run",
    "DEFAULT_TRIALS",
    "LEVEL_RANGE_DB",
]

#: Trials when the run has neither an evaluation nor a time limit.
DEFAULT_TRIALS = 1000
#: Trials per batch unless ``ift_batch`` says, and the most transform samples in one batch.
DEFAULT_BATCH, BATCH_SAMPLES = 32, 1 << 22
#: Range of Δ, the clip level below the expected random-thinning ASL  [dB].
LEVEL_RANGE_DB = (-2.0, 20.0)
#: Standard deviation of Δ about the best trial's Δ  [dB].
LEVEL_FOCUS_DB = 1.0


class IFTOptions:
    """Validated options of the iterative Fourier method (see the module docstring).

    Parameters
    ----------
    options : dict, optional   the ``[search]`` keys; keys of other methods are ignored
    source : str, optional   spec file name, for messages

    Attributes
    ----------
    trials : int or None
    iterations : int
    batch : int
    sll_db : float  [dB]   0 = a level drawn per trial
    density_fraction : float  [1]

    Raises
    ------
    thinning.errors.SpecError
        Naming ``search.<key>`` for a value out of range.
    """

    def __init__(self, options: dict | None = None, source: str | None = None):
        options = dict(options or {})

        def integer(key, default):
            v = options.get(key, default)
            if v is None:
                return None
            if (
                isinstance(v, bool)
                or not isinstance(v, numbers.Real)
                or not math.isfinite(v)
                or v != int(v)
                or v < 1
            ):
                raise SpecError(
                    f"{where(source, f'search.{key}')}{v!r}: expected a whole number >= 1"
                )
            return int(v)

        def real(key, default, hi, why):
            v = options.get(key, default)
            if (
                isinstance(v, bool)
                or not isinstance(v, numbers.Real)
                or not math.isfinite(v)
                or not 0.0 <= v <= hi
            ):
                raise SpecError(f"{where(source, f'search.{key}')}{v!r}: {why}")
            return float(v)

        self.trials = integer("trials", None)
        self.iterations = integer("iterations", 30)
        self.batch = integer("ift_batch", None)

        self.sll_db = real(
            "ift_sll_db",
            0.0,
            math.inf,
            "expected the clip level as a positive number of dB below the main beam "
            "(e.g. 25 for -25 dB), or 0 for a level drawn per trial",
        )
        self.density_fraction = real(
            "ift_density_fraction", 0.0, 1.0, "expected a share of the trials between 0 and 1"
        )

    def batch_for(self, problem) -> int:
        """Trials per batch: ``ift_batch``, else :data:`DEFAULT_BATCH` capped at
        :data:`BATCH_SAMPLES` transform samples."""
        if self.batch is not None:
            return self.batch
        g = problem.engine.grid
        return int(min(DEFAULT_BATCH, max(2, BATCH_SAMPLES // (g.nr * g.nc))))


class IFTPlan:
    """What every step needs for one problem: the transforms, the region and the classes.

    The excitations of the iteration are real, so their patterns are Hermitian,
    AF(−u, −v) = AF(u, v)*, and the half plane u ≥ 0 of the problem's own engine holds the
    whole period: the forward transform is a real FFT along x and a complex FFT along y (the
    engine's :meth:`~thinning.engine.pattern.FFTPatternEngine.power` layout), the inverse its exact
    inverse. Clipping by a real factor that is the same at (u, v) and (−u, −v) keeps the
    symmetry, so nothing is lost against a complex transform of the full plane.
    """

    def __init__(self, problem):
        self.problem = problem
        self.region = problem.engine.region
        self.pad = problem.engine.pad
        self.shape = problem.sites.grid_shape
        self.flat = problem.sites.flat_index
        self.in_region = self.region.weight > 0
        free = problem.site_gene >= 0
        self.free_sites = np.flatnonzero(free)
        self.free_gene = problem.site_gene[free]
        self.classes = [
            (idx, int(ones))
            for idx, ones in zip(problem.class_members(), problem.class_ones, strict=True)
        ]
        m = int(problem.available_sites.sum())
        n = problem.elements
        # expected ASL of N random elements of the M available sites, dB below the peak
        self.asl0_db = 10 * math.log10(n * (m - 1) / (m - n)) if m > n else 0.0

    @property
    def searchable(self) -> bool:
        """Some class has a choice (neither all of its genes on nor all off)."""
        return any(0 < ones < idx.size for idx, ones in self.classes)

    def forward(self, exc: np.ndarray) -> np.ndarray:
        """AF samples (B, Pr, Pc // 2 + 1) of real site excitations (B, M); [0, 0] is Σaₙ."""
        pr, pc = self.pad
        grids = self.problem.sites.to_grid(np.asarray(exc, dtype=float), dtype=np.float64)
        f = scipy.fft.rfft(grids, n=pc, axis=-1)
        return scipy.fft.fft(f, n=pr, axis=-2) if pr > 1 else f

    def backward(self, af: np.ndarray) -> np.ndarray:
        """Real site excitations (B, M) of AF samples: inverse FFT truncated to the aperture."""
        pr, pc = self.pad
        r, c = self.shape
        f = scipy.fft.ifft(af, n=pr, axis=-2) if pr > 1 else af
        e = scipy.fft.irfft(f, n=pc, axis=-1)[:, :r, :c]
        return e.reshape(e.shape[0], -1)[:, self.flat]

    def clip(self, af: np.ndarray, level_db) -> np.ndarray:
        """Clip each pattern's sidelobe samples above its level [dB below its peak]."""
        b = af.shape[0]
        power = (af.real**2 + af.imag**2).reshape(b, -1)
        red = self.region.reduce(power)
        level = red.peak * 10 ** (-np.broadcast_to(np.asarray(level_db, dtype=float), (b,)) / 10)
        over = self.in_region[None, :] & (power > level[:, None])
        for i in range(b):  # not the main beam (nor a sample one of whose aliases is in it)
            over[i, red.windows[i].flat[red.main_beam_weight[i] > 0]] = False
        with np.errstate(divide="ignore", invalid="ignore"):
            scale = np.where(over, np.sqrt(level[:, None] / power), 1.0)
        return af * scale.reshape(af.shape)

    def threshold(self, exc: np.ndarray) -> np.ndarray:
        """Genomes (B, G): per class, the genes with the largest summed Re eₙ."""
        b = exc.shape[0]
        score = np.zeros((self.problem.n_genes, b))
        np.add.at(score, self.free_gene, exc[:, self.free_sites].real.T)
        score = score.T
        out = np.zeros((b, self.problem.n_genes), dtype=bool)
        rows = np.arange(b)[:, None]
        for idx, ones in self.classes:
            if ones == 0:
                continue
            if ones >= idx.size:
                out[:, idx] = True
                continue
            top = np.argpartition(-score[:, idx], ones - 1, axis=1)[:, :ones]
            out[rows, idx[top]] = True
        return out

    def relax(self, exc: np.ndarray) -> np.ndarray:
        """The next excitation: Re eₙ clipped to [0, 1], pinned sites 1, unavailable 0."""
        a = np.clip(exc.real, 0.0, 1.0)
        a[:, self.problem.pinned_sites] = 1.0
        a[:, ~self.problem.available_sites] = 0.0
        return a


def iterate(
    plan: IFTPlan, start: np.ndarray, level_db, iterations: int, deadline: float | None = None
) -> np.ndarray:
    """Run trials from site excitations ``start`` (B, M); returns their layouts (B, G).

    Parameters
    ----------
    plan : IFTPlan
    start : (B, M) array   starting excitations
    level_db : float or (B,) array  [dB]   clip level of each trial, below its main-beam peak
    iterations : int   most steps per trial
    deadline : float, optional  [s]   ``time.perf_counter()`` past which no further step is
        taken (the layouts of the last step are returned: a time limit is kept to one step)
    """
    exc = plan.relax(np.asarray(start, dtype=float))
    b = exc.shape[0]
    levels = np.broadcast_to(np.asarray(level_db, dtype=float), (b,))
    genomes = np.zeros((b, plan.problem.n_genes), dtype=bool)
    active = np.arange(b)
    for step in range(iterations):
        e = plan.backward(plan.clip(plan.forward(exc), levels[active]))
        new = plan.threshold(e)
        settled = np.all(new == genomes[active], axis=1) if step else np.zeros(b, dtype=bool)
        genomes[active] = new
        active, e = active[~settled], e[~settled]
        if active.size == 0 or (deadline is not None and time.perf_counter() > deadline):
            break
        exc = plan.relax(e)
    return genomes


def _starts(plan: IFTPlan, rng, k: int, fraction: float, options: dict) -> np.ndarray:
    """k starting excitations (k, M): density-tapered draws, then uniform random amplitudes."""
    problem = plan.problem
    n_density = int(round(fraction * k))
    parts = []
    if n_density:
        from . import density

        p = density.taper_probabilities(problem, options)
        parts.append(problem.to_masks(density.draw(problem, p, rng, n_density)).astype(float))
    parts.append(rng.random((k - n_density, len(problem.sites))))
    return np.concatenate(parts, axis=0)


def _levels(plan: IFTPlan, opts: IFTOptions, rng, k: int, best_delta: float | None):
    """Clip levels [dB below the peak] and their Δ for k trials (see the module docstring)."""
    if opts.sll_db > 0:
        return np.full(k, opts.sll_db), np.zeros(k)
    lo, hi = LEVEL_RANGE_DB
    delta = rng.uniform(lo, hi, k)
    if best_delta is not None:
        near = rng.random(k) < 0.5
        focus = np.clip(best_delta + LEVEL_FOCUS_DB * rng.standard_normal(k), lo, hi)
        delta = np.where(near, focus, delta)
    return plan.asl0_db + delta, delta


def ift_genomes(problem, rng: np.random.Generator, k: int, options: dict | None = None):
    """k feasible genomes from k independent trials of the iteration (no tracker).

    For seeding other searches (e.g. :mod:`thinning.search.genetic`). Each trial draws its
    clip level uniformly (or uses ``ift_sll_db``).

    Parameters
    ----------
    problem : ThinningProblem
    rng : numpy.random.Generator
    k : int
    options : dict, optional
        ``iterations``, ``ift_batch``, ``ift_sll_db`` [dB], ``ift_density_fraction`` and the
        ``taper…`` keys (see the module docstring); other keys are ignored.

    Returns
    -------
    (k, G) bool array   exactly ``class_ones[c]`` genes on in every class c
    """
    options = dict(options or {})
    opts = IFTOptions(options, getattr(problem, "source", None))
    plan = IFTPlan(problem)
    out = np.zeros((k, problem.n_genes), dtype=bool)
    batch = opts.batch_for(problem)
    for s in range(0, k, batch):
        n = min(batch, k - s)
        start = _starts(plan, rng, n, opts.density_fraction, options)
        level, _ = _levels(plan, opts, rng, n, None)
        out[s : s + n] = iterate(plan, start, level, opts.iterations)
    return out


def run(problem, tracker, rng: np.random.Generator, options: dict) -> str:
    """Best of many iterative-Fourier trials (see the module docstring).

    Parameters
    ----------
    problem : ThinningProblem
    tracker : thinning.search.Tracker
    rng : numpy.random.Generator   the only source of randomness
    options : dict
        ``trials``, ``iterations``, ``ift_batch``, ``ift_sll_db`` [dB],
        ``ift_density_fraction`` and the ``taper…`` keys of the density start.

    Returns
    -------
    str
        ``"evaluations"`` or ``"time"`` when a tracker limit stopped the run, ``"trials"``
        when all trials were made. Limits are checked after each batch of trials.
    """
    opts = IFTOptions(options, getattr(problem, "source", None))
    plan = IFTPlan(problem)
    if not plan.searchable:  # a single feasible layout
        tracker.evaluate(plan.threshold(np.zeros((1, len(problem.sites)))))
        tracker.record(trial=1)
        return tracker.stop_reason() or "trials"
    total = opts.trials
    if total is None and math.isinf(tracker.remaining) and tracker.time_limit_s is None:
        total = DEFAULT_TRIALS
    done = 0
    best, best_delta = math.inf, None
    batch = opts.batch_for(problem)
    while total is None or done < total:
        k = int(min(batch, tracker.remaining, math.inf if total is None else total - done))
        if k <= 0:
            break
        start = _starts(plan, rng, k, opts.density_fraction, options)
        level, delta = _levels(plan, opts, rng, k, best_delta)
        deadline = None if tracker.time_limit_s is None else tracker.start + tracker.time_limit_s
        ev = tracker.evaluate(iterate(plan, start, level, opts.iterations, deadline))
        i = int(np.argmin(ev.objective))
        if ev.objective[i] < best:
            best, best_delta = float(ev.objective[i]), float(delta[i])
        done += k
        tracker.record(trial=done)
        reason = tracker.stop_reason()
        if reason is not None:
            return reason
    return tracker.stop_reason() or "trials"
