"""The weighted quantile reads the sorted values only where a quantile falls: the same floats as
interpolating in the whole sorted table (numpy's ``interp``), on every kind of input."""

import numpy as np
import pytest

from phasegauge.model._statistics import weighted_quantile

QUANTILES = (0.0, 1e-9, 0.1, 0.25, 0.3, 0.5, 0.75, 0.9, 0.999, 1.0)


def whole_table(values, weights, q, method="midpoint"):
    """The quantile from the whole sorted table: ``numpy.interp`` over every value (midpoint) or
    ``numpy.searchsorted`` in the cumulative weights (inverted cdf), after the same argsort."""
    v = np.asarray(values, dtype=np.float64)
    w = np.asarray(weights, dtype=np.float64)
    ok = np.isfinite(v) & (w > 0)
    v, w = v[ok], w[ok]
    if v.size == 0:
        return float("nan")
    order = np.argsort(v)
    v, w = v[order], w[order]
    if method == "inverted_cdf":
        cumulative = np.cumsum(w)
        return float(v[min(int(np.searchsorted(cumulative, q * cumulative[-1])), v.size - 1)])
    return float(np.interp(q * w.sum(), np.cumsum(w) - 0.5 * w, v))


def same_float(a, b):
    return (np.isnan(a) and np.isnan(b)) or (a == b and np.signbit(a) == np.signbit(b))


def cases():
    rng = np.random.default_rng(16)
    yield "random", rng.normal(size=3001), rng.random(3001)
    yield "tied values, unequal weights", rng.integers(0, 5, 2000).astype(float), rng.random(2000)
    yield "tied values, equal weights", rng.integers(0, 3, 1000).astype(float), np.full(1000, 0.25)
    yield "constant", np.full(500, 0.37), rng.random(500)
    yield "equal weights (targets on the points)", rng.random(400), np.ones(400)
    yield "signed zeros", np.array([0.0, -0.0, 0.0, -0.0, 1.0]), np.array([1.0, 2.0, 1.0, 3.0, 1.0])
    yield "one value", np.array([2.5]), np.array([0.1])
    yield "two values", np.array([3.0, -1.0]), np.array([1.0, 3.0])
    yield "three values", np.array([1.0, 2.0, 3.0]), np.array([1.0, 1.0, 2.0])
    yield "left out (NaN, zero and negative weights)", np.array([1.0, np.nan, 3.0, 100.0, -4.0, np.inf]), \
        np.array([1.0, 5.0, 1.0, 0.0, -1.0, 2.0])
    yield "nothing counts", np.array([np.nan, 1.0]), np.array([1.0, 0.0])
    yield "tiny weights beside large ones", rng.random(300), np.where(rng.random(300) < 0.5, 1e-300, 1e3)
    yield "subnormal weights", rng.random(50), np.full(50, 5e-324)
    yield "weights that overflow", rng.random(40), np.full(40, 1e308)
    yield "infinite weight", np.array([1.0, 2.0, 3.0]), np.array([1.0, np.inf, 1.0])


@pytest.mark.parametrize("method", ["midpoint", "inverted_cdf"])
@pytest.mark.filterwarnings("ignore::RuntimeWarning")  # overflowing and infinite weights, as before
def test_weighted_quantile_is_the_whole_table_interpolation_bit_for_bit(method):
    for name, values, weights in cases():
        got = weighted_quantile(values, weights, QUANTILES, method=method)
        for q, value in zip(QUANTILES, got):
            expected = whole_table(values, weights, q, method)
            assert same_float(value, expected), (name, q, value, expected)
            assert same_float(weighted_quantile(values, weights, q, method=method), expected), (name, q)


def test_weighted_quantile_of_random_draws_is_the_whole_table_interpolation():
    rng = np.random.default_rng(22)
    for _ in range(200):
        n = int(rng.integers(1, 60))
        values = rng.choice([rng.normal(size=n), np.round(rng.normal(size=n), 1)])
        weights = rng.choice([rng.random(n), rng.integers(0, 3, n).astype(float)])
        for q in rng.random(4):
            assert same_float(weighted_quantile(values, weights, q), whole_table(values, weights, q))
