r"""What a built array will do: scanning, band edges, errors, quantisation and failures.

Three analyses of one layout:

* **scan table** — PSL, gain and half-power beamwidth for beams steered across the cone. A
  beam steered by phase to (u₀, v₀) sees the visible region |(u, v)| ≤ 1 as the disc of
  radius 1 centred at (−u₀, −v₀) of the unsteered array factor; the gain includes the element
  pattern and so the cos θ₀ scan loss of a cos θ element; the beam broadens about as
  1/cos θ₀ (references.md row 8).
* **band table** — at the band edges a phase shifter applies the phase of the design
  frequency f₀, so the beam squints to sin θ = (f₀/f)·sin θ₀; a true time delay keeps it at
  θ₀. The pattern itself scales with the wavelength; grating lobes that enter the visible
  region at the upper band edge show up as a PSL near 0 dB and are flagged.
* **Monte Carlo** — random amplitude errors (dB rms), phase errors (degrees rms), B-bit
  phase quantisation (decorrelated by each element's random insertion phase, which the phase
  shifter calibrates out) and K random element failures. Each trial's PSL and ASL are taken
  over the nominal sidelobe region (the main beam cut from the error-free pattern), relative
  to the trial's own beam peak. Beside them the published floor (references.md rows 11–12;
  Mailloux ch. 7, memory; Miller 1964, memory)

  .. math::

     \mathrm{ASL}_\mathrm{err} \approx
        \frac{(1 - P) + \delta^2 + P\,(\phi^2 + \sigma_q^2)}{P\,\eta_a N},\qquad
     \sigma_q^2 = \frac{\pi^2}{3\cdot 2^{2B}},\qquad \eta_a = \frac{(\sum a)^2}{N \sum a^2}

  with P the fraction of elements working. δ² is the mean-square relative amplitude error,
  E[(10^{ε/20} − 1)²] for ε ~ N(0, S²) dB.
"""

from __future__ import annotations

import math

import numpy as np

from ..engine import metrics
from ..engine.exact import GridExact, refine_peaks
from ..engine.excitation import ErrorModel, error_floor
from ..engine.pattern import DirectPatternEngine, FFTPatternEngine
from ..errors import LayoutError
from ..geometry.lattice import generated_lattice, grating_lobe_positions
from ..geometry.layout import Layout
from ..units import to_db
from ..units import wavelength as wavelength_of
from .score import layout_engine

__all__ = [
    "scan_table",
    "band_table",
    "monte_carlo",
    "stress_layout",
]


# -- set-up -----------------------------------------------------------------------------------
class _Array:
    """A layout prepared for repeated pattern evaluation at one wavelength."""

    def __init__(self, layout: Layout, wavelength: float, oversampling: float = 4.0):
        self.layout = layout
        self.wavelength = wavelength
        self.engine, self.grid, self._exact, self.fit = layout_engine(
            layout, wavelength, 0.0, oversampling, full=True
        )
        self.step = (self.engine.grid.du, self.engine.grid.dv)
        fit = self.fit
        self.linear = fit.linear if fit is not None else layout.is_linear

    def basis(self):
        if self.fit is None:
            return None
        gx, gy = self.fit.pitch
        b = generated_lattice(self.fit.col, self.fit.row) * np.array([[gx], [gy]])
        if self.linear:
            b = np.array([[max(b[0, 0], b[0, 1]) or gx, 0.0], [0.0, 0.0]])
        return b

    def psl(self, centre, radius=1.0):
        """Refined PSL of the steered beam whose visible disc is centred at ``centre``."""
        if self.grid is not None:
            region = self.engine.region_for(radius, centre)
            return self.engine.detail(self.grid, region)
        eng = DirectPatternEngine(
            self.layout.x,
            self.layout.y,
            self.layout.weights,
            self.wavelength,
            math.asin(min(1.0, math.hypot(*centre))),
            linear=self.linear,
        )
        d = eng.detail()  # a disc around the origin that holds the shifted visible region
        return d

    def exact(self):
        return self._exact

    def directivity(self, q, steer):
        if self.fit is not None:
            gx, gy = self.fit.pitch
            return metrics.directivity_grid(
                self.grid, (gx, 0.0 if self.linear else gy), self.wavelength, q, steer
            )
        return metrics.directivity_points(
            self.layout.x, self.layout.y, self.layout.weights, self.wavelength, q, steer
        )


def _db(x):
    return None if x is None or not x > 0 else round(float(to_db(x)), 4)


# -- scan ------------------------------------------------------------------------------------
def _sector_beams(scan) -> list[tuple[float, float]]:
    """(azimuth, elevation)  [rad] of a sector's corners, edge midpoints and centre."""
    (a1, a2), (e1, e2) = scan.azimuth, scan.elevation
    az = sorted({a1, 0.5 * (a1 + a2), a2})
    el = sorted({e1, 0.5 * (e1 + e2), e2})
    return [(a, e) for e in el for a in az]


def scan_table(
    layout: Layout,
    frequency: float,
    scan_max: float,
    q: float = 1.0,
    steps: int = 4,
    planes_deg=(0.0, 45.0, 90.0),
    coverage=None,
    element=None,
) -> list[dict]:
    """PSL, gain and beamwidth for beams steered across the cone (or the sector).

    Parameters
    ----------
    frequency : float  [Hz]
    scan_max : float  [rad]
    steps : int   scan angles 0 … θmax (inclusive) per plane
    planes_deg : scan planes φ₀  [deg] (one plane, φ₀ = 0, for a linear array)
    coverage : thinning.engine.coverage.Coverage, optional
        A sector: its corners, edge midpoints and centre instead of the cone's planes (rows
        add ``azimuth_deg`` and ``elevation_deg``).
    element : thinning.engine.element.ElementPattern, optional
        A tabulated (embedded) pattern: the gain is element gain plus array gain,
        g(w₀) + 10·log₁₀ N_eff (:mod:`thinning.engine.element`), instead of the directivity
        with cosᵠθ elements.

    Returns
    -------
    list of dict with theta_deg, phi_deg, psl_db, gain_dbi, scan_loss_db (the gain's drop
    from broadside, a positive number of dB, as ``scan_loss_max_db`` of ``score``), hpbw_deg,
    hpbw_broadening (ratio to broadside), cos_law (1/cos θ₀)
    """
    lam = wavelength_of(frequency)
    arr = _Array(layout, lam)
    if arr.linear:
        planes_deg = (0.0,)
    exact = arr.exact()
    tabulated = element is not None and element.tabulated
    a = np.asarray(layout.weights, dtype=float)
    n_eff_db = 10 * math.log10(float(a.sum()) ** 2 / float((a**2).sum()))

    def gain(u0, v0):
        if tabulated:
            return 10 ** ((float(element.gain_dbi(u0, v0)) + n_eff_db) / 10)
        return arr.directivity(q, (u0, v0))

    g0 = gain(0.0, 0.0)
    beams = []  # (theta, phi_deg, extra keys)
    if coverage is not None and coverage.scan.kind == "sector":
        for az, el in _sector_beams(coverage.scan):
            u0, v0 = math.cos(el) * math.sin(az), math.sin(el)
            th = math.asin(min(1.0, math.hypot(u0, v0)))
            phi_deg = round(math.degrees(math.atan2(v0, u0)) % 360.0, 4) if th > 0 else 0.0
            if arr.linear:
                u0, v0 = math.sin(az), 0.0
                th, phi_deg = abs(az), (0.0 if az >= 0 else 180.0)
            extra = {"azimuth_deg": round(math.degrees(az), 4)}
            extra["elevation_deg"] = round(math.degrees(el), 4)
            beams.append((th, phi_deg, extra))
    else:
        thetas = np.linspace(0.0, scan_max, max(2, steps)) if scan_max > 0 else np.array([0.0])
        for phi_deg in planes_deg:
            for th in thetas:
                if phi_deg != planes_deg[0] and th == 0:
                    continue
                beams.append((float(th), phi_deg, {}))
    rows = []
    widths = {}
    for th, phi_deg, extra in beams:
        phi = math.radians(phi_deg)
        dirn = (math.cos(phi), math.sin(phi))
        if phi_deg not in widths:
            step = 0.5 * min(s for s in arr.step if s > 0)
            widths[phi_deg] = metrics.half_power_offsets(exact, dirn, step)
        dp, dm = widths[phi_deg]
        bw0 = metrics.beamwidth_deg(dp, dm)
        s = math.sin(th)
        u0, v0 = s * dirn[0], s * dirn[1]
        det = arr.psl((-u0, -v0))
        g = gain(u0, v0)
        bw = metrics.beamwidth_deg(dp, dm, s)
        rows.append(
            {
                **extra,
                "theta_deg": round(math.degrees(th), 4),
                "phi_deg": phi_deg,
                "psl_db": _db(det.psl),
                "gain_dbi": _db(g),
                "scan_loss_db": round(float(to_db(g0 / g)), 4) + 0.0,
                "hpbw_deg": None if bw is None else round(bw, 4),
                "hpbw_broadening": None if (bw is None or bw0 is None) else round(bw / bw0, 5),
                "cos_law": round(1 / math.cos(th), 5),
            }
        )
    return rows


# -- band edges ------------------------------------------------------------------------------
def band_table(
    layout: Layout,
    frequency: float,
    band,
    scan_max: float,
    steering: str = "phase",
    steps: int = 3,
    coverage=None,
) -> list[dict]:
    """Beam pointing, squint, PSL and grating lobes at the band edges (scan plane φ = 0, or
    the corners and centre of a sector).

    A beam commanded to w₀ at f₀ points at w₀·f₀/f with phase shifters, so
    sin θ = (f₀/f)·sin θ₀ in its plane (:meth:`thinning.engine.coverage.Coverage.
    beam_direction`), and at w₀ with true time delay.

    Parameters
    ----------
    frequency : float  [Hz]   design frequency f₀
    band : (float, float)  [Hz]   lower and upper band edge
    steering : "phase" or "delay"
    coverage : thinning.engine.coverage.Coverage, optional   a sector's beams (rows add
        ``azimuth_command_deg``, ``elevation_command_deg``)
    """
    if steering not in ("phase", "delay"):
        raise ValueError(f"steering {steering!r}: expected 'phase' or 'delay'")
    commands = []  # (u₀, v₀, extra keys)
    if coverage is not None and coverage.scan.kind == "sector":
        lin = layout.is_linear
        for az, el in _sector_beams(coverage.scan):
            if lin and el != coverage.scan.elevation[0]:
                continue
            u0, v0 = (math.sin(az), 0.0) if lin else (math.cos(el) * math.sin(az), math.sin(el))
            extra = {"azimuth_command_deg": round(math.degrees(az), 4)}
            if not lin:
                extra["elevation_command_deg"] = round(math.degrees(el), 4)
            commands.append((u0, v0, extra))
    else:
        thetas = np.linspace(0.0, scan_max, max(2, steps)) if scan_max > 0 else np.array([0.0])
        commands = [(math.sin(th), 0.0, {}) for th in thetas]
    rows = []
    for f in (band[0], frequency, band[1]):
        lam = wavelength_of(f)
        arr = _Array(layout, lam)
        basis = arr.basis()
        for u_cmd, v_cmd, extra in commands:
            scale = (frequency / f) if steering == "phase" else 1.0
            u_beam, v_beam = u_cmd * scale, v_cmd * scale
            s_cmd = math.hypot(u_cmd, v_cmd)
            theta_cmd = math.degrees(math.asin(min(1.0, s_cmd)))
            theta_beam = math.degrees(math.asin(max(-1.0, min(1.0, math.hypot(u_beam, v_beam)))))
            if v_cmd == 0.0:  # signed, in the x-z plane
                theta_cmd = math.copysign(theta_cmd, u_cmd) if u_cmd else 0.0
                theta_beam = math.copysign(theta_beam, u_beam) if u_beam else 0.0
            det = arr.psl((-u_beam, -v_beam))
            gl = False
            if basis is not None:
                # replicas at G + w_beam; only |G| ≤ 2 can reach the visible disc
                cand = grating_lobe_positions(basis, lam, math.pi / 2)
                gl = bool(np.any(np.hypot(cand[:, 0] + u_beam, cand[:, 1] + v_beam) <= 1.0 + 1e-12))
            rows.append(
                {
                    "frequency_ghz": round(f / 1e9, 6),
                    "steering": steering,
                    **extra,
                    "theta_command_deg": round(theta_cmd, 4),
                    "theta_beam_deg": round(theta_beam, 4),
                    "squint_deg": round(theta_beam - theta_cmd, 4),
                    "psl_db": _db(det.psl),
                    "grating_lobe": gl,
                }
            )
    return rows


# -- Monte Carlo -----------------------------------------------------------------------------
def monte_carlo(
    layout: Layout,
    frequency: float,
    scan_max: float,
    model: ErrorModel,
    trials: int = 200,
    seed: int = 0,
    batch: int = 16,
    region_map=None,
    mask_map=None,
) -> dict:
    """PSL and ASL statistics of the layout under random errors (broadside beam).

    With ``region_map`` (:class:`thinning.engine.mask.RegionMap` of a scan sector or band)
    the PSL and ASL are taken over its region: phase errors and failures do not depend on
    the frequency, so every beam and frequency reads the trial's broadside pattern as in
    :mod:`thinning.engine.coverage`. With ``mask_map`` (the same with a mask's limits) each
    trial's worst excess over the mask (max P·g over the samples, its highest sample refined
    within its own sample cell) gives ``mask_margin_db``.

    Returns
    -------
    dict with psl_db {nominal, median, p90, min, max}, asl_db {nominal, mean},
    floor_asl_db, expected_asl_db (nominal ASL plus the floor), trials, model, and with a
    mask mask_margin_db {nominal, median, p10, min} (p10: the margin 90 % of trials keep)
    """
    lam = wavelength_of(frequency)
    fit = layout.grid_fit()
    if fit is None:
        raise LayoutError(
            f"{layout.source or 'layout'}: the error analysis needs positions on "
            "one regular grid (within 1 µm); this layout is off-lattice"
        )
    n = len(layout)
    if model.failures >= n:
        raise LayoutError(f"--failures {model.failures}: the layout has only {n} elements")
    rows, cols = fit.shape
    w = layout.weights
    eng = FFTPatternEngine(
        (rows, cols),
        fit.pitch,
        lam,
        scan_max,
        4.0,
        linear=fit.linear,
        full=True,
        dtype=np.float64,
        workers=-1,
        region_map=region_map,
    )
    region = eng.region
    nominal = np.zeros((rows, cols))
    nominal[fit.row, fit.col] = w
    p0 = eng.power(nominal)
    red = region.reduce(p0)
    weff = region.effective_weight(red, 0)  # the nominal sidelobe region
    nom = eng.detail(nominal)
    masked = None
    if mask_map is not None:
        from ..engine.region import SampledRegion

        mreg = SampledRegion(eng.grid, mask_map.reach, eng.window_oversampling, shape=mask_map)
        mred = mreg.reduce(p0)
        removed = mreg.weight - mreg.effective_weight(mred, 0)
        geff = np.where(removed > 0, mreg.galias, mreg.gain)
        geff = np.where(mreg.effective_weight(mred, 0) > 0, geff, 0.0)
        masked = (mreg, geff, np.empty(trials), eng.detail(nominal, mreg).psl)
    rng = np.random.default_rng(seed)
    sa = model.amplitude_db
    sp = math.radians(model.phase_deg)
    lsb = 2 * math.pi / 2**model.phase_bits if model.phase_bits else 0.0
    psl = np.empty(trials)
    asl = np.empty(trials)
    mask = weff > 0
    wsum = float(weff.sum())
    for s in range(0, trials, batch):
        k = min(batch, trials - s)
        amp = np.broadcast_to(w, (k, n)) * 10 ** (rng.normal(0, 1, (k, n)) * sa / 20)
        ph = rng.normal(0, 1, (k, n)) * sp
        if lsb:
            insertion = rng.uniform(0, 2 * math.pi, (k, n))
            command = -insertion  # the phase shifter cancels the insertion phase...
            ph += np.round(command / lsb) * lsb - command  # ...to within its resolution
        if model.failures:
            dead = np.argsort(rng.random((k, n)), axis=1)[:, : model.failures]
            np.put_along_axis(amp, dead, 0.0, axis=1)
        exc = amp * np.exp(1j * ph)
        grids = np.zeros((k, rows, cols), dtype=complex)
        grids[:, fit.row, fit.col] = exc
        p = eng.power(grids)
        peak = np.abs(exc.sum(axis=1)) ** 2
        pm = np.where(mask, p, -1.0)
        arg = pm.argmax(axis=1)
        samp = pm[np.arange(k), arg] / peak
        asl[s : s + k] = (p @ weff) / wsum / peak
        # refine each trial's highest sidelobe sample on its exact pattern
        ex = GridExact(grids, (fit.pitch[0], 0.0 if fit.linear else fit.pitch[1]), lam)
        removed = region.removed_weight(red, np.zeros_like(arg), arg)
        ref = _climb_top(ex, region, arg, removed, fit.linear)
        # the exact evaluator normalises by |Σa|², the same peak as above
        psl[s : s + k] = np.maximum(samp, ref)
        if masked is not None:
            mreg, geff, excess, _ = masked
            pg = p * geff[None, :]
            arg = pg.argmax(axis=1)
            top = pg[np.arange(k), arg] / peak
            ref = _climb_top(ex, mreg, arg, np.zeros(k), fit.linear, cell=True)
            excess[s : s + k] = np.maximum(top, ref * geff[arg])
    floor = error_floor(n, w, model)
    psl_db = to_db(psl)
    extra = {}
    if masked is not None:
        margin = -to_db(masked[2])
        extra["mask_margin_db"] = {
            "nominal": None if not masked[3] > 0 else round(float(-to_db(masked[3])), 4),
            "median": round(float(np.median(margin)), 4),
            "p10": round(float(np.percentile(margin, 10)), 4),
            "min": round(float(margin.min()), 4),
        }
    return {
        **extra,
        "trials": trials,
        "seed": seed,
        "model": {
            "amplitude_error_db": sa,
            "phase_error_deg": model.phase_deg,
            "phase_bits": model.phase_bits,
            "failures": model.failures,
        },
        "psl_db": {
            "nominal": _db(nom.psl),
            "median": round(float(np.median(psl_db)), 4),
            "p90": round(float(np.percentile(psl_db, 90)), 4),
            "min": round(float(psl_db.min()), 4),
            "max": round(float(psl_db.max()), 4),
        },
        "asl_db": {"nominal": _db(nom.asl), "mean": _db(float(asl.mean()))},
        "floor_asl_db": _db(floor),
        "expected_asl_db": _db(nom.asl + floor),
        "psl_samples_db": [round(float(x), 4) for x in psl_db],
    }


def _climb_top(ex, region, flat, removed, linear, cell=False):
    """Refined power of each trial's top sample ``flat[k]`` (pattern k of ``ex``): within
    its own sample cell for a mask's limits (``cell``) or a region that is not a disc, else
    within a sample and the disc."""
    k = len(flat)
    uv = region.alias_points(flat, removed)
    box = np.full(k, 0.5) if (cell or not region.disc) else None
    ref, _, _ = refine_peaks(
        ex,
        uv[:, 0],
        uv[:, 1],
        (region.grid.du, region.grid.dv),
        region.radius,
        which=np.arange(k),
        linear=linear,
        box=box,
        project=region.disc,
    )
    return ref


def stress_layout(
    layout: Layout,
    frequency: float,
    scan_max: float,
    q: float = 1.0,
    band=None,
    steering: str = "phase",
    model: ErrorModel | None = None,
    trials: int = 200,
    seed: int = 0,
    coverage=None,
    limits=None,
    element=None,
) -> dict:
    """All three analyses in one dictionary (what ``thinning stress --json`` prints).

    With ``coverage`` (a scan sector or band), ``limits`` (a mask) and ``element`` (an
    embedded pattern) from a spec, the built array is judged against the same requirement
    as the design: the scan table over the sector's beams, the band table at its beams, the
    Monte Carlo PSL and ASL over the same sidelobe region and its margin over the same mask
    (``coverage``'s band is the band table's unless ``band`` is given).
    """
    from ..engine.coverage import Coverage
    from .scan_figures import region_map, scan_set_keys

    model = model or ErrorModel()
    if coverage is not None and band is None and coverage.band is not None:
        band, steering = coverage.band, coverage.steering
    out = {
        "elements": len(layout),
        "frequency_ghz": frequency / 1e9,
        "scan_max_deg": math.degrees(scan_max),
        "element_exponent": q,
        "scan": scan_table(layout, frequency, scan_max, q, coverage=coverage, element=element),
    }
    if coverage is not None:
        out.update(scan_set_keys(coverage))
    if band is not None:
        out["band"] = band_table(layout, frequency, band, scan_max, steering, coverage=coverage)
    masked = limits is not None and limits.any
    cov = coverage or Coverage.cone(scan_max, frequency)
    mc = monte_carlo(
        layout,
        frequency,
        scan_max,
        model,
        trials,
        seed,
        region_map=region_map(coverage),
        mask_map=region_map(cov, limits) if masked else None,
    )
    keys = ("psl_db", "asl_db", "floor_asl_db", "expected_asl_db", "mask_margin_db")
    out.update({k: mc[k] for k in keys if k in mc})
    out["monte_carlo"] = {k: v for k, v in mc.items() if k not in out}
    return out
