"""A design for a sector over a band under a mask, end to end: the figures of layout.json,
``score --spec`` and ``stress --spec`` agree (identities: the same functions on the same
inputs), and the report shows the verdicts, the mask and the sector's beams."""

from __future__ import annotations

import json
import math

import pytest
from helpers import run_cli, small_spec, write_spec

SECTOR = """
[band]
ghz = [9.6, 10.4]
[requirements]
psl_db = -10.0
hpbw_max_deg = 30.0
mask = [{theta_deg = [20.0, 90.0], phi_deg = [200.0, 340.0], level_db = -13.0}]
"""


def _table(path):
    """An invented embedded pattern: 5 dBi·cos^1.2 θ on a 5° × 45° grid."""
    rows = ["theta_deg,phi_deg,gain_dbi"]
    for t in range(0, 91, 5):
        for p in range(0, 360, 45):
            c = max(math.cos(math.radians(t)), 1e-6)
            rows.append(f"{t},{p},{max(5.0 + 12.0 * math.log10(c), -40.0):.4f}")
    path.write_text("\n".join(rows) + "\n")


@pytest.fixture(scope="module")
def sector_run(tmp_path_factory):
    tmp = tmp_path_factory.mktemp("sector")
    _table(tmp / "element.csv")
    text = small_spec("genetic", 600, SECTOR)
    text = text.replace(
        "[scan]\nmax_deg = 10.0\n",
        "[scan]\nazimuth_deg = [-30.0, 30.0]\nelevation_deg = [0.0, 10.0]\n",
    )
    text = text.replace("[array]\n", '[array]\nelement_pattern = "element.csv"\n', 1)
    spec = write_spec(tmp, text)
    from thinning.cli import main

    assert main(["design", str(spec), "--out", str(tmp / "out"), "--quiet"]) == 0
    return tmp, spec


def test_layout_json_carries_the_scan_set_band_mask_and_verdicts(sector_run):
    """The record names the sector, the band, the mask's worst point and the embedded gain,
    and judges every requirement (margin = required − achieved, met = margin ≥ 0)."""
    tmp, _ = sector_run
    m = json.loads((tmp / "out" / "layout.json").read_text())
    assert m["scan_set"] == {
        "kind": "sector",
        "azimuth_deg": [-30.0, 30.0],
        "elevation_deg": [0.0, 10.0],
    }
    assert m["band_ghz"] == [9.6, 10.4] and m["steering"] == "phase"
    assert set(m["requirements"]) == {"psl_db", "hpbw_max_deg", "mask"}
    mask = m["mask"]
    assert mask["margin_db"] == pytest.approx(mask["limit_db"] - mask["level_db"], abs=1e-5)
    assert -30.0 <= mask["beam"]["azimuth_deg"] <= 30.0
    assert 9.6 <= mask["frequency_ghz"] <= 10.4
    assert m["gain_dbi"] == pytest.approx(5.0 + 10 * math.log10(40), abs=1e-6)
    assert m["scan_loss_max_db"] > 0
    for v in m["requirements"].values():
        assert v["met"] is (v["margin_db"] >= 0)


def test_score_with_the_spec_gives_the_design_figures(sector_run, capsys):
    """``score --spec`` takes the sector, band, mask and element pattern from the spec: the
    same figures as the design's layout.json (an identity; 1e-6 for the rounding)."""
    tmp, spec = sector_run
    meta = json.loads((tmp / "out" / "layout.json").read_text())
    code, out, err = run_cli(capsys, "score", tmp / "out" / "layout.csv", "--spec", spec, "--json")
    assert code == 0, err
    r = json.loads(out)
    for key in ("psl_db", "asl_db", "hpbw_widest_deg", "gain_dbi", "directivity_dbi"):
        assert r[key] == pytest.approx(meta[key], abs=1e-6)
    assert r["mask"]["margin_db"] == pytest.approx(meta["mask"]["margin_db"], abs=1e-6)
    assert r["requirements"] == meta["requirements"]  # the verdicts too
    code, out, err = run_cli(capsys, "score", tmp / "out" / "layout.csv", "--spec", spec)
    assert "the sidelobe mask by" in out and "HPBW <= 30 deg by" in out


def test_stress_with_the_spec_judges_the_same_requirement(sector_run, capsys):
    """``stress --spec`` scans the sector's corners, edge midpoints and centre, and its
    nominal mask margin is the design's on the samples (the search's figure: the same
    limits on the same sampled pattern, 0.05 dB for the full-plane double-precision grid
    it uses)."""
    tmp, spec = sector_run
    meta = json.loads((tmp / "out" / "layout.json").read_text())
    code, out, err = run_cli(
        capsys,
        "stress",
        tmp / "out" / "layout.csv",
        "--spec",
        spec,
        "--trials",
        "4",
        "--phase-error-deg",
        "3",
        "--json",
    )
    assert code == 0, err
    r = json.loads(out)
    assert {(s["azimuth_deg"], s["elevation_deg"]) for s in r["scan"]} == {
        (a, e) for a in (-30.0, 0.0, 30.0) for e in (0.0, 5.0, 10.0)
    }
    assert r["band"][0]["frequency_ghz"] == 9.6
    nominal = r["mask_margin_db"]["nominal"]
    assert nominal == pytest.approx(meta["mask"]["sampled_margin_db"], abs=0.05)
    assert r["mask_margin_db"]["p10"] <= r["mask_margin_db"]["median"]


def test_report_shows_the_mask_and_the_sector(sector_run):
    """The report's verdict table has the mask, the mask's entries and worst point follow
    it, the worst beam is drawn against the mask, and the built-array tables list the
    sector's beams by azimuth and elevation."""
    tmp, _ = sector_run
    html = (tmp / "out" / "report.html").read_text()
    assert "the sidelobe mask" in html
    assert "Sidelobe mask (levels relative to the peak of the beam being steered" in html
    assert "The worst beam against the sidelobe mask" in html
    assert "azimuth [°]" in html and "elev. [°]" in html
