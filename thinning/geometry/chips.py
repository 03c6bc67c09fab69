"""Chips: each tile's elements grouped into chips of at most C neighbouring channels.

A tile of n elements carries ⌈n / C⌉ chips (C = ``channels_per_chip``): the fewest that can
feed it. The groups are *compact*: the grouping minimises the longest distance from an element
to the centre of its chip (the mean of the chip's element positions), the length of the
longest feed line a chip at its group's centre would need. The problem is a capacitated,
bottleneck (min-max) clustering; it is solved per tile by a heuristic that is exact on the
small cases the tests enumerate:

1. starts: a regular split (recursive bisection of the tile's elements across their longer
   extent, in shares proportional to the chips on each side) and a few k-means++ seedings
   (Arthur and Vassilvitskii, "k-means++: the advantages of careful seeding", SODA 2007) with
   fixed seeds;
2. capacitated k-means from each start: every element assigned to one of C slots per chip by
   an optimal assignment (:func:`scipy.optimize.linear_sum_assignment`, squared distances to
   the centres), the centres recomputed as the means, until the assignment stops changing;
3. a bottleneck descent: while one chip's group can be made smaller by swapping one of its
   elements with one of a nearby chip's, or by moving one element between them (capacity
   allowing, no chip emptied), the move that most lowers the larger of the two chips' longest
   distances is taken. Each move lowers the sorted list of chip radii lexicographically, so
   the descent ends; it ends at a grouping no single swap or move improves.

The start that ends with the smallest longest distance (then the smallest sum of squared
distances) is kept. Everything is deterministic.

Identical boards get identical chips: tiles whose element sets are congruent (the same up to a
translation, the quarter turns and the mirrors of the plane: the board and its mounted
orientations) are grouped once, on the set's canonical form, and the grouping is carried over.
So a board's chips and channels belong to the board, as they do on the hardware.

Numbering. Chips are numbered from 1 tile by tile in tile order, and within a tile by their
centre: bottom row first, left to right (the order of tile ids). Channels are numbered from 1
within a chip counter-clockwise by angle about the chip centre, starting from the +x
direction, *in the board's canonical frame*; a board mounted turned keeps its numbering (its
channel 1 is the same pad), so in the panel frame its channels start at the turned direction,
and a mirrored board's run clockwise.
"""

from __future__ import annotations

import itertools
import math
from dataclasses import dataclass
from functools import lru_cache

import numpy as np

from ..errors import GeometryError

__all__ = ["ChipGroups", "group_chips"]

#: Fixed seeds of the k-means++ starts (one start per seed).
KMEANS_SEEDS = (1, 2, 3)

#: Capacitated k-means rounds at most (it usually settles in a few).
KMEANS_ROUNDS = 30

#: Nearest chips (by centre) a chip tries swaps and moves with.
NEIGHBOUR_CHIPS = 8

#: Largest number of two-way splits of two chips' elements enumerated (C(16, 8) = 12,870: up
#: to 8 channels per chip the two chips are split anew exactly).
RESPLIT_SUBSETS = 13000

#: Resolution of the canonical form of a tile's element set  [m].
CANON_RESOLUTION = 1e-7


@dataclass
class ChipGroups:
    """The chips of a layout.

    Attributes
    ----------
    chip : (N,) int   1-based global chip of each element (layout order)
    channel : (N,) int   1-based channel of each element within its chip
    centre : (K, 2) float  [m]   chip centres (the mean of their elements)
    tile_of_chip : (K,) int   0-based tile of each chip
    radius : (K,) float  [m]   each chip's longest element-to-centre distance
    longest : float  [m]   the largest of ``radius`` (0 without chips)
    per_tile : (T,) int   chips per tile (⌈n_t / C⌉)
    channels_per_chip : int
    """

    chip: np.ndarray
    channel: np.ndarray
    centre: np.ndarray
    tile_of_chip: np.ndarray
    radius: np.ndarray
    longest: float
    per_tile: np.ndarray
    channels_per_chip: int

    @property
    def n_chips(self) -> int:
        return int(self.tile_of_chip.size)


def group_chips(x, y, tile, channels_per_chip: int, n_tiles: int | None = None) -> ChipGroups:
    """Group every tile's elements into compact chips (module docstring).

    Parameters
    ----------
    x, y : (N,) array_like  [m]   element positions, layout order
    tile : (N,) array_like of int   0-based tile of each element
    channels_per_chip : int   C, the most elements a chip feeds
    n_tiles : int, optional   T (default ``max(tile) + 1``); tiles without elements get no chip

    Returns
    -------
    ChipGroups
    """
    x = np.asarray(x, np.float64).ravel()
    y = np.asarray(y, np.float64).ravel()
    tile = np.asarray(tile, np.int64).ravel()
    if not (x.size == y.size == tile.size):
        raise GeometryError(
            f"group_chips: x, y and tile have {x.size}, {y.size} and {tile.size} values"
        )
    c = int(channels_per_chip)
    if c < 1:
        raise GeometryError(f"channels_per_chip: {channels_per_chip!r} must be at least 1")
    if tile.size and tile.min() < 0:
        raise GeometryError("group_chips: a tile index is negative")
    t_count = int(n_tiles) if n_tiles is not None else (int(tile.max()) + 1 if tile.size else 0)
    if tile.size and tile.max() >= t_count:
        raise GeometryError(f"group_chips: a tile index is >= n_tiles ({t_count})")
    n = x.size
    xy = np.column_stack([x, y])
    chip = np.zeros(n, np.int64)
    channel = np.zeros(n, np.int64)
    centres, tiles, radii = [], [], []
    per_tile = np.zeros(t_count, np.int64)
    cache: dict = {}
    order = np.argsort(tile, kind="stable")
    bounds = np.searchsorted(tile[order], np.arange(t_count + 1))
    for t in range(t_count):
        members = order[bounds[t] : bounds[t + 1]]
        if members.size == 0:
            continue
        key, perm, canon = _canonical(xy[members])
        if key not in cache:
            labels = _group_tile(canon, c)
            cache[key] = (labels, _channels(canon, labels))
        labels_c, chan_c = cache[key]
        labels = np.empty(members.size, np.int64)
        labels[perm] = labels_c
        chans = np.empty(members.size, np.int64)
        chans[perm] = chan_c
        k = int(labels.max()) + 1
        pts = xy[members]
        cen = np.array([pts[labels == j].mean(axis=0) for j in range(k)])
        # chips within a tile: bottom row first, left to right (the order of tile ids)
        rank = np.lexsort((np.round(cen[:, 0] / 1e-6), np.round(cen[:, 1] / 1e-6)))
        new_of_old = np.empty(k, np.int64)
        new_of_old[rank] = np.arange(k)
        first = len(centres)
        chip[members] = first + new_of_old[labels] + 1
        channel[members] = chans
        cen = cen[rank]
        d = np.hypot(*(pts - cen[new_of_old[labels]]).T)
        rad = np.zeros(k)
        np.maximum.at(rad, new_of_old[labels], d)
        centres.extend(cen)
        radii.extend(rad)
        tiles.extend([t] * k)
        per_tile[t] = k
    radius = np.asarray(radii, np.float64)
    return ChipGroups(
        chip=chip,
        channel=channel,
        centre=np.asarray(centres, np.float64).reshape(-1, 2),
        tile_of_chip=np.asarray(tiles, np.int64),
        radius=radius,
        longest=float(radius.max()) if radius.size else 0.0,
        per_tile=per_tile,
        channels_per_chip=c,
    )


# -- congruent tiles ---------------------------------------------------------------------------
_PLANE_MAPS = (
    ((1, 0), (0, 1)),
    ((0, -1), (1, 0)),
    ((-1, 0), (0, -1)),
    ((0, 1), (-1, 0)),
    ((-1, 0), (0, 1)),
    ((1, 0), (0, -1)),
    ((0, 1), (1, 0)),
    ((0, -1), (-1, 0)),
)


def _canonical(pts: np.ndarray) -> tuple[bytes, np.ndarray, np.ndarray]:
    """(key, perm, canon): the canonical form of a point set under translations, quarter turns
    and mirrors; ``canon[j]`` is the image of ``pts[perm[j]]``."""
    best = None
    for m in _PLANE_MAPS:
        q = pts @ np.asarray(m, np.float64).T
        q = q - q.min(axis=0)
        r = np.round(q / CANON_RESOLUTION).astype(np.int64)
        perm = np.lexsort((r[:, 1], r[:, 0]))
        key = r[perm].tobytes()
        if best is None or key < best[0]:
            best = (key, perm, q[perm])
    return best


# -- one tile ----------------------------------------------------------------------------------
def _group_tile(p: np.ndarray, c: int) -> np.ndarray:
    """Chip labels 0..K-1 of the points ``p`` (n, 2), K = ⌈n / c⌉ (module docstring)."""
    n = len(p)
    k = -(-n // c)
    if k == 1:
        return np.zeros(n, np.int64)
    starts = [_regular_split(p, k, c)]
    for seed in KMEANS_SEEDS:
        starts.append(_assign(p, _kmeanspp(p, k, np.random.default_rng(seed)), c))
    best, best_score = None, None
    seen: dict = {}  # best split of a pair of chips' elements, shared by the starts
    for labels in starts:
        labels = _descend(p, _kmeans(p, labels, k, c), k, c, seen)
        cen = _centres(p, labels, k)
        d2 = np.sum((p - cen[labels]) ** 2, axis=1)
        score = (float(np.sqrt(d2.max())), float(d2.sum()))
        if best_score is None or score < best_score:
            best, best_score = labels, score
    return best


def _centres(p, labels, k) -> np.ndarray:
    counts = np.bincount(labels, minlength=k)
    sums = np.stack([np.bincount(labels, p[:, d], minlength=k) for d in (0, 1)], axis=1)
    return sums / counts[:, None]


def _regular_split(p, k, c) -> np.ndarray:
    """Recursive bisection across the longer extent, in shares of chips."""
    labels = np.zeros(len(p), np.int64)

    def split(idx, kk, first):
        if kk == 1:
            labels[idx] = first
            return
        k1 = kk // 2
        n1 = int(round(len(idx) * k1 / kk))
        n1 = min(max(n1, len(idx) - (kk - k1) * c, k1), k1 * c)
        q = p[idx]
        ax = int(np.ptp(q[:, 1]) > np.ptp(q[:, 0]))
        s = idx[np.lexsort((q[:, 1 - ax], q[:, ax]))]
        split(s[:n1], k1, first)
        split(s[n1:], kk - k1, first + k1)

    split(np.arange(len(p)), k, 0)
    return labels


def _kmeanspp(p, k, rng) -> np.ndarray:
    """k-means++ seeding: each next centre drawn with probability ∝ squared distance."""
    cen = [p[rng.integers(len(p))]]
    d2 = np.sum((p - cen[0]) ** 2, axis=1)
    for _ in range(1, k):
        total = d2.sum()
        i = int(rng.choice(len(p), p=d2 / total)) if total > 0 else int(rng.integers(len(p)))
        cen.append(p[i])
        d2 = np.minimum(d2, np.sum((p - p[i]) ** 2, axis=1))
    return np.array(cen)


def _assign(p, cen, c) -> np.ndarray:
    """Optimal assignment to ``c`` slots per centre (least total squared distance)."""
    from scipy.optimize import linear_sum_assignment

    d2 = np.sum((p[:, None, :] - cen[None, :, :]) ** 2, axis=2)
    rows, cols = linear_sum_assignment(np.repeat(d2, c, axis=1))
    labels = np.empty(len(p), np.int64)
    labels[rows] = cols // c
    return labels


def _kmeans(p, labels, k, c) -> np.ndarray:
    """Capacitated k-means from ``labels``: assign, recompute the means, until stable. No chip
    ends empty: with k = ⌈n/c⌉ chips, k − 1 of them cannot hold n elements."""
    for _ in range(KMEANS_ROUNDS):
        new = _assign(p, _centres(p, labels, k), c)
        if np.array_equal(new, labels):
            break
        labels = new
    return labels


def _descend(p, labels, k, c, seen: dict) -> np.ndarray:
    """Bottleneck descent between nearby chips (module docstring): the two chips' elements
    split anew, exactly, when C ≤ 8; single swaps and moves otherwise."""
    labels = labels.copy()
    scale = float(np.ptp(p, axis=0).max()) or 1.0
    tol = 1e-9 * scale
    for _ in range(50 * k * c):
        cen = _centres(p, labels, k)
        rad = np.zeros(k)
        np.maximum.at(rad, labels, np.hypot(*(p - cen[labels]).T))
        moved = False
        for a in np.argsort(-rad, kind="stable"):
            if math.comb(2 * c, c) <= RESPLIT_SUBSETS:
                move = _best_resplit(p, labels, cen, rad, int(a), c, tol, seen)
            else:
                move = _best_move(p, labels, cen, rad, int(a), k, c, tol)
            if move is not None:
                for i, lab in move:
                    labels[i] = lab
                moved = True
                break
        if not moved:
            break
    return labels


@lru_cache(maxsize=64)
def _splits(n: int, c: int) -> np.ndarray:
    """Every split of n elements into two chips of 1..c each: (S, n) bool, True = first chip
    (each split once: element 0 in the first chip)."""
    rows = []
    for size in range(max(1, n - c), min(c, n - 1) + 1):
        for rest in itertools.combinations(range(1, n), size - 1):
            row = np.zeros(n, bool)
            row[[0, *rest]] = True
            rows.append(row)
    return np.array(rows, bool).reshape(-1, n)


def _split_radii(q: np.ndarray, masks: np.ndarray) -> np.ndarray:
    """The larger of the two chips' radii for every split ``masks`` (S, n) of points q."""
    q = q - q.mean(axis=0)  # the first chip's sum is then minus the second's
    qq = np.einsum("ij,ij->i", q, q)
    w = masks.astype(np.float64)
    na = w.sum(axis=1)
    s = w @ q  # (S, 2)
    worst = np.zeros(len(masks))
    for cen, side in ((s / na[:, None], w), (-s / (len(q) - na)[:, None], 1.0 - w)):
        d2 = qq[None, :] - 2.0 * (cen @ q.T) + np.einsum("ij,ij->i", cen, cen)[:, None]
        d2 *= side
        np.maximum(worst, d2.max(axis=1), out=worst)
    return np.sqrt(np.maximum(worst, 0.0))


def _best_resplit(p, labels, cen, rad, a, c, tol, seen):
    """The exact two-way split of chip ``a`` and a nearby chip's elements that most lowers
    the larger of their radii, as [(element, new label), ...], or None. ``seen`` keeps the
    best split of every element set already split."""
    others = np.argsort(np.hypot(*(cen - cen[a]).T), kind="stable")
    best, best_gain = None, -tol
    for b in others[others != a][:NEIGHBOUR_CHIPS]:
        u = np.flatnonzero((labels == a) | (labels == b))
        key = u.tobytes()
        if key not in seen:
            val = _split_radii(p[u], _splits(len(u), c))
            j = int(np.argmin(val))
            seen[key] = (j, float(val[j]))
        j, val = seen[key]
        gain = val - max(rad[a], rad[b])
        if gain < best_gain:
            best_gain = gain
            first = _splits(len(u), c)[j]
            best = [(int(i), a if m else int(b)) for i, m in zip(u, first, strict=True)]
    return best


def _slots(p, labels, k, c):
    """Members padded to ``c`` slots: index (k, c) with −1 pads, positions (k, c, 2)."""
    order = np.argsort(labels, kind="stable")
    counts = np.bincount(labels, minlength=k)
    starts = np.concatenate([[0], np.cumsum(counts)[:-1]])
    slot = np.arange(len(p)) - np.repeat(starts, counts)
    idx = np.full((k, c), -1, np.int64)
    idx[labels[order], slot] = order
    pos = np.where(idx[..., None] >= 0, p[np.maximum(idx, 0)], np.nan)
    return idx, pos, counts


def _best_move(p, labels, cen, rad, a, k, c, tol):
    """The swap or move between chip ``a`` and a nearby chip that most lowers the larger of
    the two chips' radii, as [(element, new label), ...], or None if none lowers it."""
    idx, pos, size = _slots(p, labels, k, c)
    others = np.argsort(np.hypot(*(cen - cen[a]).T), kind="stable")
    bs = others[others != a][:NEIGHBOUR_CHIPS]
    now = np.maximum(rad[a], rad[bs])  # (m,)
    pa, pb = pos[a], pos[bs]  # (c, 2), (m, c, 2)
    sa, sb = size[a], size[bs]
    suma = np.nansum(pa, axis=0)
    sumb = np.nansum(pb, axis=1)  # (m, 2)
    eye = np.eye(c, dtype=bool)
    best, best_val = None, None

    def radius(members, new_centre, drop, extra):
        """Longest distance of ``members`` (less the dropped slot) and ``extra`` to the new
        centre. members (..., c, 2); new_centre (..., E, F, 2); drop (c, E, F) or None."""
        d = np.linalg.norm(members[..., :, None, None, :] - new_centre[..., None, :, :, :], axis=-1)
        if drop is not None:
            d = np.where(drop, -np.inf, d)
        d = np.where(np.isnan(d), -np.inf, d)
        r = d.max(axis=-3)
        if extra is not None:
            r = np.maximum(r, np.linalg.norm(extra - new_centre, axis=-1))
        return r

    with np.errstate(invalid="ignore"):
        # swaps: e of a with f of b, shape (m, e, f)
        ca = (suma[None, None, None, :] - pa[None, :, None, :] + pb[:, None, :, :]) / sa
        cb = (sumb[:, None, None, :] - pb[:, None, :, :] + pa[None, :, None, :]) / sb[
            :, None, None, None
        ]
        drop_a = np.broadcast_to(eye[:, :, None], (c, c, c))  # slot i == e
        drop_b = np.broadcast_to(eye[:, None, :], (c, c, c))  # slot j == f
        ra = radius(pa[None], ca, drop_a, np.broadcast_to(pb[:, None, :, :], ca.shape))
        rb = radius(pb, cb, drop_b, np.broadcast_to(pa[None, :, None, :], cb.shape))
        val = np.maximum(ra, rb)
        val = np.where(np.isnan(val), np.inf, val)
        m_, e_, f_ = np.unravel_index(int(np.argmin(val)), val.shape)
        if val[m_, e_, f_] < now[m_] - tol:
            best_val = val[m_, e_, f_] - now[m_]
            b = int(bs[m_])
            best = [(int(idx[a, e_]), b), (int(idx[b, f_]), a)]
        # moves a -> b (a keeps one element at least, b has room), shape (m, e)
        if sa > 1:
            ca = (suma[None, None, :] - pa[None, :, :]) / (sa - 1)  # (1, e, 2)
            cb = (sumb[:, None, :] + pa[None, :, :]) / (sb[:, None, None] + 1)  # (m, e, 2)
            ra = _move_radius(pa, ca[0], drop=True)[None, :]
            rb = np.maximum(
                _move_radius(pb, cb, drop=False), np.linalg.norm(pa[None] - cb, axis=-1)
            )
            val = np.maximum(ra, rb)
            val = np.where(np.isnan(val) | (sb[:, None] >= c), np.inf, val)
            best, best_val = _better(
                val, now, tol, best, best_val, lambda m_, e_: [(int(idx[a, e_]), int(bs[m_]))]
            )
        # moves b -> a, shape (m, f)
        if sa < c:
            ca = (suma[None, None, :] + pb) / (sa + 1)  # (m, f, 2)
            cb = (sumb[:, None, :] - pb) / np.maximum(sb - 1, 1)[:, None, None]
            ra = np.maximum(
                _move_radius(pa[None], ca, drop=False), np.linalg.norm(pb - ca, axis=-1)
            )
            rb = _move_radius(pb, cb, drop=True)
            val = np.maximum(ra, rb)
            val = np.where(np.isnan(val) | (sb[:, None] <= 1), np.inf, val)
            best, best_val = _better(
                val, now, tol, best, best_val, lambda m_, f_: [(int(idx[int(bs[m_]), f_]), a)]
            )
    return best


def _move_radius(members, new_centre, drop):
    """Longest distance of ``members`` (..., c, 2) to each of ``new_centre`` (..., E, 2),
    leaving out slot e for centre e when ``drop``."""
    d = np.linalg.norm(
        members[..., :, None, :] - new_centre[..., None, :, :], axis=-1
    )  # (..., c, E)
    if drop:
        d = np.where(np.eye(d.shape[-2], d.shape[-1], dtype=bool), -np.inf, d)
    d = np.where(np.isnan(d), -np.inf, d)
    return d.max(axis=-2)


def _better(val, now, tol, best, best_val, make):
    """Keep the better of the current best and the best entry of ``val`` (m, E)."""
    gain = val - now[:, None]
    m_, e_ = np.unravel_index(int(np.argmin(gain)), gain.shape)
    g = gain[m_, e_]
    if np.isfinite(g) and g < -tol and (best_val is None or g < best_val):
        return make(int(m_), int(e_)), g
    return best, best_val


def _channels(p, labels) -> np.ndarray:
    """1-based channel of each point: counter-clockwise by angle about its chip's centre from
    +x (ties: nearer first)."""
    k = int(labels.max()) + 1
    cen = _centres(p, labels, k)
    d = p - cen[labels]
    ang = np.round(np.mod(np.arctan2(d[:, 1], d[:, 0]), 2 * np.pi), 9)
    ang = np.where(ang >= np.round(2 * np.pi, 9), 0.0, ang)
    dist = np.hypot(d[:, 0], d[:, 1])
    order = np.lexsort((dist, ang, labels))
    chan = np.empty(len(p), np.int64)
    counts = np.bincount(labels, minlength=k)
    starts = np.concatenate([[0], np.cumsum(counts)[:-1]])
    chan[order] = np.arange(len(p)) - np.repeat(starts, counts) + 1
    return chan
