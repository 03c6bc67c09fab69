"""The report's section on tiles and chips, from ``metrics["tiles"]`` (``layout.json``).

The section states the tile rules, the full and partial tiles and the rule the partial ones
follow, the per-tile count map (:mod:`thinning.outputs.tile_map`), the boards to design and
build, the chips and their longest element-to-chip-centre distance, what the constraint costs
in sidelobes (the tiled design against an unconstrained design of the same budget, when that
was run), and, when a repeated board makes one, the grating-like lobe at the tile period.
"""

from __future__ import annotations

from collections.abc import Mapping

from .report_sections import _e, _finite, _num

__all__ = ["tiles_html"]

_MODES = {
    "patterns": "a few distinct boards (patterns), counts free within the capacity",
    "exact": "the same count on every full tile",
    "whole-chips": "whole chips: every tile's count a multiple of the channels per chip",
    "capacity": "a capacity per tile, under the global budget",
    "free": "tiles counted, no per-tile limit",
}

_ORIENTATIONS = {
    "none": "as designed only (no turns or mirrors)",
    "rotate-180": "as designed or turned 180°",
    "all": "every turn and mirror of the tile",
}


def _rows(rows) -> str:
    body = "".join(f'<tr><th scope="row">{_e(k)}</th><td>{_e(v)}</td></tr>' for k, v in rows)
    return f'<table class="tiles"><tbody>{body}</tbody></table>'


def _rules_rows(rules: Mapping) -> list:
    size = rules.get("size") or ["?", "?"]
    rows = [("Tile", f"{size[0]} × {size[1]} lattice positions (along a row × rows)")]
    mode = rules.get("mode")
    if mode:
        rows.append(("Counting", _MODES.get(mode, str(mode))))
    if rules.get("elements_per_tile") is not None:
        rows.append(("Elements per full tile", f"exactly {rules['elements_per_tile']}"))
    if rules.get("max_elements_per_tile") is not None:
        rows.append(("Elements per tile", f"at most {rules['max_elements_per_tile']}"))
    if rules.get("channels_per_chip") is not None:
        chips = f"{rules['channels_per_chip']} channels per chip"
        if rules.get("whole_chips"):
            chips += "; whole chips only"
        rows.append(("Chips", chips))
    if rules.get("patterns") is not None:
        rows.append(("Distinct full-tile boards", f"at most {rules['patterns']}"))
    o = rules.get("orientations")
    if o:
        rows.append(("Board mountings", _ORIENTATIONS.get(o, str(o))))
    if rules.get("origin_mm") is not None:
        ox, oy = rules["origin_mm"]
        rows.append(("Tile grid origin", f"({ox:g}, {oy:g}) mm"))
    return rows


def _cost_html(unc, metrics: Mapping) -> str:
    if not unc:
        return (
            '<p class="note">The cost of the tile constraint was not measured. To measure it, '
            "set <code>[tiles] compare_unconstrained = true</code> in the spec or run "
            "<code>thinning design --compare-unconstrained</code>: an unconstrained design of "
            "the same budget is then run and compared here.</p>"
        )
    penalty = unc.get("penalty_db")
    rows = [
        (
            "PSL, tiled design",
            _num(metrics.get("psl_db"), 2, "dB"),
        ),
        ("PSL, unconstrained design", _num(unc.get("psl_db"), 2, "dB")),
        ("ASL, tiled design", _num(metrics.get("asl_db"), 2, "dB")),
        ("ASL, unconstrained design", _num(unc.get("asl_db"), 2, "dB")),
        ("Penalty of the tile constraint (PSL)", _num(penalty, 2, "dB")),
        (
            "Unconstrained run",
            f"{unc.get('method', '')} {_num(unc.get('time_limit_s'), 0, 's')} time limit, "
            f"{_count(unc.get('evaluations'))} evaluations",
        ),
    ]
    text = (
        "The same budget, seed and limits designed without tiles; the penalty is the tiled "
        "design's PSL less the unconstrained one's (positive: the tiles cost that much)."
    )
    if _finite(penalty) and float(penalty) < 0:
        text += (
            " Here it is negative: the unconstrained run did worse than the tiled design, so "
            "the figure bounds the cost rather than measures it."
        )
    return _rows(rows) + f'<p class="note">{_e(text)}</p>'


def _count(v) -> str:
    return "—" if v is None else f"{int(v):,}"


def _repeat_html(lobe) -> str:
    if not lobe:
        return ""
    return (
        '<p class="warn"><b>Grating-like lobe of repeated tiles.</b> Identical boards repeated '
        "in the same orientation make the array periodic at the tile period, which puts "
        "lobes at multiples of λ/(tile width) in u (and λ/(tile height) in v). The highest "
        f"of them is at u = {_num(lobe.get('u'), 3)}, v = {_num(lobe.get('v'), 3)} "
        f"(the tile period predicts u = {_num(lobe.get('predicted_u'), 3)}, "
        f"v = {_num(lobe.get('predicted_v'), 3)}), at {_num(lobe.get('level_db'), 2, 'dB')}. "
        "Allowing the boards to be turned or mirrored (<code>[tiles] orientations</code>), "
        "or more distinct boards (<code>patterns</code>), breaks the period.</p>"
    )


def tiles_html(tiles: Mapping, metrics: Mapping | None = None, map_svg: str | None = None) -> str:
    """The section's HTML.

    Parameters
    ----------
    tiles : dict
        ``metrics["tiles"]``: ``rules`` (:meth:`TileRules.to_dict`), ``tiles``,
        ``full_tiles``, ``partial_tiles``, ``partial_rule``, ``counts`` (``min``, ``max``,
        ``mean``), ``limit_full``, ``boards_full``, ``boards_partial``, ``chips``,
        ``longest_chip_distance_mm``, ``unconstrained`` (None or ``psl_db``, ``asl_db``,
        ``penalty_db``, ``time_limit_s``, ``evaluations``), ``repeat_lobe`` (None or ``u``,
        ``v``, ``level_db``, ``predicted_u``, ``predicted_v``), ``notes``.
    metrics : dict, optional   the layout's figures (``psl_db``, ``asl_db``)
    map_svg : str, optional   the count map (:func:`thinning.outputs.tile_map.tile_map_svg`)

    Returns
    -------
    str
    """
    m = metrics or {}
    t = tiles
    parts = ["<h3>Tile rules</h3>", _rows(_rules_rows(t.get("rules") or {}))]
    counts = t.get("counts") or {}
    rows = [
        (
            "Tiles",
            f"{t.get('tiles', '—')}: {t.get('full_tiles', '—')} full, "
            f"{t.get('partial_tiles', '—')} partial",
        ),
        (
            "Elements per tile",
            f"{counts.get('min', '—')} to {counts.get('max', '—')}, "
            f"mean {_num(counts.get('mean'), 1)}",
        ),
    ]
    if t.get("limit_full") is not None:
        rows.append(("Limit of a full tile", str(t["limit_full"])))
    if _finite(t.get("envelope_bound_db")):
        rows.append(
            (
                "Envelope bound under the tile limits",
                _num(t["envelope_bound_db"], 2, "dB")
                + " (the peak of the expected pattern of draws from the density envelope the "
                "counts were planned from; the design's PSL is "
                + _num(m.get("psl_db"), 2, "dB")
                + ")",
            )
        )
    rows.append(
        (
            "Boards",
            f"{t.get('boards_full', '—')} distinct full-tile board(s), "
            f"{t.get('boards_partial', '—')} partial variant(s)",
        )
    )
    if t.get("chips") is not None:
        rows.append(("Chips", str(t["chips"])))
        rows.append(
            (
                "Longest element-to-chip-centre distance",
                _num(t.get("longest_chip_distance_mm"), 2, "mm"),
            )
        )
    parts.append("<h3>Tiles, boards and chips</h3>" + _rows(rows))
    if t.get("partial_rule"):
        parts.append(f'<p class="note">Partial tiles: {_e(t["partial_rule"])}</p>')
    if map_svg:
        parts.append(
            "<h3>Elements per tile</h3>"
            f'<div class="tilemap">{map_svg}</div>'
            '<p class="note">Each tile shaded by its element count, with the count and its '
            "board id; dashed borders mark partial tiles. tiles.csv lists every tile, "
            "layout.csv every element's tile, chip and channel.</p>"
        )
    parts.append("<h3>What the tiles cost</h3>" + _cost_html(t.get("unconstrained"), m))
    parts.append(_repeat_html(t.get("repeat_lobe")))
    notes = t.get("notes") or []
    if notes:
        parts.append('<ul class="notes">' + "".join(f"<li>{_e(n)}</li>" for n in notes) + "</ul>")
    return "".join(parts)
