"""Embedded element patterns from a table: reading, checks, interpolation, and the figures
they enter (directivity, gain, scan loss, masks in dBi); the new spec keys' checks."""

from __future__ import annotations

import math

import numpy as np
import pytest
from helpers import run_cli, small_spec, write_spec

from thinning.engine import metrics
from thinning.engine.element import CosineElement, TabulatedElement
from thinning.engine.mask import MaskEntry, SidelobeLimits
from thinning.errors import InputError, SpecError
from thinning.io.element_csv import read_element_csv
from thinning.spec import load_spec

LAM = 0.03


def _cos_rows(q=1.0, step=1.0, phi_step=15.0, peak_dbi=None):
    """Rows of a table of g(θ) = 2(q + 1)·cosᵠθ (the cosᵠ model's own gain)."""
    peak = 2 * (q + 1) if peak_dbi is None else 10 ** (peak_dbi / 10)
    rows = ["theta_deg,phi_deg,gain_dbi"]
    for t in np.arange(0, 90 + step / 2, step):
        for p in np.arange(0, 360, phi_step):
            g = peak * max(math.cos(math.radians(t)), 0.0) ** q
            rows.append(f"{t:g},{p:g},{max(10 * math.log10(max(g, 1e-15)), -150):.9f}")
    return rows


def _write(tmp_path, rows, name="element.csv"):
    p = tmp_path / name
    p.write_text("\n".join(rows) + "\n")
    return p


@pytest.mark.parametrize("steer", [(0.0, 0.0), (0.35, -0.2)])
def test_cos_table_gives_the_directivity_of_the_cos_model(tmp_path, steer):
    """A table of 4·cos θ on a 1° × 15° grid gives the directivity of the built-in q = 1
    model (math: the kernel of the table's harmonics is the Sonine integral of cos θ,
    and directivity does not depend on the pattern's scale) within 0.005 dB (the table's
    linear interpolation of cos θ over 1°), broadside and steered."""
    el = TabulatedElement.from_table(read_element_csv(_write(tmp_path, _cos_rows())))
    rng = np.random.default_rng(4)
    grid = (rng.random((18, 22)) < 0.5).astype(float)
    pitch = (0.5 * LAM, 0.5 * LAM)
    model = metrics.directivity_grid(grid, pitch, LAM, 1.0, steer)
    table = metrics.directivity_grid(grid, pitch, LAM, 1.0, steer, element=el)
    assert 10 * math.log10(table) == pytest.approx(10 * math.log10(model), abs=0.005)
    x, y = np.nonzero(grid)[1] * pitch[0], np.nonzero(grid)[0] * pitch[1]
    pts = metrics.directivity_points(x, y, np.ones(x.size), LAM, 1.0, steer, element=el)
    assert 10 * math.log10(pts) == pytest.approx(10 * math.log10(model), abs=0.005)


def test_table_interpolates_on_the_sphere(tmp_path):
    """At the table's nodes the gain is the table's; between them it is bilinear in (θ, φ)
    on the linear gain, φ wrapping from 345° back to 0° (the documented interpolation);
    nothing behind the ground plane."""
    rows = ["theta_deg,phi_deg,gain_dbi"]
    for t in (0, 30, 60, 90):
        for p in (0, 90, 180, 270):
            rows.append(f"{t},{p},{(5.0 - t / 10 + p / 100) if t else 5.0:.6f}")
    el = TabulatedElement.from_table(read_element_csv(_write(tmp_path, rows)))
    t, p = math.radians(30), math.radians(270)
    w = (math.sin(t) * math.cos(p), math.sin(t) * math.sin(p))
    assert float(el.gain_dbi(*w)) == pytest.approx(5.0 - 3.0 + 2.7, abs=1e-9)
    g = lambda tt, pp: 10 ** ((5.0 - tt / 10 + pp / 100) / 10)  # noqa: E731
    mid = (g(30, 270) + g(60, 270) + g(30, 0) + g(60, 0)) / 4  # φ = 315° wraps to 0°
    t, p = math.radians(45), math.radians(315)
    w = (math.sin(t) * math.cos(p), math.sin(t) * math.sin(p))
    assert float(el.gain(*w)) == pytest.approx(mid, rel=1e-9)
    assert float(el.gain_at(math.radians(120), 0.0)) == 0.0


def test_embedded_gain_scan_loss_and_dbi_mask(tmp_path):
    """Gain with an embedded pattern is element gain plus array gain, g(w₀) + 10·log₁₀ N
    (the embedded-element relation, math for identical embedded patterns); the scan loss is
    g(0) − g(w₀) ≥ 0; a level_dbi entry L limits the pattern relative to the beam's peak to
    L − g(w) − 10·log₁₀ N (math: the same relation)."""
    from thinning.analysis.scan_figures import gain_figures
    from thinning.engine.coverage import Coverage, ScanSet

    el = TabulatedElement.from_table(read_element_csv(_write(tmp_path, _cos_rows(1.2, 5.0))))
    cov = Coverage(ScanSet.sector((math.radians(-40), math.radians(40)), (0.0, 0.0)), 10e9)
    f = gain_figures(el, np.ones(100), cov)
    g0 = 10 * math.log10(2 * 2.2)
    assert f["gain_dbi"] == pytest.approx(g0 + 20.0, abs=1e-6)
    edge = 10 * math.log10(2 * 2.2 * math.cos(math.radians(40)) ** 1.2)
    assert f["scan_loss_max_db"] == pytest.approx(g0 - edge, abs=0.01)  # 5° table at 40°
    assert f["scan_loss_max_db"] > 0
    lim = SidelobeLimits(
        (MaskEntry((0.0, math.pi / 2), (0.0, 2 * math.pi), 8.0, True),), element=el, elements=100
    )
    s = math.sin(math.radians(30))
    assert float(lim.at(s, 0.0)) == pytest.approx(8.0 - float(el.gain_dbi(s, 0.0)) - 20.0, abs=1e-9)


@pytest.mark.parametrize(
    "rows,where,what",
    [
        (["theta_deg,phi_deg,gain_dbi", "0,0,nan"], "line 2, column gain_dbi", "not finite"),
        (["theta_deg,phi_deg,gain_dbi", "0,0,x"], "line 2, column gain_dbi", "not a number"),
        (["theta_deg,phi_deg,gain_dbi", "200,0,1"], "line 2, column theta_deg", "outside"),
        (["theta_deg,phi,gain_dbi", "0,0,1"], "line 1", "lacks phi_deg"),
        (["theta_deg,phi_deg,gain_dbi", "0,0,1", "0,0,2"], "line 3", "repeats line 2"),
        (None, "column phi_deg", "no cut between"),
        (None, "column theta_deg", "must reach 90"),
        (None, "theta 30, phi 90", "full grid"),
    ],
)
def test_bad_tables_give_one_line(tmp_path, rows, where, what):
    """Every problem of a table names the file, the line or column and the problem
    (house rule; the checks of the module docstring)."""
    if rows is None:
        rows = _cos_rows(1.0, 30.0, 90.0)
        if what == "no cut between":
            rows = [r for r in rows if r.split(",")[1] not in ("180", "270")]
        elif what == "must reach 90":
            rows = [r for r in rows if not r.startswith(("90,", "60,"))]
        else:
            rows = [r for r in rows if not r.startswith("30,90,")]
    path = _write(tmp_path, rows)
    with pytest.raises(InputError) as err:
        read_element_csv(path)
    msg = str(err.value)
    assert str(path) in msg and where in msg and what in msg and "\n" not in msg


def test_phi_360_repeating_phi_0_is_accepted(tmp_path):
    """An export listing φ = 360° beside φ = 0° with the same gain is one direction."""
    rows = _cos_rows(1.0, 30.0, 90.0)
    rows += [r.replace(",0,", ",360,", 1) for r in rows[1:] if r.split(",")[1] == "0"]
    t = read_element_csv(_write(tmp_path, rows))
    assert list(t.phi_deg) == [0.0, 90.0, 180.0, 270.0]


def test_cosine_element_gain_is_its_directivity():
    """2(q + 1)·cosᵠθ integrates to 4π over the hemisphere (math), 1 for q = 0."""
    th = np.linspace(0, math.pi / 2, 20001)
    for q in (0.5, 1.0, 2.0):
        g = CosineElement(q).gain(np.sin(th), 0.0)
        assert np.trapezoid(g * np.sin(th), th) * 2 * math.pi == pytest.approx(4 * math.pi, 1e-6)
    assert float(CosineElement(0).gain(0.5, 0.5)) == 1.0


# -- the new spec keys --------------------------------------------------------------------------
@pytest.mark.parametrize(
    "extra,field,what",
    [
        ("[scan]\nazimuth_deg = [-10, 10]\n", "scan", "not both"),  # small_spec has max_deg
        ("[band]\nghz = [10.5, 11.0]\n", "band.ghz", "must hold"),
        ("[band]\nghz = [9.5, 10.5]\nsteering = 'swept'\n", "band.steering", "expected one"),
        ("[requirements]\nhpbw_max_deg = -1\n", "requirements.hpbw_max_deg", "must be >"),
        (
            "[requirements]\nmask = [{theta_deg = [0, 90]}]\n",
            "requirements.mask[0]",
            "exactly one of level_db",
        ),
        (
            "[requirements]\nmask = [{theta_deg = [0, 95], level_db = -20}]\n",
            "requirements.mask[0].theta_deg",
            "must be <= 90",
        ),
        (
            "[requirements]\nmask = [{theta_deg = [0, 90], phi_deg = [0, 400], level_db = -20}]\n",
            "requirements.mask[0].phi_deg",
            "more than 360",
        ),
        (
            "[requirements]\nmask = [{theta_deg = [0, 90], level = -20}]\n",
            "requirements.mask[0].level",
            "unknown key",
        ),
    ],
)
def test_bad_new_keys_give_one_line(tmp_path, extra, field, what):
    """A broken [scan], [band] or [requirements] key is named with its problem (house
    rule)."""
    text = small_spec(extra=extra)
    if extra.startswith("[scan]"):
        text = text.replace("[scan]\nmax_deg = 10.0\n", "[scan]\nmax_deg = 10.0\n" + extra[7:])
        text = text.replace(extra, "")
    p = write_spec(tmp_path, text)
    with pytest.raises(SpecError) as err:
        load_spec(p)
    assert field in str(err.value) and what in str(err.value)


def test_a_bad_element_table_stops_the_design_in_one_line(tmp_path, capsys):
    """``thinning design`` with a table that does not cover the hemisphere: exit 1, one
    line naming the table, no output folder (house rule)."""
    rows = [r for r in _cos_rows(1.0, 30.0, 90.0) if not r.startswith("90,")]
    _write(tmp_path, rows)
    text = small_spec().replace("[array]\n", '[array]\nelement_pattern = "element.csv"\n')
    spec = write_spec(tmp_path, text)
    code, out, err = run_cli(capsys, "design", spec, "--out", tmp_path / "out", "--quiet")
    assert code == 1 and "element.csv" in err and "Traceback" not in err
    assert len(err.strip().splitlines()) == 1
    assert not (tmp_path / "out").exists()
