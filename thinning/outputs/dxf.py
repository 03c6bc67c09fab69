"""Write a layout as a DXF drawing for mechanical CAD.

The file is DXF R2010 (AC1024) in millimetres (``$INSUNITS`` = 4, ``$MEASUREMENT`` = 1), made
with ezdxf. Every kind of item sits on its own layer with its own colour, so a designer can
switch them on and off or pick the element centres alone:

========== ===== ============================================================================
Layer      Colour Content
========== ===== ============================================================================
OUTLINE    7     The panel outline, a closed LWPOLYLINE.
HOLES      1     One closed LWPOLYLINE per hole or cut-out.
CLEARANCE  3     The boundary the element centres keep clear of (outline and holes moved
                 inward by the edge clearance), dashed; only when the clearance is > 0.
ELEMENTS   5     Per element a CIRCLE of the footprint diameter and a POINT at its centre.
LABELS     8     Per element its id as TEXT, beside the circle.
TITLE      6     The title, above the drawing.
TILES      4     With a tiling: per tile its boundary rectangle (a closed LWPOLYLINE) and its
                 id as TEXT at its centre.
CHIPS      30    With chips: per chip a POINT and a small CIRCLE (a quarter of the element
                 footprint across) at its centre, and a LINE from the centre to each of its
                 elements.
========== ===== ============================================================================

Colours are AutoCAD Colour Index numbers. Coordinates are the layout's metres times 1000,
written with full float64 precision (ezdxf writes the shortest text that reads back to the same
float), so centres read back exactly.

The header's drawing extents (``$EXTMIN``, ``$EXTMAX``, and the limits ``$LIMMIN``,
``$LIMMAX``) enclose the outline, every element circle, the labels and the title (text widths
estimated generously, 0.9 × the height per character), and the active viewport is centred on
them and sized to show them all, so a CAD program opens the file zoomed to the panel.
"""

from __future__ import annotations

import io
import os
from pathlib import Path

import numpy as np

from ..io.atomic import atomic_write
from .dxf_bulk import (
    BULK_ELEMENTS,
    chip_entities,
    element_entities,
    insert_entities,
    reserve_handles,
)

__all__ = ["write_layout_dxf", "DXF_LAYERS", "TILE_LAYERS", "DXF_VERSION"]

#: DXF version written (AutoCAD R2010).
DXF_VERSION = "R2010"

#: Layer names and their AutoCAD Colour Index (ACI) colours.
DXF_LAYERS = {
    "OUTLINE": 7,
    "HOLES": 1,
    "CLEARANCE": 3,
    "ELEMENTS": 5,
    "LABELS": 8,
    "TITLE": 6,
}

#: The layers of a tiled layout (added only when there is a tiling).
TILE_LAYERS = {"TILES": 4, "CHIPS": 30}

#: ``$INSUNITS`` value for millimetres, and ``$MEASUREMENT`` value for metric.
_INSUNITS_MM = 4
_MEASUREMENT_METRIC = 1

#: Linetype of the clearance boundary.
_DASHED = "DASHED"

#: Estimated width of a character of TEXT, as a fraction of its height (generous).
_TEXT_WIDTH = 0.9

#: Width / height of the active viewport ezdxf creates.
_VIEW_ASPECT = 1.34


def _one_line(text: str) -> str:
    """Text without line breaks (a TEXT entity holds one line)."""
    return " ".join(str(text).splitlines())


def _closed_ring(msp, ring_mm: np.ndarray, layer: str, **attribs) -> None:
    """Add a ring (first point repeated at the end, as shapely gives it) as a closed LWPOLYLINE."""
    pts = np.asarray(ring_mm, dtype=np.float64)
    if len(pts) > 1 and np.array_equal(pts[0], pts[-1]):
        pts = pts[:-1]
    msp.add_lwpolyline(
        [(float(x), float(y)) for x, y in pts],
        format="xy",
        close=True,
        dxfattribs={"layer": layer, **attribs},
    )


def write_layout_dxf(
    path: str | os.PathLike,
    layout,
    aperture=None,
    *,
    footprint_mm: float | None = None,
    title: str = "",
    labels: bool = True,
    tiling=None,
) -> Path:
    """Write a layout as a DXF R2010 drawing in millimetres.

    Parameters
    ----------
    path : str or os.PathLike
        The ``.dxf`` file to write; its folder must exist. Written atomically: the file appears
        complete or not at all.
    layout : thinning.geometry.layout.Layout
        Element positions  [m]; written in mm.
    aperture : thinning.geometry.aperture.Aperture, optional
        The panel. When None (for example a layout file scored without its spec) no outline,
        holes or clearance are drawn: the OUTLINE, HOLES and CLEARANCE layers exist but are
        empty.
    footprint_mm : float, optional  [mm]
        Diameter of the element circles. Default: 0.8 × the smallest distance between two
        elements (:func:`thinning.outputs.drawing.default_footprint_mm`).
    title : str, optional
        Text on the TITLE layer, above the drawing; one TEXT per line. Default: the element
        count (:func:`thinning.outputs.drawing.layout_title` makes a fuller one).
    labels : bool
        Write each element's id on the LABELS layer, height footprint/3, to the upper right of
        its circle.
    tiling : thinning.geometry.tiles.Tiling, optional
        The layout's tiles (and chips): the TILES and CHIPS layers. Its elements are the
        layout's, in the same order.

    Returns
    -------
    pathlib.Path
        The path written.

    Raises
    ------
    OutputError
        The folder is missing or not writable, or ``path`` is a folder.
    ValueError
        ``footprint_mm`` is not a positive finite number.
    """
    import ezdxf

    from .drawing import _footprint, _rings_mm, layout_title

    path = Path(path)
    d = _footprint(layout, footprint_mm)
    r = d / 2.0
    xy = np.column_stack([layout.x, layout.y]) * 1e3

    doc = ezdxf.new(DXF_VERSION, units=_INSUNITS_MM)
    doc.header["$INSUNITS"] = _INSUNITS_MM
    doc.header["$MEASUREMENT"] = _MEASUREMENT_METRIC
    dash = max(d / 2.0, 0.5)
    doc.linetypes.add(_DASHED, pattern=[1.5 * dash, dash, -0.5 * dash], description="__ __ __")
    layers = DXF_LAYERS if tiling is None else {**DXF_LAYERS, **TILE_LAYERS}
    for name, colour in layers.items():
        attribs = {"linetype": _DASHED} if name == "CLEARANCE" else {}
        doc.layers.add(name, color=colour, **attribs)
    msp = doc.modelspace()

    lo, hi = xy.min(axis=0) - r, xy.max(axis=0) + r
    if aperture is not None:
        _closed_ring(msp, aperture.outline_mm(), "OUTLINE")
        for hole in aperture.holes_mm():
            _closed_ring(msp, hole, "HOLES")
        if aperture.edge_clearance > 0:
            for ring in _rings_mm(aperture.usable):
                _closed_ring(msp, ring, "CLEARANCE")
        xmin, ymin, xmax, ymax = (b * 1e3 for b in aperture.bounds)
        lo, hi = np.minimum(lo, [xmin, ymin]), np.maximum(hi, [xmax, ymax])

    if tiling is not None:
        lo, hi = _tiles(msp, tiling, lo, hi)
    chips = None if tiling is None else tiling.chips
    bulk = len(xy) > BULK_ELEMENTS  # the element entities written as text (dxf_bulk)
    if chips is not None and not bulk:
        _chips(msp, chips, xy, d / 8.0)
    for x, y in xy if not bulk else ():
        centre = (float(x), float(y))
        msp.add_circle(centre, r, dxfattribs={"layer": "ELEMENTS"})
        msp.add_point(centre, dxfattribs={"layer": "ELEMENTS"})

    h = d / 3.0
    off = r * np.sqrt(0.5)  # on the circle, at 45° to the upper right
    if labels and not bulk:
        for (x, y), text in zip(xy, layout.element_ids, strict=True):
            msp.add_text(
                _one_line(text),
                height=h,
                dxfattribs={"layer": "LABELS", "insert": (float(x + off), float(y + off))},
            )

    ext_lo, ext_hi = lo.copy(), hi.copy()  # the drawing's extents, text included
    if labels and len(xy):
        widest = max(len(_one_line(t)) for t in layout.element_ids)
        ext_hi = np.maximum(ext_hi, xy.max(axis=0) + off + [_TEXT_WIDTH * h * widest, h])
    span = float(max(hi - lo))
    th = max(0.02 * span, d / 2.0)
    lines = (title or layout_title(layout)).splitlines() or [""]
    for k, line in enumerate(reversed(lines)):
        msp.add_text(
            line,
            height=th,
            dxfattribs={
                "layer": "TITLE",
                "insert": (float(lo[0]), float(hi[1] + th * (1 + 1.6 * k))),
            },
        )
        ext_hi[0] = max(ext_hi[0], lo[0] + _TEXT_WIDTH * th * len(line))

    ext_hi[1] = max(ext_hi[1], hi[1] + th * (1.6 * (len(lines) - 1) + 2))
    # ezdxf copies the model space's extents and limits into the header when it writes,
    # unless they are all zero (a false vector): set both
    extents = {
        "extmin": (float(ext_lo[0]), float(ext_lo[1]), 0.0),
        "extmax": (float(ext_hi[0]), float(ext_hi[1]), 0.0),
        "limmin": (float(ext_lo[0]), float(ext_lo[1])),
        "limmax": (float(ext_hi[0]), float(ext_hi[1])),
    }
    for key, value in extents.items():
        msp.dxf.set(key, value)
        doc.header[f"${key.upper()}"] = value
    width, height = (float(v) for v in ext_hi - ext_lo)
    centre = ((ext_lo[0] + ext_hi[0]) / 2.0, (ext_lo[1] + ext_hi[1]) / 2.0)
    doc.set_modelspace_vport(height=1.05 * max(height, width / _VIEW_ASPECT), center=centre)

    if bulk:
        first = reserve_handles(doc, len(xy) * (3 if labels else 2))
        ids = [_one_line(t) for t in layout.element_ids] if labels else None
        entities = element_entities(
            xy, r, ids, msp.block_record_handle, first, r * np.sqrt(0.5), d / 3.0
        )
        if chips is not None:
            first = reserve_handles(doc, 2 * chips.n_chips + len(xy))
            entities += chip_entities(
                chips.centre * 1e3, d / 8.0, xy, chips.chip, msp.block_record_handle, first
            )
    stream = io.StringIO()
    doc.write(stream)
    text = stream.getvalue()
    if bulk:
        text = insert_entities(text, entities)
    atomic_write(path, doc.encode(text))
    return path


def _tiles(msp, tiling, lo, hi):
    """The TILES layer: each tile's rectangle and its id at the centre; the extents grown to
    hold the rectangles."""
    from ezdxf.enums import TextEntityAlignment

    grid = tiling.grid
    for t in range(grid.n_tiles):
        box = grid.corners(t) * 1e3
        _closed_ring(msp, box, "TILES")
        w, h = np.ptp(box, axis=0)
        msp.add_text(
            str(t + 1), height=float(0.12 * min(w, h)), dxfattribs={"layer": "TILES"}
        ).set_placement(
            tuple(float(v) for v in box.mean(axis=0)), align=TextEntityAlignment.MIDDLE_CENTER
        )
        lo, hi = np.minimum(lo, box.min(axis=0)), np.maximum(hi, box.max(axis=0))
    return lo, hi


def _chips(msp, chips, xy, radius):
    """The CHIPS layer: a POINT and a CIRCLE at each chip centre, a LINE to each element."""
    centres = chips.centre * 1e3
    for x, y in centres:
        c = (float(x), float(y))
        msp.add_circle(c, radius, dxfattribs={"layer": "CHIPS"})
        msp.add_point(c, dxfattribs={"layer": "CHIPS"})
    for (x, y), k in zip(xy, chips.chip, strict=True):
        cx, cy = centres[int(k) - 1]
        msp.add_line((float(cx), float(cy)), (float(x), float(y)), dxfattribs={"layer": "CHIPS"})
