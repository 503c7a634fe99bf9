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
    v, w = v[order], w[order]
    if method == "inverted_cdf":
        cumulative = np.cumsum(w)

        def one(p):
            return float(v[min(int(np.searchsorted(cumulative, p * cumulative[-1])), v.size - 1)])
    else:
        middle = np.cumsum(w) - 0.5 * w
        total = w.sum()

        def one(p):
            return float(np.interp(p * total, middle, v))
    return tuple(one(p) for p in q) if several else one(q)
