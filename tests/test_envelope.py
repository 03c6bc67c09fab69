"""The optimised density envelope (thinning.search.envelope) and the exact-count samplers
(thinning.search.sampling): checked against references.md row 5 and exact identities."""

from __future__ import annotations

import math

import numpy as np
import pytest
from helpers import rect_sites

from thinning.engine import fastpath
from thinning.engine.exact import GridExact
from thinning.errors import SpecError
from thinning.geometry.aperture import Aperture
from thinning.geometry.lattice import Lattice
from thinning.search import density, envelope, sampling
from thinning.search.problem import ThinningProblem

LAM = 0.03  # [m]  10 GHz; the lattices below are at half a wavelength


def _circle(radius_mm, holes=(), n=96):
    t = np.linspace(0, 2 * np.pi, n, endpoint=False)
    ring = [[radius_mm * math.cos(a), radius_mm * math.sin(a)] for a in t]
    return Aperture.from_mm(ring, [list(h) for h in holes])


def _problem(aperture, fill=0.5, symmetry="none", scan_deg=20.0, pinned=None):
    sites = Lattice.from_mm("rectangular", [15.0, 15.0]).sites_in(aperture)
    return ThinningProblem(
        sites,
        int(round(fill * len(sites))),
        LAM,
        math.radians(scan_deg),
        symmetry=symmetry,
        pinned=pinned,
    )


@pytest.fixture(scope="module")
def disc():
    """A disc of about 450 sites at 50 % fill, scanned to 20°, and its LP envelope."""
    p = _problem(_circle(180.0))
    return p, density.optimised_envelope(p)


def test_envelope_genes_sum_to_the_class_counts(disc):
    """Exact budget per class, probabilities in [0, 1] (math)."""
    p, env = disc
    assert env.kind == "lp"
    assert np.all(env.genes >= 0) and np.all(env.genes <= 1)
    for c, ones in enumerate(p.class_ones):
        assert math.isclose(env.genes[p.gene_class == c].sum(), ones, abs_tol=1e-9)
    assert math.isclose(env.sites.sum(), p.elements, abs_tol=1e-9)


@pytest.mark.slow
def test_expected_pattern_is_the_mean_of_exact_count_draws(disc):
    """references.md row 5 (Skolnik, Sherman & Ogg 1964): E[AF] = Σ pₙ e^{jψₙ} exactly for
    any sampling with P(on) = pₙ, and E|AF|² = |Σ pₙ e^{jψₙ}|² + Σ pₙ(1 − pₙ) for independent
    draws. 3000 exact-count systematic draws at 24 sidelobe directions: the mean field within
    5 standard errors of Σ pₙ e^{jψₙ}; the mean power within 10 % of the formula (the small
    negative covariances of sampling without replacement, and 3000 draws' scatter)."""
    p, env = disc
    rng = np.random.default_rng(5)
    k = 3000
    g = sampling.systematic(p, env.genes, rng, k)
    masks = p.to_masks(g).astype(float)
    grids = p.sites.to_grid(masks, dtype=np.float64)
    ex = GridExact(grids, p.sites.lattice.grid_pitch, LAM)
    ang = np.linspace(0, np.pi, 24, endpoint=False)
    rho = np.linspace(0.12, 1.2, 24)
    u, v = rho * np.cos(ang), rho * np.sin(ang)
    af = np.stack(
        [
            ex.components(u, v, which=np.full(u.size, i), derivatives=False)[0][:, 0]
            for i in range(k)
        ]
    )  # (k, points)
    mean_field = af.mean(axis=0)
    exp_field = GridExact(p.sites.to_grid(env.sites, np.float64), ex_pitch(p), LAM).components(
        u, v, derivatives=False
    )[0][:, 0]
    floor = float(np.sum(env.sites * (1 - env.sites)))
    se = math.sqrt(floor / k)  # standard error of the mean field, per quadrature at most
    assert np.max(np.abs(mean_field - exp_field)) <= 5 * se * math.sqrt(2)
    mean_power = np.mean(np.abs(af) ** 2, axis=0)
    expected = np.abs(exp_field) ** 2 + floor
    np.testing.assert_allclose(mean_power, expected, rtol=0.10)


def ex_pitch(p):
    return p.sites.lattice.grid_pitch


@pytest.mark.parametrize(
    "make",
    [
        lambda: _problem(_circle(180.0)),
        lambda: _problem(_circle(160.0, holes=[[[20, 20], [80, 20], [80, 70], [20, 70]]]), 0.4),
        lambda: _problem(Aperture.from_mm([[0, 0], [330, 0], [330, 210], [0, 210]]), 0.6),
        lambda: _problem(_circle(150.0), 0.5, symmetry="mirror-xy"),
    ],
    ids=["disc", "disc-with-hole", "rectangle", "symmetric"],
)
def test_bound_never_above_the_taylor_envelope(make):
    """math: the LP envelope replaces the Taylor one only where its bound (the peak of the
    expected pattern, scored by the same rule) is lower; else the Taylor envelope is kept. So
    the bound never exceeds the Taylor envelope's, whatever the outline, holes or symmetry."""
    p = make()
    env = density.optimised_envelope(p)
    taylor = density.taper_probabilities(p, {"taper": "taylor"})
    t_bound, _ = envelope.envelope_bound(p, envelope.site_probabilities(p, taylor))
    assert env.bound_db <= t_bound + 1e-9
    assert env.taylor_bound_db == pytest.approx(t_bound)
    # the bound is what envelope_bound gives for the envelope kept
    assert env.bound_db == pytest.approx(envelope.envelope_bound(p, env.sites)[0])


def test_bound_is_the_floor_plus_the_envelope_pattern_peak(disc):
    """references.md row 5: the bound is max |Σ pₙ e^{jψₙ}|²/N² over the sidelobe region plus
    Σ pₙ(1 − pₙ)/N² (the floor is the same everywhere); the peak checked against a brute-force
    search of the exact envelope pattern on a fine u-v grid (not below it by more than the
    refinement's 0.05 dB, conventions.md)."""
    p, env = disc
    n = p.elements
    floor = float(np.sum(env.sites * (1 - env.sites))) / n**2
    ex = GridExact(p.sites.to_grid(env.sites, np.float64), ex_pitch(p), LAM)
    uu, vv = np.meshgrid(np.linspace(-1.342, 1.342, 401), np.linspace(-1.342, 1.342, 401))
    r = np.hypot(uu, vv)
    keep = (r <= 1 + math.sin(math.radians(20))) & (r >= 2.5 * env.beam_uv)
    brute = float(ex.evaluate(uu[keep], vv[keep], derivatives=False).max())
    assert env.bound_db >= 10 * math.log10(brute + floor) - 0.05


def test_group_patterns_equal_the_direct_sum():
    """math: the compiled per-group pattern equals Σ w e^{j(kx u + ky v)} summed in numpy."""
    rng = np.random.default_rng(2)
    group = rng.integers(-1, 4, size=(7, 9, 2)).astype(np.int32)
    group[..., 1][group[..., 0] < 0] = -1
    weight = rng.random((7, 9, 2))
    kx, ky = rng.normal(size=9), rng.normal(size=7)
    u, v = rng.normal(size=5), rng.normal(size=5)
    out = fastpath.group_patterns(u, v, group, weight, kx, ky, 4)
    got = out[..., 0] + 1j * out[..., 1]
    ref = np.zeros((5, 4), complex)
    for r in range(7):
        for c in range(9):
            for s in range(2):
                g = group[r, c, s]
                if g >= 0:
                    ref[:, g] += weight[r, c, s] * np.exp(1j * (kx[c] * u + ky[r] * v))
    np.testing.assert_allclose(got, ref, rtol=1e-12, atol=1e-12)


def test_ray_rows_are_exact(disc):
    """math: the rows read from the 1-D projections along lattice directions equal the direct
    sum of every basis function at those points (1e-9 of the aperture's size)."""
    p, _ = disc
    basis = envelope._basis(p, 12, 1)
    u0 = envelope.uniform_null(p)
    ru, rv, rb = envelope._ray_rows(p, basis, u0, 1.5 * u0, p.engine.radius)
    pick = np.linspace(0, ru.size - 1, 40).astype(int)
    direct = envelope._point_rows(p, basis, ru[pick], rv[pick])
    assert np.max(np.abs(direct - rb[pick])) <= 1e-9 * len(p.sites)


def test_envelope_with_pins_and_classes():
    """Pinned sites count as on (p = 1) and the genes of every symmetry class sum to its
    count (math)."""
    ap = _circle(150.0)
    sites = Lattice.from_mm("rectangular", [15.0, 15.0]).sites_in(ap)
    pinned = np.zeros(len(sites), bool)
    pinned[:6] = True
    p = ThinningProblem(sites, len(sites) // 2, LAM, 0.3, pinned=pinned, symmetry="mirror-x")
    env = density.optimised_envelope(p)
    assert np.all(env.sites[p.pinned_sites] == 1.0)
    for c, ones in enumerate(p.class_ones):
        assert math.isclose(env.genes[p.gene_class == c].sum(), ones, abs_tol=1e-9)


@pytest.mark.parametrize(
    "opts",
    [{"envelope_beam": 0.1}, {"envelope_rings": 0}, {"envelope_sectors": 1.5}, {"taper": "x"}],
)
def test_bad_envelope_options(opts):
    p = ThinningProblem(rect_sites(), 30, LAM)
    with pytest.raises(SpecError):
        density.taper_probabilities(p, {"taper": "lp", **opts})


# -- error diffusion --------------------------------------------------------------------------
@pytest.mark.parametrize("kernel", sorted(sampling.DIFFUSION_FILTERS))
@pytest.mark.parametrize("symmetry", ["none", "mirror-x", "mirror-xy", "rotate-180"])
@pytest.mark.parametrize("fill", [0.15, 0.5, 0.85])
def test_error_diffusion_keeps_the_exact_count(kernel, symmetry, fill):
    """Every class has exactly its count on, in every scan orientation, with and without
    dither (math: the count is made exact after the scan)."""
    p = _problem(_circle(120.0, holes=[[[0, 0], [40, 0], [40, 30], [0, 30]]]), fill, symmetry)
    genes = density.taper_probabilities(p, {"taper": "taylor"})
    rng = np.random.default_rng(0)
    for variant in range(len(sampling.ORIENTATIONS)):
        for dither in (0.0, 0.8):
            g = sampling.error_diffusion(p, genes, variant, kernel, dither, rng)
            assert p.is_feasible(g)


def test_error_diffusion_is_deterministic():
    p = _problem(_circle(120.0))
    genes = density.taper_probabilities(p, {"taper": "taylor"})
    a = sampling.error_diffusion(p, genes, 3)
    b = sampling.error_diffusion(p, genes, 3)
    np.testing.assert_array_equal(a, b)


def test_error_diffusion_moves_the_error_away_from_the_beam():
    """Floyd–Steinberg diffusion shapes the quantisation error x − p into high spatial
    frequencies (blue noise: Ulichney, *Digital Halftoning*, 1987, ch. 8 (memory)): at
    p ≈ 1/2 its power near the main beam (|u|, |v| within a tenth of the period) is far below
    that of random draws, whose error is white (references.md row 5: Σ p(1 − p) everywhere)."""
    ap = Aperture.from_mm([[0, 0], [960, 0], [960, 960], [0, 960]])
    sites = Lattice.from_mm("rectangular", [15.0, 15.0]).sites_in(ap)
    p = ThinningProblem(sites, len(sites) // 2, LAM)
    genes = np.full(p.n_genes, p.elements / p.n_genes)

    def near_power(g):
        e = p.sites.to_grid(p.to_masks(g)[0].astype(float) - genes[0], np.float64)
        f = np.abs(np.fft.fft2(e, s=(256, 256))) ** 2
        k = np.r_[0:26, 256 - 25 : 256]
        return f[np.ix_(k, k)].mean()

    ed = near_power(sampling.error_diffusion(p, genes, 0))
    rand = np.mean(
        [near_power(g) for g in sampling.systematic(p, genes, np.random.default_rng(1), 8)]
    )
    assert ed < 0.2 * rand
