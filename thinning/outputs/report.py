"""One self-contained HTML report of a design: figures, tables, cautions and provenance.

The report is a single file: CSS inline, images embedded as base64 PNG data URIs, no
scripts and no external resources, so it can be mailed, archived and opened offline. It is
written atomically (:mod:`thinning.io.atomic`): a failed run leaves no half-written file.

:func:`build_report` lays out figures and figures-of-merit that the caller has computed;
:func:`report_for_layout` computes them for one layout (scoring, u-v map, principal cuts,
worst sidelobe across the scan cone, convergence, comparison) and then builds the report.
matplotlib is imported only by the latter.
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

__all__ = ["CAUTIONS", "SECTIONS", "build_report", "report_for_layout"]

#: What the figures in a report do not cover, in plain words (shown in every report).
CAUTIONS: tuple[str, ...] = (
    "Radio-frequency exposure: a phased array concentrates its power along the beam. Before "
    "the array transmits, check the field strength everywhere people can be, over the whole "
    "scan range and at full power, against the exposure limits in force where it operates.",
    "Idealised model: every figure here is computed for identical ideal elements with a "
    "cos^q θ power pattern, fed with exact amplitudes and phases. Coupling between "
    "neighbouring elements, the different embedded patterns of edge and interior elements "
    "(which vary from site to site in a thinned array), the feed network, manufacturing "
    "tolerances and failed elements are not included.",
    "Verification: use these results to choose a layout, not to certify it. Confirm the "
    "pattern, gain and sidelobe levels by a full-wave electromagnetic simulation of the "
    "actual panel and by measurement of the built hardware.",
    "Codes and practice: radio licences and emission limits, safety and building codes, and "
    "the judgement of qualified, licensed engineers take precedence over this report.",
)

#: Section ids and headings, in order.
SECTIONS: tuple[tuple[str, str], ...] = (
    ("summary", "Summary"),
    ("layout", "Layout"),
    ("pattern", "Pattern in u-v"),
    ("cuts", "Principal-plane cuts"),
    ("scan", "Worst sidelobe across the scan cone"),
    ("stress", "What the built array will do"),
    ("convergence", "Convergence"),
    ("comparison", "Comparison with best-of-random"),
    ("cautions", "Cautions"),
    ("provenance", "Provenance"),
)

_PROVENANCE_KEYS = (
    ("version", "thinning version"),
    ("method", "search method"),
    ("seed", "random seed"),
    ("spec_digest", "spec digest"),
    ("runtime_s", "runtime [s]"),
    ("evaluations", "evaluations"),
    ("date", "date"),
)

_CSS = """
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
ul.cautions li{margin-bottom:.5em}
"""


# -- formatting --------------------------------------------------------------------------------
def _e(text) -> str:
    return html.escape(str(text), quote=True)


def _finite(x) -> bool:
    try:
        return x is not None and not isinstance(x, bool) and math.isfinite(float(x))
    except (TypeError, ValueError):
        return False


def _num(x, digits: int = 2, unit: str = "") -> str:
    if not _finite(x):
        return "—"
    s = f"{float(x):.{digits}f}".replace("-", "−")
    return f"{s} {unit}".strip()


def _get(obj, key, default=None):
    if obj is None:
        return default
    if isinstance(obj, Mapping):
        return obj.get(key, default)
    return getattr(obj, key, default)


def _img(png: bytes | None, alt: str) -> str:
    if not png:
        return f'<p class="missing">{_e(alt)}: not available.</p>'
    data = base64.b64encode(png).decode("ascii")
    return f'<img src="data:image/png;base64,{data}" alt="{_e(alt)}">'


def _row(label: str, value: str, key: str | None = None, raw=None, note: str = "") -> str:
    attrs = ""
    if key is not None:
        attrs += f' data-key="{_e(key)}"'
        if _finite(raw):
            attrs += f' data-value="{_e(repr(float(raw)))}"'
    cell_note = f'<td class="note">{_e(note)}</td>' if note else "<td></td>"
    head = f'<tr><th scope="row">{_e(label)}</th>'
    return f'{head}<td class="num"{attrs}>{_e(value)}</td>{cell_note}</tr>'


def _pair(values, digits=2, unit="°") -> str:
    if not isinstance(values, Sequence) or isinstance(values, str):
        return _num(values, digits, unit)
    return " / ".join(_num(v, digits, unit) for v in values)


# -- sections ---------------------------------------------------------------------------------
def _summary(m: Mapping) -> str:
    fill = m.get("fill")
    psl_uv = m.get("psl_uv") or [None, None]
    at = (
        f"at (u, v) = ({_num(psl_uv[0], 3)}, {_num(psl_uv[1], 3)}); refined on the exact pattern"
        if _finite(psl_uv[0])
        else "refined on the exact pattern"
    )
    asl, exp_asl = m.get("asl_db"), m.get("expected_asl_db")
    diff_asl = (
        f"{_num(float(asl) - float(exp_asl), 2, 'dB')} against random thinning"
        if _finite(asl) and _finite(exp_asl)
        else ""
    )
    glob = m.get("grating_lobes")
    if glob is None:
        gl = "—"
        gl_note = ""
    elif glob:
        gl = "yes"
        pts = m.get("grating_lobe_uv") or []
        gl_note = "a grating lobe enters the visible region within the scan cone" + (
            f", e.g. at lattice vector (u, v) = ({_num(pts[0][0], 3)}, {_num(pts[0][1], 3)})"
            if pts and len(pts[0]) == 2
            else ""
        )
    else:
        gl = "none"
        gl_note = "no grating lobe enters the visible region anywhere in the scan cone"
    freq = m.get("frequency_ghz")
    lam_mm = 299.792458 / float(freq) if _finite(freq) and float(freq) > 0 else None
    q = m.get("element_exponent")
    rows = [
        _row(
            "Candidate sites",
            str(m.get("sites")) if m.get("sites") else "—",
            "sites",
            m.get("sites"),
        ),
        _row("Active elements", str(m.get("elements", "—")), "elements", m.get("elements")),
        _row("Fill", _num(100 * fill, 1, "%") if _finite(fill) else "—", "fill", fill),
        _row(
            "Peak sidelobe level (PSL)",
            _num(m.get("psl_db"), 2, "dB"),
            "psl_db",
            m.get("psl_db"),
            f"over the scan cone, {at}",
        ),
        *(
            [
                _row(
                    "Envelope bound",
                    _num(m.get("envelope_bound_db"), 2, "dB"),
                    "envelope_bound_db",
                    m.get("envelope_bound_db"),
                    "peak of the expected pattern of the density envelope the search started "
                    "from (beside the PSL above)",
                )
            ]
            if m.get("envelope_bound_db") is not None
            else []
        ),
        _row("Average sidelobe level (ASL)", _num(asl, 2, "dB"), "asl_db", asl, diff_asl),
        _row(
            "ASL expected from random thinning",
            _num(exp_asl, 2, "dB"),
            "expected_asl_db",
            exp_asl,
            "same element count on the same sites",
        ),
        _row(
            "Directivity",
            _num(m.get("directivity_dbi"), 2, "dBi"),
            "directivity_dbi",
            m.get("directivity_dbi"),
            f"cos^{q:g} θ elements" if _finite(q) else "",
        ),
        _row(
            "Cell-gain rule (πN on a λ/2 square lattice)",
            _num(m.get("pi_n_dbi"), 2, "dBi"),
            "pi_n_dbi",
            m.get("pi_n_dbi"),
            m.get("cell_gain_basis") or "",
        ),
        _row(
            "Directivity − cell-gain rule",
            _num(m.get("directivity_minus_pi_n_db"), 2, "dB"),
            "directivity_minus_pi_n_db",
            m.get("directivity_minus_pi_n_db"),
        ),
        _row(
            "Half-power beamwidth, broadside",
            _pair(m.get("hpbw_deg")),
            "hpbw_deg",
            None,
            "x-z plane / y-z plane",
        ),
        _row(
            "Half-power beamwidth, scan edge",
            _pair(m.get("hpbw_scan_deg")),
            "hpbw_scan_deg",
            None,
            "x-z plane / y-z plane, beam steered to θmax",
        ),
        _row("Grating lobes", gl, "grating_lobes", None, gl_note),
        _row(
            "Scan cone half-angle θmax",
            _num(m.get("scan_max_deg"), 1, "°"),
            "scan_max_deg",
            m.get("scan_max_deg"),
        ),
        _row(
            "Frequency",
            _num(freq, 4, "GHz"),
            "frequency_ghz",
            freq,
            f"λ = {_num(lam_mm, 3, 'mm')}" if lam_mm else "",
        ),
    ]
    return (
        '<table class="summary"><thead><tr><th>figure</th><th>value</th><th>note</th></tr>'
        "</thead><tbody>" + "".join(rows) + "</tbody></table>"
        '<p class="note">PSL and ASL are array-factor figures over the disc of radius '
        "1 + sin θmax in direction cosines outside the main beam (isotropic elements); "
        "directivity includes the element pattern.</p>"
    )


def _scan_table(table) -> str:
    if table is None:
        return ""
    th = np.asarray(table["theta_deg"])
    phis = np.asarray(table["phi_deg"])
    psl = np.asarray(table["psl_db"])
    head = "".join(f"<th>φ = {_e(f'{p:g}')}° [dB]</th>" for p in phis)
    body = []
    for i, t in enumerate(th):
        cells = "".join(f'<td class="num">{_e(_num(psl[i, j], 2))}</td>' for j in range(phis.size))
        worst = _num(np.max(psl[i]), 2)
        body.append(
            f'<tr><td class="num">{_e(_num(t, 1))}</td>{cells}<td class="num">{_e(worst)}</td></tr>'
        )
    return (
        '<table class="scan"><thead><tr><th>θ₀ [deg]</th>' + head + "<th>worst [dB]</th></tr>"
        "</thead><tbody>" + "".join(body) + "</tbody></table>"
        '<p class="note">Maxima of the sampled pattern, not refined between samples: they can '
        "read slightly below the continuous pattern. Sidelobe region: the visible disc "
        "u² + v² ≤ 1 of the steered beam, outside its main beam.</p>"
    )


def _evaluations(history, provenance):
    ev = _get(provenance, "evaluations")
    if ev is None and history:
        ev = history[-1].get("evaluations")
    return ev


def _comparison(metrics, history, baseline, provenance, png) -> str:
    if baseline is None:
        return '<p class="missing">Best-of-random baseline: not run.</p>'
    rows = [
        (
            "design (scored)",
            metrics.get("psl_db"),
            metrics.get("asl_db"),
            _evaluations(history, provenance),
        ),
        (
            "best of random",
            _get(baseline, "psl_db"),
            _get(baseline, "asl_db"),
            _get(baseline, "evaluations"),
        ),
    ]
    body = "".join(
        f'<tr><th scope="row">{_e(name)}</th><td class="num">{_e(_num(p, 2, "dB"))}</td>'
        f'<td class="num">{_e(_num(a, 2, "dB"))}</td>'
        f'<td class="num">{_e(str(n) if n is not None else "—")}</td></tr>'
        for name, p, a, n in rows
    )
    d = metrics.get("psl_db")
    b = _get(baseline, "psl_db")
    gain = ""
    if _finite(d) and _finite(b):
        delta = float(b) - float(d)
        word = "below" if delta >= 0 else "above"
        gain = f"<p>The design's PSL is {_e(_num(abs(delta), 2, 'dB'))} {word} best-of-random.</p>"
    return (
        '<table class="comparison"><thead><tr><th></th><th>PSL</th><th>ASL</th>'
        "<th>evaluations</th></tr></thead><tbody>"
        + body
        + "</tbody></table>"
        + gain
        + '<p class="note">Best-of-random figures are as that search recorded them.</p>'
        + _img(png, "PSL and ASL of the design and best-of-random")
    )


def _provenance(prov: Mapping) -> str:
    rows = []
    seen = set()
    for key, label in _PROVENANCE_KEYS:
        seen.add(key)
        val = prov.get(key)
        if key == "runtime_s" and _finite(val):
            text = _num(val, 2)
        else:
            text = "—" if val is None else str(val)
        rows.append(
            f'<tr><th scope="row">{_e(label)}</th><td data-key="{_e(key)}">{_e(text)}</td></tr>'
        )
    for key, val in prov.items():
        if key not in seen:
            rows.append(f'<tr><th scope="row">{_e(key)}</th><td>{_e(val)}</td></tr>')
    return '<table class="provenance"><tbody>' + "".join(rows) + "</tbody></table>"


def _table(rows, columns) -> str:
    head = "".join(f"<th>{_e(label)}</th>" for _, label, _ in columns)
    body = []
    for r in rows:
        cells = []
        for key, _, fmt in columns:
            v = r.get(key)
            if isinstance(v, bool):
                cells.append(f"<td>{'yes' if v else 'no'}</td>")
            elif fmt and _finite(v):
                cells.append(f'<td class="num">{_e(format(float(v), fmt).replace("-", "−"))}</td>')
            else:
                cells.append(f"<td>{_e('—' if v is None else v)}</td>")
        body.append("<tr>" + "".join(cells) + "</tr>")
    return f'<table class="grid"><tr>{head}</tr>{"".join(body)}</table>'


def _stress(stress) -> str:
    """The scan, band-edge and Monte Carlo tables of
    :func:`thinning.analysis.stress.stress_layout`."""
    if stress is None:
        return '<p class="missing">Not run (give the error model to analyse the built array).</p>'
    parts = [
        "<h3>Scanned beams (phase steering at the design frequency)</h3>",
        _table(
            stress["scan"],
            [
                ("theta_deg", "θ₀ [°]", ".1f"),
                ("phi_deg", "φ₀ [°]", ".0f"),
                ("psl_db", "PSL [dB]", ".2f"),
                ("gain_dbi", "gain [dBi]", ".2f"),
                ("scan_loss_db", "scan loss [dB]", ".2f"),
                ("hpbw_deg", "HPBW [°]", ".3f"),
                ("hpbw_broadening", "broadening", ".4f"),
                ("cos_law", "1/cos θ₀", ".4f"),
            ],
        ),
        '<p class="note">Gain includes the element pattern (cos θ₀ scan loss for q = 1); '
        "the beamwidth broadens about as 1/cos θ₀.</p>",
    ]
    if stress.get("band"):
        parts += [
            f"<h3>Band edges ({_e(stress['band'][0]['steering'])} steering)</h3>",
            _table(
                stress["band"],
                [
                    ("frequency_ghz", "f [GHz]", ".4f"),
                    ("theta_command_deg", "commanded θ [°]", ".2f"),
                    ("theta_beam_deg", "beam θ [°]", ".2f"),
                    ("squint_deg", "squint [°]", ".2f"),
                    ("psl_db", "PSL [dB]", ".2f"),
                    ("grating_lobe", "grating lobe", None),
                ],
            ),
        ]
    mc = stress.get("monte_carlo")
    if mc:
        mo = mc["model"]
        parts += [
            f"<h3>Random errors, {mc['trials']} trials</h3>",
            f"<p>Amplitude {_num(mo['amplitude_error_db'])} dB rms, phase "
            f"{_num(mo['phase_error_deg'], 1)}° rms, "
            f"{_e(mo['phase_bits'] or 'continuous')} phase bits, {_e(mo['failures'])} failed "
            "elements.</p>",
            _table(
                [
                    {
                        "what": "PSL [dB]",
                        "nominal": stress["psl_db"]["nominal"],
                        "median": stress["psl_db"]["median"],
                        "p90": stress["psl_db"]["p90"],
                        "floor": None,
                    },
                    {
                        "what": "ASL [dB]",
                        "nominal": stress["asl_db"]["nominal"],
                        "median": stress["asl_db"]["mean"],
                        "p90": None,
                        "floor": stress["expected_asl_db"],
                    },
                ],
                [
                    ("what", "", None),
                    ("nominal", "nominal", ".2f"),
                    ("median", "median PSL / mean ASL", ".2f"),
                    ("p90", "90th percentile", ".2f"),
                    ("floor", "nominal + published floor", ".2f"),
                ],
            ),
            '<p class="note">Floor: ASL ≈ [(1 − P) + δ² + P(φ² + π²/(3·2^{2B}))]/(P·η·N) '
            "(references.md rows 11–12).</p>",
        ]
    return "".join(parts)


def build_report(
    path,
    *,
    metrics: Mapping,
    layout: Layout | None = None,
    layout_png: bytes | None = None,
    figures: Mapping[str, bytes] | None = None,
    history=None,
    baseline=None,
    provenance: Mapping | None = None,
    cautions: Sequence[str] = CAUTIONS,
    title: str = "Thinned array design report",
    scan_table: dict | None = None,
    stress: dict | None = None,
) -> Path:
    """Write the report as one self-contained HTML file.

    Parameters
    ----------
    path : str or os.PathLike
        The HTML file; its folder must exist.
    metrics : dict
        Figures of the layout, as :meth:`thinning.analysis.score.ScoreResult.to_dict` gives them.
    layout : Layout, optional
        Only used to fill in the element count when ``metrics`` lacks it.
    layout_png : bytes, optional
        PNG drawing of the layout.
    figures : dict of str to bytes
        PNG images under the keys ``uv_map``, ``cuts``, ``scan_psl``, ``convergence`` and
        ``comparison``; a missing one is reported as not available.
    history : list of dict, optional
        Convergence records of the search (``evaluations``, ``best_psl_db``, …).
    baseline : SearchResult or dict, optional
        Best-of-random run: ``psl_db``, ``asl_db`` [dB], ``evaluations``, ``history``;
        None prints "not run".
    provenance : dict, optional
        ``version``, ``method``, ``seed``, ``spec_digest``, ``runtime_s``, ``evaluations``,
        ``date``, and any further keys; the version and date are filled in when missing.
    cautions : sequence of str
    title : str
    scan_table : dict, optional
        From :func:`thinning.outputs.figures.scan_psl_table`.
    stress : dict, optional
        From :func:`thinning.analysis.stress.stress_layout`; None prints "not run".

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

    conv = (
        _img(figures.get("convergence"), "Best PSL against evaluations")
        if history or figures.get("convergence")
        else '<p class="missing">No search history: the layout was scored, not searched.</p>'
    )
    body = {
        "summary": _summary(m),
        "layout": _img(layout_png, "Drawing of the layout"),
        "pattern": _img(figures.get("uv_map"), "Array factor in u-v")
        + '<p class="note">Broadside beam. Steering the beam to (u₀, v₀) moves this map by '
        "(u₀, v₀); the sidelobes of every beam in the cone therefore lie inside the outer "
        "circle.</p>",
        "cuts": _img(figures.get("cuts"), "Principal-plane cuts"),
        "scan": _img(figures.get("scan_psl"), "Worst sidelobe against scan angle")
        + _scan_table(scan_table),
        "stress": _stress(stress),
        "convergence": conv,
        "comparison": _comparison(m, history, baseline, prov, figures.get("comparison")),
        "cautions": '<ul class="cautions">'
        + "".join(f"<li>{_e(c)}</li>" for c in cautions)
        + "</ul>",
        "provenance": _provenance(prov),
    }
    nav = "".join(f'<a href="#{sid}">{_e(head)}</a>' for sid, head in SECTIONS)
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
    for sid, head in SECTIONS:
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
        and M for the fill and the random-thinning expectation.
    history : list of dict, optional   convergence records of the search
    baseline : SearchResult or dict, optional   best-of-random run
    provenance : dict, optional
    layout_png : bytes, optional   a drawing to use instead of the built-in one
    title : str
    metrics : dict, optional   the layout's figures if already computed (else scored here)
    stress : dict, optional    :func:`thinning.analysis.stress.stress_layout` output

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

    path = Path(path)
    if not path.parent.is_dir():
        raise OutputError(f"{path}: cannot write: folder {str(path.parent)!r} does not exist")
    lam = _wavelength(frequency_hz)
    site_xy = None
    if sites is not None:
        site_xy = np.asarray(sites, dtype=float).reshape(-1, 2)
    if metrics is None:
        metrics = score_layout(
            layout, frequency_hz, scan_max, q, sites=len(site_xy) if site_xy is not None else None
        ).to_dict()
    metrics = dict(metrics)
    # a little beyond the sidelobe disc, so that its edge shows on the map
    uv = fg.uv_power_map(layout, lam, 1.04 * (1.0 + math.sin(scan_max)), scan_max=scan_max)
    table = fg.scan_psl_table(layout, lam, scan_max, uv_map=uv)
    filled = Layout(site_xy[:, 0], site_xy[:, 1]) if site_xy is not None and len(site_xy) else None
    base_hist = _get(baseline, "history")
    figs = {
        "uv_map": fg.fig_uv_map(layout, lam, scan_max, uv_map=uv, psl_db=metrics["psl_db"]),
        "cuts": fg.fig_principal_cuts(layout, lam, scan_max, filled),
        "scan_psl": fg.fig_scan_psl(table, metrics["psl_db"]),
    }
    if history:
        figs["convergence"] = fg.fig_convergence(history, base_hist)
    if baseline is not None:
        figs["comparison"] = fg.fig_comparison(
            metrics, {"psl_db": _get(baseline, "psl_db"), "asl_db": _get(baseline, "asl_db")}
        )
    if layout_png is None:
        layout_png = fg.png_bytes(fg.fig_layout(layout, aperture, site_xy))
    pngs = {k: fg.png_bytes(f) for k, f in figs.items()}
    return build_report(
        path,
        metrics=metrics,
        layout=layout,
        layout_png=layout_png,
        figures=pngs,
        history=history,
        baseline=baseline,
        provenance=provenance,
        title=title,
        scan_table=table,
        stress=stress,
    )
