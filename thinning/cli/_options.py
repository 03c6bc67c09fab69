"""Checks shared by the command-line options (units at the edge: GHz, degrees)."""

from __future__ import annotations

import math

import click

__all__ = ["check_frequency", "check_angle", "check_exponent"]


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
