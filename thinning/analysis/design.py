"""Run a design from a spec and write its results.

``run_design`` validates everything and checks that the output folder takes new files before
the search starts, runs the search (which keeps its best layout through a time limit or
Ctrl-C), scores the best layout in full, judges the spec's requirements, and writes the run's
files (``layout.csv``, the drawings and report, ``layout.json`` last) as one set
(:func:`thinning.io.fileset.file_set`): the folder holds either the new set or the previous
one, never a mix. ``layout.json`` lists the SHA-256 of every other file of the set and says
whether the run is ``deterministic`` (ended by a rule that does not depend on machine speed).
"""

from __future__ import annotations

import math
import time
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from .. import __version__
from ..errors import SpecError
from ..geometry.layout import Layout
from ..io.atomic import atomic_write_json
from ..io.fileset import file_digests, file_set, probe_folder
from ..io.layout_csv import write_layout_csv
from ..search import SearchResult, run_method
from ..spec import Spec
from .requirements import judge
from .score import score_layout

__all__ = [
    "DesignResult",
    "run_design",
    "prepare_output",
    "layout_metadata",
    "write_run_files",
    "RECORD",
]

#: The record of a run's file set: its figures, provenance and the digests of the others.
RECORD = "layout.json"


@dataclass
class DesignResult:
    spec: Spec
    search: SearchResult
    layout: Layout
    metrics: dict
    files: list
    problem: object = None
    sites: object = None
    tiling: object = None


def prepare_output(out_dir) -> Path:
    """Create the output folder (and parents) and check that it takes new files; refuse a
    file in its place. Called before any search, so a bad folder costs no run."""
    return probe_folder(out_dir)


def layout_metadata(
    spec: Spec, search: SearchResult, metrics: dict, sites_total: int, problem
) -> dict:
    """The contents of layout.json: the score keys plus provenance."""
    meta = dict(metrics)
    if spec.panel_drawing is not None:  # the drawing the outline was read from
        meta["panel_drawing"] = dict(spec.panel_drawing)
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
            "deterministic": search.deterministic,
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
            "requirements": judge(spec.requirements, metrics),
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
        sites=sites,
        oversampling=spec.oversampling,
        **spec.score_options(len(layout)),
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
    problem.release()  # the search's caches: most of the memory on a large panel
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
    spec: Spec,
    out_dir,
    workers: int | None = None,
    progress=None,
    extra_outputs=None,
    compare_unconstrained: bool | None = None,
) -> DesignResult:
    """Search the spec's problem and write the layout files into ``out_dir``.

    Parameters
    ----------
    spec : Spec
    out_dir : path
    workers : int, optional   evaluation processes (default: the spec's ``search.workers``)
    progress : callable(dict), optional   progress reports from the search
    extra_outputs : callable(DesignResult, Path) -> list of Path, optional
        Writes further files (drawings, report) into the given staging folder, after
        ``layout.csv`` and before ``layout.json``.
    compare_unconstrained : bool, optional
        With [tiles]: also run the design without the tile rules (same budget, method by
        size, same limits) and give the cost of the constraint (default: the spec's
        ``tiles.compare_unconstrained``).

    Raises
    ------
    SpecError, GeometryError
        A problem of the spec, before any search.
    OutputError
        The folder cannot take new files (found before the search), or the files cannot be
        written; the previous set of files stays as it was.
    KeyboardInterrupt
        Ctrl-C while the files are written (the previous set stays as it was). Ctrl-C during
        the search ends it with its best layout (``stopped_by = "interrupt"``) instead.
    """
    if spec.method == "pareto":
        raise SpecError(
            f"{spec.source}: search.method 'pareto' gives a front of budgets, not one "
            "layout: run it with thinning sweep"
        )
    sites = spec.sites()
    problem = spec.problem(sites)  # every input problem is raised before any output exists
    out = prepare_output(out_dir)  # and an unwritable folder before the search
    search, layout, meta = search_and_score(
        spec, sites, problem, workers or spec.workers, progress, str(out / "layout.csv")
    )
    if problem.robust is not None:
        meta["robust"] = robust_summary(spec, problem, layout)
    result = DesignResult(spec, search, layout, meta, [], problem, sites)
    if problem.tile_grid is not None:
        if compare_unconstrained is None:
            compare_unconstrained = spec.tiles.compare_unconstrained
        result.tiling = tiled_figures(
            spec, problem, layout, search, meta, compare_unconstrained, progress
        )
    extra = None if extra_outputs is None else (lambda stage: extra_outputs(result, stage))
    result.files = write_run_files(out, layout, meta, extra, result.tiling)
    return result


def tiled_figures(spec: Spec, problem, layout, search, meta, compare: bool, progress=None):
    """The tiles and chips of a tiled design (a :class:`thinning.geometry.tiles.Tiling`), and
    ``meta["tiles"]``: counts, boards, chips and, when ``compare``, the cost of the
    constraint against an unconstrained design of the same budget and limits."""
    import dataclasses

    from .tile_figures import tile_summary

    tiling = tiling_of(spec, problem.sites, search.mask, problem.tile_grid)
    free = None
    if compare:
        plain = dataclasses.replace(spec, tiles=None, search_method=_free_method(spec))
        plain_problem = plain.problem(problem.sites)
        if progress is not None:
            progress({"note": f"designing without the tile rules ({plain.method}), to compare"})
        run = run_method(
            plain_problem,
            plain.method,
            spec.seed,
            plain.options if plain.search_method == spec.search_method else {},
            max_evaluations=spec.max_evaluations,
            time_limit_s=spec.time_limit_s,
        )
        plain_problem.release()
        _, m = score_spec_layout(plain, problem.sites, run.mask)
        free = {
            "method": plain.method,
            "psl_db": m["psl_db"],
            "asl_db": m["asl_db"],
            "evaluations": int(run.evaluations),
            "time_limit_s": spec.time_limit_s,
            "runtime_s": round(float(run.runtime_s), 3),
        }
    meta["tiles"] = tile_summary(tiling, layout, spec.wavelength, free, meta["psl_db"])
    if problem.tile_plan_bound_db is not None:  # theory beside the result
        meta["tiles"]["envelope_bound_db"] = round(problem.tile_plan_bound_db, 3)
    meta["notes"] = list(meta.get("notes", [])) + meta["tiles"]["notes"]
    return tiling


def tiling_of(spec: Spec, sites, mask, grid=None):
    """The tiles and chips (:class:`thinning.geometry.tiles.Tiling`) of a layout of a tiled
    spec; ``grid``: the problem's tile grid (default: built from the spec's sites, usable =
    not forbidden)."""
    from ..geometry.chips import group_chips
    from ..geometry.tiles import TileGrid, Tiling

    if grid is None:
        _, forbidden = spec.constraint_masks(sites)
        grid = TileGrid(sites, spec.tiles, spec.source, usable=~forbidden)
    chips = None
    if grid.rules.channels_per_chip is not None:
        site = np.flatnonzero(mask)
        chips = group_chips(
            sites.x[site],
            sites.y[site],
            grid.tile_of_site[site],
            grid.rules.channels_per_chip,
            n_tiles=grid.n_tiles,
        )
    return Tiling.of_mask(grid, mask, chips)


def _free_method(spec: Spec):
    """The method of the unconstrained comparison: the spec's, unless it is the tiles-only
    ``modular`` (then the default for the size)."""
    return None if spec.method == "modular" else spec.search_method


def write_run_files(out: Path, layout: Layout, meta: dict, extra=None, tiling=None) -> list[Path]:
    """Write one run's files into ``out`` as one set: ``layout.csv`` (with ``tile``, ``chip``
    and ``channel`` columns and ``tiles.csv`` when tiled), whatever ``extra`` writes (given
    the staging folder; returns the paths it wrote), then ``layout.json`` with ``files``, the
    SHA-256 of every other file. Returns the paths in ``out``, csv and json first."""
    with file_set(out, RECORD) as stage:
        names = ["layout.csv", RECORD]
        if tiling is None:
            write_layout_csv(stage / "layout.csv", layout)
        else:
            from ..io.tiles_csv import tile_columns, write_tiles_csv

            write_layout_csv(stage / "layout.csv", layout, extra_columns=tile_columns(tiling))
            write_tiles_csv(stage / "tiles.csv", tiling)
            names.append("tiles.csv")
        if extra is not None:
            names += [Path(f).name for f in extra(stage) or ()]
        meta["files"] = file_digests(stage, exclude=(RECORD,))
        atomic_write_json(stage / RECORD, meta)
    return [out / n for n in names]


def format_progress(method: str, figure: str = "best PSL"):
    """A progress printer for stderr: best PSL so far (``figure``: how to name the search's
    first figure, e.g. the worst excess over a mask), evaluations per second, time left."""
    import sys

    tty = sys.stderr.isatty()
    last = [-math.inf]

    def show(p):
        if p.get("note"):  # e.g. the kernels compiling on the first run after an install
            line = f"{method}: {p['note']}"
            sys.stderr.write(("\r" + line.ljust(78)) if tty else line + "\n")
            sys.stderr.flush()
            return
        if not tty and p["seconds"] - last[0] < 5.0:  # a log file gets a line every 5 s
            return
        last[0] = p["seconds"]
        left = p.get("seconds_left")
        left_s = "" if left is None or not math.isfinite(left) else f", {left:.0f} s left"
        psl = p.get("best_psl_db")
        psl_s = "n/a" if psl is None or not np.isfinite(psl) else f"{psl:.2f} dB"
        line = (
            f"{method}: {p['evaluations']:,} evaluations ({p['rate']:,.0f}/s), "
            f"{figure} {psl_s}{left_s}"
        )
        if tty:
            sys.stderr.write("\r" + line.ljust(78))
        else:
            sys.stderr.write(line + "\n")
        sys.stderr.flush()

    return show
