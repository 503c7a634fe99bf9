"""The whole-cell view of a split mesh: measures, centroids, face neighbours, corner boxes, means.

Outside checks: VTK (pyvista) [lib] writes the polyhedra and gives their cell volumes
(``compute_cell_sizes``, on flat faces) and face neighbours (``cell_neighbors``); elementary geometry for the
small hand-made meshes (volumes of unit tetrahedra, the corner extremes of listed points).
"""

import numpy as np
import pytest

from phasegauge.meshgen import grid_mesh
from phasegauge.model.corners import corner_extremes
from phasegauge.model.mesh import Mesh
from phasegauge.model._whole_cells import WholeCells, whole_cells

# hexahedra written as polyhedra, split as polyhedra of other shapes are (conftest)
pytestmark = pytest.mark.usefixtures("every_polyhedron_split")


@pytest.fixture(scope="module")
def polyhedra(tmp_path_factory):
    pv = pytest.importorskip("pyvista")
    from phasegauge.io import Series
    from phasegauge.meshgen import to_polyhedral_grid

    # sheared, not jittered: flat faces, whose volume VTK computes whatever its face triangulation
    grid0 = grid_mesh((4, 4, 4), kind="hexahedron")
    hexa = Mesh(grid0.points @ np.array([[1.0, 0.3, 0.1], [0.0, 1.0, 0.2], [0.0, 0.0, 1.0]]).T,
                [("hexahedron", grid0.blocks[0].connectivity)])
    grid = to_polyhedral_grid(hexa)
    path = tmp_path_factory.mktemp("view") / "poly.vtu"
    grid.save(str(path))
    split = Series(str(path)).read(0).mesh
    return pv, grid, hexa, split


def test_measures_and_neighbours_against_vtk(polyhedra):
    pv, grid, hexa, split = polyhedra
    view = whole_cells(split)
    assert view is whole_cells(split)  # built once per mesh
    assert view.n_cells == hexa.n_cells and view.n_pieces == split.n_cells
    volumes = grid.compute_cell_sizes(length=False, area=False, volume=True).cell_data["Volume"]
    np.testing.assert_allclose(view.cell_measures, np.abs(volumes), rtol=1e-10)
    pairs = set()
    for cell in range(grid.n_cells):
        pairs |= {(min(cell, other), max(cell, other)) for other in grid.cell_neighbors(cell, "faces")}
    assert sorted(pairs) == [tuple(p) for p in view.face_pairs]
    for cell in range(view.n_cells):
        row = view.face_neighbours[cell]
        expected = sorted({b if a == cell else a for a, b in pairs if cell in (a, b)})
        assert row[row >= 0].tolist() == expected


def test_centroids_boxes_and_means(polyhedra):
    _, _, hexa, split = polyhedra
    view = whole_cells(split)
    # the corner boxes are the hexahedra's: the face and cell centres lie inside each cell
    cells = np.array([0, 5, 17, 63])
    low, high = view.corner_boxes(cells)
    ext = corner_extremes(hexa, hexa.coordinates, cells)
    np.testing.assert_array_equal(low, ext.low)
    np.testing.assert_array_equal(high, ext.high)
    # a value's whole-cell mean keeps its integral; a whole cell's constant stays itself
    rng = np.random.default_rng(0)
    c = rng.random(split.n_cells)
    mean = view.mean_of(c)
    assert np.sum(mean * view.cell_measures) == pytest.approx(np.sum(c * split.cell_measures), rel=1e-12)
    np.testing.assert_allclose(view.mean_of(np.arange(hexa.n_cells, dtype=float)[split.cell_parents]),
                               np.arange(hexa.n_cells), rtol=1e-12)
    u = rng.random((split.n_cells, 3))
    np.testing.assert_allclose(view.mean_of(u)[:, 1], view.mean_of(u[:, 1]), rtol=1e-12)
    # centroids: the first moment of the pieces over the whole measure
    moment = np.zeros((view.n_cells, 3))
    np.add.at(moment, split.cell_parents, split.cell_centroids * split.cell_measures[:, None])
    np.testing.assert_allclose(view.cell_centroids, moment / view.cell_measures[:, None], rtol=1e-12)


def test_neighbours_from_the_face_pairs_equal_those_from_the_reader(polyhedra):
    """The same cells built without the reader's split neighbours (the mesh groups its faces)."""
    _, _, _, split = polyhedra
    again = Mesh(split.points, [(b.cell_type, b.connectivity) for b in split.blocks], pieces=[split.cell_parents])
    np.testing.assert_array_equal(WholeCells(again).face_pairs, whole_cells(split).face_pairs)


def _tetrahedra():
    """Three tetrahedra: a unit corner one (volume 1/6) and the regular one on its slanted face (1/3),
    sharing a face, and a unit corner one apart."""
    points = np.array([[0.0, 0, 0], [1, 0, 0], [0, 1, 0], [0, 0, 1], [1, 1, 1],
                       [5, 5, 5], [6, 5, 5], [5, 6, 5], [5, 5, 6]])
    return points, np.array([[0, 1, 2, 3], [1, 2, 3, 4], [5, 6, 7, 8]])


def test_whole_numbers_without_pieces():
    """A block split in part keeps its rows' numbers: whole cell 1 has no pieces, so measure 0, no
    neighbour, a NaN mean and box; the others are their pieces'."""
    points, tetra = _tetrahedra()
    mesh = Mesh(points, [("tetra", tetra)], pieces=[np.array([0, 0, 2])])
    view = WholeCells(mesh)
    assert view.n_cells == 3
    np.testing.assert_allclose(view.cell_measures, [1 / 6 + 1 / 3, 0.0, 1 / 6], rtol=1e-12)
    assert (view.face_neighbours < 0).all() and view.face_pairs.shape == (0, 2)  # 0's pieces share a face
    mean = view.mean_of(np.array([1.0, 3.0, 2.0]))
    assert np.isnan(mean[1]) and mean[2] == 2.0
    assert mean[0] == pytest.approx((mesh.cell_measures[0] * 1 + mesh.cell_measures[1] * 3) / view.cell_measures[0])
    low, high = view.corner_boxes(np.array([0, 1, 2]))
    np.testing.assert_array_equal(low[[0, 2]], [[0, 0, 0], [5, 5, 5]])
    np.testing.assert_array_equal(high[[0, 2]], [[1, 1, 1], [6, 6, 6]])
    assert np.isnan(low[1]).all() and np.isnan(high[1]).all()


def test_pieces_in_any_order():
    """Pieces not listed whole cell after whole cell: each whole cell still finds its own."""
    points, tetra = _tetrahedra()
    mesh = Mesh(points, [("tetra", tetra)], pieces=[np.array([1, 0, 1])])
    view = WholeCells(mesh)
    pieces, counts = view.pieces_of(np.array([1, 0]))
    assert pieces.tolist() == [0, 2, 1] and counts.tolist() == [2, 1]
    low, high = view.corner_boxes(np.array([0, 1]))
    np.testing.assert_array_equal(low, [[0, 0, 0], [0, 0, 0]])
    np.testing.assert_array_equal(high, [[1, 1, 1], [6, 6, 6]])
    assert view.face_pairs.tolist() == [[0, 1]]


def test_whole_cell_means_by_ranges_equal_bincount(monkeypatch):
    """Pieces whole cell after whole cell are summed by ranges, in chunks (here of a few pieces, so
    cells with no pieces fall at chunk ends too): the same sums as ``numpy.bincount`` [lib]."""
    from phasegauge.model import _whole_cells

    monkeypatch.setattr(_whole_cells, "_CHUNK", 3)
    rng = np.random.default_rng(1)
    for trial in range(60):
        counts = rng.integers(0, 4, int(rng.integers(1, 30)))
        counts[0] = max(counts[0], 1)
        if trial % 2:
            counts[-1] = 0
        parents = np.repeat(np.arange(counts.size), counts)
        values, weights = rng.random(parents.size), rng.random(parents.size)
        starts = np.searchsorted(parents, np.arange(counts.size + 1))
        expected = np.bincount(parents, weights=values * weights, minlength=counts.size)
        np.testing.assert_allclose(_whole_cells._ordered_sums(starts, values, counts.size, weights), expected,
                                   rtol=1e-12)
        np.testing.assert_allclose(_whole_cells._whole_sums(parents, values, counts.size, weights), expected,
                                   rtol=1e-12)
