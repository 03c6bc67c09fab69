"""A run that can be trusted: the output folder checked first, all-or-nothing file sets with
their digests, honest reproducibility, interrupted runs, requirement verdicts, and the spec
checks that used to let bad input through."""

from __future__ import annotations

import errno
import hashlib
import json
import os
import sys
import time
import tomllib

import numpy as np
import pytest
from helpers import run_cli, small_spec, write_spec

import thinning.analysis.design as design_mod
from thinning.analysis.requirements import judge
from thinning.errors import OutputError, SpecError
from thinning.io import fileset
from thinning.search import COMPILE_NOTE, run_method
from thinning.spec import load_spec, parse_spec

SMALL = small_spec(evaluations=300, extra="[requirements]\npsl_db = -10.0\nasl_db = -60.0\n")


def write(tmp_path, text=SMALL, name="spec.toml"):
    return write_spec(tmp_path, text, name)


run = run_cli


def snapshot(folder):
    return {p.name: p.read_bytes() for p in sorted(folder.iterdir())}


@pytest.fixture(scope="module")
def designed(tmp_path_factory):
    """One design of the small panel through the command: (folder, its summary line)."""
    from thinning.cli import main

    d = tmp_path_factory.mktemp("designed")
    spec = write(d)
    code = main(["design", str(spec), "--out", str(d / "out"), "--quiet"])
    assert code == 0
    return d / "out"


# -- 1. the output folder is checked before the search ----------------------------------------
def test_unwritable_folder_is_found_before_the_search(tmp_path, capsys, monkeypatch):
    """A folder that refuses new files (simulated: the OS answers EACCES to creating a file
    there, as for a read-only mount) fails at once with one line, and the search never
    starts."""
    out = tmp_path / "out"
    out.mkdir()
    real = fileset.tempfile.mkstemp

    def refuse(*a, dir=None, **k):
        if dir is not None and os.path.samefile(dir, out):
            raise PermissionError(errno.EACCES, "Permission denied")
        return real(*a, dir=dir, **k)

    def no_search(*a, **k):
        raise AssertionError("the search started before the folder was checked")

    monkeypatch.setattr(fileset.tempfile, "mkstemp", refuse)
    monkeypatch.setattr(design_mod, "run_method", no_search)
    code, stdout, err = run(capsys, "design", write(tmp_path), "--out", out, "--quiet")
    assert code == 1 and stdout == ""
    lines = err.strip().splitlines()
    assert len(lines) == 1 and str(out) in lines[0] and "Permission denied" in lines[0]
    assert list(out.iterdir()) == []


@pytest.mark.skipif(
    sys.platform == "win32" or os.geteuid() == 0, reason="needs a non-root POSIX user"
)
def test_read_only_folder_is_found_before_the_search(tmp_path, capsys, monkeypatch):
    out = tmp_path / "ro"
    out.mkdir()
    out.chmod(0o500)
    monkeypatch.setattr(design_mod, "run_method", lambda *a, **k: pytest.fail("searched"))
    try:
        code, _, err = run(capsys, "design", write(tmp_path), "--out", out, "--quiet")
    finally:
        out.chmod(0o700)
    assert code == 1 and "cannot write" in err


# -- 2. all or nothing, and the digests --------------------------------------------------------
def test_files_lists_the_sha256_of_every_other_file(designed):
    """layout.json's ``files``: every other file of the folder, by name, with its SHA-256
    (FIPS 180-4 as hashlib computes it), and nothing else; no staging folder is left."""
    out = designed
    meta = json.loads((out / "layout.json").read_text())
    others = {p.name for p in out.iterdir()} - {"layout.json"}
    assert set(meta["files"]) == others >= {"layout.csv", "report.html", "layout.dxf"}
    for name, digest in meta["files"].items():
        assert hashlib.sha256((out / name).read_bytes()).hexdigest() == digest


def test_an_interrupted_write_leaves_the_previous_set_untouched(
    designed, tmp_path, capsys, monkeypatch
):
    """Ctrl-C while the report is written (after layout.csv and the drawings of the new run):
    exit 130, and the folder holds exactly the previous run's files, byte for byte."""
    import shutil

    out = tmp_path / "out"
    shutil.copytree(designed, out)
    before = snapshot(out)
    import thinning.outputs.deliver as deliver

    def interrupted(*a, **k):
        raise KeyboardInterrupt

    monkeypatch.setattr(deliver, "write_report", interrupted)
    other = write(tmp_path, SMALL.replace("seed = 4", "seed = 5"), "other.toml")
    code, _, err = run(capsys, "design", other, "--out", out, "--quiet")
    assert code == 130 and "interrupted" in err
    assert snapshot(out) == before


def test_a_new_set_replaces_the_old_one_and_drops_its_stale_files(tmp_path):
    """Files the previous record listed but the new set lacks are removed; files that were
    never part of a set (the user's) stay."""
    out = tmp_path / "out"
    out.mkdir()
    (out / "notes.txt").write_text("mine")
    with fileset.file_set(out, "rec.json") as stage:
        (stage / "a.txt").write_text("1")
        (stage / "b.txt").write_text("2")
        (stage / "rec.json").write_text(json.dumps({"files": fileset.file_digests(stage)}))
    with fileset.file_set(out, "rec.json") as stage:
        (stage / "a.txt").write_text("3")
        (stage / "rec.json").write_text(json.dumps({"files": {"a.txt": "x"}}))
    assert sorted(p.name for p in out.iterdir()) == ["a.txt", "notes.txt", "rec.json"]
    assert (out / "a.txt").read_text() == "3"
    with pytest.raises(RuntimeError), fileset.file_set(out, "rec.json") as stage:
        (stage / "a.txt").write_text("4")
        raise RuntimeError("boom")
    assert (out / "a.txt").read_text() == "3"
    assert sorted(p.name for p in out.iterdir()) == ["a.txt", "notes.txt", "rec.json"]


def test_probe_refuses_a_file_in_place_of_the_folder(tmp_path):
    f = tmp_path / "f"
    f.write_text("x")
    with pytest.raises(OutputError, match="not a folder"):
        fileset.probe_folder(f)


# -- 3, 4. reproducibility and interruption ----------------------------------------------------
def test_deterministic_and_the_summary_line(designed, tmp_path):
    """Ended by the evaluation budget: deterministic, and the summary says reproducible;
    ended by the time limit: not deterministic, and the summary says the result depends on
    machine speed (the rule of the README)."""
    from thinning.analysis.design import run_design
    from thinning.cli.design import summary_line

    meta = json.loads((designed / "layout.json").read_text())
    assert meta["stopped_by"] == "evaluations" and meta["deterministic"] is True
    spec = load_spec(write(tmp_path))
    assert "reproducible" in summary_line(run_design(spec, tmp_path / "a"))
    slow = SMALL.replace("evaluations = 300", "evaluations = 100000000\ntime_limit_s = 0.5")
    result = run_design(load_spec(write(tmp_path, slow, "t.toml")), tmp_path / "b")
    meta = json.loads((tmp_path / "b" / "layout.json").read_text())
    assert meta["stopped_by"] == "time" and meta["deterministic"] is False
    assert "depends on machine speed" in summary_line(result)


# -- 5. requirement verdicts -------------------------------------------------------------------
def test_requirement_verdicts_everywhere(designed, tmp_path):
    """margin = required − achieved for an upper limit (positive: met with room); the summary
    line says meets / fails by how much; layout.json and the report carry the same verdicts.
    The ASL requirement (−60 dB) cannot be met by 40 elements (their random floor is near
    −16 dB, references.md row 5), so it fails."""
    from thinning.analysis.design import run_design
    from thinning.cli.design import summary_line

    out = designed
    meta = json.loads((out / "layout.json").read_text())
    r = meta["requirements"]
    assert set(r) == {"psl_db", "asl_db"}
    for key, need in (("psl_db", -10.0), ("asl_db", -60.0)):
        v = r[key]
        assert v["required"] == need and v["achieved"] == pytest.approx(meta[key])
        assert v["margin_db"] == pytest.approx(need - meta[key], abs=1e-6)
        assert v["met"] is (meta[key] <= need)
    assert r["asl_db"]["met"] is False
    line = summary_line(run_design(load_spec(write(tmp_path)), tmp_path / "again"))
    assert f"fails ASL <= -60 dB by {abs(r['asl_db']['margin_db']):.2f} dB" in line
    word = "meets" if r["psl_db"]["met"] else "fails"
    assert f"{word} PSL <= -10 dB by {abs(r['psl_db']['margin_db']):.2f} dB" in line
    html = (out / "report.html").read_text()
    head = html.split('id="layout"')[0]
    assert "NOT MET" in head and 'data-key="requirement.asl_db"' in head


def test_judge_margins_and_missing_figures():
    v = judge({"psl_db": -20.0, "asl_db": -30.0}, {"psl_db": -21.5, "asl_db": None})
    assert v["psl_db"]["margin_db"] == pytest.approx(1.5) and v["psl_db"]["met"]
    assert v["asl_db"]["met"] is False and v["asl_db"]["margin_db"] is None


# -- 8, 9. bad input that slipped through, and the README's promises ---------------------------
def _parse(text):
    return parse_spec(tomllib.loads(text), "spec.toml")


def test_effort_and_evaluations_together_is_an_error():
    with pytest.raises(SpecError, match="search.evaluations.*effort"):
        _parse(SMALL.replace("seed = 4", 'seed = 4\neffort = "quick"'))


@pytest.mark.parametrize(
    "hole,word",
    [
        ("[[140, 50], [170, 50], [170, 70], [140, 70]]", "crosses the outline at (150, "),
        ("[[140, 50], [150, 50], [150, 70], [140, 70]]", "touches the outline"),
        ("[[200, 50], [220, 50], [220, 70], [200, 70]]", "lies outside the outline"),
    ],
)
def test_a_hole_across_the_outline_says_so(hole, word):
    """shapely (reference library) calls the combined polygon self-intersecting; the message
    names the hole and what it does to the outline instead."""
    text = SMALL.replace("[aperture]\n", f"[aperture]\nholes_mm = [{hole}]\n")
    with pytest.raises(SpecError) as exc:
        _parse(text)
    msg = str(exc.value)
    assert "aperture.holes_mm[0]" in msg and word in msg and "self-intersection" not in msg


def test_one_spacing_on_a_rectangular_lattice_is_square():
    """The README: one number means a square lattice on a rectangular lattice."""
    spec = _parse(SMALL.replace("spacing_mm = [15.0, 15.0]", "spacing_mm = 15.0"))
    assert spec.lattice.dx == spec.lattice.dy == pytest.approx(0.015)
    assert len(spec.sites()) == 99


def test_bundled_spec_comment_gives_the_site_count():
    """The example's comment states the site count the tool finds."""
    from pathlib import Path

    path = Path(__file__).parent.parent / "layouts" / "octagon-xband.toml"
    spec = load_spec(path)
    assert f"{len(spec.sites())}-site" in path.read_text()


# -- 10. the first run compiles -----------------------------------------------------------------
def test_a_slow_first_evaluation_is_announced_and_left_out_of_the_rate(tmp_path, monkeypatch):
    """A first evaluation that takes long (as the kernels compiling after an install do; here
    made slow on purpose) shows the compile note while it runs, and the evaluation rate
    leaves that time out: the rate reported is above evaluations / elapsed time."""
    spec = load_spec(write(tmp_path))
    problem = spec.problem()
    real = problem.evaluate
    calls = []

    def slow_first(g):
        if not calls:
            time.sleep(2.5)
        calls.append(1)
        return real(g)

    monkeypatch.setattr(problem, "evaluate", slow_first)
    seen = []
    r = run_method(problem, "random", 1, {}, max_evaluations=256, progress=seen.append)
    notes = [p for p in seen if p.get("note")]
    assert notes and notes[0]["note"] == COMPILE_NOTE
    last = [p for p in seen if not p.get("note")][-1]
    assert last["evaluations"] == 256
    assert last["rate"] > 256 / r.runtime_s
    assert np.isfinite(last["rate"])
