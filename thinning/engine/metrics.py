"""Figures of merit beyond the sidelobes: directivity, the cell-gain rule, the random-thinning
expectation, beamwidth and grating lobes.

All of them are computed exactly from the element positions and excitations, with no
angular integration grid.
"""

from __future__ import annotations

import math

import numpy as np
import scipy.fft
import scipy.special
from scipy.optimize import brentq

__all__ = [
    "element_kernel",
    "directivity_grid",
    "directivity_points",
    "cell_gain_rule",
    "linear_gain_rule",
    "expected_asl_random",
    "expected_asl_tapered",
    "half_power_offsets",
    "half_power_offsets_batch",
    "axis_half_power",
    "beamwidth_deg",
    "element_beamwidth_deg",
]

#: Element pairs per chunk of the pairwise directivity sum (float64: 8 bytes each).
PAIR_CHUNK = 1 << 22


def element_kernel(rho, wavelength: float, q: float) -> np.ndarray:
    """∫ cosᵠθ · exp(j k ρ·r̂) dΩ for element separations ρ  [sr].

    .. math::

        K_q(\\rho) = 2\\pi\\, 2^{\\nu}\\,\\Gamma(\\nu + 1)\\,
                     \\frac{J_{\\nu+1}(k\\rho)}{(k\\rho)^{\\nu+1}},\\qquad \\nu = \\frac{q - 1}{2}

    over the forward hemisphere (q > 0; Sonine's first finite integral, Watson,
    *Theory of Bessel Functions*, §12.11), which is 2π·J₁(kρ)/(kρ) for q = 1 and 2π/(q + 1)
    at ρ = 0. For q = 0 the element is isotropic over the full sphere (conventions.md):
    K₀(ρ) = 4π·sin(kρ)/(kρ).

    Parameters
    ----------
    rho : array_like  [m]
    wavelength : float  [m]
    q : float  [1]
        Element-pattern exponent (q ≥ 0).
    """
    z = 2 * math.pi / wavelength * np.asarray(rho, dtype=float)
    if q == 0:
        return 4 * math.pi * np.sinc(z / math.pi)
    nu = (q - 1) / 2
    small = z < 1e-6
    zs = np.where(small, 1.0, z)
    if q == 1:
        core = scipy.special.j1(zs) / zs
    else:
        core = scipy.special.jv(nu + 1, zs) / zs ** (nu + 1)
    limit = 1.0 / (2 ** (nu + 1) * math.gamma(nu + 2))
    core = np.where(small, limit, core)
    return 2 * math.pi * 2**nu * math.gamma(nu + 1) * core


def _directivity(peak: float, denominator: float) -> float:
    return 4 * math.pi * peak / denominator


def directivity_grid(
    grid, pitch, wavelength: float, q: float = 1.0, steer=(0.0, 0.0), element=None
) -> float:
    r"""Broadside directivity of excitations on a rectangular index grid  [1, linear].

    .. math::  D = \frac{4\pi\,(\sum a)^2}{\sum_{m,n} a_m a_n K_q(|r_m - r_n|)}

    with the double sum taken over lags of the grid's autocorrelation (an FFT, float64).
    Steered by phase to (u₀, v₀) = sin θ₀ (cos φ₀, sin φ₀), the peak moves there and

    .. math::  D(\theta_0) = \frac{4\pi\,(\sum a)^2 \cos^q\theta_0}
                                  {\sum_{m,n} a_m a_n \cos(k\,\rho_{mn}\cdot u_0)\,
                                   K_q(|\rho_{mn}|)}

    (the element kernel depends on |ρ| alone because the elements lie in one plane), which
    follows the cell gain 4π·A·cos θ₀/λ² of a large filled aperture (conventions.md).

    Parameters
    ----------
    grid : (R, C) array
    pitch : (float, float)  [m]   grid pitch (gx, gy)
    wavelength : float  [m]
    q : float  [1]
    steer : (float, float)  [1]   direction cosines (u₀, v₀) of the steered beam
    element : thinning.engine.element.ElementPattern, optional
        A tabulated (embedded) element pattern instead of cosᵠθ: its kernel K(ρ) is complex
        when the pattern has no symmetry under φ → φ + π, and the denominator is
        Σ c(ρ)·Re[K(ρ)·exp(−j k ρ·u₀)] (c the autocorrelation, even in ρ).
    """
    a = np.asarray(grid, dtype=np.float64)
    if a.ndim == 1:
        a = a[None]
    r, c = a.shape
    shape = (
        scipy.fft.next_fast_len(2 * r - 1, real=True),
        scipy.fft.next_fast_len(2 * c - 1, real=True),
    )
    f = scipy.fft.rfft2(a, s=shape)
    acf = scipy.fft.irfft2(f.real**2 + f.imag**2, s=shape)
    lag_r = np.arange(shape[0])
    lag_r = np.where(lag_r < r, lag_r, lag_r - shape[0])
    lag_c = np.arange(shape[1])
    lag_c = np.where(lag_c < c, lag_c, lag_c - shape[1])
    keep_r = np.abs(lag_r) < r
    keep_c = np.abs(lag_c) < c
    acf = acf[np.ix_(keep_r, keep_c)]
    if element is not None and element.tabulated:
        rx = lag_c[keep_c][None, :] * pitch[0] + 0.0 * lag_r[keep_r][:, None]
        ry = lag_r[keep_r][:, None] * pitch[1] + 0.0 * rx
        k = 2 * math.pi / wavelength
        kern = element.kernel(rx, ry, wavelength) * np.exp(
            -1j * k * (rx * steer[0] + ry * steer[1])
        )
        den = float(np.sum(acf * kern.real))
        peak = float(element.gain(steer[0], steer[1]))
        return _directivity(float(a.sum()) ** 2 * peak, den)
    rho = np.hypot(lag_r[keep_r][:, None] * pitch[1], lag_c[keep_c][None, :] * pitch[0])
    kern = element_kernel(rho, wavelength, q)
    u0, v0 = steer
    if u0 or v0:
        k = 2 * math.pi / wavelength
        kern = kern * np.cos(
            k * (lag_r[keep_r][:, None] * pitch[1] * v0 + lag_c[keep_c][None, :] * pitch[0] * u0)
        )
    den = float(np.sum(acf * kern))
    return _directivity(float(a.sum()) ** 2 * _element_gain(steer, q), den)


def _element_gain(steer, q) -> float:
    """cosᵠθ₀ of the element pattern in the steered direction."""
    s2 = steer[0] ** 2 + steer[1] ** 2
    if q == 0:
        return 1.0
    return max(0.0, 1.0 - s2) ** (q / 2)


def directivity_points(
    x, y, weights, wavelength: float, q: float = 1.0, steer=(0.0, 0.0), element=None
) -> float:
    """Directivity of elements at arbitrary positions (pairwise sum, chunked)  [1].

    Same formula as :func:`directivity_grid`, with the pairs summed explicitly.
    """
    x = np.asarray(x, dtype=float)
    y = np.asarray(y, dtype=float)
    a = np.asarray(weights, dtype=float)
    den = 0.0
    step = max(1, PAIR_CHUNK // max(1, x.size))
    if element is not None and element.tabulated:
        k = 2 * math.pi / wavelength
        for s in range(0, x.size, step):
            dx = x[s : s + step, None] - x[None, :]
            dy = y[s : s + step, None] - y[None, :]
            kern = element.kernel(dx, dy, wavelength) * np.exp(
                -1j * k * (dx * steer[0] + dy * steer[1])
            )
            den += float(a[s : s + step] @ kern.real @ a)
        peak = float(element.gain(steer[0], steer[1]))
        return _directivity(float(a.sum()) ** 2 * peak, den)
    for s in range(0, x.size, step):
        dx = x[s : s + step, None] - x[None, :]
        dy = y[s : s + step, None] - y[None, :]
        kern = element_kernel(np.hypot(dx, dy), wavelength, q)
        if steer[0] or steer[1]:
            kern *= np.cos(2 * math.pi / wavelength * (dx * steer[0] + dy * steer[1]))
        den += float(a[s : s + step] @ kern @ a)
    return _directivity(float(a.sum()) ** 2 * _element_gain(steer, q), den)


def cell_gain_rule(n: int, cell_area: float, wavelength: float) -> float:
    """The cell-gain rule G = 4π·N·A_cell/λ²  [1]; πN on a half-wavelength square lattice.

    Each active element is credited with the gain of one lattice cell (Mailloux, *Phased Array
    Antenna Handbook*, ch. 1; references.md rows 2 and 15). Mutual coupling and the scan loss
    cos θ₀ are not included.
    """
    return 4 * math.pi * n * cell_area / wavelength**2


def linear_gain_rule(n: int, spacing: float, wavelength: float, q: float = 0.0) -> float:
    r"""Gain rule of a long broadside linear array  [1].

    .. math::  G \approx \frac{2 N d}{\lambda}\cdot\frac{2\pi}{\int g(\phi)\,d\phi}

    2Nd/λ is the line source of isotropic elements (references.md row 15, common practice);
    the second factor is the element's directivity in the plane across the line, which is 1
    for q = 0 and 2π/I_q for cosᵠ elements over a ground plane, with
    I_q = ∫ cosᵠφ dφ over (−π/2, π/2) = √π·Γ((q + 1)/2)/Γ(q/2 + 1) (π for q = 1).
    An approximation for long arrays, not an identity.
    """
    rule = 2 * n * spacing / wavelength
    if q > 0:
        iq = math.sqrt(math.pi) * math.gamma((q + 1) / 2) / math.gamma(q / 2 + 1)
        rule *= 2 * math.pi / iq
    return rule


def expected_asl_random(n: int, m: int | None, filled_asl: float = 0.0) -> float:
    r"""Expected ASL of choosing exactly N of M sites at random  [1, linear].

    With exactly N of M sites on, every site is on with probability N/M and every pair with
    N(N − 1)/(M(M − 1)), so the expected power pattern is, exactly,

    .. math::

        \frac{E|AF|^2}{N^2} = \frac{M (N - 1)}{N (M - 1)}\,\frac{|F|^2}{M^2}
                              + \frac{M - N}{N (M - 1)}

    with F the array factor of the M filled sites; averaged over the sidelobe region the first
    term is the filled aperture's own ASL (``filled_asl``) scaled by M(N − 1)/(N(M − 1)).
    The second is the thinning term of Lo 1964 and Skolnik, Sherman & Ogg 1964
    (references.md row 5). With M unknown (None) the sites are taken as unlimited: 1/N.

    Parameters
    ----------
    n, m : int   active elements, candidate sites
    filled_asl : float  [1, linear]   ASL of the filled aperture (0 to leave it out)
    """
    if m is None:
        return 1.0 / n
    if m <= 1 or n >= m:
        return float(filled_asl)
    return filled_asl * m * (n - 1) / (n * (m - 1)) + (m - n) / (n * (m - 1))


def expected_asl_tapered(p) -> float:
    """Expected ASL of independent draws with on-probabilities pₙ  [1, linear].

    .. math::  \\mathrm{ASL} \\approx \\frac{\\sum p_n (1 - p_n)}{(\\sum p_n)^2}

    (Skolnik, Sherman & Ogg, IEEE TAP 12(4), 1964; references.md row 5).
    """
    p = np.asarray(p, dtype=float)
    return float(np.sum(p * (1 - p)) / np.sum(p) ** 2)


def half_power_offsets(exact, direction, step: float, which=None) -> tuple[float, float]:
    """Distances in direction cosines from the beam peak (0, 0) to the half-power points.

    Walks the exact pattern outward along ``±direction`` in steps of ``step`` until it falls
    below one half, then solves P = 1/2 with Brent's method.

    Parameters
    ----------
    exact : GridExact or PointExact
    direction : (float, float)   unit vector in u-v
    step : float  [1]   a step well below the beamwidth (a pattern sample spacing)

    Returns
    -------
    (d_plus, d_minus) : floats  [1]
    """
    dx, dy = direction
    out = []
    for sign in (1.0, -1.0):
        t = step * np.arange(1, 65)
        found = None
        start = 0.0
        while found is None and start < 4.0:
            pts = start + t
            p = exact.evaluate(sign * dx * pts, sign * dy * pts, derivatives=False)
            below = np.flatnonzero(p < 0.5)
            if below.size:
                i = below[0]
                lo = start if i == 0 else pts[i - 1]
                found = (lo, pts[i])
            start = pts[-1]
        if found is None:
            out.append(math.inf)
            continue

        def f(s, sign=sign):
            return (
                float(exact.evaluate([sign * dx * s], [sign * dy * s], derivatives=False)[0]) - 0.5
            )

        out.append(brentq(f, found[0], found[1], xtol=1e-12))
    return out[0], out[1]


def half_power_offsets_batch(
    exact, direction, step: float, n: int, iterations: int = 8, guess=None
):
    """:func:`half_power_offsets` for the n patterns of a stacked exact evaluator at once.

    Marches outward in steps of ``step`` from ``guess`` (inward first while the pattern
    there is below one half; from the peak without a guess) to bracket the first half-power
    point, then narrows the bracket by ``iterations`` steps of the Illinois form of regula
    falsi (superlinear; a bracket is never lost); ∞ where no half-power point lies within 4
    in direction cosines.

    Returns
    -------
    (d_plus, d_minus) : ((n,) array, (n,) array)  [1]
    """
    dx, dy = direction
    which = np.arange(n)
    out = []

    def power(t, idx, sign):
        return exact.evaluate(sign * dx * t, sign * dy * t, which[idx], derivatives=False)

    for k, sign in enumerate((1.0, -1.0)):
        start = np.zeros(n)
        if guess is not None:
            start = np.broadcast_to(np.asarray(guess[k], dtype=float) - step, (n,))
            start = np.where(np.isfinite(start), np.maximum(start, 0.0), 0.0)
        idx = np.arange(n)
        p0 = power(start, idx, sign) - 0.5
        while np.any((p0 < 0) & (start > 0)):  # back inside the beam first
            back = (p0 < 0) & (start > 0)
            start[back] = np.maximum(start[back] - 4 * step, 0.0)
            p0[back] = power(start[back], idx[back], sign) - 0.5
        lo, flo = start.copy(), p0
        hi, fhi = np.full(n, np.nan), np.full(n, np.nan)
        todo = np.ones(n, dtype=bool)
        t = start.copy()
        while todo.any():
            t[todo] += step
            todo &= t < 4.0
            i = np.flatnonzero(todo)
            if not i.size:
                break
            f = power(t[i], i, sign) - 0.5
            below = f < 0
            hi[i[below]], fhi[i[below]] = t[i[below]], f[below]
            lo[i[~below]], flo[i[~below]] = t[i[~below]], f[~below]
            todo[i[below]] = False
        ok = np.flatnonzero(np.isfinite(hi))
        a, fa, b, fb = lo[ok], flo[ok], hi[ok], fhi[ok]
        side = np.zeros(ok.size)
        for _ in range(iterations):
            c = (a * fb - b * fa) / (fb - fa)
            c = np.where(np.isfinite(c) & (c > a) & (c < b), c, 0.5 * (a + b))
            fc = power(c, ok, sign) - 0.5
            left = fc >= 0  # still above one half: the root lies beyond c
            # Illinois: halve the function value of the end that stays twice in a row
            fb = np.where(left & (side == 1), 0.5 * fb, fb)
            fa = np.where(~left & (side == -1), 0.5 * fa, fa)
            a, fa = np.where(left, c, a), np.where(left, fc, fa)
            b, fb = np.where(left, b, c), np.where(left, fb, fc)
            side = np.where(left, 1, -1)
        d = np.full(n, np.inf)
        d[ok] = np.where(np.abs(fa) < np.abs(fb), a, b)
        out.append(d)
    return out[0], out[1]


def axis_half_power(sums, pitch: float, wavelength: float, guess: float, iterations: int = 5):
    r"""Half-power offsets along one axis of a stack of excitation grids, from their sums.

    Along the u axis (v = 0) the array factor of a grid is that of its column sums,

    .. math::  AF(u, 0) = \sum_c \Big(\sum_r a_{rc}\Big)\, e^{j k x_c u},

    (and along v that of its row sums), so the half-power points of a whole stack follow
    from a few small products: the pattern on 96 points out to 3 × ``guess`` brackets the
    first point below one half on each side, and ``iterations`` steps of the Illinois
    regula falsi narrow it (exact; no angular grid). Real sums give an even pattern
    (AF(−u) is the conjugate of AF(u)), so d₋ = d₊ without a second search. ∞ where no
    point below one half lies within 3 × ``guess`` (:func:`half_power_offsets_batch` then
    marches further).

    Parameters
    ----------
    sums : (B, C) array   column (row) sums of each grid
    pitch : float  [m]   the grid's pitch along the axis
    wavelength : float  [m]
    guess : float  [1]   a half-power offset of a similar pattern (the all-on layout's)

    Returns
    -------
    (d_plus, d_minus) : ((B,) array, (B,) array)  [1]
    """
    a = np.asarray(sums, dtype=float)
    b, c = a.shape
    kx = 2 * math.pi / wavelength * pitch * (np.arange(c) - (c - 1) / 2)
    norm = a.sum(axis=1) ** 2

    ts = np.linspace(0.0, 3.0 * guess, 96)
    out = []
    for sign in (1.0,) if np.isrealobj(sums) else (1.0, -1.0):
        p = np.abs(a @ np.exp(1j * sign * np.outer(kx, ts))) ** 2 / norm[:, None] - 0.5
        below = p < 0
        first = np.where(below.any(axis=1), np.argmax(below, axis=1), -1)
        d = np.full(b, np.inf)
        ok = np.flatnonzero(first > 0)
        lo, hi = ts[first[ok] - 1], ts[first[ok]]
        flo, fhi = p[ok, first[ok] - 1], p[ok, first[ok]]
        side = np.zeros(ok.size)
        sub = a[ok]
        for _ in range(iterations):
            t = (lo * fhi - hi * flo) / (fhi - flo)
            t = np.where(np.isfinite(t) & (t > lo) & (t < hi), t, 0.5 * (lo + hi))
            e = np.exp(1j * sign * np.multiply.outer(t, kx))
            f = np.abs(np.einsum("bc,bc->b", sub, e)) ** 2 / norm[ok] - 0.5
            above = f >= 0
            fhi = np.where(above & (side == 1), 0.5 * fhi, fhi)
            flo = np.where(~above & (side == -1), 0.5 * flo, flo)
            lo, flo = np.where(above, t, lo), np.where(above, f, flo)
            hi, fhi = np.where(above, hi, t), np.where(above, fhi, f)
            side = np.where(above, 1, -1)
        d[ok] = np.where(np.abs(flo) < np.abs(fhi), lo, hi)
        out.append(d)
    return (out[0], out[0].copy()) if len(out) == 1 else (out[0], out[1])


def beamwidth_deg(d_plus: float, d_minus: float, u0: float = 0.0) -> float | None:
    """Half-power beamwidth in degrees of a beam steered to u₀ = sin θ₀ in a principal plane.

    .. math::  \\Delta\\theta = \\arcsin(u_0 + d_+) - \\arcsin(u_0 - d_-)

    which broadens as about 1/cos θ₀ (references.md row 8). Half-power points past the
    horizon are clipped to it; None if the beam has no half-power point at all.
    """
    if not (math.isfinite(d_plus) and math.isfinite(d_minus)):
        return None
    hi = math.asin(min(1.0, u0 + d_plus))
    lo = math.asin(max(-1.0, u0 - d_minus))
    return math.degrees(hi - lo)


def element_beamwidth_deg(q: float) -> float | None:
    """Half-power width of the cosᵠθ element pattern, 2·arccos(0.5^(1/q)) [deg]; None for q = 0."""
    if q <= 0:
        return None
    return math.degrees(2 * math.acos(0.5 ** (1.0 / q)))
