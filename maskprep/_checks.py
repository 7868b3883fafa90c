"""Small shared checks and reductions: number types that reject bool, and per-key sums.

`bool` is a subclass of `int` in Python, so ``isinstance(True, int)`` holds; every
option check in the package goes through `is_whole` / `is_real`, which refuse it.
"""

from __future__ import annotations

import numbers
from typing import Any, TypeGuard

import numpy as np

__all__ = ["is_whole", "is_real", "sum_by_key"]


def is_whole(
    value: object, low: int | None = None, high: int | None = None
) -> TypeGuard[int | np.integer[Any]]:
    """A Python or numpy integer (not a bool) within [low, high] where given.

    >>> is_whole(3, 1), is_whole(True), is_whole(2.0), is_whole(np.int64(5), 1, 4)
    (True, False, False, False)
    """
    if isinstance(value, bool) or not isinstance(value, (int, np.integer)):
        return False
    return bool((low is None or value >= low) and (high is None or value <= high))


def is_real(value: object) -> TypeGuard[numbers.Real]:
    """A Python or numpy real number (not a bool).

    >>> is_real(0.5), is_real(2), is_real(False), is_real("0.5")
    (True, True, False, False)
    """
    return not isinstance(value, (bool, np.bool_)) and isinstance(value, numbers.Real)


def sum_by_key(keys: np.ndarray, *columns: np.ndarray) -> tuple[np.ndarray, ...]:
    """Distinct keys (sorted) and, for each column, the int64 sum of its values per key.

    Sums go through float64 weights (numpy's bincount), exact below 2**53.

    >>> [a.tolist() for a in sum_by_key(np.array([7, 3, 7]), np.array([1, 2, 3]))]
    [[3, 7], [2, 4]]
    """
    uniq, inv = np.unique(keys, return_inverse=True)
    inv = inv.ravel()
    sums = tuple(
        np.bincount(inv, weights=np.asarray(c, dtype=np.float64), minlength=len(uniq)).astype(
            np.int64
        )
        for c in columns
    )
    return (uniq, *sums)
