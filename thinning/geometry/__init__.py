"""Geometry: the panel and where elements can go.

Takes the panel as drawn (outline, holes and edge clearance, in metres) and the lattice (kind,
pitch, offset); gives the ordered candidate sites inside the usable aperture, their index grid
for the pattern engine, the lattice a set of sites generates and its grating lobes, and
:class:`~thinning.geometry.layout.Layout`, the active elements of a design. Imports nothing of
the later stages.
"""
