r"""Compare thinning densities: run one spec at several element budgets.

For every budget N the spec's method runs exactly as ``thinning design`` would (same seed),
and its layout goes into a sub-folder ``nNNNNN/``. ``sweep.csv`` collects the figures, one row
per budget, with the theory beside them:

* the expected ASL of random thinning (references.md row 5), exact for N of M sites and
  including the filled aperture's own sidelobes;
* the median PSL of random thinning (:class:`RandomThinning`): the exact expectation of
  row 5 split into its coherent part, the filled aperture's own pattern, and a random part,
  whose peak over n_s independent samples follows Steinberg's form (row 6); near full fill it
  tends to the filled aperture's PSL, at low fill to Steinberg's median of the random floor;
* Steinberg's median peak of the random floor alone (references.md row 6; Steinberg, IEEE TAP
  20(2), 1972, form from memory): with n_s independent sidelobe samples, each exponentially
  distributed about the mean level b, the peak's distribution is
  :math:`P(\mathrm{peak} \le r) \approx (1 - e^{-r/b})^{n_s}` and its median is
  :math:`b\cdot\ln(1/(1 - 2^{-1/n_s})) \approx b\cdot\ln(n_s/\ln 2)`;
  n_s is the area of the sidelobe region in u-v divided by the area of one beam
  ((λ/L)² per resolution cell, common practice);
* the filled aperture's own PSL and ASL;
* the cell-gain rule for the directivity;
* the verdict of the spec's requirements (:mod:`thinning.analysis.requirements`).

Every budget's folder is written as one set of files (:func:`thinning.io.fileset.file_set`),
and so are the sweep's own files. A rerun into the same folder reuses every budget whose
``layout.json`` was made from the same spec (digest) with the same method and seed, so an
interrupted sweep resumes where it stopped and a finished one gives the same ``sweep.csv``.
"""

from __future__ import annotations

import csv
import dataclasses
import io
import json
import math
from dataclasses import dataclass
from pathlib import Path

import numpy as np
from scipy.optimize import brentq
from scipy.stats import ncx2

from ..engine.metrics import expected_asl_random
from ..errors import SpecError
from ..geometry.layout import Layout
from ..io.atomic import atomic_write, atomic_write_json
from ..io.fileset import file_digests, file_set
from ..spec import Spec, load_spec
from ..units import to_db
from .cluster import executor_for, spec_from_text
from .design import (
    prepare_output,
    score_spec_layout,
    search_and_score,
    tiled_figures,
    tiling_of,
    write_run_files,
)
from .requirements import all_met, describe, judge
from .score import layout_engine

__all__ = [
    "SWEEP_COLUMNS",
    "parse_budgets",
    "steinberg_median_peak",
    "independent_samples",
    "RandomThinning",
    "run_sweep",
    "SweepResult",
]

SWEEP_COLUMNS = [
    "elements",
    "fill",
    "psl_db",
    "asl_db",
    "expected_asl_db",
    "method_expected_asl_db",
    "random_median_psl_db",
    "steinberg_median_psl_db",
    "directivity_dbi",
    "pi_n_dbi",
    "directivity_minus_pi_n_db",
    "hpbw_x_deg",
    "hpbw_y_deg",
    "grating_lobes",
    "meets_requirement",
    "evaluations",
    "runtime_s",
    "stopped_by",
    "folder",
]


def parse_budgets(elements: str | None, fill: str | None, sites: int) -> list[int]:
    """Budgets from ``--elements LIST|START:STOP:STEP`` and/or ``--fill LIST``.

    STOP is inclusive. Budgets are sorted, duplicates removed; each must lie in 2 … M.
    """
    out: set[int] = set()
    if elements:
        text = elements.strip()
        try:
            if ":" in text:
                parts = [int(p) for p in text.split(":")]
                if len(parts) != 3 or parts[2] <= 0:
                    raise ValueError
                start, stop, step = parts
                out.update(range(start, stop + 1, step))
            else:
                out.update(int(p) for p in text.split(",") if p.strip())
        except ValueError:
            raise SpecError(
                f"--elements {elements!r}: expected a list like 100,150,200 or "
                "START:STOP:STEP like 100:300:50"
            ) from None
        if ":" in text and start > stop:
            raise SpecError(
                f"--elements {elements!r}: the range from {start} to {stop} is empty "
                "(START:STOP:STEP counts up, and STOP is included)"
            )
    if fill:
        try:
            fills = [float(p) for p in fill.split(",") if p.strip()]
        except ValueError:
            raise SpecError(f"--fill {fill!r}: expected fractions like 0.3,0.5") from None
        for f in fills:
            if not 0 < f <= 1:
                raise SpecError(f"--fill {f!r}: a fill fraction lies in (0, 1]")
            out.add(int(round(f * sites)))
    if not out:
        raise SpecError("give the budgets with --elements and/or --fill")
    bad = [n for n in sorted(out) if not 2 <= n <= sites]
    if bad:
        raise SpecError(f"--elements {bad[0]}: budgets must lie between 2 and the {sites} sites")
    return sorted(out)


def tile_budgets(spec: Spec, sites, chips: str | None, per_tile: str | None, k_of: dict):
    """Element budgets of ``--chips`` (k chips: k × channels_per_chip elements) and
    ``--per-tile`` (k per tile: :func:`per_tile_budget`); ``k_of`` gets budget → (how, k)."""
    out = []
    if chips:
        c = spec.tiles.channels_per_chip
        if c is None:
            raise SpecError(f"--chips: needs tiles.channels_per_chip in {spec.source}")
        for k in _int_list(chips, "--chips", 1, len(sites) // c):
            out.append(k * c)
            k_of[k * c] = ("chips", k)
    if per_tile:
        nx, ny = spec.tiles.size
        for k in _int_list(per_tile, "--per-tile", 1, nx * ny):
            n = per_tile_budget(spec, sites, k)
            out.append(n)
            k_of[n] = ("per_tile", k)
    return out


def _int_list(text: str, flag: str, lo: int, hi: int) -> list[int]:
    """A list (1,2,3) or range (START:STOP:STEP, STOP included) of integers in [lo, hi]."""
    try:
        if ":" in text:
            a, b, c = (int(v) for v in text.split(":"))
            vals = list(range(a, b + 1, c)) if c > 0 else []
        else:
            vals = [int(v) for v in text.split(",") if v.strip()]
    except ValueError:
        raise SpecError(
            f"{flag} {text!r}: expected a list like 8,12,16 or a range like 8:16:4"
        ) from None
    bad = [v for v in vals if not lo <= v <= hi]
    if not vals or bad:
        raise SpecError(f"{flag} {text!r}: values must lie between {lo} and {hi}")
    return vals


def independent_samples(
    sites_x, sites_y, wavelength: float, scan_max: float, linear: bool
) -> float:
    """Number of independent sidelobe samples n_s of an aperture (common practice estimate).

    The sidelobe region (radius 1 + sin θmax in u-v) divided by the resolution cell of the
    aperture: (λ/Lx)·(λ/Ly) in 2-D, λ/L in 1-D, with L the extent plus one pitch.
    """
    radius = 1 + math.sin(scan_max)
    xs = np.unique(np.round(np.asarray(sites_x), 9))
    lx = float(np.ptp(xs)) + (float(np.min(np.diff(xs))) if xs.size > 1 else wavelength / 2)
    if linear:
        return max(1.0, 2 * radius * lx / wavelength)
    ys = np.unique(np.round(np.asarray(sites_y), 9))
    ly = float(np.ptp(ys)) + (float(np.min(np.diff(ys))) if ys.size > 1 else wavelength / 2)
    return max(1.0, math.pi * radius**2 * lx * ly / wavelength**2)


def steinberg_median_peak(asl: float, n_s: float) -> float:
    """Median peak of n_s independent exponential sidelobe samples of mean ``asl``  [1].

    .. math::  r_{1/2} = \\mathrm{ASL}\\cdot\\ln\\frac{1}{1 - 2^{-1/n_s}}
               \\approx \\mathrm{ASL}\\cdot\\ln(n_s/\\ln 2)

    (Steinberg 1972, references.md row 6; the exact median of the stated distribution).
    """
    return asl * -math.log(1 - 2 ** (-1 / n_s))


class RandomThinning:
    r"""Median peak sidelobe of choosing N of M sites at random, filled sidelobes included.

    With exactly N of M sites on, each is on with probability N/M, so the mean array factor is
    (N/M)·F with F the filled aperture's: per direction the coherent part of |AF|²/N² is the
    filled aperture's own normalised pattern P_f, and the rest is a zero-mean random sum of
    mean power b·(1 − P_f), b = (M − N)/(N(M − 1)). Together they are the exact expectation of
    references.md row 5,

    .. math::  E|AF|^2/N^2 = P_f + b\,(1 - P_f) = rac{M(N-1)}{N(M-1)}P_f + b

    (Lo 1964; Skolnik, Sherman & Ogg 1964). Taking the random part as complex Gaussian (many
    independent terms), 2|AF/N|²/σ² at a direction is non-central χ² with 2 degrees of freedom
    and non-centrality 2P_f/σ², σ² = b(1 − P_f). As in Steinberg's form (references.md row 6;
    Steinberg, IEEE TAP 20(2), 1972, form from memory) the peak is taken over n_s independent
    samples, here spread over the sidelobe region in proportion to its area, so with sample k
    of the filled pattern carrying the share c_k of the region,

    .. math::  P(\mathrm{peak} \le r) = \prod_k F_k(r)^{\,n_s c_k}

    and the median solves P = 1/2. Where P_f vanishes this is Steinberg's (1 − e^{−r/b})^{n_s};
    at N = M it is the filled aperture's sampled PSL. Not implemented: correlation between
    neighbouring samples, and the difference between exact-N and independent draws beyond the
    variance above.

    Parameters
    ----------
    power, weight : arrays  [1]
        The filled aperture's normalised power at the samples and their shares of the
        sidelobe region (:func:`random_thinning_theory` gives one sample per resolution cell);
        grouped into 0.1 dB bins of the power (down to 40 dB below the highest; the rest as 0).
    sites : int   M
    independent : float   n_s
    """

    BIN_DB = 0.1
    SPAN_DB = 40.0

    def __init__(self, power, weight, sites: int, independent: float):
        p = np.asarray(power, dtype=float).ravel()
        w = np.asarray(weight, dtype=float).ravel()
        keep = w > 0
        p, w = np.clip(p[keep], 0.0, 1.0), w[keep]
        top = float(p.max()) if p.size else 0.0
        db = 10 * np.log10(np.maximum(p, 1e-300))
        floor = 10 * math.log10(top) - self.SPAN_DB if top > 0 else 0.0
        k = np.where(db < floor, -1, np.floor((db - floor) / self.BIN_DB)).astype(int)
        groups = np.unique(k)
        self.power = np.array([0.0 if g < 0 else float(np.max(p[k == g])) for g in groups])
        share = np.array([w[k == g].sum() for g in groups]) / w.sum()
        self.exponent = independent * share
        self.sites = int(sites)
        self.independent = float(independent)
        self.filled_psl = top

    def _log_cdf(self, r: float, b: float) -> float:
        var = b * (1.0 - self.power)
        f = ncx2.cdf(2 * r / var, 2, 2 * self.power / var)
        return float(np.sum(self.exponent * np.log(np.maximum(f, 1e-300))))

    def median_peak(self, n: int) -> float:
        """Median PSL of N of the M sites chosen at random  [1, linear]."""
        m = self.sites
        if n >= m or m <= 1:
            return self.filled_psl
        b = (m - n) / (n * (m - 1))
        half = math.log(0.5)
        lo = max(self.filled_psl, b) * 1e-3
        hi = max(self.filled_psl, b) * 1e3
        t = brentq(lambda x: self._log_cdf(math.exp(x), b) - half, math.log(lo), math.log(hi))
        return math.exp(t)


def _cell(coords, wavelength: float) -> float:
    """Resolution cell λ/L along one axis  [1], L the extent plus one pitch (as n_s)."""
    c = np.unique(np.round(np.asarray(coords), 9))
    length = float(np.ptp(c)) + (float(np.min(np.diff(c))) if c.size > 1 else wavelength / 2)
    return wavelength / length


def random_thinning_theory(spec: Spec, sites, n_s: float) -> RandomThinning:
    """:class:`RandomThinning` of a spec's candidate sites.

    The filled pattern is sampled on the engine's grid over the sidelobe region of the scan
    cone, and pooled into blocks of one resolution cell (λ/L per axis, the cell that defines
    n_s): each block stands for one independent sample, whose coherent part is the highest
    filled-pattern value in it (a lobe of the filled pattern spans about one cell; taking its
    samples one by one would dilute its peak among its flanks).
    """
    filled = Layout.from_sites(sites)
    eng, grid, _, _ = layout_engine(filled, spec.wavelength, spec.scan_max, spec.oversampling)
    d = eng.detail(grid) if grid is not None else eng.detail()
    g = d.grid
    p = np.asarray(d.power, dtype=float).reshape(g.nr, g.nc)
    w = np.asarray(d.sidelobe_weight, dtype=float).reshape(g.nr, g.nc)
    bc = max(1, round(_cell(sites.x, spec.wavelength) / g.du))
    br = 1 if g.nr == 1 or g.dv <= 0 else max(1, round(_cell(sites.y, spec.wavelength) / g.dv))
    rows, cols = -(-g.nr // br) * br, -(-g.nc // bc) * bc
    pp = np.zeros((rows, cols))
    ww = np.zeros((rows, cols))
    pp[: g.nr, : g.nc] = np.where(w > 0, p, 0.0)
    ww[: g.nr, : g.nc] = w
    blocks = (rows // br, br, cols // bc, bc)
    top = pp.reshape(blocks).max(axis=(1, 3))
    share = ww.reshape(blocks).sum(axis=(1, 3))
    return RandomThinning(top, share, len(sites), n_s)


@dataclass
class SweepResult:
    rows: list
    folder: Path
    smallest_meeting: dict | None
    filled: dict
    reused: list
    files: list
    requirement: float | None = None
    spec: Spec | None = None
    independent_samples: float = 1.0
    sites: int = 0
    requirements: dict | None = None
    theory: RandomThinning | None = None


def _budget_folder(out: Path, n: int) -> Path:
    return out / f"n{n:06d}"


def _done(folder: Path, spec: Spec, n: int) -> dict | None:
    """The layout.json of a finished budget made from this spec, method and seed, or None."""
    try:
        meta = json.loads((folder / "layout.json").read_text())
    except (OSError, ValueError):
        return None
    if not (folder / "layout.csv").is_file():
        return None
    same = (
        meta.get("spec_digest_sha256") == spec.digest
        and meta.get("panel_drawing") == spec.panel_drawing
        and meta.get("method") == spec.method
        and meta.get("seed") == spec.seed
        and meta.get("elements") == n
    )
    return meta if same else None


def budget_spec(spec: Spec, n: int, how: tuple | None = None) -> Spec:
    """The spec at budget ``n``; ``how`` = ("per_tile", k): with ``tiles.elements_per_tile =
    k``; ("chips", k): in whole chips."""
    spec.budget_elements, spec.budget_fill = n, None
    if how is not None and how[0] == "per_tile":
        spec.tiles = dataclasses.replace(
            spec.tiles, elements_per_tile=how[1], max_elements_per_tile=None
        )
    elif how is not None:
        spec.tiles = dataclasses.replace(spec.tiles, whole_chips=True)
    return spec


def per_tile_budget(spec: Spec, sites, k: int) -> int:
    """The element budget of k elements per tile: k in every full tile, and every partial
    tile at its limit (k scaled by the share of positions it keeps, rounded down)."""
    from ..geometry.tiles import TileGrid

    rules = dataclasses.replace(spec.tiles, elements_per_tile=k, max_elements_per_tile=None)
    _, forbidden = spec.constraint_masks(sites)
    return int(TileGrid(sites, rules, spec.source, usable=~forbidden).limit.sum())


def _design_budget(
    spec_text: str, source: str, n: int, per_tile: tuple | None = None
) -> tuple[np.ndarray, dict]:
    """One budget (a work unit, run wherever the runner puts it): design and score.

    Takes the spec's text, not its path, and returns the site mask and the contents of
    layout.json; the caller writes the files, so a remote worker needs no shared folder.
    """
    spec = budget_spec(spec_from_text(spec_text, source), n, per_tile)
    sites = spec.sites()
    problem = spec.problem(sites)
    search, layout, meta = search_and_score(spec, sites, problem)
    if spec.method == "density":
        meta["method_expected_asl_db"] = round(float(to_db(density_expected_asl(problem, spec))), 6)
    if problem.tile_grid is not None:
        tiled_figures(spec, problem, layout, search, meta, False)
    return search.mask, meta


def _write_budget(folder: Path, spec: Spec, sites, mask, meta: dict, per_tile=None) -> None:
    """The sub-folder of one budget, as one set: layout.csv (and tiles.csv with tiles),
    then layout.json (which marks it done)."""
    folder.mkdir(parents=True, exist_ok=True)
    tiling = None
    if spec.tiles is not None:
        tiling = tiling_of(
            budget_spec(dataclasses.replace(spec), meta["elements"], per_tile), sites, mask
        )
    write_run_files(folder, Layout.from_sites(sites, mask), meta, tiling=tiling)


def _pareto_front(spec: Spec, sites, budgets, out: Path, progress) -> tuple[dict, list]:
    """NSGA-II once over the budget range; each front point scored and written to pNNNNNN/.

    A rerun reuses a front already written for the same spec, method, seed and range.
    """
    from ..search.pareto import run_pareto

    lo, hi = min(budgets), max(budgets)
    try:
        old = json.loads((out / "pareto.json").read_text())
    except (OSError, ValueError):
        old = None
    if (
        old
        and old.get("spec_digest_sha256") == spec.digest
        and old.get("seed") == spec.seed
        and old.get("range") == [lo, hi]
    ):
        metas = {}
        for folder in old["folders"]:
            try:
                meta = json.loads((out / folder / "layout.json").read_text())
            except (OSError, ValueError):
                break
            meta["_folder"] = folder
            metas[meta["elements"]] = meta
        else:
            return metas, sorted(metas)
    spec.budget_elements, spec.budget_fill = hi, None
    problem = spec.problem(sites)
    pop = int(spec.options.get("pareto_population", 64))
    res = run_pareto(
        problem,
        spec.seed,
        lo,
        hi,
        population=pop,
        max_evaluations=spec.max_evaluations,
        time_limit_s=spec.time_limit_s,
    )
    metas, folders = {}, []
    for pt in res["front"]:
        lay, meta = score_spec_layout(spec, sites, pt.mask)
        meta.update(
            {
                "method": "pareto",
                "seed": spec.seed,
                "evaluations": res["evaluations"],
                "runtime_s": round(res["runtime_s"], 3),
                "stopped_by": res["stopped_by"],
                "spec_digest_sha256": spec.digest,
                "search_psl_db": pt.psl_db,
                "generations": res["generations"],
            }
        )
        folder = f"p{pt.elements:06d}"
        (out / folder).mkdir(exist_ok=True)
        write_run_files(out / folder, lay, meta)
        meta["_folder"] = folder
        metas[pt.elements] = meta
        folders.append(folder)
        if progress:
            progress(pt.elements, meta)
    atomic_write_json(
        out / "pareto.json",
        {
            "spec_digest_sha256": spec.digest,
            "seed": spec.seed,
            "range": [lo, hi],
            "folders": folders,
            "evaluations": res["evaluations"],
            "runtime_s": round(res["runtime_s"], 3),
            "generations": res["generations"],
        },
    )
    return metas, []


def density_expected_asl(problem, spec: Spec) -> float:
    """Expected ASL of the density-tapered draws  [1, linear].

    E|AF|² = |Σ pₙ e^{jψ}|² + Σ pₙ(1 − pₙ) (references.md row 5; Skolnik, Sherman & Ogg 1964):
    the sidelobes of the aperture weighted by the probabilities plus Σp(1 − p)/(Σp)².
    """
    from ..engine.metrics import expected_asl_tapered
    from ..search.density import taper_probabilities

    pg = taper_probabilities(problem, {"taper": "lp", **spec.options})  # as the method draws
    p = np.where(problem.site_gene >= 0, pg[np.maximum(problem.site_gene, 0)], 0.0)
    p = np.where(problem.pinned_sites, 1.0, p)
    grid = problem.sites.to_grid(p[None].astype(np.float32))
    own = float(problem.engine.evaluate(grid, refine=False).asl[0])
    return own + expected_asl_tapered(p)


def _filled_figures(spec: Spec, sites) -> dict:
    _, r = score_spec_layout(spec, sites, np.ones(len(sites), dtype=bool))
    return {
        "psl_db": r["psl_db"],
        "asl_db": r["asl_db"],
        "directivity_dbi": r["directivity_dbi"],
        "elements": len(sites),
    }


def run_sweep(
    spec_path,
    budgets_elements: str | None,
    budgets_fill: str | None,
    out_dir,
    workers: int = 1,
    progress=None,
    cluster: str | None = None,
    extra_outputs=None,
    budgets_chips: str | None = None,
    budgets_per_tile: str | None = None,
) -> SweepResult:
    """Run the spec at every budget and write sweep.csv (and the per-budget folders).

    The budgets run in this process, in ``workers`` local processes, or on the Dask cluster
    at ``cluster`` (a scheduler address; ``workers`` is then ignored); the results do not
    depend on which. The spec's text goes to the workers and their layouts come back, so
    every file is written here (see :mod:`thinning.analysis.cluster`). ``sweep.csv``,
    ``sweep.json`` and what ``extra_outputs(result, folder)`` writes (the trade page) are one
    set of files, ``sweep.json`` its record.
    """
    spec = load_spec(spec_path)
    sites = spec.sites()
    m = len(sites)
    per_tile: dict[int, tuple] = {}  # budget -> how it was asked for
    budgets = []
    if budgets_elements or budgets_fill or not (budgets_chips or budgets_per_tile):
        budgets = parse_budgets(budgets_elements, budgets_fill, m)
    if budgets_chips or budgets_per_tile:
        if spec.tiles is None:
            flag = "--chips" if budgets_chips else "--per-tile"
            raise SpecError(f"{flag}: needs a [tiles] table in {spec.source}")
        budgets += tile_budgets(spec, sites, budgets_chips, budgets_per_tile, per_tile)
        budgets = sorted(set(budgets))
    for n in budgets:  # every budget must be feasible (symmetry, pins) before any output
        s2 = budget_spec(load_spec(spec_path), n, per_tile.get(n))
        try:
            s2.problem(sites)
        except SpecError as exc:
            raise SpecError(f"{exc} (in the sweep at {n} elements)") from None
    out = prepare_output(out_dir)
    metas: dict[int, dict] = {}
    reused = []
    todo = []
    if spec.method == "pareto":
        metas, reused = _pareto_front(spec, sites, budgets, out, progress)
        budgets = sorted(metas)
    for n in budgets if spec.method != "pareto" else []:
        meta = _done(_budget_folder(out, n), spec, n)
        if meta is not None:
            metas[n] = meta
            reused.append(n)
        else:
            todo.append(n)
    if todo:
        text = Path(spec_path).read_bytes().decode("utf-8")
        k = len(todo)
        with executor_for(min(workers, k), cluster) as runner:
            done = runner.imap(
                _design_budget,
                [text] * k,
                [str(spec_path)] * k,
                todo,
                [per_tile.get(n) for n in todo],
            )
            for n, (mask, meta) in zip(todo, done, strict=True):
                _write_budget(_budget_folder(out, n), spec, sites, mask, meta, per_tile.get(n))
                metas[n] = meta
                if progress:
                    progress(n, meta)
    filled = _filled_figures(spec, sites)
    lin = spec.lattice.kind == "linear"
    n_s = independent_samples(sites.x, sites.y, spec.wavelength, spec.scan_max, lin)
    theory = random_thinning_theory(spec, sites, n_s)
    reqs = dict(spec.requirements)
    filled_asl = 10 ** (filled["asl_db"] / 10)
    rows = []
    for n in budgets:
        meta = metas[n]
        asl_rand = expected_asl_random(n, m, filled_asl)
        floor = (m - n) / (n * (m - 1)) if m > 1 else 0.0
        verdict = all_met(judge(reqs, meta))
        rows.append(
            {
                "elements": n,
                "fill": round(n / m, 6),
                "psl_db": meta["psl_db"],
                "asl_db": meta["asl_db"],
                "expected_asl_db": round(float(to_db(asl_rand)), 6),
                "method_expected_asl_db": meta.get(
                    "method_expected_asl_db", round(float(to_db(asl_rand)), 6)
                ),
                "random_median_psl_db": round(float(to_db(theory.median_peak(n))), 6),
                "steinberg_median_psl_db": None
                if floor <= 0
                else round(float(to_db(steinberg_median_peak(floor, n_s))), 6),
                "directivity_dbi": meta["directivity_dbi"],
                "pi_n_dbi": meta["pi_n_dbi"],
                "directivity_minus_pi_n_db": meta["directivity_minus_pi_n_db"],
                "hpbw_x_deg": meta["hpbw_deg"][0],
                "hpbw_y_deg": meta["hpbw_deg"][1],
                "grating_lobes": meta["grating_lobes"],
                "meets_requirement": "" if verdict is None else verdict,
                "evaluations": meta["evaluations"],
                "runtime_s": meta["runtime_s"],
                "stopped_by": meta["stopped_by"],
                "folder": metas[n].get("_folder", _budget_folder(out, n).name),
            }
        )
    smallest = None
    if reqs:
        ok = [r for r in rows if r["meets_requirement"] is True]
        smallest = min(ok, key=lambda r: r["elements"]) if ok else None
    buf = io.StringIO()
    w = csv.DictWriter(buf, SWEEP_COLUMNS, lineterminator="\n")
    w.writeheader()
    for r in rows:
        w.writerow({k: ("" if r[k] is None else r[k]) for k in SWEEP_COLUMNS})
    req = reqs.get("psl_db")
    res = SweepResult(rows, out, smallest, filled, reused, [], req, spec, n_s, m, reqs, theory)
    record = {
        "spec_file": Path(spec.source).name,
        "spec_digest_sha256": spec.digest,
        "method": spec.method,
        "seed": spec.seed,
        "sites": m,
        "independent_samples": n_s,
        "requirement_psl_db": req,
        "requirements": {k: describe(k, v) for k, v in reqs.items()},
        "smallest_meeting_requirement": None if smallest is None else smallest["elements"],
        "smallest_tried": min(budgets),
        "filled_aperture": filled,
        "rows": rows,
    }
    with file_set(out, "sweep.json") as stage:
        atomic_write(stage / "sweep.csv", buf.getvalue())
        names = ["sweep.csv", "sweep.json"]
        if extra_outputs is not None:
            names += [Path(f).name for f in extra_outputs(res, stage) or ()]
        record["files"] = file_digests(stage, exclude=("sweep.json",))
        atomic_write_json(stage / "sweep.json", record)
    res.files = [out / n for n in names]
    return res


def theory_curves(res: SweepResult, n_points: int = 80) -> dict:
    """Random-thinning ASL and median PSL, Steinberg's median of the random floor alone and
    the cell-gain rule on a fine N grid."""
    m = res.sites
    lo = max(2, min(r["elements"] for r in res.rows) // 2)
    n = np.unique(np.linspace(lo, m, n_points).round().astype(int))
    filled_asl = 10 ** (res.filled["asl_db"] / 10)
    asl = np.array([expected_asl_random(int(k), m, filled_asl) for k in n])
    floor = np.array([(m - k) / (k * (m - 1)) if m > 1 else 0.0 for k in n])
    med = np.array(
        [steinberg_median_peak(f, res.independent_samples) if f > 0 else np.nan for f in floor]
    )
    theory = res.theory
    rand = np.array([theory.median_peak(int(k)) for k in n]) if theory is not None else med
    r0 = res.rows[0]
    rule = r0["pi_n_dbi"] + 10 * np.log10(n / r0["elements"])  # the rule is linear in N
    with np.errstate(invalid="ignore", divide="ignore"):
        return {
            "elements": n,
            "expected_asl_db": 10 * np.log10(asl),
            "random_median_psl_db": 10 * np.log10(rand),
            "steinberg_median_psl_db": 10 * np.log10(med),
            "pi_n_dbi": rule,
        }
