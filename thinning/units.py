"""Unit conversions at the edges of the program, in one named place.

Inside `thinning` everything is SI: metres, hertz, radians, linear power ratios. Files and
the command line speak millimetres, gigahertz, degrees and decibels; they convert here.
"""

from __future__ import annotations

import math

import numpy as np

__all__ = [
    "SPEED_OF_LIGHT",
    "mm_to_m",
    "m_to_mm",
    "ghz_to_hz",
    "hz_to_ghz",
    "deg_to_rad",
    "rad_to_deg",
    "wavelength",
    "to_db",
    "from_db",
]

#: Speed of light in vacuum [m/s] (exact, SI definition).
SPEED_OF_LIGHT = 299_792_458.0


def mm_to_m(value):
    """Millimetres to metres."""
    return np.asarray(value, dtype=float) * 1e-3 if np.ndim(value) else float(value) * 1e-3


def m_to_mm(value):
    """Metres to millimetres."""
    return np.asarray(value, dtype=float) * 1e3 if np.ndim(value) else float(value) * 1e3


def ghz_to_hz(value: float) -> float:
    """Gigahertz to hertz."""
    return float(value) * 1e9


def hz_to_ghz(value: float) -> float:
    """Hertz to gigahertz."""
    return float(value) * 1e-9


def deg_to_rad(value):
    """Degrees to radians."""
    return np.deg2rad(value) if np.ndim(value) else math.radians(float(value))


def rad_to_deg(value):
    """Radians to degrees."""
    return np.rad2deg(value) if np.ndim(value) else math.degrees(float(value))


def wavelength(frequency: float) -> float:
    """Free-space wavelength.

    Parameters
    ----------
    frequency : float  [Hz]

    Returns
    -------
    float  [m]
    """
    return SPEED_OF_LIGHT / float(frequency)


def to_db(power_ratio):
    """Power ratio to decibels, 10·log10; zero maps to -inf without a warning."""
    with np.errstate(divide="ignore"):
        out = 10.0 * np.log10(power_ratio)
    return float(out) if np.ndim(out) == 0 else out


def from_db(db):
    """Decibels to a power ratio, 10**(dB/10)."""
    out = 10.0 ** (np.asarray(db, dtype=float) / 10.0)
    return float(out) if np.ndim(out) == 0 else out
