r"""Random errors of a built array's excitation, and the published floor they set.

An :class:`ErrorModel` describes what a built array adds to its nominal excitation: random
amplitude errors (dB rms), phase errors (degrees rms), B-bit phase quantisation (decorrelated
by each element's random insertion phase, which the phase shifter calibrates out) and K random
element failures. The robust objective of the search (:mod:`thinning.search.problem`) and the
Monte Carlo of :mod:`thinning.analysis.stress` draw from it. The floor beside them
(references.md rows 11–12; Mailloux ch. 7, memory; Miller 1964, memory):

.. math::

   \mathrm{ASL}_\mathrm{err} \approx
      \frac{(1 - P) + \delta^2 + P\,(\phi^2 + \sigma_q^2)}{P\,\eta_a N},\qquad
   \sigma_q^2 = \frac{\pi^2}{3\cdot 2^{2B}},\qquad \eta_a = \frac{(\sum a)^2}{N \sum a^2}

with P the fraction of elements working and δ² the mean-square relative amplitude error,
E[(10^{ε/20} − 1)²] for ε ~ N(0, S²) dB.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

__all__ = ["ErrorModel", "amplitude_error_variance", "quantisation_variance", "error_floor"]


@dataclass(frozen=True)
class ErrorModel:
    """Random errors of a built array.

    Parameters
    ----------
    amplitude_db : float  [dB]   rms amplitude error
    phase_deg : float  [deg]     rms phase error
    phase_bits : int or None     phase-shifter bits (None: continuous phase)
    failures : int               elements failed (off) per trial
    """

    amplitude_db: float = 0.0
    phase_deg: float = 0.0
    phase_bits: int | None = None
    failures: int = 0

    @property
    def any(self) -> bool:
        return bool(self.amplitude_db or self.phase_deg or self.phase_bits or self.failures)


def amplitude_error_variance(amplitude_db: float) -> float:
    """δ² = E[(10^{ε/20} − 1)²] for ε ~ N(0, S²) dB  [1] (exact for the log-normal)."""
    s = amplitude_db * math.log(10) / 20
    return math.exp(2 * s * s) - 2 * math.exp(s * s / 2) + 1


def quantisation_variance(bits: int | None) -> float:
    """σ_q² = π²/(3·2^{2B}) rad² of decorrelated B-bit phase quantisation (row 12)."""
    if not bits:
        return 0.0
    return math.pi**2 / (3 * 4.0**bits)


def error_floor(n: int, weights, model: ErrorModel) -> float:
    """The published ASL floor of random errors and failures  [1, linear] (module docstring)."""
    a = np.asarray(weights, dtype=float)
    eta = float(a.sum() ** 2 / (a.size * (a**2).sum()))
    p = (n - model.failures) / n
    d2 = amplitude_error_variance(model.amplitude_db)
    ph2 = math.radians(model.phase_deg) ** 2 + quantisation_variance(model.phase_bits)
    return ((1 - p) + d2 + p * ph2) / (p * eta * n)
