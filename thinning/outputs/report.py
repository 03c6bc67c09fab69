"""One self-contained HTML report of a design: figures, tables, cautions and provenance.

The report is a single file: CSS inline, the layout drawing as inline SVG (vector, zoomable,
element ids on demand), the pattern figures embedded as base64 PNG data URIs, no scripts and
no external resources, so it can be mailed, archived and opened offline. It is written
atomically (:mod:`thinning.io.atomic`): a failed run leaves no half-written file.

It reads as a design review does: first the verdict on each requirement, how the run ended,
the panel and its constraints and the figures of merit; then the drawing, the pattern, the
scanned and built array, the search; the cautions, the provenance and the spec itself.
Sections without data (no search history for a layout file, no error model) are left out.

:func:`build_report` lays out what the caller has computed (the HTML pieces are in
:mod:`thinning.outputs.report_sections`); :func:`report_for_layout` computes the figures for
one layout (scoring, u-v map, principal cuts, worst sidelobe across the scan cone,
convergence, comparison) and then builds the report. matplotlib is imported only by the
latter.
"""

from __future__ import annotations

import base64
import datetime as _dt
import html
import math
from collections.abc import Mapping, Sequence
from pathlib import Path

import numpy as np

from ..errors import OutputError
from ..geometry.layout import Layout
from ..io.atomic import atomic_write
from . import report_sections as rs
from .fill_image import LARGE_ELEMENTS
from .svg_drawing import SVG_CSS, svg_controls


def scan_views_html(metrics, spec) -> str:
    """The mask's entries and worst point (:func:`thinning.outputs.scan_views.mask_html`)."""
    if spec is None or not getattr(spec, "mask", None):
        return ""
    from .scan_views import mask_html

    return mask_html(metrics, spec)


__all__ = ["CAUTIONS", "SECTIONS", "build_report", "report_for_layout"]

#: What the figures in a report do not cover, in plain words (shown in every report).
CAUTIONS: tuple[str, ...] = (
    "Radio-frequency exposure: a phased array concentrates its power along the beam. Before "
    "the array transmits, check the field strength everywhere people can be, over the whole "
    "scan range and at full power, against the exposure limits in force where it operates.",
    "Idealised model: every figure here is computed for identical ideal elements with a "
    "power pattern cos θ raised to the power q, fed with exact amplitudes and phases. "
    "Coupling between neighbouring elements, the different embedded patterns of edge and "
    "interior elements (which vary from site to site in a thinned array), the feed network, "
    "manufacturing tolerances and failed elements are not included.",
    "Verification: use these results to choose a layout, not to certify it. Confirm the "
    "pattern, gain and sidelobe levels by a full-wave electromagnetic simulation of the "
    "actual panel and by measurement of the built hardware.",
    "Codes and practice: radio licences and emission limits, safety and building codes, and "
    "the judgement of qualified, licensed engineers take precedence over this report.",
)

#: Section ids and headings, in order (a section without data is left out).
SECTIONS: tuple[tuple[str, str], ...] = (
    ("summary", "Summary"),
    ("layout", "Layout"),
    ("tiles", "Tiles and chips"),
    ("pattern", "Pattern in u-v"),
    ("cuts", "Principal-plane cuts"),
    ("scan", "Worst sidelobe across the scan cone"),
    ("stress", "What the built array will do"),
    ("convergence", "Convergence"),
    ("comparison", "Comparison with best-of-random"),
    ("cautions", "Cautions"),
    ("provenance", "Provenance"),
    ("spec", "Appendix: the spec"),
)

_CSS = (
    """
body{font-family:system-ui,-apple-system,"Segoe UI",Helvetica,Arial,sans-serif;margin:0 auto;
max-width:1040px;padding:1.2em 1.6em;color:#1b1b1b;line-height:1.45}
h1{font-size:1.6em;margin-bottom:.2em}h2{border-bottom:1px solid #ccc;padding-bottom:.15em;
margin-top:1.8em}
nav a{margin-right:.9em;font-size:.9em}
table{border-collapse:collapse;margin:.6em 0;font-size:.92em}
th,td{border:1px solid #d0d0d0;padding:.25em .6em;text-align:left;vertical-align:top}
th{background:#f2f2f2;font-weight:600}td.num{text-align:right;font-variant-numeric:tabular-nums}
img{max-width:100%;height:auto;display:block;margin:.6em 0;border:1px solid #eee}
.note{color:#555;font-size:.9em}.missing{color:#777;font-style:italic}
.warn{background:#fff4d6;border-left:4px solid #e0a000;padding:.3em .6em}
tr.met td:last-child{color:#17692a}tr.failed td:last-child{color:#b00020}
pre.spec{background:#f7f7f7;border:1px solid #ddd;padding:.6em;overflow:auto;font-size:.85em}
ul.cautions li{margin-bottom:.5em}
.tilemap svg{width:100%;height:auto;max-height:85vh;display:block}
"""
    + SVG_CSS
)


def _e(text) -> str:
    return html.escape(str(text), quote=True)


def _img(png: bytes | None, alt: str) -> str:
    if not png:
        return f'<p class="missing">{_e(alt)}: not available.</p>'
    data = base64.b64encode(png).decode("ascii")
    return f'<img src="data:image/png;base64,{data}" alt="{_e(alt)}">'


def build_report(
    path,
    *,
    metrics: Mapping,
    layout: Layout | None = None,
    layout_png: bytes | None = None,
    layout_svg: str | None = None,
    figures: Mapping[str, bytes] | None = None,
    history=None,
    baseline=None,
    provenance: Mapping | None = None,
    cautions: Sequence[str] = CAUTIONS,
    title: str = "Thinned array design report",
    scan_table: dict | None = None,
    stress: dict | None = None,
    spec=None,
    requirements: Mapping | None = None,
    notes: Mapping[str, str] | None = None,
    tile_map: str | None = None,
) -> Path:
    """Write the report as one self-contained HTML file.

    Parameters
    ----------
    path : str or os.PathLike
        The HTML file; its folder must exist.
    metrics : dict
        Figures of the layout, as :meth:`thinning.analysis.score.ScoreResult.to_dict` gives them
        (a design's ``layout.json`` adds the constraint counts).
    layout : Layout, optional
        Only used to fill in the element count when ``metrics`` lacks it.
    layout_svg : str, optional
        The drawing as an ``<svg>`` element (:func:`thinning.outputs.svg_drawing.layout_svg`);
        shown with zoom buttons and an element-id switch.
    layout_png : bytes, optional
        A PNG drawing, used when there is no SVG.
    figures : dict of str to bytes
        PNG images under the keys ``uv_map``, ``cuts``, ``scan_psl``, ``convergence`` and
        ``comparison``.
    history : list of dict, optional
        Convergence records of the search; without it the convergence section is left out.
    baseline : SearchResult or dict, optional
        Best-of-random run: ``psl_db``, ``asl_db`` [dB], ``evaluations``; without it the
        comparison section is left out.
    provenance : dict, optional
        ``version``, ``method``, ``seed``, ``spec_file``, ``spec_digest``, ``runtime_s``,
        ``evaluations``, ``stopped_by``, ``deterministic``, ``date``, and any further keys;
        the version and date are filled in when missing.
    cautions : sequence of str
    title : str
    scan_table : dict, optional
        From :func:`thinning.outputs.figures.scan_psl_table`.
    stress : dict, optional
        From :func:`thinning.analysis.stress.stress_layout`; without it the section is left
        out.
    spec : thinning.spec.Spec, optional
        Its name and description head the summary, its constraints are listed, and its text
        is the appendix.
    requirements : dict, optional
        Verdicts of :func:`thinning.analysis.requirements.judge`, shown first.
    notes : dict of str to str, optional
        Plain-text notes under the figures: ``pattern`` (where the PSL is).
    tile_map : str, optional
        The per-tile count map as an ``<svg>`` element
        (:func:`thinning.outputs.tile_map.tile_map_svg`), shown in the tiles section (which
        appears when ``metrics`` has ``tiles``).

    Returns
    -------
    pathlib.Path

    Raises
    ------
    OutputError
        The file cannot be written (nothing is left behind).
    """
    from .. import __version__

    path = Path(path)
    figures = dict(figures or {})
    notes = dict(notes or {})
    m = dict(metrics)
    if "elements" not in m and layout is not None:
        m["elements"] = len(layout)
    prov = dict(provenance or {})
    prov.setdefault("version", __version__)
    prov.setdefault(
        "date", _dt.datetime.now(_dt.UTC).replace(microsecond=0).isoformat().replace("+00:00", "Z")
    )
    if prov.get("evaluations") is None and history:
        prov["evaluations"] = history[-1].get("evaluations")

    lead = ""
    if spec is not None:
        name = str(spec.raw.get("name") or Path(spec.source).stem)
        desc = spec.raw.get("description")
        lead = f"<p><b>{_e(name)}</b>" + (f": {_e(desc)}" if desc else "") + "</p>"
    if requirements is not None:
        lead += "<h3>Requirements</h3>" + rs.requirements_html(requirements)
        lead += scan_views_html(m, spec)
    lead += rs.run_html(prov)
    lead += rs.constraints_html(spec, m)
    kind = spec.lattice.kind if spec is not None else None
    drawing = (
        svg_controls(layout_svg)
        + f'<p class="note">{_e(notes.get("layout", ""))} Vector drawing in millimetres: zoom '
        "with the buttons (or the browser), hover an element for its id and position, or "
        "show every id.</p>"
        if layout_svg
        else _img(layout_png, "Drawing of the layout")
    )
    pattern_note = notes.get("pattern", "")
    body = {
        "summary": lead + "<h3>Figures of merit</h3>" + rs.summary_html(m, kind),
        "layout": drawing,
        "tiles": _tiles_section(m, tile_map),
        "pattern": _img(figures.get("uv_map"), "Array factor in u-v")
        + _mask_figure(figures)
        + (f"<p>{_e(pattern_note)}</p>" if pattern_note else "")
        + '<p class="note">Broadside beam; the cross marks the highest sidelobe (and its '
        "repeats on a lattice). Steering the beam to (u₀, v₀) moves the visible circle by "
        "(u₀, v₀) over this map; the sidelobes of every beam in the cone therefore lie "
        "inside the outer circle.</p>",
        "cuts": _img(figures.get("cuts"), "Principal-plane cuts")
        + '<p class="note">The broadside pattern against the observation angle θ. The arrow '
        "above marks the steering range ±θmax, where the beam peak can be put; it is not a "
        "range of observation angles: a steered beam moves its whole pattern by sin θ₀ in "
        "direction cosines, so its sidelobes fall anywhere in the visible region.</p>",
        "scan": ""
        if scan_table is None
        else _img(figures.get("scan_psl"), "Worst sidelobe against scan angle")
        + rs.scan_html(scan_table, m.get("psl_db")),
        "stress": rs.stress_html(stress),
        "convergence": _img(figures.get("convergence"), "Best PSL against evaluations")
        if history
        else "",
        "comparison": rs.comparison_html(
            m, prov.get("evaluations"), baseline, _img(figures.get("comparison"), "comparison")
        ),
        "cautions": '<ul class="cautions">'
        + "".join(f"<li>{_e(c)}</li>" for c in cautions)
        + "</ul>",
        "provenance": rs.provenance_html(prov),
        "spec": ""
        if spec is None or not getattr(spec, "text", "")
        else rs.spec_appendix_html(Path(spec.source).name, spec.text, spec.digest),
    }
    shown = [(sid, head) for sid, head in SECTIONS if body[sid]]
    nav = "".join(f'<a href="#{sid}">{_e(head)}</a>' for sid, head in shown)
    parts = [
        "<!DOCTYPE html>",
        '<html lang="en"><head><meta charset="utf-8">',
        '<meta name="viewport" content="width=device-width, initial-scale=1">',
        f"<title>{_e(title)}</title><style>{_CSS}</style></head><body>",
        f"<header><h1>{_e(title)}</h1>",
        f'<p class="note">Generated by thinning {_e(prov["version"])} on {_e(prov["date"])}.'
        "</p></header>",
        f"<nav>{nav}</nav>",
    ]
    for sid, head in shown:
        parts.append(f'<section><h2 id="{sid}">{_e(head)}</h2>{body[sid]}</section>')
    parts.append("</body></html>\n")
    atomic_write(path, "\n".join(parts))
    return path


def report_for_layout(
    path,
    layout: Layout,
    frequency_hz: float,
    scan_max: float = 0.0,
    q: float = 1.0,
    *,
    aperture=None,
    sites=None,
    history=None,
    baseline=None,
    provenance: Mapping | None = None,
    layout_png: bytes | None = None,
    title: str = "Thinned array design report",
    metrics: Mapping | None = None,
    stress: dict | None = None,
    spec=None,
    requirements: Mapping | None = None,
    footprint_mm: float | None = None,
    tiling=None,
) -> Path:
    """Score a layout, draw every figure and write the HTML report.

    Parameters
    ----------
    path : str or os.PathLike
        The HTML file; its folder must exist (checked before any work).
    layout : Layout
    frequency_hz : float  [Hz]
    scan_max : float  [rad]
    q : float  [1]   element-pattern exponent
    aperture : thinning.geometry.aperture.Aperture, optional   drawn with the layout
    sites : (M, 2) array, optional  [m]
        Every candidate site: the filled aperture in the cuts, the empty sites in the drawing,
        and the fill and the random-thinning expectation.
    history : list of dict, optional   convergence records of the search
    baseline : SearchResult or dict, optional   best-of-random run
    provenance : dict, optional
    layout_png : bytes, optional   a PNG drawing to show instead of the inline SVG one (above
        :data:`thinning.outputs.fill_image.LARGE_ELEMENTS` elements the local-fill drawing is
        drawn here when none is given)
    title : str
    metrics : dict, optional   the layout's figures if already computed (else scored here)
    stress : dict, optional    :func:`thinning.analysis.stress.stress_layout` output
    spec : thinning.spec.Spec, optional   name, description, constraints, the appendix
    requirements : dict, optional   verdicts (:func:`thinning.analysis.requirements.judge`)
    footprint_mm : float, optional  [mm]   element diameter in the drawing
    tiling : thinning.geometry.tiles.Tiling, optional   the count map of the tiles section

    Returns
    -------
    pathlib.Path

    Raises
    ------
    OutputError
        The folder is missing or the file cannot be written.
    """
    from ..analysis.score import score_layout
    from ..units import wavelength as _wavelength
    from . import figures as fg
    from .svg_drawing import layout_svg
    from .tile_map import tile_map_svg

    path = Path(path)
    if not path.parent.is_dir():
        raise OutputError(f"{path}: cannot write: folder {str(path.parent)!r} does not exist")
    lam = _wavelength(frequency_hz)
    site_xy = None
    if sites is not None:
        site_xy = np.asarray(sites, dtype=float).reshape(-1, 2)
    if metrics is None:
        metrics = score_layout(layout, frequency_hz, scan_max, q, sites=site_xy).to_dict()
    metrics = dict(metrics)
    where = _psl_where(metrics, lam, scan_max)
    coverage = None if spec is None or not spec.has_scan_set else spec.coverage
    limits = None if spec is None else spec.limits(len(layout))
    reach = 1.0 + math.sin(scan_max) if coverage is None else coverage.reach
    # a little beyond the sidelobe disc, so that its edge shows on the map
    uv = fg.uv_power_map(layout, lam, 1.04 * reach, scan_max=scan_max)
    # the cone's beams (a sector's are in the built-array section)
    table = None if coverage is not None else fg.scan_psl_table(layout, lam, scan_max, uv_map=uv)
    filled = Layout(site_xy[:, 0], site_xy[:, 1]) if site_xy is not None and len(site_xy) else None
    sector = coverage is not None and coverage.scan.kind == "sector"
    uv_fig = fg.fig_uv_map(
        layout,
        lam,
        0.0 if sector else scan_max,  # a sector's region is drawn, not its enclosing cone
        uv_map=uv,
        psl_db=metrics["psl_db"],
        marks=None if where is None else where["aliases"],
    )
    if (coverage is not None or limits is not None) and uv[1] is not None:
        from .scan_views import draw_zones

        cov = coverage or spec.coverage
        draw_zones(uv_fig.axes[0], cov, limits)
        handles, labels = uv_fig.axes[0].get_legend_handles_labels()
        for leg in uv_fig.legends:
            leg.remove()
        uv_fig.legend(handles, labels, loc="outside lower center", ncols=2, fontsize=7)
    figs = {
        "uv_map": uv_fig,
        "cuts": fg.fig_principal_cuts(layout, lam, scan_max, filled),
    }
    if table is not None:
        figs["scan_psl"] = fg.fig_scan_psl(table, metrics["psl_db"])
    worst = metrics.get("mask") or {}
    if limits is not None and worst.get("beam"):
        from .scan_views import fig_mask_cuts, mask_cut_data

        data = mask_cut_data(layout, spec.coverage, limits, worst)
        figs["mask_cuts"] = fig_mask_cuts(data, worst)
    if history:
        figs["convergence"] = fg.fig_convergence(history, rs._get(baseline, "history"))
    if baseline is not None:
        figs["comparison"] = fg.fig_comparison(
            metrics, {"psl_db": rs._get(baseline, "psl_db"), "asl_db": rs._get(baseline, "asl_db")}
        )
    svg = None
    if layout_png is None and len(layout) > LARGE_ELEMENTS:
        # an inline SVG of every element would be tens of MB (131,000 elements: 28 MB and
        # 0.4 GB to build); the drawing of the local fill stands for them, as in layout.png
        layout_png = fg.png_bytes(fg.fig_layout(layout, aperture, site_xy))
    elif layout_png is None:
        svg = layout_svg(layout, aperture, site_xy, footprint_mm, title)
    pngs = {k: fg.png_bytes(f) for k, f in figs.items()}
    return build_report(
        path,
        metrics=metrics,
        layout=layout,
        layout_png=layout_png,
        layout_svg=svg,
        figures=pngs,
        history=history,
        baseline=baseline,
        provenance=provenance,
        title=title,
        scan_table=table,
        stress=stress,
        spec=spec,
        requirements=requirements,
        notes={
            "pattern": "" if where is None else where["text"],
            "layout": _dims(layout, aperture),
        },
        tile_map=None if tiling is None else tile_map_svg(tiling, aperture),
    )


def _tiles_section(metrics: Mapping, tile_map: str | None) -> str:
    """The tiles section (:mod:`thinning.outputs.tile_report`) when the layout is tiled."""
    if not metrics.get("tiles"):
        return ""
    from .tile_report import tiles_html

    return tiles_html(metrics["tiles"], metrics, tile_map)


def _mask_figure(figures) -> str:
    """The worst beam against the sidelobe mask (in the pattern section), when there is one."""
    if not figures.get("mask_cuts"):
        return ""
    return (
        "<h3>The worst beam against the sidelobe mask</h3>"
        + _img(figures["mask_cuts"], "The worst beam against the mask")
        + '<p class="note">The beam that meets the mask\'s worst point, at that frequency and '
        "at the band's edges, along the θ-cut through the worst direction, and the mask's "
        "limit along the same cut (array factor, relative to the beam's peak). Phase "
        "steering set at the design frequency squints the beam at the band's edges. On the "
        "u-v map above, the dashed outlines show where each limit of the mask reaches the "
        "broadside pattern for some beam and frequency (the mask carried over the scan set "
        "and band), inside the sidelobe region of the scan set and band (white).</p>"
    )


def _dims(layout, aperture) -> str:
    """The overall dimensions in words."""
    from .svg_drawing import overall_dimensions

    d = overall_dimensions(layout, aperture)
    ex, ey = d["elements"]
    text = f"Element centres span {ex:.1f} × {ey:.1f} mm (x × y, centre to centre)."
    if d["panel"] is not None:
        text = f"Panel {d['panel'][0]:.1f} × {d['panel'][1]:.1f} mm overall (outline). " + text
    return text


def _psl_where(metrics: Mapping, wavelength: float, scan_max: float) -> dict | None:
    """:func:`report_sections.psl_location` of the scored PSL (None without its place)."""
    uv = metrics.get("psl_uv") or [None, None]
    if not all(rs._finite(c) for c in uv):
        return None
    lat = metrics.get("lattice") or {}
    basis = lat.get("basis_mm")
    if basis is None and lat.get("kind") == "linear" and lat.get("step_mm"):
        basis = [[lat["step_mm"], 0.0], [0.0, 0.0]]
    return rs.psl_location(uv, basis, wavelength * 1e3, math.degrees(scan_max))
