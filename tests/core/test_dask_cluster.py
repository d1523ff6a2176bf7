"""Chunks on a Dask distributed cluster (two worker processes on loopback) through Dask's executor.

The cluster must give exactly the local results (chunks are independent and deterministic), a
failing chunk must be retried once and then reported, and cancelling must stop the remaining chunks.
Reference for the grid values: the same grid computed in this process in one chunk.
"""

from __future__ import annotations

import os
import subprocess
import sys
import time
from pathlib import Path

import numpy as np
import pytest

distributed = pytest.importorskip("distributed", reason="Dask distributed is not installed (extra 'cluster')")

from orbitdesk.engine.chunks import ChunkError, run_chunks  # noqa: E402
from orbitdesk.engine.executors import ClusterExecutor, SchedulerError, cluster_executor  # noqa: E402
from orbitdesk.engine.progress import CancelToken, Cancelled  # noqa: E402
from orbitdesk.analyses.sweep import GridSettings, SweepSettings, lyapunov_grid, sweep  # noqa: E402
from orbitdesk.system.compiled_system import compile_model  # noqa: E402
from orbitdesk.samples.models import HENON, LOGISTIC_REF, model

LOGISTIC = model(LOGISTIC_REF, r=3.5, initial={'x[0]': 0.3})
ROOT = Path(__file__).resolve().parents[2]


pytestmark = pytest.mark.slow  # starts a local Dask cluster


@pytest.fixture(scope="module")
def cluster():
    cluster = distributed.LocalCluster(n_workers=2, threads_per_worker=1, processes=True, host="127.0.0.1",
                                       dashboard_address=None, worker_dashboard_address=None,
                                       silence_logs=40)
    yield cluster
    cluster.close()


@pytest.fixture
def executor(cluster):
    ex = cluster_executor(cluster.scheduler_address)
    yield ex
    ex.shutdown()


def test_henon_grid_on_the_cluster_equals_the_local_run(executor):
    system = compile_model(HENON)
    xs, ys = np.linspace(1.0, 1.4, 12), np.linspace(0.1, 0.3, 10)
    settings = GridSettings(transient=200, duration=1000)
    remote = lyapunov_grid(system, "a", xs, "b", ys, settings, executor=executor, chunk_size=16)
    local = lyapunov_grid(system, "a", xs, "b", ys, settings, chunk_size=xs.size * ys.size)  # one chunk, here
    assert np.array_equal(remote.exponent, local.exponent, equal_nan=True)
    assert np.array_equal(remote.status, local.status)
    # sanity against a published value: Sprott, Chaos and Time-Series Analysis (2003), Henon map at
    # a = 1.4, b = 0.3 has largest exponent ~0.419 (value from memory)
    assert remote.exponent[-1, -1] == pytest.approx(0.419, abs=0.02)


def test_sweep_on_the_cluster_equals_the_local_run(executor):
    system = compile_model(LOGISTIC)
    values = np.linspace(2.8, 4.0, 50)
    settings = SweepSettings(transient=200, samples=32, lyapunov=True)
    remote = sweep(system, "r", values, settings, executor=executor, chunk_size=7)
    local = sweep(system, "r", values, settings)
    assert np.array_equal(remote.samples, local.samples, equal_nan=True)
    assert np.array_equal(remote.lyapunov, local.lyapunov, equal_nan=True)
    # logistic map closed form: for r < 3 the orbit settles on the fixed point 1 - 1/r
    assert remote.points(0) == pytest.approx(1 - 1 / 2.8, abs=1e-6)


def flaky_chunk(marker_dir, index):
    """Fails the first time each index runs (a marker file remembers), succeeds the second time."""
    marker = Path(marker_dir) / f"chunk-{index}"
    if not marker.exists():
        marker.write_text("tried")
        raise RuntimeError(f"transient failure of chunk {index}")
    return index * index


def broken_chunk(index):
    raise ValueError(f"chunk {index} cannot be computed")


def slow_chunk(marker_dir, index):
    (Path(marker_dir) / f"ran-{index}").write_text("ran")
    time.sleep(0.3)
    return index


def test_a_failing_chunk_is_retried_once_on_the_cluster(executor, tmp_path):
    results = run_chunks(flaky_chunk, [(str(tmp_path), i) for i in range(4)], executor=executor)
    assert results == [0, 1, 4, 9]
    with pytest.raises(ChunkError) as info:
        run_chunks(broken_chunk, [(i,) for i in range(3)], executor=executor)
    assert info.value.attempts == 2
    assert "cannot be computed" in str(info.value)


def test_cancel_stops_the_remaining_chunks_on_the_cluster(executor, tmp_path):
    token = CancelToken()

    def progress(fraction):
        if fraction > 0:
            token.cancel()

    count = 40
    with pytest.raises(Cancelled):
        run_chunks(slow_chunk, [(str(tmp_path), i) for i in range(count)], executor=executor, cancel=token,
                   progress=progress)
    time.sleep(1.0)  # chunks already running finish; nothing new may start
    ran = len(list(tmp_path.glob("ran-*")))
    assert 1 <= ran < count // 2


def test_the_executor_sizes_its_window_by_the_cluster_threads(executor):
    assert isinstance(executor, ClusterExecutor)
    assert executor._max_workers == 2


def test_an_unreachable_scheduler_is_a_plain_error():
    with pytest.raises(SchedulerError, match="cannot reach"):
        cluster_executor("tcp://127.0.0.1:9", timeout=1)


def test_sweep_command_sends_chunks_to_the_scheduler(cluster, tmp_path):
    model = tmp_path / "logistic.txt"
    model.write_text(LOGISTIC)
    common = [sys.executable, "-m", "orbitdesk", "sweep", str(model), "--param", "r", "--from", "2.8", "--to", "4",
              "--count", "30", "--samples", "8", "--transient", "100", "--json"]
    env = dict(os.environ, PYTHONPATH=str(ROOT))
    remote = subprocess.run(common + ["--scheduler", cluster.scheduler_address], capture_output=True, text=True,
                            env=env, timeout=120)
    local = subprocess.run(common, capture_output=True, text=True, env=env, timeout=120)
    assert remote.returncode == 0, remote.stderr
    assert local.returncode == 0, local.stderr
    assert remote.stdout == local.stdout
