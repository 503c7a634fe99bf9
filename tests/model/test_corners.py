"""Corner sums, means, extremes and gradients of cells, and weighted quantiles, against numpy."""

import numpy as np
import pytest

from phasegauge.meshgen import grid_mesh
from phasegauge.model._statistics import weighted_quantile
from phasegauge.model.corners import cell_extent, cell_gradient, corner_extremes, corner_mean, corner_sum


@pytest.mark.parametrize("kind", ["mixed", "polygon", "wedge", "pyramid"])
def test_corner_extremes_and_means_match_numpy(kind):
    mesh = grid_mesh((4, 3) if kind == "polygon" else (3, 3, 2), kind=kind, jitter=0.2, seed=1)
    values = np.sin(7 * mesh.coordinates).sum(axis=1)
    values[3] = np.nan
    low, high = corner_extremes(mesh, values)
    means, lows, highs = [], [], []
    for block in mesh.blocks:
        corners = values[block.connectivity]
        lows.append(corners.min(axis=1))  # numpy: NaN where a corner is NaN
        highs.append(corners.max(axis=1))
        means.append(corners.mean(axis=1))
    np.testing.assert_array_equal(low, np.concatenate(lows))
    np.testing.assert_array_equal(high, np.concatenate(highs))
    np.testing.assert_allclose(np.concatenate([corner_mean(values, b.connectivity) for b in mesh.blocks]),
                               np.concatenate(means), rtol=1e-15, equal_nan=True)
    # some cells only, and vector values (the corner boxes of the droplet labelling)
    cells = np.array([0, 2, mesh.n_cells - 1])
    box_low, box_high = corner_extremes(mesh, mesh.coordinates, cells)
    every = corner_extremes(mesh, mesh.coordinates)
    np.testing.assert_array_equal(box_low, every.low[cells])
    np.testing.assert_array_equal(box_high, every.high[cells])
    np.testing.assert_array_equal(cell_extent(mesh, 1).high, every.high[:, 1])


def test_corner_sum_adds_in_corner_order():
    # (a0 + a1) + a2 + a3, the order every corner sum of the package uses: bit for bit
    rng = np.random.default_rng(2)
    a = [rng.normal(size=50) * 10.0 ** rng.integers(-8, 8, 50) for _ in range(4)]
    assert np.array_equal(corner_sum(iter(a)), ((a[0] + a[1]) + a[2]) + a[3])


@pytest.mark.parametrize("kind", ["triangle", "quad", "tetra", "hexahedron", "wedge", "pyramid"])
def test_cell_gradient_of_a_linear_field_is_exact(kind):
    # analytic: least squares over the corners reproduces a linear field's gradient on any cell
    dim = 2 if kind in ("triangle", "quad") else 3
    mesh = grid_mesh((4,) * dim, kind=kind, jitter=0.2, seed=3)
    coef = np.array([1.5, -0.5, 2.0])[:dim]
    g = cell_gradient(mesh, 0.2 + mesh.coordinates @ coef, cells=[5, 0, 5])
    np.testing.assert_allclose(g, np.tile(coef, (3, 1)), rtol=1e-9)


@pytest.mark.parametrize("q", [0.0, 0.1, 0.5, 0.9, 0.95, 1.0])
def test_weighted_quantiles_match_numpy(q):
    rng = np.random.default_rng(5)
    values = rng.normal(size=200)
    weights = rng.random(200)
    # numpy's weighted inverted-distribution quantile (Hyndman & Fan 1996, definition 1)
    assert weighted_quantile(values, weights, q, method="inverted_cdf") == np.quantile(
        values, q, weights=weights, method="inverted_cdf")
    # equal weights: the midpoint rule is Hyndman & Fan's definition 5, numpy's 'hazen'
    assert weighted_quantile(values, np.full(200, 0.3), q) == pytest.approx(
        np.quantile(values, q, method="hazen"), rel=1e-12, abs=1e-12)


def test_weighted_quantile_leaves_out_what_does_not_count():
    values = np.array([1.0, np.nan, 3.0, 100.0])
    weights = np.array([1.0, 5.0, 1.0, 0.0])
    assert weighted_quantile(values, weights, 0.5) == 2.0
    assert np.isnan(weighted_quantile(np.array([np.nan]), np.array([1.0]), 0.5))
    with pytest.raises(ValueError, match="method must be"):
        weighted_quantile(values, weights, 0.5, method="linear")
