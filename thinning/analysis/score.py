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
from ..errors import LayoutError, where
from ..geometry.lattice import generated_lattice, grating_lobe_positions
from ..geometry.layout import Layout
from ..units import to_db

__all__ = ["ScoreResult", "score_layout", "layout_engine", "SITES_BASIS", "DIRECT_PROGRESS_WORK"]

#: How the candidate-site count M of a score was found (the ``sites_basis`` key).
SITES_BASIS = {
    "sites": "the candidate sites given (the spec's panel)",
    "count": "the count given (--sites)",
    "hull": "the layout's own lattice inside the convex hull of its elements (assumed)",
    "none": "unknown: the layout is on no lattice, so M is taken as unlimited (assumed)",
}

#: Work of a direct-summation stage (elements × pattern samples, or about ten per element
#: pair for the directivity) from which a score reports the stage: about 5 s or more.
DIRECT_PROGRESS_WORK = 2e8


@dataclass
class ScoreResult:
    """Figures of one layout (dB, dBi, degrees, GHz at the edge, as in the JSON output)."""

    elements: int
    sites: int | None
    sites_basis: str
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
    scan_set: dict | None = None
    band_ghz: list | None = None
    steering: str | None = None
    hpbw_widest_deg: float | None = None
    hpbw_widest_beam: dict | None = None
    mask: dict | None = None
    element_pattern: str | None = None
    gain_dbi: float | None = None
    gain_scan_min_dbi: float | None = None
    scan_loss_max_db: float | None = None

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
    region_map=None,
):
    """The pattern engine for a layout, its excitation and its exact evaluator.

    ``full`` keeps the whole u-v period on a grid (for off-centre sidelobe discs);
    ``region_map`` gives the region of a scan sector or band and a mask's limits
    (:class:`thinning.engine.mask.RegionMap`).

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
            region_map=region_map,
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
        region_map=region_map,
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


def _site_positions(sites):
    """(M, 2) positions [m] of candidate sites given as a ``Sites`` or an array, else None."""
    if sites is None or isinstance(sites, int | np.integer):
        return None
    if hasattr(sites, "x") and hasattr(sites, "y"):
        return np.column_stack([np.asarray(sites.x), np.asarray(sites.y)])
    return np.asarray(sites, dtype=float).reshape(-1, 2)


def _filled_asl(xy, lam, scan_max, oversampling, region_map=None) -> float:
    """ASL of every candidate site filled (uniform weights), sampled  [1, linear]."""
    filled = Layout(xy[:, 0], xy[:, 1])
    eng, grid, _, _ = layout_engine(filled, lam, scan_max, oversampling, region_map=region_map)
    if grid is None:
        return float(eng.detail().asl)
    return float(eng.evaluate(grid, refine=False).asl[0])


def score_layout(
    layout: Layout,
    frequency: float,
    scan_max: float = 0.0,
    q: float = 1.0,
    sites=None,
    oversampling: float = 4.0,
    workers: int = -1,
    progress=None,
    coverage=None,
    limits=None,
    element=None,
) -> ScoreResult:
    """All figures of a layout.

    With ``coverage`` (a scan sector or a band, :class:`thinning.engine.coverage.Coverage`)
    the PSL and ASL are taken over its sidelobe region, the worst over every beam and
    frequency (``scan_max`` is then its enclosing cone's, for the grating-lobe check); with
    ``limits`` (a mask, :class:`thinning.engine.mask.SidelobeLimits`) ``mask`` holds the
    worst margin (:func:`thinning.analysis.scan_figures.mask_figure`); with a tabulated
    ``element`` the directivity uses its pattern and ``gain_dbi``, ``scan_loss_max_db``
    its gain. ``hpbw_widest_deg`` is the widest beam over the scan set and band (the cone
    ``scan_max`` at one frequency without ``coverage``).

    Parameters
    ----------
    layout : Layout
    frequency : float  [Hz]
    scan_max : float  [rad]   half-angle of the scan cone
    q : float  [1]   element-pattern exponent (cosᵠθ; 0 = isotropic over the full sphere)
    sites : Sites, (M, 2) array [m] or int, optional
        The candidate sites the layout was thinned from, for the fill and the random-thinning
        expectation (which includes the sidelobes of those sites all filled): their positions
        (a spec's ``Sites``), or only their count M (the filled aperture is then the next
        default's). By default the sites of the layout's own lattice inside the convex hull
        of its elements (1/N, M → ∞, for a layout off any lattice). ``sites_basis`` in the
        result says which (:data:`SITES_BASIS`).
    oversampling : float   FFT (or direct grid) samples per null width, per axis
    workers : int   threads for scipy.fft
    progress : callable(str), optional
        Told the stage of a long direct summation (off any grid, with elements × samples
        above :data:`DIRECT_PROGRESS_WORK`) as it starts.

    Raises
    ------
    LayoutError
        Fewer than two elements, or fewer candidate sites than elements.
    """
    from ..units import wavelength as wl

    lam = wl(frequency)
    n = len(layout)
    if n < 2:
        raise LayoutError(
            f"{where(layout.source, None)}one element only: a one-element array has no "
            "sidelobes, beam or fill to score"
        )
    site_xy = _site_positions(sites)
    if sites is not None and (len(site_xy) if site_xy is not None else int(sites)) < n:
        count = len(site_xy) if site_xy is not None else int(sites)
        raise LayoutError(
            f"{where(layout.source, None)}{count} candidate sites for {n} elements: fewer "
            "sites than elements"
        )
    from ..engine.coverage import Coverage
    from ..engine.mask import RegionMap
    from . import scan_figures

    cov = coverage if coverage is not None else Coverage.cone(scan_max, frequency)
    plain_map = scan_figures.region_map(coverage)
    if coverage is not None and (coverage.scan.kind != "cone" or coverage.band is not None):
        scan_max = coverage.scan.enclosing_angle
        lam_gl = wl(max(coverage.frequencies))  # grating lobes at the band's top
    else:
        lam_gl = lam
    eng, grid, exact, fit = layout_engine(
        layout, lam, scan_max, oversampling, workers, region_map=plain_map
    )
    g = eng.grid

    def stage(text, work):
        if progress is not None and grid is None and work >= DIRECT_PROGRESS_WORK:
            progress(text)

    samples = g.nr * g.nc
    stage(
        f"pattern by direct summation: {n:,} elements off any regular grid, {samples:,} samples",
        n * samples,
    )
    detail = eng.detail(grid) if grid is not None else eng.detail()
    linear = (fit is not None and fit.linear) or (fit is None and layout.is_linear)
    if plain_map is not None and plain_map.disc is None:
        # a sector's region: its edge on the continuous pattern, not between samples
        val, at, _, _ = scan_figures.polished_max(
            eng, grid, exact, [(0.0, cov.region_polygon())], linear, detail
        )
        if at is not None and val > detail.psl:
            detail.psl, detail.psl_uv = val, at

    # directivity and the cell-gain rule
    lattice_info: dict
    glob = np.zeros((0, 2))
    if fit is not None:
        gx, gy = fit.pitch
        d = metrics.directivity_grid(grid, (gx, gy), lam, q, element=element)
        basis_idx = generated_lattice(fit.col, fit.row)
        basis = basis_idx * np.array([[gx], [gy]])
        if site_xy is None:
            filled = _lattice_sites(fit, basis_idx)
            m_lat = int(filled.sum())
            filled_asl = float(eng.evaluate(filled.astype(np.float64), refine=False).asl[0])
        if fit.linear or not np.any(basis_idx[:, 1]) or not np.any(basis_idx[:, 0]):
            step = float(np.linalg.norm(basis[:, 0] if np.any(basis_idx[:, 0]) else basis[:, 1]))
            step = step or gx
            rule = metrics.linear_gain_rule(n, step, lam, q)
            basis_note = "2·N·d/λ × element directivity across the line (linear array)"
            lin_basis = np.array([[step, 0.0], [0.0, 0.0]])
            glob = grating_lobe_positions(lin_basis, lam_gl, scan_max) if n > 1 else glob
            lattice_info = {"kind": "linear", "pitch_mm": [gx * 1e3], "step_mm": step * 1e3}
        else:
            cell = abs(float(np.linalg.det(basis)))
            rule = metrics.cell_gain_rule(n, cell, lam)
            basis_note = "4π·N·A_cell/λ² (lattice cell)"
            glob = grating_lobe_positions(basis, lam_gl, scan_max)
            lattice_info = {
                "kind": "grid",
                "pitch_mm": [gx * 1e3, gy * 1e3],
                "basis_mm": (basis.T * 1e3).round(6).tolist(),
                "cell_area_mm2": cell * 1e6,
            }
        lattice_info["fit_residual_um"] = fit.residual * 1e6
    else:
        # a pair costs about ten pattern terms (a Bessel function)
        stage(f"directivity: pairwise sum over {n * (n - 1) // 2:,} element pairs", 10 * n * n)
        d = metrics.directivity_points(layout.x, layout.y, layout.weights, lam, q, element=element)
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
    if site_xy is not None:
        m, basis_key = len(site_xy), "sites"
        filled_asl = _filled_asl(site_xy, lam, scan_max, oversampling, plain_map)
    elif sites is not None:
        m, basis_key = int(sites), "count"
    else:
        m, basis_key = m_lat, ("hull" if m_lat is not None else "none")

    # half-power beamwidths of the array factor (like PSL and ASL, without the element
    # pattern) in the principal planes, at broadside and at the scan edge
    u_scan = math.sin(scan_max)
    step = 0.5 * g.du
    xp, xm = metrics.half_power_offsets(exact, (1.0, 0.0), step)
    bw = [metrics.beamwidth_deg(xp, xm)]
    bw_scan = [metrics.beamwidth_deg(xp, xm, u_scan)]
    if (fit is not None and fit.linear) or (fit is None and layout.is_linear):
        # the array factor of a line along x does not vary across it: no half-power width
        bw.append(None)
        bw_scan.append(None)
    else:
        yp, ym = metrics.half_power_offsets(exact, (0.0, 1.0), 0.5 * g.dv)
        bw.append(metrics.beamwidth_deg(yp, ym))
        bw_scan.append(metrics.beamwidth_deg(yp, ym, u_scan))

    extra = scan_figures.scan_set_keys(cov)
    extra.update(
        scan_figures.widest_beam(
            exact, (g.du, g.dv), linear, cov, (xp, xm), None if linear else (yp, ym)
        )
    )
    if limits is not None and limits.any:
        stage("the mask's margin over every beam and frequency", n * samples)
        eng_m, _, _, _ = layout_engine(
            layout, lam, scan_max, oversampling, workers, region_map=RegionMap(cov, limits)
        )
        extra["mask"] = scan_figures.mask_figure(eng_m, grid, exact, cov, limits, linear)
    if element is not None and element.tabulated:
        extra.update(scan_figures.gain_figures(element, layout.weights, cov))
    extra["element_pattern"] = (
        element.describe() if element is not None else f"cos^{float(q):g}(theta)"
    )
    directivity_dbi = float(to_db(d))
    pi_n_dbi = float(to_db(rule))
    return ScoreResult(
        elements=n,
        sites=m,
        sites_basis=basis_key,
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
        **extra,
    )
