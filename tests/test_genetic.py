"""The genetic search: exact counts and constraints, operators, determinism, and quality.

Quality checks compare with the published GA figure of Haupt 1994 (references.md row 13) and
with the best of as many uniform random draws (thinning.search.random); every run has a fixed
seed and an evaluation cap so that the file runs in a few seconds.
"""

from __future__ import annotations

import numpy as np
import pytest
from deap import creator, tools
from helpers import linear_problem, pinned_ends, planar_problem
from hypothesis import given, settings
from hypothesis import strategies as st

from thinning.errors import SpecError
from thinning.search import Tracker, run_method
from thinning.search import genetic as ga

# Problems for the operator property tests, built once (building one plans its FFT).
# 9 × 9 sites with mirror-xy: orbits of 1 (centre), 2 (centre lines) and 4 sites.
OPERATOR_PROBLEMS = [
    linear_problem(30, 12),
    linear_problem(31, 17, symmetry="mirror-x"),
    planar_problem(130.0, 41, symmetry="mirror-xy"),
    planar_problem(130.0, 40, symmetry="rotate-180"),
]


def test_operator_problems_cover_several_classes():
    assert OPERATOR_PROBLEMS[2].class_sizes.tolist() == [1, 2, 4]


@settings(max_examples=60, deadline=None)
@given(which=st.integers(0, len(OPERATOR_PROBLEMS) - 1), seed=st.integers(0, 2**32 - 1))
def test_crossover_and_mutation_keep_the_exact_counts(which, seed):
    problem = OPERATOR_PROBLEMS[which]
    rng = np.random.default_rng(seed)
    tb = ga.make_toolbox(problem, rng, ga.GeneticOptions(mutation_swaps=4))
    p1, p2 = (tb.individual(g) for g in problem.random_genomes(rng, 2))
    c1, c2 = tb.clone(p1), tb.clone(p2)
    tb.mate(c1, c2)
    assert problem.is_feasible(c1) and problem.is_feasible(c2)
    # genes where the parents agree are inherited; the pair keeps the parents' alleles
    agree = p1 == p2
    assert np.array_equal(c1[agree], p1[agree]) and np.array_equal(c2[agree], p1[agree])
    assert np.array_equal(c1.astype(int) + c2, p1.astype(int) + p2)
    (m,) = tb.mutate(tb.clone(c1))
    assert problem.is_feasible(m)
    assert 1 <= np.count_nonzero(m != c1) // 2 <= 4  # 1 … mutation_swaps swaps
    assert problem.is_feasible(p1) and problem.is_feasible(p2)  # clones: parents untouched


def test_deap_classes_are_created_once():
    f1, i1 = ga.deap_classes()
    f2, i2 = ga.deap_classes()
    assert f1 is f2 is creator.ThinningFitness and i1 is i2 is creator.ThinningIndividual
    assert issubclass(i1, np.ndarray) and f1.weights == (-1.0,)  # minimise J
    ind = ga.individual(np.array([True, False, True]))
    assert ind.dtype == bool and not ind.fitness.valid
    tb = ga.make_toolbox(OPERATOR_PROBLEMS[0], np.random.default_rng(0))
    for name in ("mate", "mutate", "select", "map", "clone"):
        assert hasattr(tb, name)
    copy = tb.clone(ind)  # a real copy, fitness included
    copy[0] = False
    assert ind[0]
    hof = tools.HallOfFame(2, similar=np.array_equal)
    a, b = ga.individual([True, False]), ga.individual([True, False])
    a.fitness.values, b.fitness.values = (-3.0,), (-3.0,)
    hof.update([a, b])
    assert len(hof) == 1  # equal genomes are one entry


def test_tournament_uses_the_rng_and_prefers_low_objective():
    pop = [ga.individual([i % 2 == 0]) for i in range(20)]
    for i, ind in enumerate(pop):
        ind.fitness.values = (float(i),)
    picks = ga.tournament_select(pop, 200, 20, np.random.default_rng(1))
    values = [p.fitness.values[0] for p in picks]
    assert np.mean(values) < 3.0  # tournaments of 20 with replacement: E[min] ≈ 0.5
    again = ga.tournament_select(pop, 200, 20, np.random.default_rng(1))
    assert [p.fitness.values for p in again] == [p.fitness.values for p in picks]


def test_linear_run_keeps_budget_pins_and_mirror_symmetry():
    m, n = 40, 24
    forbidden = np.zeros(m, bool)
    forbidden[5] = True
    problem = linear_problem(m, n, symmetry="mirror-x", pinned=pinned_ends(m), forbidden=forbidden)
    res = run_method(problem, "genetic", 3, max_evaluations=1500)
    mask = res.mask
    assert mask.sum() == n
    assert mask[0] and mask[-1]
    assert not mask[5] and not mask[m - 1 - 5]  # the mirror image of a forbidden site too
    assert np.array_equal(mask, mask[::-1])
    assert res.evaluations == 1500 and res.stopped_by == "evaluations"  # the cap is exact
    assert problem.is_feasible(res.genome)


def test_planar_run_keeps_budget_and_both_mirrors():
    problem = planar_problem(130.0, 41, symmetry="mirror-xy")
    res = run_method(problem, "genetic", 5, max_evaluations=1200)
    grid = problem.sites.to_grid(res.mask.astype(np.float32))
    assert res.mask.sum() == 41
    assert np.array_equal(grid, grid[::-1, :]) and np.array_equal(grid, grid[:, ::-1])


def test_same_seed_same_layout():
    problem = linear_problem(60, 30)
    a = run_method(problem, "genetic", 11, max_evaluations=1000)
    b = run_method(problem, "genetic", 11, max_evaluations=1000)
    assert np.array_equal(a.mask, b.mask) and a.psl_db == b.psl_db
    assert [h["best_objective"] for h in a.history] == [h["best_objective"] for h in b.history]


def test_stop_reasons_and_history():
    problem = linear_problem(40, 20)
    res = run_method(problem, "genetic", 0, {"generations": 3, "population": 16})
    assert res.stopped_by == "generations"
    assert [h["generation"] for h in res.history if "generation" in h][:4] == [0, 1, 2, 3]
    res = run_method(problem, "genetic", 0, {"stall_generations": 3, "population": 8})
    assert res.stopped_by == "stall"
    # history is monotone in evaluations and in the best objective
    ev = [h["evaluations"] for h in res.history]
    best = [h["best_objective"] for h in res.history]
    assert ev == sorted(ev) and best == sorted(best, reverse=True)


def test_direct_run_with_a_tracker_reports_time_limit():
    problem = linear_problem(40, 20)
    with Tracker(problem, time_limit_s=0.2) as tracker:
        reason = ga.run(problem, tracker, np.random.default_rng(0), {"stall_generations": 0})
    assert reason == "time"


@pytest.mark.parametrize(
    "options, field",
    [
        ({"population": 2}, "search.population"),
        ({"tournament": "x"}, "search.tournament"),
        ({"mutation_rate": 1.5}, "search.mutation_rate"),
        ({"elite": 64}, "search.elite"),
    ],
)
def test_bad_options_name_the_field(options, field):
    with pytest.raises(SpecError, match=field):
        ga.GeneticOptions.from_dict(options)


def test_genetic_beats_best_of_random_at_equal_evaluations():
    # 100-site half-wavelength linear array, 60 elements, 3000 evaluations each, seed 7.
    # Expected best-of-random: Steinberg (references.md row 6) puts the median PSL of one
    # random draw near ASL·ln(n_s/ln 2) ≈ −14.8 dB (ASL = (M − N)/(N(M − 1)) = −21.7 dB,
    # n_s ≈ 100 sidelobe samples), and the best of 3000 draws about 2 dB lower (measured
    # −16.1 … −16.8 dB over seeds 0–4); the genetic search measured −20.7 … −21.1 dB.
    # The required margin, 2 dB, is half the measured one.
    problem = linear_problem(100, 60)
    g = run_method(problem, "genetic", 7, max_evaluations=3000)
    r = run_method(problem, "random", 7, max_evaluations=3000)
    assert g.evaluations == r.evaluations == 3000
    assert g.psl_db <= r.psl_db - 2.0


def test_haupt_1994_published_ga_figure():
    # Haupt, "Thinned arrays using genetic algorithms", IEEE TAP 42(7), 1994 (memory;
    # references.md row 13): 200-element half-wavelength centre-symmetric linear array,
    # 77 % of the elements on, sidelobe region outside the first null: PSL −22.09 dB.
    # Keizer 2008 (row 14) reached about 1 dB lower, −23.1 dB, so the figure is not an
    # optimum, only a level a working GA reaches. Measured here with 10 000 evaluations:
    # −22.45 … −22.90 dB over seeds 0–3. As the figure is recalled, not re-read, we ask for
    # it within 0.3 dB.
    problem = linear_problem(200, 154, symmetry="mirror-x")
    res = run_method(problem, "genetic", 1, max_evaluations=10_000)
    assert res.mask.sum() == 154
    assert res.psl_db <= -22.09 + 0.3


def test_same_layout_with_worker_processes():
    # the tracker cuts a generation into fixed batches, so the result cannot depend on workers
    problem = linear_problem(60, 30)
    a = run_method(problem, "genetic", 4, max_evaluations=600)
    b = run_method(problem, "genetic", 4, max_evaluations=600, workers=2)
    assert np.array_equal(a.mask, b.mask) and a.psl_db == b.psl_db


def _no_single_swap_improves(problem, res):
    g = res.genome
    on, off = np.flatnonzero(g), np.flatnonzero(~g)  # one class: no symmetry
    trial = np.repeat(g[None], on.size * off.size, axis=0)
    rows = np.arange(trial.shape[0])
    trial[rows, np.repeat(on, off.size)] = False
    trial[rows, np.tile(off, on.size)] = True
    return problem.evaluate(trial).objective.min() >= res.objective - 1e-9


def test_final_polish_ends_on_a_swap_local_optimum():
    # without an evaluation cap the polish runs until no single swap improves the best genome
    problem = linear_problem(30, 12)
    res = run_method(problem, "genetic", 2, {"generations": 2, "population": 8})
    assert res.stopped_by == "generations"
    assert _no_single_swap_improves(problem, res)


def test_polish_of_a_sampled_neighbourhoodpinned_ends(monkeypatch):
    # a neighbourhood above PERMUTE_MAX is sampled with replacement; the polish must still end
    monkeypatch.setattr(ga, "PERMUTE_MAX", 10)
    problem = linear_problem(30, 12)
    res = run_method(problem, "genetic", 2, {"generations": 1, "population": 8})
    assert res.stopped_by == "generations" and problem.is_feasible(res.genome)
