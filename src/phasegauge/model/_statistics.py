"""Weighted quantiles: the one implementation the analyses share."""

from __future__ import annotations

import numpy as np

__all__ = ["weighted_quantile"]


def weighted_quantile(values, weights, q, *, method: str = "midpoint"):
    """The ``q`` quantile of ``values`` with weights.

    Parameters
    ----------
    values : ndarray of shape (n,)
    weights : ndarray of shape (n,), >= 0
    q : float in [0, 1], or a sequence of them
        With a sequence, the values are sorted once for all.
    method : {'midpoint', 'inverted_cdf'}
        ``midpoint``: each value stands at the middle of its weight in the
        cumulative weight, and the quantile is interpolated linearly between
        those points (constant beyond the first and last); ``inverted_cdf``:
        the smallest value whose cumulative weight reaches ``q`` times the
        total (a value of the sample, as numpy's ``quantile(method=
        'inverted_cdf')`` with weights).

    Returns
    -------
    float, or tuple of float for a sequence ``q``
        NaN when no value is finite with a positive weight. Values that are
        not finite or have no weight are left out.

    References
    ----------
    .. [1] Hyndman, R. J. and Fan, Y. (1996), "Sample quantiles in
       statistical packages", The American Statistician 50:361-365
       (definitions 1, the inverted distribution, and 5, the midpoint
       interpolation, here with weights).
    """
    v = np.asarray(values, dtype=np.float64)
    w = np.asarray(weights, dtype=np.float64)
    ok = np.isfinite(v) & (w > 0)
    if not ok.all():
        v, w = v[ok], w[ok]
    several = np.ndim(q) > 0
    if method not in ("midpoint", "inverted_cdf"):
        raise ValueError(f"method must be 'midpoint' or 'inverted_cdf', not {method!r}")
    if v.size == 0:
        return tuple(float("nan") for _ in q) if several else float("nan")
    order = np.argsort(v)
    w = w[order]  # the values themselves are read only where a quantile falls (at most two each)
    if method == "inverted_cdf":
        cumulative = np.cumsum(w)

        def one(p):
            return float(v[order[min(int(np.searchsorted(cumulative, p * cumulative[-1])), v.size - 1)]])
    else:
        middle = np.cumsum(w) - 0.5 * w
        total = w.sum()
        # np.interp's bracket in a non-decreasing table is the last middle <= the target (a
        # searchsorted); NaN or a table out of order (overflowing weights) takes np.interp itself
        ordered = bool(middle.size < 2 or (middle[1:] >= middle[:-1]).all())
        table = None if ordered else v[order]  # out of order: np.interp on the whole table, gathered once

        def one(p):
            if table is not None:
                return float(np.interp(float(p * total), middle, table))
            return _interpolated(float(p * total), middle, v, order)
    return tuple(one(p) for p in q) if several else one(q)


def _interpolated(target, middle, v, order):
    """``np.interp(target, middle, v[order])`` in a non-decreasing ``middle``, gathering the values it
    reads only (the same float).

    In a non-decreasing table np.interp takes ``v[order][0]`` below the first point, the last
    value from the last point on, and otherwise interpolates between the points ``j, j + 1`` with
    ``middle[j] <= target < middle[j + 1]``: the same arithmetic as on those two points alone.
    """
    if target != target:  # a NaN target (infinite weights): np.interp's own answer
        return float(np.interp(target, middle, v[order]))
    j = int(np.searchsorted(middle, target, side="right")) - 1
    if j < 0:
        return float(v[order[0]])
    if j >= middle.size - 1:
        return float(v[order[-1]])
    return float(np.interp(target, middle[j:j + 2], v[order[j:j + 2]]))
