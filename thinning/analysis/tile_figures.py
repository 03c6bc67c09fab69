"""The figures of a tiled design: counts, boards, chips, the cost of the constraint, and the
lobe of a repeated board.

A board repeated on every tile with one orientation makes the array the convolution of one
tile's elements with the lattice of tile centres, so its array factor is the tile's times that
of the tile lattice, whose grating lobes stand at u = m·λ/Lx, v = n·λ/Ly (Lx, Ly the tile
period; the array-factor product of subarrays, e.g. Mailloux, *Phased Array Antenna Handbook*,
ch. 8, recalled from memory). With several boards or orientations the product breaks and the
lobe spreads. :func:`tile_period_lobe` measures the pattern at and around the predicted points.
"""

from __future__ import annotations

import numpy as np

__all__ = ["tile_period_lobe", "tile_summary", "PARTIAL_RULE"]

PARTIAL_RULE = (
    "a tile cut by the outline, a hole, the clearance or a forbidden site is a partial tile: "
    "its limit is the full tile's scaled by the share of positions it keeps, rounded down "
    "(to a whole chip with whole_chips); its count is free up to that limit in every mode, "
    "and elements_per_tile and patterns bind the full tiles only"
)


def tile_period_lobe(x, y, period, wavelength, window: float | None = None) -> dict:
    """The highest lobe near the tile-period points (λ/Lx, 0), (0, λ/Ly), (λ/Lx, λ/Ly) at
    broadside, relative to the main beam  [dB], by direct summation of the array factor.

    Parameters
    ----------
    x, y : (N,) arrays  [m]   element positions
    period : (Lx, Ly)  [m]
    wavelength : float  [m]
    window : float, optional   half-width of the square searched about each point, in u
        (default: a quarter of λ/Lx)
    """
    x, y = np.asarray(x, float), np.asarray(y, float)
    lx, ly = period
    k = 2 * np.pi / wavelength
    pts = []
    if lx > 0:
        pts.append((wavelength / lx, 0.0))
    if ly > 0:
        pts.append((0.0, wavelength / ly))
    if lx > 0 and ly > 0:
        pts.append((wavelength / lx, wavelength / ly))
    pts = [p for p in pts if np.hypot(*p) < 1.0]
    if not pts:
        return None
    w = window if window is not None else 0.25 * wavelength / max(lx, ly)
    off = np.linspace(-w, w, 21)
    best = None
    n = x.size
    for pu, pv in pts:
        uu, vv = np.meshgrid(pu + off, pv + off if ly > 0 else np.zeros(1))
        ph = k * (np.outer(uu.ravel(), x) + np.outer(vv.ravel(), y))
        p = np.abs(np.exp(1j * ph).sum(axis=1)) ** 2 / n**2
        i = int(np.argmax(p))
        level = float(10 * np.log10(max(p[i], 1e-30)))
        if best is None or level > best["level_db"]:
            best = {
                "u": round(float(uu.ravel()[i]), 5),
                "v": round(float(vv.ravel()[i]), 5),
                "level_db": round(level, 3),
                "predicted_u": round(pu, 5),
                "predicted_v": round(pv, 5),
            }
    return best


def tile_summary(tiling, layout, wavelength, unconstrained=None, psl_db=None) -> dict:
    """The ``tiles`` object of layout.json (and the report's tile section)."""
    grid, table = tiling.grid, tiling.table
    counts = table.count
    chips = tiling.chips
    full = grid.full
    notes = []
    repeat = None
    repeated = table.full_boards < int(full.sum()) and grid.rules.orientations == "none"
    if repeated:
        repeat = tile_period_lobe(layout.x, layout.y, grid.period(), wavelength)
        if repeat is not None:
            notes.append(
                "identical boards repeated with one orientation: a grating-like lobe at the "
                f"tile period, {repeat['level_db']:.1f} dB at (u, v) = ({repeat['u']:.3f}, "
                f"{repeat['v']:.3f}); allow orientations to spread it"
            )
    out = {
        "rules": grid.rules.to_dict(),
        "origin_index": [int(v) for v in grid.origin_index],
        "tiles": grid.n_tiles,
        "full_tiles": int(full.sum()),
        "partial_tiles": int((~full).sum()),
        "partial_rule": PARTIAL_RULE,
        "counts": {
            "min": int(counts.min()),
            "max": int(counts.max()),
            "mean": round(float(counts.mean()), 3),
            "per_tile": [int(c) for c in counts],
        },
        "limit_full": None if grid.rules.limit is None else int(grid.rules.limit),
        "boards_full": int(table.full_boards),
        "boards_partial": int(table.partial_boards),
        "chips": None if chips is None else int(len(chips.centre)),
        "longest_chip_distance_mm": None if chips is None else round(float(chips.longest) * 1e3, 3),
        "unconstrained": None,
        "repeat_lobe": repeat,
        "notes": notes,
    }
    if unconstrained is not None:
        out["unconstrained"] = {
            **unconstrained,
            "penalty_db": None
            if psl_db is None
            else round(float(psl_db) - float(unconstrained["psl_db"]), 3),
        }
    return out
