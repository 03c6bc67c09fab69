"""Scan sectors and bands: the sidelobe region on the broadside pattern, and the squint.

The region a scan set S over a band [ρ_lo, ρ_hi] = [f_lo/f₀, f_hi/f₀] reaches on the broadside
pattern is the union of the discs |t + c·w₀| ≤ ρ (phase steering: c = 1; true time delay:
c = ρ) over every beam w₀ and frequency (math; thinning/engine/coverage.py). It is checked
against that union taken by brute force over dense grids of beams and frequencies, sample by
sample on both pattern engines' grids, aliases and mirror images included.
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from thinning.analysis.stress import band_table
from thinning.engine.coverage import Coverage, ScanSet
from thinning.engine.mask import RegionMap
from thinning.engine.pattern import DirectPatternEngine, FFTPatternEngine
from thinning.engine.region import SampledRegion
from thinning.engine.region_shape import sample_directions
from thinning.geometry.layout import Layout

LAM = 0.03
F0 = 299792458.0 / LAM
D = math.radians


def _brute_distance(t, coverage: Coverage, n_beam=81, n_freq=9):
    """min over sampled beams and frequencies of |t + c·w₀| − ρ: ≤ 0 inside the union of
    discs (math: the definition of the region)."""
    (a1, a2), (e1, e2) = coverage.scan.azimuth, coverage.scan.elevation
    aa, ee = np.meshgrid(np.linspace(a1, a2, n_beam), np.linspace(e1, e2, max(2, n_beam // 3)))
    w0 = np.column_stack([(np.cos(ee) * np.sin(aa)).ravel(), np.sin(ee).ravel()])
    best = np.full(len(t), np.inf)
    for rho in np.linspace(*coverage.rho, n_freq):
        c = 1.0 if coverage.steering == "phase" else rho
        for s in range(0, len(t), 2000):
            d = (
                np.hypot(
                    t[s : s + 2000, None, 0] + c * w0[None, :, 0],
                    t[s : s + 2000, None, 1] + c * w0[None, :, 1],
                )
                - rho
            )
            best[s : s + 2000] = np.minimum(best[s : s + 2000], d.min(axis=1))
    return best


def _sample_directions(region: SampledRegion):
    """Each sample's directions within reach: (sample index, u, v) of every alias (and mirror
    image on a half plane), as the region's weights count them."""
    out = []
    for uu, vv, _own, mirror in sample_directions(region):
        keep = np.ones(uu.shape, dtype=bool) if mirror is None else mirror
        idx = np.flatnonzero(keep.ravel())
        out.append(np.column_stack([idx, uu.ravel()[idx], vv.ravel()[idx]]))
    pts = np.vstack(out)
    near = np.hypot(pts[:, 1], pts[:, 2]) <= region.radius + 0.05
    return pts[near]


@pytest.mark.parametrize("steering", ["phase", "delay"])
@pytest.mark.parametrize("engine", ["fft", "direct"])
def test_region_equals_brute_force_union_of_discs(steering, engine):
    """Every sample's weight counts exactly the directions that lie in the union of discs
    over the sector's beams and the band's frequencies (math). The brute force samples the
    beams, so it sees a union slightly smaller than the exact one: a direction it leaves out
    must lie within its beam spacing (0.025 in direction cosines) of its union, and no
    direction outside the exact union (by more than the polygons' 1e-5) may count."""
    cov = Coverage(
        ScanSet.sector((D(-35), D(20)), (D(-5), D(25))), F0, (0.93 * F0, 1.06 * F0), steering
    )
    rmap = RegionMap(cov)
    if engine == "fft":
        eng = FFTPatternEngine((6, 7), (0.6 * LAM, 0.55 * LAM), LAM, region_map=rmap)
    else:
        rng = np.random.default_rng(1)
        x, y = rng.uniform(0, 3 * LAM, 30), rng.uniform(0, 2.5 * LAM, 30)
        eng = DirectPatternEngine(x, y, np.ones(30), LAM, region_map=rmap)
    region = eng.region
    pts = _sample_directions(region)
    dist = _brute_distance(pts[:, 1:], cov)
    inside = rmap.contains(pts[:, 1], pts[:, 2])
    assert np.all(inside[dist <= 0])  # the brute force's union is inside ours
    assert np.all(dist[inside] <= 0.025)  # ours exceeds it only by its beam spacing
    count = np.bincount(pts[:, 0].astype(int), weights=inside, minlength=region.weight.size)
    np.testing.assert_array_equal(count, region.weight)


def test_sector_region_lies_inside_its_enclosing_cone():
    """A sector's w₀ all lie within the enclosing cone, so its union of discs lies in the
    cone's disc of radius ρ_hi + sin θ_enc (math), and is far smaller: here under 75 % of
    the disc's area (the sector spans 10° of elevation, the cone 45.4° every way)."""
    cov = Coverage(ScanSet.sector((D(-45), D(45)), (D(0), D(10))), F0, (0.95 * F0, 1.05 * F0))
    poly = cov.region_polygon()
    r_enc = 1.05 + math.sin(cov.scan.enclosing_angle)
    cone = Coverage(ScanSet.cone(cov.scan.enclosing_angle), F0, (0.95 * F0, 1.05 * F0))
    assert cone.disc_radius == pytest.approx(r_enc)
    ring = np.asarray(poly.exterior.coords)
    assert np.hypot(ring[:, 0], ring[:, 1]).max() <= r_enc + 1e-4  # polygon tolerance
    assert poly.area < 0.75 * math.pi * r_enc**2
    # and sample by sample on an engine's grid
    eng_s = FFTPatternEngine((8, 8), (0.5 * LAM, 0.5 * LAM), LAM, region_map=RegionMap(cov))
    eng_c = FFTPatternEngine((8, 8), (0.5 * LAM, 0.5 * LAM), LAM, region_map=RegionMap(cone))
    assert np.all(eng_s.region.weight <= eng_c.region.weight)
    assert eng_s.region.total_weight < eng_c.region.total_weight


def test_cone_over_a_band_is_the_disc_of_conventions():
    """A cone of half-angle θ over a band: the disc of radius ρ_hi + sin θ with phase
    steering, ρ_hi·(1 + sin θ) with time delay (math), and at f₀ alone the disc
    1 + sin θmax of conventions.md: the same weights as the engine's own disc."""
    s = math.sin(D(30))
    assert Coverage(ScanSet.cone(D(30)), F0, (0.9 * F0, 1.1 * F0)).disc_radius == pytest.approx(
        1.1 + s
    )
    assert Coverage(
        ScanSet.cone(D(30)), F0, (0.9 * F0, 1.1 * F0), "delay"
    ).disc_radius == pytest.approx(1.1 * (1 + s))
    plain = FFTPatternEngine((9, 11), (0.5 * LAM, 0.5 * LAM), LAM, D(30))
    mapped = FFTPatternEngine(
        (9, 11), (0.5 * LAM, 0.5 * LAM), LAM, region_map=RegionMap(Coverage.cone(D(30), F0))
    )
    np.testing.assert_array_equal(plain.region.weight, mapped.region.weight)
    np.testing.assert_array_equal(plain.region.w0, mapped.region.w0)


def _steered_peak(x, y, w0, f):
    """Where the array factor of phase shifters set at f₀ for w₀, observed at f, peaks:
    a direct sum over the elements (no engine), maximised on a fine grid then by Newton."""
    k, k0 = 2 * math.pi * f / 299792458.0, 2 * math.pi * F0 / 299792458.0

    def power(u, v):
        ph = k * (np.outer(u, x) + np.outer(v, y)) - k0 * (x * w0[0] + y * w0[1])[None, :]
        return np.abs(np.exp(1j * ph).sum(axis=1)) ** 2

    uu, vv = np.meshgrid(np.linspace(-1, 1, 401), np.linspace(-1, 1, 401))
    ok = np.hypot(uu, vv) < 1
    p = power(uu[ok], vv[ok])
    i = int(np.argmax(p))
    u, v = uu[ok][i], vv[ok][i]
    h = 1e-4
    for _ in range(30):  # Newton on the gradient, central differences
        g = np.array(
            [
                (power([u + h], [v])[0] - power([u - h], [v])[0]) / (2 * h),
                (power([u], [v + h])[0] - power([u], [v - h])[0]) / (2 * h),
            ]
        )
        huu = (power([u + h], [v])[0] - 2 * power([u], [v])[0] + power([u - h], [v])[0]) / h**2
        hvv = (power([u], [v + h])[0] - 2 * power([u], [v])[0] + power([u], [v - h])[0]) / h**2
        huv = (
            power([u + h], [v + h])[0]
            - power([u + h], [v - h])[0]
            - power([u - h], [v + h])[0]
            + power([u - h], [v - h])[0]
        ) / (4 * h * h)
        step = np.linalg.solve([[huu, huv], [huv, hvv]], -g)
        u, v = u + step[0], v + step[1]
        if np.hypot(*step) < 1e-12:
            break
    return u, v


def test_phase_steering_squints_as_sin_theta_scales_with_f0_over_f():
    """Phase shifters set at f₀ point the beam at sin θ = (f₀/f)·sin θ₀ in the plane of the
    command (common practice): the peak of the directly summed array factor at the band's
    edges, for a sector's corner beam, lies at w₀·f₀/f within 1e-6; the band table of a
    sector reports the same squint; time delay does not squint."""
    n = 12
    r, c = np.meshgrid(np.arange(n), np.arange(n), indexing="ij")
    x, y = (c.ravel() * 0.5 * LAM), (r.ravel() * 0.5 * LAM)
    az, el = D(40), D(15)
    w0 = np.array([math.cos(el) * math.sin(az), math.sin(el)])
    cov = Coverage(ScanSet.sector((D(-40), az), (D(0), el)), F0, (0.9 * F0, 1.1 * F0))
    for f in cov.band:
        u, v = _steered_peak(x, y, w0, f)
        expected = w0 * F0 / f
        assert (u, v) == pytest.approx(tuple(expected), abs=1e-6)
        assert np.allclose(cov.beam_direction(w0, f), expected)
        assert math.hypot(u, v) == pytest.approx(F0 / f * math.hypot(*w0), abs=1e-6)
    rows = band_table(Layout(x, y), F0, cov.band, 0.0, "phase", coverage=cov)
    corner = [
        r for r in rows if r["azimuth_command_deg"] == 40 and r["elevation_command_deg"] == 15
    ]
    for row in corner:
        f = row["frequency_ghz"] * 1e9
        s = math.sin(math.radians(row["theta_command_deg"]))
        assert math.sin(math.radians(row["theta_beam_deg"])) == pytest.approx(F0 / f * s, abs=1e-6)
    delay = Coverage(cov.scan, F0, cov.band, "delay")
    assert np.allclose(delay.beam_direction(w0, cov.band[1]), w0)
