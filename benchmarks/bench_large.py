#!/usr/bin/env python3
"""Large apertures: 16k to 262k sites, what theory allows, and what each stage costs.

Circular apertures on a half-wavelength square lattice (15 mm at 9.993 GHz), 20° scan cone,
the spec naming no method (so the size chooses it), for each case:

1. **Start**: the optimised envelope's bound (the peak of its expected pattern over the
   sidelobe region, references.md row 5) and the best of the exact-count layouts drawn from it
   (error diffusion and systematic draws), with their times.
2. **Design**, stage by stage in one process as ``thinning design`` runs them (search with
   the time limit, full scoring, layout files, drawings + baseline + report): wall time and
   peak RSS of each stage (the kernel's high-water mark reset before each), the PSL, the
   search's own figure, and the time limit kept.
3. **Independent PSL** of the written layout.csv: an 8× zero-padded FFT of the CSV's grid
   (numpy, none of thinning's code), the main beam cut along 360 rays at the first minimum,
   the 64 highest local maxima refined by two 9 × 9 exact-pattern zooms (separable direct
   sums); the reported PSL must be within 0.05 dB of it.
4. Optionally (``--limit-check``) every method on a size with a shorter time limit: the
   runtime over the limit (kept within 5 %).
5. Optionally (``--cli``) the whole ``thinning design`` command on the largest case: wall
   time and peak RSS.

Targets (time limit 240 s): 65k ≤ −36.5 dB, 262k ≤ −37.5 dB at 50 %; 65k at 25 % ≤ −34.0 dB;
``thinning design`` ≤ 300 s at 262k and ≤ 2 GB peak RSS; scoring + drawings + report ≤ 30 s.

Usage: ``python benchmarks/bench_large.py [--sizes 16k,65k,262k,65k@25] [--time-limit 240]
[--limit-check 65k:30,262k:60] [--cli] [--json benchmarks/results.json]``; a short run:
``--sizes 16k,65k --time-limit 20``.
"""

from __future__ import annotations

import os

for _var in ("OPENBLAS_NUM_THREADS", "OMP_NUM_THREADS", "MKL_NUM_THREADS"):
    os.environ.setdefault(_var, "1")

import argparse
import json
import math
import platform
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np

HERE = Path(__file__).resolve().parent
#: Aperture radius in pitches of each size name (16,241 / 65,101 / 262,309 sites).
RADII = {"16k": 72, "65k": 144, "262k": 289}
#: Targets [dB] at a 240 s limit, by case.
TARGETS = {("65k", 0.5): -36.5, ("262k", 0.5): -37.5, ("65k", 0.25): -34.0}
FREQ_GHZ = 299.792458 / 30.0  # 15 mm is half a wavelength
SCAN_DEG = 20.0


def spec_text(radius: int, fill: float, time_limit: float, method: str | None = None) -> str:
    t = np.linspace(0, 2 * np.pi, 720, endpoint=False)
    r = radius * 15.0
    pts = ", ".join(f"[{r * math.cos(a):.4f}, {r * math.sin(a):.4f}]" for a in t)
    meth = f'method = "{method}"\n' if method else ""
    return (
        f'name = "circle-{radius}"\n[array]\nfrequency_ghz = {FREQ_GHZ!r}\n'
        'lattice = "rectangular"\nspacing_mm = [15.0, 15.0]\n'
        f"[aperture]\noutline_mm = [{pts}]\n[budget]\nfill = {fill}\n"
        f"[scan]\nmax_deg = {SCAN_DEG}\n[search]\n{meth}seed = 1\n"
        f"evaluations = 100000000\ntime_limit_s = {time_limit}\n"
    )


# -- stages, each run in a process of its own (python bench_large.py --stage ...) -------------
def _reset_peak():
    try:
        with open("/proc/self/clear_refs", "w") as f:
            f.write("5")  # resets VmHWM (Linux)
    except OSError:
        pass


def _peak_mib() -> float:
    try:
        for line in open("/proc/self/status"):
            if line.startswith("VmHWM"):
                return int(line.split()[1]) / 1024
    except OSError:
        pass
    import resource

    return resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024


def stage_start(spec_path: str) -> dict:
    from thinning.search.density import optimised_envelope, starting_layouts
    from thinning.spec import load_spec

    spec = load_spec(spec_path)
    t = time.perf_counter()
    sites = spec.sites()
    problem = spec.problem(sites)
    t_sites = time.perf_counter() - t
    t = time.perf_counter()
    env = optimised_envelope(problem, spec.options)
    t_env = time.perf_counter() - t
    t = time.perf_counter()
    starts = starting_layouts(problem, env.genes, np.random.default_rng(spec.seed), 16)
    ev = problem.evaluate(starts)
    t_draws = time.perf_counter() - t
    n_ed = 16  # the first 16 (at most) are the diffusion layouts, the rest the draws
    ed = float(ev.psl_db[: min(n_ed, len(starts))].min())
    draws = float(ev.psl_db[n_ed:].min()) if len(starts) > n_ed else math.nan
    return {
        "sites": len(sites),
        "elements": problem.elements,
        "sites_s": t_sites,
        "envelope": env.summary(),
        "envelope_bound_db": env.bound_db,
        "envelope_s": t_env,
        "start_psl_db": float(ev.psl_db.min()),
        "start_diffusion_psl_db": ed,
        "start_draws_psl_db": draws,
        "start_layouts": len(starts),
        "start_s": t_draws,
        "peak_rss_mib": _peak_mib(),
    }


def stage_design(spec_path: str, out: str) -> dict:
    """The design pipeline of ``thinning design`` (run_design), timed stage by stage."""
    from thinning.analysis.design import layout_metadata, prepare_output, score_spec_layout
    from thinning.io.atomic import atomic_write_json
    from thinning.io.layout_csv import write_layout_csv
    from thinning.outputs.deliver import write_deliverables
    from thinning.search import run_method
    from thinning.spec import load_spec

    res = {}
    _reset_peak()
    t = time.perf_counter()
    spec = load_spec(spec_path)
    sites = spec.sites()
    problem = spec.problem(sites)
    res["setup_s"] = time.perf_counter() - t
    res["method"] = spec.method
    res["setup_peak_mib"] = _peak_mib()
    _reset_peak()
    t = time.perf_counter()
    search = run_method(
        problem,
        spec.method,
        spec.seed,
        spec.options,
        max_evaluations=spec.max_evaluations,
        time_limit_s=spec.time_limit_s,
    )
    res["search_s"] = time.perf_counter() - t
    res["search_peak_mib"] = _peak_mib()
    _reset_peak()
    t = time.perf_counter()
    problem.release()  # as design.search_and_score does after the search
    dirpath = prepare_output(out)
    layout, metrics = score_spec_layout(spec, sites, search.mask, str(dirpath / "layout.csv"))
    meta = layout_metadata(spec, search, metrics, len(sites), problem)
    write_layout_csv(dirpath / "layout.csv", layout)
    atomic_write_json(dirpath / "layout.json", meta)
    res["scoring_s"] = time.perf_counter() - t
    res["scoring_peak_mib"] = _peak_mib()
    _reset_peak()
    t = time.perf_counter()

    class _Result:  # what write_deliverables reads of a DesignResult
        pass

    r = _Result()
    r.spec, r.search, r.layout, r.metrics, r.problem, r.sites = (
        spec,
        search,
        layout,
        meta,
        problem,
        sites,
    )
    write_deliverables(r, dirpath)
    res["outputs_s"] = time.perf_counter() - t
    res["outputs_peak_mib"] = _peak_mib()
    res.update(
        {
            "psl_db": meta["psl_db"],
            "asl_db": meta["asl_db"],
            "search_psl_db": search.psl_db,
            "envelope_bound_db": meta.get("envelope_bound_db"),
            "evaluations": search.evaluations,
            "runtime_s": search.runtime_s,
            "stopped_by": search.stopped_by,
            "time_limit_s": spec.time_limit_s,
            "baseline_psl_db": meta.get("baseline_random", {}).get("psl_db"),
        }
    )
    return res


def stage_limit(spec_path: str, method: str) -> dict:
    from thinning.search import run_method
    from thinning.spec import load_spec

    spec = load_spec(spec_path)
    problem = spec.problem(spec.sites())
    t = time.perf_counter()
    s = run_method(problem, method, spec.seed, spec.options, time_limit_s=spec.time_limit_s)
    wall = time.perf_counter() - t
    return {
        "method": method,
        "time_limit_s": spec.time_limit_s,
        "runtime_s": s.runtime_s,
        "wall_s": wall,
        "over": s.runtime_s / spec.time_limit_s - 1.0,
        "psl_db": s.psl_db,
        "evaluations": s.evaluations,
        "stopped_by": s.stopped_by,
    }


def run_stage(*args) -> dict:
    """Run a stage in a fresh process; its JSON result."""
    r = subprocess.run(
        [sys.executable, __file__, "--stage", *map(str, args)], capture_output=True, text=True
    )
    if r.returncode != 0:
        raise SystemExit(f"stage {args[0]} failed:\n{r.stderr[-2000:]}")
    return json.loads(r.stdout.strip().splitlines()[-1])


# -- an independent PSL ------------------------------------------------------------------------
def independent_psl(csv_path: Path, f_ghz: float, scan_deg: float) -> float:
    """PSL of a layout CSV [dB] with none of thinning's code (see the module docstring)."""
    import csv

    import scipy.fft

    with open(csv_path, newline="") as f:
        rows = list(csv.DictReader(f))
    x = np.array([float(r["x_mm"]) for r in rows]) * 1e-3
    y = np.array([float(r["y_mm"]) for r in rows]) * 1e-3
    lam = 0.299792458 / f_ghz
    k = 2 * math.pi / lam
    ux, uy = np.unique(x), np.unique(y)
    gx, gy = np.diff(ux).min(), np.diff(uy).min()
    c = np.rint((x - ux[0]) / gx).astype(int)
    r = np.rint((y - uy[0]) / gy).astype(int)
    grid = np.zeros((r.max() + 1, c.max() + 1), np.float32)
    grid[r, c] = 1.0
    n = float(len(x))
    pr, pc = 8 * grid.shape[0], 8 * grid.shape[1]
    p = np.abs(scipy.fft.rfft2(grid, s=(pr, pc))) ** 2 / n**2
    du, dv = lam / (gx * pc), lam / (gy * pr)
    tu, tv = lam / gx, lam / gy
    radius = 1 + math.sin(math.radians(scan_deg))
    # every stored sample (u ≥ 0 half) stands for its aliases: in the region if one is
    cols = np.arange(p.shape[1]) * du
    rows_v = np.fft.fftfreq(pr) * tv
    inside = np.zeros(p.shape, bool)
    for a in range(-2, 3):
        for b in range(-2, 3):
            inside |= np.hypot(cols[None, :] + a * tu, rows_v[:, None] + b * tv) <= radius
    # main beam: along 360 rays, out to the first minimum of the sampled pattern
    win = 64
    sub = np.concatenate([p[-win:, : win + 1], p[: win + 1, : win + 1]])  # v from −win..win
    main = np.zeros(p.shape, bool)
    for phi in np.linspace(-math.pi / 2, math.pi / 2, 361):
        prev = math.inf
        for step in np.arange(0, win, 0.25):
            cu, cv = step * math.cos(phi), step * math.sin(phi)
            val = sub[int(round(cv)) + win, int(round(cu))]
            if val > prev * (1 + 1e-9):
                break
            prev = val
            main[int(round(cv)) % pr, int(round(cu))] = True
    level = np.where(inside & ~main, p, 0.0)
    # local maxima (8 neighbours, wrapping), the 64 highest
    peak = level > 0
    for dr in (-1, 0, 1):
        for dc in (-1, 0, 1):
            if dr or dc:
                peak &= level >= np.roll(np.roll(level, dr, 0), dc, 1)
    rr, cc = np.nonzero(peak)
    top = np.argsort(-level[rr, cc])[:64]
    best = float(level[rr[top], cc[top]].max())
    for i in top:
        u0, v0 = cc[i] * du, rows_v[rr[i]]
        span_u, span_v = du, dv
        for _ in range(2):
            us = u0 + np.linspace(-span_u, span_u, 9)
            vs = v0 + np.linspace(-span_v, span_v, 9)
            ex = np.exp(1j * k * np.outer(us, x))  # (9, N)
            ey = np.exp(1j * k * np.outer(vs, y))
            af = np.abs(ex @ ey.T) ** 2 / n**2  # (u, v)
            a, b = np.unravel_index(np.argmax(af), af.shape)
            best = max(best, float(af[a, b]))
            u0, v0 = us[a], vs[b]
            span_u, span_v = span_u / 4, span_v / 4
    return 10 * math.log10(best)


# -- the run -----------------------------------------------------------------------------------
def parse_case(name: str):
    size, _, fill = name.partition("@")
    return size, (float(fill) / 100 if fill else 0.5)


def measured_command(cmd) -> tuple[float, float]:
    launcher = (
        "import resource, subprocess, sys, time\n"
        "t = time.perf_counter()\n"
        "r = subprocess.run(sys.argv[1:])\n"
        "t = time.perf_counter() - t\n"
        "rss = resource.getrusage(resource.RUSAGE_CHILDREN).ru_maxrss\n"
        "print(t, rss)\n"
        "sys.exit(r.returncode)\n"
    )
    r = subprocess.run([sys.executable, "-S", "-c", launcher, *cmd], capture_output=True, text=True)
    if r.returncode != 0:
        raise SystemExit(f"{' '.join(cmd)} failed: {r.stderr[-500:]}")
    wall, rss = r.stdout.split()[-2:]
    return float(wall), int(rss) / 1024


def main():
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--stage", nargs="+", help=argparse.SUPPRESS)
    ap.add_argument("--sizes", default="16k,65k,262k,65k@25")
    ap.add_argument("--time-limit", type=float, default=240.0)
    ap.add_argument("--limit-check", default="", help="SIZE:SECONDS,... every method")
    ap.add_argument("--cli", action="store_true", help="also time `thinning design` (largest)")
    ap.add_argument("--keep", default=None, help="folder for the specs and designs")
    ap.add_argument("--json", default=None, help="merge the figures into this JSON file")
    args = ap.parse_args()
    if args.stage:
        name, *rest = args.stage
        fn = {"start": stage_start, "design": stage_design, "limit": stage_limit}[name]
        print(json.dumps(fn(*rest)))
        return
    machine = (
        f"{platform.machine()}, {os.cpu_count()} CPUs, Python "
        f"{platform.python_version()}, numpy {np.__version__}"
    )
    print(f"machine: {machine}; load average {os.getloadavg()[0]:.1f} at the start")
    tmp = Path(args.keep or tempfile.mkdtemp(prefix="bench-large-"))
    tmp.mkdir(parents=True, exist_ok=True)
    cases = []
    for name in [s for s in args.sizes.split(",") if s]:
        size, fill = parse_case(name)
        spec = tmp / f"{size}-{round(fill * 100)}.toml"
        spec.write_text(spec_text(RADII[size], fill, args.time_limit))
        st = run_stage("start", spec)
        out = tmp / f"design-{size}-{round(fill * 100)}"
        de = run_stage("design", spec, out)
        t = time.perf_counter()
        indep = independent_psl(out / "layout.csv", FREQ_GHZ, SCAN_DEG)
        t_indep = time.perf_counter() - t
        target = TARGETS.get((size, fill)) if args.time_limit >= 240 else None
        case = {
            "case": name,
            "fill": fill,
            **{k: st[k] for k in ("sites", "elements", "envelope_bound_db", "envelope_s")},
            "start_psl_db": st["start_psl_db"],
            "start_diffusion_psl_db": st["start_diffusion_psl_db"],
            "start_draws_psl_db": st["start_draws_psl_db"],
            "start_s": st["start_s"],
            "start_peak_mib": st["peak_rss_mib"],
            **de,
            "independent_psl_db": indep,
            "independent_difference_db": de["psl_db"] - indep,
            "independent_s": t_indep,
            "target_db": target,
            "target_met": None if target is None else bool(de["psl_db"] <= target),
            "pipeline_s": de["setup_s"] + de["search_s"] + de["scoring_s"] + de["outputs_s"],
            "peak_mib": max(de[k] for k in de if k.endswith("_peak_mib")),
        }
        cases.append(case)
        print(
            f"{name}: {case['sites']:,} sites, {case['elements']:,} on; envelope bound "
            f"{case['envelope_bound_db']:.2f} dB ({case['envelope_s']:.1f} s); start "
            f"{case['start_psl_db']:.2f} dB (diffusion {case['start_diffusion_psl_db']:.2f}, "
            f"draws {case['start_draws_psl_db']:.2f}; {case['start_s']:.1f} s); "
            f"{case['method']} {case['psl_db']:.2f} dB after {case['runtime_s']:.1f} s "
            f"({case['evaluations']:,} evaluations, {case['stopped_by']}); independent "
            f"{indep:.3f} dB (difference {case['independent_difference_db']:+.3f} dB)"
            + (
                ""
                if target is None
                else f"; target {target} dB: " + ("met" if case["target_met"] else "NOT met")
            )
        )
        print(
            f"  stages: setup {de['setup_s']:.1f} s / {de['setup_peak_mib']:.0f} MiB, search "
            f"{de['search_s']:.1f} s / {de['search_peak_mib']:.0f} MiB, scoring "
            f"{de['scoring_s']:.1f} s / {de['scoring_peak_mib']:.0f} MiB, outputs "
            f"{de['outputs_s']:.1f} s / {de['outputs_peak_mib']:.0f} MiB; pipeline "
            f"{case['pipeline_s']:.1f} s, peak {case['peak_mib']:.0f} MiB; limit "
            f"{de['time_limit_s']:g} s kept to "
            f"{100 * (de['runtime_s'] / de['time_limit_s'] - 1):+.1f} %"
        )
    limits = []
    for item in [s for s in args.limit_check.split(",") if s]:
        size, secs = item.split(":")
        spec = tmp / f"limit-{size}.toml"
        spec.write_text(spec_text(RADII[size], 0.5, float(secs)))
        for method in ("random", "density", "genetic", "ift", "anneal"):
            r = run_stage("limit", spec, method)
            r["size"] = size
            limits.append(r)
            print(
                f"time limit {float(secs):g} s at {size}: {method} ran {r['runtime_s']:.1f} s "
                f"({100 * r['over']:+.1f} %), PSL {r['psl_db']:.2f} dB, {r['evaluations']:,} "
                f"evaluations ({r['stopped_by']})"
            )
    cli = None
    if args.cli and cases:
        big = max(cases, key=lambda c: c["sites"])
        size, fill = parse_case(big["case"])
        spec = tmp / f"{size}-{round(fill * 100)}.toml"
        thinning = str(Path(sys.executable).with_name("thinning"))
        wall, rss = measured_command(
            [thinning, "design", str(spec), "--out", str(tmp / "cli"), "--quiet"]
        )
        cli = {"case": big["case"], "seconds": wall, "peak_rss_mib": rss}
        print(f"thinning design ({big['case']}): {wall:.1f} s, peak RSS {rss:.0f} MiB")
    if args.json:
        path = Path(args.json)
        data = json.loads(path.read_text()) if path.exists() else {}
        data["bench_large"] = {
            "machine": machine,
            "date": time.strftime("%Y-%m-%d"),
            "time_limit_s": args.time_limit,
            "cases": cases,
            "limits": limits,
            "cli": cli,
        }
        path.write_text(json.dumps(data, indent=2) + "\n")


if __name__ == "__main__":
    main()
