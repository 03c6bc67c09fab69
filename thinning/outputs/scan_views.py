"""The report's views of a scan set, band and sidelobe mask.

* :func:`draw_zones` — on the broadside u-v map, the sidelobe region of the scan set and band
  and the outline of every limit zone of the mask carried onto it (the eroded mask of
  :mod:`thinning.engine.mask`), one colour per level;
* :func:`mask_cut_data` and :func:`fig_mask_cuts` — the pattern of the beam that meets the
  worst point of the mask, at that frequency and at the band's edges, along the θ-cut
  through the worst direction, with the mask's limit along the cut;
* :func:`mask_html` — the mask's entries and where its worst point is, under the verdicts.

matplotlib is imported by :mod:`thinning.outputs.figures`, which this module draws with.
"""

from __future__ import annotations

import html
import math

import numpy as np

from ..analysis.score import layout_engine
from ..engine.coverage import Coverage
from ..units import wavelength as wavelength_of
from .figures import _new_figure
from .pattern_data import FLOOR_DB, _db

__all__ = ["draw_zones", "mask_cut_data", "fig_mask_cuts", "mask_html"]


def _rings(geom):
    for poly in getattr(geom, "geoms", [geom]):
        if poly.is_empty or not hasattr(poly, "exterior"):
            continue
        yield np.asarray(poly.exterior.coords)
        for r in poly.interiors:
            yield np.asarray(r.coords)


def draw_zones(ax, coverage: Coverage, limits=None) -> None:
    """Outline the sidelobe region and the mask's limit zones on a u-v axes."""
    for k, ring in enumerate(_rings(coverage.region_polygon())):
        ax.plot(
            ring[:, 0],
            ring[:, 1],
            color="white",
            lw=1.4,
            label="sidelobe region of the scan set and band" if k == 0 else None,
        )
    if limits is None or not limits.any:
        return
    levels = sorted({lvl for lvl, _ in limits.zones(coverage)})
    colours = {lvl: f"C{(i + 1) % 10}" for i, lvl in enumerate(levels)}
    seen = set()
    for lvl, geom in limits.zones(coverage):
        for ring in _rings(geom):
            label = None if lvl in seen else f"mask {lvl:.1f} dB reaches here"
            seen.add(lvl)
            ax.plot(ring[:, 0], ring[:, 1], color=colours[lvl], lw=1.0, ls="--", label=label)


def mask_cut_data(layout, coverage: Coverage, limits, worst: dict, n: int = 1801) -> dict:
    """The worst beam's pattern along the θ-cut through the worst direction.

    Parameters
    ----------
    layout : Layout
    coverage : Coverage
    limits : SidelobeLimits
    worst : dict   the ``mask`` figure of a score (:func:`thinning.analysis.scan_figures.
        mask_figure`): its ``beam``, ``frequency_ghz`` and ``direction``

    Returns
    -------
    dict   ``theta_deg`` (n,), ``phi_deg`` (the cut's plane), ``patterns`` {f [GHz]: (n,)
        dB relative to the beam's peak}, ``limit_db`` (n,) (NaN where none applies),
        ``beam`` (u₀, v₀)
    """
    w0 = np.array([worst["beam"]["u0"], worst["beam"]["v0"]], dtype=float)
    phi = math.radians(worst["direction"]["phi_deg"])
    theta = np.linspace(-90.0, 90.0, n)
    s = np.sin(np.radians(theta))
    w = np.column_stack([s * math.cos(phi), s * math.sin(phi)])
    _, _, exact, _ = layout_engine(layout, wavelength_of(coverage.frequency), 0.0)
    f_worst = worst["frequency_ghz"] * 1e9
    freqs = sorted({f_worst, *coverage.frequencies[:1], *coverage.frequencies[-1:]})
    patterns = {}
    for f in freqs:
        t = coverage.to_t(w, w0[None, :], f)
        patterns[round(f / 1e9, 6)] = _db(exact.evaluate(t[:, 0], t[:, 1], derivatives=False))
    lim = limits.at(w[:, 0], w[:, 1])
    return {
        "theta_deg": theta,
        "phi_deg": math.degrees(phi),
        "patterns": patterns,
        "limit_db": np.where(np.isfinite(lim), lim, np.nan),
        "beam": w0,
        "worst_frequency_ghz": round(f_worst / 1e9, 6),
    }


def fig_mask_cuts(data: dict, worst: dict, floor_db: float = FLOOR_DB):
    """The worst beam against the mask along its θ-cut, at the worst frequency and the band's
    edges (:func:`mask_cut_data`)."""
    fig = _new_figure((7.2, 4.4))
    ax = fig.add_subplot()
    th = data["theta_deg"]
    for i, (f, p) in enumerate(data["patterns"].items()):
        main = f == data["worst_frequency_ghz"]
        ax.plot(
            th,
            np.maximum(p, floor_db),
            lw=1.0 if main else 0.7,
            color="C0" if main else f"C{i + 2}",
            alpha=1.0 if main else 0.8,
            label=f"{f:g} GHz" + (" (the worst point)" if main else " (band edge)"),
        )
    ax.plot(th, data["limit_db"], color="C3", lw=1.6, label="mask limit")
    d = worst.get("direction", {})
    theta_w = d.get("theta_deg")
    if theta_w is not None:
        signed = theta_w if abs(d["phi_deg"] - data["phi_deg"]) < 1e-6 else -theta_w
        ax.plot([signed], [worst["level_db"]], "x", color="red", ms=9, mew=2, label="worst point")
    b = worst["beam"]
    ax.set_xlim(-90, 90)
    ax.set_ylim(floor_db, 3.0)
    ax.set_xticks(np.arange(-90, 91, 30))
    ax.set_xlabel(f"observation angle θ in the plane φ = {data['phi_deg']:.1f}°  [deg]")
    ax.set_ylabel("relative to the beam's peak  [dB]")
    ax.set_title(
        f"Beam at azimuth {b['azimuth_deg']:.1f}°, elevation {b['elevation_deg']:.1f}° "
        "against the mask (array factor)",
        fontsize=10,
    )
    ax.grid(alpha=0.3)
    ax.legend(fontsize=7, loc="lower center", ncols=2)
    return fig


def mask_html(metrics: dict, spec) -> str:
    """The mask's entries and where its worst point lies (under the verdicts)."""
    m = metrics.get("mask") or {}
    if spec is None or not getattr(spec, "mask", None):
        return ""
    items = "".join(f"<li>{html.escape(e.describe())}</li>" for e in spec.mask)
    psl = spec.requirements.get("psl_db")
    rest = (
        f"<li>elsewhere: PSL {psl:g} dB</li>" if psl is not None else "<li>elsewhere: no limit</li>"
    )
    text = (
        "<p>Sidelobe mask (levels relative to the peak of the beam being steered, for every "
        f"beam of the {html.escape(spec.coverage.describe())}):</p><ul>{items}{rest}</ul>"
    )
    if m.get("direction"):
        b, d = m["beam"], m["direction"]
        text += (
            f'<p class="note">Worst point: the beam steered to azimuth {b["azimuth_deg"]:.1f}°, '
            f"elevation {b['elevation_deg']:.1f}° at {m['frequency_ghz']:g} GHz sees "
            f"{m['level_db']:.2f} dB at θ = {d['theta_deg']:.1f}°, φ = {d['phi_deg']:.1f}°, "
            f"where the mask allows {m['limit_db']:.2f} dB (margin {m['margin_db']:+.2f} dB; "
            f"the search's sampled figure {m.get('sampled_margin_db', float('nan')):+.2f} dB)."
            "</p>"
        )
    return text
