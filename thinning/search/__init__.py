"""Search: which sites get an element.

Takes the candidate sites, the exact budget, the constraints and the objective as a
:class:`~thinning.search.problem.ThinningProblem` (genomes over free symmetry orbits, batched
evaluation through the pattern engine, swap moves from a stored transform); gives the best
layout found and the history of the run. Uses the geometry and the engine only.

Every method is a module with a function

    run(problem: ThinningProblem, tracker: Tracker, rng: numpy.random.Generator,
        options: dict) -> str

that evaluates genomes only through ``tracker.evaluate`` (which counts them, keeps the best
so far, records the convergence history, reports progress and enforces the limits) and
returns why it stopped. Because the tracker always holds the best layout seen, a run cut
short by the time limit or by Ctrl-C still has a result.
"""

from __future__ import annotations

import contextlib
import multiprocessing
import os
import signal
import threading
import time
from dataclasses import dataclass, field

import numpy as np

from .problem import BATCH, Evaluation

__all__ = [
    "METHODS",
    "SPEED_DEPENDENT_STOPS",
    "COMPILE_NOTE",
    "SearchResult",
    "Tracker",
    "run_method",
    "method_module",
]

METHODS = ("random", "density", "genetic", "ift", "anneal", "modular")

#: Reasons to stop that depend on the machine's speed (wall time, a Ctrl-C): a run that ends
#: by any other (its evaluation budget, a stall, its generations or trials) is reproducible.
SPEED_DEPENDENT_STOPS = frozenset({"time", "interrupt"})

#: What the progress says while the first call of an evaluation kind compiles the kernels.
COMPILE_NOTE = "compiling the search kernels, once after install (about 10-20 s)"
_COMPILE_NOTES = {
    "evaluate": COMPILE_NOTE,
    "swaps": "compiling the swap-move kernels, once after install (about 5 s)",
}

#: A first evaluation call still running after this long is compiling  [s].
_COMPILE_NOTE_AFTER_S = 1.5


# -- worker processes ------------------------------------------------------------------------
def _evaluate_chunks(problem, packed, n_genes):
    """Figures of several chunks of genomes, each sent as packed bits (one round trip)."""
    out = []
    for p in packed:
        ev = problem.evaluate(np.unpackbits(p, axis=1, count=n_genes).astype(bool))
        out.append((ev.psl_db, ev.asl_db))
    return out


def _worker_loop(conn, problem):
    """A worker process: evaluate each message (packed chunks) and send the figures back,
    until the parent sends None or goes away."""
    signal.signal(signal.SIGINT, signal.SIG_IGN)  # the parent handles Ctrl-C
    while True:
        try:
            msg = conn.recv()
        except (EOFError, OSError):
            break
        if msg is None:
            break
        try:
            conn.send(_evaluate_chunks(problem, *msg))
        except Exception as exc:  # the parent re-raises it
            conn.send(exc)
    conn.close()


class _Worker:
    """One worker process on a pipe of its own: a message and its answer cross without the
    thread hops of an executor (0.9 ms a round trip there on a busy 2-core machine)."""

    def __init__(self, problem):
        ctx = multiprocessing.get_context()
        self.conn, child = ctx.Pipe()
        self.proc = ctx.Process(target=_worker_loop, args=(child, problem), daemon=True)
        self.proc.start()
        child.close()
        self.pending = 0  # messages sent whose answer has not been read

    def submit(self, packed, n_genes):
        while self.pending:  # an answer left unread by an interrupted evaluation
            self._recv()
        self.conn.send((packed, n_genes))
        self.pending += 1

    def _recv(self):
        try:
            out = self.conn.recv()
        except EOFError:
            raise RuntimeError(f"worker process {self.proc.pid} ended unexpectedly") from None
        self.pending -= 1
        return out

    def result(self):
        out = self._recv()
        if isinstance(out, Exception):
            raise out
        return out

    def close(self):
        try:
            self.conn.send(None)
        except (OSError, ValueError):
            pass
        self.proc.join(timeout=2)
        if self.proc.is_alive():
            self.proc.terminate()
            self.proc.join()
        self.conn.close()


@dataclass
class SearchResult:
    """What a search run found.

    Attributes
    ----------
    genome : (G,) bool array   the best genome
    mask : (M,) bool array     its site mask
    objective, psl_db, asl_db : float  [dB]   its figures as the search saw them
    evaluations : int
    runtime_s : float  [s]
    stopped_by : str
    history : list of dict   evaluations, seconds, best objective/PSL/ASL at each improvement
                             and at the end of every generation or round
    """

    genome: np.ndarray
    mask: np.ndarray
    objective: float
    psl_db: float
    asl_db: float
    evaluations: int
    runtime_s: float
    stopped_by: str
    history: list = field(default_factory=list)

    @property
    def deterministic(self) -> bool:
        """True when the run ended by a rule that does not depend on machine speed."""
        return self.stopped_by not in SPEED_DEPENDENT_STOPS


class Tracker:
    """Counts evaluations, keeps the best genome, enforces limits, reports progress.

    Parameters
    ----------
    problem : ThinningProblem
    max_evaluations : int or None
    time_limit_s : float or None  [s]
    workers : int   processes evaluating a batch, this one included (1 = this process only)
    progress : callable(dict) or None   called at most every ``progress_every_s`` seconds
    """

    def __init__(
        self,
        problem,
        max_evaluations=None,
        time_limit_s=None,
        workers=1,
        progress=None,
        progress_every_s=0.5,
    ):
        self.problem = problem
        self.max_evaluations = max_evaluations
        self.time_limit_s = time_limit_s
        self.workers = max(1, int(workers))
        self.progress = progress
        self.progress_every_s = progress_every_s
        self.evaluations = 0
        self.best_genome = None
        self.best = (np.inf, np.nan, np.nan)  # objective, psl, asl
        self.history: list[dict] = []
        self.start = time.perf_counter()
        self._last_report = -np.inf
        self._first_calls: set[str] = set()  # evaluation kinds already called once
        self._setup_s = 0.0  # time spent in those first calls (compiling), not in the rate
        self._pool = None
        if self.workers > 1:
            # this process is one of the workers: the pool holds the other workers − 1
            self._pool = [_Worker(problem) for _ in range(self.workers - 1)]

    # -- lifecycle ------------------------------------------------------------------------
    def close(self):
        if self._pool is not None:
            for w in self._pool:
                w.close()
            self._pool = None

    def __enter__(self):
        return self

    def __exit__(self, *exc):
        self.close()

    # -- limits ---------------------------------------------------------------------------
    @property
    def elapsed(self) -> float:
        return time.perf_counter() - self.start

    @property
    def remaining(self) -> float:
        """Evaluations left before the evaluation limit (inf without one)."""
        if self.max_evaluations is None:
            return np.inf
        return max(0, self.max_evaluations - self.evaluations)

    def stop_reason(self) -> str | None:
        """Why the search must stop now, or None."""
        if self.max_evaluations is not None and self.evaluations >= self.max_evaluations:
            return "evaluations"
        if self.time_limit_s is not None and self.elapsed >= self.time_limit_s:
            return "time"
        return None

    def should_stop(self) -> bool:
        return self.stop_reason() is not None

    @property
    def stall_ends_run(self) -> bool:
        """Whether a search that has stopped improving should end: only a run without a time
        limit ends on a stall; with one, the search restarts and uses the time it was given
        (the limit itself ends it)."""
        return self.time_limit_s is None

    # -- evaluation -----------------------------------------------------------------------
    @contextlib.contextmanager
    def _first_call(self, kind: str):
        """Time the first call of an evaluation kind, which compiles (or loads) the compiled
        kernels: the progress says so when it takes long, and the rate leaves it out."""
        if kind in self._first_calls:
            yield
            return
        self._first_calls.add(kind)
        timer = None
        if self.progress is not None:
            timer = threading.Timer(_COMPILE_NOTE_AFTER_S, self._compile_note, (kind,))
            timer.daemon = True
            timer.start()
        t = time.perf_counter()
        try:
            yield
        finally:
            if timer is not None:
                timer.cancel()
            self._setup_s += time.perf_counter() - t

    def _compile_note(self, kind):
        try:
            self.progress({**self._progress_figures(), "note": _COMPILE_NOTES[kind]})
        except Exception:  # a progress printer must never break the search  # noqa: BLE001
            pass

    def evaluate(self, genomes) -> Evaluation:
        """Evaluate genomes (B, G); counts them and keeps the best."""
        with self._first_call("evaluate"):
            ev = self._evaluate(genomes)
        self._account(np.atleast_2d(np.asarray(genomes, dtype=bool)), ev)
        return ev

    def _evaluate(self, genomes) -> Evaluation:
        g = np.atleast_2d(np.asarray(genomes, dtype=bool))
        if self._pool is not None and g.shape[0] > BATCH:
            # chunks of BATCH genomes: this process evaluates every workers-th chunk itself;
            # each other worker gets its share in one message, as packed bits
            chunks = [g[s : s + BATCH] for s in range(0, g.shape[0], BATCH)]
            shares = {w: list(range(w, len(chunks), self.workers)) for w in range(1, self.workers)}
            busy = [w for w, idx in shares.items() if idx]
            for w in busy:
                packed = [np.packbits(chunks[i], axis=1) for i in shares[w]]
                self._pool[w - 1].submit(packed, g.shape[1])
            parts = {}
            for i in range(0, len(chunks), self.workers):
                ev_i = self.problem.evaluate(chunks[i])
                parts[i] = (ev_i.psl_db, ev_i.asl_db)
            for w in busy:
                for i, part in zip(shares[w], self._pool[w - 1].result(), strict=True):
                    parts[i] = part
            psl = np.concatenate([parts[i][0] for i in range(len(chunks))])
            asl = np.concatenate([parts[i][1] for i in range(len(chunks))])
            return Evaluation(self.problem.combine(psl, asl), psl, asl)
        return self.problem.evaluate(g)

    def evaluate_swaps(self, base, off_genes, on_genes, genomes=None) -> Evaluation:
        """Evaluate K swap moves of ``base`` (gene ``off_genes[k]`` off, ``on_genes[k]`` on)
        by updating its transform (:meth:`ThinningProblem.evaluate_swaps`), in this process;
        counted and tracked like :meth:`evaluate`. The moves that would improve on the best so
        far are evaluated in full (not counted again), so the best so far and its figures
        are always those of a full evaluation."""
        base = np.asarray(base, dtype=bool)
        if genomes is None:
            genomes = self.problem.swapped(base, off_genes, on_genes)
        genomes = np.asarray(genomes, dtype=bool)
        with self._first_call("swaps"):
            ev = self.problem.evaluate_swaps(base, off_genes, on_genes)
        # a move is scored with its base layout's main-beam cut; one that moves the first
        # null (an element moved at the end of the aperture) can come out too low, so a move
        # that would become the best so far is evaluated in full and keeps those figures
        new_best = np.flatnonzero(ev.objective < self.best[0])
        if new_best.size:
            full = self.problem.evaluate(genomes[new_best])
            ev.objective[new_best] = full.objective
            ev.psl_db[new_best] = full.psl_db
            ev.asl_db[new_best] = full.asl_db
        self._account(genomes, ev)
        return ev

    def _account(self, g, ev):
        self.evaluations += g.shape[0]
        i = int(np.argmin(ev.objective))
        if ev.objective[i] < self.best[0]:
            self.best = (float(ev.objective[i]), float(ev.psl_db[i]), float(ev.asl_db[i]))
            self.best_genome = g[i].copy()
            self.record()
        self._maybe_report()

    def record(self, **extra):
        """Add a point to the convergence history."""
        self.history.append(
            {
                "evaluations": self.evaluations,
                "seconds": round(self.elapsed, 4),
                "best_objective": self.best[0],
                "best_psl_db": self.best[1],
                "best_asl_db": self.best[2],
                **extra,
            }
        )

    def _maybe_report(self, force=False):
        if self.progress is None:
            return
        now = self.elapsed
        if not force and now - self._last_report < self.progress_every_s:
            return
        self._last_report = now
        self.progress(self._progress_figures())

    def _progress_figures(self) -> dict:
        """Evaluations, rate (the compiling first calls left out) and time left."""
        now = self.elapsed
        busy = now - self._setup_s
        rate = self.evaluations / busy if busy > 0 else 0.0
        left = None
        if self.time_limit_s is not None:
            left = max(0.0, self.time_limit_s - now)
        if self.max_evaluations is not None and rate > 0:
            by_evals = self.remaining / rate
            left = by_evals if left is None else min(left, by_evals)
        return {
            "evaluations": self.evaluations,
            "seconds": now,
            "rate": rate,
            "best_psl_db": self.best[1],
            "best_asl_db": self.best[2],
            "seconds_left": left,
        }

    def result(self, stopped_by: str) -> SearchResult:
        self._maybe_report(force=True)
        if self.best_genome is None:
            raise RuntimeError("the search stopped before evaluating any layout")
        return SearchResult(
            genome=self.best_genome.copy(),
            mask=self.problem.to_masks(self.best_genome)[0],
            objective=self.best[0],
            psl_db=self.best[1],
            asl_db=self.best[2],
            evaluations=self.evaluations,
            runtime_s=self.elapsed,
            stopped_by=stopped_by,
            history=list(self.history),
        )


def method_module(name: str):
    """The module implementing search method ``name``."""
    import importlib

    if name not in METHODS:
        raise ValueError(f"unknown search method {name!r}")
    return importlib.import_module(f"{__name__}.{name}")


def run_method(
    problem,
    method,
    seed,
    options=None,
    max_evaluations=None,
    time_limit_s=None,
    workers=1,
    progress=None,
) -> SearchResult:
    """Run one search method to its end, a limit, or Ctrl-C; always returns the best found.

    Ctrl-C (KeyboardInterrupt) ends the run cleanly with ``stopped_by = "interrupt"``, as
    long as at least one layout was evaluated.
    """
    rng = np.random.default_rng(seed)
    mod = method_module(method)
    with Tracker(problem, max_evaluations, time_limit_s, workers, progress) as tracker:
        try:
            stopped = _run_tiled(problem, tracker, rng, mod, dict(options or {}))
        except KeyboardInterrupt:
            if tracker.best_genome is None:
                raise
            tracker.progress = None  # a second interrupt must not cut the result short
            stopped = "interrupt"
        tracker.record(final=True)
        return tracker.result(stopped or tracker.stop_reason() or "done")


def _run_tiled(problem, tracker, rng, mod, options):
    """The method's run; when the tile counts are free (a capacity, whole chips), the method
    gets :data:`~.tile_counts.METHOD_SHARE` of the limits and moving elements between tiles
    (:func:`~.tile_counts.transfer_polish`) the rest."""
    from . import tile_counts

    tile_counts.prepare(problem)  # (a problem built without the spec: its counts planned)
    if getattr(problem, "tile_grid", None) is None or not tile_counts.free_counts(problem):
        return mod.run(problem, tracker, rng, options)
    limits = tracker.time_limit_s, tracker.max_evaluations
    share = tile_counts.METHOD_SHARE
    if limits[0] is not None:
        tracker.time_limit_s = share * limits[0]
    if limits[1] is not None:
        tracker.max_evaluations = int(share * limits[1])
    try:
        stopped = mod.run(problem, tracker, rng, options)
    finally:
        tracker.time_limit_s, tracker.max_evaluations = limits
    if stopped == "interrupt":
        return stopped
    return tile_counts.transfer_polish(problem, tracker, rng) or stopped


def cpu_count() -> int:
    return len(os.sched_getaffinity(0)) if hasattr(os, "sched_getaffinity") else os.cpu_count()
