"""The thinning problem: candidate sites, an exact budget, constraints, symmetry, objective.

The search methods never see sites directly. They work on a *genome*: one boolean gene per
free symmetry orbit of sites (a single site without symmetry; a mirror pair; a group of four).
Orbits of the same size form a *class*, and every genome has exactly ``class_ones[c]`` genes on
in class c, which fixes the element count exactly. A count-preserving move therefore swaps an
on gene for an off gene of the same class. Pinned orbits are always on and forbidden ones
always off; neither is a gene.

The objective (lower is better) is

    J = PSL_dB + w · ASL_dB                      (objective = "psl", the default)
    J = ASL_dB + w · PSL_dB                      (objective = "asl")

with w = ``secondary_weight`` (0.05 by default): the PSL decides, and between layouts of
nearly equal PSL the lower ASL wins.

The PSL and ASL are taken over the sidelobe region of the scan set and band (``coverage``,
:mod:`thinning.engine.coverage`). With a mask (``limits``, :mod:`thinning.engine.mask`) the
first figure is the worst excess over it, max P·g with g = 10^{−ℓ/10}, instead of the PSL;
with ``hpbw_max`` it carries the beamwidth penalty of :mod:`thinning.search.penalty`.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from ..engine.pattern import FFTPatternEngine
from ..errors import SpecError, where
from ..geometry.lattice import Sites
from .swap_state import SWAP_ADVANCE_GENES, SwapBase
from .tile_classes import composition as _composition
from .tile_classes import tile_class_layout, tile_orbits, tile_units

__all__ = ["SYMMETRIES", "OBJECTIVES", "ThinningProblem", "Evaluation"]

SYMMETRIES = ("none", "mirror-x", "mirror-y", "mirror-xy", "rotate-180")
OBJECTIVES = ("psl", "asl")
#: Patterns per FFT batch (and, at most, transform samples in one). Fixed per problem, so that
#: a population is cut into the same batches for any number of worker processes.
BATCH, BATCH_SAMPLES = 16, 1 << 24


@dataclass
class Evaluation:
    """Figures of a batch of genomes.

    Attributes
    ----------
    objective : (B,) array  [dB]   J, lower is better
    psl_db, asl_db : (B,) arrays  [dB]
    """

    objective: np.ndarray
    psl_db: np.ndarray
    asl_db: np.ndarray


def _orbit_partners(sites: Sites, symmetry: str) -> list[np.ndarray]:
    """For each symmetry operation, the site index of each site's image (−1 where none)."""
    col, row = sites.col, sites.row
    c_sum = int(col.min() + col.max())
    r_sum = int(row.min() + row.max())
    lookup = {(int(c), int(r)): i for i, (c, r) in enumerate(zip(col, row, strict=True))}

    def image(cc, rr):
        return np.array([lookup.get((int(c), int(r)), -1) for c, r in zip(cc, rr, strict=True)])

    ops = {
        "none": [],
        "mirror-x": [(c_sum - col, row)],
        "mirror-y": [(col, r_sum - row)],
        "mirror-xy": [(c_sum - col, row), (col, r_sum - row), (c_sum - col, r_sum - row)],
        "rotate-180": [(c_sum - col, r_sum - row)],
    }[symmetry]
    return [image(c, r) for c, r in ops]


def outer_ring(sites: Sites) -> np.ndarray:
    """Sites on the edge of the aperture: those missing a lattice neighbour (bool mask).

    Neighbours are the 4 nearest of a rectangular lattice, the 6 of a triangular one, the 2 of
    a linear one.
    """
    kind = sites.lattice.kind
    if kind == "triangular":
        steps = [(2, 0), (-2, 0), (1, 1), (-1, 1), (1, -1), (-1, -1)]
    elif kind == "linear":
        steps = [(1, 0), (-1, 0)]
    else:
        steps = [(1, 0), (-1, 0), (0, 1), (0, -1)]
    present = set(zip(sites.col.tolist(), sites.row.tolist(), strict=True))
    edge = np.zeros(len(sites), dtype=bool)
    for dc, dr in steps:
        edge |= np.array(
            [
                (c + dc, r + dr) not in present
                for c, r in zip(sites.col.tolist(), sites.row.tolist(), strict=True)
            ]
        )
    return edge


@dataclass
class ThinningProblem:
    """Choose exactly ``elements`` of the candidate ``sites``.

    Parameters
    ----------
    sites : Sites
    elements : int
        Exact number of active elements N.
    wavelength : float  [m]
    scan_max : float  [rad]
    pinned, forbidden : (M,) bool arrays, optional
    symmetry : str   one of :data:`SYMMETRIES`
    objective : str   one of :data:`OBJECTIVES`
    secondary_weight : float  [1]
    oversampling : float
    source : str, optional   spec file name, for messages
    robust : thinning.engine.excitation.ErrorModel, optional
        Robust design: score each layout by a percentile of its PSL over ``robust_trials``
        random error draws (common to every layout, so that layouts are compared under the
        same errors) instead of its nominal PSL; the ASL is the mean over the draws. Costs
        about ``robust_trials`` times the work of a nominal evaluation.
    robust_trials : int
    robust_percentile : float  [%]
    robust_seed : int
    coverage : thinning.engine.coverage.Coverage, optional
        The scan set and band (default: the cone ``scan_max`` at one frequency).
    limits : thinning.engine.mask.SidelobeLimits, optional
        A sidelobe mask: the first figure is then the worst excess over it (module
        docstring).
    hpbw_max : float, optional  [deg]
        A limit on the widest half-power beamwidth, enforced by a penalty.
    envelope : thinning.search.envelope.Envelope, optional
        The density envelope the search started from (set by the density module).
    """

    sites: Sites
    elements: int
    wavelength: float
    scan_max: float = 0.0
    pinned: np.ndarray | None = None
    forbidden: np.ndarray | None = None
    symmetry: str = "none"
    objective: str = "psl"
    secondary_weight: float = 0.05
    oversampling: float = 4.0
    source: str | None = None
    notes: list = field(default_factory=list)
    robust: object = None
    robust_trials: int = 16
    robust_percentile: float = 90.0
    robust_seed: int = 0
    coverage: object = None
    limits: object = None
    hpbw_max: float | None = None
    envelope: object = None
    tiles: object = None
    tile_counts: object = None  # (T,) per-tile counts; None: planned (tile_counts.prepare)

    def __post_init__(self):
        m = len(self.sites)
        src = self.source
        if self.symmetry not in SYMMETRIES:
            raise SpecError(
                f"{where(src, 'constraints.symmetry')}{self.symmetry!r}: "
                f"expected one of {', '.join(SYMMETRIES)}"
            )
        if self.objective not in OBJECTIVES:
            raise SpecError(
                f"{where(src, 'search.objective')}{self.objective!r}: "
                f"expected one of {', '.join(OBJECTIVES)}"
            )
        n = int(self.elements)
        if n < 2:
            raise SpecError(
                f"{where(src, 'budget.elements')}{n}: at least 2 elements are needed "
                "to have sidelobes"
            )
        if n > m:
            raise SpecError(
                f"{where(src, 'budget.elements')}{n}: more than the {m} sites the aperture holds"
            )
        pinned = np.zeros(m, bool) if self.pinned is None else np.asarray(self.pinned, bool)
        forbidden = (
            np.zeros(m, bool) if self.forbidden is None else np.asarray(self.forbidden, bool)
        )
        # orbits: union of each site with its images
        partners = _orbit_partners(self.sites, self.symmetry)
        orbit = np.arange(m)
        incomplete = np.zeros(m, dtype=bool)
        for img in partners:
            incomplete |= img < 0
            ok = img >= 0
            orbit[ok] = np.minimum(orbit[ok], img[ok])
        for _ in range(3):  # settle chains (at most 4 members)
            orbit = orbit[orbit]
            for img in partners:
                ok = img >= 0
                orbit[ok] = np.minimum(orbit[ok], orbit[img[ok]])
        _, orbit_id, sizes = np.unique(orbit, return_inverse=True, return_counts=True)
        # an orbit is pinned/forbidden if any member is; incomplete orbits stay off
        n_orb = sizes.size
        o_pin = np.bincount(orbit_id, weights=pinned, minlength=n_orb) > 0
        o_forb = np.bincount(orbit_id, weights=forbidden, minlength=n_orb) > 0
        o_incomplete = np.bincount(orbit_id, weights=incomplete, minlength=n_orb) > 0
        clash = o_pin & (o_forb | o_incomplete)
        if clash.any():
            i = int(np.flatnonzero(clash[orbit_id])[0])
            why = "forbidden" if o_forb[orbit_id[i]] else f"without a {self.symmetry} partner"
            raise SpecError(f"{where(src, 'constraints')}site {i + 1} is pinned but {why}")
        if self.symmetry != "none" and o_incomplete.any():
            k = int(incomplete.sum())
            self.notes.append(f"{k} of {m} sites have no {self.symmetry} partner and stay off")
        o_off = o_forb | o_incomplete
        self.site_orbit = orbit_id
        self.orbit_size = sizes
        self.pinned_sites = o_pin[orbit_id]
        self.available_sites = ~o_off[orbit_id]
        n_pinned = int(self.pinned_sites.sum())
        free_orbits = np.flatnonzero(~o_pin & ~o_off)
        need = n - n_pinned
        if need < 0:
            raise SpecError(
                f"{where(src, 'budget.elements')}{n}: fewer than the {n_pinned} pinned sites"
            )
        # genes: free orbits, grouped into classes by orbit size
        self.gene_orbit = free_orbits
        gsize = sizes[free_orbits]
        self.class_sizes = np.unique(gsize)
        self.gene_class = np.searchsorted(self.class_sizes, gsize)
        avail = np.bincount(self.gene_class, minlength=self.class_sizes.size)
        self.class_ones = _composition(need, self.class_sizes, avail, n, src, self.symmetry)
        gene_of_orbit = np.full(n_orb, -1)
        gene_of_orbit[free_orbits] = np.arange(free_orbits.size)
        self.site_gene = gene_of_orbit[orbit_id]
        self.engine = self._make_engine()
        self.tile_grid = None
        self.tile_plan_bound_db = None  # the bound of the envelope the tile counts came from
        if self.tiles is not None:
            from ..geometry.tiles import TileGrid

            self.tile_grid = TileGrid(self.sites, self.tiles, src, usable=self.available_sites)
            self._partners = partners
            self.tile_units()  # refuses a tile grid the symmetry does not map onto itself
            rules, grid = self.tiles, self.tile_grid
            counts = self.tile_counts
            if counts is None and rules.elements_per_tile is not None and grid.full.all():
                counts = np.full(grid.n_tiles, rules.elements_per_tile)  # identical boards
                if counts.sum() != n:
                    raise SpecError(
                        f"{where(src, 'budget.elements')}{n}: {grid.n_tiles} tiles of "
                        f"exactly {rules.elements_per_tile} take {int(counts.sum())}"
                    )
            self.tile_counts = None
            if counts is not None and rules.mode != "patterns":
                self.apply_tile_counts(counts)
        if self.robust is not None:
            self._init_robust()

    def apply_tile_counts(self, counts) -> None:
        """Fix the element count of every tile (``counts``, (T,)): one class per tile orbit
        and orbit size (:mod:`thinning.search.tile_classes`), so that every method keeps
        them. :func:`thinning.search.tile_counts.prepare` plans them when the spec does not
        give them."""
        if not hasattr(self, "_untiled_classes"):
            self._untiled_classes = (self.gene_class, self.class_sizes, self.class_ones)
        self.gene_class, self.class_sizes, self.class_ones = self._untiled_classes
        t_orbit, _ = self.tile_units()
        counts = np.asarray(counts, np.int64)
        self.tile_counts = counts
        self.gene_class, self.class_sizes, self.class_ones = tile_class_layout(
            self, counts, t_orbit, self.orbit_size[self.gene_orbit], self._group_of_gene
        )
        self._swap_cache = None

    def tile_units(self) -> tuple[np.ndarray, np.ndarray]:
        """(tile orbit of every tile, granularity of each tile orbit's per-tile count)."""
        if getattr(self, "_tile_units", None) is None:
            t_orbit = tile_orbits(self, self._partners)
            size_of_gene = self.orbit_size[self.gene_orbit]
            self._group_of_gene = t_orbit[self.tile_grid.tile_of_site[self.gene_sites()[:, 0]]]
            self._tile_units = (
                t_orbit,
                tile_units(self, t_orbit, size_of_gene, self._group_of_gene),
            )
        return self._tile_units

    def _init_robust(self):
        from ..engine.excitation import ErrorModel

        model: ErrorModel = self.robust
        if model.failures >= self.elements:
            raise SpecError(
                f"{where(self.source, 'robust.failures')}{model.failures}: not fewer "
                f"than the {self.elements} elements"
            )
        m, t = len(self.sites), int(self.robust_trials)
        rng = np.random.default_rng(self.robust_seed)
        amp = 10 ** (rng.normal(0, 1, (t, m)) * model.amplitude_db / 20)
        ph = rng.normal(0, 1, (t, m)) * math.radians(model.phase_deg)
        if model.phase_bits:
            lsb = 2 * math.pi / 2**model.phase_bits
            command = -rng.uniform(0, 2 * math.pi, (t, m))  # cancels each insertion phase...
            ph += np.round(command / lsb) * lsb - command  # ...to within one step
        self._robust_weights = (amp * np.exp(1j * ph)).astype(np.complex64)
        self._robust_priority = rng.random((t, m))  # which active elements fail first
        self.robust_engine = self._make_engine(full=True)

    @property
    def masked(self) -> bool:
        """The first figure is the worst excess over a sidelobe mask, not the PSL."""
        return self.limits is not None and self.limits.any

    def region_map(self):
        """The search's sidelobe region and mask limits
        (:meth:`thinning.engine.mask.RegionMap.for_search`; None: the engine's own disc)."""
        from ..engine.mask import RegionMap
        from ..units import wavelength as frequency_of

        f0 = frequency_of(self.wavelength)
        return RegionMap.for_search(self.coverage, self.limits, self.scan_max, f0)

    def _make_engine(self, full: bool = False) -> FFTPatternEngine:
        """The FFT engine on the sites' index grid (full plane for complex excitations)."""
        if not hasattr(self, "_region_map"):
            self._region_map = self.region_map()
        return FFTPatternEngine(
            self.sites.grid_shape,
            self.sites.lattice.grid_pitch,
            self.wavelength,
            self.scan_max,
            self.oversampling,
            linear=self.sites.lattice.kind == "linear",
            full=full,
            region_map=self._region_map,
        )

    def hpbw_penalty(self, grids) -> np.ndarray:
        """The beamwidth penalty  [dB] of a stack of excitation grids (0 without
        ``hpbw_max``; :mod:`thinning.search.penalty`)."""
        if self.hpbw_max is None:
            return np.zeros(np.shape(grids)[0])
        if getattr(self, "_hpbw", None) is None:
            from .penalty import BeamwidthPenalty

            self._hpbw = BeamwidthPenalty(self)
        return self._hpbw(grids)

    # -- genomes ----------------------------------------------------------------------------
    @property
    def n_genes(self) -> int:
        return int(self.gene_orbit.size)

    @property
    def batch(self) -> int:
        """Layouts :meth:`evaluate` transforms together: :data:`BATCH`, fewer on a large grid
        (:data:`BATCH_SAMPLES` samples at most: 4 layouts at 262,000 sites)."""
        pr, pc = self.engine.pad
        return int(max(1, min(BATCH, BATCH_SAMPLES // (pr * (pc // 2 + 1)))))

    @property
    def fill(self) -> float:
        return self.elements / len(self.sites)

    def class_members(self) -> list[np.ndarray]:
        """The genes of each class, ascending: one sort rather than a scan per class (a tiled
        panel has a class per tile)."""
        order = np.argsort(self.gene_class, kind="stable")
        starts = np.searchsorted(self.gene_class[order], np.arange(self.class_ones.size + 1))
        return [order[starts[c] : starts[c + 1]] for c in range(self.class_ones.size)]

    def is_feasible(self, genome) -> bool:
        """Exactly ``class_ones[c]`` genes on in every class."""
        g = np.asarray(genome, bool)
        return bool(
            np.array_equal(
                np.bincount(self.gene_class[g], minlength=self.class_sizes.size), self.class_ones
            )
        )

    def random_genomes(self, rng: np.random.Generator, k: int, weights=None) -> np.ndarray:
        """k genomes with the exact count in every class, genes drawn uniformly (or, with
        ``weights`` per gene, drawn without replacement in proportion to them)."""
        out = np.zeros((k, self.n_genes), dtype=bool)
        for idx, ones in zip(self.class_members(), self.class_ones, strict=True):
            if ones == 0:
                continue
            if weights is None:
                keys = rng.random((k, idx.size))
            else:  # Efraimidis–Spirakis weighted sampling without replacement
                w = np.maximum(np.asarray(weights, float)[idx], 1e-300)
                keys = np.log(rng.random((k, idx.size))) / w
            top = np.argpartition(-keys, ones - 1, axis=1)[:, :ones]
            rows = np.repeat(np.arange(k), ones)
            out[rows, idx[top.ravel()]] = True
        return out

    def to_masks(self, genomes) -> np.ndarray:
        """Site masks (B, M) of genomes (B, G)."""
        g = np.atleast_2d(np.asarray(genomes, bool))
        on = np.zeros((g.shape[0], len(self.sites)), dtype=bool)
        free = self.site_gene >= 0
        on[:, free] = g[:, self.site_gene[free]]
        on |= self.pinned_sites
        return on

    def genome_of_mask(self, mask) -> np.ndarray:
        """The genome of a site mask (the inverse of :meth:`to_masks` for feasible masks)."""
        mask = np.asarray(mask, bool)
        g = np.zeros(self.n_genes, dtype=bool)
        free = self.site_gene >= 0
        g[self.site_gene[free]] = mask[free]
        return g

    def gene_positions(self) -> np.ndarray:
        """Mean (x, y) position of each gene's sites  [m] (for tapers)."""
        free = self.site_gene >= 0
        x = np.bincount(self.site_gene[free], weights=self.sites.x[free], minlength=self.n_genes)
        y = np.bincount(self.site_gene[free], weights=self.sites.y[free], minlength=self.n_genes)
        cnt = np.bincount(self.site_gene[free], minlength=self.n_genes)
        return np.column_stack([x / cnt, y / cnt])

    # -- evaluation -------------------------------------------------------------------------
    def evaluate(self, genomes) -> Evaluation:
        """Objective, PSL and ASL of genomes (B, G), in fixed batches of :data:`BATCH`."""
        masks = self.to_masks(genomes)
        if self.robust is not None:
            return self._evaluate_robust(masks)
        psl = np.empty(masks.shape[0])
        asl = np.empty(masks.shape[0])
        step = self.batch
        for s in range(0, masks.shape[0], step):
            grids = self.sites.to_grid(masks[s : s + step].astype(np.float32))
            sc = self.engine.evaluate(grids)
            psl[s : s + step] = sc.psl_db + self.hpbw_penalty(grids)
            asl[s : s + step] = sc.asl_db
        return Evaluation(self.combine(psl, asl), psl, asl)

    def _evaluate_robust(self, masks) -> Evaluation:
        """Percentile PSL and mean ASL of each mask over the fixed error draws (sampled
        pattern, not refined: the search compares layouts under identical draws)."""
        t = self._robust_weights.shape[0]
        k = self.robust.failures
        b = masks.shape[0]
        psl = np.empty(b)
        asl = np.empty(b)
        for i in range(b):
            w = self._robust_weights * masks[i]
            if k:
                pri = np.where(masks[i], self._robust_priority, np.inf)
                dead = np.argpartition(pri, k - 1, axis=1)[:, :k]
                np.put_along_axis(w, dead, 0, axis=1)
            trial_psl = np.empty(t)
            trial_asl = np.empty(t)
            for s in range(0, t, BATCH):
                grids = self.sites.to_grid(w[s : s + BATCH], dtype=np.complex64)
                sc = self.robust_engine.evaluate(grids, refine=False)
                trial_psl[s : s + BATCH] = sc.psl_db
                trial_asl[s : s + BATCH] = sc.asl
            psl[i] = np.percentile(trial_psl, self.robust_percentile)
            asl[i] = 10 * np.log10(trial_asl.mean())
        if self.hpbw_max is not None:
            psl += self.hpbw_penalty(self.sites.to_grid(masks.astype(np.float32)))
        return Evaluation(self.combine(psl, asl), psl, asl)

    def gene_sites(self) -> np.ndarray:
        """Sites of each gene, (G, 4) with −1 padding (an orbit has at most 4 sites)."""
        if getattr(self, "_gene_sites", None) is None:
            free = np.flatnonzero(self.site_gene >= 0)
            order = free[np.argsort(self.site_gene[free], kind="stable")]
            genes = self.site_gene[order]
            start = np.searchsorted(genes, np.arange(self.n_genes))
            slot = np.arange(order.size) - start[genes]
            table = np.full((self.n_genes, 4), -1, dtype=np.int64)
            table[genes, slot] = order
            self._gene_sites = table
        return self._gene_sites

    def swapped(self, base_genome, off_genes, on_genes) -> np.ndarray:
        """The K genomes (K, G) of ``base_genome`` with gene ``off_genes[k]`` switched off and
        ``on_genes[k]`` on."""
        off = np.atleast_1d(off_genes)
        out = np.repeat(np.asarray(base_genome, dtype=bool)[None], off.size, axis=0)
        rows = np.arange(off.size)
        out[rows, off] = False
        out[rows, np.atleast_1d(on_genes)] = True
        return out

    def evaluate_swaps(self, base_genome, off_genes, on_genes) -> Evaluation:
        """Figures of K swap moves of one layout, from its stored transform.

        Switching the site at grid index (j, i) on or off adds ±exp(−2πi(r·j/Pr + c·i/Pc))
        to transform sample (r, c): a separable term, so no FFT per move. With one transform
        of the base layout (kept while the same layout is asked about again):

        * the sample PSL of a move can only come from samples within 2w of the base's
          highest amplitude (w sites switched each way, each changing any sample by at most
          1), so the update is computed on those samples and their neighbours only;
        * its ASL is exact: Σ w|F + Δ|² − Σ w|F|² = 2 Re Σ_s ±H(x_s) + Σ_{s,t} ±± W(x_s − x_t),
          with W the transform of the region weights (one per problem, less the main beam's
          few samples) and H(x) = Σ_m a_m W(x − m) at the switched sites only
          (:func:`thinning.engine.fastpath.swap_asl_terms`);
        * its candidate lobes are refined on the exact pattern as in :meth:`evaluate`.

        The updates, candidates and refinement run in :func:`thinning.engine.fastpath.swap_scores`.
        The main-beam cut is the base layout's (one swap barely moves the first null); the
        figures agree with :meth:`evaluate` of the swapped layouts to float32 rounding
        (checked in the tests). A robust problem falls back to :meth:`evaluate`.

        Parameters
        ----------
        base_genome : (G,) bool
        off_genes, on_genes : (K,) int   gene switched off (on) by each move; must be on (off)
        """
        from ..engine import fastpath

        base = np.asarray(base_genome, dtype=bool)
        off = np.atleast_1d(np.asarray(off_genes, dtype=np.int64))
        on = np.atleast_1d(np.asarray(on_genes, dtype=np.int64))
        k_moves = off.size
        if self.robust is not None:
            return self.evaluate(self.swapped(base, off, on))
        eng, region = self.engine, self.engine.region
        st = self._swap_base(base)
        # the switched sites: grid indices and signs, (K, S)
        table = self.gene_sites()
        w = int(self.orbit_size[self.gene_orbit[np.concatenate([off, on])]].max())
        changed = np.concatenate([table[off, :w], table[on, :w]], axis=1)
        sign = np.concatenate([-np.ones((k_moves, w)), np.ones((k_moves, w))], axis=1)
        sign = np.where(changed >= 0, sign, 0.0)
        site = np.maximum(changed, 0)
        r0, c0 = self.sites.grid_corner
        jj = self.sites.row[site] - r0
        ii = self.sites.col[site] - c0
        rows, cols = jj.astype(np.int64), ii.astype(np.int64)
        ext = st.ext(w)
        tables = region.fast_tables(np.float64)
        kx, ky = eng._phases()
        psl, _ = fastpath.call(
            fastpath.swap_scores,
            st.p0,
            ext,
            st.f_parts[ext],
            ext // region.grid.nc,
            ext % region.grid.nc,
            st.inside[ext],
            *st.twiddles()[2:],
            st.grid,
            rows,
            cols,
            sign,
            st.peak,
            eng.fast_candidates,
            10 ** (-eng.margin_db / 10),
            tables.weight,
            tables.gain,
            tables.galias,
            st.geff[ext],
            st.pos,
            st.removed,
            tables.nbr,
            tables.srows,
            tables.scols,
            tables.geom,
            kx,
            ky,
            eng.linear,
        )
        # exact ASL: Σ w|F + Δ|² = Σ w|F|² + 2 Re Σ_s ±H(j_s, i_s) + Σ_{s,t} ±± W(j_s − j_t, ...)
        asl = (st.total + st.asl_change(rows, cols, sign)) / st.wsum / st.peak
        psl_db = 10 * np.log10(psl)
        if self.hpbw_max is not None:
            moved = np.repeat(st.grid[None], k_moves, axis=0)
            np.add.at(moved, (np.arange(k_moves)[:, None], rows, cols), sign)
            psl_db = psl_db + self.hpbw_penalty(moved)
        asl_db = 10 * np.log10(asl)
        return Evaluation(self.combine(psl_db, asl_db), psl_db, asl_db)

    def _swap_base(self, base) -> SwapBase:
        """The stored transform and figures of a base layout for :meth:`evaluate_swaps`.

        The last layout asked about is kept; a layout a few genes away from it (the move a
        local search just accepted) is derived from it by separable updates, without an FFT.
        """
        st = getattr(self, "_swap_cache", None)
        if st is not None and np.array_equal(st.genome, base):
            return st
        if st is not None:
            gone = np.flatnonzero(st.genome & ~base)
            come = np.flatnonzero(~st.genome & base)
            if 0 < gone.size + come.size <= SWAP_ADVANCE_GENES:
                sites = np.concatenate([self.gene_sites()[gone], self.gene_sites()[come]])
                sign = np.concatenate(
                    [-np.ones_like(self.gene_sites()[gone]), np.ones_like(self.gene_sites()[come])]
                )
                keep = sites >= 0
                sites, sign = sites[keep], sign[keep]
                r0, c0 = self.sites.grid_corner
                st = st.advance(
                    base.copy(), self.sites.row[sites] - r0, self.sites.col[sites] - c0, sign
                )
                self._swap_cache = st
                return st
        grid = self.sites.to_grid(self.to_masks(base).astype(np.float32))[0]
        if getattr(self, "_swap_shared", None) is None:
            self._swap_shared = {}
        st = SwapBase(self.engine, base.copy(), grid, shared=self._swap_shared)
        self._swap_cache = st
        return st

    def release(self) -> None:
        """Drop the caches a search built (the engine's windows and tables, the swap moves'
        stored transforms, the envelope's work arrays): after a search on a large panel they
        are most of the process's memory, and the outputs do not need them. The problem stays
        usable; each cache is rebuilt on next use."""
        self.engine.release()
        self._swap_cache = None
        self._swap_shared = None
        self.__dict__.pop("_envelope_cache", None)

    def combine(self, psl_db, asl_db) -> np.ndarray:
        """The objective J from PSL and ASL  [dB]."""
        w = self.secondary_weight
        if self.objective == "asl":
            return np.asarray(asl_db) + w * np.asarray(psl_db)
        return np.asarray(psl_db) + w * np.asarray(asl_db)
