"""Signed distances and widths on polyhedra (a mesh the reader split into tetrahedra).

Outside checks: the distance |r - R| to a sphere, and the widths of a logistic (tanh) profile
(Olsson, E. and Kreiss, G. (2005), J. Comput. Phys. 210:225-246; REFERENCES.md [calc]: the band
volume per area over 0.05 < c < 0.95 is w (1 + w^2 / (12 R^2)) on a sphere of radius R, dc/dn a
logistic density of variance pi^2 eps^2 / 3).
"""

import numpy as np
import pytest

pv = pytest.importorskip("pyvista")

from phasegauge.analysis._profile_fits import WIDTH_PER_EPS  # noqa: E402
from phasegauge.analysis._signed_distance import _ContourGeometry, _whole_cell_pieces  # noqa: E402
from phasegauge.analysis.interface import find_interface, interface_metrics  # noqa: E402
from phasegauge.io import Series  # noqa: E402
from phasegauge.meshgen import grid_mesh, to_polyhedral_grid  # noqa: E402

from conftest import check_sphere_widths  # noqa: E402

# hexahedra written as polyhedra, split as polyhedra of other shapes are (conftest)
pytestmark = pytest.mark.usefixtures("every_polyhedron_split")

RADIUS = 0.3


def _sphere_on_polyhedra(tmp_path, n, cells_across):
    """Jittered hexahedra (n^3) written as VTK polyhedra with a logistic sphere profile of
    ``cells_across`` cells across the band, read back: (hexahedra, split mesh, profile, h, eps)."""
    h = 1.0 / n
    eps = cells_across * h / WIDTH_PER_EPS

    def profile(X):
        return 0.5 * (1 + np.tanh((RADIUS - np.linalg.norm(X - 0.5, axis=1)) / (2 * eps)))

    hexa = grid_mesh((n, n, n), kind="hexahedron", jitter=0.2, seed=3)
    path = str(tmp_path / "poly.vtu")
    to_polyhedral_grid(hexa, point_data={"c": profile(hexa.points)}).save(path)
    return hexa, Series(path).read(0).mesh, profile, h, eps


@pytest.mark.parametrize("cells_across, n", [(4, 32), (8, 48)])
def test_sphere_on_polyhedra_distances_and_widths(tmp_path, cells_across, n):
    # jittered hexahedra written as VTK polyhedra: the reader splits each into 12 tetrahedra about
    # its cell centre (quad faces cut along their shorter diagonal). The distances are searched against one
    # plane per crossed
    # polyhedron (its pieces merged, `_whole_cell_pieces`), within O(h^2 / R) of the contour's own
    # triangles. Measured errors, root mean square and largest, in cells h, at every point the
    # widths searched (corners and the added centres):
    #   32^3, 4 across: 0.0168 / 0.117; 40^3, 4 across: 0.0149 / 0.096; 48^3, 8 across: 0.0143 / 0.118
    # (on the 24 tetrahedra about face and cell centres the split made before: 0.0105 / 0.052,
    # 0.0090 / 0.074, 0.012 / 0.085; the triangles themselves 0.020 / 0.171, 0.021 / 0.236, 0.018 / 0.186)
    # Without a least half-size of the pieces, a sliver (a cell's corner barely cut) measured the
    # cell centres beside it to its centroid: largest errors 0.19-0.39 h.
    _, mesh, profile, h, eps = _sphere_on_polyhedra(tmp_path, n, cells_across)
    assert mesh.cell_parents is not None and set(mesh.cell_type_counts) == {"tetra"}
    c = profile(mesh.coordinates)
    # one search element per crossed polyhedron (folds and double crossings keep their triangles)
    contour = find_interface(mesh, c, level=0.5)
    pieces = _whole_cell_pieces(mesh, _ContourGeometry(contour))
    crossed = np.unique(mesh.cell_parents[contour.cells]).size
    assert crossed <= pieces.centroids.shape[0] < 1.05 * crossed < 0.2 * contour.n_elements
    assert pieces.size == pytest.approx(contour.size, rel=1e-12)
    r, measured = interface_metrics(mesh, c, return_distances=True)
    # widths: the same tolerances as the jittered hexahedra's (tests/analysis/test_hex_integrals.py)
    check_sphere_widths(r, measured, mesh.coordinates, c, radius=RADIUS, h=h, cells_across=cells_across, eps=eps,
                        rms=0.02, largest=0.12)


def test_sphere_on_polyhedra_added_centres_measured_from_their_corners(tmp_path, monkeypatch):
    # The reader hands the added face and cell centres' corner lists to the mesh
    # (`mesh.memo(SPLIT_CENTRES)`); the widths search only the polyhedra's own corners (their 3
    # nearest elements) and measure each centre to the plane of the nearest (by centroid) of its
    # corners' candidates. Outside check: the exact distance |r - R| to the sphere (REFERENCES.md),
    # at every centre the widths measured. Measured in cells h, root mean square / largest:
    # 32^3: 0.0171 / 0.117 (on the earlier split about face centres 0.0105 / 0.053, a search of
    # every centre 0.0106 / 0.052).
    from phasegauge.analysis._signed_distance import _signed_distance
    from phasegauge.model.polyhedra import SPLIT_CENTRES

    hexa, mesh, profile, h, eps = _sphere_on_polyhedra(tmp_path, 32, 4)
    centres = mesh.memo(SPLIT_CENTRES, lambda: None, keep=False)
    n_file = hexa.points.shape[0]
    np.testing.assert_array_equal(centres.points, np.arange(n_file, mesh.n_points))  # added after the file's
    assert centres.offsets.size - 1 == centres.points.size
    # a centre is the mean of its corners (the reader's rule)
    corners = mesh.coordinates[centres.corners[centres.offsets[7]:centres.offsets[8]]]
    assert np.allclose(mesh.coordinates[centres.points[7]], corners.mean(axis=0), rtol=0, atol=1e-12)
    c = profile(mesh.coordinates)
    _, measured = interface_metrics(mesh, c, return_distances=True)
    found = np.isfinite(measured.point)
    at_centres = found.copy()
    at_centres[:n_file] = False
    # (the cell centres and the few face centres kept, quad faces cut along a diagonal: half the
    # points measured, 0.50; 0.7 with a centre on every quad face)
    assert at_centres.sum() > 0.4 * found.sum()
    r_point = np.linalg.norm(mesh.coordinates - 0.5, axis=1)
    error = (measured.point[at_centres] - (RADIUS - r_point[at_centres])) / h
    assert np.sqrt(np.mean(error ** 2)) < 0.02 and np.abs(error).max() < 0.12
    # the corners: the distances a search of each gives (the first of their 3 nearest elements)
    geometry = _whole_cell_pieces(mesh, _ContourGeometry(measured.geometry.contour))
    rows = np.flatnonzero(found[:n_file])
    searched = _signed_distance(mesh.coordinates[rows], c[rows], geometry, mesh.plane_axes, 0.5, measured.bound)
    assert np.allclose(measured.point[rows], searched, rtol=0, atol=1e-12 * h, equal_nan=True)
    # the centres: a search of each finds the same element at nearly all of them
    rows = np.flatnonzero(at_centres)
    searched = _signed_distance(mesh.coordinates[rows], c[rows], geometry, mesh.plane_axes, 0.5, measured.bound)
    same = np.isclose(measured.point[rows], searched, rtol=0, atol=1e-12 * h)
    assert same.mean() > 0.97  # 0.990 measured (0.981 on the earlier split)
    # the far rows searching a thinned set (more than 2 x _THIN_TO pieces; a second pass): thinned
    # here by patching _THIN_TO, the same search as a larger mesh's
    from phasegauge.analysis import _signed_distance as module

    reach = module._centre_reach(mesh.coordinates, centres)
    assert 0.5 * h < reach < 1.5 * h
    monkeypatch.setattr(module, "_THIN_TO", geometry.sizes.size // 3)
    split = module._centre_split_distance(mesh.coordinates, c, found, centres, geometry, mesh.plane_axes, 0.5,
                                          measured.bound, reach)
    rows = np.flatnonzero(found)
    searched = _signed_distance(mesh.coordinates[rows], c[rows], geometry, mesh.plane_axes, 0.5, measured.bound)
    assert not np.allclose(searched, measured.point[rows], rtol=0, atol=1e-6 * h, equal_nan=True)  # thinned
    corner = rows < n_file
    assert np.allclose(split[rows[corner]], searched[corner], rtol=0, atol=1e-12 * h, equal_nan=True)
    same = np.isclose(split[rows[~corner]], searched[~corner], rtol=0, atol=1e-12 * h)
    assert same.mean() > 0.97


def test_polyhedra_with_merged_points_hand_over_their_centres(tmp_path):
    # a file with one point written twice: the reader merges it, and the centres' corner lists are handed
    # over renumbered: the same mesh, centres and distances as the file without the copy. A file point on
    # an added centre (the last cell's centre) takes that centre's place: the centre is left out of the
    # corner lists (the point keeps its own value and is searched), the others are handed over, and every
    # distance is the file without the point's [the search is checked against the sphere's |r - R| in
    # test_sphere_on_polyhedra_distances_and_widths]
    import warnings

    from phasegauge.analysis._signed_distance import _signed_distance
    from phasegauge.errors import MeshWarning
    from phasegauge.model.polyhedra import SPLIT_CENTRES

    n = 12
    eps = 4.0 / n / WIDTH_PER_EPS

    def profile(X):
        return 0.5 * (1 + np.tanh((RADIUS - np.linalg.norm(X - 0.5, axis=1)) / (2 * eps)))

    hexa = grid_mesh((n, n, n), kind="hexahedron", jitter=0.2, seed=5)
    grid = to_polyhedral_grid(hexa, point_data={"c": profile(hexa.points)})
    grid.save(str(tmp_path / "once.vtu"))
    once = Series(str(tmp_path / "once.vtu")).read(0).mesh
    plain = once.memo(SPLIT_CENTRES, lambda: None, keep=False)
    meshes = []
    for name, extra in (("twice", grid.points[:1]), ("on_a_centre", once.points[-1:])):
        written = grid.copy()
        written.points = np.vstack([grid.points, extra])
        written.point_data["c"] = profile(written.points)
        written.save(str(tmp_path / f"{name}.vtu"))
        if name == "twice":
            with pytest.warns(MeshWarning, match="1 duplicate points merged"):
                meshes.append(Series(str(tmp_path / f"{name}.vtu")).read(0).mesh)
        else:  # the file's own points are distinct: a point on a centre the reader added is no duplicate
            with warnings.catch_warnings():
                warnings.simplefilter("error", MeshWarning)
                meshes.append(Series(str(tmp_path / f"{name}.vtu")).read(0).mesh)
    twice, on_centre = meshes
    centres = twice.memo(SPLIT_CENTRES, lambda: None, keep=False)
    n_file = hexa.points.shape[0]
    np.testing.assert_array_equal(plain.points, np.arange(n_file, once.n_points))
    for got, want in zip(centres, plain):
        np.testing.assert_array_equal(got, want)
    np.testing.assert_array_equal(twice.points, once.points)
    distances = [interface_metrics(mesh, profile(mesh.coordinates), return_distances=True)[1].point
                 for mesh in (once, twice)]
    np.testing.assert_array_equal(*distances)
    # the point on the last centre is numbered after the file's points, the centres after it but the last
    mesh = on_centre
    centres = mesh.memo(SPLIT_CENTRES, lambda: None, keep=False)
    np.testing.assert_array_equal(centres.points, np.arange(n_file + 1, mesh.n_points))
    np.testing.assert_array_equal(centres.offsets, plain.offsets[:-1])
    np.testing.assert_array_equal(mesh.points[n_file], once.points[-1])
    order = np.r_[np.arange(n_file), once.n_points - 1, np.arange(n_file, once.n_points - 1)]  # once's, in its
    np.testing.assert_array_equal(mesh.points, once.points[order])
    c = profile(mesh.coordinates)
    _, measured = interface_metrics(mesh, c, return_distances=True)
    np.testing.assert_array_equal(measured.point[n_file + 1:], distances[0][n_file:-1])
    np.testing.assert_array_equal(measured.point[:n_file], distances[0][:n_file])
    geometry = _whole_cell_pieces(mesh, _ContourGeometry(measured.geometry.contour))
    rows = np.r_[np.flatnonzero(np.isfinite(measured.point[:n_file])), n_file]
    searched = _signed_distance(mesh.coordinates[rows], c[rows], geometry, mesh.plane_axes, 0.5, measured.bound)
    np.testing.assert_array_equal(measured.point[rows], searched)
