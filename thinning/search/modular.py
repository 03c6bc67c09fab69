"""Modular panels: at most T distinct boards, each tile one of them in one orientation.

With ``[tiles] patterns = T`` the full tiles are built from at most T board designs (occupancy
patterns of the nx × ny tile); every full tile uses one board, mounted in one of the allowed
orientations (:mod:`thinning.geometry.tiles`). The search chooses the boards and the
assignment of board and orientation to every tile; partial tiles (cut by the outline, a hole
or the clearance) are variants of their own, with free occupancy and a fixed count.

Counts. The per-tile counts of the unconstrained density envelope are planned first
(:func:`thinning.search.tile_counts.plan_counts`, within the tile limits); the full tiles are
grouped by that count into T groups (contiguous in count: a 1-D k-means), and each board's
count is the group's mean, rounded to whole units (chips with ``whole_chips``) and adjusted so
that Σ boards' count × tiles using them + the partial tiles' counts = the budget exactly. Boards
may therefore differ in count, which is how a modular panel keeps a taper.

Search: simulated annealing (Kirkpatrick, Gelatt & Vecchi, Science 220, 1983) over moves that
all keep every count: swap an on and an off position of one board (every tile using it
changes); turn or mirror one tile; exchange the boards of two tiles; swap an on and an off
site of one partial tile. Each step draws a batch of moves, evaluates them together (one FFT
batch) and takes the best by the Metropolis rule at a temperature falling geometrically (in
dB of objective) over the run's time or evaluations; on a stall the walk restarts from the
best layout, shaken.
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
#: Start and end temperature of the walk  [dB of objective].
HOT_DB, COLD_DB = 0.3, 0.01
#: Steps without a new best before the walk restarts from the best layout.
STALL_STEPS = 300


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
    from .density import optimised_envelope
    from .envelope import site_probabilities

    grid = problem.tile_grid
    t_orbit = np.arange(grid.n_tiles)
    units = np.full(grid.n_tiles, grid.rules.step, np.int64)
    env = optimised_envelope(problem, {})
    problem.envelope = None
    p = site_probabilities(problem, env.genes)
    return tc.plan_counts(problem, p, t_orbit, units), p


def plan_boards(problem, targets, n_boards) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """(group of every full tile, count of every board, counts of the partial tiles): full
    tiles grouped by target count into at most ``n_boards`` groups, counts rounded to units and
    adjusted to the budget (module docstring)."""
    grid = problem.tile_grid
    rules = grid.rules
    step = rules.step
    full = np.flatnonzero(grid.full)
    part = np.flatnonzero(~grid.full)
    cap = int(grid.limit[full].min()) if full.size else 0
    t_full = targets[full].astype(float)
    k = max(1, min(n_boards, full.size, len(np.unique(t_full))))
    # 1-D k-means on the sorted targets (contiguous groups)
    order = np.argsort(t_full, kind="stable")
    edges = np.linspace(0, full.size, k + 1).round().astype(int)
    group = np.zeros(full.size, np.int64)
    for _ in range(50):
        for g in range(k):
            group[order[edges[g] : edges[g + 1]]] = g
        means = np.array([t_full[group == g].mean() for g in range(k)])
        centre = np.sort(means)
        cut = (centre[:-1] + centre[1:]) / 2
        new = np.searchsorted(cut, t_full[order])
        sizes = np.bincount(new, minlength=k)
        if np.any(sizes == 0):
            break
        new_edges = np.concatenate([[0], np.cumsum(sizes)])
        if np.array_equal(new_edges, edges):
            break
        edges = new_edges
    for g in range(k):
        group[order[edges[g] : edges[g + 1]]] = g
    mult = np.bincount(group, minlength=k)
    means = np.array([t_full[group == g].mean() for g in range(k)])
    part_counts = targets[part].astype(np.int64)
    need = problem.elements - int(part_counts.sum())
    best, best_err = None, math.inf
    base = np.round(means / step).astype(int)
    span = range(-6, 7) if k <= 4 else range(-2, 3)
    for d in itertools.product(span, repeat=k) if k <= 5 else [tuple([0] * k)]:
        c = (base + np.array(d)) * step
        if np.any(c < 0) or np.any(c > cap):
            continue
        if int((mult * c).sum()) != need:
            continue
        err = float(((c - means) ** 2 * mult).sum())
        if err < best_err:
            best, best_err = c, err
    if best is None:  # let the partial tiles take up the difference, within their limits
        c = np.clip(base * step, 0, cap)
        diff = need - int((mult * c).sum())
        room_up = grid.limit[part] - part_counts
        room_dn = part_counts.copy()
        for i in np.argsort(-room_up if diff > 0 else -room_dn):
            if diff == 0:
                break
            move = min(abs(diff), int(room_up[i] if diff > 0 else room_dn[i]))
            move -= move % step
            part_counts[i] += move if diff > 0 else -move
            diff -= move if diff > 0 else -move
        if diff:
            raise SpecError(
                f"{where(problem.source, 'budget.elements')}{problem.elements}: cannot be "
                f"made of {k} board(s) on {full.size} full tiles (tiles per board "
                f"{mult.tolist()}) and the partial tiles; choose a budget that fits"
            )
        best = c
    return group, best.astype(np.int64), part_counts


class ModularState:
    """Boards, their assignment to the full tiles, and the partial tiles' sites."""

    def __init__(self, problem, rng, site_p, groups, board_counts, part_counts):
        self.problem = problem
        grid = self.grid = problem.tile_grid
        self.rng = rng
        self.table = grid.site_table()
        self.full = np.flatnonzero(grid.full)
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
        return other

    def mask(self) -> np.ndarray:
        m = self.part_mask | self.pinned
        for i, t in enumerate(self.full):
            occ = transform(self.boards[self.assign[i]], self.transforms[self.orient[i]])
            m[self.table[t][occ]] = True
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
    state = ModularState(problem, rng, site_p, groups, board_counts, part_counts)
    cur = float(tracker.evaluate(problem.genome_of_mask(state.mask())[None]).objective[0])
    best_state, best = state, cur
    since = 0
    hot, cold = (
        float(options.get("anneal_hot_db", HOT_DB)),
        float(options.get("anneal_cold_db", COLD_DB)),
    )
    while not tracker.should_stop():
        frac = _progress(tracker)
        temp = hot * (cold / hot) ** frac
        cands = state.moves(batch)
        genomes = np.array([problem.genome_of_mask(s.mask()) for s in cands])
        obj = tracker.evaluate(genomes).objective
        j = int(np.argmin(obj))
        if obj[j] < cur or rng.random() < math.exp(-(obj[j] - cur) / max(temp, 1e-9)):
            state, cur = cands[j], float(obj[j])
        if cur < best - 1e-9:
            best_state, best, since = state, cur, 0
        else:
            since += 1
        if since >= STALL_STEPS:
            if tracker.stall_ends_run:
                return "stall"
            state, cur, since = best_state, best, 0  # restart from the best, shaken
            for _ in range(3):
                state = state.moves(1)[0]
            cur = float(tracker.evaluate(problem.genome_of_mask(state.mask())[None]).objective[0])
    return tracker.stop_reason()


def _progress(tracker) -> float:
    """The run's progress in [0, 1]: by time with a time limit, else by evaluations."""
    if tracker.time_limit_s:
        return min(1.0, tracker.elapsed / tracker.time_limit_s)
    if tracker.max_evaluations:
        return min(1.0, tracker.evaluations / tracker.max_evaluations)
    return 0.5
