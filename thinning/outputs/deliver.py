"""The files a design hands over: drawings for the mechanical designers and the review report.

``thinning design`` calls :func:`write_deliverables` with the staging folder of its file set,
after ``layout.csv`` and before ``layout.json``; ``thinning export`` and ``thinning report``
call the pieces for any layout file. matplotlib and ezdxf are imported here, never at package
import.
"""

from __future__ import annotations

import datetime as _dt
from pathlib import Path

import numpy as np

from .fill_image import LARGE_ELEMENTS

__all__ = [
    "write_deliverables",
    "write_drawings",
    "write_report",
    "default_stress",
    "DEFAULT_TRIALS",
]

#: Monte Carlo trials of the built-array analysis, for ``stress``, ``report`` and a design's
#: report alike (a spec's [stress] trials overrides it).
DEFAULT_TRIALS = 200

#: Monte Carlo trials of the report's built-array section above LARGE_ELEMENTS elements, and
#: the longest best-of-random baseline  [s]: 10 s, 3 s above LARGE_ELEMENTS (there the PSL of
#: random draws hardly spreads: at 262,309 sites the best of 6 and of 20 draws differed by
#: 0.000 and 0.034 dB for two seeds).
LARGE_TRIALS, BASELINE_MAX_S, LARGE_BASELINE_S = 16, 10.0, 3.0


def write_drawings(
    out: Path,
    layout,
    aperture=None,
    *,
    frequency_hz=None,
    lattice=None,
    name="",
    sites=None,
    footprint_mm=None,
    formats=("dxf", "svg", "png"),
    stem="layout",
    tiling=None,
) -> list[Path]:
    """layout.dxf / layout.svg / layout.png (whichever ``formats`` asks for); with a
    ``tiling`` (:class:`thinning.geometry.tiles.Tiling`) the DXF gains its TILES and CHIPS
    layers and tiles.png (the per-tile count map) is written."""
    from .drawing import layout_title, write_layout_drawings
    from .dxf import write_layout_dxf

    today = _dt.date.today()
    title = layout_title(layout, frequency_hz=frequency_hz, lattice=lattice, name=name)
    files = []
    if "dxf" in formats:
        files.append(
            write_layout_dxf(
                out / f"{stem}.dxf",
                layout,
                aperture,
                footprint_mm=footprint_mm,
                title=f"{title}, {today.isoformat()}",
                tiling=tiling,
            )
        )
    figs = [f for f in formats if f in ("svg", "png")]
    if figs:
        files += write_layout_drawings(
            out,
            layout,
            aperture,
            stem=stem,
            footprint_mm=footprint_mm,
            title=title,
            sites=sites,
            formats=figs,
        )
    if tiling is not None and "png" in formats:
        from .tile_map import write_tile_map_png

        files.append(write_tile_map_png(out / "tiles.png", tiling, aperture))
    return files


def default_stress(
    layout, frequency, scan_max, q, spec_stress: dict | None, robust=None, spec=None
):
    """The built-array analysis for the report: the scan table always; band edges and Monte
    Carlo errors when the spec states them ([stress], [band] or [robust]). Without an error
    the Monte Carlo is a single trial (the nominal array), which the report leaves out.
    With ``spec``, its scan set, band, mask and element pattern (the same requirement as
    the design)."""
    from ..analysis.stress import stress_layout
    from ..engine.excitation import ErrorModel

    cfg = dict(spec_stress or {})
    band = cfg.get("band_ghz")
    model = robust or ErrorModel(
        cfg.get("amplitude_error_db", 0.0),
        cfg.get("phase_error_deg", 0.0),
        cfg.get("phase_bits"),
        cfg.get("failures", 0),
    )
    if layout.grid_fit() is None:
        return None
    extra = {}
    if spec is not None:
        extra = spec.score_options(len(layout))
    trials = int(cfg.get("trials", DEFAULT_TRIALS)) if model.any else 1
    if len(layout) > LARGE_ELEMENTS:  # each trial is a full-plane transform of the panel
        trials = min(trials, LARGE_TRIALS)
    return stress_layout(
        layout,
        frequency,
        scan_max,
        q,
        band=None if band is None else (band[0] * 1e9, band[1] * 1e9),
        steering=cfg.get("steering", "phase"),
        model=model,
        trials=trials,
        seed=int(cfg.get("seed", 0)),
        **extra,
    )


def write_report(
    path: Path,
    layout,
    frequency_hz,
    scan_max,
    q,
    *,
    aperture=None,
    sites=None,
    history=None,
    baseline=None,
    provenance=None,
    layout_png=None,
    metrics=None,
    stress=None,
    title="Thinned array design report",
    spec=None,
    requirements=None,
    footprint_mm=None,
    tiling=None,
) -> Path:
    from .report import report_for_layout

    xy = None if sites is None else np.column_stack([sites.x, sites.y])
    return report_for_layout(
        path,
        layout,
        frequency_hz,
        scan_max,
        q,
        aperture=aperture,
        sites=xy,
        history=history,
        baseline=baseline,
        provenance=provenance,
        layout_png=layout_png,
        metrics=metrics,
        stress=stress,
        title=title,
        spec=spec,
        requirements=requirements,
        footprint_mm=footprint_mm,
        tiling=tiling,
    )


def write_deliverables(result, out: Path) -> list[Path]:
    """Drawings, the best-of-random baseline and report.html for a finished design, into
    ``out`` (the staging folder of the run's file set); returns the paths written. The
    baseline's figures go into ``result.metrics`` (layout.json is written after this). A
    tiled design (``result.tiling``, a :class:`thinning.geometry.tiles.Tiling`) also gets
    tiles.png, the TILES and CHIPS layers of the DXF and the report's tiles section."""
    from ..search import run_method

    spec = result.spec
    fp = spec.output.get("footprint_mm")
    name = str(spec.raw.get("name", Path(spec.source).stem))
    tiling = getattr(result, "tiling", None)
    files = write_drawings(
        out,
        result.layout,
        spec.aperture,
        frequency_hz=spec.frequency,
        lattice=spec.lattice,
        name=name,
        sites=result.sites,
        footprint_mm=fp,
        tiling=tiling,
    )
    baseline = None
    s = result.search
    if spec.method != "random" and s.evaluations > 0:
        # best of random draws at the same number of evaluations, for the comparison; its
        # time is capped at a quarter of the design's, and the report states the count reached
        baseline = run_method(
            result.problem,
            "random",
            spec.seed,
            {},
            max_evaluations=s.evaluations,
            time_limit_s=max(
                1.0,
                min(
                    0.25 * s.runtime_s,
                    LARGE_BASELINE_S if len(result.layout) > LARGE_ELEMENTS else BASELINE_MAX_S,
                ),
            ),
        )
        result.metrics["baseline_random"] = {
            "psl_db": baseline.psl_db,
            "asl_db": baseline.asl_db,
            "evaluations": baseline.evaluations,
            "runtime_s": round(baseline.runtime_s, 3),
        }
        release = getattr(result.problem, "release", None)
        if release is not None:
            release()  # the caches the baseline built, before the built-array analysis
    stress = default_stress(
        result.layout,
        spec.frequency,
        spec.scan_max,
        spec.element_exponent,
        spec.raw.get("stress"),
        spec.robust,
        spec,
    )
    m = result.metrics
    prov = {
        k: m.get(k)
        for k in (
            "version",
            "method",
            "seed",
            "evaluations",
            "runtime_s",
            "stopped_by",
            "deterministic",
            "spec_file",
        )
    }
    prov["spec_digest"] = m.get("spec_digest_sha256")
    files.append(
        write_report(
            out / "report.html",
            result.layout,
            spec.frequency,
            spec.scan_max,
            spec.element_exponent,
            aperture=spec.aperture,
            sites=result.sites,
            history=s.history,
            baseline=baseline,
            provenance=prov,
            metrics=m,
            stress=stress,
            title=f"{name}: thinned array design report",
            spec=spec,
            requirements=m.get("requirements"),
            footprint_mm=fp,
            tiling=tiling,
        )
    )
    return files
