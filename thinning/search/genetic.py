"""Genetic search over the occupancy, with count-preserving operators and swap refinement.

A steady population of genomes (one boolean gene per free symmetry orbit, exactly
``class_ones[c]`` genes on in every class c, see :mod:`thinning.search.problem`) evolves by

* tournament selection (size ``tournament``) with the ``elite`` best carried over unchanged,
* count-preserving crossover: per class, a child keeps the genes on which both parents agree
  and fills the rest of the class's on-slots at random from the genes where they differ (the
  sibling gets the other half, so the pair keeps the parents' alleles),
* count-preserving mutation: a few swaps of an on gene with an off gene of the same class,
* local refinement of the best genome every ``local_every`` generations: first-improvement
  hill climbing over single swaps, proposed in batches that are evaluated in one call,
* a polish of the best genome, with the last ``polish_fraction`` of an evaluation budget or
  when the search has stalled: a cycle of simulated annealing over swaps
  (:mod:`thinning.search.anneal`, ``polish_anneal`` evaluations), then the same hill climbing
  until no single swap improves it,
* restarts when the search stalls with time left (a run with a time limit): the polish, then a
  new population of the elites, perturbed elites and fresh starts
  (:mod:`thinning.search.restart`). A polish that improved the best makes the next one anneal
  twice as long (on a linear array the annealing keeps finding better layouts; on planar
  panels the new populations do). Stall ends only a run without a time limit.

The genetic part follows the binary-GA thinning of Haupt, "Thinned arrays using genetic
algorithms", IEEE TAP 42(7), 1994 (which had no count constraint: it penalised or accepted
the element count); the exact budget, the operators that keep it and the swap refinement are
this module's own. Every random draw comes from the ``rng`` passed to :func:`run`, so a run
is reproducible for a given seed and evaluation limit (and, because the tracker evaluates fixed
batches, for any number of worker processes). Nothing but the stopping depends on the clock:
a run with a time limit is the beginning of a longer run with the same seed, so more time never
gives a worse layout.

The DEAP wiring follows DEAP's own conventions: the ``creator`` classes are made once by
:func:`deap_classes`; individuals are numpy bool arrays (``creator`` subclasses of
``numpy.ndarray``) with a minimising fitness; the :func:`make_toolbox` toolbox registers
``mate``, ``mutate``, ``select``, ``clone`` and ``map``; the hall of fame compares
individuals with :func:`numpy.array_equal`. Evaluation goes through the tracker only (it
counts evaluations, keeps the best and spreads a batch over worker processes).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from deap import base, creator, tools

from ..errors import SpecError, where
from .anneal import AnnealOptions, anneal
from .options import options_from_dict
from .restart import IFT_SEED_FRACTION, IFT_SEED_MAX_SITES, fresh_genomes, restart_genomes

__all__ = [
    "GeneticOptions",
    "deap_classes",
    "make_toolbox",
    "count_preserving_crossover",
    "swap_mutation",
    "tournament_select",
    "run",
]

FITNESS_NAME = "ThinningFitness"
INDIVIDUAL_NAME = "ThinningIndividual"
#: Improvements of the best objective smaller than this do not reset the stall count  [dB].
STALL_TOL = 1e-6
#: Options for which None (or 0, as TOML has no null) means "no limit" / "the default".
#: Neighbourhoods (on × off swaps) up to this size are tried in a random order without
#: repetition; larger ones are sampled with replacement, and a genome counts as a local
#: optimum once as many swaps as the neighbourhood holds have failed to improve it.
PERMUTE_MAX = 1 << 20
_NO_LIMIT = (
    "local_swaps",
    "local_batch",
    "generations",
    "stall_generations",
    "restart_swaps",
)
#: Options that are fractions, between 0 and 1.
_FRACTIONS = (
    "crossover_rate",
    "mutation_rate",
    "seed_density_fraction",
    "seed_ift_fraction",
    "polish_fraction",
    "restart_perturbed_fraction",
)


@dataclass
class GeneticOptions:
    """Options of the genetic search (the ``[search]`` keys of a spec).

    Attributes
    ----------
    population : int   genomes per generation
    tournament : int   tournament size of the selection
    elite : int   best genomes carried over unchanged to the next generation
    crossover_rate : float  [1]   probability that a selected pair is recombined
    mutation_rate : float  [1]   probability that a child is mutated (a child identical to a
        parent is always mutated, so that no evaluation is spent on a copy)
    mutation_swaps : int   a mutation makes 1 … ``mutation_swaps`` swaps (uniformly)
    seed_density_fraction : float  [1]   share of the first population drawn from the
        density taper (:mod:`thinning.search.density`)
    seed_ift_fraction : float or None  [1]   share of the first population (and of the fresh
        starts of a restart) from short iterative Fourier trials
        (:mod:`thinning.search.ift`); the rest is drawn uniformly. None (the default):
        :data:`IFT_SEED_FRACTION` for problems of up to :data:`IFT_SEED_MAX_SITES` sites, 0 for
        larger ones
    local_every : int   generations between two refinements of the best genome (0 = never)
    local_swaps : int or None   evaluations per refinement (None or 0 = 2 × population)
    local_batch : int or None   swaps proposed per hill-climbing step (None or 0 = population)
    polish_fraction : float  [1]   share of an evaluation budget kept for the final polish
    generations : int or None   stop after this many generations (None or 0 = no limit)
    stall_generations : int or None   generations without improvement of the best objective
        after which the search polishes its best genome and, with a time limit, restarts
        (without one, stops) (None or 0 = never)
    polish_anneal : int   evaluations of the annealing cycle of the first polish (0 = hill
        climbing only); doubled after each polish that improved the best
    restart_perturbed_fraction : float  [1]   share of a restarted population made of
        perturbed elites; the rest are fresh starts
    restart_swaps : int or None   most swaps of a perturbed elite (None or 0 = 5 % of the
        genes on, at least 2)
    """

    population: int = 64
    tournament: int = 3
    elite: int = 2
    crossover_rate: float = 0.9
    mutation_rate: float = 0.5
    mutation_swaps: int = 2
    seed_density_fraction: float = 0.5
    seed_ift_fraction: float | None = None
    local_every: int = 5
    local_swaps: int | None = None
    local_batch: int | None = None
    polish_fraction: float = 0.1
    generations: int | None = None
    stall_generations: int | None = 50
    polish_anneal: int = 20_000
    restart_perturbed_fraction: float = 0.5
    restart_swaps: int | None = None

    def ift_share(self, problem) -> float:
        """The share of iterative-Fourier starts for ``problem`` (resolving the default)."""
        if self.seed_ift_fraction is not None:
            return self.seed_ift_fraction
        return IFT_SEED_FRACTION if len(problem.sites) <= IFT_SEED_MAX_SITES else 0.0

    @classmethod
    def from_dict(cls, options: dict | None, source: str | None = None) -> GeneticOptions:
        """Options from a dict; keys of other methods are ignored, bad values raise
        :class:`thinning.errors.SpecError` naming the ``search.<key>``."""
        kw = options_from_dict(cls, options, source, _NO_LIMIT)
        opts = cls(**kw)
        opts._check(source)
        return opts

    def _check(self, source):
        def bad(name, why):
            value = getattr(self, name)
            raise SpecError(f"{where(source, 'search.' + name)}{value!r}: {why}")

        if self.population < 4:
            bad("population", "at least 4 genomes are needed for selection and crossover")
        if not 1 <= self.tournament <= self.population:
            bad("tournament", f"must be between 1 and the population ({self.population})")
        if not 0 <= self.elite < self.population:
            bad("elite", f"must be between 0 and the population − 1 ({self.population - 1})")
        for name in _FRACTIONS:
            if getattr(self, name) is not None and not 0.0 <= getattr(self, name) <= 1.0:
                bad(name, "is a fraction, between 0 and 1")
        if self.seed_density_fraction + (self.seed_ift_fraction or 0.0) > 1.0:
            bad("seed_ift_fraction", "with seed_density_fraction, more than the whole population")
        if self.mutation_swaps < 1:
            bad("mutation_swaps", "a mutation makes at least one swap")
        if self.local_every < 0:
            bad("local_every", "must be ≥ 0 (0 = no refinement)")
        for name in _NO_LIMIT:
            value = getattr(self, name)
            if value is not None and value < 1:
                bad(name, "must be ≥ 1 (or left out)")
        if self.polish_anneal < 0:
            bad("polish_anneal", "must be ≥ 0 (0 = hill climbing only)")


# -- DEAP wiring ---------------------------------------------------------------------------------
def deap_classes():
    """The DEAP fitness and individual classes, created once per process.

    Returns
    -------
    (Fitness, Individual)
        ``Fitness`` minimises one value (the objective J  [dB]); ``Individual`` is a
        ``numpy.ndarray`` subclass carrying a ``fitness``.
    """
    if not hasattr(creator, FITNESS_NAME):
        creator.create(FITNESS_NAME, base.Fitness, weights=(-1.0,))
    if not hasattr(creator, INDIVIDUAL_NAME):
        creator.create(INDIVIDUAL_NAME, np.ndarray, fitness=getattr(creator, FITNESS_NAME))
    return getattr(creator, FITNESS_NAME), getattr(creator, INDIVIDUAL_NAME)


def individual(genome) -> np.ndarray:
    """A DEAP individual (bool array with an empty fitness) holding a copy of ``genome``."""
    _, ind_cls = deap_classes()
    ind = np.array(genome, dtype=bool).view(ind_cls)
    ind.fitness = getattr(creator, FITNESS_NAME)()
    return ind


def _class_index(problem) -> list[np.ndarray]:
    return [np.flatnonzero(problem.gene_class == c) for c in range(problem.class_sizes.size)]


def count_preserving_crossover(ind1, ind2, classes, class_ones, rng):
    """Recombine two genomes in place, keeping every class's count of on genes.

    Per class, both children keep the genes on which the parents agree. Of the genes where
    they differ (as many on in one parent as in the other), a random half goes on in the first
    child and the other half in the second.

    Parameters
    ----------
    ind1, ind2 : (G,) bool arrays (DEAP individuals), modified in place
    classes : list of index arrays   the genes of each class
    class_ones : (C,) ints   genes on per class (used only to check the parents)
    rng : numpy.random.Generator

    Returns
    -------
    (ind1, ind2)
    """
    for idx in classes:
        a, b = ind1[idx], ind2[idx]
        diff = idx[a != b]
        if diff.size < 2:
            continue
        half = diff.size // 2
        order = rng.permutation(diff.size)
        first, second = diff[order[:half]], diff[order[half:]]
        ind1[first], ind1[second] = True, False
        ind2[first], ind2[second] = False, True
    return ind1, ind2


def swap_mutation(ind, classes, rng, max_swaps=2):
    """Swap 1 … ``max_swaps`` on genes with off genes of the same class, in place.

    The class of each swap is drawn in proportion to its number of possible swaps
    (on × off genes); a class that is all on or all off cannot be mutated.

    Returns
    -------
    (ind,)
    """
    n = int(rng.integers(1, max_swaps + 1))
    touched = np.zeros(len(ind), dtype=bool)  # a gene moves at most once: no swap undone
    for _ in range(n):
        on_free = [idx[ind[idx] & ~touched[idx]] for idx in classes]
        off_free = [idx[~ind[idx] & ~touched[idx]] for idx in classes]
        moves = np.array([a.size * b.size for a, b in zip(on_free, off_free, strict=True)])
        total = moves.sum()
        if total == 0:
            break
        c = int(rng.choice(len(classes), p=moves / total))
        i = on_free[c][rng.integers(on_free[c].size)]
        j = off_free[c][rng.integers(off_free[c].size)]
        ind[i], ind[j] = False, True
        touched[[i, j]] = True
    return (ind,)


def tournament_select(individuals, k, tournsize, rng):
    """Pick ``k`` individuals, each the best (lowest objective) of ``tournsize`` drawn at
    random with replacement — DEAP's ``selTournament``, but drawing from ``rng``."""
    values = np.array([ind.fitness.values[0] for ind in individuals])
    draws = rng.integers(len(individuals), size=(k, tournsize))
    winners = draws[np.arange(k), np.argmin(values[draws], axis=1)]
    return [individuals[i] for i in winners]


def make_toolbox(problem, rng, options: GeneticOptions | None = None) -> base.Toolbox:
    """The DEAP toolbox of the search: ``mate``, ``mutate``, ``select``, ``clone``, ``map``.

    ``map`` is the built-in :func:`map` (evaluation itself is batched through the tracker,
    which uses worker processes); every operator draws from ``rng``.
    """
    opts = options or GeneticOptions()
    deap_classes()
    classes = _class_index(problem)
    tb = base.Toolbox()
    tb.register("map", map)
    tb.register(
        "mate", count_preserving_crossover, classes=classes, class_ones=problem.class_ones, rng=rng
    )
    tb.register("mutate", swap_mutation, classes=classes, rng=rng, max_swaps=opts.mutation_swaps)
    tb.register("select", tournament_select, tournsize=opts.tournament, rng=rng)
    tb.register("individual", individual)
    return tb


# -- evaluation helpers --------------------------------------------------------------------------
def _evaluate(tracker, inds) -> int:
    """Give every individual without a valid fitness one, in one tracker call (as many as the
    evaluation budget allows). Returns the number evaluated."""
    todo = [ind for ind in inds if not ind.fitness.valid]
    left = tracker.remaining
    if left < len(todo):
        todo = todo[: int(left)]
    if not todo:
        return 0
    ev = tracker.evaluate(np.stack([np.asarray(ind) for ind in todo]))
    for ind, j in zip(todo, ev.objective, strict=True):
        ind.fitness.values = (float(j),)
    return len(todo)


class _Climber:
    """First-improvement hill climbing over single swaps of one genome.

    Swaps are drawn without replacement from the whole neighbourhood (every on gene × every
    off gene of the same class) in batches of ``batch``, each batch evaluated in one tracker
    call; the best improving swap of a batch is taken. The climber remembers where it stopped,
    so a later call on the same genome goes on with the swaps not yet tried, and it knows when
    a genome is a local optimum (no single swap improves it; for neighbourhoods larger than
    :data:`PERMUTE_MAX`, sampled with replacement, when as many swaps as the neighbourhood
    holds have failed).
    """

    def __init__(self, problem, tracker, rng, batch):
        self.classes = _class_index(problem)
        self.tracker = tracker
        self.rng = rng
        self.batch = int(batch)
        self.key = None
        self.optima: set[bytes] = set()

    def _reset(self, genome, value):
        self.genome = np.array(genome, dtype=bool)
        self.value = float(value)
        self.key = self.genome.tobytes()
        self.on = [idx[self.genome[idx]] for idx in self.classes]
        self.off = [idx[~self.genome[idx]] for idx in self.classes]
        self.sizes = np.array([a.size * b.size for a, b in zip(self.on, self.off, strict=True)])
        self.offsets = np.concatenate([[0], np.cumsum(self.sizes)])
        self.total = int(self.offsets[-1])
        # a permutation of a small neighbourhood; a large one is sampled with replacement
        self.order = self.rng.permutation(self.total) if self.total <= PERMUTE_MAX else None
        self.pos = 0

    def _moves(self, flat):
        c = np.searchsorted(self.offsets, flat, side="right") - 1
        i = flat - self.offsets[c]
        on = np.empty(flat.size, dtype=np.int64)
        off = np.empty(flat.size, dtype=np.int64)
        for k in np.unique(c):
            sel = c == k
            n_off = self.off[k].size
            on[sel] = self.on[k][i[sel] // n_off]
            off[sel] = self.off[k][i[sel] % n_off]
        return on, off

    def climb(self, genome, value, evaluations) -> tuple[np.ndarray, float, bool]:
        """Improve ``genome`` (objective ``value``) with up to ``evaluations`` evaluations.

        Returns
        -------
        genome, value, local_optimum
            The best genome reached, its objective, and whether it is a local optimum.
        """
        genome = np.asarray(genome, dtype=bool)
        if genome.tobytes() in self.optima:
            return genome, value, True
        if genome.tobytes() != self.key:
            self._reset(genome, value)
        spent = 0
        while spent < evaluations and not self.tracker.should_stop():
            n = min(
                self.batch,
                evaluations - spent,
                self.total - self.pos,
                self.tracker.remaining,
            )
            n = int(n)
            if n <= 0:
                break
            if self.order is not None:
                flat = self.order[self.pos : self.pos + n]
            else:
                flat = self.rng.integers(self.total, size=n)
            self.pos += n
            on, off = self._moves(flat)
            trial = self.tracker.problem.swapped(self.genome, on, off)
            # scored by updating the base layout's transform, not by n new FFTs
            ev = self.tracker.evaluate_swaps(self.genome, on, off, trial)
            spent += n
            j = int(np.argmin(ev.objective))
            if ev.objective[j] < self.value - STALL_TOL:
                self._reset(trial[j], ev.objective[j])
            elif self.pos >= self.total:
                self.optima.add(self.key)
                return self.genome.copy(), self.value, True
        return self.genome.copy(), self.value, False


# -- the search ----------------------------------------------------------------------------------
def run(problem, tracker, rng: np.random.Generator, options: dict) -> str:
    """Run the genetic search until a limit; see the module docstring.

    Parameters
    ----------
    problem : ThinningProblem
    tracker : thinning.search.Tracker
    rng : numpy.random.Generator   the only source of randomness
    options : dict   keys of :class:`GeneticOptions` (others are ignored)

    Returns
    -------
    str
        "generations", "stall", "evaluations" or "time".
    """
    opts = GeneticOptions.from_dict(options, problem.source)
    tb = make_toolbox(problem, rng, opts)
    pop_size = opts.population
    local_swaps = opts.local_swaps or 2 * pop_size
    climber = _Climber(problem, tracker, rng, opts.local_batch or pop_size)
    reserve = 0
    if tracker.max_evaluations is not None:
        reserve = int(opts.polish_fraction * tracker.max_evaluations)
    hof = tools.HallOfFame(max(1, opts.elite), similar=np.array_equal)

    if problem.n_genes == 0 or not any(
        0 < ones < size
        for ones, size in zip(problem.class_ones, np.bincount(problem.gene_class), strict=True)
    ):  # a single feasible layout: nothing to search
        tracker.evaluate(problem.random_genomes(rng, 1))
        tracker.record(generation=0)
        return tracker.stop_reason() or "generations"

    pop = [
        tb.individual(g)
        for g in fresh_genomes(
            problem, rng, pop_size, opts.seed_density_fraction, options, opts.ift_share(problem)
        )
    ]
    _evaluate(tracker, pop)
    pop = [ind for ind in pop if ind.fitness.valid]
    hof.update(pop)
    best = hof[0].fitness.values[0]
    tracker.record(generation=0)
    anneal_opts = AnnealOptions.from_dict(options, problem.source)
    gen, stall, restarts = 0, 0, 0
    polish_len = opts.polish_anneal
    while True:
        reason = None
        while True:
            reason = tracker.stop_reason()
            if reason:
                return reason
            if opts.generations is not None and gen >= opts.generations:
                reason = "generations"
                break
            if opts.stall_generations is not None and stall >= opts.stall_generations:
                reason = "stall"
                break
            if reserve and tracker.remaining <= reserve:
                break  # the rest of the budget is for the polish
            gen += 1
            pop = _generation(tb, pop, hof, opts, rng, tracker)
            if opts.local_every and gen % opts.local_every == 0 and not tracker.should_stop():
                _refine(tb, pop, hof, climber, local_swaps)
            now = hof[0].fitness.values[0]
            stall = 0 if now < best - STALL_TOL else stall + 1
            best = min(best, now)
            tracker.record(generation=gen)

        before = tracker.best[0]
        _polish(tb, pop, hof, climber, polish_len, anneal_opts)
        if tracker.best[0] < before - STALL_TOL:
            polish_len *= 2  # the polish paid off: anneal longer next time
        best = min(best, hof[0].fitness.values[0])
        tracker.record(generation=gen, polish=True)
        if reason == "stall" and not tracker.stall_ends_run and not tracker.should_stop():
            # stalled with time left: start again from the elites, perturbed elites and
            # fresh starts
            restarts += 1
            pop = _restart(tb, hof, problem, rng, opts, options)
            _evaluate(tracker, pop)
            pop = [ind for ind in pop if ind.fitness.valid]
            hof.update(pop)
            best, stall = hof[0].fitness.values[0], 0
            tracker.record(generation=gen, restart=restarts)
            continue
        if reason is not None or tracker.should_stop():
            return tracker.stop_reason() or reason
        reserve = 0  # polished to a local optimum with budget left: evolve on


def _polish(tb, pop, hof, climber, anneal_evaluations, anneal_opts):
    """Polish the best genome: an annealing cycle over swaps, then hill climbing until it is a
    local optimum (or a limit is reached). A cycle that would overrun an evaluation limit is
    shortened to what is left, unless the run also has a time limit (then nothing in the
    schedule depends on the limits, and a longer run continues a shorter one)."""
    tracker = climber.tracker
    left = tracker.remaining
    if tracker.time_limit_s is None and not math.isinf(left):
        anneal_evaluations = min(anneal_evaluations, int(left))
    if anneal_evaluations > 0 and not tracker.should_stop():
        top = hof[0]
        anneal(
            tracker.problem,
            tracker,
            climber.rng,
            top,
            top.fitness.values[0],
            anneal_evaluations,
            anneal_opts,
        )
        if tracker.best[0] < top.fitness.values[0]:  # the cycle's best is the tracker's
            _insert(tb, pop, hof, tracker.best_genome, tracker.best[0])
    g, value = np.asarray(hof[0]), hof[0].fitness.values[0]
    done = False
    while not done and not tracker.should_stop():
        left = tracker.remaining
        g, value, done = climber.climb(g, value, math.inf if left == np.inf else int(left))
    if value < hof[0].fitness.values[0]:
        _insert(tb, pop, hof, g, value)


def _restart(tb, hof, problem, rng, opts, options):
    """A new population: the elites, perturbed elites and fresh starts (not yet evaluated)."""
    elites = [tb.clone(ind) for ind in hof[: max(1, opts.elite)]]
    swaps = opts.restart_swaps or max(2, round(0.05 * int(problem.class_ones.sum())))
    genomes = restart_genomes(
        problem,
        rng,
        [np.asarray(e) for e in elites],
        opts.population - len(elites),
        opts.restart_perturbed_fraction,
        swaps,
        lambda n: fresh_genomes(
            problem, rng, n, opts.seed_density_fraction, options, opts.ift_share(problem)
        ),
    )
    return elites + [tb.individual(g) for g in genomes]


def _generation(tb, pop, hof, opts, rng, tracker):
    """One generation: elites, then selected, recombined and mutated offspring."""
    n_elite = min(opts.elite, len(hof))
    n_off = opts.population - n_elite
    parents = tb.select(pop, n_off + (n_off % 2))
    offspring = list(tb.map(tb.clone, parents))
    for a, b in zip(offspring[::2], offspring[1::2], strict=True):
        if rng.random() < opts.crossover_rate:
            tb.mate(a, b)
            del a.fitness.values, b.fitness.values
    for child, parent in zip(offspring, parents, strict=True):
        if rng.random() < opts.mutation_rate or np.array_equal(child, parent):
            tb.mutate(child)
            if child.fitness.valid:
                del child.fitness.values
    offspring = offspring[:n_off]
    _evaluate(tracker, offspring)
    offspring = [ind for ind in offspring if ind.fitness.valid]
    pop = [tb.clone(ind) for ind in hof[:n_elite]] + offspring
    hof.update(pop)
    return pop


def _insert(tb, pop, hof, genome, value):
    """Put an improved genome in place of the worst of the population and in the hall of fame."""
    ind = tb.individual(genome)
    ind.fitness.values = (float(value),)
    worst = int(np.argmax([p.fitness.values[0] for p in pop]))
    pop[worst] = ind
    hof.update([ind])


def _refine(tb, pop, hof, climber, evaluations):
    """Hill-climb from the best genome with up to ``evaluations`` evaluations."""
    top = hof[0]
    g, value, _ = climber.climb(top, top.fitness.values[0], evaluations)
    if value < top.fitness.values[0]:
        _insert(tb, pop, hof, g, value)
