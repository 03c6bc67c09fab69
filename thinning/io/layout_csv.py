"""Layout CSV files: one row per active element.

Format (UTF-8, a byte-order mark is accepted; comma-separated; a header row; no index column):

``id``
    Element name, any text (optional; default "1" … "N" in file order). Must be unique.
``x_mm``, ``y_mm``
    Element position in the array plane  [mm] (required). Boresight is +z.
``row``, ``col``
    Integer indices of the element on the lattice's rectangular index grid (optional): the
    element sits at ``origin + (col·gx, row·gy)``. For a triangular lattice this is the
    checkerboard grid of pitch (dx/2, dy), so ``col ≡ row (mod 2)``; rows count up in y.
    Written empty when unknown; in a file read back, either every cell of the column is
    filled or every cell is empty.
``amplitude``
    Linear amplitude weight ≥ 0 (optional; default 1). Not all zero.
``tile``, ``chip``, ``channel``
    A tiled design's tile id, chip id and channel within the chip, integers from 1
    (optional; written by ``thinning design`` with ``[tiles]``, see
    :mod:`thinning.io.tiles_csv`). Ignored on reading, like any other column.

At least two elements (:data:`MIN_ELEMENTS`). Header names are case-sensitive; surrounding
spaces are ignored. Other columns are ignored
on reading (a writer may add them, e.g. per-element notes). Blank lines are skipped. Two
elements within 1 µm of each other are an error.

Every problem found on reading raises :class:`thinning.errors.LayoutError` with one line
naming the file, the line and the column, e.g.
``layout.csv, line 3, column x_mm: 'not-a-number' is not a number``.
"""

from __future__ import annotations

import csv
import io
import math
import os
from collections.abc import Mapping, Sequence
from pathlib import Path

import numpy as np

from ..errors import LayoutError
from ..geometry.layout import GRID_TOL, Layout
from ..units import m_to_mm, mm_to_m
from .atomic import atomic_open

__all__ = [
    "read_layout_csv",
    "write_layout_csv",
    "REQUIRED_COLUMNS",
    "OPTIONAL_COLUMNS",
    "MIN_ELEMENTS",
]

REQUIRED_COLUMNS = ("x_mm", "y_mm")
OPTIONAL_COLUMNS = ("id", "row", "col", "amplitude")
_STANDARD = ("id", "x_mm", "y_mm", "row", "col", "amplitude")

#: Fewest elements a layout file may hold: no figure of a one-element array means anything.
MIN_ELEMENTS = 2


def _err(name: str, line: int | None, column: str | None, message: str) -> LayoutError:
    where = name
    if line is not None:
        where += f", line {line}"
    if column is not None:
        where += f", column {column}"
    return LayoutError(f"{where}: {message}")


def _read_text(path: Path, name: str) -> str:
    try:
        data = path.read_bytes()
    except FileNotFoundError:
        raise _err(name, None, None, "no such file") from None
    except IsADirectoryError:
        raise _err(name, None, None, "is a folder, not a layout CSV file") from None
    except OSError as exc:
        if path.is_dir():
            raise _err(name, None, None, "is a folder, not a layout CSV file") from None
        raise _err(name, None, None, f"cannot read: {exc.strerror or exc}") from None
    try:
        return data.decode("utf-8-sig")
    except UnicodeDecodeError as exc:
        line = data[: exc.start].count(b"\n") + 1
        bad = data[exc.start : exc.start + 1].hex()
        raise _err(name, line, None, f"not UTF-8 text (byte 0x{bad})") from None


def _number(cell: str, name: str, line: int, column: str) -> float:
    text = cell.strip()
    if not text:
        raise _err(name, line, column, "empty cell")
    try:
        value = float(text)
    except ValueError:
        raise _err(name, line, column, f"{text!r} is not a number") from None
    if not math.isfinite(value):
        raise _err(name, line, column, f"{text!r} is not finite")
    return value


def _integer(cell: str, name: str, line: int, column: str) -> int:
    text = cell.strip()
    try:
        return int(text)
    except ValueError:
        pass
    value = _number(text, name, line, column)
    if not value.is_integer():
        raise _err(name, line, column, f"{text!r} is not an integer")
    return int(value)


def read_layout_csv(path: str | os.PathLike) -> Layout:
    """Read a layout CSV file (format in the module docstring).

    Parameters
    ----------
    path : str or os.PathLike

    Returns
    -------
    Layout
        Positions in metres, in file order; ``source`` is ``str(path)``.

    Raises
    ------
    LayoutError
        One line naming the file, the line and the column of the first problem.
    """
    path = Path(path)
    name = str(path)
    text = _read_text(path, name)
    if not text.strip():
        raise _err(name, None, None, "the file is empty; expected a header row with x_mm, y_mm")
    reader = csv.reader(io.StringIO(text, newline=""))
    try:
        header = None
        for raw in reader:
            if raw:
                header = [h.strip() for h in raw]
                header_line = reader.line_num
                break
        if header is None:  # only blank lines (a whitespace-only file is caught above)
            raise _err(name, None, None, "no header row")
        index: dict[str, int] = {}
        for i, h in enumerate(header):
            if h in _STANDARD and h in index:
                raise _err(name, header_line, h, "appears twice in the header")
            index.setdefault(h, i)
        for req in REQUIRED_COLUMNS:
            if req not in index:
                found = ", ".join(repr(h) for h in header)
                raise _err(name, header_line, req, f"missing from the header (found {found})")

        cols: dict[str, list[str]] = {k: [] for k in _STANDARD if k in index}
        lines: list[int] = []
        for raw in reader:
            if not raw:
                continue
            line = reader.line_num
            if len(raw) < len(header):
                raise _err(
                    name,
                    line,
                    header[len(raw)],
                    f"missing: the row has {len(raw)} fields, the header {len(header)}",
                )
            if len(raw) > len(header):
                raise _err(
                    name,
                    line,
                    str(len(header) + 1),
                    f"extra field {raw[len(header)]!r}: the header has {len(header)} columns",
                )
            for k in cols:
                cols[k].append(raw[index[k]])
            lines.append(line)
    except csv.Error as exc:
        raise _err(name, reader.line_num, None, f"not valid CSV: {exc}") from None
    if not lines:
        raise _err(name, header_line, None, "no data rows after the header")

    has = {k: k in cols for k in _STANDARD}
    x_mm = np.empty(len(lines))
    y_mm = np.empty(len(lines))
    amplitude = np.empty(len(lines)) if has["amplitude"] else None
    ids: list[str] | None = [] if has["id"] else None
    seen: dict[str, int] = {}
    cells: dict[str, list[str]] = {
        k: [c.strip() for c in cols[k]] for k in ("row", "col") if has[k]
    }
    filled = {k: any(v) for k, v in cells.items()}
    grid: dict[str, list[int]] = {k: [] for k in cells if filled[k]}
    for i, n in enumerate(lines):
        if ids is not None:
            key = cols["id"][i].strip()
            if not key:
                raise _err(name, n, "id", "empty cell")
            if key in seen:
                raise _err(name, n, "id", f"id {key!r} already used on line {seen[key]}")
            seen[key] = n
            ids.append(key)
        x_mm[i] = _number(cols["x_mm"][i], name, n, "x_mm")
        y_mm[i] = _number(cols["y_mm"][i], name, n, "y_mm")
        for k in grid:
            c = cells[k][i]
            if not c:
                raise _err(name, n, k, "empty cell (give an index for every element or for none)")
            grid[k].append(_integer(c, name, n, k))
        if amplitude is not None:
            a = _number(cols["amplitude"][i], name, n, "amplitude")
            if a < 0:
                raise _err(
                    name,
                    n,
                    "amplitude",
                    f"{cols['amplitude'][i].strip()!r} is negative; weights are linear and >= 0",
                )
            amplitude[i] = a
    if len(lines) < MIN_ELEMENTS:
        raise _err(
            name,
            lines[0],
            None,
            "one element only: a one-element array has no sidelobes, beam or fill to score "
            f"(a layout needs at least {MIN_ELEMENTS} elements)",
        )
    if amplitude is not None and not amplitude.any():
        raise _err(name, None, "amplitude", f"every weight is zero (lines {lines[0]}-{lines[-1]})")

    layout = Layout(
        x=mm_to_m(x_mm),
        y=mm_to_m(y_mm),
        amplitude=amplitude,
        ids=None if ids is None else np.array(ids, dtype=np.str_),
        row=np.array(grid["row"], dtype=np.int64) if "row" in grid else None,
        col=np.array(grid["col"], dtype=np.int64) if "col" in grid else None,
        source=name,
    )
    pairs = layout.duplicate_pairs(GRID_TOL)
    if pairs:
        i, j = pairs[0]
        raise _err(
            name,
            lines[j],
            "x_mm/y_mm",
            f"same position as line {lines[i]} "
            f"({x_mm[j]:g}, {y_mm[j]:g}) mm, within {GRID_TOL * 1e6:g} µm",
        )
    return layout


def _fmt_mm(value: float) -> str:
    s = f"{value:.6f}"
    if s.startswith("-") and float(s) == 0.0:
        s = s[1:]
    return s


def _fmt_value(value) -> str:
    if value is None:
        return ""
    if isinstance(value, bool | np.bool_):
        return "true" if value else "false"
    if isinstance(value, int | np.integer):
        return str(int(value))
    if isinstance(value, float | np.floating):
        v = float(value)
        return repr(0.0 if v == 0.0 else v)
    return str(value)


def write_layout_csv(
    path: str | os.PathLike,
    layout: Layout,
    *,
    extra_columns: Mapping[str, Sequence] | None = None,
) -> None:
    """Write a layout CSV file atomically (format in the module docstring).

    Columns ``id,x_mm,y_mm,row,col``, then ``amplitude`` when ``layout.amplitude`` is set,
    then the extra columns in the given order. Positions with 6 decimals in mm (1 nm),
    never ``-0.000000``; ``\\n`` line endings; elements in the layout's order. The same
    layout always gives the same bytes.

    Parameters
    ----------
    path : str or os.PathLike
    layout : Layout
    extra_columns : mapping of str to sequence, optional
        More columns, one value per element (numbers, text, or None for an empty cell).

    Raises
    ------
    LayoutError
        An extra column clashes with a standard one, or has the wrong length.
    OutputError
        The file cannot be written (nothing is left behind).
    """
    n = len(layout)
    extra = dict(extra_columns or {})
    for key, values in extra.items():
        if key.strip() in _STANDARD or not key.strip():
            raise LayoutError(f"{path}: extra column {key!r}: name is empty or a standard column")
        if len(values) != n:
            raise LayoutError(
                f"{path}: extra column {key!r}: {len(values)} values for {n} elements"
            )
    header = ["id", "x_mm", "y_mm", "row", "col"]
    if layout.amplitude is not None:
        header.append("amplitude")
    header.extend(extra)

    x_mm = m_to_mm(layout.x)
    y_mm = m_to_mm(layout.y)
    ids = layout.element_ids
    with atomic_open(path, "w", newline="") as f:
        w = csv.writer(f, lineterminator="\n")
        w.writerow(header)
        for i in range(n):
            rec = [
                ids[i],
                _fmt_mm(x_mm[i]),
                _fmt_mm(y_mm[i]),
                "" if layout.row is None else str(int(layout.row[i])),
                "" if layout.col is None else str(int(layout.col[i])),
            ]
            if layout.amplitude is not None:
                rec.append(_fmt_value(layout.amplitude[i]))
            rec.extend(_fmt_value(values[i]) for values in extra.values())
            w.writerow(rec)
