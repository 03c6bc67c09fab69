"""``thinning sweep``: the budget-versus-sidelobe trade of one spec."""

from __future__ import annotations

import click

from . import cli

__all__ = ["sweep"]


@cli.command()
@click.argument("spec_toml", metavar="SPEC.toml", type=click.Path(dir_okay=False))
@click.option(
    "--elements",
    default=None,
    metavar="LIST|START:STOP:STEP",
    help="Budgets: 100,150,200 or 100:300:50 (counting up, STOP included).",
)
@click.option("--fill", default=None, metavar="LIST", help="Budgets as fill fractions: 0.3,0.5.")
@click.option(
    "--chips",
    default=None,
    metavar="LIST|START:STOP:STEP",
    help="With [tiles] channels_per_chip: budgets in whole chips (k chips = k × channels "
    "elements, every tile a whole number of chips).",
)
@click.option(
    "--per-tile",
    "per_tile",
    default=None,
    metavar="LIST|START:STOP:STEP",
    help="With [tiles]: budgets as elements per full tile (identical counts; partial tiles "
    "at their scaled limit).",
)
@click.option(
    "--out",
    "out_dir",
    required=True,
    type=click.Path(file_okay=False),
    help="Folder for sweep.csv, sweep.json, sweep.png, sweep.html and one sub-folder "
    "per budget. Rerunning into it reuses the budgets already done.",
)
@click.option(
    "--workers",
    type=click.IntRange(min=1),
    default=1,
    show_default=True,
    help="Budgets run in parallel processes (results do not depend on it).",
)
@click.option(
    "--cluster",
    default=None,
    metavar="ADDRESS",
    help="Run the budgets on an existing Dask cluster, e.g. tcp://host:8786 (needs "
    "thinning[cluster]; --workers is then ignored; results do not depend on it).",
)
@click.option("--quiet", is_flag=True, help="No progress on stderr.")
def sweep(spec_toml, elements, fill, chips, per_tile, out_dir, workers, cluster, quiet):
    """Run the spec's method at several budgets and compare them with theory."""
    from ..analysis.sweep import run_sweep
    from ..outputs.sweep_page import answer_text, write_sweep_outputs

    def progress(n, meta):
        if not quiet:
            click.echo(
                f"thinning sweep: {n} elements: PSL {meta['psl_db']:.2f} dB "
                f"({meta['evaluations']:,} evaluations, {meta['runtime_s']:.1f} s)",
                err=True,
            )

    res = run_sweep(
        spec_toml,
        elements,
        fill,
        out_dir,
        workers=workers,
        progress=progress,
        cluster=cluster,
        extra_outputs=write_sweep_outputs,
        budgets_chips=chips,
        budgets_per_tile=per_tile,
    )
    files = res.files
    if res.reused:
        click.echo(
            f"reused {len(res.reused)} budget(s) already done: {', '.join(map(str, res.reused))}"
        )
    click.echo(
        f"{'N':>7} {'fill':>6} {'PSL dB':>8} {'rand PSL':>9} {'ASL dB':>8} {'rand ASL':>9} "
        f"{'D dBi':>7} {'piN dBi':>8}"
    )
    for r in res.rows:
        click.echo(
            f"{r['elements']:>7} {r['fill']:>6.3f} {r['psl_db']:>8.2f} "
            f"{r['random_median_psl_db']:>9.2f} {r['asl_db']:>8.2f} "
            f"{r['expected_asl_db']:>9.2f} {r['directivity_dbi']:>7.2f} "
            f"{r['pi_n_dbi']:>8.2f}"
        )
    click.echo("rand PSL: median PSL of random thinning; rand ASL: its expected ASL.")
    if res.requirements:
        line = answer_text(res, plain=True)
        if res.smallest_meeting is not None:
            line += f"; layout in {res.folder / res.smallest_meeting['folder']}"
        click.echo(line)
    for f in files:
        click.echo(f"wrote {f}")
