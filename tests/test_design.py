"""Spec validation and ``thinning design``: exact budgets, determinism, limits, clean failure."""

from __future__ import annotations

import json
import os
import signal
import subprocess
import sys
import time

import numpy as np
import pytest
from helpers import run_cli, small_spec, write_spec

from thinning.errors import GeometryError, SpecError
from thinning.io.layout_csv import read_layout_csv
from thinning.search import run_method
from thinning.spec import load_spec, parse_spec

SMALL = small_spec(evaluations=600)


write = write_spec
run = run_cli


# -- validation ------------------------------------------------------------------------------
@pytest.mark.parametrize(
    "change,needle",
    [
        (("elements = 40", "elements = 4000"), "budget.elements"),
        (("elements = 40", "elements = 40\nfill = 0.5"), "budget"),
        (("spacing_mm = [15.0, 15.0]", "spacing_mm = [-15.0, 15.0]"), "array.spacing_mm"),
        (("frequency_ghz = 10.0", 'frequency_ghz = "ten"'), "array.frequency_ghz"),
        (("frequency_ghz = 10.0", "frequency_ghz = nan"), "array.frequency_ghz"),
        (('method = "random"', 'method = "annealing"'), "search.method"),
        (("seed = 4", "seed = 4\ncolour = 1"), "search.colour"),
        (("max_deg = 10.0", "max_deg = 95.0"), "scan.max_deg"),
        (
            (
                "[[0, 0], [150, 0], [150, 120], [0, 120]]",
                "[[0, 0], [150, 120], [150, 0], [0, 120]]",
            ),
            "self-intersection",
        ),
        (
            ("[[0, 0], [150, 0], [150, 120], [0, 120]]", "[[1, 1], [2, 1], [2, 2], [1, 2]]"),
            "no lattice site",
        ),
        (('lattice = "rectangular"', 'lattice = "hexagonal"'), "array.lattice"),
        (("elements = 40", "elements = 40.5"), "budget.elements"),
    ],
)
def test_bad_spec_refused_with_one_line_and_no_output(capsys, tmp_path, change, needle):
    """Each problem: exit 1, one stderr line naming the file and the key, no output folder."""
    spec = write(tmp_path, SMALL.replace(*change))
    out = tmp_path / "out"
    code, stdout, err = run(capsys, "design", spec, "--out", out)
    lines = err.strip().splitlines()
    assert code == 1 and stdout == ""
    assert len(lines) == 1 and "spec.toml" in lines[0] and needle in lines[0], lines
    assert not out.exists()


def test_missing_and_broken_files(capsys, tmp_path):
    code, _, err = run(capsys, "design", tmp_path / "nope.toml", "--out", tmp_path / "o")
    assert code == 1 and "nope.toml: no such file" in err
    code, _, err = run(capsys, "design", write(tmp_path, "[array\nx=1"), "--out", tmp_path / "o")
    assert code == 1 and "not valid TOML" in err and len(err.strip().splitlines()) == 1
    assert not (tmp_path / "o").exists()


def test_fill_fraction_and_grating_lobe_warning(tmp_path):
    """fill = 0.5 of 99 sites → 50 elements (round half to even of 49.5); a 30 mm pitch at
    10 GHz (d/λ = 1.0) lets grating lobes in at broadside (references.md row 10)."""
    spec = parse_spec(__import__("tomllib").loads(SMALL.replace("elements = 40", "fill = 0.5")))
    assert spec.problem().elements == round(0.5 * 99)
    wide = SMALL.replace("[15.0, 15.0]", "[30.0, 30.0]")
    assert any("grating lobes" in w for w in parse_spec(__import__("tomllib").loads(wide)).warnings)


def test_empty_aperture_is_a_geometry_error(tmp_path):
    spec = load_spec(
        write(
            tmp_path,
            SMALL.replace(
                "[[0, 0], [150, 0], [150, 120], [0, 120]]", "[[1, 1], [2, 1], [2, 2], [1, 2]]"
            ),
        )
    )
    with pytest.raises(GeometryError, match="no lattice site"):
        spec.problem()


def test_symmetry_budget_that_cannot_be_met(tmp_path):
    """Mirror-x pairs on a 10-site line (all sites paired): an odd budget is impossible."""
    text = """
[array]
frequency_ghz = 1.0
lattice = "linear"
spacing_mm = 150.0
[aperture]
sites = 10
[budget]
elements = 5
[constraints]
symmetry = "mirror-x"
"""
    with pytest.raises(SpecError, match="cannot be met exactly"):
        load_spec(write(tmp_path, text)).problem()


# -- the design run --------------------------------------------------------------------------
def test_design_writes_exact_budget_and_is_deterministic(capsys, tmp_path):
    spec = write(tmp_path, SMALL)
    for k in (1, 2):
        code, out, err = run(capsys, "design", spec, "--out", tmp_path / f"d{k}", "--quiet")
        assert code == 0, err
    a = (tmp_path / "d1" / "layout.csv").read_bytes()
    assert a == (tmp_path / "d2" / "layout.csv").read_bytes()
    lay = read_layout_csv(tmp_path / "d1" / "layout.csv")
    assert len(lay) == 40
    meta = json.loads((tmp_path / "d1" / "layout.json").read_text())
    for key in (
        "psl_db",
        "asl_db",
        "directivity_dbi",
        "pi_n_dbi",
        "expected_asl_db",
        "hpbw_deg",
        "grating_lobes",
        "method",
        "seed",
        "evaluations",
        "runtime_s",
        "version",
        "spec",
        "history",
        "spec_digest_sha256",
    ):
        assert key in meta, key
    assert meta["evaluations"] == 600 and meta["elements"] == 40 and meta["method"] == "random"
    assert meta["history"][-1]["evaluations"] == 600


def test_workers_give_the_same_result(tmp_path):
    """Evaluation is cut into fixed batches, so 1 or 2 processes give identical results."""
    spec = load_spec(write(tmp_path, SMALL))
    p = spec.problem()
    a = run_method(p, "random", 5, {}, max_evaluations=256, workers=1)
    b = run_method(p, "random", 5, {}, max_evaluations=256, workers=2)
    assert np.array_equal(a.mask, b.mask) and a.psl_db == b.psl_db


def test_time_limit_keeps_the_best(tmp_path):
    spec = load_spec(write(tmp_path, SMALL))
    r = run_method(spec.problem(), "random", 1, {}, max_evaluations=10**9, time_limit_s=0.3)
    assert r.stopped_by == "time" and r.evaluations > 0 and r.mask.sum() == 40


def test_interrupt_keeps_the_best(tmp_path):
    """A KeyboardInterrupt mid-search (here raised from the progress callback) ends the run
    with the best layout so far."""
    spec = load_spec(write(tmp_path, SMALL))

    def progress(p):
        if p["evaluations"] >= 128:
            raise KeyboardInterrupt

    import thinning.search as search

    tracker_cls = search.Tracker

    class Fast(tracker_cls):
        def __init__(self, *a, **k):
            super().__init__(*a, **k)
            self.progress_every_s = 0.0

    search.Tracker = Fast
    try:
        r = run_method(spec.problem(), "random", 1, {}, max_evaluations=10**6, progress=progress)
    finally:
        search.Tracker = tracker_cls
    assert r.stopped_by == "interrupt" and 128 <= r.evaluations < 10**6 and r.mask.sum() == 40


def test_ctrl_c_on_the_command_writes_the_best_so_far(tmp_path):
    """SIGINT to a running ``thinning design``: the best layout so far in complete files,
    exit status 130 and "interrupted" in the summary line, so that scripts can tell
    (common practice: 128 + SIGINT); layout.json says the run is not deterministic."""
    spec = write(tmp_path, SMALL.replace("evaluations = 600", "evaluations = 100000000"))
    out = tmp_path / "run"
    proc = subprocess.Popen(
        [sys.executable, "-m", "thinning", "design", str(spec), "--out", str(out)],
        stdout=subprocess.PIPE,
        stderr=subprocess.PIPE,
        text=True,
    )
    # interrupt once the search has evaluated layouts (its first progress line; the first
    # run after an install compiles the evaluation loops first)
    lines = []
    deadline = time.time() + 120
    while time.time() < deadline:
        line = proc.stderr.readline()
        lines.append(line)
        if "evaluations (" in line or not line:
            break
    proc.send_signal(signal.SIGINT)
    stdout, stderr = proc.communicate(timeout=120)
    stderr = "".join(lines) + stderr
    assert proc.returncode == 130, stderr
    assert "interrupted" in stdout.splitlines()[0]
    assert len(read_layout_csv(out / "layout.csv")) == 40
    meta = json.loads((out / "layout.json").read_text())
    assert meta["stopped_by"] == "interrupt" and meta["deterministic"] is False
    assert not [f for f in os.listdir(out) if f.endswith(".tmp") or f.startswith(".thinning")]


def test_robust_design_optimises_the_percentile_psl(tmp_path):
    """Robust mode scores layouts by the 90th-percentile PSL over common error draws: among
    the same random candidates (same seed), the robust pick's percentile PSL is no worse than
    the nominal pick's under those draws (definition), and layout.json states the model, the
    runtime cost and a fresh 200-trial check."""
    text = SMALL + "[robust]\nphase_error_deg = 8.0\nphase_bits = 4\nfailures = 2\ntrials = 16\n"
    rob = load_spec(write(tmp_path, text, "rob.toml"))
    nom = load_spec(write(tmp_path, SMALL, "nom.toml"))
    pr, pn = rob.problem(), nom.problem()
    a = run_method(pr, "random", 9, {}, max_evaluations=256)
    b = run_method(pn, "random", 9, {}, max_evaluations=256)
    pa = pr.evaluate(pr.genome_of_mask(a.mask)[None]).psl_db[0]
    pb = pr.evaluate(pr.genome_of_mask(b.mask)[None]).psl_db[0]
    assert pa <= pb + 1e-9
    from thinning.analysis.design import run_design

    res = run_design(rob, tmp_path / "out")
    r = res.metrics["robust"]
    assert r["model"]["failures"] == 2 and r["trials_per_evaluation"] == 16
    assert r["cost_ratio_vs_nominal"] > 1
    assert set(r["check_200_trials"]["psl_db"]) >= {"median", "p90"}
