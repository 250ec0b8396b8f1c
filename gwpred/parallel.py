"""The one seam for parallel work.

Every loop over independent items that may run in other processes (edit
distances of many pairs, per-query predictions) goes through
:func:`parallel_map`; nothing else in gwpred talks to joblib.  The functions
and items given to it must be picklable when ``n_jobs != 1``: module-level
functions over plain arrays and dataclasses, never an estimator.
"""

from __future__ import annotations

from collections.abc import Callable, Sequence
from typing import Any, TypeVar

import numpy as np
from joblib import Parallel, delayed, effective_n_jobs

from ._utils import Interval, Rule, progress_bar

__all__ = ["N_JOBS_RULE", "check_n_jobs", "parallel_map"]

T = TypeVar("T")

#: Allowed ``n_jobs`` values, for parameter tables (estimators check it when fitting).
N_JOBS_RULE = Rule(
    Interval(-np.inf, -1, integer=True),
    Interval(1, np.inf, integer=True),
    what="a non-zero integer (1: no parallelism, -1: one worker per processor)",
)


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


def _generator_mode() -> str | None:
    """The best ``return_as`` generator mode of the installed joblib, or None (joblib < 1.3)."""
    for mode in ("generator_unordered", "generator"):
        try:
            Parallel(n_jobs=1, return_as=mode)
        except (TypeError, ValueError):
            continue
        return mode
    return None


def _indexed(fn: Callable[..., T], index: int, args: tuple) -> tuple[int, T]:
    return index, fn(*args)


def parallel_map(
    fn: Callable[..., T],
    tasks: Sequence[tuple],
    *,
    n_jobs: int = 1,
    progress: bool = False,
    desc: str = "",
    unit: str = "it",
) -> list[T]:
    """``[fn(*task) for task in tasks]``, in task order, on ``n_jobs`` joblib workers.

    Parameters
    ----------
    fn : callable
        A module-level function (picklable when ``n_jobs != 1``).
    tasks : sequence of tuple
        Positional arguments of each call.
    n_jobs : int, default=1
        1 runs in this process; k > 1 on k worker processes (joblib's loky
        backend); -1 on one worker per processor.  Results do not depend on it.
    progress : bool, default=False
        A progress bar on standard error that ticks as items finish.
    desc, unit : str
        Label and unit of the progress bar.

    Returns
    -------
    list
        One result per task, in the order of ``tasks``.

    Examples
    --------
    >>> parallel_map(pow, [(2, 3), (3, 2)])
    [8, 9]
    """
    n_jobs = check_n_jobs(n_jobs)
    out: list[Any] = [None] * len(tasks)
    with progress_bar(range(len(tasks)), progress=progress, total=len(tasks), desc=desc, unit=unit) as bar:
        if n_jobs == 1 or len(tasks) <= 1:
            for i, task in enumerate(tasks):
                out[i] = fn(*task)
                bar.update(1)
            return out
        mode = _generator_mode()
        if mode is not None:
            # results arrive as items finish: tick per result
            for i, res in Parallel(n_jobs=n_jobs, return_as=mode)(
                delayed(_indexed)(fn, i, task) for i, task in enumerate(tasks)
            ):
                out[i] = res
                bar.update(1)
            return out
        # older joblib: batches of a few items per worker, the bar ticks per batch
        size = 4 * effective_n_jobs(n_jobs)
        with Parallel(n_jobs=n_jobs) as parallel:
            for start in range(0, len(tasks), size):
                for i, res in parallel(
                    delayed(_indexed)(fn, start + j, task) for j, task in enumerate(tasks[start : start + size])
                ):
                    out[i] = res
                    bar.update(1)
    return out
