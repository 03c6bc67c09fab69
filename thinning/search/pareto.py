"""NSGA-II over (element count, PSL): the whole budget trade in one run.

Deb, Pratap, Agarwal & Meyarivan, "A fast and elitist multiobjective genetic algorithm:
NSGA-II", IEEE TEC 6(2), 2002, as implemented by DEAP (``tools.selNSGA2``). Unlike the other
methods the element count is free here, between ``min_elements`` and ``max_elements``; every
individual keeps the spec's constraints (pinned sites on, forbidden and unpaired ones off,
symmetry). Both objectives are minimised: fewer channels and a lower PSL.
"""

from __future__ import annotations

import time
from dataclasses import dataclass

import numpy as np

__all__ = ["ParetoPoint", "run_pareto", "non_dominated"]


@dataclass
class ParetoPoint:
    elements: int
    psl_db: float
    asl_db: float
    mask: np.ndarray


def non_dominated(counts, psl) -> np.ndarray:
    """Indices of the points no other point dominates (≤ in both, < in one), sorted by count."""
    counts = np.asarray(counts)
    psl = np.asarray(psl)
    keep = []
    for i in range(counts.size):
        dom = (counts <= counts[i]) & (psl <= psl[i]) & ((counts < counts[i]) | (psl < psl[i]))
        if not dom.any():
            keep.append(i)
    keep = np.array(keep, dtype=int)
    return keep[np.lexsort((psl[keep], counts[keep]))]


def _creator():
    from deap import base, creator

    if not hasattr(creator, "ThinningParetoFitness"):
        creator.create("ThinningParetoFitness", base.Fitness, weights=(-1.0, -1.0))
    return creator


def run_pareto(
    problem,
    seed: int,
    min_elements: int,
    max_elements: int,
    *,
    population: int = 64,
    max_evaluations: int = 20_000,
    time_limit_s: float | None = None,
    progress=None,
) -> dict:
    """The non-dominated front of (element count, PSL).

    Parameters
    ----------
    problem : ThinningProblem   (its own exact budget is ignored)
    min_elements, max_elements : int   range of counts explored (pinned sites included)

    Returns
    -------
    dict with ``front`` (list of ParetoPoint, by count), ``evaluations``, ``runtime_s``,
    ``generations``, ``stopped_by``
    """
    from deap import tools

    cr = _creator()
    rng = np.random.default_rng(seed)
    g = problem.n_genes
    size = problem.orbit_size[problem.gene_orbit]  # sites per gene
    base_count = int(problem.pinned_sites.sum())
    lo = max(min_elements - base_count, 0)
    hi = min(max_elements - base_count, int(size.sum()))
    if hi < lo or hi <= 0:
        raise ValueError("the element range leaves nothing to choose")
    start = time.perf_counter()

    def count(genome):
        return base_count + int(size[genome].sum())

    def repair(genome):
        c = int(size[genome].sum())
        while c > hi:
            on = np.flatnonzero(genome)
            i = on[rng.integers(on.size)]
            genome[i] = False
            c -= size[i]
        while c < lo:
            off = np.flatnonzero(~genome)
            i = off[rng.integers(off.size)]
            genome[i] = True
            c += size[i]
        return genome

    evaluations = 0
    fits: dict[bytes, tuple] = {}

    def evaluate(pop):
        nonlocal evaluations
        new = [p for p in pop if p.tobytes() not in fits]
        if new:
            ev = problem.evaluate(np.array(new))
            evaluations += len(new)
            for p, ps, asl in zip(new, ev.psl_db, ev.asl_db, strict=True):
                fits[p.tobytes()] = (count(p), float(ps), float(asl))
        return [fits[p.tobytes()] for p in pop]

    # initial population: counts spread evenly over the range
    targets = np.linspace(lo, hi, population)
    pop = []
    for t in targets:
        genome = np.zeros(g, dtype=bool)
        order = rng.permutation(g)
        c = 0
        for i in order:
            if c + size[i] > t:
                continue
            genome[i] = True
            c += size[i]
            if c >= t:
                break
        pop.append(repair(genome))
    objs = evaluate(pop)

    class _Ind:
        __slots__ = ("genome", "fitness")

        def __init__(self, genome, f):
            self.genome = genome
            self.fitness = cr.ThinningParetoFitness((f[0], f[1]))

    inds = [_Ind(p, f) for p, f in zip(pop, objs, strict=True)]
    inds = tools.selNSGA2(inds, population)
    gen = 0
    stopped = "evaluations"
    while True:
        if evaluations >= max_evaluations:
            break
        if time_limit_s is not None and time.perf_counter() - start >= time_limit_s:
            stopped = "time"
            break
        gen += 1
        # binary tournament on (rank, crowding) via selTournamentDCD needs a multiple of 4
        k = population - population % 4
        parents = tools.selTournamentDCD(inds, k) if k >= 4 else list(inds)
        children = []
        for a, b in zip(parents[::2], parents[1::2], strict=False):
            ga, gb = a.genome.copy(), b.genome.copy()
            mix = rng.random(g) < 0.5  # uniform crossover
            ca = np.where(mix, ga, gb)
            cb = np.where(mix, gb, ga)
            for c in (ca, cb):
                flips = rng.random(g) < 1.0 / g  # bit flips change the count
                c ^= flips
                if rng.random() < 0.5:  # and a swap keeps it
                    on, off = np.flatnonzero(c), np.flatnonzero(~c)
                    if on.size and off.size:
                        i, j = on[rng.integers(on.size)], off[rng.integers(off.size)]
                        if size[i] == size[j]:
                            c[i], c[j] = False, True
                children.append(repair(c))
        objs = evaluate(children)
        offspring = [_Ind(c, f) for c, f in zip(children, objs, strict=True)]
        inds = tools.selNSGA2(inds + offspring, population)
        if progress is not None:
            progress(
                {
                    "evaluations": evaluations,
                    "generation": gen,
                    "seconds": time.perf_counter() - start,
                }
            )
    # the front over everything evaluated
    keys = list(fits)
    arr = np.array([fits[k] for k in keys])
    idx = non_dominated(arr[:, 0], arr[:, 1])
    front = []
    for i in idx:
        genome = np.frombuffer(keys[i], dtype=bool).copy()
        front.append(
            ParetoPoint(
                int(arr[i, 0]), float(arr[i, 1]), float(arr[i, 2]), problem.to_masks(genome)[0]
            )
        )
    return {
        "front": front,
        "evaluations": evaluations,
        "runtime_s": time.perf_counter() - start,
        "generations": gen,
        "stopped_by": stopped,
    }
