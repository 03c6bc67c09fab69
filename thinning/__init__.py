"""thinning: choose which lattice sites of a phased-array panel get an element.

The user-facing names are available flat from the package (imported on first use, so that
``import thinning`` stays light and the command can set up the numerical libraries first)::

    from thinning import load_spec, run_design, score_layout, read_layout_csv
"""

from importlib import import_module

__version__ = "0.1.0"

_EXPORTS = {
    "Aperture": "aperture",
    "Lattice": "lattice",
    "Sites": "lattice",
    "Layout": "layout",
    "read_layout_csv": "io.layout_csv",
    "write_layout_csv": "io.layout_csv",
    "FFTPatternEngine": "pattern",
    "DirectPatternEngine": "pattern",
    "score_layout": "score",
    "ScoreResult": "score",
    "ThinningProblem": "problem",
    "run_method": "search",
    "Spec": "spec",
    "load_spec": "spec",
    "run_design": "design",
    "run_sweep": "sweep",
    "stress_layout": "stress",
    "ErrorModel": "stress",
    "ThinningError": "errors",
    "InputError": "errors",
    "OutputError": "errors",
}

__all__ = ["__version__", *_EXPORTS]


def __getattr__(name):
    if name in _EXPORTS:
        return getattr(import_module(f".{_EXPORTS[name]}", __name__), name)
    raise AttributeError(f"module 'thinning' has no attribute {name!r}")
