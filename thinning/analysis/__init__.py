"""Analyses: a design run and what is known about a layout.

Takes a spec (or a layout and its frequency and scan), runs the search where asked
(:mod:`~thinning.analysis.design`, budget sweeps in :mod:`~thinning.analysis.sweep`, local or
Dask execution in :mod:`~thinning.analysis.cluster`), and gives every figure of one layout
(:mod:`~thinning.analysis.score`) and of the built array under scan, band edges and random
errors (:mod:`~thinning.analysis.stress`). Writes only the layout files of a run; drawings
and reports belong to the outputs.
"""
