"""``thinning stress``: scanning, band edges, errors, quantisation and failures of a layout."""

from __future__ import annotations

import json

import click

from ..outputs.deliver import DEFAULT_TRIALS
from . import cli
from ._options import error_options, pattern_options

__all__ = ["stress"]


def _num(x) -> str:
    return "n/a" if x is None else f"{x:.2f}"


def format_stress(r: dict) -> str:
    """The readable form of a stress analysis."""
    scan = f"scan cone {r['scan_max_deg']:g} deg"
    sc = r.get("scan_set") or {}
    if sc.get("kind") == "sector":
        scan = (
            f"scan sector azimuth {sc['azimuth_deg'][0]:g} to {sc['azimuth_deg'][1]:g} deg, "
            f"elevation {sc['elevation_deg'][0]:g} to {sc['elevation_deg'][1]:g} deg"
        )
    out = [
        f"{r['elements']} elements at {r['frequency_ghz']:g} GHz, {scan}, "
        f"element cos^{r['element_exponent']:g}",
        "",
        "Scan (phase steering at the design frequency):",
        f"  {'theta':>6} {'phi':>5} {'PSL dB':>8} {'gain dBi':>9} {'loss dB':>9} "
        f"{'HPBW deg':>9} {'broadening':>10} {'1/cos':>6}",
    ]
    for s in r["scan"]:
        if "azimuth_deg" in s:
            out.append(f"  beam at azimuth {s['azimuth_deg']:g}, elevation {s['elevation_deg']:g}:")
        out.append(
            f"  {s['theta_deg']:>6.1f} {s['phi_deg']:>5.0f} {s['psl_db']:>8.2f} "
            f"{s['gain_dbi']:>9.2f} {s['scan_loss_db']:>9.2f} "
            f"{(s['hpbw_deg'] or float('nan')):>9.3f} "
            f"{(s['hpbw_broadening'] or float('nan')):>10.4f} {s['cos_law']:>6.4f}"
        )
    if "band" in r:
        sector = "azimuth_command_deg" in r["band"][0]
        out += [
            "",
            f"Band edges ({r['band'][0]['steering']} steering; beam angles from boresight):",
            ("  az/el deg    " if sector else "  ")
            + f"{'GHz':>8} {'command':>8} {'beam':>8} {'squint':>7} {'PSL dB':>8}  grating lobe",
        ]
        for b in r["band"]:
            where = ""
            if sector:
                el = b.get("elevation_command_deg", 0.0)
                where = f"{b['azimuth_command_deg']:>5.1f}/{el:<5.1f} "
            out.append(
                f"  {where}{b['frequency_ghz']:>8.4f} {b['theta_command_deg']:>8.2f} "
                f"{b['theta_beam_deg']:>8.2f} {b['squint_deg']:>7.2f} {b['psl_db']:>8.2f}  "
                f"{'YES' if b['grating_lobe'] else 'no'}"
            )
    if r.get("mask_margin_db"):
        mm = r["mask_margin_db"]
        out += [
            "",
            f"Sidelobe mask margin (worst beam and frequency): nominal {_num(mm['nominal'])} dB, "
            f"median {_num(mm['median'])} dB, kept by 90 % of trials {_num(mm['p10'])} dB",
        ]
    mc = r["monte_carlo"]
    m = mc["model"]
    out += [
        "",
        f"Monte Carlo, {mc['trials']} trials (amplitude {m['amplitude_error_db']:g} dB rms, "
        f"phase {m['phase_error_deg']:g} deg rms, "
        f"{m['phase_bits'] or 'continuous'} bits, {m['failures']} failed):",
        f"  PSL nominal {r['psl_db']['nominal']:.2f} dB, median {r['psl_db']['median']:.2f} dB, "
        f"90th percentile {r['psl_db']['p90']:.2f} dB",
        f"  ASL nominal {r['asl_db']['nominal']:.2f} dB, mean {r['asl_db']['mean']:.2f} dB; "
        f"published error floor {_num(r['floor_asl_db'])} dB, "
        f"nominal + floor {r['expected_asl_db']:.2f} dB",
        "",
        "Idealised model (no mutual coupling): verify by full-wave simulation and measurement.",
    ]
    return "\n".join(out)


@cli.command()
@click.argument("layout_csv", metavar="LAYOUT.csv", type=click.Path(dir_okay=False))
@click.option(
    "--spec",
    "spec_path",
    type=click.Path(dir_okay=False),
    default=None,
    help="Spec the layout was designed from: its frequency, scan cone or sector, band, "
    "sidelobe mask and element pattern (unless given here), so the built array is judged "
    "against the design's requirement.",
)
@lambda f: pattern_options(f, spec=True)
@error_options(trials=DEFAULT_TRIALS)
@click.option("--seed", type=click.IntRange(min=0), default=0, show_default=True)
@click.option("--json", "as_json", is_flag=True, help="Print one JSON object.")
def stress(
    layout_csv,
    spec_path,
    freq_ghz,
    scan_max_deg,
    element_exponent,
    band_ghz,
    steering,
    amplitude_error_db,
    phase_error_deg,
    phase_bits,
    failures,
    trials,
    seed,
    as_json,
):
    """What the built array will do: scan, band edges, random errors and failures."""
    from ..analysis.stress import stress_layout
    from ..engine.excitation import ErrorModel
    from ..io.layout_csv import read_layout_csv
    from ..units import deg_to_rad, ghz_to_hz

    layout = read_layout_csv(layout_csv)
    band = None if band_ghz is None else (ghz_to_hz(band_ghz[0]), ghz_to_hz(band_ghz[1]))
    model = ErrorModel(amplitude_error_db, phase_error_deg, phase_bits, failures)
    extra = {}
    if spec_path is not None:
        from ..spec import load_spec

        spec = load_spec(spec_path)
        extra = spec.score_options(len(layout))
        if extra["coverage"] is None and spec.mask:
            extra["coverage"] = spec.coverage
        frequency = ghz_to_hz(freq_ghz) if freq_ghz is not None else spec.frequency
        scan = deg_to_rad(scan_max_deg) if scan_max_deg is not None else spec.scan_max
        q = element_exponent if element_exponent is not None else spec.element_exponent
        if scan_max_deg is not None:
            extra["coverage"] = None
        if element_exponent is not None:
            extra["element"] = None
    elif freq_ghz is None:
        raise click.UsageError("give --freq-ghz (or --spec, whose frequency is used)")
    else:
        frequency = ghz_to_hz(freq_ghz)
        scan = deg_to_rad(scan_max_deg or 0.0)
        q = 1.0 if element_exponent is None else element_exponent
    r = stress_layout(
        layout,
        frequency,
        scan,
        q,
        band=band,
        steering=steering,
        model=model,
        trials=trials,
        seed=seed,
        **extra,
    )
    if as_json:
        click.echo(json.dumps(r, allow_nan=False))
    else:
        click.echo(format_stress(r))
