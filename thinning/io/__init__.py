"""File formats at the edges: atomic writes and the layout CSV.

Takes paths and the geometry's :class:`~thinning.geometry.layout.Layout`; gives files written
all or nothing and layouts read with line- and column-specific errors. Uses the geometry only,
so every later stage may write through it.
"""
