"""Run independent pieces of work here, in local processes, or on a Dask cluster.

A sweep's budgets and a multi-start's seeds are independent: each piece is a plain,
picklable module-level function called with plain arguments (the spec file's *text*, never
its path, so a remote worker needs no shared filesystem) that returns plain data (a mask and
a dict of figures). The caller writes every output file. Three runners share one interface,
so the callers have one code path:

* :class:`SerialRunner`   one after the other in this process;
* :class:`ProcessRunner`  a pool of local processes (``--workers N``);
* :class:`ClusterRunner`  an existing Dask distributed cluster (``--cluster ADDRESS``).

Each is a context manager with ``map(fn, *iterables) -> list`` (results in input order) and
``imap`` (the same results, yielded in input order as they are ready). The searches are
deterministic for a fixed seed and an evaluation limit, so the results do not depend on the
runner; with a time limit they depend on the speed of the machine that ran them. Bit-identical
results across machines also need the same versions of numpy and scipy on each.

Dask is optional (``pip install thinning[cluster]``) and imported only by
:class:`ClusterRunner`. Every worker of the cluster needs ``thinning`` installed in the same
version as the client.
"""

from __future__ import annotations

import hashlib
import socket
import tomllib
from concurrent.futures import ProcessPoolExecutor
from typing import NamedTuple

from ..errors import SpecError, ThinningError

__all__ = [
    "ClusterError",
    "SerialRunner",
    "ProcessRunner",
    "ClusterRunner",
    "executor_for",
    "spec_from_text",
    "Start",
    "multistart",
]

#: Seconds to wait for a Dask scheduler to answer before giving up.
CONNECT_TIMEOUT_S = 10.0


class ClusterError(ThinningError):
    """A Dask cluster that cannot be used (not installed, unreachable, lost mid-run)."""


class _Runner:
    """The shared interface: a context manager with ``imap`` and ``map``."""

    def __enter__(self):
        return self

    def __exit__(self, *exc):
        self.close()

    def close(self) -> None:
        """Release the runner's resources (nothing for the serial runner)."""

    def imap(self, fn, *iterables):
        raise NotImplementedError

    def map(self, fn, *iterables) -> list:
        """``fn`` applied to the zipped ``iterables``, results in input order."""
        return list(self.imap(fn, *iterables))


class SerialRunner(_Runner):
    """Every piece in this process, one after the other."""

    def imap(self, fn, *iterables):
        """Results in input order, each computed when it is asked for."""
        return map(fn, *iterables)


class ProcessRunner(_Runner):
    """A pool of local worker processes.

    Parameters
    ----------
    workers : int   processes in the pool
    """

    def __init__(self, workers: int):
        self.workers = max(1, int(workers))
        self._pool: ProcessPoolExecutor | None = None

    def __enter__(self):
        self._pool = ProcessPoolExecutor(self.workers)
        return self

    def __exit__(self, exc_type, *exc):
        if self._pool is not None:
            self._pool.shutdown(wait=True, cancel_futures=exc_type is not None)
            self._pool = None

    def close(self) -> None:
        self.__exit__(None)

    def imap(self, fn, *iterables):
        """Submit every piece at once; yield the results in input order."""
        if self._pool is None:
            self.__enter__()
        futures = [self._pool.submit(fn, *args) for args in zip(*iterables, strict=True)]
        try:
            for f in futures:
                yield f.result()
        finally:
            for f in futures:
                f.cancel()


def _check_scheduler(address: str, timeout: float) -> None:
    """Raise ClusterError unless a Dask scheduler answers at ``address`` within ``timeout``.

    Done before creating the Client: Dask retries a refused connection until its timeout,
    and a Client that failed to connect blocks the interpreter's exit trying to close.
    A TCP address nobody listens on is refused at once, here.
    """
    import asyncio
    from concurrent.futures import ThreadPoolExecutor

    from distributed.comm.addressing import get_address_host_port, parse_address
    from distributed.core import rpc

    try:
        scheme, _ = parse_address(address)
        if scheme in ("tcp", "tls"):
            host, port = get_address_host_port(address)
    except ValueError as exc:
        raise ClusterError(
            f"--cluster {address}: not a scheduler address like tcp://host:8786 ({exc})"
        ) from None
    if scheme in ("tcp", "tls"):
        try:
            with socket.create_connection((host, port), timeout=timeout):
                pass
        except OSError as exc:
            reason = exc.strerror or type(exc).__name__
            raise ClusterError(
                f"--cluster {address}: cannot reach a Dask scheduler at {host}:{port} ({reason})"
            ) from None

    async def identity():
        async with rpc(address, timeout=timeout) as scheduler:
            return await asyncio.wait_for(scheduler.identity(), timeout)

    try:  # in a thread of its own, so that a caller's running event loop does not matter
        with ThreadPoolExecutor(1) as thread:
            who = thread.submit(lambda: asyncio.run(identity())).result()
    except Exception as exc:
        reason = (str(exc).strip().splitlines() or [type(exc).__name__])[0]
        raise ClusterError(
            f"--cluster {address}: no Dask scheduler answered within {timeout:g} s ({reason})"
        ) from None
    if not isinstance(who, dict) or who.get("type") != "Scheduler":
        raise ClusterError(f"--cluster {address}: the server there is not a Dask scheduler")


class ClusterRunner(_Runner):
    """The pieces run on an existing Dask distributed cluster.

    Parameters
    ----------
    address : str or cluster object   the scheduler, e.g. ``"tcp://host:8786"``, or a
                                      ``dask.distributed`` cluster object (``LocalCluster``)
    timeout : float  [s]   how long to wait for the scheduler to answer

    Raises
    ------
    ClusterError   on entering, when dask is not installed or the scheduler cannot be
                   reached; while mapping, when the cluster loses the work.
    """

    def __init__(self, address, timeout: float = CONNECT_TIMEOUT_S):
        self.address = address
        self.timeout = float(timeout)
        self.client = None

    @property
    def _name(self) -> str:
        return str(getattr(self.address, "scheduler_address", self.address))

    def __enter__(self):
        self.connect()
        return self

    def connect(self) -> None:
        """Connect the Dask client (done by ``with``; a no-op when connected)."""
        if self.client is not None:
            return
        try:
            from dask.distributed import Client
        except ImportError:
            raise ClusterError(
                f"--cluster {self._name}: dask is not installed; "
                "install thinning[cluster] (dask and distributed)"
            ) from None
        if isinstance(self.address, str):
            _check_scheduler(self.address, self.timeout)
        try:
            self.client = Client(self.address, timeout=self.timeout, set_as_default=False)
        except (OSError, TimeoutError, ValueError, TypeError) as exc:
            first = str(exc).strip().splitlines()[0] if str(exc).strip() else type(exc).__name__
            raise ClusterError(
                f"--cluster {self._name}: no Dask scheduler answered within "
                f"{self.timeout:g} s ({first})"
            ) from None

    def close(self) -> None:
        if self.client is not None:
            self.client.close()
            self.client = None

    def imap(self, fn, *iterables):
        """Submit every piece to the cluster; yield the results in input order.

        An error raised by ``fn`` on a worker is raised here as it is; a failure of the
        cluster itself (a worker lost repeatedly, the scheduler gone) becomes ClusterError.
        """
        self.connect()
        args = [list(it) for it in iterables]
        futures = self.client.map(fn, *args, pure=False)
        try:
            for f in futures:
                try:
                    yield f.result()
                except ThinningError:
                    raise
                except Exception as exc:
                    if type(exc).__module__.split(".")[0] not in ("distributed", "dask"):
                        raise
                    first = (str(exc).strip().splitlines() or [type(exc).__name__])[0]
                    raise ClusterError(
                        f"--cluster {self._name}: the cluster lost the work "
                        f"({type(exc).__name__}: {first})"
                    ) from None
        finally:
            if self.client is not None:
                self.client.cancel(futures)


def executor_for(workers: int = 1, cluster: str | None = None, timeout: float = CONNECT_TIMEOUT_S):
    """The runner for ``--workers`` and ``--cluster``: cluster if given, else a pool or serial.

    Parameters
    ----------
    workers : int   local processes (ignored with a cluster: its workers decide)
    cluster : str or None   Dask scheduler address
    timeout : float  [s]   connection timeout for the cluster

    Returns
    -------
    SerialRunner, ProcessRunner or ClusterRunner, not yet entered: use it with ``with``.
    """
    if cluster:
        return ClusterRunner(cluster, timeout)
    if workers > 1:
        return ProcessRunner(workers)
    return SerialRunner()


def spec_from_text(text: str, source: str):
    """Parse a spec from the text of its file; the digest is that of the file's bytes.

    UTF-8 round-trips exactly, so the digest equals the one ``load_spec`` computes.
    """
    from ..spec import parse_spec

    try:
        raw = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise SpecError(f"{source}: not valid TOML: {exc}") from None
    return parse_spec(raw, source, hashlib.sha256(text.encode("utf-8")).hexdigest())


class Start(NamedTuple):
    """One start of a multi-start run: its seed and what the search found."""

    seed: int
    result: object  # thinning.search.SearchResult


def _run_start(spec_text: str, source: str, seed: int):
    """One start (a work unit): the spec's method, budget and limits, with ``seed``."""
    from ..search import run_method

    spec = spec_from_text(spec_text, source)
    problem = spec.problem(spec.sites())
    return run_method(
        problem,
        spec.method,
        seed,
        spec.options,
        max_evaluations=spec.max_evaluations,
        time_limit_s=spec.time_limit_s,
        workers=1,
    )


def multistart(spec_text: str, source: str, seeds, executor) -> list[Start]:
    """Run the spec's method once per seed, as independent pieces; best first.

    Each start is the search ``thinning design`` would run with that seed instead of the
    spec's own (same budget, options and evaluation limit). The starts share nothing, so
    they spread over any runner (:func:`executor_for`); the result for a seed does not
    depend on the runner. Islands of a genetic algorithm (starts that exchange migrants
    between generations) are not implemented; they would need a runner call per epoch.

    Parameters
    ----------
    spec_text : str   the text of the spec file
    source : str      its name, for messages
    seeds : iterable of int
    executor : SerialRunner, ProcessRunner or ClusterRunner

    Returns
    -------
    list of Start   sorted by the search objective [dB], lowest (best) first; ties keep the
                    order of ``seeds``. ``multistart(...)[0].result`` is the best layout.
    """
    seeds = [int(s) for s in seeds]
    if not seeds:
        raise SpecError(f"{source}: multistart needs at least one seed")
    spec = spec_from_text(spec_text, source)  # refuse a bad spec before sending any work
    if spec.method == "pareto":
        raise SpecError(
            f"{source}: search.method 'pareto' gives a front, not one best layout; "
            "multistart runs random, density or genetic"
        )
    spec.problem(spec.sites())
    n = len(seeds)
    results = executor.map(_run_start, [spec_text] * n, [source] * n, seeds)
    starts = [Start(s, r) for s, r in zip(seeds, results, strict=True)]
    return sorted(starts, key=lambda st: st.result.objective)
