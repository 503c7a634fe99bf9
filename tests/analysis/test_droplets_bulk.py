"""Droplets measured between the measured bulk plateaus (Cahn-Hilliard bulk values off 0 and 1).

Outside checks: the analytic tanh drop [calc from the logistic profile, REFERENCES.md: the
derivative dc/dn is a logistic density with variance pi^2 eps^2 / 3, so in 2D
int c dA = pi R^2 + pi^3 eps^2 / 3 (tails beyond r = 0 of order exp(-R/eps))], circle perimeter
2 pi R and circularity pi d / P (Hysing et al. 2009), and scipy's labelling
(`scipy.ndimage.label`) [lib].
"""

import numpy as np
import pytest
from scipy import ndimage

from phasegauge.analysis.droplets import label_droplets
from phasegauge.analysis.interface import bulk_plateaus, find_interface
from phasegauge.meshgen import grid_mesh

LOW, HIGH = 0.010, 1.009  # phi = -0.980 and 1.018 of a relaxed Cahn-Hilliard drop, as c = (phi + 1) / 2


def _drop(n, eps, radius=0.25, centre=(0.5, 0.5), low=LOW, high=HIGH):
    mesh = grid_mesh((n, n))

    def c_of(xy):
        r = np.hypot(xy[:, 0] - centre[0], xy[:, 1] - centre[1])
        return low + (high - low) * 0.5 * (1.0 + np.tanh((radius - r) / (2.0 * eps)))

    return mesh, c_of(mesh.cell_centroids), c_of(mesh.points)


@pytest.mark.parametrize("n, eps", [(200, 0.01), (400, 0.005), (160, 0.01)])
def test_relaxed_drop_with_shifted_bulk_within_half_percent_of_analytic(n, eps):
    radius = 0.25
    mesh, c_cell, c_point = _drop(n, eps, radius)
    low, high, tail = bulk_plateaus(c_point, 0.5)
    assert abs(low - LOW) < 1e-4 and abs(high - HIGH) < 1e-4
    contour = find_interface(mesh, c_point, level=0.5)
    volume = np.pi * radius ** 2 + np.pi ** 3 * eps ** 2 / 3.0  # analytic tanh drop [calc]
    diameter = 2.0 * np.sqrt(volume / np.pi)
    circularity = np.pi * diameter / (2.0 * np.pi * radius)  # Hysing et al. 2009, perimeter 2 pi R
    kw = dict(interface_cells=contour.cells, interface_sizes=contour.element_sizes)
    plain = label_droplets(mesh, c_cell, **kw).table.iloc[0]
    found = label_droplets(mesh, c_cell, bulk=(low, high), band_floor=max(1e-3, tail), **kw).table.iloc[0]
    # the matrix's leftover composition went to the drop before (the issue: +2.6 % in diameter)
    assert plain["volume"] > 1.03 * volume
    assert abs(found["volume"] / volume - 1) < 0.005
    assert abs(found["equivalent_diameter"] / diameter - 1) < 0.005
    assert abs(found["circularity"] / circularity - 1) < 0.005


def test_bulk_at_zero_and_one_changes_nothing():
    mesh, c_cell, _ = _drop(100, 0.01, low=0.0, high=1.0)
    a = label_droplets(mesh, c_cell).table
    b = label_droplets(mesh, c_cell, bulk=(0.0, 1.0)).table
    assert a.equals(b)


def test_spinodal_small_droplet_gets_no_absurd_volume_and_counts_match_scipy():
    n = 128
    mesh = grid_mesh((n, n))
    rng = np.random.default_rng(5)
    # a matrix at its bulk value with round-off noise, some drops of a few cells, one of 2 cells
    c = np.full((n, n), LOW) + 1e-4 * rng.standard_normal((n, n))
    for i, j, r in ((30, 30, 6), (90, 40, 10), (60, 100, 3)):
        yy, xx = np.mgrid[0:n, 0:n]
        c[(xx - i) ** 2 + (yy - j) ** 2 <= r * r] = HIGH
    c[10, 100:102] = HIGH  # a two-cell droplet (row y = 10, x = 100..101)
    c_cell = c.ravel()  # grid_mesh numbers cells with x fastest
    low, high, tail = bulk_plateaus(c_cell, 0.5)
    found = label_droplets(mesh, c_cell, bulk=(low, high), band_floor=max(1e-3, tail))
    _, count = ndimage.label(c > 0.5)  # scipy's labelling [lib]
    assert found.count == count == 4
    cell_area = 1.0 / n ** 2
    small = found.table.loc[found.table["threshold_volume"] < 3 * cell_area]
    assert len(small) == 1
    assert small["volume"].iloc[0] < 3 * cell_area  # two cells' area, not the matrix's leftover share
    # the droplets' volumes add up to their cells (the matrix adds nothing)
    np.testing.assert_allclose(found.table["volume"].sum(), found.table["threshold_volume"].sum(), rtol=1e-3)
