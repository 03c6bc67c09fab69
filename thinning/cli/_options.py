"""Checks shared by the command-line options (units at the edge: GHz, degrees)."""

from __future__ import annotations

import math

import click

__all__ = [
    "check_frequency",
    "check_angle",
    "check_exponent",
    "check_band",
    "pattern_options",
    "error_options",
]


def check_frequency(ctx, param, value):
    if value is not None and not (math.isfinite(value) and value > 0):
        raise click.BadParameter(f"{value!r}: a frequency must be a finite number of GHz > 0")
    return value


def check_angle(ctx, param, value):
    if value is not None and not (math.isfinite(value) and 0 <= value < 90):
        raise click.BadParameter(f"{value!r}: a scan half-angle must be in [0, 90) degrees")
    return value


def check_exponent(ctx, param, value):
    if value is not None and not (math.isfinite(value) and 0 <= value <= 20):
        raise click.BadParameter(f"{value!r}: the element exponent must be in [0, 20]")
    return value


def check_band(ctx, param, value):
    """``LO:HI`` in GHz → (lo, hi)."""
    if value is None:
        return None
    try:
        lo, hi = (float(v) for v in value.split(":"))
    except ValueError:
        raise click.BadParameter(f"{value!r}: expected LO:HI in GHz, e.g. 8.5:10.5") from None
    if not (0 < lo < hi):
        raise click.BadParameter(f"{value!r}: expected 0 < LO < HI")
    return lo, hi


def _apply(options, f):
    for option in reversed(options):
        f = option(f)
    return f


def pattern_options(f, spec: bool = False):
    """--freq-ghz (required), --scan-max-deg, --element-exponent; with ``spec`` none is
    required and each defaults to the spec's (None when not given)."""
    return _apply(
        [
            click.option(
                "--freq-ghz",
                type=float,
                required=not spec,
                default=None,
                callback=check_frequency,
                help="Design frequency [GHz]" + (" (required without --spec)." if spec else "."),
            ),
            click.option(
                "--scan-max-deg",
                type=float,
                default=None if spec else 0.0,
                show_default=not spec,
                callback=check_angle,
                help="Half-angle of the scan cone [deg]"
                + ("  [default: the spec's scan set, or 0]." if spec else "."),
            ),
            click.option(
                "--element-exponent",
                type=float,
                default=None if spec else 1.0,
                show_default=not spec,
                callback=check_exponent,
                help="Element power pattern cos^Q(theta); 0 = isotropic"
                + ("  [default: the spec's pattern, or 1]." if spec else "."),
            ),
        ],
        f,
    )


def error_options(trials: int):
    """The built-array options shared by ``stress`` and ``report``."""
    return lambda f: _apply(
        [
            click.option(
                "--band-ghz",
                callback=check_band,
                default=None,
                metavar="LO:HI",
                help="Band edges [GHz] for the squint and grating-lobe table.",
            ),
            click.option(
                "--steering",
                type=click.Choice(["phase", "delay"]),
                default="phase",
                show_default=True,
                help="Phase shifters squint across the band; delay does not.",
            ),
            click.option(
                "--amplitude-error-db",
                type=click.FloatRange(0, 10),
                default=0.0,
                show_default=True,
                help="rms amplitude error [dB].",
            ),
            click.option(
                "--phase-error-deg",
                type=click.FloatRange(0, 180),
                default=0.0,
                show_default=True,
                help="rms phase error [deg].",
            ),
            click.option(
                "--phase-bits",
                type=click.IntRange(1, 16),
                default=None,
                help="Phase-shifter bits (decorrelated quantisation).",
            ),
            click.option(
                "--failures",
                type=click.IntRange(min=0),
                default=0,
                show_default=True,
                help="Elements failed per trial.",
            ),
            click.option(
                "--trials",
                type=click.IntRange(min=1),
                default=trials,
                show_default=True,
                help="Monte Carlo trials.",
            ),
        ],
        f,
    )
