"""``thinning design``: search a spec's panel for the best layout and write it."""

from __future__ import annotations

import sys

import click

from . import cli

__all__ = ["design"]


@cli.command()
@click.argument("spec_toml", metavar="SPEC.toml", type=click.Path(dir_okay=False))
@click.option(
    "--out",
    "out_dir",
    required=True,
    type=click.Path(file_okay=False),
    help="Folder for layout.csv, layout.json and the drawings (created if needed).",
)
@click.option(
    "--workers",
    type=click.IntRange(min=1),
    default=None,
    help="Processes evaluating each generation (default: the spec's, or 1). "
    "The result is the same for any number.",
)
@click.option("--quiet", is_flag=True, help="No progress on stderr.")
def design(spec_toml, out_dir, workers, quiet):
    """Thin the spec's panel to its exact element budget with the lowest sidelobes.

    Progress goes to stderr; Ctrl-C or the spec's time limit end the run with the best layout
    so far written. The same spec and seed give the same layout.csv.
    """
    from ..analysis.design import format_progress, run_design
    from ..spec import load_spec

    spec = load_spec(spec_toml)
    for w in spec.warnings:
        click.echo(f"thinning design: warning: {w}", err=True)
    progress = None if quiet else format_progress(spec.method_label)
    result = run_design(
        spec, out_dir, workers=workers, progress=progress, extra_outputs=_extra_outputs()
    )
    if not quiet and sys.stderr.isatty():
        sys.stderr.write("\n")
    m = result.metrics
    s = result.search
    click.echo(
        f"{m['elements']} of {m['candidate_sites']} sites ({100 * m['fill']:.1f} %): "
        f"PSL {m['psl_db']:.2f} dB, ASL {m['asl_db']:.2f} dB "
        f"(random thinning {m['expected_asl_db']:.2f} dB), "
        f"directivity {m['directivity_dbi']:.2f} dBi ({m['directivity_minus_pi_n_db']:+.2f} dB "
        f"vs cell-gain rule); {s.evaluations:,} evaluations in {s.runtime_s:.1f} s "
        f"({s.stopped_by})"
    )
    for f in result.files:
        click.echo(f"wrote {f}")


def _extra_outputs():
    """Drawings and the report, where the modules that write them are installed."""
    try:
        from ..outputs.deliver import write_deliverables
    except ModuleNotFoundError:
        return None
    return write_deliverables
