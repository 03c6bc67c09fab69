"""Embedded element pattern files (CSV): the gain of one element in the array, by direction.

Format (UTF-8, a byte-order mark is accepted; comma-separated; a header row):

``theta_deg``
    Angle from boresight (+z)  [deg], 0 … 180. Rows past 90° (behind the ground plane) are
    read and checked, then left out: the model radiates into the forward hemisphere.
``phi_deg``
    Azimuth from +x toward +y  [deg], −360 … 360, taken modulo 360 (φ = 360 is φ = 0).
``gain_dbi``
    The embedded element's gain  [dBi], −150 … 40, as a full-wave simulation of the element
    in its array gives it.

The rows must form a full grid: every θ with every φ (in any order), θ from 0 to at least
90°, and φ around the whole circle with no gap wider than :data:`MAX_PHI_GAP_DEG` (a pattern
without φ dependence repeats its column at φ = 0, 90, 180 and 270). Two rows of the same
direction are an error unless they give the same gain (an export listing φ = 0 and φ = 360).
Every problem raises :class:`thinning.errors.InputError` naming the file, the line and the
column, e.g. ``element.csv, line 7, column gain_dbi: 'nan' is not finite``. Other columns
are ignored.
"""

from __future__ import annotations

import csv
import io
import math
import os
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from ..errors import InputError

__all__ = ["ElementTable", "read_element_csv", "COLUMNS", "MAX_PHI_GAP_DEG"]

COLUMNS = ("theta_deg", "phi_deg", "gain_dbi")
#: Widest gap between neighbouring φ cuts  [deg] (cyclic) for the table to cover the circle.
MAX_PHI_GAP_DEG = 90.0
_RANGES = {"theta_deg": (0.0, 180.0), "phi_deg": (-360.0, 360.0), "gain_dbi": (-150.0, 40.0)}


@dataclass(frozen=True)
class ElementTable:
    """An element pattern table on a full (θ, φ) grid of the forward hemisphere.

    Attributes
    ----------
    theta_deg : (T,) array  [deg]   increasing, 0 … ≥ 90 (only values ≤ 90 kept, 90 included
        when the file has it)
    phi_deg : (P,) array  [deg]   increasing, in [0, 360)
    gain_dbi : (T, P) array  [dBi]
    source : str   the file name
    """

    theta_deg: np.ndarray
    phi_deg: np.ndarray
    gain_dbi: np.ndarray
    source: str = ""


def _err(name, line, column, message) -> InputError:
    where = name
    if line is not None:
        where += f", line {line}"
    if column is not None:
        where += f", column {column}"
    return InputError(f"{where}: {message}")


def _read_text(path: Path, name: str) -> str:
    try:
        data = path.read_bytes()
    except FileNotFoundError:
        raise _err(name, None, None, "no such file (array.element_pattern)") from None
    except IsADirectoryError:
        raise _err(name, None, None, "is a folder, not an element pattern CSV file") from None
    except OSError as exc:
        raise _err(name, None, None, f"cannot read: {exc.strerror or exc}") from None
    try:
        return data.decode("utf-8-sig")
    except UnicodeDecodeError as exc:
        line = data[: exc.start].count(b"\n") + 1
        raise _err(name, line, None, "not UTF-8 text") from None


def read_element_csv(path: str | os.PathLike) -> ElementTable:
    """Read and check an element pattern table (format in the module docstring).

    Raises
    ------
    InputError
        One line naming the file, the line and the column of the first problem.
    """
    path = Path(path)
    name = str(path)
    text = _read_text(path, name)
    rows = [(i, r) for i, r in enumerate(csv.reader(io.StringIO(text, newline="")), 1) if r]
    if not rows:
        raise _err(name, None, None, "the file is empty; expected theta_deg, phi_deg, gain_dbi")
    line0, header = rows[0]
    header = [h.strip() for h in header]
    missing = [c for c in COLUMNS if c not in header]
    if missing:
        raise _err(
            name, line0, None, f"the header lacks {', '.join(missing)} (found {', '.join(header)})"
        )
    col = {c: header.index(c) for c in COLUMNS}
    values = {c: [] for c in COLUMNS}
    lines = []
    for line, raw in rows[1:]:
        for c in COLUMNS:
            cell = raw[col[c]].strip() if col[c] < len(raw) else ""
            if not cell:
                raise _err(name, line, c, "empty cell")
            try:
                x = float(cell)
            except ValueError:
                raise _err(name, line, c, f"{cell!r} is not a number") from None
            if not math.isfinite(x):
                raise _err(name, line, c, f"{cell!r} is not finite")
            lo, hi = _RANGES[c]
            if not lo <= x <= hi:
                raise _err(name, line, c, f"{cell} is outside {lo:g} … {hi:g}")
            values[c].append(x)
        lines.append(line)
    if not lines:
        raise _err(name, None, None, "no rows under the header")
    theta = np.array(values["theta_deg"])
    phi = np.mod(np.array(values["phi_deg"]), 360.0)
    phi = np.where(np.isclose(phi, 360.0, atol=1e-9), 0.0, phi)
    gain = np.array(values["gain_dbi"])
    seen: dict = {}
    for k, key in enumerate(zip(np.round(theta, 9), np.round(phi, 9), strict=True)):
        if key in seen:
            j = seen[key]
            if abs(gain[j] - gain[k]) > 1e-3:
                raise _err(
                    name,
                    lines[k],
                    None,
                    f"theta {theta[k]:g}, phi {values['phi_deg'][k]:g} repeats line "
                    f"{lines[j]} with another gain ({gain[k]:g} vs {gain[j]:g} dBi)",
                )
            continue
        seen[key] = k
    keep = np.array(sorted(seen.values()))
    theta, phi, gain = theta[keep], phi[keep], gain[keep]
    ths = np.unique(theta)
    phs = np.unique(phi)
    if ths[0] != 0.0:
        raise _err(name, None, "theta_deg", f"starts at {ths[0]:g}: the grid must start at 0")
    if ths[-1] < 90.0:
        raise _err(
            name,
            None,
            "theta_deg",
            f"ends at {ths[-1]:g}: the grid must reach 90 to cover the hemisphere",
        )
    gaps = np.diff(np.append(phs, phs[0] + 360.0))
    if gaps.max() > MAX_PHI_GAP_DEG:
        i = int(np.argmax(gaps))
        raise _err(
            name,
            None,
            "phi_deg",
            f"no cut between {phs[i]:g} and {(phs[i] + gaps[i]) % 360:g}: the grid must go "
            f"round the circle in steps of at most {MAX_PHI_GAP_DEG:g} deg (repeat a pattern "
            "without phi dependence at phi = 0, 90, 180, 270)",
        )
    ti = np.searchsorted(ths, theta)
    pi = np.searchsorted(phs, phi)
    grid = np.full((ths.size, phs.size), np.nan)
    grid[ti, pi] = gain
    if np.isnan(grid).any():
        a, b = np.argwhere(np.isnan(grid))[0]
        raise _err(
            name,
            None,
            None,
            f"no row for theta {ths[a]:g}, phi {phs[b]:g}: the rows must form a full grid of "
            f"theta and phi ({ths.size} × {phs.size} directions, {len(keep)} given)",
        )
    front = ths <= 90.0
    if 90.0 not in ths:  # keep the first cut past the horizon, to interpolate up to it
        front[int(np.searchsorted(ths, 90.0))] = True
    return ElementTable(ths[front], phs, grid[front], name)
