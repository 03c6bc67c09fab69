"""thinning: choose which lattice sites of a phased-array panel get an element."""

__version__ = "0.1.0"
