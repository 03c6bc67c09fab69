"""``thinning score``: the figures of one layout file."""

from __future__ import annotations

import json

import click

from . import cli
from ._options import pattern_options

__all__ = ["score"]


def format_table(r: dict) -> str:
    """The readable table of a score (``thinning score`` without ``--json``)."""

    def num(v, fmt):
        return "n/a" if v is None else format(v, fmt)

    def pair(v, fmt=".2f"):
        return " / ".join(num(x, fmt) for x in v)

    rows = [
        ("elements", f"{r['elements']}"),
        ("lattice sites (M)", "n/a (off-lattice)" if r["sites"] is None else f"{r['sites']}"),
        ("fill", "n/a" if r["fill"] is None else f"{100 * r['fill']:.1f} %"),
        ("frequency", f"{r['frequency_ghz']:g} GHz"),
        ("scan cone", f"{r['scan_max_deg']:g} deg half-angle"),
        ("element pattern", f"cos^{r['element_exponent']:g}(theta)"),
        ("PSL (refined)", f"{num(r['psl_db'], '.2f')} dB at (u, v) = ({pair(r['psl_uv'], '.4f')})"),
        ("PSL (best sample)", f"{num(r['psl_sampled_db'], '.2f')} dB"),
        ("ASL", f"{num(r['asl_db'], '.2f')} dB"),
        ("ASL, random thinning", f"{num(r['expected_asl_db'], '.2f')} dB (expected)"),
        ("directivity", f"{num(r['directivity_dbi'], '.2f')} dBi"),
        ("cell-gain rule", f"{num(r['pi_n_dbi'], '.2f')} dBi  [{r['cell_gain_basis']}]"),
        ("difference", f"{num(r['directivity_minus_pi_n_db'], '+.2f')} dB"),
        ("HPBW broadside x-z / y-z", f"{pair(r['hpbw_deg'])} deg"),
        ("HPBW at scan edge x-z / y-z", f"{pair(r['hpbw_scan_deg'])} deg"),
        ("grating lobes in cone", "yes" if r["grating_lobes"] else "no"),
        (
            "pattern evaluation",
            f"{r['evaluation']['engine']}, {r['evaluation']['lobes_refined']} lobes refined",
        ),
    ]
    w = max(len(k) for k, _ in rows)
    lines = [f"{k:<{w}}  {v}" for k, v in rows]
    lines.append("PSL and ASL are array-factor figures over the disc |(u, v)| <= 1 + sin(scan).")
    return "\n".join(lines)


@cli.command()
@click.argument("layout_csv", metavar="LAYOUT.csv", type=click.Path(dir_okay=False))
@pattern_options
@click.option(
    "--sites",
    type=click.IntRange(min=1),
    default=None,
    help="Candidate sites M the layout was thinned from (for the expected ASL).",
)
@click.option(
    "--oversampling",
    type=click.FloatRange(min=2.0, max=32.0),
    default=4.0,
    show_default=True,
    help="Pattern samples per null width, per axis.",
)
@click.option("--json", "as_json", is_flag=True, help="Print one JSON object instead of a table.")
def score(layout_csv, freq_ghz, scan_max_deg, element_exponent, sites, oversampling, as_json):
    """Score a layout: PSL, ASL, directivity, beamwidth and grating lobes."""
    from ..analysis.score import score_layout
    from ..errors import LayoutError
    from ..io.layout_csv import read_layout_csv
    from ..units import deg_to_rad, ghz_to_hz

    layout = read_layout_csv(layout_csv)
    if sites is not None and sites < len(layout):
        raise LayoutError(
            f"--sites {sites}: fewer candidate sites than the {len(layout)} "
            f"elements in {layout_csv}"
        )
    result = score_layout(
        layout,
        ghz_to_hz(freq_ghz),
        deg_to_rad(scan_max_deg),
        element_exponent,
        sites=sites,
        oversampling=oversampling,
    ).to_dict()
    if as_json:
        click.echo(json.dumps(result, allow_nan=False))
    else:
        click.echo(format_table(result))
