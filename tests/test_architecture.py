"""The stages of the package import only what comes before them.

The data flows geometry → pattern engine → search → analyses → outputs → command line, with
the file formats (``io``) beside the geometry and the spec between the search and the
analyses. Every import of the package's own modules, at any depth (imports inside functions
included), is read from the source with :mod:`ast` and checked against that order. A rule of
the code base (DEVELOPERS.md, "Architecture"), not of the physics.
"""

from __future__ import annotations

import ast
from pathlib import Path

import thinning

ROOT = Path(thinning.__file__).parent

#: what each stage may import besides itself (errors, units and the package root always)
ALLOWED = {
    "geometry": set(),
    "engine": {"geometry"},
    "io": {"geometry"},
    "search": {"geometry", "engine", "io"},
    "spec": {"geometry", "engine", "io", "search"},
    "analysis": {"geometry", "engine", "io", "search", "spec"},
    "outputs": {"geometry", "engine", "io", "search", "spec", "analysis"},
    "cli": {"geometry", "engine", "io", "search", "spec", "analysis", "outputs"},
}
BASE = {"errors", "units", ""}


def _stage(module: str) -> str:
    """'thinning.engine.region' → 'engine'; 'thinning.spec' → 'spec'; 'thinning' → ''."""
    parts = module.split(".")[1:]
    return parts[0] if parts else ""


def _imports(path: Path):
    """(line, absolute module) of every import of the package in one file."""
    rel = path.relative_to(ROOT.parent).with_suffix("")
    package = list(rel.parts[:-1])
    tree = ast.parse(path.read_text(encoding="utf-8"))
    for node in ast.walk(tree):
        if isinstance(node, ast.ImportFrom):
            if node.level:
                base = package[: len(package) - (node.level - 1)]
                target = ".".join(base + ([node.module] if node.module else []))
            else:
                target = node.module or ""
            if not target.startswith("thinning"):
                continue
            if node.module is None:  # from . import name: name may be a module
                for alias in node.names:
                    yield node.lineno, f"{target}.{alias.name}"
            else:
                yield node.lineno, target
        elif isinstance(node, ast.Import):
            for alias in node.names:
                if alias.name.startswith("thinning"):
                    yield node.lineno, alias.name


def test_every_module_belongs_to_a_stage():
    for path in ROOT.rglob("*.py"):
        stage = _stage(".".join(path.relative_to(ROOT.parent).with_suffix("").parts))
        assert stage in ALLOWED or stage in BASE | {"__init__", "__main__"}, path


def test_no_stage_imports_a_later_one():
    wrong = []
    for path in sorted(ROOT.rglob("*.py")):
        here = _stage(".".join(path.relative_to(ROOT.parent).with_suffix("").parts))
        if here not in ALLOWED:
            continue
        for line, target in _imports(path):
            there = _stage(target)
            if there in BASE or there.startswith("__") or there == here or there in ALLOWED[here]:
                continue
            wrong.append(f"{path.relative_to(ROOT.parent)}:{line} imports {target}")
    assert not wrong, "\n".join(wrong)


def test_top_level_holds_only_the_stages():
    names = {p.name for p in ROOT.iterdir() if not p.name.startswith((".", "__pycache__"))}
    stages = {s for s in ALLOWED if (ROOT / s).is_dir()}
    assert names == stages | {"spec.py", "errors.py", "units.py", "__init__.py", "__main__.py"}
