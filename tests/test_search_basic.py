"""The two sampling baselines: random thinning and statistical density tapering.

Checks: exact element counts and constraints under every symmetry; determinism; the exact
marginals of systematic sampling (Madow 1949); the mean sidelobe level of random and
density-tapered draws against the closed forms of references.md row 5.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from helpers import rect_sites, tri_sites
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from scipy.signal.windows import taylor

from thinning.engine import metrics
from thinning.errors import SpecError
from thinning.geometry.lattice import Lattice
from thinning.search import run_method
from thinning.search.density import draw, taper_probabilities, taper_values
from thinning.search.problem import SYMMETRIES, ThinningProblem

LAM = 0.03  # [m]  10 GHz


def _linear_sites(m=400):
    return Lattice.from_mm("linear", 15.0).linear_sites(m)


SITES = {"rectangular": rect_sites(), "triangular": tri_sites()}


def _images(sites, symmetry):
    """Site index of each site's image under each operation of ``symmetry`` (−1: none),
    mirroring about the centre of the sites' index box."""
    col, row = sites.col, sites.row
    cs, rs = col.min() + col.max(), row.min() + row.max()
    ops = {
        "none": [],
        "mirror-x": [(cs - col, row)],
        "mirror-y": [(col, rs - row)],
        "mirror-xy": [(cs - col, row), (col, rs - row), (cs - col, rs - row)],
        "rotate-180": [(cs - col, rs - row)],
    }[symmetry]
    where = {(int(c), int(r)): i for i, (c, r) in enumerate(zip(col, row, strict=True))}
    return [
        np.array([where.get((int(a), int(b)), -1) for a, b in zip(c, r, strict=True)])
        for c, r in ops
    ]


# -- counts and constraints -----------------------------------------------------------------
@pytest.mark.parametrize("aperture", sorted(SITES))
@pytest.mark.parametrize("symmetry", SYMMETRIES)
@settings(max_examples=25, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(
    fill=st.floats(0.1, 0.9),
    seed=st.integers(0, 2**32 - 1),
    pin=st.integers(0, 10_000),
    forbid=st.integers(0, 10_000),
    method=st.sampled_from(["random", "density"]),
)
def test_counts_and_constraints(aperture, symmetry, fill, seed, pin, forbid, method):
    """Exact budget, pinned on, forbidden off, mask invariant under the symmetry (math)."""
    sites = SITES[aperture]
    m = len(sites)
    elements = max(2, round(fill * m))
    pinned = np.zeros(m, bool)
    forbidden = np.zeros(m, bool)
    pinned[pin % m] = True
    forbidden[forbid % m] = True
    try:
        problem = ThinningProblem(
            sites, elements, LAM, 0.0, pinned=pinned, forbidden=forbidden, symmetry=symmetry
        )
    except SpecError:
        return  # budget infeasible under the symmetry, or a pinned site without a partner
    res = run_method(problem, method, seed, {"batch": 8}, max_evaluations=16)
    mask = res.mask
    assert mask.sum() == elements
    assert mask[pinned].all()
    assert not mask[forbidden].any()
    assert problem.is_feasible(res.genome)
    for img in _images(sites, symmetry):
        has = img >= 0
        np.testing.assert_array_equal(mask[has], mask[img[has]])
        assert not mask[~has].any()  # a site without a partner stays off


# -- determinism and limits -----------------------------------------------------------------
@pytest.mark.parametrize("method", ["random", "density"])
def test_same_seed_same_result(method):
    problem = ThinningProblem(SITES["rectangular"], 30, LAM, math.radians(20))
    a = run_method(problem, method, 7, max_evaluations=40)
    b = run_method(problem, method, 7, max_evaluations=40)
    c = run_method(problem, method, 8, max_evaluations=40)
    np.testing.assert_array_equal(a.mask, b.mask)
    assert a.psl_db == b.psl_db
    assert not np.array_equal(a.mask, c.mask)  # C(63, 30) ≈ 9e17 layouts: equal by chance ~ 0


@pytest.mark.parametrize("method", ["random", "density"])
def test_evaluation_limit_and_draws(method):
    problem = ThinningProblem(SITES["triangular"], 25, LAM)
    # density as the best of K draws (without the lobe-aimed swaps that finish it by default)
    opts = {"batch": 16} if method == "random" else {"batch": 16, "polish": False}
    res = run_method(problem, method, 1, opts, max_evaluations=50)
    assert res.evaluations == 50
    assert res.stopped_by == "evaluations"
    rounds = [h["round"] for h in res.history if "round" in h]
    assert rounds == [1, 2, 3, 4]  # 16 + 16 + 16 + 2
    res = run_method(problem, method, 1, {**opts, "draws": 20})
    assert (res.evaluations, res.stopped_by) == (20, "draws")


def test_bad_options_raise_spec_error():
    problem = ThinningProblem(SITES["rectangular"], 30, LAM)
    for opts in ({"taper": "hann"}, {"taper_sll_db": -30}, {"taper_nbar": 0}, {"batch": 0}):
        with pytest.raises(SpecError):
            run_method(problem, "density", 0, opts, max_evaluations=4)


def test_random_beats_mean_single_draw():
    """Sanity: the best of 64 draws is no worse than the mean PSL of single draws."""
    problem = ThinningProblem(_linear_sites(100), 50, LAM)
    res = run_method(problem, "random", 3, max_evaluations=64)
    single = problem.evaluate(problem.random_genomes(np.random.default_rng(99), 64))
    assert res.evaluations == 64
    assert res.psl_db <= single.psl_db.mean()


# -- taper probabilities --------------------------------------------------------------------
@pytest.mark.parametrize("aperture", sorted(SITES))
@pytest.mark.parametrize("symmetry", SYMMETRIES)
@pytest.mark.parametrize("fill", [0.2, 0.5, 0.9])
@pytest.mark.parametrize("options", [{}, {"taper_sll_db": 40, "taper_nbar": 6}])
def test_taper_probabilities_sum_to_class_counts(aperture, symmetry, fill, options):
    sites = SITES[aperture]
    try:
        problem = ThinningProblem(sites, round(fill * len(sites)), LAM, symmetry=symmetry)
    except SpecError:
        return
    p = taper_probabilities(problem, options)
    assert p.shape == (problem.n_genes,)
    assert np.all((p >= 0) & (p <= 1))
    sums = np.bincount(problem.gene_class, weights=p, minlength=problem.class_sizes.size)
    np.testing.assert_allclose(sums, problem.class_ones, rtol=0, atol=1e-9)


def test_uniform_taper_is_constant():
    problem = ThinningProblem(SITES["triangular"], 30, LAM)
    p = taper_probabilities(problem, {"taper": "uniform"})
    np.testing.assert_allclose(p, 30 / problem.n_genes, rtol=1e-12)


@pytest.mark.parametrize("kind", ["linear", "rectangular", "triangular"])
def test_taylor_taper_decreases_outward(kind):
    """Density follows the Taylor amplitude: highest at the centre, lowest at the rim."""
    sites = _linear_sites(101) if kind == "linear" else SITES[kind]
    problem = ThinningProblem(sites, len(sites) // 2, LAM)
    p = taper_probabilities(problem, {"taper": "taylor"})
    xy = problem.gene_positions()
    r = np.hypot(xy[:, 0] - sites.x.mean(), xy[:, 1] - sites.y.mean())
    order = np.argsort(r, kind="stable")
    assert np.all(np.diff(p[order]) <= 1e-12)
    assert p[order[0]] > 1.5 * p[order[-1]]


def test_linear_taper_samples_scipy_taylor():
    """On 2001 sites the site taper is scipy.signal.windows.taylor itself (references.md row 9:
    Taylor 1955, reference library scipy). Exact up to interpolation round-off."""
    sites = _linear_sites(2001)
    np.testing.assert_allclose(
        taper_values(sites, "taylor", 30.0, 5), taylor(2001, 5, 30, norm=False), rtol=1e-12
    )


def test_mirror_pairs_are_weighted_by_their_sites():
    """A mirror pair's mean position lies on the mirror; its weight must come from its sites."""
    problem = ThinningProblem(_linear_sites(100), 50, LAM, symmetry="mirror-x")
    p = taper_probabilities(problem, {"taper": "taylor"})
    assert p.max() > 1.5 * p.min()


# -- systematic sampling: exact marginals -----------------------------------------------------
@pytest.mark.parametrize(
    ("symmetry", "fill", "options"),
    [
        ("none", 0.4, {}),
        ("mirror-xy", 0.5, {}),
        ("rotate-180", 0.85, {"taper_sll_db": 40, "taper_nbar": 6}),  # some p capped at 1
    ],
)
def test_draw_marginals(symmetry, fill, options):
    """Randomised systematic sampling keeps P(gene on) = pₙ exactly (Madow, Ann. Math.
    Statist. 20, 1949). Over K draws the on-frequency is binomial(K, pₙ)/K: allow 5 σ."""
    sites = SITES["rectangular"]
    problem = ThinningProblem(sites, round(fill * len(sites)), LAM, symmetry=symmetry)
    p = taper_probabilities(problem, options)
    k = 20_000
    g = draw(problem, p, np.random.default_rng(5), k)
    counts = np.array(
        [np.bincount(problem.gene_class[row], minlength=problem.class_sizes.size) for row in g[:50]]
    )
    assert np.all(counts == problem.class_ones)
    assert np.all(problem.to_masks(g[:200]).sum(axis=1) == problem.elements)
    freq = g.mean(axis=0)
    sigma = np.sqrt(p * (1 - p) / k)
    assert np.all(np.abs(freq - p) <= 5 * sigma + 1e-12)


def test_draw_rejects_wrong_total():
    problem = ThinningProblem(SITES["rectangular"], 30, LAM)
    with pytest.raises(ValueError, match="sum"):
        draw(problem, np.full(problem.n_genes, 0.1), np.random.default_rng(0), 4)


# -- mean sidelobe level (references.md row 5) ----------------------------------------------
@pytest.fixture(scope="module")
def skolnik_sherman_ogg_1964():
    """Linear array of 400 half-wavelength sites, 200 on, broadside, isotropic elements.

    Skolnik, Sherman & Ogg, IEEE TAP 12(4), 1964 (also Lo 1964; references.md row 5): with
    on-probabilities pₙ, E|AF|² = |Σ pₙ e^{jψₙ}|² + Σ pₙ(1 − pₙ), so the mean normalised
    sidelobe power is the taper's own pattern plus Σp(1 − p)/(Σp)². The closed form neglects
    the main-beam exclusion and the weak negative correlation of exact-count draws (a factor
    M/(M − 1) for uniform p); 1 dB covers both and the scatter of the mean of 50 draws.
    """
    problem = ThinningProblem(_linear_sites(400), 200, LAM, 0.0)
    return problem, 1.0  # tolerance [dB]


def _db(x):
    return 10 * math.log10(x)


def test_density_mean_asl_matches_expectation(skolnik_sherman_ogg_1964):
    problem, tol = skolnik_sherman_ogg_1964
    p = taper_probabilities(problem)  # Taylor, 30 dB, n̄ = 5
    g = draw(problem, p, np.random.default_rng(11), 50)
    ev = problem.evaluate(g)
    mean_lin = float(np.mean(10 ** (ev.asl_db / 10)))
    thinning_term = metrics.expected_asl_tapered(p)
    # The taper's own pattern (amplitudes p, normalised by its peak (Σp)²): its ASL is about
    # 20 dB below the thinning term for a 30 dB Taylor taper, so it barely matters here.
    own = problem.engine.evaluate(problem.sites.to_grid(p[None]))
    assert own.asl[0] < 0.05 * thinning_term
    assert abs(_db(mean_lin) - _db(thinning_term + own.asl[0])) < tol
    # per draw, on average, against the thinning term alone
    assert abs(ev.asl_db.mean() - _db(thinning_term)) < tol


def test_random_mean_asl_matches_exact_count_expectation(skolnik_sherman_ogg_1964):
    """Exactly N of M: ASL = (M − N)/(N(M − 1)) (references.md row 5)."""
    problem, tol = skolnik_sherman_ogg_1964
    m, n = len(problem.sites), problem.elements
    ev = problem.evaluate(problem.random_genomes(np.random.default_rng(12), 50))
    assert abs(ev.asl_db.mean() - _db((m - n) / (n * (m - 1)))) < tol


def test_density_taper_lowers_mean_asl(skolnik_sherman_ogg_1964):
    """Σp(1 − p) = N − Σp² and Σp² ≥ N²/M (Cauchy–Schwarz), so any non-uniform density taper
    lowers the thinning term; here by 0.8 dB (−26.8 vs −26.0 dB), well beyond the ≈0.1 dB
    scatter of a 50-draw mean."""
    problem, _ = skolnik_sherman_ogg_1964
    rng = np.random.default_rng(13)
    p_t = taper_probabilities(problem)
    p_u = taper_probabilities(problem, {"taper": "uniform"})
    asl_t = problem.evaluate(draw(problem, p_t, rng, 50)).asl_db.mean()
    asl_u = problem.evaluate(draw(problem, p_u, rng, 50)).asl_db.mean()
    assert metrics.expected_asl_tapered(p_t) < metrics.expected_asl_tapered(p_u)
    assert asl_t < asl_u - 0.4


def test_worker_processes_give_the_same_figures_and_survive_an_error():
    """A generation split between this process and a worker process on a pipe gives the
    figures of one process (math: the same evaluation per chunk); a failed evaluation
    raises in the caller, and the worker's unread answer does not leak into the next one."""
    from thinning.search import Tracker

    p = ThinningProblem(rect_sites(), 30, LAM, math.radians(10))
    g = p.random_genomes(np.random.default_rng(2), 40)
    alone = p.evaluate(g)
    with Tracker(p, workers=2) as tr:
        first = tr.evaluate(g)
        with pytest.raises((ValueError, IndexError)):
            tr.evaluate(np.ones((40, p.n_genes - 3), dtype=bool))  # too short for this problem
        again = tr.evaluate(g[::-1])
        worker = tr._pool[0].proc
        assert worker.is_alive()
    assert not worker.is_alive()  # closed with the tracker
    np.testing.assert_array_equal(first.psl_db, alone.psl_db)
    np.testing.assert_array_equal(again.psl_db, alone.psl_db[::-1])
