r"""The beamwidth limit of a problem as a penalty of the search's objective.

With ``[requirements] hpbw_max_deg`` the search's first figure (the PSL, or the worst excess
over a mask) carries

.. math::  P = 10\,\mathrm{dB/deg} \cdot \max(0,\ \mathrm{HPBW}_w - \mathrm{HPBW}_{max})

with HPBW_w the widest half-power beamwidth over the scan set's edge and centre at the
band's edges and f₀ (:meth:`thinning.engine.coverage.Coverage.beamwidths`: the angle between
the half-power directions along u and along v through each beam). Ten dB per degree is more
than any sidelobe a wider beam could buy, so a layout that breaks the limit loses to any that
keeps it, unless none does. Along the axes through the broadside beam the array factor
is that of the grid's column (row) sums, so the half-power points of a whole batch follow
from a few small products (:func:`thinning.engine.metrics.axis_half_power`: exact, started
from the all-on layout's points), over the beams that can be the widest: the 12 widest along
u and the 12 along v for the all-on layout (tests/test_mask.py checks that they hold the
reported widest beam).
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
        from ..engine.metrics import half_power_offsets
        from ..units import wavelength as frequency_of

        self.problem = problem
        eng, g = problem.engine, problem.engine.grid
        self.coverage = problem.coverage or Coverage.cone(
            problem.scan_max, frequency_of(problem.wavelength)
        )
        full = eng.exact(problem.sites.to_grid(np.ones((1, len(problem.sites)))))
        d_u = half_power_offsets(full, (1.0, 0.0), 0.5 * g.du)
        d_v = None if eng.linear else half_power_offsets(full, (0.0, 1.0), 0.5 * g.dv)
        self.guess = (max(d_u), None if d_v is None else max(d_v))
        # the beams that can be the widest: the 12 widest along u and the 12 widest along v
        # for the all-on layout, with their offsets swapped too (the order of the beams by
        # width is set by where they point and the frequency, and a layout's own
        # half-power offsets, even lopsided ones, barely change it)
        one = lambda d: (np.array([d[0]]), np.array([d[1]]))  # noqa: E731
        zero = (np.zeros(1), np.zeros(1))
        keep = set()
        for d in (d_u, d_u[::-1]):  # widths along u
            w, beams = self.coverage.beamwidths(one(d))
            keep |= set(np.argsort(-w[0])[:12].tolist())
        if d_v is not None:
            for d in (d_v, d_v[::-1]):  # widths along v
                w, beams = self.coverage.beamwidths(zero, one(d))
                keep |= set(np.argsort(-w[0])[:12].tolist())
        self.beams = beams[sorted(keep)]

    def widest(self, grids) -> np.ndarray:
        """The widest half-power beamwidth  [deg] of each of a stack of excitation grids
        over the scan set and band."""
        from ..engine.metrics import axis_half_power, half_power_offsets_batch

        grids = np.asarray(grids, dtype=np.float64)
        eng = self.problem.engine
        gx, gy = eng.pitch
        lam = eng.wavelength
        d_u = axis_half_power(grids.sum(axis=1), gx, lam, self.guess[0])
        d_v = None
        if not eng.linear:
            d_v = axis_half_power(grids.sum(axis=2), gy, lam, self.guess[1])
        far = ~np.isfinite(d_u[0] + d_u[1] + (0.0 if d_v is None else d_v[0] + d_v[1]))
        if far.any():  # a beam wider than three times the all-on layout's: march
            g = eng.grid
            ex = eng.exact(grids[far])
            k = int(far.sum())
            for d, axis, step in ((d_u, (1.0, 0.0), g.du), (d_v, (0.0, 1.0), g.dv)):
                if d is not None:
                    far_d = half_power_offsets_batch(ex, axis, 0.5 * step, k)
                    d[0][far], d[1][far] = far_d
        widths, _ = self.coverage.beamwidths(d_u, d_v, beams=self.beams)
        return widths.max(axis=1)

    def __call__(self, grids) -> np.ndarray:
        """The penalty  [dB] of a stack of excitation grids."""
        widest = self.widest(grids)
        return HPBW_PENALTY_DB_PER_DEG * np.maximum(0.0, widest - self.problem.hpbw_max)
