"""The one seam for parallel work.

Every loop over independent items that may run in other processes (edit
distances of many pairs, per-query predictions) goes through
:func:`parallel_map`; nothing else in gwpred talks to joblib or to a Dask
cluster.  The functions and items given to it must be picklable when
``n_jobs != 1``: module-level functions over plain arrays and dataclasses,
never an estimator.

Where the work runs:

- ``n_jobs=1``: in this process, always;
- ``n_jobs != 1``: on joblib worker processes (loky) on this machine, or,
  inside ``with cluster(...):``, as tasks of a Dask distributed cluster
  (the optional extra ``distributed``).  Results are the same and in task
  order in every case.
"""

from __future__ import annotations

import os
import shutil
import tempfile
import weakref
from collections.abc import Callable, Iterator, Mapping, Sequence
from contextlib import contextmanager
from contextvars import ContextVar
from typing import Any, TypeVar

import numpy as np
from joblib import Parallel, delayed, effective_n_jobs, parallel_backend

from ._utils import Interval, Rule, progress_bar, require_extra

__all__ = ["N_JOBS_RULE", "batch_slices", "check_n_jobs", "cluster", "file_backed", "parallel_map"]

T = TypeVar("T")

#: Allowed ``n_jobs`` values, for parameter tables (estimators check it when fitting).
N_JOBS_RULE = Rule(
    Interval(-np.inf, -1, integer=True),
    Interval(1, np.inf, integer=True),
    what="a non-zero integer (1: no parallelism, -1: one worker per processor)",
)

# The Dask client that `parallel_map` sends its tasks to, set only inside
# `with cluster(...)` (a context variable: scoped to the `with` block and to
# the thread or task that entered it).
_CLIENT: ContextVar[Any] = ContextVar("gwpred_parallel_client", default=None)


def check_n_jobs(n_jobs: Any) -> int:
    """Return ``n_jobs`` as an int, or raise saying which values work.

    >>> check_n_jobs(-1)
    -1
    """
    if isinstance(n_jobs, bool) or not isinstance(n_jobs, (int, np.integer)):
        raise TypeError(
            f"n_jobs must be an int, got {n_jobs!r} of type {type(n_jobs).__name__}; pass 1 "
            "for no parallelism or -1 for one worker per processor"
        )
    if n_jobs == 0:
        raise ValueError(
            "n_jobs must be a non-zero int (1 = no parallelism, k > 1 = k workers, -1 = one "
            "worker per processor), got 0"
        )
    return int(n_jobs)


def _check_timeout(timeout: Any) -> float:
    if isinstance(timeout, bool) or not isinstance(timeout, (int, float, np.integer, np.floating)) or not (
        np.isfinite(timeout) and timeout > 0
    ):
        raise ValueError(
            f"timeout must be a positive number of seconds, got {timeout!r}; pass e.g. timeout=10.0"
        )
    return float(timeout)


@contextmanager
def cluster(address: Any = None, *, n_workers: int | None = None, timeout: float = 10.0) -> Iterator[Any]:
    """Run every :func:`parallel_map` with ``n_jobs != 1`` inside the block on a Dask cluster.

    Needs the optional extra ``distributed`` (``pip install 'gwpred[distributed]'``).
    Inside the block, parallel work of gwpred (``BarycenterGraphPredictor.predict``,
    :func:`gwpred.metrics.summarize`, ...) is sent as tasks to the cluster's
    workers; results come back in task order and equal those of one process.
    Calls with ``n_jobs=1`` still run in this process.

    Parameters
    ----------
    address : str, distributed.Client or None, default=None
        Where to run:

        - a scheduler address (``"tcp://10.0.0.5:8786"``, ``"10.0.0.5:8786"``):
          connect a new client to that running scheduler, closed at the end of
          the block (the scheduler and its workers keep running).  The workers
          must be able to import gwpred (same version) and its dependencies;
        - a connected ``distributed.Client``: use it as it is; the caller keeps
          it open or closes it;
        - None: start a private cluster on this machine (``n_workers`` worker
          processes with one thread each, listening on 127.0.0.1 only, no
          dashboard), shut down at the end of the block.
    n_workers : int, optional
        Worker processes of the private cluster (``address=None`` only);
        default: one per processor.
    timeout : float, default=10.0
        Seconds to wait for the scheduler to answer and for at least one of
        its workers (with ``address=None``, for all ``n_workers``) before
        raising instead of waiting on.

    Yields
    ------
    distributed.Client
        The client the tasks go through (for its dashboard link, logs, ...).

    Raises
    ------
    ConnectionError
        If no scheduler answers at ``address`` within ``timeout`` seconds, or
        it has no worker by then; the message names the address and what to check.
    ValueError
        If ``address`` is not an address, a client or None, ``n_workers`` is not
        a positive int or is given with an address, or ``timeout`` is not positive.
    ImportError
        If the extra ``distributed`` is not installed.

    Notes
    -----
    ``n_jobs`` on a cluster: any value other than 1 uses all the cluster's
    worker threads (its size decides, not ``n_jobs``); 1 runs in this process.
    Tasks go through joblib's Dask backend, which groups them into batches of
    about a second of work each and returns results as batches finish.
    Arguments given to :func:`parallel_map` as ``shared`` are sent to every
    worker once, not with every batch.

    Examples
    --------
    >>> from gwpred.parallel import cluster, parallel_map
    >>> with cluster(n_workers=2) as client:             # doctest: +SKIP
    ...     parallel_map(pow, [(2, 3), (3, 2)], n_jobs=-1)
    [8, 9]
    """
    timeout = _check_timeout(timeout)
    if n_workers is not None and (
        isinstance(n_workers, bool) or not isinstance(n_workers, (int, np.integer)) or n_workers < 1
    ):
        raise ValueError(
            f"n_workers must be a positive int (worker processes of the private cluster), got "
            f"{n_workers!r}; pass e.g. n_workers=2, or None for one per processor"
        )
    if n_workers is not None and address is not None:
        raise ValueError(
            f"n_workers={n_workers!r} applies only to the private cluster (address=None); with "
            f"address={address!r} the scheduler's own workers run the tasks: drop n_workers"
        )
    distributed = require_extra("distributed", "gwpred.parallel.cluster")
    if address is None:
        n = int(n_workers) if n_workers is not None else os.cpu_count() or 1
        local = distributed.LocalCluster(
            n_workers=n, threads_per_worker=1, processes=True, host="127.0.0.1", dashboard_address=None,
            # no dashboard; the scheduler's small HTTP service (health checks) on a free loopback port
            scheduler_kwargs={"dashboard_address": "127.0.0.1:0"},
        )
        try:
            with distributed.Client(local, set_as_default=False, timeout=timeout) as client:
                _wait_for_workers(client, n, "the private cluster on 127.0.0.1", timeout)
                with _active(client):
                    yield client
        finally:
            local.close(timeout=timeout)
        return
    if isinstance(address, distributed.Client):
        _wait_for_workers(address, 1, f"the client's scheduler {address.scheduler.address!r}", timeout)
        with _active(address):
            yield address
        return
    if not isinstance(address, str) or not address.strip():
        raise ValueError(
            f"address must be a Dask scheduler address such as 'tcp://10.0.0.5:8786', a "
            f"distributed.Client, or None for a private cluster on this machine; got {address!r}"
        )
    client = _connect(distributed, address, timeout)
    try:
        _wait_for_workers(client, 1, f"the scheduler at {address!r}", timeout)
        with _active(client):
            yield client
    finally:
        client.close(timeout=timeout)


@contextmanager
def _active(client: Any) -> Iterator[None]:
    """Send the parallel work inside the block to ``client``."""
    token = _CLIENT.set(client)
    try:
        yield
    finally:
        _CLIENT.reset(token)


def _check_address(distributed: Any, address: str) -> None:
    """Raise ValueError on a malformed scheduler address, before any client is made.

    (A client given an address it cannot parse is left half-built and holds up
    the interpreter's exit while it tries to close.)
    """
    comm = distributed.comm
    try:
        scheme, location = comm.parse_address(address)
        comm.registry.get_backend(scheme)  # unknown scheme: ValueError
        if scheme in ("tcp", "tls", "ws", "wss"):
            port = comm.parse_host_port(location)[1]  # no port: ValueError
            if not 0 < int(port) < 65536:
                raise ValueError(f"port {port} is not in 1..65535")
    except (ValueError, TypeError) as err:
        raise ValueError(
            f"address {address!r} is not a Dask scheduler address ({err}); write it as "
            "'tcp://HOST:PORT', e.g. 'tcp://10.0.0.5:8786' (the scheduler prints it when it starts)"
        ) from None


def _connect(distributed: Any, address: str, timeout: float) -> Any:
    """A client connected to ``address``, or a ConnectionError saying what to check."""
    _check_address(distributed, address)
    try:
        return distributed.Client(address, timeout=timeout, set_as_default=False)
    except OSError as err:  # refused, timed out, unknown host
        raise ConnectionError(
            f"no Dask scheduler answered at {address!r} within {timeout:g} s ({err}); check that a "
            "scheduler runs there ('dask scheduler' prints its address), that host and port are "
            "right, and that no firewall blocks the port; or raise the timeout"
        ) from None


def _wait_for_workers(client: Any, n: int, where: str, timeout: float) -> None:
    try:
        client.wait_for_workers(n, timeout=timeout)
    except TimeoutError:
        have = len(client.nthreads())
        raise ConnectionError(
            f"{where} has {have} worker(s) after {timeout:g} s, {n} needed; start workers with "
            "'dask worker SCHEDULER_ADDRESS' (they need gwpred installed), or raise the timeout"
        ) from None


def _generator_mode() -> str | None:
    """The best ``return_as`` generator mode of the installed joblib, or None (joblib < 1.3)."""
    for mode in ("generator_unordered", "generator"):
        try:
            Parallel(n_jobs=1, return_as=mode)
        except (TypeError, ValueError):
            continue
        return mode
    return None


def _indexed(fn: Callable[..., T], index: int, args: tuple, shared: Mapping[str, Any]) -> tuple[int, T]:
    return index, fn(*args, **shared)


def _check_shared(shared: Any) -> dict[str, Any]:
    if shared is None:
        return {}
    if not isinstance(shared, Mapping) or not all(isinstance(k, str) for k in shared):
        raise TypeError(
            f"shared must be a mapping of keyword names to values (passed to every call as "
            f"fn(*task, **shared)), got {type(shared).__name__}; pass e.g. shared={{'table': table}}"
        )
    return dict(shared)


def parallel_map(
    fn: Callable[..., T],
    tasks: Sequence[tuple],
    *,
    n_jobs: int = 1,
    shared: Mapping[str, Any] | None = None,
    progress: bool = False,
    desc: str = "",
    unit: str = "it",
    weights: Sequence[int] | None = None,
) -> list[T]:
    """``[fn(*task, **shared) for task in tasks]``, in task order, on ``n_jobs`` workers.

    Parameters
    ----------
    fn : callable
        A module-level function (picklable when ``n_jobs != 1``).
    tasks : sequence of tuple
        Positional arguments of each call.
    n_jobs : int, default=1
        1 runs in this process (also inside :func:`cluster`); k > 1 on k
        worker processes (joblib's loky backend); -1 on one worker per
        processor.  Inside ``with cluster(...)``, any value but 1 runs on all
        the cluster's worker threads.  Results do not depend on it.
    shared : mapping of str to object, optional
        Keyword arguments common to every call, e.g. a large table that all
        tasks read.  On a cluster they are sent to each worker once (Dask
        scatter, broadcast) instead of with every batch of tasks; on loky
        workers, numpy arrays above 1 MB are memory-mapped by joblib once per
        call.
    progress : bool, default=False
        A progress bar on standard error that ticks as items finish (on a
        cluster: as each batch of results comes back).
    desc, unit : str
        Label and unit of the progress bar.
    weights : sequence of int, optional
        Units of work in each task (e.g. the queries of a batch): the bar
        counts these instead of tasks.

    Returns
    -------
    list
        One result per task, in the order of ``tasks``.

    Raises
    ------
    Exception
        The first exception raised by a call (the remaining tasks are dropped).

    Examples
    --------
    >>> parallel_map(pow, [(2, 3), (3, 2)])
    [8, 9]
    >>> parallel_map(pow, [(2,), (3,)], shared={"exp": 2})
    [4, 9]
    """
    n_jobs = check_n_jobs(n_jobs)
    kwargs = _check_shared(shared)
    out: list[Any] = [None] * len(tasks)
    ticks = [1] * len(tasks) if weights is None else [int(w) for w in weights]
    if len(ticks) != len(tasks):
        raise ValueError(f"weights must give one number per task; got {len(ticks)} for {len(tasks)} tasks.")
    with progress_bar(None, progress=progress, total=sum(ticks), desc=desc, unit=unit) as bar:
        if n_jobs == 1 or len(tasks) <= 1:
            for i, task in enumerate(tasks):
                out[i] = fn(*task, **kwargs)
                bar.update(ticks[i])
            return out
        client = _CLIENT.get()
        with _backend(client, kwargs):
            mode = _generator_mode()
            if mode is not None:
                # results arrive as items finish: tick per result
                for i, res in Parallel(n_jobs=n_jobs, return_as=mode)(
                    delayed(_indexed)(fn, i, task, kwargs) for i, task in enumerate(tasks)
                ):
                    out[i] = res
                    bar.update(ticks[i])
                return out
            # older joblib: batches of a few items per worker, the bar ticks per batch
            size = 4 * effective_n_jobs(n_jobs)
            with Parallel(n_jobs=n_jobs) as parallel:
                for start in range(0, len(tasks), size):
                    for i, res in parallel(
                        delayed(_indexed)(fn, start + j, task, kwargs)
                        for j, task in enumerate(tasks[start : start + size])
                    ):
                        out[i] = res
                        bar.update(ticks[i])
    return out


def file_backed(arrays: Mapping[str, np.ndarray], owner: object) -> dict[str, np.ndarray]:
    """Read-only copies of ``arrays`` backed by files in a private temporary folder.

    joblib hands a file-backed array to its workers as a reference to the
    file, where an in-memory one is hashed and written to a new file at every
    :func:`parallel_map` call; for arrays that many calls share (e.g. a
    model's training graphs) this is paid once.  The folder is removed when
    ``owner`` is garbage-collected, or at exit.

    Parameters
    ----------
    arrays : mapping of str to ndarray
    owner : object
        Whose lifetime the files follow (it must support weak references).

    Returns
    -------
    dict of str to ndarray
        The same names, as read-only ``numpy.memmap`` arrays equal to the inputs.

    Examples
    --------
    >>> class Owner: pass
    >>> keep = Owner()
    >>> out = file_backed({"a": np.arange(3.0)}, keep)
    >>> out["a"].tolist(), out["a"].flags.writeable
    ([0.0, 1.0, 2.0], False)
    """
    folder = tempfile.mkdtemp(prefix="gwpred-shared-")
    weakref.finalize(owner, shutil.rmtree, folder, ignore_errors=True)
    out = {}
    for i, (name, arr) in enumerate(arrays.items()):
        path = os.path.join(folder, f"{i}.npy")  # a private file of our own: no user data is touched
        arr = np.ascontiguousarray(arr)
        target = np.lib.format.open_memmap(path, mode="w+", dtype=arr.dtype, shape=arr.shape)
        target[...] = arr
        target.flush()
        del target
        out[name] = np.load(path, mmap_mode="r")
    return out


def batch_slices(n_items: int, batch_size: int, n_jobs: int = 1) -> list[slice]:
    """Cut ``n_items`` into consecutive batches for :func:`parallel_map`.

    At most ``batch_size`` items per batch and, with several workers, at
    least two batches per worker (so that every worker gets work and a slow
    batch does not hold up the rest); one worker takes full batches.

    Parameters
    ----------
    n_items : int
    batch_size : int
        Largest batch.
    n_jobs : int, default=1
        As in :func:`parallel_map`; inside :func:`cluster`, the cluster's
        worker threads count.

    Returns
    -------
    list of slice

    Examples
    --------
    >>> batch_slices(10, 4)
    [slice(0, 4, None), slice(4, 8, None), slice(8, 10, None)]
    >>> len(batch_slices(1000, 256, n_jobs=2))
    4
    """
    workers = 1
    if check_n_jobs(n_jobs) != 1:
        client = _CLIENT.get()
        workers = sum(client.nthreads().values()) if client is not None else effective_n_jobs(n_jobs)
    size = int(batch_size)
    if workers > 1:
        size = max(1, min(size, -(-n_items // (2 * workers))))
    return [slice(i, min(i + size, n_items)) for i in range(0, n_items, size)]


@contextmanager
def _backend(client: Any, shared: dict[str, Any]) -> Iterator[None]:
    """joblib's backend for one call: loky, or inside :func:`cluster` joblib's Dask backend.

    On a cluster, joblib groups tasks into batches of about a second each
    (one Dask task per batch: per-task scheduling costs milliseconds), and the
    ``shared`` mapping is scattered to every worker once; each batch then
    refers to it instead of carrying a copy.
    """
    if client is None:
        yield
        return
    params: dict[str, Any] = {"client": client}
    if shared:
        params["scatter"] = [shared]
    with parallel_backend("dask", **params):
        yield
