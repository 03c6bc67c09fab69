"""The sweep's trade page: sweep.png and the self-contained sweep.html.

The figure plots the design's PSL and ASL against the element count with the theory curves of
:func:`thinning.analysis.sweep.theory_curves` (random-thinning expectation, Steinberg's median
peak, the filled aperture's PSL) and the directivity against the cell-gain rule; the page adds
the answer (the smallest budget that meets the requirement), the table of budgets, the
cautions and the provenance.
"""

from __future__ import annotations

import io
from pathlib import Path

import numpy as np

from ..analysis.sweep import SWEEP_COLUMNS, SweepResult, theory_curves
from ..io.atomic import atomic_write

__all__ = ["sweep_figure", "write_sweep_outputs"]


def sweep_figure(res: SweepResult):
    """PSL and ASL against N with the theory curves; directivity against N with the rule."""
    from matplotlib.backends.backend_agg import FigureCanvasAgg
    from matplotlib.figure import Figure

    th = theory_curves(res)
    n = np.array([r["elements"] for r in res.rows])
    fig = Figure(figsize=(11.0, 4.6))
    FigureCanvasAgg(fig)
    a, b = fig.subplots(1, 2)
    a.plot(n, [r["psl_db"] for r in res.rows], "o-", color="C3", label="PSL, this search")
    a.plot(n, [r["asl_db"] for r in res.rows], "s-", color="C0", label="ASL, this search")
    a.plot(
        th["elements"],
        th["steinberg_median_psl_db"],
        "--",
        color="C3",
        alpha=0.7,
        label="median PSL of random thinning (Steinberg)",
    )
    a.plot(
        th["elements"],
        th["expected_asl_db"],
        "--",
        color="C0",
        alpha=0.7,
        label="expected ASL of random thinning",
    )
    a.axhline(
        res.filled["psl_db"],
        color="0.4",
        lw=1,
        ls=":",
        label=f"filled aperture PSL ({res.filled['elements']} sites)",
    )
    if res.requirement is not None:
        a.axhline(res.requirement, color="k", lw=1.2, label=f"requirement {res.requirement:g} dB")
    a.set_xlabel("active elements N")
    a.set_ylabel("level relative to the main beam [dB]")
    a.set_title("Sidelobes against element count")
    a.grid(alpha=0.3)
    a.legend(fontsize=7, loc="best")
    b.plot(n, [r["directivity_dbi"] for r in res.rows], "o-", color="C2", label="directivity")
    b.plot(
        th["elements"],
        th["pi_n_dbi"],
        "--",
        color="C2",
        alpha=0.7,
        label="cell-gain rule 4πN·A_cell/λ²",
    )
    b.set_xlabel("active elements N")
    b.set_ylabel("directivity [dBi]")
    b.set_title("Directivity against element count")
    b.grid(alpha=0.3)
    b.legend(fontsize=8)
    fig.tight_layout()
    return fig


def write_sweep_outputs(res: SweepResult) -> list[Path]:
    """sweep.png and the self-contained sweep.html."""
    import base64
    import html

    buf = io.BytesIO()
    sweep_figure(res).savefig(buf, format="png", dpi=110)
    png = buf.getvalue()
    files = [res.folder / "sweep.png", res.folder / "sweep.html"]
    atomic_write(files[0], png)
    e = html.escape
    cols = [c for c in SWEEP_COLUMNS if c not in ("folder", "stopped_by")]
    head = "".join(f"<th>{e(c)}</th>" for c in cols)
    body = "".join(
        "<tr>" + "".join(f"<td>{e(str(r[c]))}</td>" for c in cols) + "</tr>" for r in res.rows
    )
    if res.requirement is None:
        answer = "No PSL requirement in the spec ([requirements] psl_db)."
    elif res.smallest_meeting is None:
        answer = f"No budget in this sweep meets PSL ≤ {res.requirement:g} dB."
    else:
        s = res.smallest_meeting
        answer = (
            f"The smallest budget in this sweep that meets PSL ≤ {res.requirement:g} dB is "
            f"<b>{s['elements']} elements</b> (PSL {s['psl_db']:.2f} dB); its layout is in "
            f"<code>{e(s['folder'])}/layout.csv</code>."
        )
    from ..outputs.report import CAUTIONS

    b64 = base64.b64encode(png).decode()

    doc = f"""<!DOCTYPE html><html lang="en"><head><meta charset="utf-8">
<title>Thinning sweep</title><style>body{{font-family:system-ui,sans-serif;max-width:1100px;
margin:auto;padding:1em}}table{{border-collapse:collapse;font-size:.85em}}td,th{{border:1px solid
#ccc;padding:.2em .5em}}img{{max-width:100%}}</style></head><body>
<h1>Budget against sidelobes: {e(Path(res.spec.source).name)}</h1>
<h2 id="answer">Answer</h2><p>{answer}</p>
<h2 id="figure">Trade</h2><img alt="sweep" src="data:image/png;base64,{b64}">
<p>Theory: expected ASL of random thinning N of M = {res.sites} sites (with the filled aperture's
own sidelobes); Steinberg's median peak of random arrays with n_s ≈ {res.independent_samples:.0f}
independent sidelobe samples; the filled aperture's PSL; the cell-gain rule.</p>
<h2 id="table">Budgets</h2><table><tr>{head}</tr>{body}</table>
<h2 id="cautions">Cautions</h2><ul>{"".join(f"<li>{e(c)}</li>" for c in CAUTIONS)}</ul>
<h2 id="provenance">Provenance</h2><p>method {e(res.spec.method)}, seed {res.spec.seed}, spec
digest {e(res.spec.digest)}</p></body></html>
"""
    atomic_write(files[1], doc)
    return files
