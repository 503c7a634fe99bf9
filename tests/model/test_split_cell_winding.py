"""Whole cells of a split mesh counted as wholes: which points lie inside a cell not star-shaped (its
pieces overlap, turned against each other, where it does not reach), and its zero or turned measure.

Outside checks: matplotlib's point-in-polygon test (``Path.contains_points``) of the prism's outline
[lib]; volumes of tetrahedra (elementary geometry).
"""

import numpy as np
import pytest

pv = pytest.importorskip("pyvista")

from phasegauge.io import Series  # noqa: E402
from phasegauge.model._overlaps import _held_by_whole_cells  # noqa: E402
from phasegauge.model.mesh import Mesh  # noqa: E402

# an E-shaped outline with uneven prongs: its corner mean lies in a gap between them
E = [(0, 0), (4, 0), (4, 1), (1, 1), (1, 2.6), (4, 2.6), (4, 3.2), (1, 3.2), (1, 4), (4, 4), (4, 5), (0, 5)]


def _prism(tmp_path, outline):
    n = len(outline)
    points = [(x, y, z) for z in (0.0, 1.0) for x, y in outline]
    faces = [list(range(n))[::-1], list(range(n, 2 * n))] + [[i, (i + 1) % n, (i + 1) % n + n, i + n]
                                                             for i in range(n)]
    cell = [len(faces)] + [x for f in faces for x in [len(f), *f]]
    path = str(tmp_path / "e.vtu")
    pv.UnstructuredGrid(np.array([len(cell), *cell]), np.array([42], np.uint8), np.array(points, float)).save(path)
    with pytest.warns(Warning, match="signed sums"):
        return Series(path).read(0).mesh


def test_points_inside_a_cell_not_star_shaped_by_its_winding_number(tmp_path):
    # points on rays from the corner mean through every corner lie on faces between the split's pieces
    # (held by neither: found by review, 32 such points inside the E were called outside), and a grid
    # of points over the outline; inside exactly where matplotlib's polygon test says
    from matplotlib.path import Path

    mesh = _prism(tmp_path, E)
    x = mesh.coordinates
    simplices = np.concatenate([np.asarray(b.connectivity) for b in mesh.blocks])
    centre = np.mean(E, axis=0)
    on_rays = np.concatenate([centre + np.linspace(0.05, 3, 60)[:, None] * (np.array(v) - centre) for v in E])
    gx, gy = np.meshgrid(np.linspace(-0.45, 4.45, 23), np.linspace(-0.45, 5.45, 27))
    xy = np.concatenate([on_rays, np.column_stack([gx.ravel(), gy.ravel()])])
    outline = Path(E)
    # clear of the outline itself (a point on the prism's own side is neither in nor out)
    clear = outline.contains_points(xy, radius=1e-6) == outline.contains_points(xy, radius=-1e-6)
    xy = xy[clear]
    points = np.column_stack([xy, np.full(len(xy), 0.5)])
    held = _held_by_whole_cells(x, simplices, mesh.cell_parents, points, np.zeros(len(points), dtype=np.int64),
                                np.ones(len(points)))
    assert held.tolist() == outline.contains_points(xy).tolist()
    assert 0 < held.sum() < len(points)


def test_inverted_and_zero_measures_count_whole_cells():
    # three tetrahedra: cell 0 of two pieces, one of them flat (its fourth corner in the plane of the
    # other three); cell 1 of one flat piece; cell 2 of one turned piece. Whole cells: 1 of zero volume
    # (cell 1), 1 turned (cell 2); pieces: 2 flat (elementary geometry: the volume of a tetrahedron)
    points = np.array([[0.0, 0, 0], [1, 0, 0], [0, 1, 0], [0, 0, 1], [1, 1, 0], [5, 5, 5], [6, 5, 5], [5, 6, 5]])
    tetra = np.array([[0, 1, 2, 3], [0, 1, 2, 4], [5, 6, 7, 6], [1, 0, 2, 3]])  # (5, 6, 7, 6): a corner twice
    mesh = Mesh(points, [("tetra", tetra)], pieces=[np.array([0, 0, 1, 2])])
    assert np.count_nonzero(mesh.cell_measures == 0) == 2 and mesh.signed_measures[3] == pytest.approx(-1 / 6)
    assert mesh.degenerate_cells == 1
    assert mesh.inverted_cells == 1


def test_point_on_a_face_that_holds_the_first_slant():
    # two tetrahedra of one cell (a bipyramid, convex) share a triangle whose plane holds the first
    # direction a point on a face is moved along: moved along it, the point stays on the face, and a
    # second direction finds it inside (found by review); elementary geometry: the bipyramid holds
    # its shared triangle's inner points
    from phasegauge.model._overlaps import _barycentric

    s = np.array([0.5773, 0.3141, 0.7544])
    s /= np.linalg.norm(s)
    e = np.cross(s, [0, 0, 1.0])
    e /= np.linalg.norm(e)
    n = np.cross(s, e)
    x = np.array([-s - e, -s + e, 2 * s, n, -n])
    tetra = np.array([[0, 1, 2, 3], [0, 1, 2, 4]])
    _, det = _barycentric(x[tetra], np.zeros((2, 3)))
    tetra[det < 0, :2] = tetra[det < 0, 1::-1]
    points = np.array([[0.0, 0, 0], 0.01 * n])  # on the shared triangle; just off it
    held = _held_by_whole_cells(x, tetra, np.array([0, 0]), points, np.array([0, 0]), np.ones(2))
    assert held.tolist() == [True, True]


def test_a_flat_piece_counts_a_repeated_corner_once():
    # a split cell of two pieces, one flat with a corner listed twice: no whole cell is degenerate, but
    # the piece's corner mean takes its corners once each: (10 + 20 + 30) / 3 (found by review: the
    # count of whole cells told the corner sums no corner repeats, and they gave 22.5)
    points = np.array([[0.0, 0, 0], [1, 0, 0], [0, 1, 0], [0, 0, 1], [1, 1, 1]])
    mesh = Mesh(points, [("tetra", np.array([[0, 1, 2, 3], [1, 2, 3, 3]]))], pieces=[np.array([0, 0])])
    assert mesh.degenerate_cells == 0
    np.testing.assert_allclose(mesh.point_to_cell(np.array([0.0, 10, 20, 30, 40])), [15.0, 20.0])
