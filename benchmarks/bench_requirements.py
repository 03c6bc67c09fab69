#!/usr/bin/env python3
"""A design for its sector, band and mask against the same budget designed for the cone.

The example spec ``layouts/sector-surveillance.toml`` (an invented upright surveillance
panel: ±45° azimuth × 0–20° elevation, 9.0–9.8 GHz with phase shifters set at 9.4 GHz, a
−25 dB mask toward the ground, −16 dB elsewhere, a beamwidth limit) is designed twice with
the same method, seed, budget and number of evaluations:

1. **as specified**: the search's objective is the worst excess over the mask over every
   beam of the sector at every frequency of the band (the eroded mask on the broadside
   pattern, :mod:`thinning.engine.mask`), with the beamwidth penalty;
2. **for the enclosing cone at f₀ only**: the same spec with ``[scan] max_deg`` the half-angle
   of the cone that encloses the sector, no ``[band]``, no mask and no beamwidth limit (the
   PSL over the cone's disc, the only requirement the tool took before).

Both layouts are then judged against the full requirement (``score_layout`` with the
spec's sector, band, mask and element pattern; :func:`thinning.analysis.requirements.
judge`), and against the cone's own figure, and the two are printed side by side.

The example's rows are 19 mm apart: fine for its 20° of elevation scan, not for the
enclosing cone, which lets grating lobes in. A second pair of runs puts the same panel and
budget on an 18 mm equilateral triangular lattice, free of grating lobes over the whole cone
at the band's top, to show what the sector, band and mask are worth when the lattice does
not decide it. Last, the cost of one evaluation (a batch of 128 layouts, the best of 15
rounds taken in turn): the PSL over the cone, the worst excess over the mask over the
sector and band, and that with the beamwidth penalty.
Usage: ``python benchmarks/bench_requirements.py [--evaluations N] [--seed S] [--only 1|2]
[--json FILE]``.
"""

from __future__ import annotations

import os

for _var in ("OPENBLAS_NUM_THREADS", "OMP_NUM_THREADS", "MKL_NUM_THREADS"):
    os.environ.setdefault(_var, "1")

import argparse
import copy
import json
import math
import platform
import time
from pathlib import Path

import numpy as np

from thinning.analysis.requirements import judge
from thinning.analysis.score import score_layout
from thinning.geometry.layout import Layout
from thinning.search import run_method
from thinning.spec import load_spec, parse_spec

SPEC = Path(__file__).resolve().parent.parent / "layouts" / "sector-surveillance.toml"


def cone_spec(spec):
    """The same spec for the sector's enclosing cone at f₀: no band, mask or HPBW limit."""
    raw = copy.deepcopy(spec.raw)
    raw["scan"] = {"max_deg": round(math.degrees(spec.coverage.scan.enclosing_angle), 3)}
    raw.pop("band", None)
    req = raw.get("requirements", {})
    for key in ("mask", "hpbw_max_deg"):
        req.pop(key, None)
    out = parse_spec(raw, spec.source, spec.digest)
    out.text = spec.text
    return out


def triangular_variant(spec):
    """The example's panel and budget on an 18 mm equilateral triangular lattice."""
    raw = copy.deepcopy(spec.raw)
    raw["array"]["lattice"] = "triangular"
    raw["array"]["spacing_mm"] = 18.0
    raw["array"]["element_pattern"] = str(SPEC.parent / raw["array"]["element_pattern"])
    out = parse_spec(raw, spec.source, spec.digest)
    out.text = spec.text
    return out


def evaluation_cost(spec, batch=128, rounds=15):
    """Milliseconds per layout of the problem's evaluation: plain cone, mask, + HPBW."""
    from thinning.search.problem import ThinningProblem

    sites = spec.sites()
    n = spec.elements(len(sites))

    def build(**kw):
        return ThinningProblem(sites, n, spec.wavelength, spec.scan_max, **kw)

    problems = {
        "PSL over the enclosing cone": build(),
        "worst excess over the mask, sector and band": build(
            coverage=spec.coverage, limits=spec.limits(n)
        ),
        "the same with the beamwidth penalty": build(
            coverage=spec.coverage, limits=spec.limits(n), hpbw_max=spec.hpbw_max
        ),
    }
    genomes = next(iter(problems.values())).random_genomes(np.random.default_rng(0), batch)
    for p in problems.values():
        p.evaluate(genomes[:16])  # compile or load the kernels, build the tables
    best = dict.fromkeys(problems, math.inf)
    for _ in range(rounds):
        for name, p in problems.items():
            t = time.perf_counter()
            p.evaluate(genomes)
            best[name] = min(best[name], time.perf_counter() - t)
    print(f"\none evaluation, {len(sites)} sites, best of {rounds} rounds of {batch} layouts:")
    base = best["PSL over the enclosing cone"]
    out = {}
    for name, t in best.items():
        out[name] = round(t / batch * 1e3, 4)
        print(f"  {name:<46} {out[name]:.3f} ms per layout ({t / base:.2f}×)")
    return out


def design(spec, full, sites, evaluations, seed):
    """Search one spec; score the layout against the full requirement and the cone."""
    problem = spec.problem(sites)
    t = time.perf_counter()
    r = run_method(problem, spec.method, seed, spec.options, max_evaluations=evaluations)
    seconds = time.perf_counter() - t
    layout = Layout.from_sites(sites, r.mask)
    n = len(layout)
    m = score_layout(
        layout,
        full.frequency,
        full.scan_max,
        full.element_exponent,
        sites=sites,
        oversampling=full.oversampling,
        **full.score_options(n),
    ).to_dict()
    cone = score_layout(
        layout, full.frequency, full.scan_max, full.element_exponent, sites=sites
    ).to_dict()
    verdicts = judge(full.requirements, m)
    return {
        "evaluations": r.evaluations,
        "search_s": round(seconds, 2),
        "psl_db": m["psl_db"],
        "asl_db": m["asl_db"],
        "mask_margin_db": (m.get("mask") or {}).get("margin_db"),
        "hpbw_widest_deg": m["hpbw_widest_deg"],
        "cone_psl_db": cone["psl_db"],
        "cone_asl_db": cone["asl_db"],
        "verdicts": {
            k: {"met": v["met"], "margin": v["margin_db"], "unit": v["unit"]}
            for k, v in verdicts.items()
        },
        "mask_worst": m.get("mask"),
    }


def main():
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--evaluations", type=int, default=None, help="default: the spec's")
    ap.add_argument("--seed", type=int, default=None, help="default: the spec's")
    ap.add_argument("--only", choices=["1", "2"], default=None, help="one pair of runs")
    ap.add_argument("--json", default=None)
    args = ap.parse_args()
    machine = f"{platform.machine()}, {os.cpu_count()} CPUs, Python {platform.python_version()}"
    print(f"machine: {machine}", flush=True)
    example = load_spec(SPEC)
    scenarios = [
        ("1", "the example: rectangular lattice, 16 mm columns, 19 mm rows", example),
        ("2", "the same panel on an 18 mm triangular lattice", triangular_variant(example)),
    ]
    results = {}
    for key, title, full in scenarios:
        if args.only not in (None, key):
            continue
        results[title] = compare(title, full, args)
    results["evaluation_ms"] = evaluation_cost(example)
    if args.json:
        path = Path(args.json)
        data = json.loads(path.read_text()) if path.exists() else {}
        data["bench_requirements"] = {
            "machine": machine,
            "date": time.strftime("%Y-%m-%d"),
            "spec": SPEC.name,
            "scenarios": results,
        }
        path.write_text(json.dumps(data, indent=2) + "\n")


def compare(title, full, args):
    """One pair of designs, printed; returns their figures."""
    cone = cone_spec(full)
    sites = full.sites()
    evaluations = args.evaluations or full.max_evaluations
    seed = full.seed if args.seed is None else args.seed
    n = full.elements(len(sites))
    print(
        f"\n{title}\n{SPEC.name}: {n} of {len(sites)} sites, {full.method}, seed {seed}, "
        f"{evaluations:,} evaluations each\n"
        f"  requirement: {full.coverage.describe()}; "
        + "; ".join(e.describe() for e in full.mask)
        + f"; PSL <= {full.requirements.get('psl_db')} dB elsewhere; "
        f"HPBW <= {full.hpbw_max} deg\n"
        f"  enclosing cone: {math.degrees(cone.scan_max):.2f} deg at "
        f"{full.frequency / 1e9:g} GHz",
        flush=True,
    )
    rows = {
        "sector, band and mask": design(full, full, sites, evaluations, seed),
        "enclosing cone at f0": design(cone, full, sites, evaluations, seed),
    }
    head = (
        f"\n{'designed for':<24}{'mask margin':>12}{'PSL':>9}{'ASL':>9}{'HPBW':>8}"
        f"{'cone PSL':>10}{'search':>9}   verdicts against the full requirement"
    )
    print(head)
    print(f"{'':<24}{'[dB]':>12}{'[dB]':>9}{'[dB]':>9}{'[deg]':>8}{'[dB]':>10}{'[s]':>9}")
    for name, r in rows.items():
        verdicts = ", ".join(
            f"{k} {'met' if v['met'] else 'FAILS'} ({v['margin']:+.2f} {v['unit']})"
            for k, v in r["verdicts"].items()
        )
        print(
            f"{name:<24}{r['mask_margin_db']:>+12.2f}{r['psl_db']:>9.2f}{r['asl_db']:>9.2f}"
            f"{r['hpbw_widest_deg']:>8.2f}{r['cone_psl_db']:>10.2f}{r['search_s']:>9.1f}   "
            f"{verdicts}"
        )
    print(
        "mask margin, PSL and ASL: worst over every beam of the sector at every frequency "
        "of the band; HPBW: the widest beam over the sector and band; cone PSL: over the "
        "enclosing cone's disc at f0 (the second design's own objective)."
    )
    return {"evaluations": evaluations, "seed": seed, "rows": rows}


if __name__ == "__main__":
    main()
