"""``thinning score``: the contract of conventions.md, and clean refusal of bad input."""

from __future__ import annotations

import json
import math
import subprocess
import sys

import pytest

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
