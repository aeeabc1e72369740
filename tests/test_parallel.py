"""Scale-out: the same results in-process and on a local dask.distributed cluster, a killed worker
changes nothing, shared arrays travel once, and clusters that cannot be used are refused.

The reference is the in-process run of the same chunks (integers bit for bit, floats to 1e-9
relative, as the issue asks).  Fault tolerance is dask's own: the scheduler reruns the tasks of a
worker that dies (dask.distributed documentation, "Resilience", common practice).
"""

from __future__ import annotations

import os
import signal
import socket
import subprocess
import sys
import time
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

sys.path.insert(0, str(Path(__file__).parent))
from helpers.routing_nets import grid  # noqa: E402

from geo_reach.analysis.criticality import HubTrips, link_criticality  # noqa: E402
from geo_reach.errors import OptionError  # noqa: E402
from geo_reach.parallel import ClusterError, InProcess, balanced_chunks, executor  # noqa: E402

def _make_probe_task():
    """A task reporting which process ran the chunk, which copy of ``shared`` it saw, and a result to
    check the order.  Made inside a function so that it travels to the workers by value (they cannot
    import this test module)."""

    def probe(chunk, shared):
        import os

        return os.getpid(), id(shared), int(chunk) * 2, float(shared["x"].sum())

    return probe


_probe_task = _make_probe_task()


def _trips(side=40, seed=0, places=True):
    net = grid(side, side, spacing=100.0)
    rng = np.random.default_rng(seed)
    H = 9
    kinds = np.array(["clinic", "market", "port"] * 3, object)
    ext = (side - 1) * 100.0
    kw = {}
    if places:
        kw = dict(place_xy=rng.uniform(0, ext, (150, 2)), people=rng.integers(0, 500, 150).astype(float))
    return HubTrips.prepare(net, rng.uniform(0, ext, (H, 2)), None, kinds, **kw)


def _assert_same(a: pd.DataFrame, b: pd.DataFrame):
    assert list(a.columns) == list(b.columns)
    for c in a.columns:
        if np.issubdtype(a[c].dtype, np.integer):
            assert np.array_equal(a[c].to_numpy(), b[c].to_numpy()), c
        else:
            np.testing.assert_allclose(a[c].to_numpy(), b[c].to_numpy(), rtol=1e-9, atol=0, err_msg=c)


def test_in_process_map_keeps_chunk_order_and_reports_progress():
    seen = []
    out = InProcess().map(_probe_task, [3, 1, 2], {"x": np.ones(4)}, progress=lambda d, t: seen.append((d, t)))
    assert [r[2] for r in out] == [6, 2, 4] and seen == [(1, 3), (2, 3), (3, 3)]
    with executor() as ex:
        assert isinstance(ex, InProcess)


@settings(max_examples=100, deadline=None)
@given(st.lists(st.floats(0, 100), min_size=1, max_size=60), st.integers(1, 20))
def test_balanced_chunks_keep_every_item_in_order(weights, n):
    items = np.arange(len(weights))
    parts = balanced_chunks(items, weights, n)
    assert np.array_equal(np.concatenate(parts), items)
    assert 1 <= len(parts) <= min(n, len(items)) and all(len(p) for p in parts)


def test_options_are_checked():
    with pytest.raises(OptionError, match="not both"):
        with executor(workers=2, scheduler="tcp://127.0.0.1:1"):
            pass
    with pytest.raises(OptionError, match="1 or more"):
        with executor(workers=0):
            pass


def test_local_cluster_gives_the_in_process_results_and_ships_shared_data_once():
    t = _trips()
    ref = link_criticality(t, chunks=24).table
    shared = {"x": np.arange(1_000_000, dtype=float)}
    with executor(workers=2, timeout_s=60) as ex:
        assert ex.n_workers == 2
        got = link_criticality(t, executor=ex, chunks=24).table
        probe = ex.map(_probe_task, list(range(30)), shared)
    _assert_same(got, ref)
    assert [p[2] for p in probe] == [2 * i for i in range(30)]          # chunk order kept
    assert all(p[3] == shared["x"].sum() for p in probe)
    # one copy of the shared arrays per worker process, whatever the number of tasks
    per_pid = {}
    for pid, ident, _, _ in probe:
        per_pid.setdefault(pid, set()).add(ident)
    assert all(len(ids) == 1 for ids in per_pid.values()), per_pid
    assert len({next(iter(ids)) for ids in per_pid.values()}) <= 2


def test_a_worker_killed_mid_run_changes_no_result():
    t = _trips(side=70, seed=1, places=False)
    ref = link_criticality(t, chunks=40).table
    killed = {}
    with executor(workers=2, timeout_s=60) as ex:
        before = ex.worker_pids()
        victim = sorted(before.values())[0]

        def kill_one(done, total):
            if done == 3 and not killed:
                killed["at"] = (done, total)
                os.kill(victim, signal.SIGKILL)

        got = link_criticality(t, executor=ex, chunks=40, progress=kill_one).table
        deadline = time.time() + 30
        while time.time() < deadline and victim in ex.worker_pids().values():
            time.sleep(0.5)
        after = ex.worker_pids()
    assert killed["at"] == (3, 40)                     # killed with 37 of 40 chunks outstanding
    assert victim not in after.values()
    _assert_same(got, ref)


def _free_port():
    s = socket.socket()
    s.bind(("127.0.0.1", 0))
    port = s.getsockname()[1]
    s.close()
    return port


def test_a_scheduler_that_does_not_answer_is_refused():
    port = _free_port()
    t0 = time.monotonic()
    with pytest.raises(ClusterError, match=f"scheduler tcp://127.0.0.1:{port}: no answer within 2 s"):
        with executor(scheduler=f"tcp://127.0.0.1:{port}", timeout_s=2):
            pass
    assert time.monotonic() - t0 < 30


BLOCK = '''
import sys

class _NoGeoReach:
    """This worker's Python has no geo-reach (as on a machine where it was never installed)."""
    def find_spec(self, name, path=None, target=None):
        if name == "geo_reach" or name.startswith("geo_reach."):
            raise ModuleNotFoundError(f"No module named {name!r}")
        return None

sys.meta_path.insert(0, _NoGeoReach())
'''


def test_workers_without_geo_reach_are_refused_naming_what_to_install(tmp_path):
    from distributed import LocalCluster

    (tmp_path / "sitecustomize.py").write_text(BLOCK)
    env = dict(os.environ, PYTHONPATH=str(tmp_path))
    with LocalCluster(n_workers=0, processes=True, dashboard_address=None) as cluster:
        worker = subprocess.Popen([sys.executable, "-m", "distributed.cli.dask_worker", cluster.scheduler_address,
                                   "--nthreads", "1", "--no-dashboard"], cwd=tmp_path, env=env,
                                  stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
        try:
            with pytest.raises(ClusterError, match="cannot import geo-reach .* install geo-reach 0.1.0"):
                with executor(scheduler=cluster.scheduler_address, timeout_s=60):
                    pass
        finally:
            worker.terminate()
            worker.wait(timeout=30)
