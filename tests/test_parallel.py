"""Tests for gwpred.parallel: the one seam for parallel work.

Outside reference: joblib (loky worker processes) must give the same results,
in the same order, as a plain Python loop.
"""

from __future__ import annotations

import operator

import pytest

from gwpred.parallel import check_n_jobs, parallel_map


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
