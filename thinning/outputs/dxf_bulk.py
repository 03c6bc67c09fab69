"""The element entities of a large DXF written as text, for layouts of many thousand elements.

ezdxf builds and writes every entity as a Python object (about 0.3 ms each); a layout of
131,000 elements has 393,000 of them (a CIRCLE, a POINT and a TEXT each) and would take two
minutes. :func:`write_layout_dxf <thinning.outputs.dxf.write_layout_dxf>` therefore lets ezdxf
write the document (header, tables, outline, holes, title) and, above :data:`BULK_ELEMENTS`
elements, adds the element entities to its ENTITIES section as text formatted here: the same
entities, layers and group codes ezdxf writes (DXF R2010: handle 5, owner 330 = the model
space's block record, subclass markers AcDbEntity and AcDbCircle / AcDbPoint / AcDbText), with
handles reserved from the document's handle generator so that ``$HANDSEED`` stays above them.
Coordinates are written as Python's shortest round-trip text (``repr``), so they read back
exactly, as ezdxf's do.
"""

from __future__ import annotations

import re

import numpy as np

__all__ = [
    "BULK_ELEMENTS",
    "reserve_handles",
    "element_entities",
    "chip_entities",
    "insert_entities",
]

#: Above this many elements the element entities are written as text.
BULK_ELEMENTS = 5000


def reserve_handles(doc, count: int) -> int:
    """Take ``count`` consecutive handles from the document's generator; the first one."""
    first = int(doc.entitydb.handles.next(), 16)
    doc.entitydb.handles.reset(f"{first + count:X}")
    return first


def element_entities(xy_mm, radius, ids, owner, first_handle, label_offset, label_height):
    """DXF text of a CIRCLE and a POINT per element on layer ELEMENTS and, when ``ids`` is
    given, a TEXT with its id on layer LABELS.

    Parameters
    ----------
    xy_mm : (N, 2) array  [mm]   element centres
    radius : float  [mm]
    ids : sequence of str or None
    owner : str   handle of the model space's block record
    first_handle : int   the first of the reserved handles (2 or 3 per element)
    label_offset, label_height : float  [mm]

    Returns
    -------
    str
    """
    xs = [repr(float(v)) for v in xy_mm[:, 0]]
    ys = [repr(float(v)) for v in xy_mm[:, 1]]
    r = repr(float(radius))
    head = f"330\n{owner}\n100\nAcDbEntity\n  8\n"
    per = 3 if ids is not None else 2
    parts = []
    h = first_handle
    for k in range(len(xs)):
        x, y = xs[k], ys[k]
        parts.append(
            f"  0\nCIRCLE\n  5\n{h:X}\n{head}ELEMENTS\n100\nAcDbCircle\n"
            f" 10\n{x}\n 20\n{y}\n 30\n0.0\n 40\n{r}\n"
            f"  0\nPOINT\n  5\n{h + 1:X}\n{head}ELEMENTS\n100\nAcDbPoint\n"
            f" 10\n{x}\n 20\n{y}\n 30\n0.0\n"
        )
        h += per
    if ids is not None:
        lx = xy_mm[:, 0] + label_offset
        ly = xy_mm[:, 1] + label_offset
        th = repr(float(label_height))
        h = first_handle + 2
        for k, text in enumerate(ids):
            parts.append(
                f"  0\nTEXT\n  5\n{h:X}\n{head}LABELS\n100\nAcDbText\n"
                f" 10\n{float(lx[k])!r}\n 20\n{float(ly[k])!r}\n 30\n0.0\n 40\n{th}\n"
                f"  1\n{text}\n100\nAcDbText\n"
            )
            h += per
    return "".join(parts)


def chip_entities(centres_mm, radius, element_xy_mm, element_chip, owner, first_handle):
    """DXF text of the CHIPS layer: a CIRCLE and a POINT at each chip centre, and a LINE
    from the chip centre to each of its elements.

    Parameters
    ----------
    centres_mm : (K, 2) array  [mm]   chip centres
    radius : float  [mm]   the marker circle's radius
    element_xy_mm : (N, 2) array  [mm]
    element_chip : (N,) int   1-based chip of each element
    owner : str   handle of the model space's block record
    first_handle : int   the first of 2·K + N reserved handles

    Returns
    -------
    str
    """
    head = f"330\n{owner}\n100\nAcDbEntity\n  8\nCHIPS\n"
    r = repr(float(radius))
    cx = [repr(float(v)) for v in centres_mm[:, 0]]
    cy = [repr(float(v)) for v in centres_mm[:, 1]]
    parts = []
    h = first_handle
    for x, y in zip(cx, cy, strict=True):
        parts.append(
            f"  0\nCIRCLE\n  5\n{h:X}\n{head}100\nAcDbCircle\n"
            f" 10\n{x}\n 20\n{y}\n 30\n0.0\n 40\n{r}\n"
            f"  0\nPOINT\n  5\n{h + 1:X}\n{head}100\nAcDbPoint\n"
            f" 10\n{x}\n 20\n{y}\n 30\n0.0\n"
        )
        h += 2
    for (ex, ey), c in zip(element_xy_mm, element_chip, strict=True):
        k = int(c) - 1
        parts.append(
            f"  0\nLINE\n  5\n{h:X}\n{head}100\nAcDbLine\n"
            f" 10\n{cx[k]}\n 20\n{cy[k]}\n 30\n0.0\n"
            f" 11\n{float(ex)!r}\n 21\n{float(ey)!r}\n 31\n0.0\n"
        )
        h += 1
    return "".join(parts)


_ENTITIES = re.compile(r"\n *0\nSECTION\n *2\nENTITIES\n")
_ENDSEC = re.compile(r"\n *0\nENDSEC\n")


def insert_entities(dxf_text: str, entities: str) -> str:
    """The document text with ``entities`` added at the end of its ENTITIES section."""
    start = _ENTITIES.search(dxf_text)
    if start is None:
        raise ValueError("DXF text without an ENTITIES section")
    end = _ENDSEC.search(dxf_text, start.end() - 1)
    cut = end.start() + 1  # after the line break that ends the header or the last entity
    return dxf_text[:cut] + entities + dxf_text[cut:]


def as_array(layout) -> np.ndarray:
    """Element centres (N, 2) in mm."""
    return np.column_stack([layout.x, layout.y]) * 1e3
