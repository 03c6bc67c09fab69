"""Score one layout: the full set of figures an engineer signs off on.

This is what ``thinning score`` prints and what every design records: PSL and ASL over the
scan cone, the random-thinning expectation, directivity against the cell-gain rule,
half-power beamwidths at broadside and at the scan edge, and grating lobes.

PSL and ASL are array-factor figures (conventions.md, "Pattern"): the element pattern is
not applied to them. Directivity includes the cosᵠθ element pattern.
"""

from __future__ import annotations

import math
from dataclasses import asdict, dataclass, field

import numpy as np
import shapely

from ..engine import metrics
from ..engine.pattern import DirectPatternEngine, FFTPatternEngine
from ..geometry.lattice import generated_lattice, grating_lobe_positions
from ..geometry.layout import Layout
from ..units import to_db

__all__ = ["ScoreResult", "score_layout", "layout_engine"]


@dataclass
class ScoreResult:
    """Figures of one layout (dB, dBi, degrees, GHz at the edge, as in the JSON output)."""

    elements: int
    sites: int | None
    fill: float | None
    psl_db: float
    psl_uv: list
    psl_sampled_db: float
    asl_db: float
    expected_asl_db: float
    directivity_dbi: float
    pi_n_dbi: float
    directivity_minus_pi_n_db: float
    cell_gain_basis: str
    hpbw_deg: list
    hpbw_scan_deg: list
    grating_lobes: bool
    grating_lobe_uv: list
    scan_max_deg: float
    frequency_ghz: float
    element_exponent: float
    lattice: dict = field(default_factory=dict)
    evaluation: dict = field(default_factory=dict)

    def to_dict(self) -> dict:
        return asdict(self)


def _clean(x, digits=6):
    if x is None or not math.isfinite(x):
        return None
    return round(float(x), digits)


def layout_engine(
    layout: Layout,
    wavelength: float,
    scan_max: float,
    oversampling: float = 4.0,
    workers: int = -1,
    full: bool = False,
):
    """The pattern engine for a layout, its excitation and its exact evaluator.

    ``full`` keeps the whole u-v period on a grid (for off-centre sidelobe discs).

    Returns
    -------
    engine, grid or None, exact, fit or None
        ``grid`` is the excitation on the index grid for an FFT engine, None for a direct one.
    """
    fit = layout.grid_fit()
    if fit is not None:
        rows, cols = fit.shape
        grid = np.zeros((rows, cols), dtype=np.float64)
        grid[fit.row, fit.col] = layout.weights
        eng = FFTPatternEngine(
            (rows, cols),
            fit.pitch,
            wavelength,
            scan_max,
            oversampling,
            linear=fit.linear,
            workers=workers,
            full=full,
            compiled=False,  # a few evaluations: not worth loading the compiled loops
        )
        return eng, grid, eng.exact(grid), fit
    eng = DirectPatternEngine(
        layout.x,
        layout.y,
        layout.weights,
        wavelength,
        scan_max,
        oversampling,
        linear=layout.is_linear,
    )
    return eng, None, eng.pexact, None


def _lattice_sites(fit, basis_idx) -> np.ndarray:
    """The sites of the layout's own lattice inside the convex hull of its elements.

    Returns a boolean mask on the layout's index grid: the filled aperture the layout was
    (presumably) thinned from.
    """
    rows, cols = fit.shape
    h, p, g = int(basis_idx[0, 0]), int(basis_idx[0, 1]), int(basis_idx[1, 1])
    c0, r0 = int(fit.col[0]), int(fit.row[0])
    rr, cc = np.meshgrid(np.arange(rows), np.arange(cols), indexing="ij")
    if g == 0:  # all elements on one row
        on = (rr == r0) & (((cc - c0) % h == 0) if h else (cc == c0))
        lo, hi = fit.col.min(), fit.col.max()
        return on & (cc >= lo) & (cc <= hi)
    dr = rr - r0
    on = dr % g == 0
    if h == 0:  # all elements on one column
        on &= cc == c0 + (dr // g) * p
        return on & (rr >= fit.row.min()) & (rr <= fit.row.max())
    on &= (cc - c0 - (dr // g) * p) % h == 0
    pts = np.column_stack([fit.col, fit.row]).astype(float)
    hull = shapely.MultiPoint(pts).convex_hull.buffer(1e-6)
    inside = shapely.contains_xy(hull, cc.astype(float), rr.astype(float))
    return on & inside


def score_layout(
    layout: Layout,
    frequency: float,
    scan_max: float = 0.0,
    q: float = 1.0,
    sites: int | None = None,
    oversampling: float = 4.0,
    workers: int = -1,
) -> ScoreResult:
    """All figures of a layout.

    Parameters
    ----------
    layout : Layout
    frequency : float  [Hz]
    scan_max : float  [rad]   half-angle of the scan cone
    q : float  [1]   element-pattern exponent (cosᵠθ; 0 = isotropic over the full sphere)
    sites : int, optional
        Candidate sites M the layout was thinned from, for the random-thinning expectation;
        by default the sites of the layout's own lattice inside the convex hull of its
        elements (1/N, M → ∞, for a layout off any lattice). The expectation includes the
        sidelobes of that filled aperture.
    oversampling : float   FFT (or direct grid) samples per null width, per axis
    workers : int   threads for scipy.fft
    """
    from ..units import wavelength as wl

    lam = wl(frequency)
    n = len(layout)
    eng, grid, exact, fit = layout_engine(layout, lam, scan_max, oversampling, workers)
    detail = eng.detail(grid) if grid is not None else eng.detail()
    g = eng.grid

    # directivity and the cell-gain rule
    lattice_info: dict
    glob = np.zeros((0, 2))
    if fit is not None:
        gx, gy = fit.pitch
        d = metrics.directivity_grid(grid, (gx, gy), lam, q)
        basis_idx = generated_lattice(fit.col, fit.row)
        basis = basis_idx * np.array([[gx], [gy]])
        filled = _lattice_sites(fit, basis_idx)
        m_lat = int(filled.sum())
        filled_asl = float(eng.evaluate(filled.astype(np.float64), refine=False).asl[0])
        if fit.linear or not np.any(basis_idx[:, 1]) or not np.any(basis_idx[:, 0]):
            step = float(np.linalg.norm(basis[:, 0] if np.any(basis_idx[:, 0]) else basis[:, 1]))
            step = step or gx
            rule = metrics.linear_gain_rule(n, step, lam, q)
            basis_note = "2·N·d/λ × element directivity across the line (linear array)"
            lin_basis = np.array([[step, 0.0], [0.0, 0.0]])
            glob = grating_lobe_positions(lin_basis, lam, scan_max) if n > 1 else glob
            lattice_info = {"kind": "linear", "pitch_mm": [gx * 1e3], "step_mm": step * 1e3}
        else:
            cell = abs(float(np.linalg.det(basis)))
            rule = metrics.cell_gain_rule(n, cell, lam)
            basis_note = "4π·N·A_cell/λ² (lattice cell)"
            glob = grating_lobe_positions(basis, lam, scan_max)
            lattice_info = {
                "kind": "grid",
                "pitch_mm": [gx * 1e3, gy * 1e3],
                "basis_mm": (basis.T * 1e3).round(6).tolist(),
                "cell_area_mm2": cell * 1e6,
            }
        lattice_info["fit_residual_um"] = fit.residual * 1e6
    else:
        d = metrics.directivity_points(layout.x, layout.y, layout.weights, lam, q)
        m_lat = None
        filled_asl = 0.0
        if layout.is_linear:
            step = float(np.ptp(layout.x)) / max(n - 1, 1)
            rule = metrics.linear_gain_rule(n, step, lam, q)
            basis_note = (
                "2·N·d/λ × element directivity across the line, d the mean spacing (off-lattice)"
            )
        else:
            hull = shapely.MultiPoint(np.column_stack([layout.x, layout.y])).convex_hull
            cell = hull.area / n if hull.area > 0 else (lam / 2) ** 2
            rule = metrics.cell_gain_rule(n, cell, lam)
            basis_note = "4π·N·A/λ² with A = convex-hull area / N (off-lattice)"
        lattice_info = {"kind": "off-lattice"}
    m = sites if sites is not None else m_lat

    # beamwidths in the principal planes, at broadside and at the scan edge
    u_scan = math.sin(scan_max)
    step = 0.5 * g.du
    xp, xm = metrics.half_power_offsets(exact, (1.0, 0.0), step)
    bw = [metrics.beamwidth_deg(xp, xm)]
    bw_scan = [metrics.beamwidth_deg(xp, xm, u_scan)]
    if (fit is not None and fit.linear) or (fit is None and layout.is_linear):
        bw.append(metrics.element_beamwidth_deg(q))
        bw_scan.append(metrics.element_beamwidth_deg(q))
    else:
        yp, ym = metrics.half_power_offsets(exact, (0.0, 1.0), 0.5 * g.dv)
        bw.append(metrics.beamwidth_deg(yp, ym))
        bw_scan.append(metrics.beamwidth_deg(yp, ym, u_scan))

    directivity_dbi = float(to_db(d))
    pi_n_dbi = float(to_db(rule))
    return ScoreResult(
        elements=n,
        sites=m,
        fill=(n / m) if m else None,
        psl_db=_clean(to_db(detail.psl)) if detail.psl > 0 else None,
        psl_uv=[_clean(detail.psl_uv[0]), _clean(detail.psl_uv[1])],
        psl_sampled_db=_clean(to_db(detail.psl_sampled)) if detail.psl_sampled > 0 else None,
        asl_db=_clean(to_db(detail.asl)) if detail.asl > 0 else None,
        expected_asl_db=_clean(to_db(metrics.expected_asl_random(n, m, filled_asl))),
        directivity_dbi=_clean(directivity_dbi),
        pi_n_dbi=_clean(pi_n_dbi),
        directivity_minus_pi_n_db=_clean(directivity_dbi - pi_n_dbi),
        cell_gain_basis=basis_note,
        hpbw_deg=[_clean(b, 4) if b is not None else None for b in bw],
        hpbw_scan_deg=[_clean(b, 4) if b is not None else None for b in bw_scan],
        grating_lobes=bool(len(glob)),
        grating_lobe_uv=np.round(glob, 6).tolist(),
        scan_max_deg=_clean(math.degrees(scan_max)),
        frequency_ghz=_clean(frequency / 1e9, 9),
        element_exponent=float(q),
        lattice=lattice_info,
        evaluation={
            "engine": "fft" if fit is not None else "direct",
            "samples": [g.nr, g.nc],
            "sample_step_uv": [g.du, g.dv],
            "oversampling": float(oversampling),
            "lobes_refined": detail.refined,
        },
    )
