"""Pattern engine: the array factor of a layout and the figures taken over it.

Takes excitation grids (or element positions off any grid), the wavelength and the sidelobe
region; gives sampled power patterns (FFT, or direct summation off the lattice), the main-beam
cut, PSL refined on the exact pattern, ASL, directivity and beamwidth, the random-thinning
expectations, and the compiled loops (:mod:`~thinning.engine.fastpath`) that score a stack of
patterns or a batch of swap moves at the cost of the transform. Uses only the geometry.
"""
