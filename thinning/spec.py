"""Design specifications (TOML): read, validate, and turn into a problem.

A spec names the frequency, the lattice, the panel, the budget, the scan cone and the search
(conventions.md, "Spec TOML"; more keys are accepted, listed in :data:`KEYS`). Every problem is
reported in one line naming the file, the key and the value. Units are those of the file
(mm, GHz, degrees, dB) and are converted to SI here, nowhere else.
"""

from __future__ import annotations

import dataclasses
import hashlib
import math
import tomllib
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from .engine.coverage import coverage_from_spec
from .engine.excitation import check_stress_table, robust_from_spec
from .engine.mask import mask_from_spec
from .errors import SpecError, where
from .geometry.aperture import Aperture, check_holes_inside
from .geometry.dxf_panel import panel_from_spec_table
from .geometry.lattice import LATTICE_KINDS, Lattice, Sites, grating_lobe_positions
from .geometry.tiles import TILE_KEYS, tiles_from_spec
from .search import METHODS, tile_counts
from .search.density import LARGE_SITES
from .search.problem import OBJECTIVES, SYMMETRIES, ThinningProblem, outer_ring
from .units import deg_to_rad, ghz_to_hz, wavelength

__all__ = ["Spec", "load_spec", "parse_spec", "KEYS", "EFFORT_EVALUATIONS", "default_method"]

#: Evaluations a search may spend at each effort level.
EFFORT_EVALUATIONS = {"quick": 2_000, "normal": 20_000, "thorough": 200_000}

#: Options of the search methods that a spec may set in [search].
METHOD_OPTIONS = {
    "draws",
    "batch",
    "taper",
    "taper_sll_db",
    "taper_nbar",
    "population",
    "generations",
    "stall_generations",
    "tournament",
    "elite",
    "crossover_rate",
    "mutation_rate",
    "mutation_swaps",
    "seed_density_fraction",
    "local_swaps",
    "local_every",
    "trials",
    "iterations",
    "ift_batch",
    "ift_sll_db",
    "ift_density_fraction",
    "seed_ift_fraction",
    "polish_fraction",
    "local_batch",
    "polish_anneal",
    "restart_perturbed_fraction",
    "restart_swaps",
    "anneal_batch",
    "anneal_local",
    "anneal_near",
    "anneal_hot_db",
    "anneal_cold_db",
    "anneal_reheat_db",
    "anneal_cycle",
    "anneal_stall_cycles",
    "envelope_rings",
    "envelope_sectors",
    "envelope_beam",
    "polish",
    "lobe_depth_db",
    "lobe_count",
    "lobe_focus",
    "lobe_step",
}

KEYS = {
    "array": {
        "frequency_ghz",
        "lattice",
        "spacing_mm",
        "origin_mm",
        "element_exponent",
        "element_pattern",
    },
    "aperture": {
        "outline_mm",
        "holes_mm",
        "edge_clearance_mm",
        "sites",
        "dxf",
        "dxf_outline_layer",
        "dxf_holes_layer",
    },
    "budget": {"elements", "fill", "chips"},
    "tiles": TILE_KEYS,
    "scan": {"max_deg", "azimuth_deg", "elevation_deg"},
    "band": {"ghz", "steering"},
    "search": {
        "pareto_population",
        "method",
        "seed",
        "effort",
        "evaluations",
        "time_limit_s",
        "objective",
        "secondary_weight",
        "oversampling",
        "workers",
    }
    | METHOD_OPTIONS,
    "constraints": {"symmetry", "pin_outer_ring", "pin_ids", "forbid_ids", "pin_mm", "forbid_mm"},
    "requirements": {"psl_db", "asl_db", "hpbw_max_deg", "mask"},
    "stress": {
        "band_ghz",
        "steering",
        "amplitude_error_db",
        "phase_error_deg",
        "phase_bits",
        "failures",
        "trials",
        "seed",
    },
    "robust": {
        "amplitude_error_db",
        "phase_error_deg",
        "phase_bits",
        "failures",
        "trials",
        "percentile",
        "seed",
    },
    "output": {"footprint_mm", "labels"},
    "name": None,
    "description": None,
}


def default_method(sites: int) -> str:
    """The search method of a spec that names none: ``genetic`` below
    :data:`thinning.search.density.LARGE_SITES` (4,096) candidate sites, ``density`` (the
    optimised envelope and lobe-aimed swaps) from there on. Measured on circular apertures at
    50 % fill, 30 s each: density led already at 1,009 sites (−25.7 vs −24.9 dB) and at 4,053
    (−30.9 vs −29.6 dB), and the genetic search's population of full patterns grows too slow
    and too large past about 16,000 sites."""
    return "density" if sites >= LARGE_SITES else "genetic"


@dataclass
class Spec:
    """A validated design specification (SI inside).

    Attributes
    ----------
    source : str   file name for messages
    raw : dict     the TOML as read (for provenance)
    digest : str   SHA-256 of the file's bytes
    text : str     the file's text (for the report's appendix)
    frequency : float  [Hz]
    lattice : Lattice
    aperture : Aperture or None (linear arrays)
    linear_sites : int or None
    elements : int
    scan_max : float  [rad]   the scan cone's half-angle (a sector's enclosing cone's)
    element_exponent : float
    coverage : Coverage   the scan set over the band ([scan], [band])
    mask : tuple of MaskEntry   [requirements] mask
    element : TabulatedElement or None   [array] element_pattern
    hpbw_max : float or None  [deg]   [requirements] hpbw_max_deg
    search_method : str or None   the method the spec names; None: chosen by the size
        (:attr:`method`, :func:`default_method`)
    seed, objective, ... : search settings
    """

    source: str
    raw: dict
    digest: str
    frequency: float
    lattice: Lattice
    aperture: Aperture | None
    linear_sites: int | None
    budget_elements: int | None
    budget_fill: float | None
    scan_max: float
    element_exponent: float
    search_method: str | None
    seed: int
    max_evaluations: int | None
    time_limit_s: float | None
    objective: str
    secondary_weight: float
    oversampling: float
    workers: int
    options: dict
    symmetry: str
    pin_outer_ring: bool
    pin_ids: list
    forbid_ids: list
    pin_mm: list
    forbid_mm: list
    requirements: dict
    output: dict
    warnings: list = field(default_factory=list)
    robust: object = None
    robust_trials: int = 16
    robust_percentile: float = 90.0
    robust_seed: int = 0
    text: str = ""
    coverage: object = None
    mask: tuple = ()
    element: object = None
    hpbw_max: float | None = None
    tiles: object = None
    panel_drawing: dict | None = None

    @property
    def wavelength(self) -> float:
        return wavelength(self.frequency)

    @property
    def element_model(self):
        """The element pattern: the table of ``element_pattern``, else cosᵠθ."""
        from .engine.element import CosineElement

        return self.element if self.element is not None else CosineElement(self.element_exponent)

    @property
    def has_scan_set(self) -> bool:
        """The spec uses a sector, a band or a mask (the issue-15 keys)."""
        return self.coverage is not None and (
            self.coverage.scan.kind != "cone" or self.coverage.band is not None
        )

    def score_options(self, elements: float) -> dict:
        """The keywords of :func:`thinning.analysis.score.score_layout` that the scan set,
        band, mask and element pattern of the spec give (``elements``: N_eff)."""
        return {
            "coverage": self.coverage if self.has_scan_set else None,
            "limits": self.limits(elements),
            "element": self.element,
        }

    def limits(self, elements: float):
        """The sidelobe limits of [requirements] (the mask and psl_db), or None without a
        mask. ``elements``: N_eff, for ``level_dbi`` entries."""
        if not self.mask:
            return None
        from .engine.mask import SidelobeLimits

        kept = self.__dict__.setdefault("_limits", {})  # its zones are built once
        if float(elements) not in kept:
            kept[float(elements)] = SidelobeLimits(
                tuple(self.mask),
                self.requirements.get("psl_db"),
                self.element_model,
                float(elements),
            )
        return kept[float(elements)]

    @property
    def method(self) -> str:
        """The search method: the spec's ``search.method``, or when it names none the default
        for the panel's size (:func:`default_method`)."""
        if self.search_method is not None:
            return self.search_method
        if self.tiles is not None and self.tiles.patterns is not None:
            return "modular"  # boards and their assignment: the one method that keeps them
        return default_method(len(self.sites()))

    @property
    def method_label(self) -> str:
        """The method as the progress names it (saying when the size chose it)."""
        if self.search_method is not None:
            return self.search_method
        if self.method == "modular":
            return "modular (the method of tiles.patterns)"
        m = len(self.sites())
        return f"{self.method} (the default for {m:,} sites)"

    def sites(self) -> Sites:
        """The candidate sites of the panel (or of the linear array); computed once."""
        if getattr(self, "_sites", None) is None:
            if self.lattice.kind == "linear":
                self._sites = self.lattice.linear_sites(self.linear_sites, self.source)
            else:
                self._sites = self.lattice.sites_in(self.aperture, self.source)
        return self._sites

    def elements(self, m: int) -> int:
        """The exact element count for M sites (from ``elements`` or ``fill``)."""
        if self.budget_elements is not None:
            return self.budget_elements
        return int(round(self.budget_fill * m))

    def problem(self, sites: Sites | None = None) -> ThinningProblem:
        """The thinning problem the spec describes."""
        sites = self.sites() if sites is None else sites
        m = len(sites)
        n = self.elements(m)
        src = self.source
        if n > m:
            raise SpecError(
                f"{where(src, 'budget.elements')}{n}: more than the {m} sites the aperture holds"
            )
        pinned, forbidden = self.constraint_masks(sites)
        problem = ThinningProblem(
            sites,
            n,
            self.wavelength,
            self.scan_max,
            pinned=pinned,
            forbidden=forbidden,
            symmetry=self.symmetry,
            objective=self.objective,
            secondary_weight=self.secondary_weight,
            oversampling=self.oversampling,
            source=src,
            robust=self.robust,
            robust_trials=self.robust_trials,
            robust_percentile=self.robust_percentile,
            robust_seed=self.robust_seed,
            coverage=self.coverage if self.has_scan_set else None,
            limits=self.limits(n),
            hpbw_max=self.hpbw_max,
            tiles=self.tiles,
        )
        tile_counts.prepare(problem)  # a budget the tiles cannot take is refused here
        return problem

    def constraint_masks(self, sites: Sites) -> tuple[np.ndarray, np.ndarray]:
        """(pinned, forbidden): which sites the [constraints] keep on and keep off."""
        m = len(sites)
        src = self.source
        pinned = np.zeros(m, bool)
        forbidden = np.zeros(m, bool)
        if self.pin_outer_ring:
            pinned |= outer_ring(sites)
        for key, ids, mask in (
            ("constraints.pin_ids", self.pin_ids, pinned),
            ("constraints.forbid_ids", self.forbid_ids, forbidden),
        ):
            for i in ids:
                if not 1 <= i <= m:
                    raise SpecError(f"{where(src, key)}{i}: site ids run from 1 to {m}")
                mask[i - 1] = True
        pitch = min(p for p in sites.lattice.grid_pitch if p > 0)
        for key, pts, mask in (
            ("constraints.pin_mm", self.pin_mm, pinned),
            ("constraints.forbid_mm", self.forbid_mm, forbidden),
        ):
            for x, y in pts:
                d = np.hypot(sites.x - x * 1e-3, sites.y - y * 1e-3)
                i = int(np.argmin(d))
                if d[i] > 0.5 * pitch:
                    raise SpecError(
                        f"{where(src, key)}[{x}, {y}]: no site within half a pitch "
                        f"(nearest is {d[i] * 1e3:.3f} mm away)"
                    )
                mask[i] = True
        both = pinned & forbidden
        if both.any():
            raise SpecError(
                f"{where(src, 'constraints')}site {int(np.flatnonzero(both)[0]) + 1} "
                "is both pinned and forbidden"
            )
        return pinned, forbidden


def load_spec(path) -> Spec:
    """Read and validate a spec file."""
    p = Path(path)
    name = str(path)
    try:
        data = p.read_bytes()
    except FileNotFoundError:
        raise SpecError(f"{name}: no such file") from None
    except IsADirectoryError:
        raise SpecError(f"{name}: is a directory, not a spec file") from None
    except OSError as exc:
        raise SpecError(f"{name}: cannot read: {exc.strerror}") from None
    try:
        text = data.decode("utf-8")
    except UnicodeDecodeError:
        raise SpecError(f"{name}: not UTF-8 text") from None
    try:
        raw = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise SpecError(f"{name}: not valid TOML: {exc}") from None
    spec = parse_spec(raw, name, hashlib.sha256(data).hexdigest())
    spec.text = text
    return spec


def _get(raw, table, key, src, default=None, required=False):
    t = raw.get(table, {})
    if key not in t:
        if required:
            raise SpecError(f"{where(src, f'{table}.{key}')}missing (required)")
        return default
    return t[key]


def _number(value, src, key, lo=None, hi=None, lo_open=False, integer=False):
    if isinstance(value, bool) or not isinstance(value, int | float):
        raise SpecError(f"{where(src, key)}{value!r} is not a number")
    v = float(value)
    if not math.isfinite(v):
        raise SpecError(f"{where(src, key)}{value!r} is not finite")
    if integer and (not isinstance(value, int) or isinstance(value, bool)):
        if not v.is_integer():
            raise SpecError(f"{where(src, key)}{value!r} is not a whole number")
    if lo is not None and (v < lo or (lo_open and v == lo)):
        raise SpecError(f"{where(src, key)}{value!r} must be {'>' if lo_open else '>='} {lo:g}")
    if hi is not None and v > hi:
        raise SpecError(f"{where(src, key)}{value!r} must be <= {hi:g}")
    return int(v) if integer else v


def _choice(value, choices, src, key):
    if not isinstance(value, str) or value not in choices:
        raise SpecError(f"{where(src, key)}{value!r}: expected one of {', '.join(choices)}")
    return value


def _points(value, src, key):
    if not isinstance(value, list) or not all(isinstance(p, list) and len(p) == 2 for p in value):
        raise SpecError(f"{where(src, key)}expected a list of [x, y] pairs in mm")
    return [(_number(x, src, key), _number(y, src, key)) for x, y in value]


def parse_spec(raw: dict, source: str = "spec", digest: str = "") -> Spec:
    """Validate a parsed TOML document."""
    src = source
    for table, value in raw.items():
        if table not in KEYS:
            raise SpecError(
                f"{where(src, table)}unknown section (expected "
                f"{', '.join(k for k in KEYS if KEYS[k] is not None)})"
            )
        if KEYS[table] is None:
            continue
        if not isinstance(value, dict):
            raise SpecError(f"{where(src, table)}must be a table [{table}]")
        for key in value:
            if key not in KEYS[table]:
                raise SpecError(
                    f"{where(src, f'{table}.{key}')}unknown key (known: "
                    f"{', '.join(sorted(KEYS[table]))})"
                )
    warnings: list[str] = []
    for table in ("array", "budget"):
        if table not in raw:
            raise SpecError(f"{where(src, table)}missing section [{table}]")
    freq_ghz = _number(
        _get(raw, "array", "frequency_ghz", src, required=True),
        src,
        "array.frequency_ghz",
        lo=0,
        lo_open=True,
    )
    kind = _choice(
        _get(raw, "array", "lattice", src, required=True), LATTICE_KINDS, src, "array.lattice"
    )
    spacing = _get(raw, "array", "spacing_mm", src, required=True)
    if kind == "triangular" and isinstance(spacing, int | float) and not isinstance(spacing, bool):
        spacing = [spacing, spacing * math.sqrt(3) / 2]  # equilateral
    if kind == "rectangular" and isinstance(spacing, int | float) and not isinstance(spacing, bool):
        spacing = [spacing, spacing]  # square
    if kind == "linear" and isinstance(spacing, list) and len(spacing) == 1:
        spacing = spacing[0]
    origin = _get(raw, "array", "origin_mm", src, default=[0.0, 0.0])
    lattice = Lattice.from_mm(kind, spacing, origin, src)
    q = _number(
        _get(raw, "array", "element_exponent", src, default=1.0),
        src,
        "array.element_exponent",
        lo=0,
        hi=20,
    )
    scan_deg = _number(
        _get(raw, "scan", "max_deg", src, default=0.0), src, "scan.max_deg", lo=0, hi=89.9
    )
    coverage = coverage_from_spec(
        raw.get("scan", {}), raw.get("band"), ghz_to_hz(freq_ghz), scan_deg, src, _pair, _choice
    )

    aperture, n_sites, panel_drawing = None, None, None
    if kind == "linear":
        n_sites = _get(raw, "aperture", "sites", src, required=True)
        n_sites = _number(n_sites, src, "aperture.sites", lo=2, integer=True)
    else:
        drawing = panel_from_spec_table(raw.get("aperture", {}), Path(src).parent, src)
        if drawing is not None:
            outline, holes = drawing.outline_mm, drawing.holes_mm
            warnings.extend(drawing.notes)
            dxf_path = Path(src).parent / raw["aperture"]["dxf"]
            panel_drawing = {
                "file": str(raw["aperture"]["dxf"]),
                "sha256": hashlib.sha256(dxf_path.read_bytes()).hexdigest(),
            }
        else:
            outline = _get(raw, "aperture", "outline_mm", src, required=True)
            holes = _get(raw, "aperture", "holes_mm", src, default=[])
        clearance = _get(raw, "aperture", "edge_clearance_mm", src, default=0.0)
        check_holes_inside(outline, holes, src)
        aperture = Aperture.from_mm(outline, holes, clearance, src)

    tiles = None
    if "tiles" in raw:
        tiles = tiles_from_spec(raw["tiles"], src, _number, _choice, kind)
    elements = _get(raw, "budget", "elements", src)
    fill = _get(raw, "budget", "fill", src)
    chips = _get(raw, "budget", "chips", src)
    if chips is not None:
        if tiles is None or tiles.channels_per_chip is None:
            raise SpecError(
                f"{where(src, 'budget.chips')}needs [tiles] channels_per_chip (the elements "
                "a chip feeds)"
            )
        chips = _number(chips, src, "budget.chips", lo=1, integer=True)
        if elements is not None or fill is not None:
            raise SpecError(
                f"{where(src, 'budget')}give one of elements, fill or chips, not several"
            )
        elements = chips * tiles.channels_per_chip
        if not tiles.whole_chips:  # a budget in chips buys whole chips only
            tiles = dataclasses.replace(tiles, whole_chips=True)
    if (elements is None) == (fill is None):
        raise SpecError(
            f"{where(src, 'budget')}give exactly one of elements (a count), fill "
            "(a fraction of the sites) or, with [tiles], chips"
        )
    if elements is not None:
        elements = _number(elements, src, "budget.elements", lo=2, integer=True)
    if fill is not None:
        fill = _number(fill, src, "budget.fill", lo=0, hi=1, lo_open=True)

    method = _get(raw, "search", "method", src)
    if method is not None:
        method = _choice(method, (*METHODS, "pareto"), src, "search.method")
    patterned = tiles is not None and tiles.patterns is not None
    if method is not None and patterned != (method == "modular"):
        raise SpecError(
            f"{where(src, 'search.method')}{method!r}: "
            + (
                "tiles.patterns is searched by the 'modular' method only"
                if patterned
                else "'modular' needs [tiles] patterns"
            )
        )
    seed = _number(
        _get(raw, "search", "seed", src, default=0), src, "search.seed", lo=0, integer=True
    )
    effort = _choice(
        _get(raw, "search", "effort", src, default="normal"),
        tuple(EFFORT_EVALUATIONS),
        src,
        "search.effort",
    )
    evals = _get(raw, "search", "evaluations", src)
    if evals is not None and "effort" in raw.get("search", {}):
        raise SpecError(
            f"{where(src, 'search.evaluations')}given together with search.effort: give one "
            "(effort is a named evaluation budget)"
        )
    max_evals = (
        EFFORT_EVALUATIONS[effort]
        if evals is None
        else _number(evals, src, "search.evaluations", lo=1, integer=True)
    )
    tl = _get(raw, "search", "time_limit_s", src)
    if tl is not None:
        tl = _number(tl, src, "search.time_limit_s", lo=0, lo_open=True)
        if evals is None and "effort" not in raw.get("search", {}):
            max_evals = None  # a time limit alone: the search uses the time it is given
    objective = _choice(
        _get(raw, "search", "objective", src, default="psl"), OBJECTIVES, src, "search.objective"
    )
    weight = _number(
        _get(raw, "search", "secondary_weight", src, default=0.05),
        src,
        "search.secondary_weight",
        lo=0,
        hi=1,
    )
    over = _number(
        _get(raw, "search", "oversampling", src, default=4.0),
        src,
        "search.oversampling",
        lo=2,
        hi=32,
    )
    workers = _number(
        _get(raw, "search", "workers", src, default=1), src, "search.workers", lo=1, integer=True
    )
    options = {k: v for k, v in raw.get("search", {}).items() if k in METHOD_OPTIONS}
    for k, v in options.items():
        if k == "polish":
            if not isinstance(v, bool):
                raise SpecError(f"{where(src, 'search.polish')}{v!r}: expected true or false")
        elif k != "taper":
            _number(v, src, f"search.{k}", lo=0)

    con = raw.get("constraints", {})
    symmetry = _choice(con.get("symmetry", "none"), SYMMETRIES, src, "constraints.symmetry")
    pin_outer = con.get("pin_outer_ring", False)
    if not isinstance(pin_outer, bool):
        raise SpecError(
            f"{where(src, 'constraints.pin_outer_ring')}{pin_outer!r}: expected true or false"
        )
    ids = {}
    for key in ("pin_ids", "forbid_ids"):
        v = con.get(key, [])
        if not isinstance(v, list):
            raise SpecError(f"{where(src, f'constraints.{key}')}expected a list of site ids")
        ids[key] = [_number(i, src, f"constraints.{key}", lo=1, integer=True) for i in v]
    pin_mm = _points(con.get("pin_mm", []), src, "constraints.pin_mm")
    forbid_mm = _points(con.get("forbid_mm", []), src, "constraints.forbid_mm")
    req = {}
    mask = ()
    hpbw_max = None
    for k, v in raw.get("requirements", {}).items():
        if k == "mask":
            mask = mask_from_spec(v, src, _pair, _number)
            req[k] = [e.to_dict() for e in mask]
        elif k == "hpbw_max_deg":
            hpbw_max = req[k] = _number(v, src, f"requirements.{k}", lo=0, hi=180, lo_open=True)
        else:
            req[k] = _number(v, src, f"requirements.{k}", hi=0)
    element = None
    if "element_pattern" in raw.get("array", {}):
        element = _element(raw["array"]["element_pattern"], src)
    output = dict(raw.get("output", {}))
    if "footprint_mm" in output:
        output["footprint_mm"] = _number(
            output["footprint_mm"], src, "output.footprint_mm", lo=0, lo_open=True
        )

    check_stress_table(raw.get("stress", {}), src, _number, _choice)
    robust, r_trials, r_pct, r_seed = robust_from_spec(raw.get("robust"), src, _number)

    lam = wavelength(ghz_to_hz(freq_ghz))
    scan = deg_to_rad(scan_deg)
    if coverage.scan.kind == "cone" and coverage.band is None:
        glob = grating_lobe_positions(lattice.basis, lam, scan)
        if len(glob):
            warnings.append(
                f"{src}: array.spacing_mm {spacing!r} lets grating lobes into the scan cone of "
                f"{scan_deg:g} deg at {freq_ghz:g} GHz (nearest at |u, v| = "
                f"{float(np.hypot(*glob[0])):.3f}); they count as sidelobes"
            )
    else:  # the sector's enclosing cone at the band's top
        f_hi = max(coverage.frequencies)
        glob = grating_lobe_positions(
            lattice.basis, wavelength(f_hi), coverage.scan.enclosing_angle
        )
        if len(glob):
            warnings.append(
                f"{src}: array.spacing_mm {spacing!r} may let grating lobes into the visible "
                f"region when steering over the {coverage.scan.describe()} at {f_hi / 1e9:g} "
                "GHz; they count as sidelobes"
            )
    return Spec(
        source=src,
        raw=raw,
        digest=digest,
        frequency=ghz_to_hz(freq_ghz),
        lattice=lattice,
        aperture=aperture,
        linear_sites=n_sites,
        budget_elements=elements,
        budget_fill=fill,
        scan_max=coverage.scan.enclosing_angle if coverage.scan.kind == "sector" else scan,
        element_exponent=q,
        search_method=method,
        seed=seed,
        max_evaluations=max_evals,
        time_limit_s=tl,
        objective=objective,
        secondary_weight=weight,
        oversampling=over,
        workers=workers,
        options=options,
        symmetry=symmetry,
        pin_outer_ring=pin_outer,
        pin_ids=ids["pin_ids"],
        forbid_ids=ids["forbid_ids"],
        pin_mm=pin_mm,
        forbid_mm=forbid_mm,
        requirements=req,
        output=output,
        warnings=warnings,
        robust=robust,
        robust_trials=r_trials,
        robust_percentile=r_pct,
        robust_seed=r_seed,
        coverage=coverage,
        mask=mask,
        element=element,
        hpbw_max=hpbw_max,
        tiles=tiles,
        panel_drawing=panel_drawing,
    )


def _pair(value, src, key, lo, hi) -> tuple[float, float]:
    """[a, b] with lo ≤ a ≤ b ≤ hi."""
    if not (isinstance(value, list) and len(value) == 2):
        raise SpecError(f"{where(src, key)}{value!r}: expected [low, high]")
    a, b = (_number(x, src, key, lo=lo, hi=hi) for x in value)
    if a > b:
        raise SpecError(f"{where(src, key)}{value!r}: low must not be above high")
    return a, b


def _element(value, src):
    """[array] element_pattern: the table, read relative to the spec's folder."""
    from .engine.element import TabulatedElement
    from .io.element_csv import read_element_csv

    if not isinstance(value, str) or not value.strip():
        raise SpecError(f"{where(src, 'array.element_pattern')}expected a CSV file name")
    path = Path(value)
    if not path.is_absolute() and src:
        path = Path(src).parent / path
    return TabulatedElement.from_table(read_element_csv(path))
