"""Batch arrays in and out of compiled kernels without needless copies.

The per-tick path calls a compiled kernel a dozen times per control tick; for one robot the
cost of a tick is mostly Python around those calls, so inputs that already have the right
shape, type and layout go through untouched.
"""

from __future__ import annotations

import numpy as np

#: the float64 dtype, compared by identity (cheaper than ==)
F8 = np.dtype(np.float64)


def as_rows(value: np.ndarray, shape: tuple[int, ...]) -> np.ndarray:
    """``value`` as a C-contiguous float64 array of ``shape`` (broadcast if it must be).

    Returns ``value`` itself when it already is one (no copy: the caller must not write to it
    unless it owns it).

    Raises
    ------
    ValueError
        When ``value`` cannot be broadcast to ``shape``.
    """
    if type(value) is np.ndarray and value.dtype is F8 and value.shape == shape and value.flags.c_contiguous:
        return value
    return np.ascontiguousarray(np.broadcast_to(np.asarray(value, dtype=np.float64), shape))


def as_batch(value: np.ndarray, width: int) -> np.ndarray:
    """``value`` as a C-contiguous float64 array of shape (N, ``width``), N from the data.

    Returns ``value`` itself when it already is one (no copy, as :func:`as_rows`).
    """
    if (
        type(value) is np.ndarray and value.dtype is F8 and value.ndim == 2
        and value.shape[1] == width and value.flags.c_contiguous
    ):
        return value
    return np.ascontiguousarray(np.asarray(value, dtype=np.float64).reshape(-1, width))
