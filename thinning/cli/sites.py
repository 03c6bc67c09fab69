"""``thinning sites``: the candidate sites of a spec's panel, with the ids constraints take."""

from __future__ import annotations

import click

from . import cli

__all__ = ["sites", "sites_csv"]

#: Fill colours of the drawing: pinned on, kept off, free.
_COLOURS = {"pinned": "#2a9d3a", "forbidden": "#d33", "": "#4a90d9"}


def sites_csv(sites, pinned=None, forbidden=None) -> str:
    """The candidate sites as CSV text: ``id,x_mm,y_mm,row,col,constraint``.

    Ids count 1 … M in the sites' order (rows from the top, left to right): the ids that
    ``[constraints] pin_ids`` and ``forbid_ids`` take. ``row``, ``col`` are the index-grid
    indices, as in layout files; ``constraint`` is "pinned", "forbidden" or empty.
    """
    import csv
    import io

    from ..io.layout_csv import _fmt_mm

    buf = io.StringIO()
    w = csv.writer(buf, lineterminator="\n")
    w.writerow(["id", "x_mm", "y_mm", "row", "col", "constraint"])
    xs, ys = sites.x * 1e3, sites.y * 1e3
    for k in range(len(sites)):
        state = _state(k, pinned, forbidden)
        w.writerow(
            [k + 1, _fmt_mm(xs[k]), _fmt_mm(ys[k]), int(sites.row[k]), int(sites.col[k]), state]
        )
    return buf.getvalue()


def _state(k, pinned, forbidden) -> str:
    if pinned is not None and pinned[k]:
        return "pinned"
    if forbidden is not None and forbidden[k]:
        return "forbidden"
    return ""


@cli.command()
@click.argument("spec_toml", metavar="SPEC.toml", type=click.Path(dir_okay=False))
@click.option(
    "--out",
    "out_dir",
    type=click.Path(file_okay=False),
    default=None,
    help="Folder for sites.csv and sites.svg (a drawing of every site with its id; zoom in "
    "to read them). Without it the CSV goes to stdout.",
)
def sites(spec_toml, out_dir):
    """List the candidate sites of a spec's panel: id, x_mm, y_mm, row, col.

    The ids are those [constraints] pin_ids and forbid_ids take (rows from the top, left to
    right); the constraint column says which sites the spec already pins on or keeps off.
    """
    from ..spec import load_spec

    spec = load_spec(spec_toml)
    candidates = spec.sites()
    pinned, forbidden = spec.constraint_masks(candidates)
    text = sites_csv(candidates, pinned, forbidden)
    if out_dir is None:
        click.echo(text, nl=False)
        return
    from pathlib import Path

    from ..geometry.layout import Layout
    from ..io.atomic import atomic_write
    from ..io.fileset import file_set, probe_folder
    from ..outputs.svg_drawing import layout_svg

    out = probe_folder(out_dir)
    m = len(candidates)
    every = Layout(candidates.x, candidates.y, ids=[f"{k}" for k in range(1, m + 1)])
    states = [_state(k, pinned, forbidden) for k in range(m)]
    name = str(spec.raw.get("name", Path(spec.source).stem))
    svg = layout_svg(
        every,
        spec.aperture,
        title=f"{name}: {m} candidate sites and their ids",
        fills=[_COLOURS[s] for s in states],
        legend=[
            (_COLOURS[""], f"site ({m}), its id inside"),
            (_COLOURS["pinned"], f"pinned on ({int(pinned.sum())})"),
            (_COLOURS["forbidden"], f"kept off ({int(forbidden.sum())})"),
        ],
        standalone=True,
    )
    with file_set(out) as stage:
        atomic_write(stage / "sites.csv", text)
        atomic_write(stage / "sites.svg", '<?xml version="1.0" encoding="UTF-8"?>\n' + svg + "\n")
    click.echo(f"{m} candidate sites")
    for f in ("sites.csv", "sites.svg"):
        click.echo(f"wrote {out / f}")
