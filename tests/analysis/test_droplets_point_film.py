"""Droplets on data on points: two drops apart by a film of points below the level are two droplets.

A cell's c is the mean of its corners, so the cells on both sides of a film one row of points
thick can lie above the level while every point of the film lies below it; joined through any
shared face, they made one droplet of two drops (coalescence read early). The droplets now join
through the points above the level, and their count is checked against references the project
did not write: ``skimage.measure.label`` on the lattice of points (connectivity 1) and
``skimage.measure.find_contours`` (marching squares, the closed pieces of the contour) on quads
and hexahedra; on triangles and tetrahedra, where the interpolant is linear in each cell, the
connected components of the points above the level along the cells' edges (scipy's
``connected_components``), which are the pieces of the region where that interpolant exceeds
the level.
"""

import numpy as np
import pandas as pd
import pytest

from phasegauge.analysis.droplets import label_droplets
from phasegauge.meshgen import grid_mesh
from phasegauge.model.cells import EDGES
from phasegauge.model.indicator import Indicator

measure = pytest.importorskip("skimage.measure")

R = 0.3
# the gap between the drops' signed distances, in cells: a film of points below 0.5 down to 0.1
# cells; at -0.3 and -1 the drops overlap and the film's points are above 0.5 (a neck)
GAPS = (3.0, 1.2, 0.8, 0.6, 0.3, 0.1, -0.3, -1.0)
FILM = (0.3, 0.1)  # a film one row of points thick whose cells either side average above 0.5


def _two_drops(points: np.ndarray, gap: float, h: float) -> np.ndarray:
    """c on the points: two drops of radius R, their signed distances ``gap`` cells apart on the
    middle plane x = 1, a tanh profile of width eps = h/2 (c = 0.5 on the signed distance 0)."""
    d = R + gap * h / 2
    middle = np.full(points.shape[1], 0.5)
    middle[0] = 1.0
    left, right = middle.copy(), middle.copy()
    left[0], right[0] = 1.0 - d, 1.0 + d
    sd = np.maximum(R - np.linalg.norm(points - left, axis=1), R - np.linalg.norm(points - right, axis=1))
    return 0.5 * (1.0 + np.tanh(sd / (np.sqrt(2.0) * 0.5 * h)))


def _edge_components(mesh, above: np.ndarray) -> int:
    """Connected components of the points above the level along the cells' edges (scipy)."""
    from scipy import sparse
    from scipy.sparse import csgraph

    pairs = np.concatenate([b.connectivity[:, list(e)] for b in mesh.blocks for e in EDGES[b.cell_type]])
    pairs = pairs[above[pairs].all(axis=1)]
    pts = np.flatnonzero(above)
    number = np.full(above.size, -1)
    number[pts] = np.arange(pts.size)
    graph = sparse.coo_matrix((np.ones(len(pairs)), (number[pairs[:, 0]], number[pairs[:, 1]])),
                              shape=(pts.size, pts.size))
    return int(csgraph.connected_components(graph, directed=False)[0])


def _point_indicator(mesh, c_point) -> Indicator:
    return Indicator(mesh.point_to_cell(c_point), c_point, "point", 0, "c")


def _count(mesh, c_point, **kw) -> int:
    return label_droplets(mesh, mesh.point_to_cell(c_point), point_values=c_point, **kw).count


@pytest.mark.parametrize("gap", GAPS)
def test_quads_count_as_the_lattice_of_points_and_the_contour(gap):
    shape = (40, 20)
    mesh = grid_mesh(shape, [(0.0, 2.0), (0.0, 1.0)])
    h = 0.05
    c = _two_drops(mesh.coordinates[:, :2], gap, h)
    lattice = c.reshape(shape[0] + 1, shape[1] + 1)  # meshgen's points in "ij" order
    n_lattice = int(measure.label(lattice > 0.5, connectivity=1).max())  # [lib: skimage]
    n_contour = len(measure.find_contours(lattice, 0.5))  # [lib: skimage, marching squares], all closed here
    assert n_lattice == n_contour == (2 if gap > 0 else 1)
    assert _count(mesh, c) == n_lattice
    assert label_droplets(mesh, _point_indicator(mesh, c)).count == n_lattice  # the Indicator gives its points


@pytest.mark.parametrize("gap", GAPS)
def test_triangles_count_as_the_edge_graph_of_points(gap):
    mesh = grid_mesh((40, 20), [(0.0, 2.0), (0.0, 1.0)], kind="triangle")
    c = _two_drops(mesh.coordinates[:, :2], gap, 0.05)
    reference = _edge_components(mesh, c > 0.5)  # [lib: scipy connected_components]
    assert reference == (2 if gap > 0 else 1)
    assert _count(mesh, c) == reference


@pytest.mark.parametrize("gap", (2.0, 0.8, 0.3, 0.1, -0.5))
def test_hexahedra_count_as_the_lattice_of_points(gap):
    shape = (24, 12, 12)
    h = 2.0 / 24
    mesh = grid_mesh(shape, [(0.0, 2.0), (0.0, 1.0), (0.0, 1.0)])
    c = _two_drops(mesh.coordinates, gap, h)
    lattice = c.reshape(tuple(n + 1 for n in shape))
    n_lattice = int(measure.label(lattice > 0.5, connectivity=1).max())  # [lib: skimage]
    assert n_lattice == (2 if gap > 0 else 1)
    assert _count(mesh, c) == n_lattice


@pytest.mark.parametrize("gap", (2.0, 0.8, 0.3, 0.1, -0.5))
def test_tetrahedra_count_as_the_edge_graph_of_points(gap):
    mesh = grid_mesh((24, 12, 12), [(0.0, 2.0), (0.0, 1.0), (0.0, 1.0)], kind="tetra")
    c = _two_drops(mesh.coordinates, gap, 2.0 / 24)
    reference = _edge_components(mesh, c > 0.5)  # [lib: scipy connected_components]
    assert reference == (2 if gap > 0 else 1)
    assert _count(mesh, c) == reference


@pytest.mark.parametrize("kind", ("quad", "triangle"))
def test_film_cells_either_side_lie_above_the_level(kind):
    """The case the rule is for: the film's points are below 0.5 and cells on both sides of it above."""
    mesh = grid_mesh((40, 20), [(0.0, 2.0), (0.0, 1.0)], kind=kind)
    for gap in FILM:
        c = _two_drops(mesh.coordinates[:, :2], gap, 0.05)
        film = np.isclose(mesh.coordinates[:, 0], 1.0)
        assert c[film].max() < 0.5
        cells = mesh.point_to_cell(c)
        x = mesh.cell_centroids[:, 0]
        assert (cells[np.abs(x - 1.0) < 0.05] > 0.5).any()
        assert _count(mesh, c) == 2


@pytest.mark.parametrize("kind", ("quad", "triangle", "hexahedron", "tetra"))
def test_volumes_unchanged_where_the_count_is(kind):
    """Drops 3 cells apart and one drop with a neck: the same table with the points as without them."""
    dim = 2 if kind in ("quad", "triangle") else 3
    shape, bounds = ((40, 20), [(0.0, 2.0), (0.0, 1.0)]) if dim == 2 else \
        ((24, 12, 12), [(0.0, 2.0), (0.0, 1.0), (0.0, 1.0)])
    mesh = grid_mesh(shape, bounds, kind=kind)
    for gap in (3.0, -1.0):
        c = _two_drops(mesh.coordinates[:, :dim], gap, 2.0 / shape[0])
        cells = mesh.point_to_cell(c)
        before = label_droplets(mesh, cells)
        after = label_droplets(mesh, cells, point_values=c)
        assert after.count == before.count
        np.testing.assert_array_equal(after.labels, before.labels)
        pd.testing.assert_frame_equal(after.table, before.table, check_exact=True)


def test_cell_data_is_not_read_through_points():
    """Data on cells (volume fractions): an Indicator of cell data labels as its cell array."""
    mesh = grid_mesh((40, 20), [(0.0, 2.0), (0.0, 1.0)])
    c = _two_drops(mesh.coordinates[:, :2], 0.6, 0.05)
    cells = mesh.point_to_cell(c)
    plain = label_droplets(mesh, cells)
    as_cells = label_droplets(mesh, Indicator(cells, c, "cell", 0, "c"))
    assert plain.count == as_cells.count == 1  # the cells joined through their faces, as the data on cells holds
    pd.testing.assert_frame_equal(plain.table, as_cells.table, check_exact=True)


def test_point_adjacency_and_the_bulk_scale():
    """``connectivity='point'`` still joins through any shared point; a bulk off 0 and 1 reads the
    points on the scale of the cells (the level on the given scale)."""
    mesh = grid_mesh((40, 20), [(0.0, 2.0), (0.0, 1.0)])
    c = _two_drops(mesh.coordinates[:, :2], 0.6, 0.05)
    assert _count(mesh, c, connectivity="point") == 1
    shifted = 0.1 + 0.8 * c  # bulk values 0.1 and 0.9: the level 0.5 is still the film's side
    assert _count(mesh, shifted, bulk=(0.1, 0.9)) == 2


def test_point_values_of_the_wrong_shape_are_refused():
    from phasegauge.errors import OptionError

    mesh = grid_mesh((4, 4))
    with pytest.raises(OptionError, match="point_values must have shape"):
        label_droplets(mesh, np.zeros(mesh.n_cells), point_values=np.zeros(3))


@pytest.mark.parametrize("gap", (0.3, 0.1, -0.5))
def test_polyhedra_split_count_as_the_lattice_of_points(tmp_path, gap, every_polyhedron_split):
    """Hexahedra written by VTK as polyhedra and read back split into tetrahedra about their face and
    cell centres (the centres taking their corners' mean): the whole cells join through the points
    above the level, the count as skimage's on the hexahedra's lattice of points."""
    pytest.importorskip("pyvista")
    from phasegauge.io import Series
    from phasegauge.meshgen import to_polyhedral_grid

    shape = (24, 12, 12)
    hexa = grid_mesh(shape, [(0.0, 2.0), (0.0, 1.0), (0.0, 1.0)])
    c = _two_drops(hexa.coordinates, gap, 2.0 / 24)
    path = tmp_path / "poly.vtu"
    to_polyhedral_grid(hexa, point_data={"c": c}).save(str(path))
    step = Series(str(path)).read(0)
    split, c_split = step.mesh, np.asarray(step.fields.point_data["c"])
    assert split.cell_parents is not None
    n_lattice = int(measure.label((c > 0.5).reshape(tuple(n + 1 for n in shape)), connectivity=1).max())
    assert n_lattice == (2 if gap > 0 else 1)  # [lib: skimage]
    found = label_droplets(split, split.point_to_cell(c_split), point_values=c_split)
    assert found.whole_cells and found.count == n_lattice


@pytest.mark.parametrize("gap", (0.6, 0.1, -0.3))
def test_a_film_on_the_periodic_plane(gap):
    """Two drops either side of the periodic plane x = 0 (= 2, its points written on both planes): joined
    across it only through points above the level, as skimage's label on the lattice of points wrapped
    (the plane written once, rolled half a period so the film lies inside)."""
    shape, h = (40, 20), 0.05
    mesh = grid_mesh(shape, [(0.0, 2.0), (0.0, 1.0)])
    X = mesh.coordinates[:, :2]
    d = R + gap * h / 2
    centres = ((d, 0.5), (2.0 - d, 0.5), (-d, 0.5), (2.0 + d, 0.5))  # and their images a period away
    sd = np.max([R - np.linalg.norm(X - np.array(o), axis=1) for o in centres], axis=0)
    c = 0.5 * (1.0 + np.tanh(sd / (np.sqrt(2.0) * 0.5 * h)))
    lattice = c.reshape(shape[0] + 1, shape[1] + 1)[:-1]  # the plane x = 2 is the plane x = 0
    wrapped = np.roll(lattice, shape[0] // 2, axis=0)
    n_lattice = int(measure.label(wrapped > 0.5, connectivity=1).max())  # [lib: skimage]
    assert n_lattice == (2 if gap > 0 else 1)
    found = label_droplets(mesh, mesh.point_to_cell(c), point_values=c, periodic=("x",))
    assert found.count == n_lattice
    assert not found.table["spanning"].any()
    if gap < 0:  # one drop across the plane: its centroid on the plane, its volume both halves'
        assert abs(found.table["centroid_x"].iloc[0] % 2.0 - 1.0) == pytest.approx(1.0, abs=1e-9)


def test_the_bias_left_a_neck_of_one_row_of_points():
    """The bias the rule leaves (stated in the README): two blocks joined by one row of points at 0.6
    whose neighbours sit at 0.3, so every cell beside the row averages 0.45, are two droplets, while
    the points above the level are one piece (skimage's label, connectivity 1)."""
    shape = (20, 10)
    mesh = grid_mesh(shape)
    lattice = np.zeros((shape[0] + 1, shape[1] + 1))
    lattice[2:8, 2:9] = 1.0
    lattice[13:19, 2:9] = 1.0
    lattice[8:13, 4:7] = 0.3  # the neck's sides
    lattice[8:13, 5] = 0.6  # the neck's row of points, above the level
    assert int(measure.label(lattice > 0.5, connectivity=1).max()) == 1  # [lib: skimage]
    c = lattice.ravel()  # meshgen's points in "ij" order
    cells = mesh.point_to_cell(c)
    assert cells[np.abs(mesh.cell_centroids[:, 0] - 0.5) < 0.1].max() < 0.5  # our construction: 0.45 at most
    assert _count(mesh, c) == 2
