"""Random thinning: the best of K uniform draws with the exact element count.

Every draw switches on exactly ``class_ones[c]`` genes of each symmetry class, chosen
uniformly without replacement (:meth:`ThinningProblem.random_genomes`). The expected average
sidelobe level of such a draw is (M − N)/(N(M − 1)) for N of M sites (references.md row 5),
and the best of K draws is the baseline every other method is compared with.

Options
-------
batch : int
    Genomes drawn and evaluated together (default 64; on a large grid the problem's own
    transform batch, e.g. 4 at 262,000 sites, so that the limits are checked often enough
    to keep a time limit).
draws : int
    K, used only when the run has no evaluation limit (default 1000); with a limit, K is the
    limit.
"""

from __future__ import annotations

import math
from collections.abc import Callable

import numpy as np

from ..errors import SpecError, where
from .problem import BATCH

__all__ = ["run", "best_of_draws", "DEFAULT_BATCH", "DEFAULT_DRAWS"]

#: Genomes per drawn batch.
DEFAULT_BATCH = 64
#: K when the run has no evaluation limit.
DEFAULT_DRAWS = 1000


def _positive_int(options: dict, key: str, default: int, source: str | None) -> int:
    value = options.get(key, default)
    if isinstance(value, bool) or not isinstance(value, int | np.integer) or value < 1:
        raise SpecError(f"{where(source, f'search.{key}')}{value!r}: expected a whole number >= 1")
    return int(value)


def best_of_draws(
    problem,
    tracker,
    options: dict,
    sample: Callable[[int], np.ndarray],
) -> str:
    """Evaluate K drawn genomes in batches and stop at K or at a tracker limit.

    Parameters
    ----------
    problem : ThinningProblem
    tracker : thinning.search.Tracker
        Counts evaluations and keeps the best genome; its evaluation limit, if any, is K.
    options : dict
        ``batch`` (default 64) and ``draws`` (K without an evaluation limit, default 1000).
    sample : callable(k) -> (k, G) bool array
        Draws k feasible genomes (the only source of randomness, so the run is deterministic
        for a fixed generator behind it).

    Returns
    -------
    str
        ``"evaluations"`` or ``"time"`` when a tracker limit stopped the run, ``"draws"``
        when all K draws were made. The limits are checked after every batch, so at least
        one batch is evaluated.
    """
    src = getattr(problem, "source", None)
    default = DEFAULT_BATCH if problem.batch >= BATCH else problem.batch
    batch = _positive_int(options, "batch", default, src)
    if math.isinf(tracker.remaining):
        total = _positive_int(options, "draws", DEFAULT_DRAWS, src)
    else:
        total = int(tracker.remaining)
    drawn = 0
    rounds = 0
    # limits are checked after each batch, so that even a tiny time limit yields a layout
    while drawn < total:
        k = int(min(batch, total - drawn, tracker.remaining))
        if k <= 0:
            break
        tracker.evaluate(sample(k))
        drawn += k
        rounds += 1
        tracker.record(round=rounds)
        reason = tracker.stop_reason()
        if reason is not None:
            return reason
    return tracker.stop_reason() or "draws"


def run(problem, tracker, rng: np.random.Generator, options: dict) -> str:
    """Best of K uniform random draws with the exact count in every symmetry class.

    Parameters
    ----------
    problem : ThinningProblem
    tracker : thinning.search.Tracker
    rng : numpy.random.Generator
    options : dict
        ``batch`` and ``draws`` (see the module docstring).

    Returns
    -------
    str
        Why the run stopped: ``"evaluations"``, ``"time"`` or ``"draws"``.
    """
    return best_of_draws(problem, tracker, options, lambda k: problem.random_genomes(rng, k))
