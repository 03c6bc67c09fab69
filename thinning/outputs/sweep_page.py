"""The sweep's trade page: sweep.png and the self-contained sweep.html.

The figure plots the design's PSL and ASL against the element count with the theory curves of
:func:`thinning.analysis.sweep.theory_curves` (random-thinning expectation of the ASL, median
PSL of random thinning with the filled aperture's own sidelobes, the filled aperture's PSL) and
the directivity against the cell-gain rule; the page adds the answer (the smallest budget that
meets the requirements), the table of budgets, the cautions and the provenance.
"""

from __future__ import annotations

import io
from pathlib import Path

import numpy as np

from ..analysis.requirements import describe
from ..analysis.sweep import SWEEP_COLUMNS, SweepResult, theory_curves
from ..io.atomic import atomic_write

__all__ = ["sweep_figure", "write_sweep_outputs", "answer_text"]


def sweep_figure(res: SweepResult):
    """PSL and ASL against N with the theory curves; directivity against N with the rule."""
    from matplotlib.backends.backend_agg import FigureCanvasAgg
    from matplotlib.figure import Figure

    th = theory_curves(res)
    n = np.array([r["elements"] for r in res.rows])
    fig = Figure(figsize=(11.0, 5.2))
    FigureCanvasAgg(fig)
    a, b = fig.subplots(1, 2)
    a.plot(n, [r["psl_db"] for r in res.rows], "o-", color="C3", label="PSL, this search")
    a.plot(n, [r["asl_db"] for r in res.rows], "s-", color="C0", label="ASL, this search")
    theory = (
        (
            "random_median_psl_db",
            "--",
            "C3",
            0.8,
            1.5,
            "median PSL of random thinning (filled-aperture sidelobes + random part)",
        ),
        ("steinberg_median_psl_db", ":", "C3", 0.6, 1.0, "its random part alone (Steinberg)"),
        ("expected_asl_db", "--", "C0", 0.7, 1.5, "expected ASL of random thinning"),
    )
    for key, ls, colour, alpha, lw, label in theory:
        a.plot(th["elements"], th[key], ls, color=colour, alpha=alpha, lw=lw, label=label)
    a.axhline(
        res.filled["psl_db"],
        color="0.4",
        lw=1,
        ls=":",
        label=f"filled aperture PSL ({res.filled['elements']} sites)",
    )
    for key, style in (("psl_db", "-"), ("asl_db", "-.")):
        if key in (res.requirements or {}):
            v = res.requirements[key]
            a.axhline(v, color="k", lw=1.2, ls=style, label=f"requirement {describe(key, v)}")
    a.set_xlabel("active elements N")
    a.set_ylabel("level relative to the main beam [dB]")
    a.set_title("Sidelobes against element count")
    a.grid(alpha=0.3)
    handles, labels = a.get_legend_handles_labels()
    fig.legend(handles, labels, fontsize=7.5, loc="lower center", ncols=3, frameon=False)
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
    fig.tight_layout(rect=(0, 0.12, 1, 1))
    return fig


def answer_text(res: SweepResult, plain: bool = False) -> str:
    """The sweep's answer: the smallest budget tried that meets every requirement.

    When that is the smallest budget tried, a smaller one may meet them too: said so.
    """
    reqs = res.requirements or {}
    if not reqs:
        return "No requirement in the spec ([requirements] psl_db, asl_db)."
    what = " and ".join(describe(k, v, plain) for k, v in reqs.items())
    s = res.smallest_meeting
    if s is None:
        return f"No budget in this sweep meets {what}."
    tried = min(r["elements"] for r in res.rows)
    text = (
        f"smallest budget tried that meets {what}: {s['elements']} elements "
        f"(PSL {s['psl_db']:.2f} dB, ASL {s['asl_db']:.2f} dB)"
    )
    if s["elements"] == tried:
        text += "; it is the smallest budget tried, so a smaller one may meet it too"
    return text


def write_sweep_outputs(res: SweepResult, folder: Path | None = None) -> list[Path]:
    """sweep.png and the self-contained sweep.html, into ``folder`` (default the sweep's)."""
    import base64
    import html

    folder = res.folder if folder is None else Path(folder)
    buf = io.BytesIO()
    sweep_figure(res).savefig(buf, format="png", dpi=110)
    png = buf.getvalue()
    files = [folder / "sweep.png", folder / "sweep.html"]
    atomic_write(files[0], png)
    e = html.escape
    cols = [c for c in SWEEP_COLUMNS if c not in ("folder", "stopped_by")]
    head = "".join(f"<th>{e(c)}</th>" for c in cols)
    body = "".join(
        "<tr>" + "".join(f"<td>{e(str(r[c]))}</td>" for c in cols) + "</tr>" for r in res.rows
    )
    answer = e(answer_text(res))
    answer = answer[0].upper() + answer[1:] + "."
    if res.smallest_meeting is not None:
        folder = e(res.smallest_meeting["folder"])
        answer += f" Its layout is in the sub-folder <code>{folder}</code>."
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
own sidelobes); median PSL of random thinning: the filled aperture's own pattern plus the random
part, whose peak over n_s ≈ {res.independent_samples:.0f} independent sidelobe samples follows
Steinberg's form (near full fill the curve meets the filled aperture's PSL); the random part
alone; the filled aperture's PSL; the cell-gain rule.</p>
<h2 id="table">Budgets</h2><table><tr>{head}</tr>{body}</table>
<h2 id="cautions">Cautions</h2><ul>{"".join(f"<li>{e(c)}</li>" for c in CAUTIONS)}</ul>
<h2 id="provenance">Provenance</h2><p>method {e(res.spec.method)}, seed {res.spec.seed}, spec
digest {e(res.spec.digest)}</p></body></html>
"""
    atomic_write(files[1], doc)
    return files
