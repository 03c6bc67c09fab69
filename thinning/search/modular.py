"""Modular panels: at most T distinct boards, each tile one of them in one orientation.

With ``[tiles] patterns = T`` the full tiles are built from at most T board designs (occupancy
patterns of the nx × ny tile); every full tile uses one board, mounted in one of the allowed
orientations (:mod:`thinning.geometry.tiles`). The search chooses the boards and the
assignment of board and orientation to every tile; partial tiles (cut by the outline, a hole
or the clearance) are variants of their own, with free occupancy and a fixed count.

Counts. The per-tile counts of the density envelope under the tile limits are planned first
(:func:`thinning.search.tile_counts.plan_counts`); the full tiles are grouped by that count
into at most T groups (contiguous in count), and each board's count is the group's mean,
rounded to whole units (chips with ``whole_chips``) and adjusted so that Σ boards' count ×
tiles using them + the partial tiles' counts = the budget exactly; of the groupings, the one
whose expected pattern has the lowest peak is kept (:func:`plan_boards`). Boards may therefore
differ in count, which is how a modular panel keeps a taper.

Search: simulated annealing (Kirkpatrick, Gelatt & Vecchi, Science 220, 1983) over moves that
all keep every count: swap an on and an off position of one board (every tile using it
changes); turn or mirror one tile; exchange the boards of two tiles; swap an on and an off
site of one partial tile. Each step draws a batch of moves, evaluates them together (one FFT
batch) and takes the best by the Metropolis rule at a temperature falling geometrically (in
dB of objective) over a cycle of steps; each cycle reheats from the best layout, shaken. Only
the stop depends on the clock: a run is reproducible for a seed and evaluation budget, and a
longer run continues a shorter one.
"""

from __future__ import annotations

import itertools
import math

import numpy as np

from ..errors import SpecError, where
from ..geometry.tiles import transform
from . import tile_counts as tc

__all__ = ["ModularState", "plan_boards", "run"]

#: Moves evaluated together per step.
BATCH = 32
#: Groupings of the tiles into boards whose expected pattern is compared (at most).
MAX_GROUPINGS = 200
#: Start and end temperature of the walk  [dB of objective].
HOT_DB, COLD_DB = 0.3, 0.01
#: Steps of one cooling cycle (each a batch of moves); a cycle ends by reheating from the best
#: layout, shaken by a few moves. A cycle without a new best ends a run without a time limit.
CYCLE_STEPS, SHAKE_MOVES = 1500, 4


def _check(problem):
    src = problem.source
    if problem.symmetry != "none":
        raise SpecError(
            f"{where(src, 'constraints.symmetry')}{problem.symmetry!r}: tiles.patterns "
            "(modular boards) take no symmetry; the board orientations replace it"
        )
    grid = problem.tile_grid
    if problem.pinned_sites[grid.full[grid.tile_of_site]].any():
        raise SpecError(
            f"{where(src, 'constraints')}pinned sites inside full tiles: with tiles.patterns "
            "every full tile is one of the boards; pin only in partial tiles"
        )


def _plan_tile_counts(problem) -> np.ndarray:
    """Per-tile target counts from the density envelope, within the limits."""
    from .envelope import site_probabilities

    grid = problem.tile_grid
    t_orbit = np.arange(grid.n_tiles)
    units = np.full(grid.n_tiles, grid.rules.step, np.int64)
    env = tc.planned_envelope(problem)
    problem.tile_plan_bound_db = float(env.bound_db)
    p = site_probabilities(problem, env.genes)
    return tc.plan_counts(problem, p, t_orbit, units), p


def _groupings(t_full: np.ndarray, k: int):
    """Groupings of the full tiles into k groups contiguous in target count (tiles of equal
    target kept together): every choice of k − 1 cuts among the sorted targets' steps, or,
    when there are too many, the split into equal numbers."""
    order = np.argsort(t_full, kind="stable")
    st = t_full[order]
    steps = [i for i in range(1, st.size) if st[i] != st[i - 1]]
    k = max(1, min(k, len(steps) + 1))
    if math.comb(len(steps), k - 1) > MAX_GROUPINGS:
        picks = [tuple(steps[int(round(q))] for q in np.linspace(0, len(steps) - 1, k + 1)[1:-1])]
    else:
        picks = itertools.combinations(steps, k - 1)
    for cuts in picks:
        group = np.zeros(t_full.size, np.int64)
        for c in cuts:
            group[order[c:]] += 1
        yield group


def _board_counts(problem, group, t_full, part_counts, cap, step):
    """Board counts near the groups' mean targets, in whole units, adding up to the budget
    with the partial tiles (which take up what the boards cannot, within their limits);
    (board counts, partial counts) or None."""
    grid = problem.tile_grid
    part = np.flatnonzero(~grid.full)
    k = int(group.max()) + 1
    mult = np.bincount(group, minlength=k)
    means = np.array([t_full[group == g].mean() for g in range(k)])
    need = problem.elements - int(part_counts.sum())
    base = np.round(means / step).astype(int)
    best, best_err = None, math.inf
    span = range(-6, 7) if k <= 4 else range(-2, 3)
    for d in itertools.product(span, repeat=k) if k <= 5 else [tuple([0] * k)]:
        c = (base + np.array(d)) * step
        if np.any(c < 0) or np.any(c > cap) or int((mult * c).sum()) != need:
            continue
        err = float(((c - means) ** 2 * mult).sum())
        if err < best_err:
            best, best_err = c, err
    if best is not None:
        return best.astype(np.int64), part_counts
    c = np.clip(base * step, 0, cap)
    diff = need - int((mult * c).sum())
    parts = part_counts.copy()
    room_up = grid.limit[part] - parts
    for i in np.argsort(-room_up if diff > 0 else -parts):
        if diff == 0:
            break
        move = min(abs(diff), int(room_up[i] if diff > 0 else parts[i]))
        move -= move % step
        parts[i] += move if diff > 0 else -move
        diff -= move if diff > 0 else -move
    return None if diff else (c.astype(np.int64), parts)


def plan_boards(problem, targets, n_boards) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """(group of every full tile, count of every board, counts of the partial tiles): the
    full tiles grouped by planned count into at most ``n_boards`` groups (contiguous in
    count), each group's board count its mean rounded to units and adjusted to the budget;
    of the groupings tried (:func:`_groupings`), the one whose expected pattern (each tile
    filled uniformly to its count) has the lowest peak sidelobe
    (:func:`thinning.search.envelope.envelope_bound`)."""
    from .envelope import envelope_bound

    grid = problem.tile_grid
    step = grid.rules.step
    full = np.flatnonzero(grid.full)
    part = np.flatnonzero(~grid.full)
    cap = int(grid.limit[full].min()) if full.size else 0
    t_full = targets[full].astype(float)
    part_counts = targets[part].astype(np.int64)
    usable = np.maximum(grid.usable_count, 1)
    best = None
    for group in _groupings(t_full, max(1, min(n_boards, full.size))):
        got = _board_counts(problem, group, t_full, part_counts, cap, step)
        if got is None:
            continue
        boards, parts = got
        per_tile = targets.astype(float).copy()
        per_tile[full] = boards[group]
        per_tile[part] = parts
        site_p = np.where(grid.usable, (per_tile / usable)[grid.tile_of_site], 0.0)
        site_p = np.where(problem.pinned_sites, 1.0, site_p)
        bound, _ = envelope_bound(problem, site_p)
        if best is None or bound < best[0]:
            best = (bound, group, boards, parts)
    if best is None:
        raise SpecError(
            f"{where(problem.source, 'budget.elements')}{problem.elements}: cannot be made of "
            f"at most {n_boards} board(s) on {full.size} full tiles and the partial tiles; "
            "choose a budget that fits"
        )
    problem.tile_plan_bound_db = float(best[0])  # the boards' own expected pattern
    return best[1], best[2], best[3]


class ModularState:
    """Boards, their assignment to the full tiles, and the partial tiles' sites."""

    def __init__(self, problem, rng, site_p, groups, board_counts, part_counts):
        self.problem = problem
        grid = self.grid = problem.tile_grid
        self.rng = rng
        self.table = grid.site_table()
        self.full = np.flatnonzero(grid.full)
        self.table_flat = self.table[self.full].reshape(self.full.size, -1)
        self.oriented = None  # the boards in every orientation, built on first use
        self.part = np.flatnonzero(~grid.full)
        self.transforms = grid.transforms
        ny, nx = grid.ny, grid.nx
        self.assign = groups.copy()  # board of each full tile
        self.orient = rng.integers(0, len(self.transforms), self.full.size)
        self.boards = np.zeros((board_counts.size, ny, nx), bool)
        pos_p = np.where(self.table >= 0, site_p[np.maximum(self.table, 0)], 0.0)
        for b, c in enumerate(board_counts):
            w = pos_p[self.full[groups == b]].mean(axis=0).ravel() + 1e-3
            keys = np.log(rng.random(w.size)) / w
            self.boards[b].flat[np.argsort(-keys)[: int(c)]] = True
        # partial tiles: free sites (usable, not pinned) with a fixed count each
        self.pinned = problem.pinned_sites
        self.part_mask = np.zeros(len(problem.sites), bool)
        for t, c in zip(self.part, part_counts, strict=True):
            free = self.table[t][self.table[t] >= 0]
            free = free[~self.pinned[free]]
            need = int(c) - int(self.pinned[self.table[t][self.table[t] >= 0]].sum())
            if need < 0 or need > free.size:
                raise SpecError(
                    f"{where(problem.source, 'tiles')}tile {t + 1}: {int(c)} elements do not "
                    "fit its sites and pins"
                )
            w = site_p[free] + 1e-3
            keys = np.log(rng.random(free.size)) / w
            self.part_mask[free[np.argsort(-keys)[:need]]] = True

    def copy(self):
        other = object.__new__(ModularState)
        other.__dict__.update(self.__dict__)
        other.assign, other.orient = self.assign.copy(), self.orient.copy()
        other.boards, other.part_mask = self.boards.copy(), self.part_mask.copy()
        other.oriented = None if self.oriented is None else self.oriented.copy()
        return other

    def _orient(self, b: int) -> np.ndarray:
        """Board b in every allowed orientation, (orientations, ny·nx)."""
        return np.stack([transform(self.boards[b], t).ravel() for t in self.transforms])

    def mask(self) -> np.ndarray:
        if self.oriented is None:
            self.oriented = np.stack([self._orient(b) for b in range(self.boards.shape[0])])
        m = self.part_mask | self.pinned
        occ = self.oriented[self.assign, self.orient]  # (full tiles, ny·nx)
        m[self.table_flat[occ]] = True
        return m

    def moves(self, k: int) -> list:
        """k random count-preserving moves of this state (each a new state)."""
        rng = self.rng
        kinds = ["board"]
        if len(self.transforms) > 1:
            kinds.append("orient")
        if self.boards.shape[0] > 1 and len(np.unique(self.assign)) > 1:
            kinds.append("exchange")
        if self.part.size:
            kinds.append("partial")
        out = []
        for _ in range(k):
            s = self.copy()
            kind = kinds[rng.integers(len(kinds))]
            if kind == "board":
                b = rng.integers(s.boards.shape[0])
                flat = s.boards[b].ravel()
                on, off = np.flatnonzero(flat), np.flatnonzero(~flat)
                if on.size and off.size:
                    flat[rng.choice(on)] = False
                    flat[rng.choice(off)] = True
                    if s.oriented is not None:
                        s.oriented[b] = s._orient(b)
            elif kind == "orient":
                i = rng.integers(s.full.size)
                s.orient[i] = (s.orient[i] + rng.integers(1, len(s.transforms))) % len(s.transforms)
            elif kind == "exchange":
                i, j = rng.choice(s.full.size, 2, replace=False)
                s.assign[i], s.assign[j] = s.assign[j], s.assign[i]
                s.orient[i], s.orient[j] = s.orient[j], s.orient[i]
            else:
                t = s.part[rng.integers(s.part.size)]
                sites = s.table[t][s.table[t] >= 0]
                sites = sites[~s.pinned[sites]]
                on, off = sites[s.part_mask[sites]], sites[~s.part_mask[sites]]
                if on.size and off.size:
                    s.part_mask[rng.choice(on)] = False
                    s.part_mask[rng.choice(off)] = True
            out.append(s)
        return out


def run(problem, tracker, rng: np.random.Generator, options: dict) -> str:
    """Anneal the boards and their assignment (module docstring); returns why it stopped."""
    _check(problem)
    rules = problem.tile_grid.rules
    targets, site_p = _plan_tile_counts(problem)
    groups, board_counts, part_counts = plan_boards(problem, targets, int(rules.patterns))
    problem.notes.append(
        f"{board_counts.size} board(s) of {', '.join(map(str, board_counts.tolist()))} "
        f"elements on {int(problem.tile_grid.full.sum())} full tiles "
        f"({', '.join(map(str, np.bincount(groups).tolist()))} tiles each)"
    )
    batch = int(options.get("batch", BATCH))
    cycle = int(options.get("anneal_cycle", CYCLE_STEPS))
    hot = float(options.get("anneal_hot_db", HOT_DB))
    cold = float(options.get("anneal_cold_db", COLD_DB))
    state = ModularState(problem, rng, site_p, groups, board_counts, part_counts)
    first = problem.gene_sites()[:, 0]  # without symmetry a gene is one site
    direct = bool((problem.orbit_size[problem.gene_orbit] == 1).all())
    cur = float(tracker.evaluate(problem.genome_of_mask(state.mask())[None]).objective[0])
    best_state, best = state, cur
    step, improved = 0, False
    while not tracker.should_stop():
        temp = hot * (cold / hot) ** (step / cycle)
        cands = state.moves(batch)
        masks = np.array([s.mask() for s in cands])
        genomes = (
            masks[:, first] if direct else np.array([problem.genome_of_mask(m) for m in masks])
        )
        obj = tracker.evaluate(genomes).objective
        j = int(np.argmin(obj))
        if obj[j] < cur or rng.random() < math.exp(-(obj[j] - cur) / temp):
            state, cur = cands[j], float(obj[j])
        if cur < best - 1e-9:
            best_state, best, improved = state, cur, True
        step += 1
        if step >= cycle:  # the end of a cycle: reheat from the best layout, shaken
            if not improved and tracker.stall_ends_run:
                return "stall"
            step, improved = 0, False
            state = best_state
            for _ in range(SHAKE_MOVES):
                state = state.moves(1)[0]
            cur = float(tracker.evaluate(problem.genome_of_mask(state.mask())[None]).objective[0])
    return tracker.stop_reason()
