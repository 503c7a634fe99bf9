"""Reductions shared by the analyses."""

from __future__ import annotations

import numpy as np


def dot(a: np.ndarray, b: np.ndarray) -> float:
    """Sum of ``a * b`` over two 1D arrays, without BLAS.

    numpy's ``dot`` calls a threaded BLAS whose idle threads keep spinning after
    each call; in a pipeline with one worker process per core they take CPU
    from the other worker (and do not make one step faster).
    """
    return float(np.einsum("i,i->", a, b))
