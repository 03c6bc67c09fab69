"""The iterative Fourier thinning method (thinning.search.ift).

Checks: the transform pair is exact (math: zero-padded DFT and its inverse, truncated to the
aperture, give back the excitation); exact counts, pinned, forbidden and symmetry constraints
on linear, rectangular and triangular problems; determinism; the evaluation count; the seeding
entry point for other searches; a sanity comparison with random thinning; and the published
200-element case of references.md rows 13-14. Every run has a fixed seed and an evaluation cap.
"""

from __future__ import annotations

import math
import time

import numpy as np
import pytest
from helpers import rect_sites, tri_sites

from thinning.errors import SpecError
from thinning.geometry.lattice import Lattice
from thinning.search import METHODS, run_method
from thinning.search.ift import IFTPlan, ift_genomes, iterate
from thinning.search.problem import ThinningProblem

LAM = 0.03  # [m] 10 GHz; the 15 mm pitch is half a wavelength


def linear_problem(m, n, **kw):
    sites = Lattice.from_mm("linear", [15.0]).linear_sites(m)
    return ThinningProblem(sites, n, LAM, 0.0, **kw)


def _images(sites, symmetry):
    """Site index of each site's image under each operation of ``symmetry`` (−1: none)."""
    col, row = sites.col, sites.row
    cs, rs = col.min() + col.max(), row.min() + row.max()
    ops = {
        "none": [],
        "mirror-x": [(cs - col, row)],
        "mirror-xy": [(cs - col, row), (col, rs - row), (cs - col, rs - row)],
        "rotate-180": [(cs - col, rs - row)],
    }[symmetry]
    at = {(int(c), int(r)): i for i, (c, r) in enumerate(zip(col, row, strict=True))}
    return [
        np.array([at.get((int(a), int(b)), -1) for a, b in zip(c, r, strict=True)]) for c, r in ops
    ]


def _constrained(sites, n, symmetry, scan_deg=0.0, seed=0):
    m = len(sites)
    rng = np.random.default_rng(seed)
    pick = rng.permutation(m)
    pinned = np.zeros(m, bool)
    forbidden = np.zeros(m, bool)
    pinned[pick[:2]] = True
    forbidden[pick[2:5]] = True
    for _ in range(50):  # a pinned site needs a partner under the symmetry
        try:
            return ThinningProblem(
                sites,
                n,
                LAM,
                math.radians(scan_deg),
                pinned=pinned,
                forbidden=forbidden,
                symmetry=symmetry,
            )
        except SpecError:
            pick = rng.permutation(m)
            pinned[:] = False
            forbidden[:] = False
            pinned[pick[:2]] = True
            forbidden[pick[2:5]] = True
    raise AssertionError("no feasible constrained problem")


def test_ift_is_a_method():
    assert "ift" in METHODS


# -- the transform pair (math) ----------------------------------------------------------------
@pytest.mark.parametrize("kind", ["linear", "rectangular", "triangular"])
def test_forward_backward_is_exact(kind):
    """Zero-padded DFT, inverse DFT, truncation to the aperture: the identity (math)."""
    if kind == "linear":
        problem = linear_problem(37, 20)
    else:
        problem = ThinningProblem(rect_sites() if kind == "rectangular" else tri_sites(), 20, LAM)
    plan = IFTPlan(problem)
    x = np.random.default_rng(1).random((3, len(problem.sites)))
    np.testing.assert_allclose(plan.backward(plan.forward(x)).real, x, atol=1e-12)
    np.testing.assert_allclose(plan.backward(plan.forward(x)).imag, 0, atol=1e-12)
    # the peak sample is |Σa|² (sample 0 is u = v = 0)
    np.testing.assert_allclose(plan.forward(x)[:, 0, 0].real, x.sum(axis=1), rtol=1e-12)


def test_clip_below_the_level_is_the_identity():
    """A pattern whose sidelobes are all under the clip level is left unchanged (math), and
    a clipped pattern has no sidelobe sample above the level."""
    problem = linear_problem(40, 20)
    plan = IFTPlan(problem)
    x = np.ones((1, 40))  # uniform: first sidelobe −13.2 dB (references.md row 8)
    af = plan.forward(x)
    np.testing.assert_array_equal(plan.clip(af, np.array([10.0])), af)
    clipped = plan.clip(af, np.array([20.0]))
    power = np.abs(clipped.reshape(1, -1)) ** 2
    red = plan.region.reduce(power)
    assert 10 * np.log10(red.psl[0]) <= -20.0 + 1e-9


# -- counts and constraints -------------------------------------------------------------------
CONSTRAINED = [
    ("linear", lambda: _constrained(Lattice.from_mm("linear", 15.0).linear_sites(61), 30, "none")),
    (
        "linear mirror-x",
        lambda: _constrained(Lattice.from_mm("linear", 15.0).linear_sites(61), 31, "mirror-x"),
    ),
    ("rectangular mirror-x", lambda: _constrained(rect_sites(), 31, "mirror-x", 20.0)),
    ("rectangular mirror-xy", lambda: _constrained(rect_sites(), 29, "mirror-xy", 0.0)),
    ("triangular rotate-180", lambda: _constrained(tri_sites(), 30, "rotate-180", 30.0)),
]


@pytest.mark.parametrize("options", [{}, {"ift_sll_db": 25, "ift_density_fraction": 0.5}])
@pytest.mark.parametrize("name, build", CONSTRAINED, ids=[c[0] for c in CONSTRAINED])
def test_counts_and_constraints(name, build, options):
    """Exact budget, pinned on, forbidden off, mask invariant under the symmetry (math)."""
    problem = build()
    res = run_method(problem, "ift", 3, {"ift_batch": 8, **options}, max_evaluations=24)
    assert res.evaluations == 24
    mask = res.mask
    assert mask.sum() == problem.elements
    assert mask[problem.pinned].all()
    assert not mask[problem.forbidden].any()
    assert problem.is_feasible(res.genome)
    for img in _images(problem.sites, problem.symmetry):
        has = img >= 0
        np.testing.assert_array_equal(mask[has], mask[img[has]])
        assert not mask[~has].any()  # a site without a partner stays off
    # the seeding entry point: every genome feasible
    g = ift_genomes(problem, np.random.default_rng(5), 10, options)
    assert g.shape == (10, problem.n_genes) and g.dtype == bool
    assert all(problem.is_feasible(x) for x in g)
    masks = problem.to_masks(g)
    assert masks[:, problem.pinned].all() and not masks[:, problem.forbidden].any()


def test_iterate_keeps_counts_from_any_start():
    problem = _constrained(rect_sites(), 31, "mirror-x", 20.0)
    plan = IFTPlan(problem)
    start = np.random.default_rng(2).normal(size=(6, len(problem.sites)))  # even negative
    for level in (10.0, 25.0, np.array([5.0, 15.0, 25.0, 35.0, 45.0, 55.0])):
        g = iterate(plan, start, level, 12)
        assert all(problem.is_feasible(x) for x in g)


def test_no_choice_means_one_evaluation():
    problem = linear_problem(20, 20)  # every site on
    res = run_method(problem, "ift", 0, max_evaluations=100)
    assert res.evaluations == 1 and res.mask.all()


# -- determinism, limits, options -------------------------------------------------------------
def test_same_seed_same_result():
    problem = ThinningProblem(rect_sites(), 30, LAM, math.radians(20))
    a = run_method(problem, "ift", 7, max_evaluations=64)
    b = run_method(problem, "ift", 7, max_evaluations=64)
    c = run_method(problem, "ift", 8, max_evaluations=64)
    np.testing.assert_array_equal(a.mask, b.mask)
    assert a.psl_db == b.psl_db and a.history[-1]["evaluations"] == b.history[-1]["evaluations"]
    assert not np.array_equal(a.mask, c.mask)  # C(63, 30) ≈ 9e17 layouts: equal by chance ~ 0
    g1 = ift_genomes(problem, np.random.default_rng(4), 8)
    g2 = ift_genomes(problem, np.random.default_rng(4), 8)
    np.testing.assert_array_equal(g1, g2)


def test_trials_and_evaluation_limit():
    problem = linear_problem(50, 25)
    res = run_method(problem, "ift", 1, {"trials": 40, "ift_batch": 16})
    assert (res.evaluations, res.stopped_by) == (40, "trials")
    assert [h["trial"] for h in res.history if "trial" in h] == [16, 32, 40]
    res = run_method(problem, "ift", 1, {"ift_batch": 16}, max_evaluations=20)
    assert (res.evaluations, res.stopped_by) == (20, "evaluations")


@pytest.mark.parametrize(
    "options",
    [
        {"iterations": 0},
        {"trials": 1.5},
        {"ift_batch": True},
        {"ift_sll_db": -25},
        {"ift_density_fraction": 2},
    ],
)
def test_bad_options_raise_spec_error(options):
    problem = linear_problem(30, 15)
    with pytest.raises(SpecError, match=f"search.{next(iter(options))}"):
        run_method(problem, "ift", 0, options, max_evaluations=4)


# -- quality ----------------------------------------------------------------------------------
def test_beats_the_mean_of_random_draws():
    """Sanity (not a published figure): on a 100-site half-wavelength linear array with 50
    elements, 1000 IFT trials beat the mean PSL of uniform random draws with the exact count
    by at least 3 dB. Measured: random mean ≈ −11.5 dB (Steinberg's median peak, references.md
    row 6, gives ≈ −13 dB for 100 independent sidelobe samples at ASL 1/99, and a continuous
    pattern peaks higher than its independent samples); IFT ≈ −19.5 dB."""
    problem = linear_problem(100, 50)
    res = run_method(problem, "ift", 11, max_evaluations=1000)
    draws = problem.evaluate(problem.random_genomes(np.random.default_rng(12), 256))
    mean = float(draws.psl_db.mean())
    print(f"ift {res.psl_db:.2f} dB; random draws: mean {mean:.2f} dB")
    assert res.mask.sum() == 50
    assert res.psl_db <= mean - 3.0
    # the seeds ift_genomes hands to other searches are better than random draws, on average
    seeds = problem.evaluate(ift_genomes(problem, np.random.default_rng(13), 64))
    assert seeds.psl_db.mean() <= mean - 1.0


def test_keizer_2008_published_case():
    # Haupt, "Thinned arrays using genetic algorithms", IEEE TAP 42(7), 1994 (memory;
    # references.md row 13): 200-element half-wavelength centre-symmetric linear array, 154
    # elements on (77 %), broadside, sidelobe region outside the first null: GA PSL −22.09 dB.
    # Keizer, "Linear array thinning using iterative FFT techniques", IEEE TAP 56(8), 2008
    # (memory; row 14): iterative FFT on the same array, about −23 dB.
    # Both figures are recalled, not re-read, and are not asserted. Measured here with 20 000
    # trials: −22.27 … −22.47 dB over seeds 0–2, 8–12 s. The threshold, −20 dB, is a level
    # a working method reaches with margin at this cap.
    problem = linear_problem(200, 154, symmetry="mirror-x")
    t = time.perf_counter()
    res = run_method(problem, "ift", 0, max_evaluations=20_000)
    seconds = time.perf_counter() - t
    print(f"row 13 case: PSL {res.psl_db:.2f} dB, {res.evaluations} evaluations, {seconds:.1f} s")
    assert res.mask.sum() == 154
    assert np.array_equal(res.mask, res.mask[::-1])  # centre-symmetric
    assert res.psl_db < -20.0  # published: −22.09 dB (GA, Haupt 1994), ≈ −23 dB (IFT, Keizer 2008)


def test_ift_seeds_the_genetic_search():
    """``seed_ift_fraction`` puts iterative-Fourier layouts into the first population; the
    run keeps the exact count (and, with the same seed, is deterministic)."""
    from thinning.geometry.lattice import Lattice
    from thinning.search import run_method
    from thinning.search.problem import ThinningProblem

    sites = Lattice.from_mm("linear", [15.0]).linear_sites(80)
    p = ThinningProblem(sites, 50, 0.03, 0.0, symmetry="mirror-x")
    a = run_method(p, "genetic", 3, {"seed_ift_fraction": 0.5}, max_evaluations=600)
    b = run_method(p, "genetic", 3, {"seed_ift_fraction": 0.5}, max_evaluations=600)
    assert a.mask.sum() == 50 and np.array_equal(a.mask, b.mask)
