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

from ..errors import SpecError, where

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


def check_stress_table(st: dict, src, number, choice) -> None:
    """Check a spec's ``[stress]`` table (``number``/``choice``: the spec's value checkers)."""
    for k, v in st.items():
        if k == "steering":
            choice(v, ("phase", "delay"), src, "stress.steering")
        elif k == "band_ghz":
            if not (isinstance(v, list) and len(v) == 2):
                raise SpecError(f"{where(src, 'stress.band_ghz')}expected [low, high] in GHz")
            lo, hi = (number(x, src, "stress.band_ghz", lo=0, lo_open=True) for x in v)
            if not lo < hi:
                raise SpecError(f"{where(src, 'stress.band_ghz')}{v!r}: low must be below high")
        else:
            number(
                v,
                src,
                f"stress.{k}",
                lo=0,
                integer=k in ("phase_bits", "failures", "trials", "seed"),
            )


def robust_from_spec(rob, src, number):
    """(model, trials, percentile, seed) of a spec's ``[robust]`` table (None: no table)."""
    robust = None
    r_trials, r_pct, r_seed = 16, 90.0, 0
    if rob is not None:
        bits = rob.get("phase_bits")
        robust = ErrorModel(
            amplitude_db=number(
                rob.get("amplitude_error_db", 0.0), src, "robust.amplitude_error_db", lo=0, hi=10
            ),
            phase_deg=number(
                rob.get("phase_error_deg", 0.0), src, "robust.phase_error_deg", lo=0, hi=180
            ),
            phase_bits=None
            if bits is None
            else number(bits, src, "robust.phase_bits", lo=1, hi=16, integer=True),
            failures=number(rob.get("failures", 0), src, "robust.failures", lo=0, integer=True),
        )
        r_trials = number(rob.get("trials", 16), src, "robust.trials", lo=2, hi=1000, integer=True)
        r_pct = number(rob.get("percentile", 90.0), src, "robust.percentile", lo=0, hi=100)
        r_seed = number(rob.get("seed", 0), src, "robust.seed", lo=0, integer=True)
        if not robust.any:
            raise SpecError(
                f"{where(src, 'robust')}states no error: give at least one of "
                "amplitude_error_db, phase_error_deg, phase_bits, failures"
            )
    return robust, r_trials, r_pct, r_seed
