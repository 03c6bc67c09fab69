"""``thinning design``: search a spec's panel for the best layout and write it."""

from __future__ import annotations

import sys

import click

from . import cli

__all__ = ["design", "summary_line"]


#: How each way a search can end is told in the summary line.
_STOPS = {
    "evaluations": "evaluation budget reached: reproducible",
    "generations": "generations done: reproducible",
    "stall": "stalled, no improvement: reproducible",
    "draws": "all draws done: reproducible",
    "trials": "all trials done: reproducible",
    "time": "time limit reached: the result depends on machine speed",
    "interrupt": "interrupted: the best layout so far; the result depends on machine speed",
}


def summary_line(result) -> str:
    """The one-line result of a design: figures, requirement verdicts, how the run ended."""
    from ..analysis.requirements import verdict_phrase

    m = result.metrics
    s = result.search
    verdicts = "".join(
        f"; {verdict_phrase(k, v, plain=True)}" for k, v in m.get("requirements", {}).items()
    )
    ended = _STOPS.get(s.stopped_by, s.stopped_by)
    if s.stopped_by not in _STOPS and not s.deterministic:
        ended += ": the result depends on machine speed"
    return (
        f"{m['elements']} of {m['candidate_sites']} sites ({100 * m['fill']:.1f} %): "
        f"PSL {m['psl_db']:.2f} dB, ASL {m['asl_db']:.2f} dB "
        f"(random thinning {m['expected_asl_db']:.2f} dB), "
        f"directivity {m['directivity_dbi']:.2f} dBi ({m['directivity_minus_pi_n_db']:+.2f} dB "
        f"vs cell-gain rule){verdicts}; {s.evaluations:,} evaluations in {s.runtime_s:.1f} s "
        f"({ended})"
    )


@cli.command()
@click.argument("spec_toml", metavar="SPEC.toml", type=click.Path(dir_okay=False))
@click.option(
    "--out",
    "out_dir",
    required=True,
    type=click.Path(file_okay=False),
    help="Folder for layout.csv, layout.json, the drawings and report.html (created if "
    "needed; checked before the search). The run replaces the files of the previous run "
    "there as one set, or leaves them untouched.",
)
@click.option(
    "--workers",
    type=click.IntRange(min=1),
    default=None,
    help="Processes evaluating each generation (default: the spec's, or 1). "
    "The result is the same for any number.",
)
@click.option(
    "--compare-unconstrained",
    is_flag=True,
    default=None,
    help="With [tiles]: also design the panel without the tile rules (same budget and "
    "limits) and give the cost of the constraint in layout.json and the report.",
)
@click.option("--quiet", is_flag=True, help="No progress on stderr.")
@click.pass_context
def design(ctx, spec_toml, out_dir, workers, compare_unconstrained, quiet):
    """Thin the spec's panel to its exact element budget with the lowest sidelobes.

    Progress goes to stderr; Ctrl-C or the spec's time limit end the search with the best
    layout so far written (Ctrl-C: exit status 130). The same spec and seed give the same
    layout.csv when the run ends by its evaluation budget, stall or generations
    (layout.json: deterministic), not when the time limit or Ctrl-C ends it.
    """
    from ..analysis.design import format_progress, run_design
    from ..spec import load_spec

    spec = load_spec(spec_toml)
    for w in spec.warnings:
        click.echo(f"thinning design: warning: {w}", err=True)
    figure = "worst excess over the mask" if spec.mask else "best PSL"
    progress = None if quiet else format_progress(spec.method_label, figure)
    result = run_design(
        spec,
        out_dir,
        workers=workers,
        progress=progress,
        extra_outputs=_extra_outputs(),
        compare_unconstrained=compare_unconstrained or None,
    )
    if not quiet and sys.stderr.isatty():
        sys.stderr.write("\n")
    click.echo(summary_line(result))
    for f in result.files:
        click.echo(f"wrote {f}")
    if result.search.stopped_by == "interrupt":
        ctx.exit(130)


def _extra_outputs():
    """Drawings and the report, where the modules that write them are installed."""
    try:
        from ..outputs.deliver import write_deliverables
    except ModuleNotFoundError:
        return None
    return write_deliverables
