"""Scale-out on a Dask cluster gives what the local run gives, and fails in one line."""

from __future__ import annotations

import csv
import socket
import sys
import time

import pytest

pytest.importorskip("distributed")

from distributed import LocalCluster  # noqa: E402
from helpers import small_spec  # noqa: E402

from thinning.analysis.cluster import (  # noqa: E402
    ClusterError,
    ClusterRunner,
    SerialRunner,
    executor_for,
    multistart,
)
from thinning.analysis.sweep import run_sweep  # noqa: E402
from thinning.cli import main  # noqa: E402

SPEC = small_spec()


@pytest.fixture(scope="module")
def cluster():
    """Two single-threaded worker processes; closed (workers, scheduler) after the module.

    ``dashboard_address=":0"``, not None: with None the scheduler still serves HTTP on port
    8787 and warns (UserWarning, an error here) when another Dask process already holds it.
    """
    with LocalCluster(
        n_workers=2, threads_per_worker=1, processes=True, dashboard_address=":0"
    ) as lc:
        yield lc


def rows(path):
    with open(path, newline="") as f:
        return [{k: v for k, v in r.items() if k != "runtime_s"} for r in csv.DictReader(f)]


def test_sweep_on_the_cluster_equals_the_local_sweep(tmp_path, cluster):
    """Same spec and seed: sweep.csv identical apart from the run times, layouts identical."""
    spec = tmp_path / "s.toml"
    spec.write_text(SPEC)
    run_sweep(spec, "30,50", None, tmp_path / "local")
    res = run_sweep(spec, "30,50", None, tmp_path / "remote", cluster=cluster.scheduler_address)
    assert [r["elements"] for r in res.rows] == [30, 50]
    assert rows(tmp_path / "remote/sweep.csv") == rows(tmp_path / "local/sweep.csv")
    for n in ("n000030", "n000050"):
        local = (tmp_path / "local" / n / "layout.csv").read_bytes()
        assert (tmp_path / "remote" / n / "layout.csv").read_bytes() == local


def test_cli_sweep_accepts_cluster(tmp_path, cluster, capsys):
    spec = tmp_path / "s.toml"
    spec.write_text(SPEC)
    out = tmp_path / "cli"
    argv = ["sweep", str(spec), "--elements", "30", "--out", str(out), "--quiet"]
    assert main([*argv, "--cluster", cluster.scheduler_address]) == 0, capsys.readouterr().err
    assert (out / "n000030" / "layout.json").is_file()


def test_multistart_same_best_locally_and_on_the_cluster(cluster):
    seeds = [1, 2, 3]
    with SerialRunner() as here:
        local = multistart(SPEC, "s.toml", seeds, here)
    with ClusterRunner(cluster) as there:
        remote = multistart(SPEC, "s.toml", seeds, there)
    assert sorted(s.seed for s in local) == seeds
    assert [s.seed for s in remote] == [s.seed for s in local]
    assert remote[0].result.objective == local[0].result.objective
    assert (remote[0].result.mask == local[0].result.mask).all()
    objectives = [s.result.objective for s in local]
    assert objectives == sorted(objectives)  # best first


def test_unreachable_cluster_fails_quickly_in_one_line(tmp_path, capsys):
    t0 = time.perf_counter()
    with pytest.raises(ClusterError) as info:
        with executor_for(1, "tcp://127.0.0.1:1", timeout=5):
            pass
    assert time.perf_counter() - t0 < 10  # the connect timeout is 5 s; refused is immediate
    msg = str(info.value)
    assert "tcp://127.0.0.1:1" in msg and len(msg.splitlines()) == 1
    spec = tmp_path / "s.toml"
    spec.write_text(SPEC)
    argv = ["sweep", str(spec), "--elements", "30", "--out", str(tmp_path / "o")]
    assert main([*argv, "--cluster", "tcp://127.0.0.1:1", "--quiet"]) == 1
    err = capsys.readouterr().err
    assert "tcp://127.0.0.1:1" in err and len(err.strip().splitlines()) == 1


def test_missing_dask_says_what_to_install(monkeypatch):
    monkeypatch.setitem(sys.modules, "dask.distributed", None)  # import now fails
    with pytest.raises(ClusterError, match=r"install thinning\[cluster\]"):
        with ClusterRunner("tcp://127.0.0.1:8786"):
            pass


def test_a_server_that_is_not_a_scheduler_fails_in_one_line():
    with socket.socket() as silent:  # accepts connections (backlog), never answers
        silent.bind(("127.0.0.1", 0))
        silent.listen()
        address = f"tcp://127.0.0.1:{silent.getsockname()[1]}"
        with pytest.raises(ClusterError, match="no Dask scheduler answered within 1 s"):
            with ClusterRunner(address, timeout=1):
                pass
    with pytest.raises(ClusterError, match="not a scheduler address"):
        with ClusterRunner("tcp://host-without-port"):
            pass
