#!/usr/bin/env python3
"""Anytime profile: the best PSL each search method holds after 1, 3, 10, 30, 60 and 300 s.

Cases (all half-wavelength, broadside unless said, sidelobe region outside the first null):

* ``linear``: the GA thinning case of Haupt, "Thinned arrays using genetic algorithms", IEEE
  TAP 42(7), 1994 (references.md row 13, from memory): 200 sites, 154 on, no symmetry;
* ``linear-sym``: the same with centre symmetry (``mirror-x``), Haupt's own setting, beside his
  published −22.09 dB;
* ``circle``: the circular aperture of benchmarks/bench_search.py, about 830 sites on a square
  lattice, 50 % on;
* ``octagon``: the bundled example, layouts/octagon-xband.toml (543-site triangular lattice,
  300 on, mirror-x, scan to 45°).

Each method runs once per case and seed with the longest time limit and no evaluation limit;
its best-so-far at each time comes from the run's convergence history (the tracker records
every improvement with its time), so a row is one run, not one run per time. The kernels are
compiled or loaded before the first run, so the times are the search's own. ``random`` gets
``draws = 10**9`` so that it too uses the time (``density`` polishes until the limit);
``genetic-stall`` is the genetic search as it was before restarts (no time limit, so stall
ends the run; hill-climbing polish; no iterative-Fourier starts): the same code path and
figures as before, "today's figure" the others are compared with.

Then the claim "a longer run is never worse": ``genetic`` and ``anneal`` run again, separately,
with a limit of 10 s (a sixth of ``--max-time`` when that is shorter than 60 s), and their best
is compared with the long run of the same seed. (Nothing but the stop of those methods depends
on the clock, so the short run is the beginning of the long one; on a busy machine it may get
through fewer evaluations in its 10 s than the long run did.)

Usage::

    python benchmarks/bench_anytime.py [--max-time S] [--seeds N] [--cases LIST]
                                       [--methods LIST] [--workers N] [--json FILE]
                                       [--figure FILE]

``--max-time`` (default 300) is the longest limit; the profile stops there. ``--seeds N``
(default 3) runs seeds 1..N; ``--cases`` and ``--methods`` take comma-separated names.
``--json`` merges the figures into FILE (e.g. benchmarks/results.json); ``--figure`` writes the
PSL-against-time figure (default benchmarks/anytime.png; ``--figure ''`` for none). To use
both cores with one search each, split the cases over two processes, each with ``--raw
FILE --figure ''``, then ``--merge FILE1,FILE2 --json ...`` prints and draws them together.
"""

from __future__ import annotations

import os

# as the thinning command does (thinning/cli/__init__.py): one BLAS thread per process
for _var in ("OPENBLAS_NUM_THREADS", "OMP_NUM_THREADS", "MKL_NUM_THREADS"):
    os.environ.setdefault(_var, "1")

import argparse
import json
import math
import platform
import statistics
import time
from pathlib import Path

import numpy as np

from thinning.analysis.score import score_layout
from thinning.geometry.aperture import Aperture
from thinning.geometry.lattice import Lattice
from thinning.geometry.layout import Layout
from thinning.search import Tracker, method_module, run_method
from thinning.search.problem import ThinningProblem
from thinning.spec import load_spec

HERE = Path(__file__).resolve().parent
LAM = 0.03  # [m] 10 GHz; 15 mm is half a wavelength
FREQ = 299_792_458.0 / LAM  # [Hz]
MARKS_S = (1, 3, 10, 30, 60, 300)
HAUPT_PSL_DB = -22.09  # Haupt 1994, centre-symmetric, 77 % on (references.md row 13, memory)
LINEAR_TARGET_DB = -23.95  # issue target for the linear case without symmetry, 60 s
PLANAR_GAIN_DB = 0.2  # planar cases: ahead of today's figure by this much, 60 s
METHODS = ("random", "density", "ift", "genetic-stall", "genetic", "anneal")


def linear(symmetry):
    sites = Lattice.from_mm("linear", [15.0]).linear_sites(200)
    return ThinningProblem(sites, 154, LAM, 0.0, symmetry=symmetry), FREQ


def circle():
    radius_mm = 16.2 * 15.0
    theta = np.linspace(0.0, 2 * math.pi, 256, endpoint=False)
    outline = np.column_stack([radius_mm * np.cos(theta), radius_mm * np.sin(theta)])
    sites = Lattice.from_mm("rectangular", [15.0, 15.0]).sites_in(
        Aperture.from_mm(outline.tolist())
    )
    return ThinningProblem(sites, len(sites) // 2, LAM, 0.0), FREQ


def octagon():
    spec = load_spec(HERE.parent / "layouts" / "octagon-xband.toml")
    return spec.problem(), spec.frequency


CASES = {
    "linear": lambda: linear("none"),
    "linear-sym": lambda: linear("mirror-x"),
    "circle": circle,
    "octagon": octagon,
}


def method_call(method):
    """(search method, options, stall ends the run) of a benchmark method name."""
    if method == "genetic-stall":  # as before restarts: no IFT starts, hill-climbing polish
        return "genetic", {"polish_anneal": 0, "seed_ift_fraction": 0.0}, True
    if method == "random":
        return method, {"draws": 10**9}, False
    return method, {}, False


def warm_up(problem):
    """Compile or load the evaluation kernels (a full evaluation and a swap move)."""
    g = problem.random_genomes(np.random.default_rng(0), 2)
    problem.evaluate(g)
    on, off = np.flatnonzero(g[0]), np.flatnonzero(~g[0])
    same = problem.gene_class[off] == problem.gene_class[on[0]]
    if same.any():
        problem.evaluate_swaps(g[0], [on[0]], [off[same][0]])


def profile(history, marks):
    """Best PSL [dB] held at each time of ``marks`` (None before the first evaluation)."""
    out = []
    for t in marks:
        held = [h["best_psl_db"] for h in history if h["seconds"] <= t]
        out.append(held[-1] if held else None)
    return out


class _StallTracker(Tracker):
    """A tracker with a time limit on which a stall still ends the run (as before restarts)."""

    stall_ends_run = True


def run_one(problem, freq, method, seed, limit, workers):
    name, options, stall_ends = method_call(method)
    t = time.perf_counter()
    if stall_ends:
        with _StallTracker(problem, None, limit, workers) as tracker:
            stopped = method_module(name).run(
                problem, tracker, np.random.default_rng(seed), options
            )
            tracker.record(final=True)
            res = tracker.result(stopped or tracker.stop_reason() or "done")
    else:
        res = run_method(
            problem, name, seed, options, max_evaluations=None, time_limit_s=limit, workers=workers
        )
    wall = time.perf_counter() - t
    scored = score_layout(
        Layout.from_sites(problem.sites, res.mask), freq, problem.scan_max, sites=len(problem.sites)
    )
    return res, scored.psl_db, wall


def _median(values):
    values = [v for v in values if v is not None]
    return statistics.median(values) if values else None


def _fmt(v):
    return f"{v:7.2f}" if v is not None else "      -"


def main():
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--max-time", type=float, default=300.0, help="longest time limit [s]")
    ap.add_argument("--seeds", type=int, default=3, help="seeds 1..N")
    ap.add_argument("--cases", default=",".join(CASES), help="comma-separated case names")
    ap.add_argument("--methods", default=",".join(METHODS), help="comma-separated methods")
    ap.add_argument("--workers", type=int, default=1, help="evaluation processes")
    ap.add_argument("--json", default=None, help="merge the figures into this JSON file")
    ap.add_argument("--figure", default=str(HERE / "anytime.png"), help="PNG of PSL vs time")
    ap.add_argument("--raw", default=None, help="also write every run, histories included, here")
    ap.add_argument(
        "--merge",
        default=None,
        help="comma-separated --raw files of earlier runs (e.g. cases split over two "
        "processes): print their tables and targets, draw the figure, write --json; no runs",
    )
    args = ap.parse_args()
    if args.merge:
        return merge(args)
    cases = [c for c in args.cases.split(",") if c]
    methods = [m for m in args.methods.split(",") if m]
    for name in cases:
        if name not in CASES:
            ap.error(f"unknown case {name!r}; choose from {', '.join(CASES)}")
    for name in methods:
        if name not in METHODS:
            ap.error(f"unknown method {name!r}; choose from {', '.join(METHODS)}")
    marks = [m for m in MARKS_S if m <= args.max_time + 1e-9]
    seeds = list(range(1, args.seeds + 1))
    short_s = min(10.0, args.max_time / 6) if args.max_time < 60 else 10.0
    machine = f"{platform.machine()}, {os.cpu_count()} CPUs, Python {platform.python_version()}"
    print(
        f"# {machine}; workers {args.workers}; limit {args.max_time:g} s; seeds {seeds}; "
        f"load average {os.getloadavg()[0]:.1f} at the start",
        flush=True,
    )
    results = {}
    for case in cases:
        problem, freq = CASES[case]()
        warm_up(problem)
        print(
            f"\n{case}: {len(problem.sites)} sites, {problem.elements} on, symmetry "
            f"{problem.symmetry}; best PSL [dB] after t s, median of {len(seeds)} seeds",
            flush=True,
        )
        print(f"{'method':<14}" + "".join(f"{m:>7}s" for m in marks) + "   scored  evaluations")
        rows = {}
        for method in methods:
            runs = []
            for seed in seeds:
                res, scored, wall = run_one(
                    problem, freq, method, seed, args.max_time, args.workers
                )
                runs.append(
                    {
                        "seed": seed,
                        "profile_db": profile(res.history, marks),
                        "psl_db": res.psl_db,
                        "psl_scored_db": scored,
                        "evaluations": res.evaluations,
                        "seconds": round(wall, 2),
                        "stopped_by": res.stopped_by,
                        "history": [(h["seconds"], h["best_psl_db"]) for h in res.history],
                    }
                )
            med = [_median([r["profile_db"][i] for r in runs]) for i in range(len(marks))]
            rows[method] = {"median_db": med, "runs": runs}
            print(
                f"{method:<14}"
                + "".join(f"{_fmt(v)} " for v in med)
                + f"{_fmt(_median([r['psl_scored_db'] for r in runs]))}  "
                + f"{int(_median([r['evaluations'] for r in runs])):>11,}",
                flush=True,
            )
        results[case] = rows
        checks = []
        for method in ("genetic", "anneal"):
            if method not in rows:
                continue
            for r in rows[method]["runs"]:
                res, _, _ = run_one(problem, freq, method, r["seed"], short_s, args.workers)
                ok = r["psl_db"] <= res.psl_db
                checks.append(
                    {"method": method, "seed": r["seed"], "short_db": res.psl_db, "ok": ok}
                )
                print(
                    f"  {method} seed {r['seed']}: separate {short_s:.3g} s run "
                    f"{res.psl_db:.2f} dB, {args.max_time:g} s run {r['psl_db']:.2f} dB: "
                    + ("never worse" if ok else "WORSE"),
                    flush=True,
                )
        rows["longer_never_worse"] = checks
    if args.raw:
        raw = {"machine": machine, "workers": args.workers, "max_time_s": args.max_time}
        raw.update(seeds=seeds, marks_s=marks, cases=results)
        Path(args.raw).write_text(json.dumps(raw) + "\n")
    finish(args, results, marks, machine, seeds)


def merge(args):
    """Tables, targets, figure and JSON from --raw files written by earlier runs."""
    results, marks, machine, seeds = {}, None, None, None
    for name in args.merge.split(","):
        raw = json.loads(Path(name).read_text())
        marks, machine, seeds = raw["marks_s"], raw["machine"], raw["seeds"]
        args.max_time, args.workers = raw["max_time_s"], raw["workers"]
        results.update(raw["cases"])
    for case, rows in results.items():
        print(f"\n{case}: best PSL [dB] after t s, median of {len(seeds)} seeds")
        print(f"{'method':<14}" + "".join(f"{m:>7}s" for m in marks) + "   scored  evaluations")
        for method, row in rows.items():
            if method == "longer_never_worse":
                for c in row:
                    print(
                        f"  {c['method']} seed {c['seed']}: separate short run "
                        f"{c['short_db']:.2f} dB: " + ("never worse" if c["ok"] else "WORSE")
                    )
                continue
            runs = row["runs"]
            print(
                f"{method:<14}"
                + "".join(f"{_fmt(v)} " for v in row["median_db"])
                + f"{_fmt(_median([r['psl_scored_db'] for r in runs]))}  "
                + f"{int(_median([r['evaluations'] for r in runs])):>11,}"
            )
    finish(args, results, marks, machine, seeds)


def finish(args, results, marks, machine, seeds):
    """Print the targets, draw the figure and merge the figures into --json."""
    summary = targets(results, marks, args.max_time)
    if args.figure:
        figure(results, marks, args.figure)
        print(f"\nfigure: {args.figure}")
    if args.json:
        path = Path(args.json)
        data = json.loads(path.read_text()) if path.exists() else {}
        for rows in results.values():  # keep the file small: profiles, not histories
            for method, row in rows.items():
                if method != "longer_never_worse":
                    for r in row["runs"]:
                        r.pop("history", None)
        data["bench_anytime"] = {
            "machine": machine,
            "date": time.strftime("%Y-%m-%d"),
            "workers": args.workers,
            "max_time_s": args.max_time,
            "seeds": seeds,
            "marks_s": marks,
            "cases": results,
            "targets": summary,
        }
        path.write_text(json.dumps(data, indent=2) + "\n")


def targets(results, marks, max_time):
    """Print the issue's targets at 60 s (or the longest time run) and whether they are met."""
    at = 60 if 60 in marks else marks[-1]
    i = marks.index(at)
    out = {}
    print(f"\ntargets at {at} s (median of seeds):")

    def best_method(rows):
        cand = {m: r["median_db"][i] for m, r in rows.items() if m != "longer_never_worse"}
        cand = {m: v for m, v in cand.items() if v is not None and m != "genetic-stall"}
        return min(cand.items(), key=lambda kv: kv[1]) if cand else (None, None)

    if "linear" in results:
        rows = results["linear"]
        for m in ("genetic", "anneal"):
            if m in rows:
                v = rows[m]["median_db"][i]
                met = v is not None and v <= LINEAR_TARGET_DB
                out[f"linear/{m}"] = {"psl_db": v, "target_db": LINEAR_TARGET_DB, "met": met}
                print(
                    f"  linear, {m}: {_fmt(v)} dB, target ≤ {LINEAR_TARGET_DB} dB: "
                    + ("met" if met else "NOT met")
                )
    if "linear-sym" in results:
        m, v = best_method(results["linear-sym"])
        out["linear-sym"] = {"method": m, "psl_db": v, "published_db": HAUPT_PSL_DB}
        print(f"  linear-sym, best ({m}): {_fmt(v)} dB beside the published {HAUPT_PSL_DB} dB")
    for case in ("circle", "octagon"):
        rows = results.get(case)
        if not rows or "genetic-stall" not in rows:
            continue
        today = rows["genetic-stall"]["median_db"][i]
        for m in ("genetic", "anneal"):
            if m in rows:
                v = rows[m]["median_db"][i]
                met = v is not None and today is not None and v <= today - PLANAR_GAIN_DB
                out[f"{case}/{m}"] = {"psl_db": v, "today_db": today, "met": met}
                print(
                    f"  {case}, {m}: {_fmt(v)} dB against today's {_fmt(today)} dB "
                    f"(genetic-stall), ahead by ≥ {PLANAR_GAIN_DB} dB: "
                    + ("met" if met else "NOT met")
                )
    return out


def figure(results, marks, path):
    """PSL against time, one panel per case, the median over seeds of each method."""
    from matplotlib.backends.backend_agg import FigureCanvasAgg
    from matplotlib.figure import Figure

    n = len(results)
    fig = Figure(figsize=(4.2 * n, 3.6), layout="constrained")
    FigureCanvasAgg(fig)
    axes = fig.subplots(1, n, squeeze=False)[0]
    grid = np.geomspace(0.1, marks[-1], 200)
    for ax, (case, rows) in zip(axes, results.items(), strict=True):
        for method, row in rows.items():
            if method == "longer_never_worse":
                continue
            curves = []
            for r in row["runs"]:
                hist = r["history"]
                curves.append(
                    [next((p for s, p in reversed(hist) if s <= t), np.nan) for t in grid]
                )
            curves = np.array(curves, float)
            held = np.all(np.isfinite(curves), axis=0)  # every seed has a layout
            med = np.full(grid.size, np.nan)
            med[held] = np.median(curves[:, held], axis=0)
            ax.plot(grid, med, label=method)
        if case == "linear-sym":
            ax.axhline(HAUPT_PSL_DB, color="0.5", ls=":", lw=1, label="Haupt 1994")
        ax.set_xscale("log")
        ax.set_xlabel("time [s]")
        ax.set_ylabel("best PSL [dB]")
        ax.set_title(case)
        ax.grid(True, alpha=0.3)
    axes[0].legend(fontsize="small")
    fig.savefig(path, dpi=100)


if __name__ == "__main__":
    main()
