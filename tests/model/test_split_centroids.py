"""Centroids of a mesh of split cells: not kept with the mesh, made where read, the same numbers.

Outside checks: a tetrahedron's centroid is the mean of its four corners, and a parallelepiped's
the mean of its eight (elementary geometry); pyvista's ``cell_centers`` (the mean of each cell's
points) of the hexahedra that VTK's writer stored as polyhedra [lib].
"""

import numpy as np
import pytest

pv = pytest.importorskip("pyvista")

from phasegauge.io import Series  # noqa: E402
from phasegauge.meshgen import grid_mesh, to_polyhedral_grid  # noqa: E402
from phasegauge.model.mesh import Mesh  # noqa: E402
from phasegauge.model.outline import MeshOutline  # noqa: E402
from phasegauge.model._centroids import cell_centroids_of, whole_cell_centroids  # noqa: E402

# hexahedra written as polyhedra, split as polyhedra of other shapes are (conftest)
pytestmark = pytest.mark.usefixtures("every_polyhedron_split")

SHEAR = np.array([[1.0, 0.3, 0.1], [0.0, 0.9, 0.2], [0.0, 0.0, 1.1]])  # an affine map: parallelepipeds


def _split(tmp_path, mesh, name="poly.vtu"):
    to_polyhedral_grid(mesh).save(str(tmp_path / name))
    return Series(str(tmp_path / name)).read(0).mesh


def test_split_mesh_keeps_no_centroids_and_makes_the_corner_means(tmp_path):
    mesh = _split(tmp_path, grid_mesh((5, 4, 3), kind="hexahedron", jitter=0.2, seed=3))
    assert mesh.cell_parents is not None and mesh.blocks[0].cell_type == "tetra"
    assert mesh._geometry[1] is None  # only the signed measures are kept
    corners = mesh.points[mesh.blocks[0].connectivity]
    centroids = mesh.cell_centroids
    # elementary geometry: the corners' mean
    np.testing.assert_allclose(centroids, corners.mean(axis=1), rtol=0, atol=1e-15)
    assert mesh._geometry[1] is None  # made on the read, still not kept
    cells = np.random.default_rng(0).integers(0, mesh.n_cells, 500)
    assert np.array_equal(cell_centroids_of(mesh, cells), centroids[cells])
    mask = np.arange(mesh.n_cells) % 7 == 2
    assert np.array_equal(cell_centroids_of(mesh, mask), centroids[mask])
    # the same numbers as an unsplit mesh of the same tetrahedra keeps
    whole = Mesh(mesh.points, [("tetra", mesh.blocks[0].connectivity)])
    assert np.array_equal(whole.cell_centroids, centroids)
    assert np.array_equal(whole.signed_measures, mesh.signed_measures)


def test_centroids_of_cells_across_blocks_equal_the_kept_ones():
    """A mesh of two blocks (tetrahedra as pieces of whole cells, hexahedra whole) against the same
    blocks kept unsplit, and the corner means (elementary geometry) of its parallelepipeds."""
    hexa = grid_mesh((3, 3, 2), kind="hexahedron")
    points = hexa.points @ SHEAR.T
    tetra = np.array([[0, 1, 3, 9], [1, 2, 4, 10], [3, 4, 6, 12]]) + 18  # three tetrahedra on the top layer
    blocks = [("tetra", tetra), ("hexahedron", hexa.blocks[0].connectivity)]
    pieces = [np.array([0, 0, 1]), None]
    split, kept = Mesh(points, blocks, pieces=pieces), Mesh(points, blocks)
    assert split._geometry[1] is None and kept._geometry[1] is not None
    cells = np.array([20, 0, 2, 5, 1, 20, 3])
    assert np.array_equal(cell_centroids_of(split, cells), kept.cell_centroids[cells])
    assert np.array_equal(cell_centroids_of(split, None), kept.cell_centroids)
    np.testing.assert_allclose(split.cell_centroids[3:], points[hexa.blocks[0].connectivity].mean(axis=1),
                               rtol=0, atol=1e-15)


def test_whole_cell_centroids_are_pyvistas_cell_centres_of_parallelepipeds(tmp_path):
    hexa = grid_mesh((4, 3, 3), kind="hexahedron")
    hexa = Mesh(hexa.points @ SHEAR.T, [("hexahedron", hexa.blocks[0].connectivity)])
    mesh = _split(tmp_path, hexa)
    reference = pv.read(str(tmp_path / "poly.vtu")).cell_centers().points  # VTK: the mean of the points
    whole = whole_cell_centroids(mesh)
    assert whole.shape == (hexa.n_cells, 3)
    np.testing.assert_allclose(whole, reference, rtol=0, atol=1e-14)
    outline = MeshOutline.of(mesh, centroids=True)  # what tracking keeps: one centroid a whole cell
    assert np.array_equal(outline.cell_centroids, whole) and outline.cell_parents is mesh.cell_parents
    assert outline.without_centroids().cell_parents is None
    # a mesh of whole cells: its own centroids, the same array
    assert MeshOutline.of(hexa, centroids=True).cell_centroids is hexa.cell_centroids
    assert MeshOutline.of(hexa, centroids=True).cell_parents is None


def test_overlap_probe_on_a_split_mesh_matches_the_same_tetrahedra_unsplit(tmp_path):
    """The covered-boundary check of a split mesh (no centroids kept: the owners' made alone, the
    search tree's made on the read) counts as on the same tetrahedra kept whole; an L-shaped
    region, so that probes fall inside the box and the tree is searched. Outside check: a
    conforming split has no boundary face inside another cell (elementary geometry: 0)."""
    from phasegauge.model._overlaps import _covered_boundary_faces

    full = grid_mesh((4, 4, 2), kind="hexahedron", jitter=0.15, seed=5)
    centre = full.points[full.blocks[0].connectivity].mean(axis=1)
    keep = ~((centre[:, 0] > 0.5) & (centre[:, 1] > 0.5))  # an L: a quarter of the box left out
    mesh = _split(tmp_path, Mesh(full.points, [("hexahedron", full.blocks[0].connectivity[keep])]))
    assert mesh._geometry[1] is None
    whole = Mesh(mesh.points, [("tetra", mesh.blocks[0].connectivity)])
    assert _covered_boundary_faces(mesh) == _covered_boundary_faces(whole) == 0
    assert mesh._geometry[1] is None  # the tree's centroids were made on the read, not kept
    # a small tetrahedron inside one of the pieces, a whole cell of its own: its 4 faces are
    # boundary faces whose outer side lies inside that piece (elementary geometry: 4)
    conn = mesh.blocks[0].connectivity
    host = mesh.points[conn[len(conn) // 2]]
    inner = host.mean(axis=0) + 0.3 * (host - host.mean(axis=0))
    points = np.vstack([mesh.points, inner])
    tetra = np.vstack([conn, mesh.n_points + np.arange(4)])
    crowded = Mesh(points, [("tetra", tetra)], pieces=[np.append(mesh.cell_parents, mesh.cell_parents.max() + 1)])
    assert crowded._geometry[1] is None
    assert _covered_boundary_faces(crowded) == _covered_boundary_faces(Mesh(points, [("tetra", tetra)])) == 4


def test_whole_centroids_of_pieces_in_any_order(tmp_path, monkeypatch):
    """Pieces listed face after face (numbers from all over the mesh in one chunk, as cones of a
    block split in part come) give the whole cells' centroids of the pieces in order: the
    measure-weighted mean of the pieces' corner means (elementary geometry)."""
    import phasegauge.model._centroids as centroids_module

    mesh = _split(tmp_path, grid_mesh((8, 8, 6), kind="hexahedron", jitter=0.2, seed=4))
    conn, parents = mesh.blocks[0].connectivity, mesh.cell_parents
    order = np.random.default_rng(2).permutation(mesh.n_cells)
    monkeypatch.setattr(centroids_module, "_CHUNK", 97)  # 97 pieces span about all 384 whole cells
    shuffled = Mesh(mesh.points, [("tetra", conn[order])], pieces=[parents[order]])
    got = whole_cell_centroids(shuffled)
    corners = mesh.points[conn].mean(axis=1)
    volume = np.abs(mesh.signed_measures)
    n = int(parents.max()) + 1
    expected = np.stack([np.bincount(parents, volume * corners[:, d], n) for d in range(3)], axis=1)
    expected /= np.bincount(parents, volume, n)[:, None]
    np.testing.assert_allclose(got, expected, rtol=1e-13)
