"""Small test data shared by several test modules (invented for the tests, not published)."""

from __future__ import annotations

from thinning.geometry.aperture import Aperture
from thinning.geometry.lattice import Lattice


def small_spec(method: str = "random", evaluations: int = 300, extra: str = "") -> str:
    """A 10 × 8-site rectangular panel at half a wavelength, 40 elements, 10° scan: a spec
    that designs in well under a second."""
    return f"""
[array]
frequency_ghz = 10.0
lattice = "rectangular"
spacing_mm = [15.0, 15.0]
[aperture]
outline_mm = [[0, 0], [150, 0], [150, 120], [0, 120]]
[budget]
elements = 40
[scan]
max_deg = 10.0
[search]
method = "{method}"
seed = 4
evaluations = {evaluations}
{extra}"""


def rect_sites():
    """9 × 7 sites at half a wavelength, centred on the origin."""
    ap = Aperture.from_mm([[-61, -46], [61, -46], [61, 46], [-61, 46]])
    return Lattice.from_mm("rectangular", [15.0, 15.0]).sites_in(ap)


def tri_sites():
    """Equilateral triangular lattice in a slightly skewed outline (some sites lack partners)."""
    ap = Aperture.from_mm([[-70, -50], [72, -50], [70, 40], [-70, 52]])
    return Lattice.from_mm("triangular", [17.32, 15.0]).sites_in(ap)


#: A 180 × 160 mm panel with a square cut-out on a 17 mm equilateral triangular lattice at
#: 10 GHz, half its sites on, scan to 20° (invented; [search] and the rest follow it).
TRI_PANEL = """
[array]
frequency_ghz = 10.0
lattice = "triangular"
spacing_mm = 17.0
[aperture]
outline_mm = [[-90, -80], [90, -80], [90, 80], [-90, 80]]
holes_mm = [[[-10, -10], [10, -10], [10, 10], [-10, 10]]]
edge_clearance_mm = 3.0
[budget]
fill = 0.5
[scan]
max_deg = 20.0
"""


def write_spec(tmp_path, text, name="spec.toml"):
    """Write a spec file into the test's folder; returns its path."""
    p = tmp_path / name
    p.write_text(text)
    return p


def run_cli(capsys, *args):
    """Run the command line; (exit status, stdout, stderr)."""
    from thinning.cli import main

    code = main([str(a) for a in args])
    out = capsys.readouterr()
    return code, out.out, out.err


def linear_problem(m, n, **kw):
    """m half-wavelength sites on a line at 10 GHz (15 mm pitch), n elements, broadside."""
    from thinning.search.problem import ThinningProblem

    sites = Lattice.from_mm("linear", [15.0]).linear_sites(m)
    return ThinningProblem(sites, n, 0.03, 0.0, **kw)


def planar_problem(side_mm, n, **kw):
    """A square panel of side ``side_mm`` on a half-wavelength square lattice at 10 GHz,
    n elements, broadside."""
    from thinning.search.problem import ThinningProblem

    h = side_mm / 2
    ap = Aperture.from_mm([[-h, -h], [h, -h], [h, h], [-h, h]])
    sites = Lattice.from_mm("rectangular", [15.0, 15.0]).sites_in(ap)
    return ThinningProblem(sites, n, 0.03, 0.0, **kw)


def pinned_ends(m):
    """A mask of m sites with the two end sites pinned."""
    import numpy as np

    pinned = np.zeros(m, bool)
    pinned[[0, -1]] = True
    return pinned
