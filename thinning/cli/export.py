"""``thinning export`` and ``thinning report``: deliverables for any layout file."""

from __future__ import annotations

from pathlib import Path

import click

from ..outputs.deliver import DEFAULT_TRIALS
from . import cli
from ._options import check_angle, check_exponent, check_frequency, error_options, pattern_options

__all__ = ["export", "report"]


def _spec_from(spec_path):
    """(spec, its sites) of an optional --spec, or (None, None)."""
    if spec_path is None:
        return None, None
    from ..spec import load_spec

    spec = load_spec(spec_path)
    return spec, spec.sites()


def _aperture_from(spec_path):
    spec, sites = _spec_from(spec_path)
    if spec is None:
        return None, None, None, ""
    return spec.aperture, sites, spec.lattice, str(spec.raw.get("name", Path(spec.source).stem))


@cli.command()
@click.argument("layout_csv", metavar="LAYOUT.csv", type=click.Path(dir_okay=False))
@click.option(
    "--to",
    "fmt",
    type=click.Choice(["dxf", "svg", "png", "json"]),
    required=True,
    help="Output format.",
)
@click.option(
    "--out",
    "out_path",
    type=click.Path(dir_okay=False),
    default=None,
    help="Output file (default: the layout file with the new suffix).",
)
@click.option(
    "--spec",
    "spec_path",
    type=click.Path(dir_okay=False),
    default=None,
    help="Spec whose outline, holes and clearance to draw with the elements.",
)
@click.option(
    "--footprint-mm",
    type=click.FloatRange(min=0, min_open=True),
    default=None,
    help="Element marker diameter [mm] (default 0.8 x the closest spacing).",
)
@click.option(
    "--freq-ghz",
    type=float,
    default=None,
    callback=check_frequency,
    help="With --to json: add the layout's figures at this frequency [GHz].",
)
@click.option(
    "--scan-max-deg",
    type=float,
    default=0.0,
    show_default=True,
    callback=check_angle,
    help="With --to json and --freq-ghz: half-angle of the scan cone [deg].",
)
@click.option(
    "--element-exponent",
    type=float,
    default=1.0,
    show_default=True,
    callback=check_exponent,
    help="With --to json and --freq-ghz: element power pattern cos^Q(theta); 0 = isotropic.",
)
def export(
    layout_csv, fmt, out_path, spec_path, footprint_mm, freq_ghz, scan_max_deg, element_exponent
):
    """Write a layout as a DXF or SVG/PNG drawing, or as JSON."""
    from ..io.layout_csv import read_layout_csv

    layout = read_layout_csv(layout_csv)
    aperture, sites, lattice, name = _aperture_from(spec_path)
    out = Path(out_path) if out_path else Path(layout_csv).with_suffix(f".{fmt}")
    if not out.parent.is_dir():
        from ..errors import OutputError

        raise OutputError(f"{out}: cannot write: folder '{out.parent}' does not exist")
    if fmt == "json":
        from ..io.atomic import atomic_write_json

        doc = {
            "elements": [
                {
                    "id": i,
                    "x_mm": round(float(x) * 1e3, 6),
                    "y_mm": round(float(y) * 1e3, 6),
                    **({"amplitude": float(a)} if layout.amplitude is not None else {}),
                }
                for i, x, y, a in zip(
                    layout.element_ids, layout.x, layout.y, layout.weights, strict=True
                )
            ]
        }
        if freq_ghz is not None:
            from ..analysis.score import score_layout
            from ..units import deg_to_rad, ghz_to_hz

            doc["metrics"] = score_layout(
                layout, ghz_to_hz(freq_ghz), deg_to_rad(scan_max_deg), element_exponent, sites=sites
            ).to_dict()
        atomic_write_json(out, doc)
        files = [out]
    else:
        from ..outputs.deliver import write_drawings

        files = write_drawings(
            out.parent,
            layout,
            aperture,
            frequency_hz=None if freq_ghz is None else freq_ghz * 1e9,
            lattice=lattice,
            name=name,
            sites=sites,
            footprint_mm=footprint_mm,
            formats=(fmt,),
            stem=out.stem,
        )
    for f in files:
        click.echo(f"wrote {f}")


@cli.command()
@click.argument("layout_csv", metavar="LAYOUT.csv", type=click.Path(dir_okay=False))
@pattern_options
@click.option(
    "--out",
    "out_path",
    type=click.Path(dir_okay=False),
    default=None,
    help="The HTML file (default: report.html beside the layout file).",
)
@click.option(
    "--spec",
    "spec_path",
    type=click.Path(dir_okay=False),
    default=None,
    help="Spec of the panel: outline for the drawing, candidate sites for the fill and the "
    "random-thinning expectation, its name, constraints and requirements, and its text in an "
    "appendix.",
)
@error_options(trials=DEFAULT_TRIALS)
def report(
    layout_csv,
    freq_ghz,
    scan_max_deg,
    element_exponent,
    out_path,
    spec_path,
    band_ghz,
    steering,
    amplitude_error_db,
    phase_error_deg,
    phase_bits,
    failures,
    trials,
):
    """Write a self-contained HTML design-review report for a layout file."""
    from ..analysis.requirements import judge
    from ..analysis.score import score_layout
    from ..errors import OutputError
    from ..io.layout_csv import read_layout_csv
    from ..outputs.deliver import default_stress, write_report
    from ..units import deg_to_rad, ghz_to_hz

    layout = read_layout_csv(layout_csv)
    spec, sites = _spec_from(spec_path)
    aperture = None if spec is None else spec.aperture
    name = "" if spec is None else str(spec.raw.get("name", Path(spec.source).stem))
    out = Path(out_path) if out_path else Path(layout_csv).parent / "report.html"
    if not out.parent.is_dir():
        raise OutputError(f"{out}: cannot write: folder '{out.parent}' does not exist")
    f, scan = ghz_to_hz(freq_ghz), deg_to_rad(scan_max_deg)
    cfg = {
        "amplitude_error_db": amplitude_error_db,
        "phase_error_deg": phase_error_deg,
        "phase_bits": phase_bits,
        "failures": failures,
        "trials": trials,
        "steering": steering,
    }
    if band_ghz is not None:
        cfg["band_ghz"] = list(band_ghz)
    if failures >= len(layout):
        from ..errors import LayoutError

        raise LayoutError(f"--failures {failures}: the layout has only {len(layout)} elements")
    stress = default_stress(layout, f, scan, element_exponent, cfg, spec=spec)
    extra = {} if spec is None else spec.score_options(len(layout))
    metrics = score_layout(layout, f, scan, element_exponent, sites=sites, **extra).to_dict()
    verdicts = None if spec is None else judge(spec.requirements, metrics)
    path = write_report(
        out,
        layout,
        f,
        scan,
        element_exponent,
        aperture=aperture,
        sites=sites,
        stress=stress,
        provenance={"layout_file": Path(layout_csv).name},
        title=f"{name or Path(layout_csv).stem}: array layout report",
        metrics=metrics,
        spec=spec,
        requirements=verdicts,
        footprint_mm=None if spec is None else spec.output.get("footprint_mm"),
    )
    click.echo(f"wrote {path}")
