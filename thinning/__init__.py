"""thinning: choose which lattice sites of a phased-array panel get an element.

The user-facing names are available flat from the package (imported on first use, so that
``import thinning`` stays light and the command can set up the numerical libraries first)::

    from thinning import load_spec, run_design, score_layout, read_layout_csv
"""

from importlib import import_module

__version__ = "0.1.0"

_EXPORTS = {
    "Aperture": "geometry.aperture",
    "Lattice": "geometry.lattice",
    "Sites": "geometry.lattice",
    "Layout": "geometry.layout",
    "read_layout_csv": "io.layout_csv",
    "write_layout_csv": "io.layout_csv",
    "FFTPatternEngine": "engine.pattern",
    "DirectPatternEngine": "engine.pattern",
    "score_layout": "analysis.score",
    "ScoreResult": "analysis.score",
    "ThinningProblem": "search.problem",
    "run_method": "search",
    "Spec": "spec",
    "load_spec": "spec",
    "run_design": "analysis.design",
    "run_sweep": "analysis.sweep",
    "stress_layout": "analysis.stress",
    "ErrorModel": "engine.excitation",
    "ScanSet": "engine.coverage",
    "Coverage": "engine.coverage",
    "MaskEntry": "engine.mask",
    "SidelobeLimits": "engine.mask",
    "TabulatedElement": "engine.element",
    "read_element_csv": "io.element_csv",
    "ThinningError": "errors",
    "InputError": "errors",
    "OutputError": "errors",
}

__all__ = ["__version__", *_EXPORTS]


def __getattr__(name):
    if name in _EXPORTS:
        return getattr(import_module(f".{_EXPORTS[name]}", __name__), name)
    raise AttributeError(f"module 'thinning' has no attribute {name!r}")
