"""Statistical density tapering: an envelope of on-probabilities, exact-count layouts from it,
and lobe-aimed swaps to finish.

Each gene is switched on with a probability pₙ that follows an *envelope* (Willey, "Space
tapering of linear and planar arrays", IRE TAP AP-10, 1962; Skolnik, Sherman & Ogg,
"Statistically designed density-tapered arrays", IEEE TAP 12(4), 1964). The *expected* array
factor is then the pattern of the envelope itself, and the draws scatter about it with a mean
sidelobe power (references.md row 5)

.. math::

    E|AF(u)|^2 = \\Bigl|\\sum_n p_n e^{j\\psi_n(u)}\\Bigr|^2 + \\sum_n p_n (1 - p_n).

The envelope is by default the one a linear programme finds for the panel's own outline
(:mod:`thinning.search.envelope`); its bound (the expected pattern's peak) is recorded with the
run (``problem.envelope``). A Taylor taper used as a density (the classical choice) or uniform
probabilities (random thinning) are options.

Every layout has the exact element count: the genes of each symmetry class are drawn by
randomised systematic sampling (Madow, Ann. Math. Statist. 20, 1949), which keeps each marginal
P(gene on) = pₙ exactly, or decided by error diffusion (:mod:`thinning.search.sampling`). The
run starts from the best of those layouts (eight diffusion scans, eight dithered ones and
``draws`` random draws, by default 16) and then, with ``polish`` (the default), improves it by
swap moves aimed at its worst lobes (:func:`thinning.search.lobe_swaps.polish`) until the
limits, trying the next start (then the best one shaken by a few random swaps) whenever the
moves stop helping. With a time limit it keeps shaking and polishing until the limit (a
stall ends only a run without one, as in every method); without one it stops after
:data:`SHAKES` shaken copies. Without ``polish`` it is the best of K draws as before.

Options
-------
taper : {"lp", "taylor", "uniform"}
    Envelope (default "lp", the linear programme); "taylor" the Taylor amplitude taper used as
    a density; "uniform" equal probabilities, which is random thinning. Other methods that
    seed from the density (``genetic``, ``ift``) take "lp" by default from
    :data:`LARGE_SITES` candidate sites on and "taylor" below.
taper_sll_db : float  [dB]
    Design sidelobe level of the Taylor taper, as a positive number of dB below the main lobe
    (default 30).
taper_nbar : int
    Number n̄ of nearly equal-level sidelobes of the Taylor taper (default 5).
envelope_rings, envelope_sectors, envelope_beam
    The programme's basis and main-beam radius (:func:`thinning.search.envelope.lp_envelope`).
polish : bool
    Finish with lobe-aimed swaps (default true).
lobe_depth_db, lobe_count, lobe_focus, lobe_step
    Of the swaps (:func:`thinning.search.lobe_swaps.polish`).
batch, draws : int
    As for :mod:`thinning.search.random` (without ``polish``); with it, ``draws`` is the number
    of random draws among the starts.
"""

from __future__ import annotations

import dataclasses
import math
import numbers
import time

import numpy as np
from scipy.signal.windows import taylor

from ..errors import SpecError, where
from .random import DEFAULT_BATCH, _positive_int, best_of_draws
from .sampling import scale_to_classes, systematic

__all__ = [
    "TAPERS",
    "LARGE_SITES",
    "run",
    "taper_probabilities",
    "taper_values",
    "draw",
    "optimised_envelope",
    "starting_layouts",
    "default_taper",
]

TAPERS = ("lp", "taylor", "uniform")
#: From this many candidate sites on, the optimised envelope seeds every method and the spec's
#: default method is ``density`` (:func:`thinning.spec.default_method`).
LARGE_SITES = 4096
#: Random systematic draws among the starts of a polished run (option ``draws``).
START_DRAWS = 16
#: Shaken copies of the best layout polished after the starts, at most (without a time limit).
SHAKES = 64
#: Most bytes of starting layouts drawn at once (caps ``draws`` on a large panel).
START_BYTES = 1 << 28
#: Samples of the reference Taylor window that is interpolated at the sites.
TAPER_SAMPLES = 2001


def default_taper(problem) -> str:
    """The envelope other methods seed from when the spec names none: the optimised one
    ("lp") from :data:`LARGE_SITES` candidate sites on, the Taylor taper below (where the
    random floor, not the envelope, sets the peak, and the search is quick anyway)."""
    return "lp" if len(problem.sites) >= LARGE_SITES else "taylor"


def _taper_options(problem, options: dict) -> tuple[str, float, int]:
    src = getattr(problem, "source", None)
    kind = options.get("taper", default_taper(problem))
    if kind not in TAPERS:
        raise SpecError(
            f"{where(src, 'search.taper')}{kind!r}: expected one of {', '.join(TAPERS)}"
        )
    sll = options.get("taper_sll_db", 30.0)
    if (
        isinstance(sll, bool)
        or not isinstance(sll, numbers.Real)
        or not math.isfinite(sll)
        or sll <= 0
    ):
        raise SpecError(
            f"{where(src, 'search.taper_sll_db')}{sll!r}: expected the design sidelobe level "
            "as a positive number of dB below the main lobe (e.g. 30 for -30 dB sidelobes)"
        )
    nbar = options.get("taper_nbar", 5)
    if isinstance(nbar, bool) or not isinstance(nbar, numbers.Integral) or nbar < 1:
        raise SpecError(
            f"{where(src, 'search.taper_nbar')}{nbar!r}: expected a whole number >= 1 "
            "(the number of nearly equal Taylor sidelobes)"
        )
    return kind, float(sll), int(nbar)


def taper_values(sites, kind: str = "taylor", sll_db: float = 30.0, nbar: int = 5) -> np.ndarray:
    """Amplitude taper at every site  [1, arbitrary scale, > 0].

    A linear lattice (``sites.lattice.kind == "linear"``) gets the Taylor window along x, from
    the centroid of the sites to their farthest end:

    .. math::  w(x) = T\\!\\left(\\frac{|x - \\bar x|}{\\max_m |x_m - \\bar x|}\\right)

    where T(t), 0 ≤ t ≤ 1, is the half of ``scipy.signal.windows.taylor`` (Taylor, IRE TAP
    AP-3, 1955; references.md row 9) from its centre to its edge, sampled at
    :data:`TAPER_SAMPLES` points and interpolated linearly. A planar aperture gets the same
    profile as a radial taper, w = T(r/R_max), with r the distance of a site from the centroid
    of the sites and R_max the largest such distance. This is an approximation of a circular
    Taylor distribution (Taylor, IRE TAP AP-8, 1960), which scipy does not provide: the
    sidelobe level of the continuous aperture it tapers is only near ``sll_db``, and a
    non-circular outline is tapered on circles all the same.

    Parameters
    ----------
    sites : thinning.geometry.lattice.Sites
    kind : {"taylor", "uniform"}
    sll_db : float  [dB]
        Taylor design sidelobe level, positive (dB below the main lobe).
    nbar : int
        Taylor n̄.

    Returns
    -------
    (M,) float array
    """
    m = len(sites)
    if kind == "uniform":
        return np.ones(m)
    if kind not in ("taylor", "lp"):
        raise ValueError(f"taper {kind!r}: expected one of {', '.join(TAPERS)}")
    x, y = sites.x, sites.y
    if sites.lattice.kind == "linear":
        dist = np.abs(x - x.mean())
    else:
        dist = np.hypot(x - x.mean(), y - y.mean())
    reach = float(dist.max())
    t = dist / reach if reach > 0 else np.zeros(m)
    window = taylor(TAPER_SAMPLES, nbar, sll_db, norm=False)
    half = window[TAPER_SAMPLES // 2 :]
    return np.interp(t, np.linspace(0.0, 1.0, half.size), half)


def taper_probabilities(problem, options: dict | None = None) -> np.ndarray:
    """On-probability of every gene, following an amplitude taper, with the exact budget.

    Each gene's weight is the mean taper value (:func:`taper_values`) over its sites, so a
    symmetric orbit is weighted by where its sites are, not by their mean position (which for
    a mirror pair lies on the mirror). Within each class c the weights are scaled to

    .. math::  p_n = \\min(1, s_c w_n), \\qquad \\sum_{n \\in c} p_n = \\text{class\\_ones}[c],

    capping at 1 and re-scaling the rest until no probability exceeds 1 (Skolnik, Sherman &
    Ogg 1964: density proportional to the amplitude taper).

    Parameters
    ----------
    problem : ThinningProblem
    options : dict, optional
        ``taper``, ``taper_sll_db`` [dB], ``taper_nbar`` (see the module docstring); with
        ``taper = "lp"`` (the default from :data:`LARGE_SITES` sites on) the optimised envelope
        of :func:`optimised_envelope`.

    Returns
    -------
    (G,) float array  [1]
        In [0, 1]; the sum over the genes of class c equals ``problem.class_ones[c]``.

    Raises
    ------
    thinning.errors.SpecError
        For an unknown taper or an out-of-range taper parameter.
    """
    options = dict(options or {})
    kind, sll, nbar = _taper_options(problem, options)
    if kind == "lp":
        return optimised_envelope(problem, options).genes
    w_site = taper_values(problem.sites, kind, sll, nbar)
    g = problem.n_genes
    free = problem.site_gene >= 0
    sums = np.bincount(problem.site_gene[free], weights=w_site[free], minlength=g)
    counts = np.bincount(problem.site_gene[free], minlength=g)
    w = sums / np.maximum(counts, 1)
    return scale_to_classes(problem, w)


def draw(problem, p, rng: np.random.Generator, k: int) -> np.ndarray:
    """k genomes drawn with P(gene n on) = pₙ and the exact count of every class
    (randomised systematic sampling, :func:`thinning.search.sampling.systematic`)."""
    return systematic(problem, p, rng, k)


def envelope_key(options: dict) -> tuple:
    """The options an envelope depends on, as a cache key."""
    return tuple(
        (k, options.get(k))
        for k in (
            "envelope_rings",
            "envelope_sectors",
            "envelope_beam",
            "taper_sll_db",
            "taper_nbar",
        )
    )


def optimised_envelope(problem, options: dict | None = None):
    """The linear-programme envelope of a problem (:func:`thinning.search.envelope.lp_envelope`),
    computed once per problem and options and kept as ``problem.envelope``.

    The Taylor envelope (``taper_sll_db``, ``taper_nbar``) is passed along, so the result is
    never worse than it; a programme that fails (a degenerate panel) falls back to it, with a
    note in ``problem.notes``. On a tiled problem (every tile's count fixed) the envelope is
    the one the counts were planned from (:func:`thinning.search.tile_counts.planned_envelope`)
    scaled within each tile to its count (:func:`tiled_envelope`).
    """
    from .envelope import Envelope, envelope_bound, lp_envelope, site_probabilities

    options = dict(options or {})
    key = envelope_key(options)
    cache = problem.__dict__.setdefault("_envelopes", {})
    if key not in cache:
        if getattr(problem, "tile_grid", None) is not None:
            cache[key] = tiled_envelope(problem, options)
        else:
            taylor_genes = taper_probabilities(problem, {**options, "taper": "taylor"})
            try:
                env = lp_envelope(problem, options, taylor_genes)
            except SpecError:
                raise
            except (ValueError, RuntimeError, np.linalg.LinAlgError) as exc:
                site_p = site_probabilities(problem, taylor_genes)
                bound, at = envelope_bound(problem, site_p)
                env = Envelope("taylor", taylor_genes, site_p, bound, at, taylor_bound_db=bound)
                problem.notes.append(f"envelope programme failed ({exc}); Taylor envelope used")
            cache[key] = env
    problem.envelope = cache[key]
    return cache[key]


def tiled_envelope(problem, options: dict):
    """The envelope of a tiled problem: the planned envelope (the programme over the panel's
    own basis with every tile's expected count within its limit) scaled within each class
    (tile and orbit size) to the class's count, so every tile's expected count is its planned
    count; its bound recomputed. Solving the programme over per-tile variables instead would
    multiply its variables by the number of tiles (minutes at 65,536 sites)."""
    from .envelope import envelope_bound, site_probabilities
    from .tile_counts import planned_envelope

    t0 = time.perf_counter()
    plan = planned_envelope(problem, options)
    genes = scale_to_classes(problem, plan.genes)
    site_p = site_probabilities(problem, genes)
    bound, at = envelope_bound(problem, site_p)
    return dataclasses.replace(
        plan,
        genes=genes,
        sites=site_p,
        bound_db=bound,
        bound_uv=at,
        seconds=plan.seconds + time.perf_counter() - t0,
    )


def starting_layouts(problem, p, rng, draws: int) -> np.ndarray:
    """The starting layouts of a polished run: error diffusion in eight scans, eight dithered
    ones, and ``draws`` random systematic draws."""
    from .sampling import ORIENTATIONS, error_diffusion

    starts = [error_diffusion(problem, p, v) for v in range(len(ORIENTATIONS))]
    starts += [
        error_diffusion(problem, p, v, dither=1.0, rng=rng) for v in range(len(ORIENTATIONS))
    ]
    out = np.vstack([np.array(starts), systematic(problem, p, rng, draws)])
    _, first = np.unique(np.packbits(out, axis=1), axis=0, return_index=True)
    return out[np.sort(first)]


def _shaken(problem, genome, rng, swaps: int) -> np.ndarray:
    """A genome with ``swaps`` random count-preserving swaps per class (at most)."""
    g = genome.copy()
    for idx in problem.class_members():
        on, off = idx[g[idx]], idx[~g[idx]]
        k = min(swaps, on.size, off.size)
        if k:
            g[rng.choice(on, k, replace=False)] = False
            g[rng.choice(off, k, replace=False)] = True
    return g


def run(problem, tracker, rng: np.random.Generator, options: dict) -> str:
    """The envelope, the best of its exact-count layouts, and lobe-aimed swaps to finish (see
    the module docstring).

    Parameters
    ----------
    problem : ThinningProblem
    tracker : thinning.search.Tracker
    rng : numpy.random.Generator
    options : dict
        ``taper``, ``taper_sll_db`` [dB], ``taper_nbar``, ``envelope_…``, ``polish``,
        ``lobe_…``, ``batch``, ``draws``.

    Returns
    -------
    str
        Why the run stopped: ``"evaluations"``, ``"time"``, ``"draws"`` (without polish) or
        ``"stall"`` (the swaps stopped helping after every start and shake).
    """
    from .lobe_swaps import _options as polish_options
    from .lobe_swaps import polish

    p = taper_probabilities(problem, {"taper": "lp", **options})
    do_polish = options.get("polish", True)
    if not isinstance(do_polish, bool):
        src = getattr(problem, "source", None)
        raise SpecError(f"{where(src, 'search.polish')}{do_polish!r}: expected true or false")
    if not do_polish:
        return best_of_draws(problem, tracker, options, lambda k: draw(problem, p, rng, k))
    polish_options(problem, options)  # refuse bad options before any work
    src = getattr(problem, "source", None)
    _positive_int(options, "batch", DEFAULT_BATCH, src)
    draws = _positive_int(options, "draws", START_DRAWS, src)
    draws = min(draws, max(1, START_BYTES // max(1, problem.n_genes)))
    starts = starting_layouts(problem, p, rng, draws)
    if math.isfinite(tracker.remaining):
        starts = starts[: max(1, int(tracker.remaining))]
    ev = tracker.evaluate(starts)
    order = np.argsort(ev.objective, kind="stable")
    tracker.record(round=0)
    best = starts[order[0]]
    queue = [starts[i] for i in order]
    shake = max(4, problem.elements // 2000)
    k = 0
    while k < len(queue) + SHAKES or not tracker.stall_ends_run:
        if tracker.should_stop():
            return tracker.stop_reason()
        start = queue[k] if k < len(queue) else _shaken(problem, best, rng, shake)
        polish(problem, tracker, start, options)
        best = tracker.best_genome
        k += 1
        tracker.record(round=k)
    return tracker.stop_reason() or "stall"
