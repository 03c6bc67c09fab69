"""The exceptions `thinning` raises for bad input and failed output.

Every message names where the problem is (a file, a key, a parameter), the bad value, and
why it is wrong, in one line, so the command line can print it as it is.
"""

from __future__ import annotations

__all__ = [
    "ThinningError",
    "InputError",
    "GeometryError",
    "LayoutError",
    "SpecError",
    "OutputError",
    "where",
]


class ThinningError(Exception):
    """Base class of every error `thinning` raises on purpose."""


class InputError(ThinningError, ValueError):
    """A file or parameter given by the user is malformed or out of range."""


class GeometryError(InputError):
    """An aperture or lattice that cannot hold a valid set of element sites."""


class LayoutError(InputError):
    """A layout file (element positions) that cannot be read or is inconsistent."""


class SpecError(InputError):
    """A design spec file with a missing, mistyped or out-of-range key."""


class OutputError(ThinningError, OSError):
    """An output that cannot be written (folder missing, not writable, disk full)."""


def where(source: str | None, field: str | None) -> str:
    """Return the ``"source: field: "`` prefix of a message (either part may be empty)."""
    parts = [p for p in (source, field) if p]
    return "".join(f"{p}: " for p in parts)
