"""The layout as inline SVG for the HTML report: vector, zoomable, element ids on demand.

The drawing is written by hand (no matplotlib) in millimetres: one SVG user unit is one
millimetre, y up as in the layout (drawn with y negated, since SVG's y points down). It shows
the panel outline, the holes, the clearance boundary (dashed), the empty candidate sites, every
element as a circle of its footprint with its id and position as a tooltip (``<title>``), the
element ids as text (hidden until the reader asks for them), and the overall dimensions of the
panel as dimension lines. The report wraps it in a scrolling box with zoom buttons and an
"element ids" switch made of form controls and CSS alone (no scripts: the report must open
anywhere, offline).
"""

from __future__ import annotations

import html

import numpy as np

__all__ = ["layout_svg", "svg_controls", "SVG_CSS", "overall_dimensions"]

#: CSS of the drawing's box, zoom buttons and id switch (goes into the report's style sheet).
SVG_CSS = """
.dwg input{margin-left:.8em}.dwg label{font-size:.9em;margin-right:.2em}
.dwg .box{overflow:auto;max-height:85vh;border:1px solid #ddd;margin:.4em 0}
.dwg svg{width:100%;height:auto;display:block}
#dwg-z2:checked~.box svg{width:200%}#dwg-z4:checked~.box svg{width:400%}
#dwg-z8:checked~.box svg{width:800%}
.dwg .ids{display:none}#dwg-ids:checked~.box .ids{display:inline}
"""


_XMLNS = ' xmlns="http://www.w3.org/2000/svg"'


def _e(text) -> str:
    return html.escape(str(text), quote=True)


def _f(v: float) -> str:
    """A coordinate in mm, short: 3 decimals (1 µm), no trailing zeros."""
    s = f"{float(v):.3f}".rstrip("0").rstrip(".")
    return "0" if s in ("-0", "") else s


def _path(ring_mm) -> str:
    """A closed path ``d`` of a ring [mm], y negated."""
    pts = np.asarray(ring_mm, dtype=float)
    if len(pts) > 1 and np.allclose(pts[0], pts[-1]):
        pts = pts[:-1]
    head = f"M{_f(pts[0, 0])},{_f(-pts[0, 1])}"
    return head + "".join(f"L{_f(x)},{_f(-y)}" for x, y in pts[1:]) + "Z"


def overall_dimensions(layout, aperture=None) -> dict:
    """Overall sizes of a drawing  [mm].

    Returns
    -------
    dict
        ``panel``: (width, height) of the outline's bounding box, or None without an
        aperture; ``elements``: (width, height) of the element centres' bounding box
        (centre to centre); ``bounds``: (xmin, ymin, xmax, ymax) of what the dimension lines
        measure (the outline, else the element centres).
    """
    xy = np.column_stack([layout.x, layout.y]) * 1e3
    lo, hi = xy.min(axis=0), xy.max(axis=0)
    out = {"elements": (float(hi[0] - lo[0]), float(hi[1] - lo[1])), "panel": None}
    if aperture is not None:
        xmin, ymin, xmax, ymax = (b * 1e3 for b in aperture.bounds)
        out["panel"] = (xmax - xmin, ymax - ymin)
        out["bounds"] = (xmin, ymin, xmax, ymax)
    else:
        out["bounds"] = (float(lo[0]), float(lo[1]), float(hi[0]), float(hi[1]))
    return out


def _dimension(x0, y0, x1, y1, text, size, vertical=False) -> str:
    """A dimension line between two points (SVG coordinates) with arrows and its value."""
    mid_x, mid_y = (x0 + x1) / 2, (y0 + y1) / 2
    if vertical:
        label = (
            f'<text x="{_f(mid_x + 1.2 * size)}" y="{_f(mid_y)}" font-size="{_f(size)}" '
            'stroke="none" '
            f'text-anchor="middle" transform="rotate(-90 {_f(mid_x + 1.2 * size)} '
            f'{_f(mid_y)})">{_e(text)}</text>'
        )
    else:
        label = (
            f'<text x="{_f(mid_x)}" y="{_f(mid_y + 1.4 * size)}" font-size="{_f(size)}" '
            'stroke="none" '
            f'text-anchor="middle">{_e(text)}</text>'
        )
    return (
        f'<line x1="{_f(x0)}" y1="{_f(y0)}" x2="{_f(x1)}" y2="{_f(y1)}" '
        'marker-start="url(#dwg-arrow)" marker-end="url(#dwg-arrow)"/>' + label
    )


def layout_svg(
    layout,
    aperture=None,
    sites=None,
    footprint_mm=None,
    title="",
    fills=None,
    legend=(),
    standalone=False,
) -> str:
    """The layout as an inline ``<svg>`` element (see the module docstring).

    Parameters
    ----------
    layout : thinning.geometry.layout.Layout
    aperture : thinning.geometry.aperture.Aperture, optional
    sites : (M, 2) array_like or Sites, optional  [m]   every candidate site
    footprint_mm : float, optional  [mm]   element circle diameter (default as the drawings)
    title : str
    fills : sequence of str, optional
        A fill colour per element (SVG colour names), instead of the one blue.
    legend : sequence of (colour, text), optional
        A key drawn below the drawing.
    standalone : bool
        For a file of its own: the SVG namespace declared (inline in HTML it is implied).

    Returns
    -------
    str
        One ``<svg>`` element whose user unit is the millimetre.
    """
    from .drawing import _footprint, _rings_mm, _sites_mm

    xy = np.column_stack([layout.x, layout.y]) * 1e3
    d = _footprint(layout, footprint_mm)
    r = d / 2
    dims = overall_dimensions(layout, aperture)
    xmin, ymin, xmax, ymax = dims["bounds"]
    lo = np.minimum(xy.min(axis=0) - r, [xmin, ymin])
    hi = np.maximum(xy.max(axis=0) + r, [xmax, ymax])
    site_xy = _sites_mm(sites)
    if site_xy is not None and len(site_xy):
        lo, hi = np.minimum(lo, site_xy.min(axis=0)), np.maximum(hi, site_xy.max(axis=0))
    span = float(max(hi - lo))
    text = max(0.018 * span, 0.6 * r)  # dimension text height  [mm]
    gap = 2.5 * text  # from the drawing to a dimension line
    pad = 0.02 * span + r
    vx0, vy0 = lo[0] - pad, -hi[1] - pad
    vw = hi[0] - lo[0] + 2 * pad + gap + 3 * text
    vh = hi[1] - lo[1] + 2 * pad + gap + (3 + 1.6 * len(legend)) * text
    parts = [
        f'<svg{_XMLNS if standalone else ""} viewBox="{_f(vx0)} {_f(vy0)} {_f(vw)} '
        f'{_f(vh)}" role="img" aria-label="{_e(title or "layout drawing")}">',
        f"<title>{_e(title or 'layout drawing')}</title>",
        '<defs><marker id="dwg-arrow" viewBox="0 0 10 10" refX="5" refY="5" '
        'markerWidth="6" markerHeight="6" orient="auto-start-reverse">'
        '<path d="M0,0L10,5L0,10Z" fill="#333"/></marker></defs>',
    ]
    lw = max(span / 800, 0.05)
    if aperture is not None:
        parts.append(
            f'<path class="outline" d="{_path(aperture.outline_mm())}" fill="none" '
            f'stroke="#000" stroke-width="{_f(2 * lw)}"/>'
        )
        for h in aperture.holes_mm():
            parts.append(
                f'<path class="hole" d="{_path(h)}" fill="none" stroke="#c00" '
                f'stroke-width="{_f(1.5 * lw)}"/>'
            )
        if aperture.edge_clearance > 0:
            for ring in _rings_mm(aperture.usable):
                parts.append(
                    f'<path class="clearance" d="{_path(ring)}" fill="none" stroke="#2a2" '
                    f'stroke-width="{_f(lw)}" stroke-dasharray="{_f(6 * lw)} {_f(4 * lw)}"/>'
                )
    if site_xy is not None and len(site_xy):
        dot = _f(max(0.12 * r, lw))
        parts.append('<g class="sites" fill="#999">')
        parts += [f'<circle cx="{_f(x)}" cy="{_f(-y)}" r="{dot}"/>' for x, y in site_xy]
        parts.append("</g>")
    parts.append(
        f'<g class="elements" fill="#4a90d9" fill-opacity="0.85" stroke="#123" '
        f'stroke-width="{_f(lw)}">'
    )
    ids = layout.element_ids
    colours = [None] * len(ids) if fills is None else list(fills)
    for (x, y), i, c in zip(xy, ids, colours, strict=True):
        fill = f' fill="{_e(c)}"' if c else ""
        parts.append(
            f'<circle cx="{_f(x)}" cy="{_f(-y)}" r="{_f(r)}"{fill}><title>{_e(i)}: '
            f"x {x:.3f} mm, y {y:.3f} mm</title></circle>"
        )
    parts.append("</g>")
    size = _f(0.38 * d)
    parts.append(
        f'<g class="ids" font-size="{size}" text-anchor="middle" dominant-baseline="central">'
    )
    parts += [
        f'<text x="{_f(x)}" y="{_f(-y)}">{_e(i)}</text>' for (x, y), i in zip(xy, ids, strict=True)
    ]
    parts.append("</g>")
    # overall dimensions: the outline's (or the element centres') width below, height right
    below = -ymin + gap
    right = xmax + gap
    what = "" if dims["panel"] is not None else " (element centres)"
    parts.append(
        f'<g class="dimensions" stroke="#333" stroke-width="{_f(lw)}" fill="#333">'
        + _dimension(xmin, below, xmax, below, f"{xmax - xmin:.1f} mm{what}", text)
        + _dimension(right, -ymax, right, -ymin, f"{ymax - ymin:.1f} mm{what}", text, True)
        + f'<line x1="{_f(xmin)}" y1="{_f(-ymin)}" x2="{_f(xmin)}" y2="{_f(below)}"/>'
        + f'<line x1="{_f(xmax)}" y1="{_f(-ymin)}" x2="{_f(xmax)}" y2="{_f(below)}"/>'
        + f'<line x1="{_f(xmax)}" y1="{_f(-ymax)}" x2="{_f(right)}" y2="{_f(-ymax)}"/>'
        + f'<line x1="{_f(xmax)}" y1="{_f(-ymin)}" x2="{_f(right)}" y2="{_f(-ymin)}"/>'
        + "</g>"
    )
    for k, (colour, what) in enumerate(legend):
        y0 = below + (3.0 + 1.6 * k) * text
        parts.append(
            f'<circle cx="{_f(xmin + text / 2)}" cy="{_f(y0 - text / 3)}" r="{_f(text / 2)}" '
            f'fill="{_e(colour)}" stroke="#123" stroke-width="{_f(lw)}"/>'
            f'<text x="{_f(xmin + 1.5 * text)}" y="{_f(y0)}" font-size="{_f(text)}">'
            f"{_e(what)}</text>"
        )
    parts.append("</svg>")
    return "".join(parts)


def svg_controls(svg: str) -> str:
    """The drawing in its box, with zoom buttons and the element-id switch (CSS only)."""
    zooms = "".join(
        f'<input type="radio" name="dwg-zoom" id="dwg-z{k}"{" checked" if k == 1 else ""}>'
        f'<label for="dwg-z{k}">{k}×</label>'
        for k in (1, 2, 4, 8)
    )
    return (
        '<div class="dwg"><input type="checkbox" id="dwg-ids">'
        '<label for="dwg-ids">show element ids</label> zoom:'
        f'{zooms}<div class="box">{svg}</div></div>'
    )
