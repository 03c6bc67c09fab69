"""Directivity, cell-gain rule, random-thinning expectation, beamwidth and grating lobes.

Each check names its source (../shared/references.md rows in brackets).
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy.integrate import quad
from scipy.special import j0

from thinning.analysis.score import score_layout
from thinning.engine import metrics
from thinning.engine.exact import GridExact
from thinning.engine.pattern import FFTPatternEngine
from thinning.geometry.layout import Layout

LAM = 0.03
FREQ = 299792458.0 / LAM


# -- the element kernel ----------------------------------------------------------------------
@pytest.mark.parametrize("q", [0.5, 1.0, 1.5, 2.0, 3.0])
@pytest.mark.parametrize("kr", [0.0, 0.3, 2.0, 7.5, 20.0])
def test_element_kernel_matches_numerical_integral(q, kr):
    """K_q(ρ) = 2π ∫₀^{π/2} cosᵠθ J₀(kρ sin θ) sin θ dθ, integrated by scipy.integrate.quad
    (reference: the definition in conventions.md). Tolerance 1e-8 relative."""
    ref, _ = quad(
        lambda t: math.cos(t) ** q * j0(kr * math.sin(t)) * math.sin(t),
        0,
        math.pi / 2,
        epsabs=1e-13,
        epsrel=1e-12,
        limit=200,
    )
    rho = kr * LAM / (2 * math.pi)
    assert float(metrics.element_kernel(rho, LAM, q)) == pytest.approx(
        2 * math.pi * ref, rel=1e-8, abs=1e-12
    )


def test_element_kernel_isotropic_full_sphere():
    """q = 0: 4π sin(kρ)/(kρ), the full-sphere integral (conventions.md); 4π at ρ = 0."""
    rho = np.array([0.0, 0.1, 0.5, 1.3]) * LAM
    kr = 2 * np.pi * rho / LAM
    expected = 4 * np.pi * np.where(kr > 0, np.sin(kr) / np.where(kr > 0, kr, 1), 1.0)
    np.testing.assert_allclose(metrics.element_kernel(rho, LAM, 0.0), expected, rtol=1e-14)


# -- directivity (rows 1-3) -----------------------------------------------------------------
@settings(max_examples=40, deadline=None)
@given(st.lists(st.booleans(), min_size=2, max_size=80).filter(lambda m: sum(m) >= 1))
def test_half_wave_linear_isotropic_directivity_is_n(mask):
    """Directivity exactly N for any 0/1 layout of a half-wavelength linear array, q = 0
    (math: the sin(kρ)/(kρ) cross terms vanish; Balanis ch. 6, memory; row 1)."""
    a = np.array(mask, dtype=float)[None, :]
    d = metrics.directivity_grid(a, (LAM / 2, 0.0), LAM, q=0.0)
    assert d == pytest.approx(a.sum(), rel=1e-9)


def test_weighted_half_wave_linear_directivity():
    """With amplitude weights: (Σa)²/Σa² exactly (row 1, math)."""
    a = np.hanning(40)[None, :] + 0.1
    d = metrics.directivity_grid(a, (LAM / 2, 0.0), LAM, q=0.0)
    assert d == pytest.approx(a.sum() ** 2 / (a**2).sum(), rel=1e-9)


def test_filled_20x20_cos_element_is_pi_n():
    """Filled 20 × 20 half-wavelength square lattice, q = 1: within 0.1 dB of πN, and 1256.9
    from an exact autocorrelation computation (Mailloux ch. 1, memory; row 2)."""
    a = np.ones((20, 20))
    d = metrics.directivity_grid(a, (LAM / 2, LAM / 2), LAM, q=1.0)
    assert 10 * math.log10(d) == pytest.approx(10 * math.log10(math.pi * 400), abs=0.1)
    assert d == pytest.approx(1256.9, abs=0.1)


@pytest.mark.parametrize("fill", [0.2, 0.5, 0.8])
def test_thinned_directivity_between_pi_n_and_4n(fill):
    """Thinned half-wavelength planar array, q = 1: πN ≤ D ≤ 4N (math; row 3)."""
    rng = np.random.default_rng(int(fill * 10))
    a = (rng.random((20, 20)) < fill).astype(float)
    n = a.sum()
    d = metrics.directivity_grid(a, (LAM / 2, LAM / 2), LAM, q=1.0)
    assert math.pi * n * 0.999 <= d <= 4 * n


def test_grid_and_pairwise_directivity_agree():
    """Autocorrelation route and explicit pairwise sum give the same number (math)."""
    rng = np.random.default_rng(2)
    a = (rng.random((9, 13)) < 0.5) * rng.random((9, 13))
    r, c = np.nonzero(a)
    for q in (0.0, 1.0, 2.0):
        g = metrics.directivity_grid(a, (0.6 * LAM, 0.55 * LAM), LAM, q)
        p = metrics.directivity_points(c * 0.6 * LAM, r * 0.55 * LAM, a[r, c], LAM, q)
        assert g == pytest.approx(p, rel=1e-10)


def test_directivity_against_numerical_pattern_integral():
    """4π·P(0)/∫ cos θ |AF|² dΩ by brute-force quadrature over the hemisphere
    (reference: the definition in conventions.md, integrated numerically). 0.1 %."""
    a = np.array([[1.0, 0, 1, 1], [0, 1, 1, 0], [1, 1, 0, 1]])
    ex = GridExact(a, (0.7 * LAM, 0.45 * LAM), LAM)
    th = (np.arange(400) + 0.5) * (math.pi / 2) / 400
    ph = (np.arange(800) + 0.5) * 2 * math.pi / 800
    T, P = np.meshgrid(th, ph, indexing="ij")
    u, v = (np.sin(T) * np.cos(P)).ravel(), (np.sin(T) * np.sin(P)).ravel()
    p = ex.evaluate(u, v, derivatives=False).reshape(T.shape)
    integral = np.sum(p * np.cos(T) * np.sin(T)) * (math.pi / 2 / 400) * (2 * math.pi / 800)
    d = metrics.directivity_grid(a, (0.7 * LAM, 0.45 * LAM), LAM, q=1.0)
    assert d == pytest.approx(4 * math.pi / integral, rel=1e-3)


# -- rules and expectations (rows 2, 5, 15) -------------------------------------------------
def test_cell_gain_rule_is_pi_n_at_half_wavelength():
    """4π·N·A_cell/λ² = πN for A_cell = (λ/2)² (row 2; math)."""
    assert metrics.cell_gain_rule(123, (LAM / 2) ** 2, LAM) == pytest.approx(math.pi * 123)


def test_linear_gain_rule_isotropic():
    """2Nd/λ (row 15, common practice); N for d = λ/2, matching row 1."""
    assert metrics.linear_gain_rule(50, LAM / 2, LAM) == pytest.approx(50)
    # cos element: factor 2π/I₁ = π (I₁ = ∫cos φ dφ over (−π/2, π/2) = 2, math)
    assert metrics.linear_gain_rule(50, LAM / 2, LAM, 1.0) == pytest.approx(50 * math.pi)


def test_expected_asl_formula():
    """(M − N)/(N(M − 1)) without the filled-aperture term (row 5); 1/N for unknown M."""
    assert metrics.expected_asl_random(50, 200) == pytest.approx(150 / (50 * 199))
    assert metrics.expected_asl_random(50, None) == pytest.approx(1 / 50)
    assert metrics.expected_asl_random(200, 200, 1e-3) == pytest.approx(1e-3)


@pytest.mark.slow
@pytest.mark.parametrize("m,n,shape", [(100, 40, (1, 100)), (256, 128, (16, 16))])
def test_random_thinning_asl_matches_expectation(m, n, shape):
    """Mean ASL of exactly-N-of-M random draws vs the exact expectation (row 5: Lo 1964;
    Skolnik, Sherman & Ogg 1964), filled-aperture term included. 600 draws: the standard
    error of the mean is about 1.5 %, so 0.15 dB is a four-sigma band."""
    rng = np.random.default_rng(m + n)
    linear = shape[0] == 1
    eng = FFTPatternEngine(shape, (LAM / 2, LAM / 2), LAM, 0.0, linear=linear)
    draws = np.zeros((600, m), dtype=np.float32)
    for i in range(600):
        draws[i, rng.choice(m, n, replace=False)] = 1
    s = eng.evaluate(draws.reshape((600,) + shape), refine=False)
    filled = float(eng.evaluate(np.ones(shape), refine=False).asl[0])
    expected = metrics.expected_asl_random(n, m, filled)
    assert 10 * math.log10(s.asl.mean()) == pytest.approx(10 * math.log10(expected), abs=0.15)
    # where the filled aperture's own sidelobes are small, row 5's headline form alone holds
    thinning_term = (m - n) / (n * (m - 1))
    if filled < 0.1 * thinning_term:
        assert 10 * math.log10(s.asl.mean()) == pytest.approx(
            10 * math.log10(thinning_term), abs=0.5
        )


def test_tapered_expectation_formula():
    """Σp(1 − p)/(Σp)² (Skolnik, Sherman & Ogg 1964; row 5) for a hand-made p."""
    p = np.array([0.2, 0.5, 1.0, 0.5])
    assert metrics.expected_asl_tapered(p) == pytest.approx((0.16 + 0.25 + 0 + 0.25) / 2.2**2)


# -- beamwidth (row 8) -----------------------------------------------------------------------
@pytest.mark.parametrize("n", [50, 100, 200])
def test_uniform_array_half_power_width(n):
    """Half-power width in u = 0.886 λ/(N d) for a uniform array (Mailloux ch. 1, memory;
    row 8). The constant is the large-N limit (0.8859); 0.5 % covers N ≥ 50."""
    ex = GridExact(np.ones((1, n)), (LAM / 2, 0.0), LAM)
    dp, dm = metrics.half_power_offsets(ex, (1.0, 0.0), 0.1 / n)
    assert dp == pytest.approx(dm, rel=1e-9)
    assert dp + dm == pytest.approx(0.886 * LAM / (n * LAM / 2), rel=5e-3)


@pytest.mark.parametrize("theta0", [20.0, 40.0, 55.0])
def test_beam_broadening_with_scan(theta0):
    """Scanned beamwidth ≈ broadside width / cos θ₀ for narrow beams (Hansen, memory;
    row 8). 1 % for a 200-element array."""
    ex = GridExact(np.ones((1, 200)), (LAM / 2, 0.0), LAM)
    dp, dm = metrics.half_power_offsets(ex, (1.0, 0.0), 0.0005)
    bw0 = metrics.beamwidth_deg(dp, dm)
    bw = metrics.beamwidth_deg(dp, dm, math.sin(math.radians(theta0)))
    assert bw == pytest.approx(bw0 / math.cos(math.radians(theta0)), rel=1e-2)


def test_element_beamwidth():
    """cos θ power pattern: half power at 60°, width 120° (math)."""
    assert metrics.element_beamwidth_deg(1.0) == pytest.approx(120.0)
    assert metrics.element_beamwidth_deg(0.0) is None


# -- score_layout: the whole set, grating lobes (row 10) -------------------------------------
def _square_layout(n, d):
    r, c = np.meshgrid(np.arange(n), np.arange(n), indexing="ij")
    return Layout(x=c.ravel() * d, y=r.ravel() * d)


@pytest.mark.parametrize("theta", [0.0, 30.0, 50.0])
def test_square_lattice_grating_lobe_threshold(theta):
    """Grating-lobe-free to θmax iff d/λ < 1/(1 + sin θmax) (Sharp 1961, memory; row 10).
    0.5 % either side of the threshold."""
    limit = LAM / (1 + math.sin(math.radians(theta)))
    below = score_layout(_square_layout(8, 0.995 * limit), FREQ, math.radians(theta))
    above = score_layout(_square_layout(8, 1.005 * limit), FREQ, math.radians(theta))
    assert below.grating_lobes is False and above.grating_lobes is True
    assert above.psl_db > -0.5  # the lobe is in the sidelobe region: a full-height lobe


@pytest.mark.parametrize("theta", [0.0, 30.0, 50.0])
def test_triangular_lattice_grating_lobe_threshold(theta):
    """Equilateral triangular lattice: d/λ < 2/(√3(1 + sin θmax)) (Mailloux ch. 1, memory;
    row 10), d the nearest-neighbour distance. 0.5 % either side."""
    limit = 2 * LAM / (math.sqrt(3) * (1 + math.sin(math.radians(theta))))
    res = []
    for d in (0.995 * limit, 1.005 * limit):
        r, c = np.meshgrid(np.arange(10), np.arange(20), indexing="ij")
        keep = (c - r) % 2 == 0
        lay = Layout(x=c[keep] * d / 2, y=r[keep] * d * math.sqrt(3) / 2)
        res.append(score_layout(lay, FREQ, math.radians(theta)).grating_lobes)
    assert res == [False, True]


def test_score_filled_square_array():
    """Filled 16 × 16 half-wavelength array, q = 1: directivity within 0.1 dB of πN (row 2),
    PSL the separable Dirichlet first sidelobe −13.15 dB for N = 16 (math, row 8),
    expected ASL of a full aperture equals its own ASL."""
    r = score_layout(_square_layout(16, LAM / 2), FREQ, 0.0)
    assert r.elements == 256 and r.sites == 256 and r.fill == 1.0
    assert r.directivity_minus_pi_n_db == pytest.approx(0.0, abs=0.1)
    n = 16
    ref = max(
        (math.sin(n * x) / (n * math.sin(x))) ** 2
        for x in np.linspace(1.4 * math.pi / n, 1.5 * math.pi / n, 20001)
    )
    assert r.psl_db == pytest.approx(10 * math.log10(ref), abs=0.01)
    assert r.expected_asl_db == pytest.approx(r.asl_db, abs=1e-6)
    assert r.hpbw_deg[0] == pytest.approx(r.hpbw_deg[1])


def test_score_off_lattice_uses_direct_sum():
    """Positions jittered by 20 µm fit no grid within 1 µm: scored by direct summation, and the
    figures move by far less than the tolerances of the lattice case (continuity)."""
    rng = np.random.default_rng(0)
    lay = _square_layout(10, LAM / 2)
    jit = Layout(x=lay.x + rng.normal(0, 20e-6, len(lay)), y=lay.y + rng.normal(0, 20e-6, len(lay)))
    a = score_layout(lay, FREQ, math.radians(20))
    b = score_layout(jit, FREQ, math.radians(20))
    assert a.evaluation["engine"] == "fft" and b.evaluation["engine"] == "direct"
    assert b.psl_db == pytest.approx(a.psl_db, abs=0.02)
    assert b.asl_db == pytest.approx(a.asl_db, abs=0.1)
    assert b.directivity_dbi == pytest.approx(a.directivity_dbi, abs=0.01)
