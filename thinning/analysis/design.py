"""Run a design from a spec and write its results.

``run_design`` validates everything before it touches the output folder, runs the search
(which keeps its best layout through a time limit or Ctrl-C), scores the best layout in full,
and writes ``layout.csv`` and ``layout.json`` atomically: a file is either complete or absent.
"""

from __future__ import annotations

import math
import time
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from .. import __version__
from ..errors import OutputError, SpecError
from ..geometry.layout import Layout
from ..io.atomic import atomic_write_json
from ..io.layout_csv import write_layout_csv
from ..search import SearchResult, run_method
from ..spec import Spec
from .score import score_layout

__all__ = ["DesignResult", "run_design", "prepare_output", "layout_metadata"]


@dataclass
class DesignResult:
    spec: Spec
    search: SearchResult
    layout: Layout
    metrics: dict
    files: list
    problem: object = None
    sites: object = None


def prepare_output(out_dir) -> Path:
    """Create the output folder (and parents); refuse a file in its place."""
    out = Path(out_dir)
    if out.exists() and not out.is_dir():
        raise OutputError(f"{out}: exists and is not a folder")
    try:
        out.mkdir(parents=True, exist_ok=True)
    except OSError as exc:
        raise OutputError(f"{out}: cannot create the output folder: {exc.strerror}") from None
    return out


def layout_metadata(
    spec: Spec, search: SearchResult, metrics: dict, sites_total: int, problem
) -> dict:
    """The contents of layout.json: the score keys plus provenance."""
    meta = dict(metrics)
    env = getattr(problem, "envelope", None)
    if env is not None:  # the density envelope the search started from, and its bound
        meta["envelope_bound_db"] = env.summary()["bound_db"]
        meta["envelope"] = env.summary()
    meta.update(
        {
            "method": spec.method,
            "seed": spec.seed,
            "evaluations": int(search.evaluations),
            "runtime_s": round(float(search.runtime_s), 3),
            "stopped_by": search.stopped_by,
            "version": __version__,
            "spec_file": Path(spec.source).name,
            "spec_digest_sha256": spec.digest,
            "spec": spec.raw,
            "candidate_sites": sites_total,
            "symmetry": spec.symmetry,
            "pinned_sites": int(problem.pinned_sites.sum()),
            "forbidden_or_unpaired_sites": int((~problem.available_sites).sum()),
            "search_objective": spec.objective,
            "search_best": {
                "objective_db": search.objective,
                "psl_db": search.psl_db,
                "asl_db": search.asl_db,
            },
            "history": search.history,
            "method_by_size": spec.search_method is None,
            "notes": list(problem.notes) + list(spec.warnings),
            "caution": (
                "Idealised array model (no mutual coupling, no edge effects). Verify by "
                "full-wave simulation and measurement; observe RF exposure limits and "
                "local codes, and defer to licensed engineering practice."
            ),
        }
    )
    return meta


def score_spec_layout(spec: Spec, sites, mask, source=None):
    """The layout of a site mask and its full figures (``score --json`` keys) for a spec."""
    layout = Layout.from_sites(sites, mask, source=source)
    t = time.perf_counter()
    metrics = score_layout(
        layout,
        spec.frequency,
        spec.scan_max,
        spec.element_exponent,
        sites=len(sites),
        oversampling=spec.oversampling,
    ).to_dict()
    metrics["scoring_s"] = round(time.perf_counter() - t, 3)
    return layout, metrics


def search_and_score(spec: Spec, sites, problem, workers=1, progress=None, source=None):
    """Run the spec's method on its problem and score the best layout: (search, layout, meta)."""
    search = run_method(
        problem,
        spec.method,
        spec.seed,
        spec.options,
        max_evaluations=spec.max_evaluations,
        time_limit_s=spec.time_limit_s,
        workers=workers,
        progress=progress,
    )
    layout, metrics = score_spec_layout(spec, sites, search.mask, source)
    return search, layout, layout_metadata(spec, search, metrics, len(sites), problem)


def robust_summary(spec: Spec, problem, layout: Layout) -> dict:
    """The error model of a robust design, its runtime cost, and a fresh Monte Carlo check."""
    from .stress import monte_carlo

    rng = np.random.default_rng(0)
    g = problem.random_genomes(rng, 32)
    t = time.perf_counter()
    problem.evaluate(g)
    robust_s = time.perf_counter() - t
    problem.robust, saved = None, problem.robust
    try:
        t = time.perf_counter()
        problem.evaluate(g)
        nominal_s = time.perf_counter() - t
    finally:
        problem.robust = saved
    m = saved
    mc = monte_carlo(layout, spec.frequency, spec.scan_max, m, trials=200, seed=1)
    return {
        "model": {
            "amplitude_error_db": m.amplitude_db,
            "phase_error_deg": m.phase_deg,
            "phase_bits": m.phase_bits,
            "failures": m.failures,
        },
        "trials_per_evaluation": problem.robust_trials,
        "percentile": problem.robust_percentile,
        "cost_ratio_vs_nominal": round(robust_s / nominal_s, 2),
        "check_200_trials": {
            k: mc[k] for k in ("psl_db", "asl_db", "floor_asl_db", "expected_asl_db")
        },
    }


def run_design(
    spec: Spec, out_dir, workers: int | None = None, progress=None, extra_outputs=None
) -> DesignResult:
    """Search the spec's problem and write the layout files into ``out_dir``.

    Parameters
    ----------
    spec : Spec
    out_dir : path
    workers : int, optional   evaluation processes (default: the spec's ``search.workers``)
    progress : callable(dict), optional   progress reports from the search
    extra_outputs : callable(DesignResult, Path) -> list of Path, optional
        Writes further files (drawings, report) after the layout files.
    """
    if spec.method == "pareto":
        raise SpecError(
            f"{spec.source}: search.method 'pareto' gives a front of budgets, not one "
            "layout: run it with thinning sweep"
        )
    sites = spec.sites()
    problem = spec.problem(sites)  # every input problem is raised before any output exists
    out = prepare_output(out_dir)
    search, layout, meta = search_and_score(
        spec, sites, problem, workers or spec.workers, progress, str(out / "layout.csv")
    )
    if problem.robust is not None:
        meta["robust"] = robust_summary(spec, problem, layout)
    files = [out / "layout.csv", out / "layout.json"]
    write_layout_csv(files[0], layout)
    atomic_write_json(files[1], meta)
    result = DesignResult(spec, search, layout, meta, files, problem, sites)
    if extra_outputs is not None:
        files.extend(extra_outputs(result, out))
    return result


def format_progress(method: str):
    """A progress printer for stderr: best PSL so far, evaluations per second, time left."""
    import sys

    tty = sys.stderr.isatty()
    last = [-math.inf]

    def show(p):
        if not tty and p["seconds"] - last[0] < 5.0:  # a log file gets a line every 5 s
            return
        last[0] = p["seconds"]
        left = p.get("seconds_left")
        left_s = "" if left is None or not math.isfinite(left) else f", {left:.0f} s left"
        psl = p.get("best_psl_db")
        psl_s = "n/a" if psl is None or not np.isfinite(psl) else f"{psl:.2f} dB"
        line = (
            f"{method}: {p['evaluations']:,} evaluations ({p['rate']:,.0f}/s), "
            f"best PSL {psl_s}{left_s}"
        )
        if tty:
            sys.stderr.write("\r" + line.ljust(78))
        else:
            sys.stderr.write(line + "\n")
        sys.stderr.flush()

    return show
