"""Reproducible train/test splits of a data set's positions."""

from __future__ import annotations

import numbers

import numpy as np
from numpy.typing import ArrayLike, NDArray

from ._checks import count, int_vector

__all__ = ["split_indices"]


def split_indices(
    n_items: int,
    *,
    n_train: int,
    n_test: int,
    random_state: int | np.random.Generator = 0,
    exclude: ArrayLike | None = None,
) -> tuple[NDArray[np.int64], NDArray[np.int64]]:
    """Draw disjoint, reproducible train and test positions from ``range(n_items)``.

    The positions not in ``exclude`` are shuffled once with
    ``numpy.random.default_rng(random_state)``; the first ``n_test`` of the
    shuffled order form the test set and the next ``n_train`` the training
    set. So for a fixed ``random_state`` the test set does not depend on
    ``n_train``, and a larger ``n_train`` extends a smaller one (nested
    training sets, e.g. for learning curves).

    Parameters
    ----------
    n_items : int
        Number of items (e.g. ``len(data.graphs)``).
    n_train, n_test : int
        Sizes of the two sets (>= 0); together at most the number of items
        left after ``exclude``.
    random_state : int or numpy.random.Generator, default=0
        Seed (int >= 0) or generator; the same seed gives the same split.
    exclude : array-like of int, default=None
        Positions that go into neither set (e.g. molecules kept for a
        separate check). Repeats are allowed.

    Returns
    -------
    train, test : ndarray of int64
        Sorted positions, of lengths ``n_train`` and ``n_test``, disjoint
        from each other and from ``exclude``.

    Raises
    ------
    TypeError
        If a count is not an integer, ``random_state`` is neither an int nor
        a Generator, or ``exclude`` does not hold integers.
    ValueError
        If a count is negative, ``n_train + n_test`` exceeds the available
        items, or ``exclude`` holds positions outside ``0 .. n_items - 1``.

    Examples
    --------
    >>> from gwpred.datasets import split_indices
    >>> train, test = split_indices(10, n_train=6, n_test=3, random_state=0)
    >>> len(train), len(test), set(train) & set(test)
    (6, 3, set())
    """
    n = count("n_items", n_items)
    k_train = count("n_train", n_train)
    k_test = count("n_test", n_test)
    if isinstance(random_state, (bool, np.bool_)) or not isinstance(
        random_state, (numbers.Integral, np.random.Generator)
    ):
        raise TypeError(
            "random_state must be an int or a numpy.random.Generator, got "
            f"{random_state!r}; pass e.g. random_state=0"
        )
    available = np.arange(n, dtype=np.int64)
    if exclude is not None:
        drop = int_vector("exclude", np.asarray(exclude).ravel())
        if drop.size and (drop.min() < 0 or drop.max() >= n):
            raise ValueError(
                f"exclude must hold positions in 0..{n - 1}, got values from {drop.min()} "
                f"to {drop.max()}"
            )
        available = np.setdiff1d(available, drop)
    if k_train + k_test > available.size:
        excluded = n - available.size
        raise ValueError(
            f"n_train + n_test = {k_train} + {k_test} = {k_train + k_test} exceeds the "
            f"{available.size} available items ({n} items, {excluded} excluded); "
            "ask for fewer"
        )
    order = np.random.default_rng(random_state).permutation(available)
    test = np.sort(order[:k_test])
    train = np.sort(order[k_test : k_test + k_train])
    return train, test
