"""Swap moves scored by updating the stored transform agree with full evaluations."""

from __future__ import annotations

import math

import numpy as np
import pytest

from thinning.geometry.aperture import Aperture
from thinning.geometry.lattice import Lattice
from thinning.search.problem import ThinningProblem


def _moves(problem, genome, rng, k):
    on, off = np.flatnonzero(genome), np.flatnonzero(~genome)
    a, b = [], []
    while len(a) < k:
        i, j = rng.choice(on), rng.choice(off)
        if problem.gene_class[i] == problem.gene_class[j]:
            a.append(i)
            b.append(j)
    return np.array(a), np.array(b)


@pytest.mark.parametrize(
    "kind,symmetry,scan",
    [
        ("rectangular", "none", 20.0),
        ("rectangular", "mirror-xy", 0.0),
        ("triangular", "none", 30.0),
        ("linear", "none", 10.0),
        ("linear", "mirror-x", 0.0),
    ],
)
def test_swap_update_equals_full_evaluation(kind, symmetry, scan):
    """Adding ±exp(−2πi(r·j/Pr + c·i/Pc)) per switched site is the DFT of the switched layout
    (math: linearity of the DFT); the figures equal a full evaluation: PSL to 0.01 dB (the
    requirement), ASL to 0.01 dB."""
    if kind == "linear":
        sites = Lattice.from_mm("linear", [15.0]).linear_sites(120)
    else:
        ap = Aperture.from_mm([[0, 0], [400, 0], [400, 330], [0, 330]], [], 0.0)
        spacing = [15.0, 15.0] if kind == "rectangular" else [17.0, 17.0 * math.sqrt(3) / 2]
        sites = Lattice.from_mm(kind, spacing).sites_in(ap)
    n = len(sites) // 2 - (len(sites) // 2) % 4
    p = ThinningProblem(sites, n, 0.03, math.radians(scan), symmetry=symmetry)
    rng = np.random.default_rng(5)
    g = p.random_genomes(rng, 1)[0]
    off, on = _moves(p, g, rng, 24)
    fast = p.evaluate_swaps(g, off, on)
    trial = np.repeat(g[None], off.size, axis=0)
    trial[np.arange(off.size), off] = False
    trial[np.arange(off.size), on] = True
    full = p.evaluate(trial)
    np.testing.assert_allclose(fast.psl_db, full.psl_db, atol=0.01)
    # the ASL uses the base layout's main-beam cut: 0.01 dB
    np.testing.assert_allclose(fast.asl_db, full.asl_db, atol=0.01)
    assert all(p.is_feasible(t) for t in trial)


def test_release_drops_caches_not_figures():
    """After ``release`` (the caches a search built, dropped before the outputs of a large
    design) every figure is the same as before, bit for bit (exact identity: the caches are
    rebuilt from the same inputs)."""
    from helpers import planar_problem

    problem = planar_problem(130.0, 40)
    rng = np.random.default_rng(3)
    g = problem.random_genomes(rng, 6)
    on, off = np.flatnonzero(g[0]), np.flatnonzero(~g[0])
    before = problem.evaluate(g)
    moves = problem.evaluate_swaps(g[0], on[:3], off[:3])
    problem.release()
    assert problem.engine.region._windows == {}
    after = problem.evaluate(g)
    again = problem.evaluate_swaps(g[0], on[:3], off[:3])
    assert np.array_equal(before.psl_db, after.psl_db)
    assert np.array_equal(before.asl_db, after.asl_db)
    assert np.array_equal(moves.psl_db, again.psl_db)
