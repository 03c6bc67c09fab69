"""The spec's ``[requirements]`` judged against a layout's figures, in one place.

Every command that knows the requirements reports the same verdicts: ``design`` in its summary
line and in ``layout.json`` (``requirements``), the report at its top, and ``sweep`` for each
budget. A verdict holds the required and the achieved value, the margin (positive: met with
that much room) and whether it is met.

Each kind of requirement is one entry of :data:`KINDS`: the spec key, the figure it is judged
on (a ``score --json`` key), and the sense of the comparison. A new kind is a new entry.

* ``psl_db``, ``asl_db``: over the sidelobe region of the scan set and band (the worst beam
  and frequency);
* ``hpbw_max_deg``: the widest half-power beamwidth over the scan set and band
  (``hpbw_widest_deg``);
* ``mask``: the worst margin over every beam and frequency (``mask``, :func:`thinning.
  analysis.scan_figures.mask_figure`); its verdict's ``required`` is the limit at the worst
  point and ``achieved`` the pattern there (both relative to the beam's peak), with the
  beam, frequency and direction where it is.
"""

from __future__ import annotations

import math
from collections.abc import Mapping
from dataclasses import dataclass

__all__ = ["Requirement", "KINDS", "judge", "all_met", "describe", "verdict_phrase"]


@dataclass(frozen=True)
class Requirement:
    """One kind of requirement.

    Attributes
    ----------
    key : str      the key in the spec's [requirements] and in ``layout.json``
    label : str    how people name the figure ("PSL")
    figure : str   the figure it is judged on, a ``score --json`` key
    unit : str     unit of the values and the margin
    at_most : bool True: the figure must not exceed the required value; False: not fall below
    """

    key: str
    label: str
    figure: str
    unit: str
    at_most: bool = True

    def values(self, required, figures: Mapping):
        """(required, achieved, extra) as numbers for the verdict, from the spec's value and
        the figures; ``extra``: further keys of the verdict."""
        if self.key == "mask":
            m = figures.get(self.figure) or {}
            extra = {k: m[k] for k in ("beam", "frequency_ghz", "direction") if k in m}
            return m.get("limit_db"), m.get("level_db"), extra
        return float(required), figures.get(self.figure), {}

    def margin(self, required: float, achieved: float) -> float:
        """Room left: positive when met, in the requirement's unit."""
        return required - achieved if self.at_most else achieved - required

    def sign(self, plain: bool = False) -> str:
        """ "≤" or "≥" ("<=", ">=" when ``plain``)."""
        if plain:
            return "<=" if self.at_most else ">="
        return "≤" if self.at_most else "≥"


#: The kinds of requirement, by spec key.
KINDS: dict[str, Requirement] = {
    r.key: r
    for r in (
        Requirement("psl_db", "PSL", "psl_db", "dB"),
        Requirement("asl_db", "ASL", "asl_db", "dB"),
        Requirement("hpbw_max_deg", "HPBW", "hpbw_widest_deg", "deg"),
        Requirement("mask", "sidelobe mask", "mask", "dB"),
    )
}


def judge(requirements: Mapping[str, float], figures: Mapping) -> dict[str, dict]:
    """Verdicts of the given requirements on a layout's figures.

    Parameters
    ----------
    requirements : mapping of spec key to required value (the spec's [requirements])
    figures : mapping   the layout's figures (``score --json`` keys)

    Returns
    -------
    dict
        By requirement key, in the order of :data:`KINDS`: ``required``, ``achieved``,
        ``margin_db`` (positive = met with room; in the requirement's unit, dB for PSL and
        ASL), ``met`` (False when the figure is missing), ``label``, ``unit``.
    """
    out = {}
    for key, kind in KINDS.items():
        if key not in requirements:
            continue
        required, achieved, extra = kind.values(requirements[key], figures)
        ok = required is not None and achieved is not None and math.isfinite(float(achieved))
        margin = kind.margin(float(required), float(achieved)) if ok else None
        if key == "mask" and (figures.get("mask") or {}).get("margin_db") is not None:
            margin = float(figures["mask"]["margin_db"])
        out[key] = {
            "required": None if required is None else float(required),
            "achieved": float(achieved) if ok else None,
            "margin_db": None if margin is None else round(margin, 6),
            "met": bool(margin is not None and margin >= 0),
            "label": kind.label,
            "unit": kind.unit,
            **extra,
        }
    return out


def all_met(verdicts: Mapping[str, Mapping]) -> bool | None:
    """True when every verdict is met, None when there are none."""
    if not verdicts:
        return None
    return all(v["met"] for v in verdicts.values())


def describe(key: str, required, plain: bool = False) -> str:
    """ "PSL ≤ -17 dB" for a requirement ("PSL <= -17 dB" when ``plain``); "the sidelobe
    mask" for a mask (its limit varies with the direction)."""
    kind = KINDS[key]
    if key == "mask":
        return "the sidelobe mask"
    return f"{kind.label} {kind.sign(plain)} {required:g} {kind.unit}"


def verdict_phrase(key: str, verdict: Mapping, plain: bool = False) -> str:
    """ "meets PSL ≤ -17 dB by 5.91 dB" or "fails PSL ≤ -17 dB by 1.20 dB"."""
    what = describe(key, verdict["required"], plain)
    if verdict["margin_db"] is None:
        return f"cannot judge {what} (no figure)"
    word = "meets" if verdict["met"] else "fails"
    return f"{word} {what} by {abs(verdict['margin_db']):.2f} {verdict['unit']}"
