"""Compiled (numba) loops for the search's evaluation of a stack of power patterns.

The search scores whole generations with :meth:`thinning.engine.pattern.FFTPatternEngine.evaluate`.
After the FFT the numpy route takes a dozen passes over every pattern (main-beam chains,
masked maxima, weighted sums, a neighbour test for every candidate lobe, the alias of each
candidate, a vectorised Newton climb); each pass is cheap, but together they cost two to
twelve times the transform (benchmarks/bench_engine.py). This module does the same work in
one compiled loop per pattern, with the same rules, so that the figures agree with the numpy
route (checked in tests/test_fastpath.py):

1. the main beam, walking the window samples nearest first (every sample's parent on its ray
   comes before it): a sample is main beam when it is no higher than its parent and its
   parent is main beam (the pointer-jumping cut of :mod:`thinning.engine.region`, resolved in one
   pass);
2. the sample PSL and its place, and the ASL as the region-weighted mean with the main beam
   taken out;
3. the candidate lobes: local maxima of the region within the margin of the highest sample,
   ranked by the parabolic (in dB) estimate of their peak along u and v, at most ``cap``;
4. each candidate moved to its alias nearest the centre of the disc and refined by the
   projected trust-region Newton iteration of :func:`thinning.engine.exact.refine_peaks` on the
   exact pattern of the real excitation grid, whose array factor and its first and second
   derivatives are six dot products per grid row. Four differences save evaluations of the
   exact pattern: the climb starts at the parabolic peak estimate instead of the sample; it
   stops before a step whose predicted gain is below 1e-6 of the power (4e-6 dB) instead of
   1e-9 after it; it stops when the quadratic model leaves the lobe below one already
   refined; and a candidate whose estimate is 0.5 dB below the PSL found is not climbed at
   all (the estimate is within 0.1 dB of the exact peak). The PSL differs from the numpy
   route's by less than 1e-5 dB (tests/test_fastpath.py).

:func:`swap_scores` does steps 3 and 4 for K swap moves of one layout, whose samples differ
from the layout's only at a few stored places (:meth:`thinning.search.problem.ThinningProblem.
evaluate_swaps`). A main beam that reaches the rim of a window is cut again in the next one,
twice as wide, as the numpy route does. Everything runs on the CPU in the calling thread,
without the GIL (so that the thread feeding the worker processes keeps running meanwhile).

The kernels live in modules by what they compute: :mod:`.exact` (the exact pattern and the
Newton climb), :mod:`.lobes` (candidate lobes and their aliases), :mod:`.scores` (whole
evaluations and the main-beam cut), :mod:`.swaps` (swap moves and their ASL terms) and
:mod:`.envelope` (patterns of groups of sites, for the density envelope); this
module holds :func:`call` and names the public kernels. numba caches each compiled kernel on
disk beside its module and checks only that module's own file for changes: after editing a
kernel that others call, delete ``thinning/engine/fastpath/__pycache__`` (an install from
scratch starts without a cache).
"""

from __future__ import annotations

import signal
import threading

from .envelope import group_patterns
from .exact import exact_point
from .sampling import diffuse
from .scores import fast_scores, main_beam_cut
from .swaps import swap_asl_terms, swap_scores

__all__ = [
    "call",
    "fast_scores",
    "swap_scores",
    "swap_asl_terms",
    "main_beam_cut",
    "exact_point",
    "group_patterns",
    "diffuse",
]


#: (kernel, dtype of its first argument) already compiled or loaded in this process
_READY: set = set()


def call(kernel, *args):
    """Run a compiled kernel.

    The first call of a kernel for a dtype compiles it (or loads it from the disk cache): a
    Ctrl-C in the middle of that leaves numba's half-built code behind, and the next call
    fails. SIGINT is therefore held back until that call returns (a handler that only notes
    it stands in meanwhile), and the interrupt then arrives at a clean point. A Ctrl-C that
    lands while a kernel boxes its results in Python comes out of numba as a SystemError; it
    is raised again as the KeyboardInterrupt it is. Either way a search stops with its best
    layout instead of failing.
    """
    key = (kernel, getattr(args[0], "dtype", None) if args else None)
    if key in _READY or threading.current_thread() is not threading.main_thread():
        return _unwrap(kernel, args)
    pending = []
    previous = signal.signal(signal.SIGINT, lambda signum, frame: pending.append(signum))
    try:
        out = _unwrap(kernel, args)
    finally:
        signal.signal(signal.SIGINT, previous)
    _READY.add(key)
    if pending:
        if callable(previous):
            previous(signal.SIGINT, None)  # the default handler raises KeyboardInterrupt
        elif previous == signal.SIG_DFL:
            raise KeyboardInterrupt
    return out


def _unwrap(kernel, args):
    try:
        return kernel(*args)
    except SystemError as exc:
        seen, cause = set(), exc
        while cause is not None and id(cause) not in seen:
            if isinstance(cause, KeyboardInterrupt):
                raise KeyboardInterrupt from exc
            seen.add(id(cause))
            cause = cause.__cause__ or cause.__context__
        raise
