"""Outputs: what a design hands over to people and to CAD.

Takes a layout, its panel and its figures from the analyses; gives the drawings (SVG, PNG, PDF
with matplotlib; DXF with ezdxf), the figures of the pattern, the self-contained HTML design
review report and the sweep's trade page, all written atomically. The last stage before the
command line.
"""
