"""Tiles in the thinning problem: per-tile counts as classes, and the plan of those counts.

Every search method keeps the count of each *class* of genes exactly (:mod:`.problem`): a
random draw, the genetic operators, the swap moves, annealing and the density method's
sampling all work class by class. With tiles the classes are cut by tile as well as by orbit
size, so that the element count of every tile is fixed for the whole search and kept exactly
by every method, with no repair step.

Which counts? With ``elements_per_tile`` the full tiles' counts are given. Otherwise (a
capacity ``max_elements_per_tile``, whole chips, and the partial tiles of every mode) the
counts are *planned* before the search: the density envelope of the problem without tile
classes (:func:`thinning.search.density.optimised_envelope`, the linear programme the density
method starts from), solved with every tile's expected count within its limit as a further
constraint (:func:`planned_envelope`), is summed over each tile, scaled by a common factor λ
and clipped to the limits so that the counts add up to the budget, then rounded to whole
units (a chip's channels with ``whole_chips``) by the largest remainders. Its bound (the
peak of the expected pattern) is the theory's figure for the tiled design; on the 32 × 32
benchmark panel a capacity of 48 per tile raises it from −28.4 to −24.7 dB. After the search,
:func:`transfer_polish` may still move elements between tiles within the limits.

Summing a smooth envelope over a tile and drawing exactly that many
elements in it is stratified sampling: it keeps the envelope's taper and removes the tile-to-
tile spread of the count.

With a symmetry, the tile grid must map onto itself under it (tiles.origin_mm placed
accordingly); tiles that are images of one another carry the same count (a *tile orbit*).
"""

from __future__ import annotations

import numpy as np

from ..errors import SpecError, where

__all__ = ["prepare", "plan_counts", "planned_envelope", "free_counts", "transfer_polish"]


def prepare(problem) -> None:
    """Plan and fix the tile counts of a tiled problem whose spec does not give them (a
    capacity, whole chips, partial tiles): the planned envelope's tile sums
    (:func:`plan_counts`), its bound kept as ``problem.tile_plan_bound_db``. Nothing to do
    without tiles, with boards (``patterns``: the modular method plans its own) or when the
    counts are fixed already."""
    grid = problem.tile_grid
    if grid is None or grid.rules.mode == "patterns" or problem.tile_counts is not None:
        return
    from .envelope import site_probabilities

    t_orbit, units = problem.tile_units()
    env = planned_envelope(problem)
    counts = plan_counts(problem, site_probabilities(problem, env.genes), t_orbit, units)
    problem.tile_plan_bound_db = float(env.bound_db)
    problem.notes.append(
        f"tile counts planned from the density envelope under the tile limits "
        f"(bound {env.bound_db:.2f} dB): {int(counts.min())} to {int(counts.max())} per tile"
    )
    problem.apply_tile_counts(counts)


def planned_envelope(problem, options: dict | None = None):
    """The unconstrained problem's density envelope with every tile's expected count within
    its limit (the programme of :func:`thinning.search.density.optimised_envelope` with the
    tile limits as constraints; without them under a symmetry, whose orbits spread over
    tiles), for planning the counts. Computed once per problem and envelope options (kept in
    ``problem._planned_envelopes``); the problem's other caches are left as they were."""
    from .density import envelope_key, optimised_envelope

    options = dict(options or {})
    key = envelope_key(options)
    cache = problem.__dict__.setdefault("_planned_envelopes", {})
    if key in cache:
        return cache[key]
    grid = problem.tile_grid
    classes = (problem.gene_class, problem.class_sizes, problem.class_ones)
    if hasattr(problem, "_untiled_classes"):
        problem.gene_class, problem.class_sizes, problem.class_ones = problem._untiled_classes
    problem.tile_grid = None
    if problem.symmetry == "none":
        pins = np.bincount(grid.tile_of_site[problem.pinned_sites], minlength=grid.n_tiles)
        problem._plan_caps = (grid.tile_of_site[problem.gene_sites()[:, 0]], grid.limit - pins)
    kept = problem.__dict__.pop("_envelopes", None)
    envelope = getattr(problem, "envelope", None)
    try:
        env = optimised_envelope(problem, options)
    finally:
        problem.gene_class, problem.class_sizes, problem.class_ones = classes
        problem.tile_grid = grid
        problem._plan_caps = None
        problem.__dict__.pop("_envelopes", None)
        if kept is not None:
            problem._envelopes = kept
        problem.envelope = envelope
    cache[key] = env
    return env


def plan_counts(problem, site_p, t_orbit, units) -> np.ndarray:
    """Per-tile counts (T,) from site on-probabilities ``site_p``: the envelope's tile sums
    scaled and clipped to the limits, rounded to whole units, adding up to the budget
    (module docstring)."""
    grid = problem.tile_grid
    src = problem.source
    n_groups = int(t_orbit.max()) + 1
    per = np.bincount(t_orbit, minlength=n_groups)
    pinned = np.bincount(grid.tile_of_site[problem.pinned_sites], minlength=grid.n_tiles)
    avail = np.bincount(grid.tile_of_site[problem.available_sites], minlength=grid.n_tiles)
    tau = np.bincount(grid.tile_of_site, weights=site_p, minlength=grid.n_tiles)
    # per tile orbit (per tile): target, bounds
    tau_g = np.bincount(t_orbit, weights=tau, minlength=n_groups) / per
    pin_g = np.bincount(t_orbit, weights=pinned, minlength=n_groups) / per
    hi_g = np.minimum(
        np.bincount(t_orbit, weights=grid.limit, minlength=n_groups) / per,
        np.bincount(t_orbit, weights=avail, minlength=n_groups) / per,
    )
    lo_g = np.ceil(pin_g / units) * units
    hi_g = np.floor(hi_g / units) * units
    exact = grid.rules.elements_per_tile
    full_g = np.bincount(t_orbit, weights=grid.full, minlength=n_groups) == per
    if exact is not None:
        lo_g = np.where(full_g, exact, lo_g)
        hi_g = np.where(full_g, exact, hi_g)
    bad = lo_g > hi_g
    if bad.any():
        t = int(np.flatnonzero(t_orbit == np.flatnonzero(bad)[0])[0])
        raise SpecError(
            f"{where(src, 'tiles')}tile {t + 1} (a = {grid.a[t]}, b = {grid.b[t]}) has "
            f"{int(pinned[t])} pinned sites, more than its limit of {int(grid.limit[t])}"
        )
    n = problem.elements
    lo_tot, hi_tot = float((per * lo_g).sum()), float((per * hi_g).sum())
    if not lo_tot <= n <= hi_tot:
        raise SpecError(
            f"{where(src, 'budget.elements')}{n}: the tiles take between {int(lo_tot)} and "
            f"{int(hi_tot)} elements under the [tiles] limits"
        )

    def filled(lam):
        return np.clip(lam * tau_g, lo_g, hi_g)

    lo_l, hi_l = 0.0, 1.0
    while (per * filled(hi_l)).sum() < n and hi_l < 1e12:
        hi_l *= 2
    for _ in range(100):
        mid = 0.5 * (lo_l + hi_l)
        if (per * filled(mid)).sum() < n:
            lo_l = mid
        else:
            hi_l = mid
    real = filled(hi_l)
    if not np.isfinite(real).all() or tau_g.sum() <= 0:
        real = lo_g + (hi_g - lo_g) * (n - lo_tot) / max(hi_tot - lo_tot, 1e-12)
    counts = np.clip(np.floor(real / units) * units, lo_g, hi_g)
    left = int(round(n - (per * counts).sum()))
    # hand out whole units by the largest remainders, while they fit
    order = np.argsort(-(real - counts) / units, kind="stable")
    for _ in range(2):
        for g in order:
            add = int(per[g] * units[g])
            if 0 < add <= left and counts[g] + units[g] <= hi_g[g]:
                counts[g] += units[g]
                left -= add
        if left == 0:
            break
    if left:
        raise SpecError(
            f"{where(src, 'budget.elements')}{n}: cannot be split into tiles of whole "
            f"{int(units.max())}-element units within the limits; choose a budget that is a "
            "multiple of the unit"
        )
    return counts[t_orbit].astype(np.int64)


#: Share of a tiled run (time or evaluations) the method gets before the transfer polish.
METHOD_SHARE = 0.8
#: Moves drawn per step of the polish: single-element moves (scored from the stored
#: transform) and whole-chip moves (evaluated in full).
SWAP_BATCH, CHIP_BATCH = 512, 32
#: Steps in a row without an improvement that end the polish of a run without a time limit.
POLISH_STALL = 40


def free_counts(problem) -> bool:
    """Whether the tile counts are the search's to choose (a capacity, whole chips, partial
    tiles), so that moving elements between tiles can help; not under a symmetry (tiles
    move in orbits there) nor with boards (``patterns``: the modular method's own moves)."""
    grid = problem.tile_grid
    if grid is None or grid.rules.patterns is not None or problem.symmetry != "none":
        return False
    fixed = grid.rules.elements_per_tile is not None and grid.full.all()
    return not fixed


def _bounds(problem):
    """Per-tile (low, high) counts a move may reach."""
    grid = problem.tile_grid
    unit = grid.rules.step
    pinned = np.bincount(grid.tile_of_site[problem.pinned_sites], minlength=grid.n_tiles)
    lo = np.ceil(pinned / unit) * unit
    hi = grid.limit.astype(float)
    if grid.rules.elements_per_tile is not None:
        lo = np.where(grid.full, grid.rules.elements_per_tile, lo)
        hi = np.where(grid.full, grid.rules.elements_per_tile, hi)
    return lo, hi


def transfer_polish(problem, tracker, rng) -> str | None:
    """Local search over moves that may cross tiles: a unit (one element, or a chip's
    channels with ``whole_chips``) switched off in one tile and on in another (or the same),
    within every tile's limits; the best of each batch is taken when it lowers the
    objective. The problem's tile counts follow the best layout at the end.

    Single-element moves are drawn at random in batches of :data:`SWAP_BATCH` and scored from
    the stored transform (:meth:`Tracker.evaluate_swaps`); whole-chip moves, :data:`CHIP_BATCH`
    a step, in full. It ends at the run's limit, or after :data:`POLISH_STALL` steps without
    improvement when the run has no time limit."""
    if tracker.best_genome is None:
        return None
    grid = problem.tile_grid
    unit = grid.rules.step
    tile_of_gene = grid.tile_of_site[problem.gene_sites()[:, 0]]
    lo, hi = _bounds(problem)
    genome = tracker.best_genome.copy()
    best = float(tracker.best[0])
    stopped, idle = None, 0
    while not tracker.should_stop():
        counts = np.bincount(tile_of_gene[genome], minlength=grid.n_tiles) + np.bincount(
            grid.tile_of_site[problem.pinned_sites], minlength=grid.n_tiles
        )
        on, off = np.flatnonzero(genome), np.flatnonzero(~genome)
        if unit == 1:
            k = SWAP_BATCH
            a, b = rng.choice(on, k), rng.choice(off, k)
            ta, tb = tile_of_gene[a], tile_of_gene[b]
            ok = (ta == tb) | ((counts[ta] - 1 >= lo[ta]) & (counts[tb] + 1 <= hi[tb]))
            a, b = a[ok], b[ok]
            if a.size == 0:
                continue
            ev = tracker.evaluate_swaps(genome, a, b)
            j = int(np.argmin(ev.objective))
            cand = problem.swapped(genome, a[j : j + 1], b[j : j + 1])[0]
        else:
            cands = []
            for _ in range(CHIP_BATCH):
                ta, tb = rng.integers(grid.n_tiles, size=2)
                if ta != tb and not (counts[ta] - unit >= lo[ta] and counts[tb] + unit <= hi[tb]):
                    continue
                a_pool = on[tile_of_gene[on] == ta]
                b_pool = off[tile_of_gene[off] == tb]
                if a_pool.size < unit or b_pool.size < unit:
                    continue
                g = genome.copy()
                g[rng.choice(a_pool, unit, replace=False)] = False
                g[rng.choice(b_pool, unit, replace=False)] = True
                cands.append(g)
            if not cands:
                continue
            cands = np.array(cands)
            ev = tracker.evaluate(cands)
            j = int(np.argmin(ev.objective))
            cand = cands[j]
        if ev.objective[j] < best - 1e-9:
            genome, best, idle = cand, float(ev.objective[j]), 0
        else:
            idle += 1
            if idle >= POLISH_STALL and tracker.stall_ends_run:
                stopped = "stall"
                break
    final = tracker.best_genome
    problem.apply_tile_counts(grid.counts(problem.to_masks(final)[0]))
    return stopped
