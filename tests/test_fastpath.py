"""The compiled route of the search's evaluation against the numpy route and exact identities.

:mod:`thinning.engine.fastpath` does in compiled loops what :mod:`thinning.engine.region`,
:mod:`thinning.engine.exact` and :mod:`thinning.engine.pattern` do in numpy, with the same
rules; both are checked against brute force and published values in test_pattern.py. Here the
compiled figures must equal the numpy ones to rounding (an identity: the same sums in another
order), and the compiled exact pattern must equal the direct sum of :class:`GridExact`.
"""

from __future__ import annotations

import math
import os
import signal
import time

import numpy as np
import pytest

from thinning.engine import fastpath
from thinning.engine.exact import GridExact
from thinning.engine.pattern import FFTPatternEngine
from thinning.geometry.aperture import Aperture
from thinning.geometry.lattice import Lattice
from thinning.search.problem import ThinningProblem

LAM = 0.03  # [m]; every check is in wavelengths


def _both(eng, grids, **kw):
    """Figures of the compiled and of the numpy route."""
    eng.compiled = True
    fast = eng.evaluate(grids, **kw)
    eng.compiled = False
    slow = eng.evaluate(grids, **kw)
    eng.compiled = True
    return fast, slow


def _assert_same(eng, grids, fast, slow, tol_db=1e-5):
    np.testing.assert_allclose(fast.psl_db, slow.psl_db, atol=tol_db)
    np.testing.assert_allclose(fast.asl_db, slow.asl_db, atol=tol_db)
    if not np.iscomplexobj(grids):
        # the same lobe, or its mirror image (−u, −v) of equal power (real excitations)
        ex = eng.exact(grids)
        which = np.arange(fast.psl.size)
        pf = ex.evaluate(fast.psl_uv[:, 0], fast.psl_uv[:, 1], which, derivatives=False)
        np.testing.assert_allclose(pf, fast.psl, rtol=1e-6)
        np.testing.assert_allclose(pf, slow.psl, rtol=1e-5)


@pytest.mark.parametrize(
    "shape,pitch,scan_deg,fill",
    [
        ((64, 64), (0.5, 0.5), 30.0, 0.5),  # the benchmark's case
        ((9, 14), (0.5, 0.5), 0.0, 0.6),
        ((12, 24), (0.3, 0.52), 25.0, 0.55),  # triangular checkerboard pitch (d/2, d·√3/2)
        ((20, 16), (0.7, 0.7), 20.0, 0.5),  # grating lobes inside the disc
    ],
)
def test_compiled_route_equals_numpy_route_planar(shape, pitch, scan_deg, fill):
    """Same PSL, ASL and PSL direction on stacks of random layouts (math: same rules, same
    sums; 1e-5 dB is float rounding of the sums and the Newton stop)."""
    rng = np.random.default_rng(sum(shape))
    a = (rng.random((12,) + shape) < fill).astype(np.float32)
    if pitch == (0.3, 0.52):
        r, c = np.indices(shape)
        a *= ((c - r) % 2 == 0)[None]
    eng = FFTPatternEngine(shape, (pitch[0] * LAM, pitch[1] * LAM), LAM, math.radians(scan_deg))
    fast, slow = _both(eng, a)
    _assert_same(eng, a, fast, slow)
    s_fast, s_slow = _both(eng, a, refine=False)
    np.testing.assert_allclose(s_fast.psl_db, s_slow.psl_db, atol=1e-6)


@pytest.mark.parametrize("n,scan_deg", [(30, 30.0), (120, 10.0), (400, 0.0)])
def test_compiled_route_equals_numpy_route_linear(n, scan_deg):
    """Linear arrays (8 candidates refined along u): same figures as the numpy route."""
    rng = np.random.default_rng(n)
    a = (rng.random((10, n)) < 0.6).astype(np.float32)
    eng = FFTPatternEngine((1, n), (LAM / 2, LAM / 2), LAM, math.radians(scan_deg), linear=True)
    fast, slow = _both(eng, a)
    _assert_same(eng, a, fast, slow)


def test_compiled_route_off_centre_disc_and_complex_samples():
    """A full-plane engine: an off-centre sidelobe disc with real excitations (refined), and
    complex excitations (sampled figures, as the robust search uses them)."""
    rng = np.random.default_rng(3)
    a = (rng.random((8, 16, 16)) < 0.5).astype(np.float32)
    eng = FFTPatternEngine((16, 16), (LAM / 2, LAM / 2), LAM, 0.0, full=True, dtype=np.float32)
    region = eng.region_for(1.0, (-0.3, 0.2))
    fast, slow = _both(eng, a.astype(np.complex64).real, region=region)
    _assert_same(eng, a, fast, slow)
    w = a * np.exp(1j * rng.normal(0, 0.2, a.shape)).astype(np.complex64)
    fast, slow = _both(eng, w, refine=False)
    _assert_same(eng, w, fast, slow)


def test_wide_main_beam_uses_a_wider_window():
    """A sin⁶ taper on 48 × 48 sites puts the first null four times as far out as a uniform
    one (math: sin⁶x = (10 − 15 cos 2x + 6 cos 4x − cos 6x)/32, Dirichlet kernels shifted by
    up to 3 bins), past the first window of 3 uniform nulls: the compiled loop moves on to
    the next window, as the numpy route does, and the figures equal the numpy route's."""
    w = np.sin(np.pi * (np.arange(48) + 0.5) / 48) ** 6
    rng = np.random.default_rng(8)
    a = np.stack([np.outer(w, w), (rng.random((48, 48)) < 0.5) * 1.0]).astype(np.float32)
    eng = FFTPatternEngine((48, 48), (LAM / 2, LAM / 2), LAM, math.radians(20))
    t = eng.region.fast_tables(np.float64)
    levels = [
        fastpath.main_beam_cut(
            p.astype(np.float64), t.w_flat, t.w_parent, t.w_rim, t.w_w0, t.w_capped, t.w_start
        )[0]
        for p in eng.power(a)
    ]
    assert levels[0] >= 1 and levels[1] == 0
    fast, slow = _both(eng, a)
    _assert_same(eng, a, fast, slow)


@pytest.mark.parametrize("shape,pitch", [((7, 11), (0.5, 0.5)), ((1, 40), (0.6, 0.0))])
def test_compiled_exact_pattern_equals_direct_sum(shape, pitch):
    """Power, gradient and Hessian of the compiled evaluator (phasors by recurrence) equal
    the direct sums of GridExact (math: the same series; rtol 1e-9 is the recurrence's
    rounding over a few dozen steps)."""
    rng = np.random.default_rng(2)
    a = (rng.random(shape) < 0.6).astype(float)
    a[0, 0] = 1.0
    ex = GridExact(a[None], (pitch[0] * LAM, pitch[1] * LAM), LAM)
    for u, v in [(0.13, -0.41), (0.77, 0.05), (-1.2, 0.9)]:
        v = v if shape[0] > 1 else 0.0
        p, g, h = ex.evaluate([u], [v])
        q = fastpath.exact_point(a, ex.kx, ex.ky, u, v)
        np.testing.assert_allclose(q[0], p[0], rtol=1e-9)
        np.testing.assert_allclose(q[1:3], g[0], rtol=1e-9, atol=1e-9 * abs(h[0]).max())
        np.testing.assert_allclose(
            [q[3], q[4], q[5]], [h[0, 0, 0], h[0, 1, 1], h[0, 0, 1]], rtol=1e-9, atol=1e-12
        )


def test_compiled_psl_is_the_detailed_psl_on_small_arrays():
    """On thinned 7 × 7 arrays (test_pattern.py checks their detailed PSL against brute force
    within 0.05 dB) the compiled fast PSL, from its best candidate lobes, is the detailed
    figure from every candidate: 0.01 dB."""
    rng = np.random.default_rng(1)
    a = (rng.random((20, 7, 7)) < 0.6).astype(np.float32)
    eng = FFTPatternEngine((7, 7), (LAM / 2, LAM / 2), LAM, math.radians(20))
    fast = eng.evaluate(a)
    for i in range(a.shape[0]):
        d = eng.detail(a[i])
        assert fast.psl_db[i] == pytest.approx(10 * math.log10(d.psl), abs=0.01)


def test_swap_moves_after_an_accepted_move_equal_full_evaluation():
    """After a local search accepts a move, the next base layout's transform is updated by
    separable terms instead of a new FFT, and its ASL transform by shifted copies (math:
    linearity and the shift theorem of the DFT): the moves of the new base equal full
    evaluations (PSL 0.01 dB, the requirement) and a fresh start (1e-6 dB)."""
    ap = Aperture.from_mm([[0, 0], [400, 0], [400, 330], [0, 330]], [], 0.0)
    sites = Lattice.from_mm("rectangular", [15.0, 15.0]).sites_in(ap)
    p = ThinningProblem(sites, len(sites) // 2, 0.03, math.radians(20))
    rng = np.random.default_rng(12)
    g = p.random_genomes(rng, 1)[0]

    def moves(genome, k):
        on, off = np.flatnonzero(genome), np.flatnonzero(~genome)
        return rng.choice(on, k, replace=False), rng.choice(off, k, replace=False)

    off, on = moves(g, 16)
    p.evaluate_swaps(g, off, on)  # the stored transform of g
    g2 = g.copy()
    g2[off[0]], g2[on[0]] = False, True  # the accepted move
    off2, on2 = moves(g2, 16)
    advanced = p.evaluate_swaps(g2, off2, on2)
    assert np.array_equal(p._swap_cache.genome, g2)
    trial = np.repeat(g2[None], off2.size, axis=0)
    trial[np.arange(off2.size), off2] = False
    trial[np.arange(off2.size), on2] = True
    full = p.evaluate(trial)
    np.testing.assert_allclose(advanced.psl_db, full.psl_db, atol=0.01)
    np.testing.assert_allclose(advanced.asl_db, full.asl_db, atol=0.01)
    p._swap_cache = None
    fresh = p.evaluate_swaps(g2, off2, on2)
    np.testing.assert_allclose(advanced.psl_db, fresh.psl_db, atol=1e-6)
    np.testing.assert_allclose(advanced.asl_db, fresh.asl_db, atol=1e-6)


def test_ctrl_c_inside_a_kernel_is_an_interrupt():
    """numba boxes a kernel's results in Python; a Ctrl-C landing there comes out as a
    SystemError caused by the KeyboardInterrupt. ``call`` raises the interrupt itself (so the
    search keeps its best layout), and leaves other errors alone."""

    def interrupted():
        try:
            raise KeyboardInterrupt
        except KeyboardInterrupt as exc:
            raise SystemError("returned a result with an exception set") from exc

    def broken():
        raise SystemError("something else")

    with pytest.raises(KeyboardInterrupt):
        fastpath.call(interrupted)
    with pytest.raises(SystemError):
        fastpath.call(broken)
    assert fastpath.call(lambda x: x + 1, 1) == 2


def test_ctrl_c_during_a_first_call_waits_for_its_end():
    """A kernel's first call compiles it; a Ctrl-C then would leave numba's half-built code
    behind. ``call`` holds SIGINT back until the first call returns: the interrupt arrives,
    but after the kernel finished."""
    finished = []

    def compiling(x):
        os.kill(os.getpid(), signal.SIGINT)
        time.sleep(0.05)  # the interrupt would land here if it were not held back
        finished.append(x)
        return x

    with pytest.raises(KeyboardInterrupt):
        fastpath.call(compiling, np.zeros(1))
        time.sleep(0.05)  # the held interrupt is delivered now
    assert len(finished) == 1
