"""The HTML pieces of the review report: formatting, the summary and the data sections.

Each function takes figures already computed and returns an HTML fragment (escaped, no
scripts, no external resources); :mod:`thinning.outputs.report` puts them together. Numbers
are shown with a real minus sign; every summary cell carries its key and exact value as
``data-key`` / ``data-value`` attributes, so tools (and tests) can read the report back.
"""

from __future__ import annotations

import html
import math
from collections.abc import Mapping, Sequence

import numpy as np

__all__ = [
    "summary_html",
    "requirements_html",
    "constraints_html",
    "run_html",
    "scan_html",
    "stress_html",
    "comparison_html",
    "provenance_html",
    "spec_appendix_html",
    "psl_location",
    "cell_gain_label",
    "ghz",
]


# -- formatting -------------------------------------------------------------------------------
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


def ghz(x) -> str:
    """A frequency in GHz to a sensible precision: up to 4 decimals (100 kHz), no trailing
    zeros ("9.4", "0.435", "10")."""
    if not _finite(x):
        return "—"
    return f"{float(x):.4f}".rstrip("0").rstrip(".")


def _get(obj, key, default=None):
    if obj is None:
        return default
    if isinstance(obj, Mapping):
        return obj.get(key, default)
    return getattr(obj, key, default)


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


def _table(rows, columns) -> str:
    """A table of dict rows; columns are (key, heading, format or callable or None)."""
    head = "".join(f"<th>{_e(label)}</th>" for _, label, _ in columns)
    body = []
    for r in rows:
        cells = []
        for key, _, fmt in columns:
            v = r.get(key)
            if isinstance(v, bool):
                cells.append(f"<td>{'yes' if v else 'no'}</td>")
            elif callable(fmt) and _finite(v):
                cells.append(f'<td class="num">{_e(fmt(v))}</td>')
            elif fmt and _finite(v):
                cells.append(f'<td class="num">{_e(format(float(v), fmt).replace("-", "−"))}</td>')
            else:
                cells.append(f"<td>{_e('—' if v is None else v)}</td>")
        body.append("<tr>" + "".join(cells) + "</tr>")
    return f'<table class="grid"><tr>{head}</tr>{"".join(body)}</table>'


# -- what the figures mean ----------------------------------------------------------------------
def cell_gain_label(m: Mapping, lattice_kind: str | None = None) -> tuple[str, str]:
    """The cell-gain rule's row label and note for the lattice in use.

    ``lattice_kind`` is the spec's lattice when known; otherwise the kind is read from the
    lattice the layout generates (``lattice`` of the score): rectangular when its basis is
    diagonal, triangular when the second vector is offset by half the first.
    """
    lat = m.get("lattice") or {}
    kind = lattice_kind
    if kind is None:
        if lat.get("kind") in ("linear", "off-lattice"):
            kind = lat["kind"]
        elif lat.get("basis_mm"):
            (a1x, a1y), (a2x, a2y) = lat["basis_mm"]
            if abs(a1y) < 1e-9 and abs(a2x) < 1e-9:
                kind = "rectangular"
            elif abs(a1y) < 1e-9 and abs(abs(a2x) - 0.5 * abs(a1x)) < 1e-6 * abs(a1x):
                kind = "triangular"
            else:
                kind = "oblique"
    if kind == "linear":
        return "Gain rule of a line array (2·N·d/λ × element)", "long broadside line array"
    if kind == "off-lattice":
        return "Cell-gain rule (4π·N·A/λ², A = hull area / N)", "off any lattice"
    area = lat.get("cell_area_mm2")
    cell = f", A_cell = {_num(area, 1, 'mm²')}" if _finite(area) else ""
    name = f"{kind} lattice" if kind else "the layout's lattice"
    return f"Cell-gain rule, {name} (4π·N·A_cell/λ²)", f"one lattice cell per element{cell}"


def psl_location(psl_uv, basis_mm, wavelength_mm: float, scan_max_deg: float) -> dict:
    """Where the PSL lobe is, and which beams see it.

    A lattice's array factor repeats on its reciprocal lattice (period λ·(A⁻¹)ᵀ for the
    lattice vectors A, references.md row 10): the lobe at p is also at every p + G. A beam
    steered to (u₀, v₀) sees the broadside pattern's point q at the observation direction
    q + (u₀, v₀) (phase steering, conventions.md), so q is seen by some beam with
    |(u₀, v₀)| ≤ sin θmax exactly when |q| ≤ 1 + sin θmax, and by the broadside beam when
    |q| ≤ 1.

    Returns
    -------
    dict
        ``uv``: the reported point; ``aliases``: the repeats within 1 + sin θmax (nearest
        first, the reported point included); ``nearest``: the repeat nearest boresight;
        ``broadside``: True when that one is in the visible region (|q| ≤ 1);
        ``min_scan_deg``, ``toward_phi_deg``: otherwise, the least scan angle and its
        direction φ for which a beam sees it; ``text``: one sentence saying so.
    """
    p = np.asarray(psl_uv, dtype=float)
    reach = 1.0 + math.sin(math.radians(scan_max_deg))
    pts = [p]
    if basis_mm is not None:
        a = np.asarray(basis_mm, dtype=float).T  # columns: lattice vectors  [mm]
        if np.any(a[:, 1]) and abs(np.linalg.det(a)) > 1e-12:
            b = wavelength_mm * np.linalg.inv(a).T
            rng = range(-4, 5)
            pts = [p + i * b[:, 0] + j * b[:, 1] for i in rng for j in rng]
        elif np.any(a[:, 0]):
            g = wavelength_mm * a[:, 0] / float(a[:, 0] @ a[:, 0])
            pts = [p + i * g for i in range(-6, 7)]
    pts = np.array(pts)
    r = np.hypot(pts[:, 0], pts[:, 1])
    order = np.argsort(r, kind="stable")
    q, rq = pts[order[0]], float(r[order[0]])
    aliases = pts[order][r[order] <= reach * (1 + 1e-9)]
    out = {"uv": p, "aliases": aliases, "nearest": q, "broadside": rq <= 1.0}
    at = f"(u, v) = ({_num(p[0], 3)}, {_num(p[1], 3)})"
    rp = float(np.hypot(*p))
    if rp <= 1.0:
        theta, phi = math.degrees(math.asin(rp)), math.degrees(math.atan2(p[1], p[0]))
        out["text"] = (
            f"The highest sidelobe is at {at}, θ = {_num(theta, 1)}°, φ = {_num(phi, 0)}° "
            "from boresight: inside the visible region of the broadside beam."
        )
        return out
    head = f"The highest sidelobe is reported at {at}, |(u, v)| = {_num(rp, 3)}: outside the "
    head += "visible region of the broadside beam (|(u, v)| ≤ 1, the inner circle)"
    if out["broadside"]:
        theta = math.degrees(math.asin(rq))
        phi = math.degrees(math.atan2(q[1], q[0]))
        out["text"] = (
            head + ". The pattern of a lattice repeats, and the same lobe lies at "
            f"(u, v) = ({_num(q[0], 3)}, {_num(q[1], 3)}) (θ = {_num(theta, 1)}°, "
            f"φ = {_num(phi, 0)}°), inside it: the broadside beam has it too."
        )
        return out
    scan = math.degrees(math.asin(min(1.0, rq - 1.0)))
    phi = math.degrees(math.atan2(-q[1], -q[0]))
    out["min_scan_deg"], out["toward_phi_deg"] = scan, phi
    out["text"] = (
        head + f"; it enters the visible region only for beams steered at least "
        f"θ₀ = {_num(scan, 1)}° toward φ = {_num(phi, 0)}° (a steered beam moves the "
        "visible circle by its (u₀, v₀))."
    )
    return out


# -- summary ------------------------------------------------------------------------------------
_BASIS_NOTE = {
    "sites": "the spec's candidate sites",
    "count": "as given",
    "hull": "assumed: the layout's own lattice inside the hull of its elements",
    "none": "off any lattice: taken as unlimited",
}


def summary_html(m: Mapping, lattice_kind: str | None = None) -> str:
    """The table of figures of merit."""
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
        gl, gl_note = "—", ""
    elif glob:
        gl = "yes"
        pts = m.get("grating_lobe_uv") or []
        gl_note = "a grating lobe enters the visible region within the scan cone" + (
            f", e.g. at lattice vector (u, v) = ({_num(pts[0][0], 3)}, {_num(pts[0][1], 3)})"
            if pts and len(pts[0]) == 2
            else ""
        )
    else:
        gl, gl_note = "none", "no grating lobe enters the visible region anywhere in the scan cone"
    freq = m.get("frequency_ghz")
    lam_mm = 299.792458 / float(freq) if _finite(freq) and float(freq) > 0 else None
    q = m.get("element_exponent")
    rule_label, rule_note = cell_gain_label(m, lattice_kind)
    hpbw = m.get("hpbw_deg") or [None, None]
    linear = (m.get("lattice") or {}).get("kind") == "linear" or (
        len(hpbw) == 2 and hpbw[1] is None and _finite(hpbw[0])
    )
    bw_note = "array factor, x-z plane / y-z plane"
    if linear:
        bw_note += "; none across a line array, whose array factor does not vary across it"
    rows = [
        _row(
            "Candidate sites",
            str(m.get("sites")) if m.get("sites") else "—",
            "sites",
            m.get("sites"),
            _BASIS_NOTE.get(m.get("sites_basis"), ""),
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
            f"cos{_sup(q)} θ elements" if _finite(q) else "",
        ),
        _row(
            rule_label, _num(m.get("pi_n_dbi"), 2, "dBi"), "pi_n_dbi", m.get("pi_n_dbi"), rule_note
        ),
        _row(
            "Directivity − cell-gain rule",
            _num(m.get("directivity_minus_pi_n_db"), 2, "dB"),
            "directivity_minus_pi_n_db",
            m.get("directivity_minus_pi_n_db"),
        ),
        _row("Half-power beamwidth, broadside", _pair(hpbw), "hpbw_deg", None, bw_note),
        _row(
            "Half-power beamwidth, scan edge",
            _pair(m.get("hpbw_scan_deg")),
            "hpbw_scan_deg",
            None,
            bw_note + "; beam steered to θmax in that plane",
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
            f"{ghz(freq)} GHz",
            "frequency_ghz",
            freq,
            f"λ = {_num(lam_mm, 2, 'mm')}" if lam_mm else "",
        ),
    ]
    return (
        '<table class="summary"><thead><tr><th>figure</th><th>value</th><th>note</th></tr>'
        "</thead><tbody>" + "".join(rows) + "</tbody></table>"
        '<p class="note">PSL, ASL and the beamwidths are array-factor figures (isotropic '
        "elements); PSL and ASL are taken over the disc of radius 1 + sin θmax in direction "
        "cosines outside the main beam. The directivity includes the element pattern.</p>"
    )


def _sup(q) -> str:
    """The exponent of cos^q θ as superscript characters ("" for q = 1)."""
    if not _finite(q) or float(q) == 1:
        return ""
    digits = str.maketrans("0123456789.−-", "⁰¹²³⁴⁵⁶⁷⁸⁹·⁻⁻")
    return f"{float(q):g}".translate(digits)


def _signed(x, unit: str) -> str:
    if not _finite(x):
        return "—"
    return f"{'+' if float(x) >= 0 else '−'}{abs(float(x)):.2f} {unit}"


def requirements_html(verdicts: Mapping[str, Mapping] | None) -> str:
    """The requirement verdicts, at the top of the report."""
    from ..analysis.requirements import describe

    if verdicts is None:
        return ""
    if not verdicts:
        return (
            '<p class="note">The spec states no requirement ([requirements] psl_db, asl_db): '
            "nothing to judge the layout against.</p>"
        )
    rows = []
    for key, v in verdicts.items():
        met = v["met"]
        word = "met" if met else "NOT MET"
        margin = v["margin_db"]
        rows.append(
            f'<tr class="{"met" if met else "failed"}"><th scope="row">'
            f"{_e(describe(key, v['required']).replace('-', '−'))}</th>"
            f'<td class="num" data-key="requirement.{_e(key)}" '
            f'data-value="{_e(repr(v["achieved"]))}">{_e(_num(v["achieved"], 2, v["unit"]))}</td>'
            f'<td class="num">{_e(_signed(margin, v["unit"]))}</td>'
            f"<td><b>{word}</b></td></tr>"
        )
    return (
        '<table class="requirements"><thead><tr><th>requirement</th><th>achieved</th>'
        "<th>margin (+ = room)</th><th>verdict</th></tr></thead><tbody>"
        + "".join(rows)
        + "</tbody></table>"
    )


def _ids(ids, limit: int = 20) -> str:
    return "ids " + ", ".join(map(str, ids[:limit])) + (" …" if len(ids) > limit else "")


def constraints_html(spec, metrics: Mapping) -> str:
    """The panel and the constraints the layout was designed under."""
    if spec is None:
        return ""
    rows = []
    lat = spec.lattice
    pitch = (
        f"{lat.dx * 1e3:g} mm"
        if lat.kind == "linear"
        else f"{lat.dx * 1e3:g} × {lat.dy * 1e3:.4g} mm (dx × row pitch)"
    )
    rows.append(("Lattice", f"{lat.kind}, {pitch}"))
    ap = spec.aperture
    if ap is not None:
        xmin, ymin, xmax, ymax = (b * 1e3 for b in ap.bounds)
        rows.append(("Panel outline", f"{xmax - xmin:.1f} × {ymax - ymin:.1f} mm (bounding box)"))
        rows.append(("Holes and cut-outs", str(len(ap.holes_mm()))))
        rows.append(("Edge clearance", f"{ap.edge_clearance * 1e3:g} mm from every edge and hole"))
    else:
        rows.append(("Sites", f"{spec.linear_sites} in a line"))
    rows.append(("Symmetry", spec.symmetry))
    pinned = metrics.get("pinned_sites")
    pin = []
    if spec.pin_outer_ring:
        pin.append("the outer ring")
    if spec.pin_ids:
        pin.append(_ids(spec.pin_ids))
    if spec.pin_mm:
        pin.append(f"{len(spec.pin_mm)} given by position")
    total = f"{pinned} sites: " if pinned is not None else ""
    rows.append(("Pinned on", (total + "; ".join(pin)) if pin else "none"))
    forbid = []
    if spec.forbid_ids:
        forbid.append(_ids(spec.forbid_ids))
    if spec.forbid_mm:
        forbid.append(f"{len(spec.forbid_mm)} given by position")
    rows.append(("Kept off", "; ".join(forbid) if forbid else "none"))
    off = metrics.get("forbidden_or_unpaired_sites")
    if off:
        rows.append(("Sites unavailable", f"{off} (kept off, or without a symmetry partner)"))
    body = "".join(f'<tr><th scope="row">{_e(k)}</th><td>{_e(v)}</td></tr>' for k, v in rows)
    return f'<h3>Panel and constraints</h3><table class="constraints"><tbody>{body}</tbody></table>'


_ENDED = {
    "evaluations": "its evaluation budget was spent",
    "generations": "its generations were done",
    "stall": "it stalled (no improvement)",
    "draws": "all its draws were done",
    "trials": "all its trials were done",
    "time": "the time limit was reached",
    "interrupt": "it was interrupted (Ctrl-C)",
}


def run_html(prov: Mapping) -> str:
    """How the search ended and whether the layout is reproducible."""
    stopped = prov.get("stopped_by")
    if stopped is None:
        return ""
    ended = _ENDED.get(stopped, f"it stopped ({stopped})")
    if prov.get("deterministic", stopped not in ("time", "interrupt")):
        tail = "the same spec and seed give the same layout."
        cls = "note"
    else:
        tail = (
            "<b>the layout depends on the machine's speed</b> (or on when it was "
            "interrupted): the same spec and seed need not give it again. Set "
            "[search] evaluations for a reproducible run."
        )
        cls = "warn"
    ev = prov.get("evaluations")
    evs = f"{int(ev):,} evaluations" if _finite(ev) else "the search"
    return f'<p class="{cls}">The search ended after {evs} because {_e(ended)}: {tail}</p>'


# -- the data sections --------------------------------------------------------------------------
def _all_equal(values, tol_db: float = 0.005) -> bool:
    v = np.asarray(values, dtype=float)
    v = v[np.isfinite(v)]
    return v.size > 0 and float(np.ptp(v)) <= tol_db


def scan_html(table, refined_psl_db) -> str:
    """The worst sampled sidelobe across the scan cone: a short statement and table when
    every value is the same, the full table otherwise, and the note on sampled figures."""
    if table is None:
        return ""
    th = np.asarray(table["theta_deg"])
    phis = np.asarray(table["phi_deg"])
    psl = np.asarray(table["psl_db"])
    worst = float(np.nanmax(np.where(np.isfinite(psl), psl, np.nan)))
    diff = ""
    if _finite(refined_psl_db):
        d = float(refined_psl_db) - worst
        diff = (
            f" The summary's PSL, {_num(refined_psl_db, 2, 'dB')}, is {_num(abs(d), 2, 'dB')} "
            f"{'higher' if d >= 0 else 'lower'}: it is refined on the exact continuous pattern "
            "between the samples, over the whole sidelobe disc of the cone at once."
        )
    note = (
        '<p class="note">These are the largest samples of the pattern on the u-v grid, not '
        "refined between samples, so they can read slightly below the continuous pattern."
        f"{diff} Sidelobe region of each beam: its visible region u² + v² ≤ 1, outside its "
        "main beam.</p>"
    )
    planes = ", ".join(f"{p:g}°" for p in phis)
    if _all_equal(psl):
        return (
            f"<p>Every beam steered in the cone (θ₀ = {_num(th[0], 0)}° to {_num(th[-1], 1)}°, "
            f"in the planes φ = {planes}) has the same worst sampled sidelobe: "
            f"<b>{_e(_num(worst, 2, 'dB'))}</b>: the same lobe, or a repeat of it, stays in "
            "the visible region whichever way the beam is steered.</p>"
            '<table class="scan"><thead><tr><th>θ₀ [deg]</th><th>every plane [dB]</th></tr>'
            f'</thead><tbody><tr><td class="num">{_num(th[0], 1)} … {_num(th[-1], 1)}</td>'
            f'<td class="num">{_e(_num(worst, 2))}</td></tr></tbody></table>' + note
        )
    head = "".join(f"<th>φ = {_e(f'{p:g}')}° [dB]</th>" for p in phis)
    body = []
    for i, t in enumerate(th):
        cells = "".join(f'<td class="num">{_e(_num(psl[i, j], 2))}</td>' for j in range(phis.size))
        body.append(
            f'<tr><td class="num">{_e(_num(t, 1))}</td>{cells}'
            f'<td class="num">{_e(_num(np.max(psl[i]), 2))}</td></tr>'
        )
    return (
        '<table class="scan"><thead><tr><th>θ₀ [deg]</th>' + head + "<th>worst [dB]</th></tr>"
        "</thead><tbody>" + "".join(body) + "</tbody></table>" + note
    )


def _loss(x) -> str:
    """A scan loss: the gain's drop from broadside, a positive number of dB."""
    return _num(float(x) + 0.0, 2)


def stress_html(stress) -> str:
    """The scan, band-edge and (when an error is stated) Monte Carlo tables of
    :func:`thinning.analysis.stress.stress_layout`."""
    if stress is None:
        return ""
    parts = [
        "<h3>Scanned beams (phase steering at the design frequency)</h3>",
        _table(
            stress["scan"],
            [
                c
                for c in (
                    ("azimuth_deg", "azimuth [°]", ".1f"),
                    ("elevation_deg", "elev. [°]", ".1f"),
                )
                if c[0] in stress["scan"][0]
            ]
            + [
                ("theta_deg", "θ₀ [°]", ".1f"),
                ("phi_deg", "φ₀ [°]", ".0f"),
                ("psl_db", "PSL [dB]", ".2f"),
                ("gain_dbi", "gain [dBi]", ".2f"),
                ("scan_loss_db", "scan loss [dB]", _loss),
                ("hpbw_deg", "HPBW [°]", ".3f"),
                ("hpbw_broadening", "broadening", ".4f"),
                ("cos_law", "1/cos θ₀", ".4f"),
            ],
        ),
        '<p class="note">Gain includes the element pattern; the scan loss is the drop of the '
        "gain from broadside (cos θ₀ for a cos θ element). The array factor's beamwidth "
        "broadens about as 1/cos θ₀.</p>",
    ]
    if stress.get("band"):
        sector = [
            ("azimuth_command_deg", "azimuth [°]", ".1f"),
            ("elevation_command_deg", "elevation [°]", ".1f"),
        ]
        parts += [
            f"<h3>Band edges ({_e(stress['band'][0]['steering'])} steering)</h3>",
            _table(
                stress["band"],
                [c for c in sector if c[0] in stress["band"][0]]
                + [
                    ("frequency_ghz", "f [GHz]", ghz),
                    ("theta_command_deg", "commanded θ [°]", ".2f"),
                    ("theta_beam_deg", "beam θ [°]", ".2f"),
                    ("squint_deg", "squint [°]", ".2f"),
                    ("psl_db", "PSL [dB]", ".2f"),
                    ("grating_lobe", "grating lobe", None),
                ],
            ),
        ]
    mc = stress.get("monte_carlo")
    mo = (mc or {}).get("model") or {}
    keys = ("amplitude_error_db", "phase_error_deg", "phase_bits", "failures")
    if mc and any(mo.get(k) for k in keys):  # no section for a model without errors
        bits = mo["phase_bits"]
        parts += [
            f"<h3>Random errors, {mc['trials']} trials</h3>",
            f"<p>Amplitude {_num(mo['amplitude_error_db'])} dB rms, phase "
            f"{_num(mo['phase_error_deg'], 1)}° rms, "
            f"{_e(f'{bits}-bit phase shifters' if bits else 'continuous phase')}, "
            f"{_e(mo['failures'])} failed elements per trial.</p>",
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
            '<p class="note">Published floor of random errors: ASL ≈ [(1 − P) + δ² + '
            "P·(φ² + π²/(3·2<sup>2B</sup>))] / (P·η<sub>a</sub>·N), with δ the rms amplitude "
            "error, φ the rms phase error [rad], B the phase-shifter bits, P the fraction of "
            "elements working and η<sub>a</sub> the taper efficiency (Mailloux, <i>Phased Array "
            "Antenna Handbook</i>, ch. 7; Miller 1964).</p>",
        ]
    return "".join(parts)


def comparison_html(metrics, evaluations, baseline, img: str) -> str:
    """The design against the best of random draws at the same number of evaluations."""
    if baseline is None:
        return ""
    rows = [
        ("design (scored)", metrics.get("psl_db"), metrics.get("asl_db"), evaluations),
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
        f'<td class="num">{_e(f"{int(n):,}" if _finite(n) else "—")}</td></tr>'
        for name, p, a, n in rows
    )
    d, b = metrics.get("psl_db"), _get(baseline, "psl_db")
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
        + '<p class="note">Best-of-random figures are as that search recorded them; its run '
        "is capped at a quarter of the design's time, so on a slow machine it may reach fewer "
        "evaluations.</p>" + img
    )


_PROVENANCE_KEYS = (
    ("version", "thinning version"),
    ("method", "search method"),
    ("seed", "random seed"),
    ("spec_file", "spec file"),
    ("spec_digest", "spec digest (SHA-256)"),
    ("evaluations", "evaluations"),
    ("runtime_s", "runtime [s]"),
    ("stopped_by", "ended by"),
    ("deterministic", "reproducible (deterministic)"),
    ("date", "date"),
    ("layout_file", "layout file"),
)


def provenance_html(prov: Mapping) -> str:
    rows = []
    seen = set()
    for key, label in _PROVENANCE_KEYS:
        seen.add(key)
        if key not in prov:
            continue
        val = prov.get(key)
        if key == "runtime_s" and _finite(val):
            text = _num(val, 2)
        elif isinstance(val, bool):
            text = "yes" if val else "no"
        else:
            text = "—" if val is None else str(val)
        rows.append(
            f'<tr><th scope="row">{_e(label)}</th><td data-key="{_e(key)}">{_e(text)}</td></tr>'
        )
    for key, val in prov.items():
        if key not in seen:
            rows.append(f'<tr><th scope="row">{_e(key)}</th><td>{_e(val)}</td></tr>')
    return '<table class="provenance"><tbody>' + "".join(rows) + "</tbody></table>"


def spec_appendix_html(name: str, text: str, digest: str = "") -> str:
    """The spec file itself, as the run read it."""
    dig = f" (SHA-256 {_e(digest)})" if digest else ""
    return (
        f"<p>The spec <code>{_e(name)}</code>{dig}, exactly as the run read it:</p>"
        f'<pre class="spec">{_e(text)}</pre>'
    )
