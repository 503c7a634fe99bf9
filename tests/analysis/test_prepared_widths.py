"""The widths' contour, bulk values and band integrals formed first (``prepare_widths``), on one thread
or with the contour found beside the integrals.

Outside check: the contour of the logistic circle and sphere against their analytic size (2 pi R and
4 pi R^2, Olsson & Kreiss 2005 profile) and the band-volume width against 5.889 eps (2 ln 19 eps, the
logistic 5-95 % thickness); the rest is the same numbers as ``interface_metrics`` alone, bit for bit.
"""

import numpy as np
import pytest

from phasegauge.analysis.interface import bulk_plateaus, find_interface, interface_metrics, prepare_widths
from phasegauge.errors import OptionError
from phasegauge.meshgen import grid_mesh
from phasegauge.model.corners import corner_extremes

R, EPS = 0.3, 0.02


def _logistic(mesh):
    X = mesh.coordinates
    r = np.linalg.norm(X[:, :mesh.dimension] - 0.5, axis=1)
    return 0.5 * (1 + np.tanh((R - r) / (2 * EPS)))


def _same(one: dict, two: dict) -> None:
    """The same metrics bit for bit (NaN where both are NaN)."""
    assert one.keys() == two.keys()
    for key in one:
        assert one[key] == two[key] or (np.isnan(one[key]) and np.isnan(two[key])), key


@pytest.mark.parametrize("shape, kind, jitter", [((96, 96), "triangle", 0.2), ((40, 40, 40), "hexahedron", 0.2),
                                                 ((64, 64), "quad", 0.0), ((32, 32, 32), "tetra", 0.1)])
@pytest.mark.parametrize("threads", [1, 2])
def test_prepared_widths_are_those_of_interface_metrics(shape, kind, jitter, threads):
    mesh = grid_mesh(shape, kind=kind, jitter=jitter, seed=3)
    c = _logistic(mesh)
    prepared = prepare_widths(mesh, c, level=0.5, threads=threads)
    alone = interface_metrics(mesh, c, threads=1)
    contour = find_interface(mesh, c)
    np.testing.assert_array_equal(prepared.contour.points, contour.points)
    np.testing.assert_array_equal(prepared.contour.elements, contour.elements)
    assert prepared.plateaus == bulk_plateaus(c, 0.5) == (0.0, 1.0, 1e-6)
    measured = interface_metrics(mesh, c, prepared=prepared, threads=threads)
    _same(measured, alone)
    # [analytic: 2 pi R in 2D, 4 pi R^2 in 3D; the band width 2 ln 19 eps (Olsson & Kreiss 2005), both
    # to a few % on these meshes]
    size = 2 * np.pi * R if mesh.dimension == 2 else 4 * np.pi * R ** 2
    assert abs(measured["interface_size"] / size - 1) < 0.02
    assert abs(measured["interface_width"] / (2 * np.log(19) * EPS) - 1) < 0.1


@pytest.mark.parametrize("threads", [1, 2])
def test_bulk_values_off_zero_and_one_are_those_of_bulk_plateaus(threads):
    # a Cahn-Hilliard-like drop relaxed to 0.02 and 0.97 (bulk values off 0 and 1)
    mesh = grid_mesh((96, 96), kind="triangle", jitter=0.2, seed=5)
    c = 0.02 + 0.95 * _logistic(mesh)
    prepared = prepare_widths(mesh, c, threads=threads)
    low, high, _ = prepared.plateaus
    assert prepared.plateaus == bulk_plateaus(c, 0.5, mesh)
    assert abs(low - 0.02) < 2e-3 and abs(high - 0.97) < 2e-3
    measured = interface_metrics(mesh, c, prepared=prepared)
    _same(measured, interface_metrics(mesh, c))
    # [analytic: the logistic width between the two bulk values is that of the profile, 2 ln 19 eps]
    assert abs(measured["interface_width"] / (2 * np.log(19) * EPS) - 1) < 0.1


def test_contour_with_extremes_given_is_the_same():
    mesh = grid_mesh((20, 20, 20), kind="hexahedron", jitter=0.2, seed=1)
    c = _logistic(mesh)
    one = find_interface(mesh, c)
    two = find_interface(mesh, c, extremes=corner_extremes(mesh, c))
    np.testing.assert_array_equal(one.points, two.points)
    np.testing.assert_array_equal(one.elements, two.elements)
    with pytest.raises(OptionError, match="extremes must be the per-cell corner minima and maxima"):
        find_interface(mesh, c, extremes=(c, c))
    grid = grid_mesh((12, 12))  # the grid path takes no extremes, and checks them all the same
    with pytest.raises(OptionError, match="extremes must be the per-cell corner minima and maxima"):
        find_interface(grid, grid.coordinates[:, 0], extremes=(c, c))


def test_prepared_for_another_mesh_or_level_or_with_more_is_refused():
    mesh = grid_mesh((16, 16), kind="triangle")
    other = grid_mesh((16, 16), kind="triangle")
    c = _logistic(mesh)
    prepared = prepare_widths(mesh, c)
    refused = "another mesh, indicator or level"
    with pytest.raises(OptionError, match=refused):
        interface_metrics(other, c, prepared=prepared)
    with pytest.raises(OptionError, match=refused):
        interface_metrics(mesh, c, level=0.4, prepared=prepared)
    with pytest.raises(OptionError, match=refused):  # other values: the prepared widths would be c's
        interface_metrics(mesh, 1.0 - c, prepared=prepared)
    with pytest.raises(OptionError, match="prepared already holds"):
        interface_metrics(mesh, c, prepared=prepared, contour=prepared.contour)
    with pytest.raises(OptionError, match="prepared already holds"):
        interface_metrics(mesh, c, prepared=prepared, extremes=corner_extremes(mesh, c))
    with pytest.raises(OptionError, match="prepared already holds"):
        interface_metrics(mesh, c, prepared=prepared, plateaus=prepared.plateaus)
    for threads in (0, "x", None):
        with pytest.raises(OptionError, match="threads must be a whole number"):
            prepare_widths(mesh, c, threads=threads)
        with pytest.raises(OptionError, match="threads must be a whole number"):
            interface_metrics(mesh, c, prepared=prepared, threads=threads)
    with pytest.raises(OptionError, match="prepared must be what prepare_widths gives"):
        interface_metrics(mesh, c, prepared={"contour": None})
