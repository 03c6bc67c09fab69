"""``thinning score``: the contract of conventions.md, and clean refusal of bad input."""

from __future__ import annotations

import json
import math
import subprocess
import sys

import pytest
from helpers import TRI_PANEL

from thinning.cli import main

C_MM_GHZ = 299.792458  # speed of light [mm·GHz]


def write_csv(path, rows, header="id,x_mm,y_mm"):
    path.write_text(header + "\n" + "\n".join(",".join(str(v) for v in r) for r in rows) + "\n")
    return path


@pytest.fixture
def linear_csv(tmp_path):
    """A thinned half-wavelength linear array at 3 GHz (the check-contract case)."""
    lam = C_MM_GHZ / 3.0
    on = [i for i in range(64) if (i * 7) % 5 != 0]
    return write_csv(
        tmp_path / "linear.csv", [(k + 1, f"{i * lam / 2:.6f}", "0") for k, i in enumerate(on)]
    ), len(on)


def run(capsys, *args):
    code = main(list(args))
    out = capsys.readouterr()
    return code, out.out, out.err


def test_score_json_contract(capsys, linear_csv):
    """Keys and types of conventions.md; directivity exactly N for q = 0 (references.md row 1)."""
    path, n = linear_csv
    code, out, err = run(
        capsys, "score", str(path), "--freq-ghz", "3", "--element-exponent", "0", "--json"
    )
    assert code == 0, err
    m = json.loads(out)
    assert m["elements"] == n
    for key in ("psl_db", "asl_db", "directivity_dbi", "pi_n_dbi", "expected_asl_db"):
        assert isinstance(m[key], float), key
    assert isinstance(m["hpbw_deg"], list) and len(m["hpbw_deg"]) == 2
    assert isinstance(m["grating_lobes"], bool) and m["grating_lobes"] is False
    assert m["directivity_dbi"] == pytest.approx(10 * math.log10(n), abs=1e-4)
    assert m["psl_db"] < 0 and m["asl_db"] < m["psl_db"]
    # sites: the lattice between the outermost elements (i = 1 … 63; 0 is off)
    assert m["lattice"]["kind"] == "linear" and m["sites"] == 63


def test_score_table(capsys, linear_csv):
    path, _ = linear_csv
    code, out, _ = run(capsys, "score", str(path), "--freq-ghz", "3", "--scan-max-deg", "20")
    assert code == 0
    assert "PSL (refined)" in out and "directivity" in out and "grating lobes" in out


def test_python_dash_m_runs(linear_csv):
    """``python -m thinning`` is the same command."""
    path, n = linear_csv
    r = subprocess.run(
        [sys.executable, "-m", "thinning", "score", str(path), "--freq-ghz", "3", "--json"],
        capture_output=True,
        text=True,
        timeout=120,
    )
    assert r.returncode == 0, r.stderr
    assert json.loads(r.stdout)["elements"] == n


@pytest.mark.parametrize(
    "content,needle",
    [
        ("x_mm,y_mm\n0,0\nnot-a-number,1\n", "line 3"),
        ("x_mm,y_mm\n0,0\nnan,1\n", "line 3"),
        ("x_mm\n0\n", "y_mm"),
        ("", "empty"),
        ("x_mm,y_mm\n0,0\n0,0\n", "line 3"),
    ],
)
def test_bad_csv_refused_in_one_line(capsys, tmp_path, content, needle):
    """Bad input: non-zero exit, one line on stderr naming the file and the problem."""
    p = tmp_path / "bad.csv"
    p.write_text(content)
    code, out, err = run(capsys, "score", str(p), "--freq-ghz", "3", "--json")
    assert code != 0 and out == ""
    lines = err.strip().splitlines()
    assert len(lines) == 1 and "bad.csv" in lines[0] and needle in lines[0]


def test_missing_file_and_bad_options(capsys, tmp_path, linear_csv):
    code, _, err = run(capsys, "score", str(tmp_path / "nope.csv"), "--freq-ghz", "3")
    assert code == 1 and "nope.csv" in err and len(err.strip().splitlines()) == 1
    path, _ = linear_csv
    for args in (
        ["--freq-ghz", "-3"],
        ["--freq-ghz", "nan"],
        ["--freq-ghz", "3", "--scan-max-deg", "95"],
        [],
    ):
        code, out, err = run(capsys, "score", str(path), *args)
        assert code == 2 and out == "" and len(err.strip().splitlines()) == 1


def test_subprocess_error_has_no_traceback(tmp_path):
    p = write_csv(tmp_path / "nan.csv", [(1, "0", "0"), (2, "nan", "1")])
    r = subprocess.run(
        [sys.executable, "-m", "thinning", "score", str(p), "--freq-ghz", "3"],
        capture_output=True,
        text=True,
        timeout=120,
    )
    assert r.returncode == 1 and "Traceback" not in r.stderr and "nan.csv" in r.stderr


# -- score --spec, the site count, one element, beamwidths, progress ----------------------------
SPEC = (
    'name = "score-check"\n'
    + TRI_PANEL
    + """[search]
method = "random"
seed = 2
evaluations = 200
oversampling = 5.0
"""
)


def _close(a, b, tol=1e-6) -> bool:
    """Equal, floats within ``tol`` (relative to 1 or the value), at any depth."""
    if isinstance(a, dict) and isinstance(b, dict):
        return a.keys() == b.keys() and all(_close(a[k], b[k], tol) for k in a)
    if isinstance(a, list) and isinstance(b, list):
        return len(a) == len(b) and all(_close(x, y, tol) for x, y in zip(a, b, strict=True))
    if isinstance(a, float) or isinstance(b, float):
        return a == pytest.approx(b, rel=tol, abs=tol)
    return a == b


def test_score_with_the_spec_gives_the_design_figures(tmp_path, capsys):
    """``score --spec`` takes the candidate sites (hole and edges included), frequency, scan,
    element pattern and oversampling from the spec, so every figure equals the design's
    layout.json (same function, same inputs: an identity; 1e-6 for the 6-decimal rounding of
    positions in the CSV). Without the spec the site count is the hull's, and is said so."""
    spec = tmp_path / "s.toml"
    spec.write_text(SPEC)
    out = tmp_path / "d"
    assert main(["design", str(spec), "--out", str(out), "--quiet"]) == 0
    capsys.readouterr()
    meta = json.loads((out / "layout.json").read_text())
    code, stdout, err = run(capsys, "score", str(out / "layout.csv"), "--spec", str(spec), "--json")
    assert code == 0, err
    got = json.loads(stdout)
    assert got["sites_basis"] == "sites" and got["sites"] == meta["candidate_sites"]
    # the grid fit's residual shows the CSV's 1 nm rounding of positions, nothing else
    assert got["lattice"].pop("fit_residual_um") <= 1e-3
    meta["lattice"].pop("fit_residual_um")
    for key, want in got.items():
        assert _close(meta[key], want), key
    code, stdout, _ = run(capsys, "score", str(out / "layout.csv"), "--freq-ghz", "10")
    assert code == 0
    assert "convex hull of its elements (assumed)" in stdout


def test_score_needs_a_frequency_or_a_spec(tmp_path, capsys, linear_csv):
    path, _ = linear_csv
    code, _, err = run(capsys, "score", str(path))
    assert code == 2 and "--freq-ghz" in err


def test_one_element_is_refused(tmp_path, capsys):
    """No figure of a one-element array means anything (no sidelobe region outside a beam
    that fills the sky, fill and thinning undefined): one clean line, exit 1."""
    p = write_csv(tmp_path / "one.csv", [(1, "0", "0")])
    code, out, err = run(capsys, "score", str(p), "--freq-ghz", "10", "--json")
    assert code == 1 and out == ""
    assert len(err.strip().splitlines()) == 1 and "one element" in err and "one.csv" in err


def test_linear_array_beamwidth_is_the_array_factor_in_both_planes():
    """One definition in both planes: the half-power width of the array factor. For a line
    along x it is 0.886·λ/(N·d) in u at broadside (references.md row 8, 1 % for N = 40) in
    the x-z plane, and there is none in the y-z plane, where the array factor of a line is
    constant (math); the element pattern's width (120° for cos θ) is no longer reported as
    if it were the array's."""
    from thinning.analysis.score import score_layout
    from thinning.geometry.layout import Layout

    lam = C_MM_GHZ / 10.0 * 1e-3
    n = 40
    r = score_layout(Layout([i * lam / 2 for i in range(n)], [0.0] * n), 10e9, 0.0, 1.0)
    want = 2 * math.degrees(math.asin(0.886 * lam / (n * lam / 2) / 2))
    assert r.hpbw_deg[0] == pytest.approx(want, rel=0.01)
    assert r.hpbw_deg[1] is None and r.hpbw_scan_deg[1] is None


def test_a_long_direct_summation_reports_its_stages(monkeypatch):
    """Off any grid the pattern is summed directly; above the work threshold each stage is
    reported before it starts."""
    import numpy as np

    import thinning.analysis.score as score_mod
    from thinning.geometry.layout import Layout

    rng = np.random.default_rng(0)
    lay = Layout(rng.uniform(0, 0.2, 60), rng.uniform(0, 0.15, 60))
    monkeypatch.setattr(score_mod, "DIRECT_PROGRESS_WORK", 1.0)
    stages = []
    r = score_mod.score_layout(lay, 10e9, 0.2, progress=stages.append)
    assert r.evaluation["engine"] == "direct"
    assert any("direct summation" in s for s in stages) and any("pairs" in s for s in stages)


# -- thinning sites ---------------------------------------------------------------------------
def test_sites_lists_the_ids_constraints_take(tmp_path, capsys):
    """The listed ids are the ones pin_ids / forbid_ids take: pinning ids 1 and 5 and
    forbidding 7 marks exactly those rows; positions match the spec's sites; the drawing
    (SVG, read back with the standard library's XML parser) has one circle and one id per
    site."""
    import csv
    import io
    import xml.etree.ElementTree as ET

    from thinning.spec import load_spec

    spec = tmp_path / "s.toml"
    spec.write_text(SPEC + "[constraints]\npin_ids = [1, 5]\nforbid_ids = [7]\n")
    code, out, err = run(capsys, "sites", str(spec))
    assert code == 0, err
    rows = list(csv.DictReader(io.StringIO(out)))
    sites = load_spec(spec).sites()
    assert [r["id"] for r in rows] == [str(i) for i in range(1, len(sites) + 1)]
    assert {r["id"] for r in rows if r["constraint"] == "pinned"} == {"1", "5"}
    assert {r["id"] for r in rows if r["constraint"] == "forbidden"} == {"7"}
    for r, x, y, row, col in zip(rows, sites.x, sites.y, sites.row, sites.col, strict=True):
        assert float(r["x_mm"]) == pytest.approx(x * 1e3, abs=1e-6)
        assert float(r["y_mm"]) == pytest.approx(y * 1e3, abs=1e-6)
        assert (int(r["row"]), int(r["col"])) == (row, col)
    out_dir = tmp_path / "s"
    code, out, err = run(capsys, "sites", str(spec), "--out", str(out_dir))
    assert code == 0, err
    assert (out_dir / "sites.csv").read_text() == "".join(
        line + "\n" for line in (out_dir / "sites.csv").read_text().splitlines()
    )
    root = ET.parse(out_dir / "sites.svg").getroot()
    ns = "{http://www.w3.org/2000/svg}"
    circles = root.find(f"{ns}g[@class='elements']").findall(f"{ns}circle")
    ids = [t.text for t in root.find(f"{ns}g[@class='ids']").findall(f"{ns}text")]
    assert len(circles) == len(sites) and ids == [str(i) for i in range(1, len(sites) + 1)]


# -- every option documented; the trial counts agree -------------------------------------------
def test_every_option_of_every_command_is_documented():
    """Each command has a row in the README's table, and each of its options a help text or a
    mention in that row (the README and the tool agree)."""
    from pathlib import Path

    from thinning.cli import _register, cli

    _register()
    readme = (Path(__file__).parent.parent / "README.md").read_text().splitlines()
    missing = []
    for name, cmd in cli.commands.items():
        assert cmd.help, name
        row = " ".join(line for line in readme if line.startswith(f"| `thinning {name} "))
        assert row, f"no row for {name} in the README's table of commands"
        for p in cmd.params:
            if getattr(p, "param_type_name", "") != "option":
                continue
            opt = max(p.opts, key=len)
            if not (p.help or opt in row):
                missing.append(f"{name} {opt}")
    assert not missing, missing


def test_stress_and_report_run_the_same_number_of_trials():
    from thinning.cli import _register, cli

    _register()
    trials = {
        name: next(p.default for p in cli.commands[name].params if p.name == "trials")
        for name in ("stress", "report")
    }
    assert trials["stress"] == trials["report"]
