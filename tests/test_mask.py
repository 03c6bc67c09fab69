"""Sidelobe masks over a scan set and a band: the margin, the search's figure, the verdicts.

The worst margin of a layout over a mask is the minimum, over every beam of the scan set at
every frequency of the band and every visible direction, of the mask's limit less the
pattern (math: the definition, conventions.md "Contract additions"). It is checked against
that minimum taken by brute force: the steered pattern of every beam on a dense grid of beams
and frequencies, over a dense grid of directions with the zone edges on it.
"""

from __future__ import annotations

import json
import math

import numpy as np
import pytest
from helpers import rect_sites, run_cli, tri_sites, write_spec

from thinning.analysis.score import score_layout
from thinning.engine.coverage import Coverage, ScanSet
from thinning.engine.mask import MaskEntry, RegionMap, SidelobeLimits
from thinning.engine.pattern import FFTPatternEngine
from thinning.geometry.layout import Layout
from thinning.search.problem import ThinningProblem

LAM = 0.03
F0 = 299792458.0 / LAM
D = math.radians


def _entry(t1, t2, p1, p2, level):
    return MaskEntry((D(t1), D(t2)), (D(p1), D(p2)), level)


# -- the limits in observation directions ---------------------------------------------------
def test_limit_is_the_tightest_entry_and_psl_elsewhere():
    """Where entries overlap the lowest level applies; where none covers a direction,
    psl_db; an entry laxer than psl_db holds inside it (the mask says so; common practice
    of sidelobe masks)."""
    lim = SidelobeLimits(
        (_entry(20, 90, 180, 360, -25.0), _entry(0, 40, 0, 360, -10.0)), psl_db=-15.0
    )
    s20, s30, s60 = (math.sin(D(a)) for a in (20, 30, 60))
    c10, s10 = math.cos(D(10)), math.sin(D(10))
    u = np.array([0.0, 0.0, 0.0, s60 * c10, 0.0, s60])
    v = np.array([-s30, s30, -s60, s60 * s10, 0.05, 0.0])
    # (the last direction, φ = 0 = 360°, lies on the first entry's edge: edges belong to it)
    np.testing.assert_allclose(lim.at(u, v), [-25.0, -10.0, -25.0, -15.0, -10.0, -25.0])
    assert s20 < s30


# -- the engine: compiled against numpy, swap moves against full evaluations -----------------
COV = Coverage(ScanSet.sector((D(-40), D(30)), (D(-5), D(15))), F0, (0.95 * F0, 1.05 * F0))
LIMITS = SidelobeLimits(
    (_entry(10, 90, 180, 360, -22.0), _entry(50, 90, 0, 180, -17.0)), psl_db=-14.0
)


@pytest.mark.parametrize("guard", [0.0, 1.0])
@pytest.mark.parametrize(
    "shape,pitch,linear",
    [((14, 16), (0.5, 0.5), False), ((10, 20), (0.3, 0.52), False), ((1, 48), (0.6, 0.6), True)],
)
def test_compiled_route_equals_numpy_route_under_a_mask(shape, pitch, linear, guard):
    """Same worst excess (max P·g), ASL and place on both routes, for a sector over a band
    with a mask, with and without the search's guard (math: the same rules; 1e-5 dB is the
    float rounding of the sums and the Newton stop, as in test_fastpath.py)."""
    rng = np.random.default_rng(sum(shape))
    a = (rng.random((10,) + shape) < 0.55).astype(np.float32)
    if pitch == (0.3, 0.52):
        r, c = np.indices(shape)
        a *= ((c - r) % 2 == 0)[None]
    if linear:
        a = a[:, 0, :]
    rmap = RegionMap(COV, LIMITS, guard_samples=guard)
    eng = FFTPatternEngine(
        shape, (pitch[0] * LAM, pitch[1] * LAM), LAM, linear=linear, region_map=rmap
    )
    assert eng.region.masked and not eng.region.disc
    eng.compiled = True
    fast = eng.evaluate(a)
    eng.compiled = False
    slow = eng.evaluate(a)
    np.testing.assert_allclose(fast.psl_db, slow.psl_db, atol=1e-5)
    np.testing.assert_allclose(fast.asl_db, slow.asl_db, atol=1e-5)


@pytest.mark.parametrize("sites", [rect_sites, tri_sites])
def test_swap_moves_equal_full_evaluations_under_a_mask(sites):
    """A swap move scored from the stored transform gives the same worst excess over the
    mask as a full evaluation of the swapped layout (math: the same samples updated by the
    switched sites' terms; 1e-6 dB of float rounding)."""
    s = sites()
    p = ThinningProblem(s, len(s) // 2, LAM, coverage=COV, limits=LIMITS)
    assert p.masked
    rng = np.random.default_rng(3)
    base = p.random_genomes(rng, 1)[0]
    off = rng.choice(np.flatnonzero(base), 24)
    on = rng.choice(np.flatnonzero(~base), 24)
    fast = p.evaluate_swaps(base, off, on)
    full = p.evaluate(p.swapped(base, off, on))
    np.testing.assert_allclose(fast.psl_db, full.psl_db, atol=1e-6)


def test_without_a_mask_the_figures_are_the_plain_psl():
    """A region map of the plain cone without a mask gives the engine's own figures, to the
    last bit (an identity: the same weights, g the region's indicator)."""
    rng = np.random.default_rng(5)
    a = (rng.random((6, 12, 14)) < 0.5).astype(np.float32)
    plain = FFTPatternEngine((12, 14), (0.5 * LAM, 0.5 * LAM), LAM, D(25))
    mapped = FFTPatternEngine(
        (12, 14), (0.5 * LAM, 0.5 * LAM), LAM, region_map=RegionMap(Coverage.cone(D(25), F0))
    )
    for compiled in (True, False):
        plain.compiled = mapped.compiled = compiled
        x, y = plain.evaluate(a), mapped.evaluate(a)
        np.testing.assert_array_equal(x.psl_db, y.psl_db)
        np.testing.assert_array_equal(x.asl_db, y.asl_db)


# -- the margin against brute force -----------------------------------------------------------
def _brute_margin_linear(x, coverage, limits, n_beam=241, n_freq=13):
    """min over beams, frequencies and visible u of limit − pattern, for elements at x on a
    line (the pattern depends on u alone, so a direction's limit is the tightest over v).
    Observation u on a grid of 1e-4 with the limits' edges on it; the steered beam's own
    main lobe (out to its first nulls) left out."""
    k0 = 2 * math.pi / LAM
    u = np.unique(np.concatenate([np.linspace(-1, 1, 20001), [-0.5, 0.0, 0.5]]))
    vv = np.linspace(0, 1, 401)
    lmin = np.full(u.size, np.inf)
    for sgn in (1.0, -1.0):
        v = sgn * np.sqrt(np.maximum(0, 1 - u[:, None] ** 2)) * vv[None, :]
        lim = limits.at(np.broadcast_to(u[:, None], v.shape), v)
        lmin = np.minimum(lmin, lim.min(axis=1))
    t_fine = np.linspace(-2.2, 2.2, 440001)
    af = np.zeros(t_fine.size, dtype=complex)
    for xn in x:
        af += np.exp(1j * k0 * xn * t_fine)
    p_db = 10 * np.log10(np.maximum(np.abs(af) ** 2 / len(x) ** 2, 1e-30))
    mid = t_fine.size // 2
    right = mid + int(np.argmax(np.diff(p_db[mid:]) > 0))
    left = mid - int(np.argmax(np.diff(p_db[mid::-1]) > 0))
    null_lo, null_hi = t_fine[left], t_fine[right]
    (a1, a2) = coverage.scan.azimuth
    worst = np.inf
    for rho in np.linspace(*coverage.rho, n_freq):
        for u0 in np.sin(np.linspace(a1, a2, n_beam)):
            t = rho * u - u0
            p = np.interp(t, t_fine, p_db)
            keep = (t <= null_lo) | (t >= null_hi)
            worst = min(worst, float(np.min((lmin - p)[keep])))
    return worst


def test_mask_margin_equals_brute_force_for_a_linear_array():
    """A 40-site line at 0.55 λ with 24 elements, scanned from −25° to 35° over 0.94–1.05 f₀
    with phase shifters, under a three-entry mask: the reported margin equals the
    brute-force minimum over 121 beams × 9 frequencies × 20,001 directions within 0.1 dB
    (math: the definition; 0.1 dB covers the brute force's own sampling of beams)."""
    rng = np.random.default_rng(4)
    on = np.sort(rng.choice(40, 24, replace=False))
    x = on * 0.55 * LAM
    cov = Coverage(ScanSet.sector((D(-25), D(35)), (0.0, 0.0)), F0, (0.94 * F0, 1.05 * F0))
    limits = SidelobeLimits(
        (
            _entry(20, 90, 90, 270, -12.0),  # u ≤ 0
            _entry(60, 90, 60, 120, -15.0),  # up: |u| ≤ 0.5 (a line's pattern: any v)
            _entry(50, 90, -90, 90, -11.0),  # u ≥ 0
        ),
        psl_db=-9.0,
    )
    layout = Layout(x, np.zeros_like(x))
    m = score_layout(layout, F0, 0.0, 1.0, coverage=cov, limits=limits).to_dict()
    brute = _brute_margin_linear(x, cov, limits, n_beam=121, n_freq=9)
    assert m["mask"]["margin_db"] == pytest.approx(brute, abs=0.1)
    # the beam and direction reported meet the worst point under its limit: the pattern
    # there, seen by that beam at that frequency, is the reported level (exact sum)
    b, d = m["mask"]["beam"], m["mask"]["direction"]
    assert limits.at(d["u"], d["v"]) == pytest.approx(m["mask"]["limit_db"])
    rho = m["mask"]["frequency_ghz"] * 1e9 / F0
    t = rho * d["u"] - b["u0"]
    af = np.exp(1j * 2 * math.pi / LAM * x * t).sum()
    assert 10 * math.log10(abs(af) ** 2 / len(x) ** 2) == pytest.approx(
        m["mask"]["level_db"], abs=1e-3
    )


@pytest.mark.slow
def test_mask_margin_equals_brute_force_for_a_planar_array():
    """An 8 × 9 half-wavelength panel, 40 elements, over a sector ±20° × 0–10° and ±3 % of
    band, under a mask toward the ground: the margin equals the brute-force minimum over
    21 × 11 beams × 5 frequencies and each beam's pattern on a 0.004 grid of directions
    within 0.1 dB (math: the definition; the brute force's grids make it read at most that
    much high)."""
    rng = np.random.default_rng(2)
    grid = np.zeros((8, 9))
    grid.flat[rng.choice(72, 40, replace=False)] = 1
    rr, cc = np.nonzero(grid)
    x, y = cc * 0.5 * LAM, rr * 0.5 * LAM
    cov = Coverage(ScanSet.sector((D(-20), D(20)), (D(0), D(10))), F0, (0.97 * F0, 1.03 * F0))
    limits = SidelobeLimits((_entry(20, 90, 200, 340, -15.0),), psl_db=-9.0)
    layout = Layout(x, y)
    m = score_layout(layout, F0, 0.0, 1.0, coverage=cov, limits=limits).to_dict()
    from scipy.ndimage import map_coordinates

    k0 = 2 * math.pi / LAM
    # the broadside pattern on a fine grid, summed directly; a beam (w₀, f) reads it at
    # t = (f/f₀)·w − w₀ (an identity of the phases, checked by direct sums in
    # test_coverage.py), bilinearly between points 0.002 apart (error far below 0.01 dB
    # at a lobe of this 4-wavelength panel)
    h = 0.002
    tg = np.arange(-1.5, 1.5 + h / 2, h)
    ex = np.exp(1j * k0 * np.outer(tg, x))  # (T, N)
    ey = np.exp(1j * k0 * np.outer(tg, y))
    p_grid = np.abs(ey @ ex.T) ** 2 / len(x) ** 2  # rows t_v, columns t_u
    g = np.arange(-1, 1.0001, 0.004)
    uu, vv = np.meshgrid(g, g)
    vis = np.hypot(uu, vv) <= 1
    uu, vv = uu[vis], vv[vis]
    lim = limits.at(uu, vv)
    worst = np.inf
    aa, ee = np.meshgrid(np.linspace(D(-20), D(20), 21), np.linspace(0, D(10), 11))
    for rho in np.linspace(0.97, 1.03, 5):
        for a, e in zip(aa.ravel(), ee.ravel(), strict=True):
            w0 = (math.cos(e) * math.sin(a), math.sin(e))
            tu, tv = rho * uu - w0[0], rho * vv - w0[1]
            p = map_coordinates(p_grid, [(tv + 1.5) / h, (tu + 1.5) / h], order=1)
            p_db = 10 * np.log10(np.maximum(p, 1e-30))
            # the beam's own main lobe: within the first null of the broadside pattern
            keep = np.hypot(tu, tv) > 0.26  # 8 × 9 half-wave: first nulls at |t| ≥ 0.22
            worst = min(worst, float(np.min((lim - p_db)[keep & np.isfinite(lim)])))
    assert m["mask"]["margin_db"] <= worst + 0.1
    assert m["mask"]["margin_db"] == pytest.approx(worst, abs=0.1)


# -- verdicts of a linear array's requirements --------------------------------------------------
LINEAR_SPEC = """
name = "line-check"
[array]
frequency_ghz = 10.0
lattice = "linear"
spacing_mm = 15.0
element_exponent = 1.0
[aperture]
sites = 40
[budget]
elements = 26
[scan]
azimuth_deg = [-20.0, 30.0]
[band]
ghz = [9.6, 10.4]
[search]
method = "genetic"
seed = 3
evaluations = 1500
[requirements]
psl_db = -11.0
hpbw_max_deg = 7.0
mask = [{theta_deg = [30.0, 90.0], phi_deg = [90.0, 270.0], level_db = -14.0}]
"""


def test_linear_array_requirement_verdicts(tmp_path, capsys):
    """A line array designed for an azimuth sector over a band under a mask: each verdict of
    layout.json is the brute-force figure against its requirement — the mask margin (as
    above, 0.1 dB), the PSL over every beam and frequency (brute force, 0.1 dB), and the
    widest half-power beamwidth from the steered patterns at the band's edges (arcsin of
    the half-power points, references.md row 8; 0.05 deg) — with margin = required −
    achieved and met = margin ≥ 0, and the summary line says the same."""
    spec = write_spec(tmp_path, LINEAR_SPEC)
    code, out, err = run_cli(capsys, "design", spec, "--out", tmp_path / "d", "--quiet")
    assert code == 0, err
    meta = json.loads((tmp_path / "d" / "layout.json").read_text())
    req = meta["requirements"]
    assert set(req) == {"psl_db", "hpbw_max_deg", "mask"}
    x = (
        np.array(
            [
                float(r.split(",")[1])
                for r in (tmp_path / "d" / "layout.csv").read_text().split()[1:]
            ]
        )
        * 1e-3
    )
    cov = Coverage(ScanSet.sector((D(-20), D(30)), (0.0, 0.0)), 10e9, (9.6e9, 10.4e9))
    lam0 = 299792458.0 / 10e9
    scale = lam0 / LAM  # the brute force works in units of LAM
    limits = SidelobeLimits((_entry(30, 90, 90, 270, -14.0),), psl_db=-11.0)
    cov_lam = Coverage(cov.scan, F0, (0.96 * F0, 1.04 * F0))
    brute_mask = _brute_margin_linear(x / scale, cov_lam, limits, n_beam=201, n_freq=9)
    no_mask = SidelobeLimits((_entry(0, 90, 0, 360, 0.0),))  # the PSL: margin below 0 dB
    brute_psl = -_brute_margin_linear(x / scale, cov_lam, no_mask, n_beam=201, n_freq=9)
    assert req["mask"]["margin_db"] == pytest.approx(brute_mask, abs=0.1)
    assert req["psl_db"]["achieved"] == pytest.approx(brute_psl, abs=0.1)
    # widest beam: the half-power points of each steered beam, by bisection on the direct sum
    k0 = 2 * math.pi / lam0
    widest = 0.0
    for f in (9.6e9, 10.0e9, 10.4e9):
        for a in np.linspace(D(-20), D(30), 51):
            u0 = math.sin(a)
            ub = u0 * 10e9 / f

            def p(u, f=f, u0=u0):
                af = np.exp(1j * (2 * math.pi * f / 299792458.0 * x * u - k0 * x * u0)).sum()
                return abs(af) ** 2 / len(x) ** 2

            edges = []
            for sgn in (1, -1):
                lo, hi = ub, ub + sgn * 0.2
                for _ in range(60):
                    mid = 0.5 * (lo + hi)
                    lo, hi = (mid, hi) if p(mid) > 0.5 else (lo, mid)
                edges.append(0.5 * (lo + hi))
            if max(abs(e) for e in edges) < 1:
                widest = max(widest, math.degrees(math.asin(edges[0]) - math.asin(edges[1])))
    assert req["hpbw_max_deg"]["achieved"] == pytest.approx(widest, abs=0.05)
    for key, v in req.items():
        if key != "mask":
            assert v["margin_db"] == pytest.approx(v["required"] - v["achieved"], abs=1e-6)
        assert v["met"] is (v["margin_db"] >= 0)
    line = out.splitlines()[0]
    word = "meets" if req["mask"]["met"] else "fails"
    assert f"{word} the sidelobe mask by {abs(req['mask']['margin_db']):.2f} dB" in line


@pytest.mark.parametrize("sites", [rect_sites, tri_sites])
def test_beamwidth_penalty_sees_the_reported_widest_beam(sites):
    """The search's widest beam (half-power points from the grids' column and row sums,
    over the beams that can be widest) equals the reported one (exact pattern, every beam
    of the scan set's edge and centre at the band's edges) to its 4 decimals, for random layouts
    (math: the array factor along an axis is that of the sums along the other), and the
    penalty is 10 dB per degree above the limit."""
    from thinning.analysis.scan_figures import widest_beam
    from thinning.engine.exact import GridExact
    from thinning.search.penalty import HPBW_PENALTY_DB_PER_DEG

    s = sites()
    p = ThinningProblem(s, len(s) // 2, LAM, coverage=COV, hpbw_max=10.0)
    grids = s.to_grid(p.to_masks(p.random_genomes(np.random.default_rng(2), 6)).astype(float))
    p.hpbw_penalty(grids[:1])  # builds the penalty
    widest = p._hpbw.widest(grids)
    g = p.engine.grid
    for i in range(len(grids)):
        ex = GridExact(grids[i], p.engine.pitch, LAM)
        ref = widest_beam(ex, (g.du, g.dv), False, COV)["hpbw_widest_deg"]
        assert widest[i] == pytest.approx(ref, abs=6e-5)
    pen = p.hpbw_penalty(grids)
    np.testing.assert_allclose(pen, HPBW_PENALTY_DB_PER_DEG * np.maximum(0, widest - 10.0))
