"""The panel: an outline polygon with holes, and the edge clearance that keeps sites inside it.

The aperture is built from millimetre coordinates (as a spec file gives them), checked with
shapely, and kept in metres. A lattice site counts as usable when its centre lies inside the
outline, outside every hole, and at least ``edge_clearance`` away from every edge (outline and
holes alike).
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np
import shapely
from shapely import affinity
from shapely.geometry import LinearRing, Polygon

from ..errors import GeometryError, SpecError, where

__all__ = ["Aperture", "BOUNDARY_TOLERANCE", "check_holes_inside"]

#: Distance within which a site centre counts as lying on an edge [m] (1 nm). Coordinates
#: converted from millimetres carry rounding of about 1e-19 m; this absorbs it.
BOUNDARY_TOLERANCE = 1e-9


def _ring_mm(points, source: str | None, field: str) -> np.ndarray:
    """Check one ring of [x, y] millimetre pairs and return it as an (n, 2) array."""
    try:
        arr = np.asarray(points, dtype=float)
    except (TypeError, ValueError):
        shown = " ".join(repr(points).split())  # one line, even for a numpy array
        raise GeometryError(
            f"{where(source, field)}expected a list of [x, y] pairs in mm, got {shown:.80}"
        ) from None
    if arr.ndim != 2 or arr.shape[1] != 2:
        raise GeometryError(
            f"{where(source, field)}expected a list of [x, y] pairs in mm, got shape {arr.shape}"
        )
    bad = ~np.isfinite(arr)
    if bad.any():
        i = int(np.argwhere(bad)[0][0])
        shown = " ".join(repr(arr[i].tolist()).split())
        raise GeometryError(f"{where(source, field)}point {i} is {shown}: not a finite number")
    if len(arr) > 1 and np.allclose(arr[0], arr[-1]):
        arr = arr[:-1]  # a closed ring given with its first point repeated
    if len(np.unique(arr, axis=0)) < 3:
        raise GeometryError(
            f"{where(source, field)}needs at least 3 distinct points to enclose an area, "
            f"got {len(arr)}"
        )
    return arr


def _reason(geom) -> str:
    """shapely's explanation of why a geometry is invalid, with the location in mm."""
    reason = shapely.is_valid_reason(geom)
    if "[" in reason:  # "Self-intersection[12.5 40]"
        what, _, at = reason.partition("[")
        return f"{what.strip().lower()} at ({at.rstrip(']').replace(' ', ', ')}) mm"
    return reason.lower()


@dataclass(frozen=True, eq=False)
class Aperture:
    """A panel outline with optional holes, in metres.

    Parameters
    ----------
    polygon : shapely.Polygon  [m]
        The outline with its holes as interior rings.
    edge_clearance : float  [m]
        Minimum distance from a site centre to any edge (outline or hole).
    """

    polygon: Polygon
    edge_clearance: float = 0.0

    @classmethod
    def from_mm(
        cls,
        outline_mm: Sequence[Sequence[float]],
        holes_mm: Sequence[Sequence[Sequence[float]]] = (),
        edge_clearance_mm: float = 0.0,
        source: str | None = None,
    ) -> Aperture:
        """Build and validate an aperture from millimetre coordinates.

        Parameters
        ----------
        outline_mm : list of [x, y]  [mm]
        holes_mm : list of lists of [x, y]  [mm]
            Mounting holes and cut-outs; each must lie inside the outline.
        edge_clearance_mm : float  [mm]
        source : str, optional
            Name of the file the values came from, for error messages.

        Raises
        ------
        GeometryError
            With shapely's reason and the location, for a self-intersecting outline, a hole
            outside the outline, overlapping holes, too few points or a non-finite number.
        """
        shell = _ring_mm(outline_mm, source, "aperture.outline_mm")
        holes = [
            _ring_mm(h, source, f"aperture.holes_mm[{i}]") for i, h in enumerate(holes_mm or ())
        ]
        try:
            clearance = float(edge_clearance_mm)
        except (TypeError, ValueError):
            field = "aperture.edge_clearance_mm"
            raise GeometryError(
                f"{where(source, field)}{edge_clearance_mm!r} is not a number"
            ) from None
        if not math.isfinite(clearance) or clearance < 0:
            raise GeometryError(
                f"{where(source, 'aperture.edge_clearance_mm')}{edge_clearance_mm!r}: "
                "must be a finite distance >= 0 mm"
            )
        ring = LinearRing(shell)
        if not ring.is_valid:
            raise GeometryError(
                f"{where(source, 'aperture.outline_mm')}invalid outline: {_reason(ring)}"
            )
        for i, h in enumerate(holes):
            hr = LinearRing(h)
            if not hr.is_valid:
                raise GeometryError(
                    f"{where(source, f'aperture.holes_mm[{i}]')}invalid hole: {_reason(hr)}"
                )
        for i, h in enumerate(holes):  # name the hole at fault where one alone is
            one = Polygon(shell, [h])
            if not one.is_valid:
                raise GeometryError(
                    f"{where(source, f'aperture.holes_mm[{i}]')}invalid hole: {_reason(one)}"
                )
        poly_mm = Polygon(shell, holes)
        if not poly_mm.is_valid:
            field = "aperture.holes_mm" if holes else "aperture.outline_mm"
            raise GeometryError(f"{where(source, field)}invalid aperture: {_reason(poly_mm)}")
        if poly_mm.area <= 0:
            raise GeometryError(f"{where(source, 'aperture.outline_mm')}the outline has no area")
        poly = affinity.scale(poly_mm, xfact=1e-3, yfact=1e-3, origin=(0.0, 0.0))
        return cls(polygon=poly, edge_clearance=clearance * 1e-3)

    @property
    def bounds(self) -> tuple[float, float, float, float]:
        """(xmin, ymin, xmax, ymax) of the outline  [m]."""
        return tuple(self.polygon.bounds)

    @property
    def area(self) -> float:
        """Area of the outline less its holes  [m²]."""
        return float(self.polygon.area)

    @property
    def usable(self):
        """The region where site centres may lie (outline shrunk by the clearance)  [m].

        A (Multi)Polygon, possibly empty; used for drawings. Site tests use
        :meth:`contains_sites`, which measures distances exactly rather than through a
        buffered polygon.
        """
        if self.edge_clearance <= 0:
            return self.polygon
        return self.polygon.buffer(-self.edge_clearance, quad_segs=32)

    def contains_sites(self, x, y) -> np.ndarray:
        """Which points may hold an element.

        Parameters
        ----------
        x, y : array_like  [m]

        Returns
        -------
        numpy.ndarray of bool
            True where the point lies inside the outline, outside every hole, and at least
            ``edge_clearance`` from every edge (within :data:`BOUNDARY_TOLERANCE`). With zero
            clearance a point on an edge counts.
        """
        x = np.asarray(x, dtype=float)
        y = np.asarray(y, dtype=float)
        if x.size == 0:
            return np.zeros(x.shape, dtype=bool)
        shapely.prepare(self.polygon)
        inside = shapely.intersects_xy(self.polygon, x, y)
        dist = shapely.distance(self.polygon.boundary, shapely.points(x, y))
        tol = BOUNDARY_TOLERANCE
        if self.edge_clearance <= tol:
            return inside | (dist <= tol)
        return inside & (dist >= self.edge_clearance - tol)

    def outline_mm(self) -> np.ndarray:
        """Exterior ring as an (n, 2) array  [mm] (closed: first point repeated)."""
        return np.asarray(self.polygon.exterior.coords) * 1e3

    def holes_mm(self) -> list[np.ndarray]:
        """Interior rings as (n, 2) arrays  [mm] (closed)."""
        return [np.asarray(r.coords) * 1e3 for r in self.polygon.interiors]


_POINTS = ("Point", "MultiPoint")  # a hole may touch the outline at single points


def check_holes_inside(outline, holes, src) -> None:
    """A hole must lie inside the outline: one that crosses it (a notch cut from the edge) or
    lies outside it is named as such, with a point where it does (shapely's own reason for the
    combined polygon, "self-intersection", does not say which ring is at fault)."""
    try:
        shell = Polygon(np.asarray(outline, dtype=float))
        rings = [np.asarray(h, dtype=float) for h in holes]
    except (TypeError, ValueError):
        return  # the aperture's own checks name the malformed value
    if not shell.is_valid or any(r.ndim != 2 or r.shape[1:] != (2,) or len(r) < 3 for r in rings):
        return
    for i, ring in enumerate(rings):
        hole = Polygon(ring)
        if not hole.is_valid:
            continue
        key = f"aperture.holes_mm[{i}]"
        meet = shell.boundary.intersection(LinearRing(ring))
        if not meet.is_empty and (not shell.contains(hole) or meet.geom_type not in _POINTS):
            at = shapely.get_coordinates(meet)[0]
            word = "touches" if shell.contains(hole) else "crosses"
            raise SpecError(
                f"{where(src, key)}the hole {word} the outline at ({at[0]:g}, {at[1]:g}) mm; "
                "a cut-out that reaches the edge is part of the outline (draw it into "
                "aperture.outline_mm)"
            )
        if not shell.intersects(hole):
            x, y = ring[0]
            raise SpecError(
                f"{where(src, key)}the hole lies outside the outline (its point ({x:g}, {y:g}) mm)"
            )
