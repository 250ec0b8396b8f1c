"""Tests for gwpred.parallel: the one seam for parallel work.

Outside references: joblib (loky worker processes) and a Dask distributed
``LocalCluster`` (worker processes on 127.0.0.1) must give the same results,
in the same order, as a plain Python loop; graphs are compared through
networkx node-link data.  The cluster tests are skipped when the optional
extra ``distributed`` is not installed.
"""

from __future__ import annotations

import gc
import operator
import os
import socket

import networkx as nx
import numpy as np
import pytest

from gwpred import BarycenterGraphPredictor
from gwpred.datasets import load_demo
from gwpred.metrics import summarize
from gwpred.parallel import batch_slices, check_n_jobs, cluster, file_backed, parallel_map

NO_DISTRIBUTED = "Dask distributed is not installed (pip install 'gwpred[distributed]')"
#: seconds allowed for the test cluster to start, stop, or answer
CLUSTER_TIMEOUT = 30


def test_parallel_map_equals_a_loop_in_order():
    tasks = [(k, 7 - k) for k in range(23)]
    expected = [operator.mul(*t) for t in tasks]
    assert parallel_map(operator.mul, tasks) == expected
    assert parallel_map(operator.mul, tasks, n_jobs=2) == expected
    assert parallel_map(operator.mul, [], n_jobs=2) == []


@pytest.mark.parametrize(
    "value, exc, match",
    [
        (0, ValueError, r"n_jobs must be a non-zero int .*got 0"),
        (1.5, TypeError, r"n_jobs must be an int, got 1\.5 of type float"),
        (True, TypeError, r"n_jobs must be an int, got True of type bool"),
    ],
)
def test_check_n_jobs(value, exc, match):
    with pytest.raises(exc, match=match):
        check_n_jobs(value)
    assert check_n_jobs(-1) == -1


def test_shared_arguments_reach_every_call():
    tasks = [(b,) for b in range(7)]
    expected = [b**3 for b in range(7)]
    assert parallel_map(pow, tasks, shared={"exp": 3}) == expected
    assert parallel_map(pow, tasks, shared={"exp": 3}, n_jobs=2) == expected


def test_file_backed_arrays_reach_workers_and_go_with_their_owner():
    class Owner:
        pass

    owner = Owner()
    data = {"a": np.arange(12.0).reshape(3, 4), "b": np.array([3, 1, 2])}
    mapped = file_backed(data, owner)
    assert all(isinstance(v, np.memmap) and not v.flags.writeable for v in mapped.values())
    for k in data:
        np.testing.assert_array_equal(mapped[k], data[k])
    # on loky workers (reference: numpy's own sum of the in-memory array)
    sums = parallel_map(np.sum, [(mapped["a"],), (mapped["b"],)], n_jobs=2)
    assert sums == [data["a"].sum(), data["b"].sum()]
    folder = os.path.dirname(mapped["a"].filename)
    assert os.path.isdir(folder)
    del mapped, owner
    gc.collect()
    assert not os.path.exists(folder)


def test_shared_must_be_a_mapping_of_names():
    with pytest.raises(TypeError, match=r"shared must be a mapping of keyword names to values .*got list"):
        parallel_map(pow, [(2,)], shared=[3])


# --------------------------------------------------------------------------
# on a Dask cluster (optional extra: distributed)
# --------------------------------------------------------------------------
@pytest.fixture(scope="module")
def dask_client():
    """Two worker processes on 127.0.0.1 (no dashboard), closed after the module's tests."""
    distributed = pytest.importorskip("distributed", reason=NO_DISTRIBUTED)
    local = distributed.LocalCluster(
        n_workers=2, threads_per_worker=1, processes=True, host="127.0.0.1", dashboard_address=None,
        scheduler_kwargs={"dashboard_address": "127.0.0.1:0"}, death_timeout=CLUSTER_TIMEOUT,
    )
    try:
        client = distributed.Client(local, timeout=CLUSTER_TIMEOUT, set_as_default=False)
        try:
            client.wait_for_workers(2, timeout=CLUSTER_TIMEOUT)
            yield client
        finally:
            client.close(timeout=CLUSTER_TIMEOUT)
    finally:
        local.close(timeout=CLUSTER_TIMEOUT)


def free_loopback_port() -> int:
    """A port on 127.0.0.1 that nothing listens on (bound by the OS, then released)."""
    with socket.socket(socket.AF_INET, socket.SOCK_STREAM) as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


def node_link(graphs: list[nx.Graph]) -> list[dict]:
    return [nx.node_link_data(g, edges="edges") for g in graphs]


def worker_pid() -> int:
    return os.getpid()


def test_parallel_map_on_a_cluster_equals_a_loop_in_order(dask_client):
    tasks = [(k, 7 - k) for k in range(41)]
    expected = [operator.mul(*t) for t in tasks]
    # tasks whose first item is callable stay plain arguments (Dask reads such tuples as tasks)
    calls = [(operator.add, k, 1) for k in range(9)]
    with cluster(dask_client) as client:
        assert client is dask_client
        for n_jobs in (-1, 2, 1):
            assert parallel_map(operator.mul, tasks, n_jobs=n_jobs) == expected
        assert parallel_map(operator.call, calls, n_jobs=-1) == [k + 1 for k in range(9)]
        assert parallel_map(pow, [(b,) for b in range(9)], shared={"exp": 2}, n_jobs=-1) == [b * b for b in range(9)]
        assert parallel_map(operator.mul, [], n_jobs=-1) == []


def test_work_runs_on_the_workers_and_n_jobs_1_stays_here(dask_client):
    workers = set(dask_client.run(worker_pid).values())
    with cluster(dask_client):
        pids = parallel_map(worker_pid, [()] * 20, n_jobs=-1)
        assert set(pids) <= workers
        assert parallel_map(worker_pid, [()] * 3, n_jobs=1) == [os.getpid()] * 3
    # outside the block: loky workers of this machine, not the cluster's
    assert not set(parallel_map(worker_pid, [()] * 4, n_jobs=2)) & workers


def test_progress_bar_counts_every_result_on_a_cluster(dask_client, capsys):
    with cluster(dask_client):
        parallel_map(operator.mul, [(k, k) for k in range(23)], n_jobs=-1, progress=True, desc="squares", unit="sq")
    err = capsys.readouterr().err
    assert "squares" in err and "23/23" in err


def fail_on_five(k: int) -> int:
    if k == 5:
        raise ValueError(f"item {k} is bad")
    return k


def test_an_error_in_a_task_reaches_the_caller(dask_client):
    with cluster(dask_client), pytest.raises(ValueError, match="item 5 is bad"):
        parallel_map(fail_on_five, [(k,) for k in range(12)], n_jobs=-1)


def test_cluster_by_scheduler_address(dask_client):
    address = dask_client.scheduler.address
    assert address.startswith("tcp://127.0.0.1:")
    with cluster(address, timeout=CLUSTER_TIMEOUT) as client:
        assert client is not dask_client and client.scheduler.address == address
        assert parallel_map(operator.mul, [(k, 3) for k in range(10)], n_jobs=-1) == [3 * k for k in range(10)]
    assert client.status == "closed"  # our connection is closed; the cluster runs on
    assert dask_client.submit(operator.add, 1, 2).result(timeout=CLUSTER_TIMEOUT) == 3


@pytest.fixture(scope="module")
def qm9_split():
    """Bundled QM9 demo molecules: the first 200 train, the next 12 are queries."""
    X, graphs = load_demo()
    return X[:200], graphs[:200], X[200:212], graphs[200:212]


def test_predictions_on_a_cluster_equal_one_process(dask_client, qm9_split):
    Xtr, Gtr, Xte, _ = qm9_split
    model = BarycenterGraphPredictor(random_state=0).fit(Xtr, Gtr)
    here = model.predict(Xte)
    model.set_params(n_jobs=-1)
    with cluster(dask_client):
        there = model.predict(Xte)
    assert node_link(there) == node_link(here)


def test_summaries_on_a_cluster_equal_one_process(dask_client, qm9_split):
    # exact edit distances (no time limit), so no result depends on the clock
    _, Gtr, _, Gte = qm9_split
    pred = Gtr[:12]
    here = summarize(pred, Gte, time_limit=None)
    with cluster(dask_client):
        there = summarize(pred, Gte, time_limit=None, n_jobs=-1)
    assert here["exact_share"] == 1.0
    assert there == here


def test_private_cluster_starts_on_loopback_and_leaves_no_process():
    pytest.importorskip("distributed", reason=NO_DISTRIBUTED)
    psutil = pytest.importorskip("psutil", reason="psutil (a dependency of distributed) is not installed")
    with cluster(n_workers=1, timeout=CLUSTER_TIMEOUT) as client:
        assert client.scheduler.address.startswith("tcp://127.0.0.1:")
        assert parallel_map(operator.mul, [(k, 2) for k in range(5)], n_jobs=-1) == [0, 2, 4, 6, 8]
        pids = set(client.run(worker_pid).values())
        assert len(pids) == 1 and os.getpid() not in pids
        processes = [psutil.Process(pid) for pid in pids]
    assert client.status == "closed"
    gone, alive = psutil.wait_procs(processes, timeout=CLUSTER_TIMEOUT)
    assert not alive


def test_unreachable_scheduler_fails_within_the_timeout():
    pytest.importorskip("distributed", reason=NO_DISTRIBUTED)
    address = f"tcp://127.0.0.1:{free_loopback_port()}"
    with pytest.raises(
        ConnectionError,
        match=rf"no Dask scheduler answered at '{address}' within 1 s .*check that a scheduler runs there",
    ):
        with cluster(address, timeout=1.0):
            pass


def test_scheduler_without_workers_fails_within_the_timeout():
    distributed = pytest.importorskip("distributed", reason=NO_DISTRIBUTED)
    with distributed.LocalCluster(
        n_workers=0, processes=False, protocol="tcp", host="127.0.0.1", dashboard_address=None,
        scheduler_kwargs={"dashboard_address": "127.0.0.1:0"},
    ) as empty:
        address = empty.scheduler_address
        match = rf"the scheduler at '{address}' has 0 worker\(s\) after 1 s, 1 needed; start workers with 'dask worker"
        with pytest.raises(ConnectionError, match=match):
            with cluster(address, timeout=1.0):
                pass


@pytest.mark.parametrize(
    "kwargs, match",
    [
        ({"address": "tcp://127.0.0.1"}, r"address 'tcp://127\.0\.0\.1' is not a Dask scheduler address \(missing"),
        ({"address": "nonsense://127.0.0.1:8786"},
         r"address 'nonsense://127\.0\.0\.1:8786' is not a Dask scheduler address \(unknown address scheme"),
        ({"address": "tcp://127.0.0.1:0"}, r"is not a Dask scheduler address \(port 0 is not in 1\.\.65535\)"),
        ({"address": 8786}, r"address must be a Dask scheduler address such as 'tcp://10\.0\.0\.5:8786'.*got 8786"),
        ({"address": "{free}", "n_workers": 2}, r"n_workers=2 applies only to the private cluster \(address=None\)"),
        ({"n_workers": 0}, r"n_workers must be a positive int .*got 0"),
        ({"timeout": 0}, r"timeout must be a positive number of seconds, got 0"),
    ],
)
def test_cluster_rejects_bad_arguments(kwargs, match):
    # these fail before any connection; an address is still one where nothing listens
    pytest.importorskip("distributed", reason=NO_DISTRIBUTED)
    if kwargs.get("address") == "{free}":
        kwargs = {**kwargs, "address": f"tcp://127.0.0.1:{free_loopback_port()}"}
    with pytest.raises(ValueError, match=match):
        with cluster(**kwargs):
            pass


def test_batch_slices_cover_the_items_in_order():
    # a partition of range(n) into consecutive runs (checked against Python's own range)
    for n, size, jobs in [(0, 4, 1), (10, 4, 1), (1000, 256, 2), (5, 256, 2), (7, 1, 2)]:
        parts = batch_slices(n, size, jobs)
        assert [i for s in parts for i in range(n)[s]] == list(range(n))
        assert all(0 < s.stop - s.start <= size for s in parts)
    assert len(batch_slices(1000, 256, 1)) == 4 and len(batch_slices(1000, 256, 2)) == 4
    assert len(batch_slices(100, 256, 2)) == 4  # two per worker: every worker gets work


def test_progress_counts_the_work_in_each_task(capsys):
    # the bar counts units of work (e.g. the queries of a batch), not tasks; tqdm's own
    # "done/total" counter is the reference
    assert parallel_map(pow, [(2,), (3,)], shared={"exp": 2}, progress=True, weights=[2, 3], unit="q") == [4, 9]
    assert "5/5" in capsys.readouterr().err
    with pytest.raises(ValueError, match=r"weights must give one number per task; got 1 for 2 tasks"):
        parallel_map(pow, [(2,), (3,)], shared={"exp": 2}, weights=[1])
