"""The panel outline and its holes, read from the mechanical drawing (DXF).

The mechanical designers draw the panel; the outline sits on one layer and the mounting holes
and cut-outs on another. :func:`read_panel_dxf` turns those two layers into the rings that
:meth:`Aperture.from_mm <thinning.geometry.aperture.Aperture.from_mm>` takes, in millimetres:

- closed LWPOLYLINE and 2-D POLYLINE (bulges honoured), CIRCLE, full ELLIPSE and closed SPLINE
  are rings of their own;
- LINE, ARC, open polylines and open ELLIPSE/SPLINE pieces are joined end to end into rings
  where their ends meet within ``tolerance_mm``; an end with no partner (an open chain) or with
  two (a branch) is refused;
- arcs (ARC, CIRCLE, bulges) are flattened with their vertices on the true circle and a chord
  error (sagitta) of at most :data:`SAGITTA_MM`; a full circle has a multiple of four vertices
  starting at 0°, so its four quadrant points are exact. ELLIPSE and SPLINE use ezdxf's own
  flattening to the same distance;
- the drawing's ``$INSUNITS`` says the unit: millimetres are read as they are, a unitless
  drawing is taken as millimetres (with a note), inches, feet, centimetres, metres and the
  other lengths of :data:`UNIT_TO_MM` are converted (with a note), any other code is refused.

One closed outline is expected; several, none, a self-intersecting ring, a hole outside or
across the outline and overlapping holes are refused with the file, the layer and the entity
(type and handle) named. Text, dimensions, points and hatches on the two layers are skipped
with a note; any other entity (a block reference, a 3-D polyline, a mesh) is refused by name.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from ..errors import GeometryError, SpecError, where
from .aperture import _reason

__all__ = [
    "PanelDrawing",
    "read_panel_dxf",
    "panel_from_spec_table",
    "SAGITTA_MM",
    "UNIT_TO_MM",
]

#: Largest distance between a flattened arc's chord and the true arc  [mm] (1 µm): a site
#: centre decides differently only within 1 µm of a curved edge, far inside any machining
#: tolerance, while a 250 mm radius still needs only about 1,100 vertices (the cost of the
#: site test grows with the number of boundary vertices).
SAGITTA_MM = 1e-3

#: Consecutive points closer than this are one point  [mm] (a repeated vertex, a closing
#: vertex drawn twice); far below any gap the joining tolerance closes.
_SAME_MM = 1e-9

#: $INSUNITS codes read, with their length in millimetres (AutoCAD's code table; 4 = mm).
UNIT_TO_MM = {
    1: ("inches", 25.4),
    2: ("feet", 304.8),
    4: ("millimetres", 1.0),
    5: ("centimetres", 10.0),
    6: ("metres", 1000.0),
    8: ("microinches", 25.4e-6),
    9: ("mils", 0.0254),
    10: ("yards", 914.4),
    13: ("micrometres", 1e-3),
    14: ("decimetres", 100.0),
}

#: Entities that annotate a drawing rather than shape the panel: skipped with a note.
_ANNOTATIONS = frozenset(
    {
        "TEXT",
        "MTEXT",
        "DIMENSION",
        "ARC_DIMENSION",
        "LEADER",
        "MULTILEADER",
        "POINT",
        "HATCH",
    }
)


@dataclass(frozen=True)
class PanelDrawing:
    """The panel as read from a drawing.

    Parameters
    ----------
    outline_mm : list of [x, y]  [mm]
        The outline, counter-clockwise, without the closing point repeated.
    holes_mm : list of lists of [x, y]  [mm]
        The holes, each clockwise, without the closing point repeated.
    notes : list of str
        What the reader assumed or converted (units, skipped annotations, gaps closed).
    """

    outline_mm: list
    holes_mm: list
    notes: list = field(default_factory=list)


@dataclass
class _Piece:
    """Part of a ring: its points [mm] in drawing order and the entity that drew it."""

    label: str
    points: np.ndarray
    closed: bool


def _label(entity) -> str:
    return f"{entity.dxftype()} #{entity.dxf.handle}"


def _xy(v) -> tuple[float, float]:
    return float(v[0]), float(v[1])


def _names(labels: list[str], most: int = 4) -> str:
    if len(labels) <= most:
        return ", ".join(labels)
    return f"{', '.join(labels[:most])} and {len(labels) - most} more"


def _arc_points(centre, radius, a0, sweep, sagitta, full=False) -> np.ndarray:
    """Points on a circular arc from angle ``a0`` through ``sweep`` (radians, signed), both
    ends included, spaced so the chord stays within ``sagitta`` of the arc.

    The largest chord error of a step Δ on radius r is r·(1 − cos(Δ/2)); the step is the
    largest that keeps it at or below ``sagitta`` (a full circle rounds the count up to a
    multiple of four so that the quadrant points are vertices)."""
    ratio = min(max(1.0 - sagitta / radius, -1.0), 1.0) if radius > 0 else -1.0
    step = 2.0 * math.acos(ratio)
    n = max(1, math.ceil(abs(sweep) / step - 1e-12)) if step > 0 else 1 << 16
    if full:
        n = max(8, 4 * math.ceil(n / 4))
    t = a0 + sweep * np.arange(n + 1) / n
    return np.column_stack([centre[0] + radius * np.cos(t), centre[1] + radius * np.sin(t)])


def _bulge_points(p0, p1, bulge, sagitta) -> np.ndarray:
    """The arc a polyline bulge draws from ``p0`` to ``p1``, ends exact.

    bulge = tan(θ/4), θ the included angle, positive counter-clockwise (DXF reference,
    LWPOLYLINE group code 42); the centre lies (c/2)/tan(θ/2) from the chord's midpoint along
    its left normal, c the chord length."""
    p0 = np.asarray(p0, dtype=float)
    p1 = np.asarray(p1, dtype=float)
    chord = p1 - p0
    c = math.hypot(*chord)
    if bulge == 0 or c == 0:
        return np.array([p0, p1])
    theta = 4.0 * math.atan(bulge)
    normal = np.array([-chord[1], chord[0]]) / c
    centre = (p0 + p1) / 2 + normal * (c / 2) / math.tan(theta / 2)
    radius = math.hypot(*(p0 - centre))
    a0 = math.atan2(p0[1] - centre[1], p0[0] - centre[0])
    pts = _arc_points(centre, radius, a0, theta, sagitta)
    pts[0], pts[-1] = p0, p1
    return pts


def _polyline_points(vertices, closed, sagitta) -> np.ndarray:
    """(x, y, bulge) vertices → points with every bulge flattened (closing segment included
    when ``closed``)."""
    out = []
    n = len(vertices)
    for i in range(n if closed else n - 1):
        x0, y0, b = vertices[i]
        x1, y1, _ = vertices[(i + 1) % n]
        seg = _bulge_points((x0, y0), (x1, y1), b, sagitta)
        out.append(seg[:-1])
    if not closed:
        out.append(np.array([vertices[-1][:2]], dtype=float))
    return np.concatenate(out) if out else np.empty((0, 2))


def _in_plane(entity, src, layer) -> None:
    """Refuse an entity drawn outside the XY plane (its extrusion not along ±z)."""
    ext = entity.dxf.get("extrusion", (0.0, 0.0, 1.0))
    if abs(abs(float(ext[2])) - 1.0) > 1e-9:
        raise GeometryError(
            f"{where(src, layer)}{_label(entity)}: drawn outside the XY plane (extrusion "
            f"{tuple(round(float(v), 6) for v in ext)}); a panel outline must be 2-D"
        )


def _to_wcs(entity, pts: np.ndarray) -> np.ndarray:
    """Object coordinates → world XY (a mirrored entity has extrusion (0, 0, −1): x flips)."""
    ext = entity.dxf.get("extrusion", (0.0, 0.0, 1.0))
    if float(ext[2]) < 0:
        pts = pts * np.array([-1.0, 1.0])
    return pts


def _entity_piece(entity, scale, src, layer) -> _Piece:
    """One entity as a piece of a ring, in millimetres."""
    kind = entity.dxftype()
    label = _label(entity)
    sag = SAGITTA_MM / scale  # in drawing units
    if kind == "LINE":
        pts = np.array([_xy(entity.dxf.start), _xy(entity.dxf.end)])
        return _Piece(label, pts * scale, False)
    if kind in ("CIRCLE", "ARC"):
        _in_plane(entity, src, layer)
        centre = np.array(_xy(entity.dxf.center))
        r = float(entity.dxf.radius)
        if not r > 0:
            raise GeometryError(f"{where(src, layer)}{label}: radius {r:g}: encloses no area")
        if kind == "CIRCLE":
            pts = _arc_points(centre, r, 0.0, 2 * math.pi, sag, full=True)[:-1]
            return _Piece(label, _to_wcs(entity, pts) * scale, True)
        a0 = math.radians(entity.dxf.start_angle)
        sweep = math.radians((entity.dxf.end_angle - entity.dxf.start_angle) % 360.0)
        if sweep == 0:  # equal start and end angles: the whole circle
            pts = _arc_points(centre, r, a0, 2 * math.pi, sag, full=True)[:-1]
            return _Piece(label, _to_wcs(entity, pts) * scale, True)
        pts = _arc_points(centre, r, a0, sweep, sag)
        return _Piece(label, _to_wcs(entity, pts) * scale, False)
    if kind == "LWPOLYLINE":
        _in_plane(entity, src, layer)
        verts = [tuple(map(float, v)) for v in entity.get_points("xyb")]
        closed = bool(entity.closed)
    elif kind == "POLYLINE":
        if not entity.is_2d_polyline:
            what = "mesh" if entity.is_polygon_mesh or entity.is_poly_face_mesh else "3-D"
            raise GeometryError(
                f"{where(src, layer)}{label}: a {what} polyline; draw the outline as a 2-D polyline"
            )
        _in_plane(entity, src, layer)
        verts = [
            (float(v.dxf.location[0]), float(v.dxf.location[1]), float(v.dxf.get("bulge", 0)))
            for v in entity.vertices
        ]
        closed = bool(entity.is_closed)
    elif kind in ("ELLIPSE", "SPLINE"):
        _in_plane(entity, src, layer)
        pts = np.array([(p.x, p.y) for p in entity.flattening(sag)], dtype=float)
        if kind == "ELLIPSE":
            span = (entity.dxf.end_param - entity.dxf.start_param) % (2 * math.pi)
            closed = math.isclose(span, 0.0, abs_tol=1e-12)
        else:
            closed = bool(entity.closed)
        if closed and len(pts) > 1 and np.allclose(pts[0], pts[-1]):
            pts = pts[:-1]
        return _Piece(label, pts * scale, closed)
    else:
        raise GeometryError(
            f"{where(src, layer)}{label}: {kind} entities are not read as panel geometry (read: "
            "LWPOLYLINE, POLYLINE, LINE, ARC, CIRCLE, ELLIPSE, SPLINE; explode blocks and "
            "regions in the drawing)"
        )
    if len(verts) < 2:
        raise GeometryError(f"{where(src, layer)}{label}: {len(verts)} vertex: draws nothing")
    pts = _polyline_points(verts, closed, sag)
    return _Piece(label, _to_wcs(entity, pts) * scale, closed)


def _join(pieces: list[_Piece], tol: float, src, layer, notes) -> list[tuple[str, np.ndarray]]:
    """Join open pieces into closed rings; return (entities, ring) for every ring."""
    from scipy.spatial import cKDTree

    rings = [(p.label, p.points) for p in pieces if p.closed]
    open_, dots = [], []
    for p in pieces:
        if not p.closed:
            short = np.hypot(*(p.points - p.points[0]).T).max() <= tol
            (dots if short else open_).append(p)
    if dots:  # a zero-length line or arc: a drawing artefact, not part of the outline
        notes.append(
            f"{layer}: skipped {_names([p.label for p in dots])} (shorter than {tol:g} mm)"
        )
    if not open_:
        return rings
    ends = np.concatenate([[p.points[0], p.points[-1]] for p in open_])
    partner = [[] for _ in ends]
    for a, b in cKDTree(ends).query_pairs(tol):
        partner[a].append(b)
        partner[b].append(a)
    for e, mates in enumerate(partner):
        label = open_[e // 2].label
        x, y = ends[e]
        if not mates:
            raise GeometryError(
                f"{where(src, layer)}{label}: open chain, end ({x:.3f}, {y:.3f}) mm has no "
                f"partner within {tol:g} mm"
            )
        if len(mates) > 1:
            others = _names([open_[m // 2].label for m in mates])
            raise GeometryError(
                f"{where(src, layer)}{label}: branch, end ({x:.3f}, {y:.3f}) mm meets "
                f"{len(mates)} other ends within {tol:g} mm ({others})"
            )
    gap = 0.0
    done = np.zeros(len(open_), dtype=bool)
    for first in range(len(open_)):
        if done[first]:
            continue
        labels, parts = [], []
        piece, forward = first, True
        while not done[piece]:
            done[piece] = True
            pts = open_[piece].points if forward else open_[piece].points[::-1]
            labels.append(open_[piece].label)
            parts.append(pts[:-1])  # the next piece starts where this one ends
            out_end = 2 * piece + (1 if forward else 0)
            nxt = partner[out_end][0]
            gap = max(gap, math.dist(ends[out_end], ends[nxt]))
            piece, forward = nxt // 2, nxt % 2 == 0
        rings.append((f"chain {_names(labels)}", np.concatenate(parts)))
    if gap > 1e-6:
        notes.append(f"{layer}: ends joined across gaps of up to {gap:.6f} mm")
    return rings


def _clean(label, ring: np.ndarray, src, layer) -> np.ndarray:
    """Drop repeated points (closer than :data:`_SAME_MM`) and check the ring is a simple
    closed curve."""
    from shapely.geometry import LinearRing

    step = np.hypot(*np.diff(ring, axis=0).T)
    ring = ring[np.concatenate([[True], step > _SAME_MM])]
    while len(ring) > 1 and math.dist(ring[0], ring[-1]) <= _SAME_MM:
        ring = ring[:-1]
    if len(ring) < 3:
        raise GeometryError(f"{where(src, layer)}{label}: encloses no area")
    lr = LinearRing(ring)
    if not lr.is_valid:
        raise GeometryError(f"{where(src, layer)}{label}: {_reason(lr)}")
    return ring


def _layer_rings(doc, layer, scale, tol, src, notes):
    """(entities, ring) of every ring on a layer (layer names compared case-insensitively)."""
    want = layer.casefold()
    field_ = f"layer {layer}"
    pieces, skipped = [], {}
    for entity in doc.modelspace():
        if entity.dxf.get("layer", "0").casefold() != want:
            continue
        kind = entity.dxftype()
        if kind in _ANNOTATIONS:
            skipped[kind] = skipped.get(kind, 0) + 1
            continue
        pieces.append(_entity_piece(entity, scale, src, field_))
    if skipped:
        what = ", ".join(f"{n} {k}" for k, n in sorted(skipped.items()))
        notes.append(f"{field_}: skipped {what} (annotation, not panel geometry)")
    rings = _join(pieces, tol, src, field_, notes)
    return [(label, _clean(label, ring, src, field_)) for label, ring in rings]


def _oriented(ring: np.ndarray, ccw: bool) -> list:
    x, y = ring[:, 0], ring[:, 1]
    area2 = float(np.dot(x, np.roll(y, -1)) - np.dot(np.roll(x, -1), y))
    if (area2 > 0) != ccw:
        ring = ring[::-1]
    return ring.tolist()


def _check_holes(outline, holes, src, layer_o, layer_h) -> None:
    """Each hole inside the outline, none across it, no two overlapping; entities named."""
    import shapely
    from shapely.geometry import Polygon

    o_label, o_ring = outline
    shell = Polygon(o_ring)
    polys = [Polygon(r) for _, r in holes]
    for (label, ring), hole in zip(holes, polys, strict=True):
        head = f"{where(src, layer_h)}{label}: "
        if hole.contains(shell):
            raise GeometryError(
                f"{head}the hole encloses the whole outline ({o_label} on layer {layer_o}); "
                "are the layers swapped?"
            )
        if not shell.intersects(hole) or shell.touches(hole):
            x, y = ring[0]
            raise GeometryError(
                f"{head}the hole lies outside the outline ({o_label} on layer {layer_o}); "
                f"its point ({x:.3f}, {y:.3f}) mm"
            )
        if not shell.contains(hole):
            at = shapely.get_coordinates(shell.boundary.intersection(hole.boundary))
            x, y = at[0] if len(at) else ring[0]
            raise GeometryError(
                f"{head}the hole crosses the outline ({o_label} on layer {layer_o}) at "
                f"({x:.3f}, {y:.3f}) mm; a cut-out that reaches the edge belongs to the outline"
            )
        one = Polygon(o_ring, [ring])
        if not one.is_valid:
            raise GeometryError(f"{head}the hole touches the outline ({o_label}): {_reason(one)}")
    if len(polys) < 2:
        return
    panel = Polygon(o_ring, [r for _, r in holes])
    tree = shapely.STRtree(polys)
    for i, j in zip(*tree.query(polys, predicate="intersects"), strict=True):
        if i >= j:
            continue
        pair = Polygon(o_ring, [holes[i][1], holes[j][1]])
        if not pair.is_valid:
            raise GeometryError(
                f"{where(src, layer_h)}{holes[i][0]} and {holes[j][0]}: the holes overlap: "
                f"{_reason(pair)}"
            )
    if not panel.is_valid:  # holes touching in a closed loop cut the panel in two
        raise GeometryError(f"{where(src, layer_h)}the holes split the panel: {_reason(panel)}")


def _units(doc, src) -> tuple[float, str | None]:
    """(millimetres per drawing unit, note) from $INSUNITS."""
    code = doc.header.get("$INSUNITS", 0)
    try:
        code = int(code)
    except (TypeError, ValueError):
        raise GeometryError(f"{where(src, '$INSUNITS')}{code!r} is not a unit code") from None
    if code == 0:
        return 1.0, "the drawing has no units ($INSUNITS = 0): read as millimetres"
    if code in UNIT_TO_MM:
        name, factor = UNIT_TO_MM[code]
        if factor == 1.0:
            return 1.0, None
        return factor, f"converted from {name} to mm ($INSUNITS = {code}, 1 unit = {factor:g} mm)"
    from ezdxf.units import unit_name

    raise GeometryError(
        f"{where(src, '$INSUNITS')}{code} ({unit_name(code)}): not a unit a panel drawing is "
        "read in; save the drawing in millimetres"
    )


def read_panel_dxf(
    path,
    outline_layer: str = "OUTLINE",
    holes_layer: str = "HOLES",
    source: str | None = None,
    tolerance_mm: float = 1e-3,
) -> PanelDrawing:
    """Read a panel's outline and holes from a DXF drawing.

    Parameters
    ----------
    path : str or Path
        The drawing.
    outline_layer, holes_layer : str
        The layers of the outline (exactly one closed ring) and of the holes (any number,
        possibly none or no layer at all); compared case-insensitively.
    source : str, optional
        How to name the drawing in messages (default: ``path`` as given).
    tolerance_mm : float  [mm]
        Ends of lines, arcs and open polylines closer than this are joined.

    Returns
    -------
    PanelDrawing
        Outline counter-clockwise and holes clockwise, in millimetres, without the closing
        point repeated; ready for :meth:`Aperture.from_mm`.

    Raises
    ------
    GeometryError
        One line naming the file, the layer and the entity: a missing or unreadable file, an
        unknown unit, an open chain or a branch, no outline or several, a self-intersecting
        ring, a hole outside, across or touching the outline, overlapping holes, an entity
        that cannot be read as panel geometry.
    """
    import ezdxf

    src = str(path) if source is None else source
    try:
        tol = float(tolerance_mm)
    except (TypeError, ValueError):
        tol = float("nan")
    if not (math.isfinite(tol) and tol > 0):
        raise GeometryError(f"{where(src, 'tolerance_mm')}{tolerance_mm!r}: must be > 0 mm")
    p = Path(path)
    if not p.is_file():
        what = "is a directory, not a drawing" if p.is_dir() else "no such file"
        raise GeometryError(f"{src}: {what}")
    try:
        doc = ezdxf.readfile(p)
    except OSError as exc:
        if exc.errno is not None:
            raise GeometryError(f"{src}: cannot read: {exc.strerror}") from None
        reason = " ".join(str(exc).split()).replace(f"'{p}' ", "")  # ezdxf: not a DXF file
        raise GeometryError(f"{src}: not a readable DXF drawing: {reason:.120}") from None
    except (ezdxf.DXFError, ValueError, UnicodeError, IndexError, KeyError) as exc:
        reason = " ".join(str(exc).split()) or type(exc).__name__
        raise GeometryError(f"{src}: not a readable DXF drawing: {reason:.120}") from None
    scale, note = _units(doc, src)
    notes = [note] if note else []
    layer_o = _layer_name(doc, outline_layer, src)
    layer_h = _layer_name(doc, holes_layer, src)
    if layer_o.casefold() == layer_h.casefold():
        raise GeometryError(
            f"{where(src, f'layer {layer_o}')}the outline and the holes need layers of their own"
        )
    outlines = _layer_rings(doc, layer_o, scale, tol, src, notes)
    if not outlines:
        there = "is empty" if doc.layers.has_entry(layer_o) else "is not in the drawing"
        raise GeometryError(
            f"{where(src, f'layer {layer_o}')}the outline layer {there} (no closed outline)"
        )
    if len(outlines) > 1:
        raise GeometryError(
            f"{where(src, f'layer {layer_o}')}{len(outlines)} closed outlines "
            f"({_names([label for label, _ in outlines])}); one outline expected (holes go on "
            f"layer {layer_h})"
        )
    holes = _layer_rings(doc, layer_h, scale, tol, src, notes)
    _check_holes(outlines[0], holes, src, layer_o, f"layer {layer_h}")
    return PanelDrawing(
        outline_mm=_oriented(outlines[0][1], ccw=True),
        holes_mm=[_oriented(r, ccw=False) for _, r in holes],
        notes=notes,
    )


def _layer_name(doc, name: str, src) -> str:
    """The layer's name as the drawing spells it (or as asked, when the layer is absent)."""
    if not isinstance(name, str) or not name:
        raise GeometryError(f"{where(src, f'layer {name!r}')}expected a layer name")
    for layer in doc.layers:
        if layer.dxf.name.casefold() == name.casefold():
            return layer.dxf.name
    return name


def panel_from_spec_table(aperture_table: dict, spec_dir: Path, source: str) -> PanelDrawing | None:
    """The spec's ``[aperture] dxf`` key: read the drawing it names, or None without it.

    Parameters
    ----------
    aperture_table : dict
        The spec's ``[aperture]`` table: ``dxf`` (a path, relative to ``spec_dir``),
        ``dxf_outline_layer`` (default "OUTLINE") and ``dxf_holes_layer`` (default "HOLES");
        ``outline_mm`` and ``holes_mm`` must then not be given.
    spec_dir : Path
        The folder of the spec file.
    source : str
        The spec file's name, for messages about its keys.

    Raises
    ------
    SpecError
        ``dxf`` given with ``outline_mm`` or ``holes_mm``, a key of the wrong type, or a
        drawing that is not there.
    GeometryError
        From :func:`read_panel_dxf`, naming the drawing, the layer and the entity.
    """
    table = aperture_table or {}
    if "dxf" not in table:
        for key in ("dxf_outline_layer", "dxf_holes_layer"):
            if key in table:
                raise SpecError(f"{where(source, f'aperture.{key}')}given without aperture.dxf")
        return None
    both = [k for k in ("outline_mm", "holes_mm") if k in table]
    if both:
        raise SpecError(
            f"{where(source, 'aperture.dxf')}the panel comes from the drawing; remove "
            f"aperture.{' and aperture.'.join(both)} (or remove aperture.dxf)"
        )
    value = table["dxf"]
    if not isinstance(value, str) or not value.strip():
        raise SpecError(f"{where(source, 'aperture.dxf')}{value!r}: expected a DXF file name")
    layers = {}
    for key, default in (("dxf_outline_layer", "OUTLINE"), ("dxf_holes_layer", "HOLES")):
        name = table.get(key, default)
        if not isinstance(name, str) or not name.strip():
            raise SpecError(f"{where(source, f'aperture.{key}')}{name!r}: expected a layer name")
        layers[key] = name.strip()
    path = Path(value)
    if not path.is_absolute():
        path = Path(spec_dir) / path
    if not path.is_file():
        what = "is a directory, not a drawing" if path.is_dir() else "no such file"
        raise SpecError(f"{where(source, 'aperture.dxf')}{path}: {what}")
    return read_panel_dxf(
        path,
        outline_layer=layers["dxf_outline_layer"],
        holes_layer=layers["dxf_holes_layer"],
        source=str(path),
    )
