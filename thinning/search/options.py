"""Reading a search method's options (the ``[search]`` keys of a spec) into a dataclass.

A field annotated ``int`` (or ``int | None``) takes a whole number, one annotated ``float`` a
finite number; the names in ``no_limit`` also take None or 0, meaning "no limit" / "the
default", as TOML has no null. Keys that are not fields (other methods' options) are ignored.
"""

from __future__ import annotations

import math
from dataclasses import fields

from ..errors import SpecError, where

__all__ = ["options_from_dict"]


def options_from_dict(cls, options: dict | None, source: str | None = None, no_limit=()):
    """The keyword arguments for dataclass ``cls`` found in ``options``.

    Raises
    ------
    thinning.errors.SpecError
        Naming ``search.<key>`` for a value of the wrong kind.
    """
    options = dict(options or {})
    kw = {}
    for f in fields(cls):
        if f.name not in options:
            continue
        value = options[f.name]
        if f.name in no_limit and value in (None, 0):
            kw[f.name] = None
            continue
        is_int = "int" in str(f.type)
        try:
            if isinstance(value, bool):
                raise ValueError
            if is_int:
                if float(value) != int(value):
                    raise ValueError
                value = int(value)
            else:
                value = float(value)
                if not math.isfinite(value):
                    raise ValueError
        except (TypeError, ValueError, OverflowError):
            kind = "an integer" if is_int else "a finite number"
            raise SpecError(
                f"{where(source, 'search.' + f.name)}{value!r}: expected {kind}"
            ) from None
        kw[f.name] = value
    return kw
