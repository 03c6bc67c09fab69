r"""Element patterns: the built-in cosᵠθ model and an embedded pattern read from a table.

An element pattern is a power gain g(θ, φ) over the forward hemisphere (nothing behind the
ground plane), or the isotropic element over the full sphere (q = 0 of the model). It enters
three figures:

* **directivity**, exact from the autocorrelation of the excitation with the kernel
  K(ρ) = ∫ g(r̂)·e^{jkρ·r̂} dΩ (:func:`thinning.engine.metrics.directivity_grid`). For cosᵠθ
  the kernel is Sonine's integral (:func:`thinning.engine.metrics.element_kernel`); for a
  table it is summed from the pattern's harmonics in φ, g(θ, φ) = Σₘ gₘ(θ)·e^{jmφ}:

  .. math::

      K(\rho, \psi) = \sum_m 2\pi\, j^m e^{jm\psi}
                      \int_0^{\pi/2} g_m(\theta)\, J_m(k\rho\sin\theta)\,\sin\theta\, d\theta

  (the Jacobi–Anger expansion; Gauss–Legendre in θ with more nodes than kρ has half-periods).
  A table of 4·cos θ gives the kernel of q = 1 times four, so the same directivity
  (tests/test_element.py);
* **gain** of an array with the embedded pattern: element gain plus array gain,
  G(w₀) = g(w₀) + 10·log₁₀ N_eff  [dBi] (the embedded pattern holds what coupling does to
  each element; :mod:`thinning.engine.mask`), and the scan loss g(0) − g(w₀) (positive);
* **mask entries in dBi** (:mod:`thinning.engine.mask`).

The table is interpolated on the sphere bilinearly in (θ, φ) on the linear gain, φ wrapping
round the circle; at θ = 0 every φ meets, so the mean of the θ = 0 row is used there.
"""

from __future__ import annotations

import math

import numpy as np
import scipy.special

__all__ = ["ElementPattern", "CosineElement", "TabulatedElement"]

#: Lag-node products per chunk of a tabulated kernel (float64 and complex: ≈ 100 MB).
_CHUNK = 1 << 22


class ElementPattern:
    """Power gain of one element by direction (linear; the base of the two kinds)."""

    #: the element radiates into the full sphere (isotropic, q = 0)
    full_sphere = False
    tabulated = False

    def gain(self, u, v) -> np.ndarray:
        """Gain (linear, ≥ 0) toward visible directions (u, v)."""
        raise NotImplementedError

    def gain_dbi(self, u, v) -> np.ndarray:
        """Gain  [dBi] toward visible directions (u, v) (−300 dBi where it is zero)."""
        g = self.gain(u, v)
        with np.errstate(divide="ignore"):
            return np.maximum(10 * np.log10(np.maximum(g, 0.0)), -300.0)

    def kernel(self, rx, ry, wavelength: float) -> np.ndarray:
        """K(ρ) = ∫ g(r̂)·exp(j k ρ·r̂) dΩ for element separations (ρx, ρy)  [m] (complex)."""
        raise NotImplementedError

    def describe(self) -> str:
        raise NotImplementedError


class CosineElement(ElementPattern):
    """g(θ) = 2(q + 1)·cosᵠθ over the forward hemisphere (its directivity is 2(q + 1));
    q = 0 is the isotropic element over the full sphere (conventions.md).

    Parameters
    ----------
    q : float  [1]
    """

    def __init__(self, q: float = 1.0):
        self.q = float(q)
        self.full_sphere = self.q == 0

    def gain(self, u, v) -> np.ndarray:
        s2 = np.asarray(u, dtype=float) ** 2 + np.asarray(v, dtype=float) ** 2
        if self.q == 0:
            return np.ones_like(s2)
        c = np.sqrt(np.maximum(0.0, 1.0 - s2))
        return 2 * (self.q + 1) * c**self.q

    def kernel(self, rx, ry, wavelength: float) -> np.ndarray:
        from .metrics import element_kernel

        return element_kernel(np.hypot(rx, ry), wavelength, self.q).astype(complex)

    def describe(self) -> str:
        return f"cos^{self.q:g}(theta)"


class TabulatedElement(ElementPattern):
    """An embedded element pattern from a table on a (θ, φ) grid of the forward hemisphere.

    Parameters
    ----------
    theta_deg : (T,) array  [deg]   increasing from 0, reaching 90 or past it
    phi_deg : (P,) array  [deg]   increasing, in [0, 360)
    gain_dbi : (T, P) array  [dBi]
    source : str   where the table came from (for messages and the report)
    """

    tabulated = True

    def __init__(self, theta_deg, phi_deg, gain_dbi, source: str = ""):
        self.theta = np.radians(np.asarray(theta_deg, dtype=float))
        phi = np.radians(np.asarray(phi_deg, dtype=float))
        g = 10.0 ** (np.asarray(gain_dbi, dtype=float) / 10.0)
        g[0, :] = g[0, :].mean()  # θ = 0 is one direction whatever φ says
        # φ wraps: the first cut again at φ + 2π
        self.phi = np.append(phi, phi[0] + 2 * math.pi)
        self.table = np.concatenate([g, g[:, :1]], axis=1)
        self.source = source
        self._harmonics = None

    @classmethod
    def from_table(cls, table) -> TabulatedElement:
        """From a :class:`thinning.io.element_csv.ElementTable`."""
        return cls(table.theta_deg, table.phi_deg, table.gain_dbi, table.source)

    def gain_at(self, theta, phi) -> np.ndarray:
        """Gain (linear) at angles θ, φ  [rad], bilinear in the table; 0 past θ = 90°."""
        theta = np.asarray(theta, dtype=float)
        phi = np.mod(np.asarray(phi, dtype=float) - self.phi[0], 2 * math.pi) + self.phi[0]
        th = np.clip(theta, self.theta[0], self.theta[-1])
        i = np.clip(np.searchsorted(self.theta, th, side="right") - 1, 0, self.theta.size - 2)
        j = np.clip(np.searchsorted(self.phi, phi, side="right") - 1, 0, self.phi.size - 2)
        ft = (th - self.theta[i]) / (self.theta[i + 1] - self.theta[i])
        fp = (phi - self.phi[j]) / (self.phi[j + 1] - self.phi[j])
        t = self.table
        g = (
            (1 - ft) * (1 - fp) * t[i, j]
            + ft * (1 - fp) * t[i + 1, j]
            + (1 - ft) * fp * t[i, j + 1]
            + ft * fp * t[i + 1, j + 1]
        )
        return np.where(theta <= math.pi / 2 + 1e-12, g, 0.0)

    def gain(self, u, v) -> np.ndarray:
        u = np.asarray(u, dtype=float)
        v = np.asarray(v, dtype=float)
        s = np.minimum(np.hypot(u, v), 1.0)
        return self.gain_at(np.arcsin(s), np.arctan2(v, u))

    def harmonics(self, n_theta: int):
        """Gauss–Legendre nodes θᵢ on [0, π/2], their weights × sin θᵢ, and the harmonics
        gₘ(θᵢ), m ≥ 0, of the pattern in φ that matter (|gₘ| above 1e-3 of |g₀|):
        (θ, w, m, gₘ)."""
        key = int(n_theta)
        if self._harmonics is not None and self._harmonics[0] == key:
            return self._harmonics[1]
        x, w = np.polynomial.legendre.leggauss(key)
        theta = (x + 1) * math.pi / 4
        w = w * math.pi / 4 * np.sin(theta)
        n_phi = 64
        phi = np.arange(n_phi) * (2 * math.pi / n_phi)
        g = self.gain_at(theta[:, None], phi[None, :])
        gm = np.fft.fft(g, axis=1) / n_phi  # gₘ for m = 0 … 31, −32 … −1
        m = np.fft.fftfreq(n_phi, 1.0 / n_phi).astype(int)
        size = np.abs(gm).max(axis=0)
        # m ≥ 0 only: g₋ₘ = conj(gₘ) for a real pattern (see kernel). Harmonics below 1e-3
        # of g₀ are left out: the example's table (layouts/sector-surveillance-element.csv)
        # keeps m = 0 and 2 of 15 and its directivity moves by 2e-4 dB, at a tenth of the time
        keep = (size > 1e-3 * size[0]) & (m >= 0) & (m < n_phi // 2)
        out = (theta, w, m[keep], gm[:, keep])
        self._harmonics = (key, out)
        return out

    def kernel(self, rx, ry, wavelength: float) -> np.ndarray:
        rx = np.asarray(rx, dtype=float)
        ry = np.asarray(ry, dtype=float)
        shape = np.broadcast(rx, ry).shape
        rx, ry = np.broadcast_to(rx, shape).ravel(), np.broadcast_to(ry, shape).ravel()
        k = 2 * math.pi / wavelength
        rho = np.hypot(rx, ry)
        psi = np.arctan2(ry, rx)
        kr_max = k * float(rho.max()) if rho.size else 0.0
        theta, w, ms, gm = self.harmonics(48 + 16 * int(math.ceil(kr_max / 16)))
        s = np.sin(theta)
        out = np.zeros(rho.size, dtype=complex)
        step = max(1, _CHUNK // theta.size)
        # the terms of m and −m together: with g₋ₘ = conj(gₘ) and J₋ₘ = (−1)ᵐ Jₘ they sum to
        # 2π jᵐ · 2 Re(e^{jmψ} Iₘ), Iₘ = ∫ gₘ Jₘ(kρ sin θ) sin θ dθ
        for a in range(0, rho.size, step):
            z = k * rho[a : a + step, None] * s[None, :]
            for i, m in enumerate(ms):
                integral = (scipy.special.jv(int(m), z) * w[None, :]) @ gm[:, i]
                phase = np.exp(1j * m * psi[a : a + step]) * integral
                term = phase if m == 0 else 2.0 * phase.real
                out[a : a + step] += 2 * math.pi * (1j ** int(m)) * term
        return out.reshape(shape)

    def describe(self) -> str:
        return f"embedded pattern {self.source}" if self.source else "embedded pattern (table)"
