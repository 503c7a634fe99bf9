"""Measured bulk compositions, mixture state and solute distribution on fields built with known values."""

import numpy as np
import pytest

from phasegauge.analysis.thermo import (DoubleWellModel, RegularSolutionModel, bulk_compositions, equilibrium_at,
                                        equilibrium_gap, gibbs_thomson_shift, mixture_state, solute_distribution)
from phasegauge.errors import OptionError
from phasegauge.meshgen import grid_mesh

LEAN, RICH = 0.070720, 0.929280          # regular solution A = 3 (analytic binodal, REFERENCES.md)
EPS = 0.01


def _logistic(n):
    # Olsson & Kreiss (2005) / Cahn & Hilliard (1958) profile: 1/2 (1 + tanh(n / (2 eps)))
    return 0.5 * (1 + np.tanh(n / (2 * EPS)))


@pytest.mark.parametrize("kind", ["quad", "triangle"])
def test_bulk_compositions_of_a_planar_interface(kind):
    mesh = grid_mesh((200, 20), bounds=[(0.0, 1.0), (0.0, 0.1)], kind=kind)
    x = mesh.cell_centroids[:, 0]
    distance = x - 0.5
    rng = np.random.default_rng(3)
    composition = LEAN + (RICH - LEAN) * _logistic(distance) + rng.uniform(-1e-3, 1e-3, x.size)
    out = bulk_compositions(mesh, composition, distance, width=EPS, multiple=4.0)
    # truth: the plateau values the field was built with (tolerance 0.002 from the issue)
    assert out["bulk_composition_lean"] == pytest.approx(LEAN, abs=2e-3)
    assert out["bulk_composition_rich"] == pytest.approx(RICH, abs=2e-3)
    assert 0 < out["bulk_spread_lean"] < 2e-3 and out["bulk_cells_lean"] > 0
    eq = equilibrium_at(RegularSolutionModel(A_a=3.0), 300.0)
    gap = equilibrium_gap(out["bulk_composition_lean"], out["bulk_composition_rich"], eq.binodal_lean,
                          eq.binodal_rich)
    assert gap < 2e-3


def test_bulk_compositions_of_a_drop_with_the_opposite_sign():
    # a rich drop of radius 0.25 in a lean matrix, distance positive outside (the other sign convention)
    mesh = grid_mesh((120, 120))
    centre = mesh.cell_centroids[:, :2] - 0.5
    r = np.hypot(centre[:, 0], centre[:, 1])
    distance = r - 0.25
    composition = LEAN + (RICH - LEAN) * _logistic(-distance)
    out = bulk_compositions(mesh, composition, distance, width=EPS, multiple=5.0)
    assert out["bulk_composition_lean"] == pytest.approx(LEAN, abs=2e-3)
    assert out["bulk_composition_rich"] == pytest.approx(RICH, abs=2e-3)


def test_mixture_state_on_both_sides_of_the_binodal_and_spinodal():
    # A = 3: binodal 0.070720, spinodal 0.211325 (analytic regular solution)
    model = RegularSolutionModel(A_a=3.0)
    states = mixture_state(model, 300.0, [0.05, 0.09, 0.5, 0.85, 0.95])
    assert list(states) == ["stable", "metastable", "unstable", "metastable", "stable"]
    assert mixture_state(model, 300.0, 0.0707) == "stable"
    assert mixture_state(model, 300.0, 0.0708) == "metastable"
    assert mixture_state(RegularSolutionModel(A_a=1.5), 300.0, 0.5) == "stable"   # one stable phase


def test_mixture_state_from_an_equilibrium_already_computed():
    # the same analytic A = 3 states (binodal 0.070720, spinodal 0.211325) from equilibrium_at's pair
    x = [0.05, 0.0707, 0.0708, 0.2113, 0.2114, 0.5, 0.7887, 0.7886, 0.9293, 0.95]
    for model in (RegularSolutionModel(A_a=3.0), RegularSolutionModel(A_a=1.5)):
        eq = equilibrium_at(model, 300.0)
        assert list(mixture_state(model, 300.0, x, equilibrium=eq)) == list(mixture_state(model, 300.0, x))
    assert list(mixture_state(RegularSolutionModel(A_a=3.0), 300.0, x[:6])) == [
        "stable", "stable", "metastable", "metastable", "unstable", "unstable"]
    with pytest.raises(OptionError, match="the equilibrium is at 300 K, not at 310 K"):
        mixture_state(RegularSolutionModel(A_a=3.0), 310.0, 0.5, equilibrium=eq)


def test_solute_partition_extraction_and_lever_rule():
    mesh = grid_mesh((400, 4), bounds=[(0.0, 1.0), (0.0, 0.01)])
    x = mesh.cell_centroids[:, 0]
    distance = x - 0.5
    share = _logistic(distance)
    solute = 0.02 + 0.03 * share             # 0.05 in the receiving (positive) phase, 0.02 in the other
    composition = LEAN + (RICH - LEAN) * share
    out = solute_distribution(mesh, solute, distance, width=EPS, receiving="positive", composition=composition)
    assert out["partition_coefficient"] == pytest.approx(2.5, rel=1e-3)
    # receiving side holds 0.5 * 0.05 - 0.03 eps ln 2 of 0.035 (integral of the logistic tail: eps ln 2)
    expected = (0.5 * 0.05 - 0.03 * EPS * np.log(2)) / 0.035
    assert out["extraction_progress"] == pytest.approx(expected, abs=1e-4)
    # solute linear in the main composition: the overall state lies on the tie line (lever rule)
    assert abs(out["lever_rule_residual"]) < 1e-6
    extra = solute_distribution(mesh, solute + 0.01 * (np.abs(distance) < 0.02), distance, width=EPS,
                                composition=composition)
    assert extra["lever_rule_residual"] > 1e-4     # solute held in the interface is off the lever rule


def test_gibbs_thomson_shift_is_small_for_large_drops_and_scales_as_one_over_radius():
    model = RegularSolutionModel(A_a=3.0)
    small = gibbs_thomson_shift(model, 300.0, 10.0, capillary_length=0.1, dimension=3)
    large = gibbs_thomson_shift(model, 300.0, 100.0, capillary_length=0.1, dimension=3)
    assert small[0] == pytest.approx(10 * large[0], rel=1e-12)
    # symmetric model: both compositions move the same way by the same amount (g'' equal at x and 1 - x)
    assert small[0] == pytest.approx(small[1], rel=1e-9) and small[0] > 0
    assert np.isfinite(gibbs_thomson_shift(DoubleWellModel(lean=0.1, rich=0.9), 300.0, 5.0,
                                           capillary_length=0.01, dimension=2)[0])


def test_bad_arguments_name_the_fix():
    from phasegauge.errors import OptionError

    mesh = grid_mesh((4, 4))
    with pytest.raises(OptionError, match="one value per cell"):
        bulk_compositions(mesh, np.zeros(3), np.zeros(16), width=0.1)
    with pytest.raises(OptionError, match="width must be > 0"):
        bulk_compositions(mesh, np.zeros(16), np.zeros(16), width=0.0)
    with pytest.raises(OptionError, match="receiving"):
        solute_distribution(mesh, np.zeros(16), np.zeros(16), width=0.1, receiving="up")


@pytest.mark.parametrize("drop", ["rich", "lean"])
def test_gibbs_thomson_shift_against_the_exact_equilibrium_with_laplace_pressure(drop):
    # Laplace pressure (d - 1) sigma / R adds delta = (d - 1) l / R to both chemical potentials
    # (over RT) of the phase inside the drop (Porter & Easterling 1992, sec. 1.5; equal molar volumes);
    # the exact compositions solve ln a_i(inside) + delta = ln a_i(outside) (scipy fsolve)
    from scipy.optimize import fsolve

    model = RegularSolutionModel(A_a=3.0)
    t, radius, length = 300.0, 50.0, 0.01
    delta = 2 * length / radius
    eq = equilibrium_at(model, t)

    def equations(v):
        lean, rich = v
        mu_lean = np.ravel(model.chemical_potentials(np.array([lean]), t))
        mu_rich = np.ravel(model.chemical_potentials(np.array([rich]), t))
        return (mu_rich + delta - mu_lean) if drop == "rich" else (mu_lean + delta - mu_rich)

    exact = fsolve(equations, [eq.binodal_lean, eq.binodal_rich], xtol=1e-12)
    shift = gibbs_thomson_shift(model, t, radius, capillary_length=length, dimension=3, drop=drop)
    expected = exact - np.array([eq.binodal_lean, eq.binodal_rich])
    np.testing.assert_allclose(shift, expected, rtol=2e-2)     # linearised: error of order delta
    assert np.sign(shift[0]) == (1 if drop == "rich" else -1)


def test_equilibrium_gap_is_nan_when_a_value_is_missing():
    assert equilibrium_gap(0.1, 0.9, 0.12, 0.85) == pytest.approx(0.05)
    assert np.isnan(equilibrium_gap(0.1, float("nan"), 0.12, 0.85))
    assert np.isnan(equilibrium_gap(0.1, 0.9, float("nan"), float("nan")))


def _searched_and_reused(mesh, c_point, *, widths):
    """Cell distances by their own search and from the width estimators' point distances; the reach."""
    from phasegauge.analysis.interface import find_interface, interface_metrics
    from phasegauge.analysis.thermo import interface_distance

    c_cell = mesh.point_to_cell(c_point)
    contour = find_interface(mesh, c_point)
    metrics, measured = interface_metrics(mesh, c_point, contour=contour, return_distances=True)
    reach = widths * metrics["interface_width"]
    searched = interface_distance(mesh, c_cell, contour, reach=reach)
    return searched, interface_distance(mesh, c_cell, contour, reach=reach, measured=measured), reach


@pytest.mark.parametrize("kind", ["quad", "triangle"])
def test_bulk_cells_from_the_widths_distances_match_the_search_and_the_analytic_distance(kind):
    # a tanh drop of radius 0.3: the analytic distance to the interface is |r - 0.3| (a circle)
    mesh = grid_mesh((90, 90), kind=kind)
    r_point = np.hypot(*(mesh.coordinates - 0.5).T)
    searched, reused, reach = _searched_and_reused(mesh, _logistic(0.3 - r_point), widths=2.0)
    # the same bulk cells on each side and the same sides (own search against the widths' distances)
    np.testing.assert_array_equal(searched > reach, reused > reach)
    np.testing.assert_array_equal(searched < -reach, reused < -reach)
    np.testing.assert_array_equal(searched > 0, reused > 0)
    # analytic: every cell farther than reach + h from the circle is bulk, none nearer than reach - h
    exact = np.abs(np.hypot(*(mesh.cell_centroids - 0.5).T) - 0.3)
    h = 1.0 / 90
    bulk = np.abs(reused) > reach
    assert bulk[exact > reach + h].all() and not bulk[exact < reach - h].any()


def test_far_cells_skipped_by_the_bucket_test_are_farther_than_reach():
    # scipy's brute-force distances: a point the bucket test calls far has no centre within reach
    from scipy.spatial.distance import cdist

    from phasegauge.analysis._signed_distance import _maybe_near

    rng = np.random.default_rng(5)
    centres = rng.uniform(0.3, 0.6, (200, 3))
    points = rng.uniform(-0.2, 1.2, (4000, 3))
    for reach in (0.01, 0.05, 0.2):
        near = _maybe_near(points, centres, reach)
        within = cdist(points, centres).min(axis=1) <= reach
        np.testing.assert_array_equal(near, within)


def test_bucket_test_on_the_mesh_fixed_grid_agrees_with_brute_force():
    # scipy's brute-force distances again, for the cell centroids of a mesh tested on its fixed
    # bucket grid (2D and 3D; reach below and above the grid's side, where it falls back)
    from scipy.spatial.distance import cdist

    from phasegauge.analysis._signed_distance import _centroid_buckets, _maybe_near_cells

    rng = np.random.default_rng(11)
    for mesh in (grid_mesh((40, 40), kind="triangle"), grid_mesh((14, 14, 14), kind="tetra")):
        dim = mesh.dimension
        centres = rng.uniform(0.3, 0.6, (150, dim))
        cells = np.sort(rng.choice(mesh.n_cells, mesh.n_cells // 2, replace=False))
        side = _centroid_buckets(mesh).side
        for reach in (0.5 * side, 2.5 * side, 0.05, 0.2):
            near = _maybe_near_cells(mesh, cells, centres, reach)
            within = cdist(mesh.cell_centroids[cells], centres).min(axis=1) <= reach
            np.testing.assert_array_equal(near, within)


def test_bulk_cells_from_the_widths_distances_on_a_sphere_of_tetrahedra():
    # a tanh sphere of radius 0.3: the analytic distance is |r - 0.3|; cells settled by their corners'
    # distances may differ from their own search only within O(h^2 / R) of the bulk reach
    n = 24
    mesh = grid_mesh((n, n, n), kind="tetra")
    c_point = 0.5 * (1 + np.tanh((0.3 - np.linalg.norm(mesh.coordinates - 0.5, axis=1)) / 0.06))
    searched, reused, reach = _searched_and_reused(mesh, c_point, widths=1.5)
    np.testing.assert_array_equal(searched > 0, reused > 0)
    exact = np.abs(np.linalg.norm(mesh.cell_centroids - 0.5, axis=1) - 0.3)
    h = 1.0 / n
    differ = (np.abs(searched) > reach) != (np.abs(reused) > reach)
    assert np.all(np.abs(exact[differ] - reach) < h * h / 0.3 + 0.05 * h), differ.sum()
    bulk = np.abs(reused) > reach
    assert bulk[exact > reach + h].all() and not bulk[exact < reach - h].any()


@pytest.mark.parametrize("kind", ["quad", "triangle"])
def test_cells_the_contour_crosses_are_not_bulk_with_a_reach_under_half_a_cell(kind):
    # analytic: the distance of a cell centroid to a circle of radius 0.3 is |r - 0.3|. With a bulk reach
    # under half a cell, the mean of the corners' distance magnitudes of a cell the contour crosses is
    # about half a cell however near its centroid lies (|d| bends at the contour): such a cell must
    # still come out nearer than reach, as its own search puts it. The search skips cells with no
    # element centroid within reach (see interface_distance's Notes): scipy's brute-force distances
    # to the element centroids pick the cells it covers
    from scipy.spatial.distance import cdist

    from phasegauge.analysis.interface import find_interface, interface_metrics
    from phasegauge.analysis.thermo import interface_distance

    n = 90
    mesh = grid_mesh((n, n), kind=kind)
    c_point = _logistic(0.3 - np.hypot(*(mesh.coordinates - 0.5).T))
    c_cell = mesh.point_to_cell(c_point)
    contour = find_interface(mesh, c_point)
    _, measured = interface_metrics(mesh, c_point, contour=contour, return_distances=True)
    exact = np.abs(np.hypot(*(mesh.cell_centroids - 0.5).T) - 0.3)
    to_centre = cdist(mesh.cell_centroids, contour.centroids[:, :2]).min(axis=1)
    h = 1.0 / n
    for reach in (0.2 * h, 0.35 * h, 0.5 * h):
        reused = interface_distance(mesh, c_cell, contour, reach=reach, measured=measured)
        bulk = np.abs(reused) > reach
        wrong = bulk & (exact < reach - 0.05 * h) & (to_centre <= reach)
        assert not wrong.any(), (reach / h, int(wrong.sum()))
        assert bulk[exact > reach + h].all()


def _cosine_along(mesh, column):
    """c = 1/2 + 1/2 cos(2 pi (s - 0.3)) along the mesh's analysis ``column`` s on [0, 1]: the cell
    values, the contour, and each centroid's distance to the nearest of the interfaces at s = 0.05
    and 0.55 and their copies a period away, -0.45 and 1.05 [analytic]."""
    from phasegauge.analysis.interface import find_interface

    c_point = 0.5 + 0.5 * np.cos(2 * np.pi * (mesh.coordinates[:, column] - 0.3))
    s = mesh.cell_centroids[:, column]
    exact = np.min(np.abs(s[:, None] - np.array([-0.45, 0.05, 0.55, 1.05])[None, :]), axis=1)
    return mesh.point_to_cell(c_point), find_interface(mesh, c_point), exact


@pytest.mark.parametrize("kind,reach", [("quad", np.inf), ("triangle", 0.3), ("quad", 0.08), ("tetra", 0.3)])
def test_interface_distance_wraps_a_periodic_boundary(kind, reach):
    # c = 1/2 + 1/2 cos(2 pi (x - 0.3)) on [0, 1] periodic in x: interfaces (c = 1/2) at x = 0.05 and
    # x = 0.55, and a period away at x = 1.05 and -0.45, so the distance of a centroid at x is
    # min |x - x_i| over those four [analytic]; without the wrap a cell at x = 0.95 is 0.4 from the
    # interface, not 0.1
    from phasegauge.analysis.thermo import interface_distance

    if kind == "tetra":
        mesh = grid_mesh((40, 3, 3), bounds=[(0.0, 1.0), (0.0, 0.1), (0.0, 0.1)], kind=kind)
    else:
        mesh = grid_mesh((80, 8), bounds=[(0.0, 1.0), (0.0, 0.1)], kind=kind)
    c_cell, contour, exact = _cosine_along(mesh, 0)
    x = mesh.cell_centroids[:, 0]
    wrapped = interface_distance(mesh, c_cell, contour, reach=reach, periodic=("x",))
    near = exact <= reach
    # the contour's points are linear interpolations of a cosine at its zero: O(h^3) off; the
    # distance of a centroid to a straight contour is then exact to that
    np.testing.assert_allclose(np.abs(wrapped[near]), exact[near], atol=1e-4)
    np.testing.assert_array_equal(np.sign(wrapped), np.where(c_cell > 0.5, 1.0, -1.0))
    if np.isfinite(reach):
        np.testing.assert_array_equal(np.abs(wrapped[~near]), 2 * reach)  # beyond reach, as without the wrap
    flat = interface_distance(mesh, c_cell, contour, reach=reach)  # not periodic: the other interface only
    beside = (x > 0.9) & (exact <= reach)
    assert beside.any() and np.all(np.abs(flat[beside]) > np.abs(wrapped[beside]) + 0.05)


def test_interface_distance_refuses_an_axis_the_mesh_does_not_span():
    from phasegauge.analysis.interface import find_interface
    from phasegauge.analysis.thermo import interface_distance

    mesh = grid_mesh((8, 8))
    c_point = (mesh.coordinates[:, 0] > 0.5).astype(float)
    with pytest.raises(OptionError, match="periodic axis 'z' is not an axis"):
        interface_distance(mesh, mesh.point_to_cell(c_point), find_interface(mesh, c_point), periodic=("z",))


@pytest.mark.parametrize("reach", [0.08, 0.3])
def test_interface_distance_wraps_a_periodic_axis_of_a_mesh_in_the_y_z_plane(reach):
    # the case above turned into the y-z plane (x = 0 everywhere), periodic along z: the mesh's
    # analysis columns are (y, z), so the wrap must read the z column by its place among them,
    # not by z's place in x, y, z [analytic: the same four interfaces, now at z = -0.45 ... 1.05]
    from phasegauge.analysis.thermo import interface_distance
    from phasegauge.model.mesh import Mesh

    flat = grid_mesh((8, 80), bounds=[(0.0, 0.1), (0.0, 1.0)], kind="quad")
    points = np.column_stack([np.zeros(flat.n_points), flat.points[:, 0], flat.points[:, 1]])
    mesh = Mesh(points, [("quad", flat.blocks[0].connectivity)])
    assert tuple(mesh.plane_axes[:2]) == (1, 2)
    c_cell, contour, exact = _cosine_along(mesh, 1)
    wrapped = interface_distance(mesh, c_cell, contour, reach=reach, periodic=("z",))
    near = exact <= reach
    np.testing.assert_allclose(np.abs(wrapped[near]), exact[near], atol=1e-4)
    np.testing.assert_array_equal(np.abs(wrapped[~near]), 2 * reach)


@pytest.mark.parametrize("kind", ["quad", "tetra"])
def test_interface_distance_periodic_without_reach_searches_the_copies_only_where_they_can_be_nearer(
        kind, monkeypatch):
    # with an infinite reach, a cell is searched against the contour's copies only when the nearest
    # periodic face (beyond which every copy lies) is within its distance plus the copies' largest
    # half-size; the distances are bit-identical to searching every cell against both and taking
    # the nearer [the same analytic cosine: interfaces at x = 0.05, 0.55 and a period away]
    from phasegauge.analysis import _phase_compositions as module
    from phasegauge.analysis._signed_distance import _ContourGeometry, _signed_distance

    if kind == "tetra":
        mesh = grid_mesh((40, 3, 3), bounds=[(0.0, 1.0), (0.0, 0.1), (0.0, 0.1)], kind=kind)
    else:
        mesh = grid_mesh((80, 8), bounds=[(0.0, 1.0), (0.0, 0.1)], kind=kind)
    c_cell, contour, exact = _cosine_along(mesh, 0)
    points = mesh.cell_centroids
    own = np.abs(_signed_distance(points, c_cell, _ContourGeometry(contour), contour.plane_axes, 0.5, compact=True))
    copies = _ContourGeometry(module._periodic_images(mesh, contour, ("x",), np.inf))
    across = np.abs(_signed_distance(points, c_cell, copies, contour.plane_axes, 0.5, compact=True))
    every = np.where(c_cell > 0.5, 1.0, -1.0) * np.fmin(own, across)
    searched = []
    original = module._signed_distance

    def counted(points, *args, **kwargs):
        searched.append(points.shape[0])
        return original(points, *args, **kwargs)

    monkeypatch.setattr(module, "_signed_distance", counted)
    wrapped = module.interface_distance(mesh, c_cell, contour, periodic=("x",))
    np.testing.assert_array_equal(wrapped, every)
    np.testing.assert_allclose(np.abs(wrapped), exact, atol=1e-4)
    assert searched[0] == mesh.n_cells and 0 < searched[1] < 0.5 * mesh.n_cells


def test_interface_distance_periodic_sphere_across_every_face_is_the_search_of_every_cell(monkeypatch):
    # a sphere of radius 0.3 about (0.1, 0.5, 0.5), periodic in x, y and z: its copies a period away
    # reach into the cell from the low x face, with interfaces oblique to the faces (a copy's plane
    # is nearer than its offset along the axis), so the copies' half-sizes must widen the face bound.
    # Bit-identical to searching every cell against the contour and against its copies, and within
    # the mesh's resolution of the distance to the nearest image sphere, |r - R| [analytic]
    from phasegauge.analysis import _phase_compositions as module
    from phasegauge.analysis._signed_distance import _ContourGeometry, _signed_distance
    from phasegauge.analysis.interface import find_interface

    mesh = grid_mesh((12, 12, 12), kind="tetra")
    shifts = np.array([[i, j, k] for i in (-1, 0, 1) for j in (-1, 0, 1) for k in (-1, 0, 1)], dtype=float)

    def nearest_image(X):
        return np.min(np.linalg.norm(X[:, None, :] - (np.array([0.1, 0.5, 0.5]) + shifts)[None], axis=2), axis=1)

    c_point = 0.5 * (1 + np.tanh((0.3 - nearest_image(mesh.coordinates)) / 0.04))
    c_cell, contour = mesh.point_to_cell(c_point), find_interface(mesh, c_point)
    points = mesh.cell_centroids
    own = np.abs(_signed_distance(points, c_cell, _ContourGeometry(contour), contour.plane_axes, 0.5, compact=True))
    copies = _ContourGeometry(module._periodic_images(mesh, contour, ("x", "y", "z"), np.inf))
    across = np.abs(_signed_distance(points, c_cell, copies, contour.plane_axes, 0.5, compact=True))
    every = np.where(c_cell > 0.5, 1.0, -1.0) * np.fmin(own, across)
    wrapped = module.interface_distance(mesh, c_cell, contour, periodic=("x", "y", "z"))
    np.testing.assert_array_equal(wrapped, every)
    exact = np.abs(nearest_image(points) - 0.3)
    assert np.median(np.abs(np.abs(wrapped) - exact)[exact < 2.0 / 12]) < 0.25 / 12  # near the sphere
