"""Simulated annealing over swap moves, each scored from the stored transform of its layout.

The search walks one genome (see :mod:`thinning.search.problem`). A *move* swaps an on gene
with an off gene of the same symmetry class, so every layout it visits has the exact element
count, keeps its symmetry, and keeps pinned sites on and forbidden ones off (they are not
genes). A move that changes the objective J by Δ is accepted with probability

.. math::  P(\\text{accept}) = \\min\\bigl(1,\\ e^{-\\Delta / T}\\bigr)

(Metropolis et al., J. Chem. Phys. 21, 1953; as an optimiser: Kirkpatrick, Gelatt & Vecchi,
"Optimization by simulated annealing", Science 220, 1983), with the temperature T  [dB of J]
falling geometrically over a *cycle* from ``anneal_hot_db`` (the first cycle, from a drawn
layout) or ``anneal_reheat_db`` (a cycle from an optimised layout) to ``anneal_cold_db``.

**Batches.** Moves are proposed a batch at a time from the current layout and scored
together by :meth:`thinning.search.Tracker.evaluate_swaps` (one stored transform, updated per
move on the samples that can hold the peak; an accepted move updates the transform by
separable terms, no FFT). The batch is read in order and its first accepted move is taken:
since a rejected move leaves the layout as it was, this is the one-move-at-a-time chain
exactly; the moves after the accepted one were scored against the old layout and are dropped
(they still count as evaluations). A call costs about as much as 20–50 moves, so the batch
follows the acceptance rate: about one accepted move per batch (1 / rate, from the recent
batches), between :data:`BATCH_MIN` and ``anneal_batch`` moves. Measured on the 200-site
linear case (60 s, seeds 1–3, busy machine): −23.99, −23.91, −23.94 dB with 1.2–1.3 million
evaluations, against −23.98, −23.88, −23.90 dB with 0.9–1.3 million for a fixed batch of 16.

**Moves.** With probability ``anneal_local`` the new site is one of the ``anneal_near``
nearest genes of the same class to the one switched off (an element moved a short way);
otherwise, or when that gene is on already, a uniformly drawn off gene of the class.

**Cycles (an anytime schedule).** The first cycle spends ``anneal_cycle`` evaluations, each
later one twice as many, and every cycle after the first starts again from the best layout
so far (a reheat, as in iterated or "restarted" annealing), at the lower ``anneal_reheat_db``:
a reheat as hot as the first cycle wanders far from the layout it starts from. Measured on
the 200-site linear case, seeds 1–3, 2 million evaluations each: −23.97 dB (median)
reheating to 0.15 dB, −24.00 dB to 0.05 dB, −23.98 dB to 0.0225 dB; the colder cycles also
accept fewer moves, each of which costs an update of the stored transform, so the 2 million
evaluations took 32–38 s instead of 77–91 s (busy 2-core machine).

Nothing in the schedule depends on the clock, so a run with a time limit follows the same
path as a longer one with the same seed and is a prefix of it: a 60 s run is never worse than
a 10 s run. With an evaluation limit and no time limit, the cycle that would overrun the
limit is shortened to what is left (the whole temperature range in fewer moves) instead of
being cut off hot. A run with no time limit ends after ``anneal_stall_cycles`` cycles in a
row without improvement; with a time limit it goes on until the limit.

The figures of a move agree with a full evaluation of the swapped layout within 0.01 dB
(tests/test_swap.py) unless the move shifts the first null of the main beam (an end element
moved), which the move's base layout fixes
(:meth:`thinning.search.problem.ThinningProblem.evaluate_swaps`); the tracker evaluates any
move that would become the best so far in full. The whole search runs in the calling process
(the worker processes of ``--workers`` evaluate whole batches of layouts, which a chain of
single moves does not have), and draws every random number from the ``rng`` it is given, so
a run is reproducible for a given seed and evaluation limit, for any number of workers.

Options
-------
anneal_batch : int   most moves scored per call (default 64)
anneal_local : float  [1]   share of short moves (default 0.5)
anneal_near : int   how many nearest genes a short move may go to (default 8)
anneal_hot_db, anneal_reheat_db, anneal_cold_db : float  [dB]   temperature at the start of
    the first cycle, at the start of a cycle from an optimised layout, and at the end of a
    cycle (defaults 0.15, 0.05 and 0.005; from a good layout of the 200-site linear case a
    single swap costs 0.03–1 dB, 0.23 dB or less for 1 % of them)
anneal_cycle : int   evaluations of the first cycle (default 20,000)
anneal_stall_cycles : int   cycles without improvement that end a run without a time limit
    (default 2)
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from ..errors import SpecError, where
from .options import options_from_dict

__all__ = ["AnnealOptions", "Chain", "anneal", "run"]

#: Fewest moves per batch.
BATCH_MIN = 4
#: Decay per batch of the running acceptance counts.
BATCH_MEMORY = 0.9
#: Improvements of the best objective smaller than this do not count  [dB].
IMPROVE_TOL = 1e-6


@dataclass
class AnnealOptions:
    """Options of the annealing search (the ``[search]`` keys ``anneal_*`` of a spec)."""

    anneal_batch: int = 64
    anneal_local: float = 0.5
    anneal_near: int = 8
    anneal_hot_db: float = 0.15
    anneal_cold_db: float = 0.005
    anneal_reheat_db: float = 0.05
    anneal_cycle: int = 20_000
    anneal_stall_cycles: int = 2

    @classmethod
    def from_dict(cls, options: dict | None, source: str | None = None) -> AnnealOptions:
        """Options from a dict; keys of other methods are ignored, bad values raise
        :class:`thinning.errors.SpecError` naming the ``search.<key>``."""
        opts = cls(**options_from_dict(cls, options, source))

        def bad(name, why):
            raise SpecError(f"{where(source, 'search.' + name)}{getattr(opts, name)!r}: {why}")

        for name in ("anneal_batch", "anneal_near", "anneal_cycle", "anneal_stall_cycles"):
            if getattr(opts, name) < 1:
                bad(name, "must be ≥ 1")
        if not 0.0 <= opts.anneal_local <= 1.0:
            bad("anneal_local", "is a fraction, between 0 and 1")
        for name in ("anneal_hot_db", "anneal_reheat_db"):
            if not opts.anneal_cold_db <= getattr(opts, name):
                bad(name, f"must be at least anneal_cold_db ({opts.anneal_cold_db})")
        if not opts.anneal_cold_db > 0:
            bad("anneal_cold_db", "a temperature above 0 dB is needed")
        return opts


def _near_genes(problem, k: int) -> np.ndarray:
    """(G, k) the k nearest genes of the same class to each gene (by mean site position);
    a class of fewer than k + 1 genes repeats its members."""
    from scipy.spatial import cKDTree

    pos = problem.gene_positions()
    g = problem.n_genes
    out = np.empty((g, k), dtype=np.int64)
    for idx in problem.class_members():
        if idx.size < 2:
            out[idx] = idx[:, None]
            continue
        q = min(k + 1, idx.size)
        _, nn = cKDTree(pos[idx]).query(pos[idx], k=q)
        nn = idx[np.atleast_2d(nn)[:, 1:]]  # the first is the gene itself
        out[idx] = np.resize(nn, (idx.size, k)) if q - 1 < k else nn
    return out


class Chain:
    """One annealing chain over swaps: the current genome and what its moves need.

    Parameters
    ----------
    problem : ThinningProblem
    tracker : thinning.search.Tracker   every move is evaluated through it
    rng : numpy.random.Generator
    options : AnnealOptions
    """

    def __init__(self, problem, tracker, rng, options: AnnealOptions):
        self.problem, self.tracker, self.rng, self.opts = problem, tracker, rng, options
        self.near = _near_genes(problem, options.anneal_near)
        self.gene_class = problem.gene_class
        self.genome = None
        self.value = math.inf
        self._moves, self._accepted = 4.0, 1.0

    @property
    def searchable(self) -> bool:
        """Some class has a choice (neither all its genes on nor all off)."""
        sizes = np.bincount(self.gene_class, minlength=self.problem.class_sizes.size)
        return bool(np.any((self.problem.class_ones > 0) & (self.problem.class_ones < sizes)))

    def start(self, genome, value):
        """Put the chain at ``genome`` (objective ``value``  [dB])."""
        self.genome = np.array(genome, dtype=bool)
        self.value = float(value)
        c = self.gene_class
        n_classes = self.problem.class_sizes.size
        self.on = [np.flatnonzero(self.genome & (c == k)) for k in range(n_classes)]
        self.off = [np.flatnonzero(~self.genome & (c == k)) for k in range(n_classes)]
        self.slot = np.empty(self.genome.size, dtype=np.int64)
        for lists in (self.on, self.off):
            for arr in lists:
                self.slot[arr] = np.arange(arr.size)
        movable = [k for k in range(n_classes) if self.on[k].size and self.off[k].size]
        self.movable = np.array(movable, dtype=np.int64)
        counts = np.array([self.on[k].size for k in movable], dtype=np.int64)
        self.on_offsets = np.concatenate([[0], np.cumsum(counts)])

    def _propose(self, k: int) -> tuple[np.ndarray, np.ndarray]:
        """k moves: genes switched off (uniform over the on genes of classes with an off
        gene) and on (near or uniform in the same class)."""
        rng = self.rng
        flat = rng.integers(self.on_offsets[-1], size=k)
        which = np.searchsorted(self.on_offsets, flat, side="right") - 1
        off_genes = np.empty(k, dtype=np.int64)
        on_genes = np.empty(k, dtype=np.int64)
        u = rng.random(k)
        for w, cls in enumerate(self.movable):
            sel = which == w
            if not sel.any():
                continue
            off_genes[sel] = self.on[cls][flat[sel] - self.on_offsets[w]]
            pool = self.off[cls]
            on_genes[sel] = pool[(u[sel] * pool.size).astype(np.int64)]
        local = rng.random(k) < self.opts.anneal_local
        near = self.near[off_genes, rng.integers(self.near.shape[1], size=k)]
        use = local & ~self.genome[near] & (self.gene_class[near] == self.gene_class[off_genes])
        on_genes[use] = near[use]
        return off_genes, on_genes

    def _apply(self, i: int, j: int, value: float):
        """Switch gene i off and gene j on (same class)."""
        cls = self.gene_class[i]
        si, sj = self.slot[i], self.slot[j]
        self.on[cls][si] = j
        self.off[cls][sj] = i
        self.slot[i], self.slot[j] = sj, si
        self.genome = self.genome.copy()
        self.genome[i], self.genome[j] = False, True
        self.value = float(value)

    def _note(self, moves, accepted):
        """Keep a running acceptance rate (moves read up to the accepted one)."""
        d = BATCH_MEMORY
        self._moves = d * self._moves + moves
        self._accepted = d * self._accepted + accepted

    def _batch(self) -> int:
        """Moves per call: about one accepted move per batch (1 / acceptance rate), within
        [BATCH_MIN, anneal_batch]."""
        want = self._moves / max(self._accepted, 1e-9)
        return int(min(self.opts.anneal_batch, max(BATCH_MIN, round(want))))

    def run_cycle(self, evaluations: int, hot: float | None = None) -> int:
        """Anneal from the current genome for up to ``evaluations`` evaluations, cooling
        from ``hot`` (default ``anneal_hot_db``)  [dB] to ``anneal_cold_db``. Returns the
        evaluations spent."""
        opts, tracker, rng = self.opts, self.tracker, self.rng
        if not self.movable.size:
            return 0
        hot = opts.anneal_hot_db if hot is None else float(hot)
        cold = opts.anneal_cold_db
        ratio = math.log(cold / hot)
        spent = 0
        while spent < evaluations and not tracker.should_stop():
            k = int(min(self._batch(), evaluations - spent, tracker.remaining))
            if k <= 0:
                break
            off_genes, on_genes = self._propose(k)
            ev = tracker.evaluate_swaps(self.genome, off_genes, on_genes)
            # the temperature of each move by its place in the cycle
            temp = hot * np.exp(ratio * (spent + np.arange(k)) / evaluations)
            spent += k
            delta = ev.objective - self.value
            with np.errstate(over="ignore"):
                accept = (delta <= 0) | (rng.random(k) < np.exp(-np.maximum(delta, 0) / temp))
            if accept.any():
                m = int(np.argmax(accept))
                self._apply(int(off_genes[m]), int(on_genes[m]), ev.objective[m])
                self._note(m + 1, 1)
            else:
                self._note(k, 0)
        return spent


def anneal(problem, tracker, rng, genome, value, evaluations, options: AnnealOptions):
    """One annealing cycle of ``evaluations`` evaluations from an optimised ``genome``, from
    the reheat temperature ``anneal_reheat_db`` (the polish of :mod:`thinning.search.genetic`).
    The best layout it meets is in the tracker."""
    chain = Chain(problem, tracker, rng, options)
    chain.start(genome, value)
    return chain.run_cycle(int(evaluations), options.anneal_reheat_db)


def _first_layout(problem, tracker, rng, options: dict):
    """The start of the first cycle: the best of 16 density-tapered draws and, on problems of
    up to :data:`thinning.search.restart.IFT_SEED_MAX_SITES` sites, 8 short iterative-Fourier
    trials (as the first population of the genetic search)."""
    from . import density
    from .restart import IFT_SEED_MAX_SITES

    p = density.taper_probabilities(problem, options)
    starts = [density.draw(problem, p, rng, 16)]
    if len(problem.sites) <= IFT_SEED_MAX_SITES:
        from .ift import ift_genomes

        starts.append(np.asarray(ift_genomes(problem, rng, 8, options), dtype=bool))
    tracker.evaluate(np.concatenate(starts))


def run(problem, tracker, rng: np.random.Generator, options: dict) -> str:
    """Cycles of simulated annealing over swaps until a limit (see the module docstring).

    Parameters
    ----------
    problem : ThinningProblem
    tracker : thinning.search.Tracker
    rng : numpy.random.Generator   the only source of randomness
    options : dict   the ``anneal_*`` keys (others are ignored) and the ``taper…`` keys of the
        density-tapered start

    Returns
    -------
    str
        "evaluations" or "time" (a tracker limit), or "stall" (no time limit, and
        ``anneal_stall_cycles`` cycles in a row without improvement).
    """
    opts = AnnealOptions.from_dict(options, problem.source)
    chain = Chain(problem, tracker, rng, opts)
    _first_layout(problem, tracker, rng, options)
    tracker.record(cycle=0)
    if not chain.searchable:  # a single feasible layout
        return tracker.stop_reason() or "stall"
    cycle, stall = 0, 0
    length = opts.anneal_cycle
    while True:
        reason = tracker.stop_reason()
        if reason:
            return reason
        if tracker.stall_ends_run and stall >= opts.anneal_stall_cycles:
            return "stall"
        before = tracker.best[0]
        chain.start(tracker.best_genome, before)
        planned = length
        if tracker.time_limit_s is None and not math.isinf(tracker.remaining):
            planned = min(planned, int(tracker.remaining))
        chain.run_cycle(planned, opts.anneal_hot_db if cycle == 0 else opts.anneal_reheat_db)
        cycle += 1
        length *= 2
        stall = 0 if tracker.best[0] < before - IMPROVE_TOL else stall + 1
        tracker.record(cycle=cycle)
