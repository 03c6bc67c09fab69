"""``thinning sweep``: theory curves, the requirement, resume, and the Pareto front."""

from __future__ import annotations

import csv
import math

import numpy as np
import pytest
from helpers import small_spec

from thinning.analysis.sweep import parse_budgets, steinberg_median_peak
from thinning.cli import main
from thinning.errors import SpecError
from thinning.search.pareto import non_dominated

SPEC = small_spec(method="METHOD", extra="[requirements]\npsl_db = -12.0\n")


def write(tmp_path, method="random"):
    p = tmp_path / f"{method}.toml"
    p.write_text(SPEC.replace("METHOD", method))
    return p


def rows(path):
    with open(path, newline="") as f:
        return list(csv.DictReader(f))


def test_parse_budgets():
    assert parse_budgets("100:300:50", None, 400) == [100, 150, 200, 250, 300]
    assert parse_budgets("30,10,20", "0.5", 100) == [10, 20, 30, 50]
    for bad in ("a,b", "10:5", "1:10:0"):
        with pytest.raises(SpecError):
            parse_budgets(bad, None, 100) if bad != "10:5" else parse_budgets("5000", None, 100)


def test_steinberg_median_is_the_median_of_the_stated_distribution():
    """P(peak ≤ r) = (1 − e^{−r/ASL})^{n_s} equals 1/2 at the returned r (Steinberg 1972,
    references.md row 6, form from memory; the identity itself is math), and the median is
    close to ASL·ln(n_s/ln 2) for large n_s (row 6's approximate form, 1 %)."""
    asl, ns = 1e-3, 500.0
    r = steinberg_median_peak(asl, ns)
    assert (1 - math.exp(-r / asl)) ** ns == pytest.approx(0.5, rel=1e-12)
    assert r == pytest.approx(asl * math.log(ns / math.log(2)), rel=0.01)


def test_sweep_random_matches_theory_and_resumes(tmp_path, capsys):
    """Every budget of a random sweep has its ASL within 1.5 dB of the random-thinning
    expectation (references.md row 5); the requirement's answer is the smallest passing N;
    a rerun reuses every budget and gives the same sweep.csv."""
    spec = write(tmp_path)
    out = tmp_path / "sw"
    code = main(["sweep", str(spec), "--elements", "30:70:20", "--out", str(out), "--quiet"])
    text = capsys.readouterr()
    assert code == 0, text.err
    first = (out / "sweep.csv").read_bytes()
    rs = rows(out / "sweep.csv")
    assert [int(r["elements"]) for r in rs] == [30, 50, 70]
    for r in rs:
        assert abs(float(r["asl_db"]) - float(r["expected_asl_db"])) <= 1.5
        assert r["method_expected_asl_db"] == r["expected_asl_db"]
        assert (out / r["folder"] / "layout.csv").is_file()
    passing = [int(r["elements"]) for r in rs if r["meets_requirement"] == "True"]
    if passing:
        assert f"smallest budget meeting PSL <= -12 dB: {min(passing)} elements" in text.out
    assert (out / "sweep.png").read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
    assert 'id="answer"' in (out / "sweep.html").read_text()
    code = main(["sweep", str(spec), "--elements", "30:70:20", "--out", str(out), "--quiet"])
    again = capsys.readouterr().out
    assert code == 0 and "reused 3 budget(s)" in again
    assert (out / "sweep.csv").read_bytes() == first


def test_sweep_workers_give_the_same_csv(tmp_path, capsys):
    spec = write(tmp_path, "density")
    # the draws alone (no lobe-aimed swaps), so that their ASL can be held to row 5 below
    text = spec.read_text().replace('method = "density"', 'method = "density"\npolish = false')
    spec.write_text(text)
    for w, name in ((1, "a"), (2, "b")):
        assert (
            main(
                [
                    "sweep",
                    str(spec),
                    "--elements",
                    "30,60",
                    "--out",
                    str(tmp_path / name),
                    "--workers",
                    str(w),
                    "--quiet",
                ]
            )
            == 0
        )
    capsys.readouterr()
    a = [{k: v for k, v in r.items() if k != "runtime_s"} for r in rows(tmp_path / "a/sweep.csv")]
    b = [{k: v for k, v in r.items() if k != "runtime_s"} for r in rows(tmp_path / "b/sweep.csv")]
    assert a == b
    for r in a:  # density-tapered draws: within 1.5 dB of their own expectation (row 5)
        assert abs(float(r["asl_db"]) - float(r["method_expected_asl_db"])) <= 1.5


def test_pareto_front_is_non_dominated(tmp_path, capsys):
    """NSGA-II front: no point dominates another in (count, search PSL) (definition)."""
    spec = write(tmp_path, "pareto")
    out = tmp_path / "par"
    assert main(["sweep", str(spec), "--elements", "20:80:60", "--out", str(out), "--quiet"]) == 0
    capsys.readouterr()
    import json

    pts = []
    for r in rows(out / "sweep.csv"):
        meta = json.loads((out / r["folder"] / "layout.json").read_text())
        pts.append((int(r["elements"]), meta["search_psl_db"]))
        assert 20 <= int(r["elements"]) <= 80
    c = np.array([p[0] for p in pts])
    s = np.array([p[1] for p in pts])
    assert len(non_dominated(c, s)) == len(pts) >= 3


def test_non_dominated_helper():
    idx = non_dominated([1, 2, 2, 3, 4], [-5.0, -6.0, -5.5, -6.0, -7.0])
    assert list(idx) == [0, 1, 4]


def test_bad_budget_refused_without_output(tmp_path, capsys):
    spec = write(tmp_path)
    out = tmp_path / "x"
    code = main(["sweep", str(spec), "--elements", "10,500", "--out", str(out)])
    err = capsys.readouterr().err
    assert code == 1 and "500" in err and len(err.strip().splitlines()) == 1
    assert not out.exists()
