r"""The beamwidth limit of a problem as a penalty of the search's objective.

With ``[requirements] hpbw_max_deg`` the search's first figure (the PSL, or the worst excess
over a mask) carries

.. math::  P = 10\,\mathrm{dB/deg} \cdot \max(0,\ \mathrm{HPBW}_w - \mathrm{HPBW}_{max})

with HPBW_w the widest half-power beamwidth over the scan set's edge and centre at the
band's edges and f₀ (:meth:`thinning.engine.coverage.Coverage.beamwidths`: the angle between
the half-power directions along u and along v through each beam). Ten dB per degree is more
than any sidelobe a wider beam could buy, so a layout that breaks the limit loses to any that
keeps it, unless none does. The half-power points of each layout are found on its exact
pattern by a march from the all-on layout's (a thinned beam is close to them) and five steps
of regula falsi (:func:`thinning.engine.metrics.half_power_offsets_batch`; far below 1e-6 in
direction cosines): about the time of one evaluation again.
"""

from __future__ import annotations

import numpy as np

__all__ = ["HPBW_PENALTY_DB_PER_DEG", "BeamwidthPenalty"]

#: dB added to the search's first figure per degree by which the widest beam exceeds the
#: limit (module docstring)
HPBW_PENALTY_DB_PER_DEG = 10.0


class BeamwidthPenalty:
    """The penalty of a :class:`thinning.search.problem.ThinningProblem` with ``hpbw_max``.

    Parameters
    ----------
    problem : ThinningProblem   its engine, sites, scan set and band, and ``hpbw_max``  [deg]
    """

    def __init__(self, problem):
        from ..engine.coverage import Coverage
        from ..engine.metrics import half_power_offsets_batch
        from ..units import wavelength as frequency_of

        self.problem = problem
        eng, g = problem.engine, problem.engine.grid
        self.coverage = problem.coverage or Coverage.cone(
            problem.scan_max, frequency_of(problem.wavelength)
        )
        self.step = (g.du, g.dv)
        full = eng.exact(problem.sites.to_grid(np.ones((1, len(problem.sites)))))
        self.guess = (
            half_power_offsets_batch(full, (1.0, 0.0), 0.5 * g.du, 1),
            None if eng.linear else half_power_offsets_batch(full, (0.0, 1.0), 0.5 * g.dv, 1),
        )

    def __call__(self, grids) -> np.ndarray:
        """The penalty  [dB] of a stack of excitation grids."""
        grids = np.asarray(grids)
        eng = self.problem.engine
        ex = eng.exact(grids.astype(np.float64))
        widest = self.coverage.widest_beamwidth(
            ex, self.step, grids.shape[0], eng.linear, self.guess
        )
        return HPBW_PENALTY_DB_PER_DEG * np.maximum(0.0, widest - self.problem.hpbw_max)
