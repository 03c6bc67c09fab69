"""Scan, band-edge and error analysis against the published forms (references.md rows 8, 10-12)."""

from __future__ import annotations

import json
import math

import numpy as np
import pytest

from thinning.analysis.stress import band_table, monte_carlo, scan_table
from thinning.cli import main
from thinning.engine.excitation import ErrorModel, amplitude_error_variance, error_floor
from thinning.geometry.layout import Layout

LAM = 0.03
F0 = 299792458.0 / LAM


def square(n, d=LAM / 2, keep=None):
    r, c = np.meshgrid(np.arange(n), np.arange(n), indexing="ij")
    m = np.ones(r.shape, bool) if keep is None else keep
    return Layout(x=c[m] * d, y=r[m] * d)


@pytest.fixture(scope="module")
def filled_24():
    return square(24)


def test_scan_loss_follows_cos_theta(filled_24):
    """Gain of a filled half-wavelength array with cos θ elements falls as cos θ₀ (the cell
    gain 4πA·cos θ/λ², conventions.md; Mailloux ch. 1, memory). 0.1 dB for 24 × 24."""
    rows = scan_table(filled_24, F0, math.radians(50), 1.0, steps=3, planes_deg=(0.0,))
    for r in rows:
        assert r["scan_loss_db"] == pytest.approx(
            -10 * math.log10(math.cos(math.radians(r["theta_deg"]))), abs=0.1
        )


def test_beam_broadening_law(filled_24):
    """Half-power width broadens as 1/cos θ₀ (references.md row 8; Hansen, memory): 1 %."""
    for r in scan_table(filled_24, F0, math.radians(50), 1.0, steps=3):
        assert r["hpbw_broadening"] == pytest.approx(r["cos_law"], rel=0.01)


def test_phase_steering_squints_and_delay_does_not():
    """Phase shifters set at f₀: sin θ = (f₀/f)·sin θ₀; true time delay: no squint (the squint
    law, references.md row 8 context; math)."""
    lay = square(10)
    band = (0.9 * F0, 1.1 * F0)
    for r in band_table(lay, F0, band, math.radians(40), "phase"):
        f = r["frequency_ghz"] * 1e9
        expected = math.degrees(math.asin(F0 / f * math.sin(math.radians(r["theta_command_deg"]))))
        assert r["theta_beam_deg"] == pytest.approx(expected, abs=1e-3)
    for r in band_table(lay, F0, band, math.radians(40), "delay"):
        assert r["squint_deg"] == pytest.approx(0.0, abs=1e-9)


def test_grating_lobe_appears_at_the_upper_band_edge():
    """d = λ₀/2, scan 45°: grating-lobe-free while d/λ < 1/(1 + sin 45°) = 0.586 (references.md
    row 10); at 1.2 f₀, d/λ = 0.6, so a delay-steered beam at 45° shows one (PSL ≈ 0 dB)."""
    rows = band_table(square(12), F0, (0.8 * F0, 1.2 * F0), math.radians(45), "delay")
    top = [r for r in rows if r["frequency_ghz"] > F0 / 1e9 * 1.1 and r["theta_command_deg"] == 45]
    assert top[0]["grating_lobe"] is True and top[0]["psl_db"] > -1.0
    assert not any(r["grating_lobe"] for r in rows if r["frequency_ghz"] <= F0 / 1e9 * 1.0001)


@pytest.mark.slow
def test_random_error_asl_matches_published_floor():
    """Mean ASL under random amplitude and phase errors ≈ (δ² + φ²)/(η_a·N) (Mailloux ch. 7,
    memory; references.md row 11), for a 40 × 40 array with separable −40 dB Taylor weights
    (scipy.signal.windows.taylor) whose own sidelobes lie far below the error floor.
    Within 1 dB (the form is an approximation; the tolerance of the issue)."""
    from scipy.signal.windows import taylor

    n = 40
    w1 = taylor(n, nbar=5, sll=40, norm=False)
    r, c = np.meshgrid(np.arange(n), np.arange(n), indexing="ij")
    lay = Layout(x=c.ravel() * LAM / 2, y=r.ravel() * LAM / 2, amplitude=np.outer(w1, w1).ravel())
    model = ErrorModel(amplitude_db=1.0, phase_deg=10.0)
    mc = monte_carlo(lay, F0, 0.0, model, trials=40, seed=2)
    floor = error_floor(len(lay), lay.weights, model)
    assert mc["asl_db"]["nominal"] < 10 * math.log10(floor) - 8  # the errors dominate
    assert mc["asl_db"]["mean"] == pytest.approx(10 * math.log10(floor), abs=1.0)
    nominal = 10 ** (mc["asl_db"]["nominal"] / 10)
    assert mc["asl_db"]["mean"] == pytest.approx(10 * math.log10(nominal + floor), abs=1.0)


def test_failure_form():
    """K of N elements failed: [(1 − P)]/(P·η·N) (references.md row 11, memory): 1 dB."""
    lay = square(24)
    model = ErrorModel(failures=144)  # P = 0.75
    mc = monte_carlo(lay, F0, 0.0, model, trials=60, seed=3)
    n = len(lay)
    p = 0.75
    assert error_floor(n, np.ones(n), model) == pytest.approx((1 - p) / (p * n))
    nominal = 10 ** (mc["asl_db"]["nominal"] / 10)
    assert mc["asl_db"]["mean"] == pytest.approx(
        10 * math.log10(nominal + (1 - p) / (p * n)), abs=1.0
    )


def test_quantisation_floor():
    """3-bit phase shifters, decorrelated: σ² = π²/(3·2^{2B}) (Miller 1964, memory; row 12):
    the mean ASL of a 24 × 24 array rises to nominal + σ²/N within 1 dB, and the variance
    formula equals the uniform-error variance (2π/2^B)²/12 exactly (math)."""
    b = 3
    assert math.pi**2 / (3 * 4**b) == pytest.approx((2 * math.pi / 2**b) ** 2 / 12)
    lay = square(24)
    mc = monte_carlo(lay, F0, 0.0, ErrorModel(phase_bits=b), trials=60, seed=4)
    nominal = 10 ** (mc["asl_db"]["nominal"] / 10)
    expected = nominal + math.pi**2 / (3 * 4**b) / len(lay)
    assert mc["asl_db"]["mean"] == pytest.approx(10 * math.log10(expected), abs=1.0)


def test_amplitude_error_variance_is_lognormal_second_moment():
    """δ² = E[(10^{ε/20} − 1)²], ε ~ N(0, S²): against a 10⁶-sample Monte Carlo (math), 1 %."""
    rng = np.random.default_rng(0)
    eps = rng.normal(0, 1.5, 1_000_000)
    assert amplitude_error_variance(1.5) == pytest.approx(
        np.mean((10 ** (eps / 20) - 1) ** 2), rel=0.01
    )


def test_no_errors_reproduce_the_nominal_layout(filled_24):
    """Zero errors: every trial equals the nominal figures (math)."""
    mc = monte_carlo(filled_24, F0, 0.0, ErrorModel(), trials=5, seed=0)
    assert mc["psl_db"]["median"] == pytest.approx(mc["psl_db"]["nominal"], abs=1e-3)
    assert mc["asl_db"]["mean"] == pytest.approx(mc["asl_db"]["nominal"], abs=1e-6)


def test_stress_cli_json(tmp_path, capsys):
    p = tmp_path / "l.csv"
    rng = np.random.default_rng(1)
    keep = rng.random((12, 12)) < 0.6
    lay = square(12, 15.0e-3, keep)
    p.write_text(
        "x_mm,y_mm\n"
        + "".join(f"{x * 1e3:.6f},{y * 1e3:.6f}\n" for x, y in zip(lay.x, lay.y, strict=True))
    )
    code = main(
        [
            "stress",
            str(p),
            "--freq-ghz",
            "10",
            "--scan-max-deg",
            "30",
            "--band-ghz",
            "9:11",
            "--phase-error-deg",
            "5",
            "--phase-bits",
            "4",
            "--failures",
            "3",
            "--trials",
            "20",
            "--json",
        ]
    )
    out = capsys.readouterr()
    assert code == 0, out.err
    r = json.loads(out.out)
    assert set(r["psl_db"]) >= {"median", "p90"} and "mean" in r["asl_db"]
    assert isinstance(r["expected_asl_db"], float) and r["scan"] and r["band"]
    code = main(["stress", str(p), "--freq-ghz", "10", "--failures", "1000"])
    err = capsys.readouterr().err
    assert code == 1 and "failures" in err and len(err.strip().splitlines()) == 1
