"""Polyhedra split into tetrahedra about their face and cell centres (model/polyhedra.py).

Outside checks: exact volumes of a frustum of a square pyramid and of a hexagonal prism
(elementary solid geometry: V = h (A1 + A2 + sqrt(A1 A2)) / 3 and V = 3 sqrt(3) a^2 h / 2);
the volume of a trilinear hexahedron, which the 24-tetrahedra split about face and cell corner
means gives exactly (J. Grandy (1997), "Efficient computation of volume of hexahedral cells",
Lawrence Livermore report UCRL-ID-128886) against the mesh's own Gauss-rule volumes; pyvista's
`compute_cell_sizes` of the same cells written as VTK hexahedra [lib].
"""

import numpy as np
import pytest

from phasegauge.errors import UnsupportedMeshError
from phasegauge.meshgen import grid_mesh
from phasegauge.model.mesh import Mesh
from phasegauge.model.polyhedra import cell_face_stream, split_polyhedra


def _stream(cells):
    """Face stream of cells given as lists of faces."""
    points, offsets, owner = [], [0], []
    for c, faces in enumerate(cells):
        for face in faces:
            points += list(face)
            offsets.append(len(points))
            owner.append(c)
    return np.array(points), np.array(offsets), np.array(owner)


def _volumes(X, split):
    Y = np.concatenate([X, split.centre_values(X)])
    mesh = Mesh(Y, [("tetra", split.tetra)])
    return np.bincount(split.source, weights=mesh.signed_measures), mesh


def _frustum(a=2.0, b=1.0, h=1.5):
    lo = [(-a / 2, -a / 2, 0), (a / 2, -a / 2, 0), (a / 2, a / 2, 0), (-a / 2, a / 2, 0)]
    hi = [(-b / 2, -b / 2, h), (b / 2, -b / 2, h), (b / 2, b / 2, h), (-b / 2, b / 2, h)]
    faces = [(0, 3, 2, 1), (4, 5, 6, 7), (0, 1, 5, 4), (1, 2, 6, 5), (2, 3, 7, 6), (3, 0, 4, 7)]
    exact = h * (a * a + b * b + a * b) / 3.0  # frustum of a square pyramid
    return np.array(lo + hi, float), faces, exact


def _hexagonal_prism(a=1.0, h=2.0):
    angles = np.arange(6) * np.pi / 3
    ring = np.c_[a * np.cos(angles), a * np.sin(angles)]
    points = np.r_[np.c_[ring, np.zeros(6)], np.c_[ring, np.full(6, h)]]
    faces = ([tuple(range(5, -1, -1)), tuple(range(6, 12))]
             + [(i, (i + 1) % 6, 6 + (i + 1) % 6, 6 + i) for i in range(6)])
    return points, faces, 3 * np.sqrt(3) / 2 * a * a * h  # hexagonal prism


@pytest.mark.parametrize("solid", [_frustum, _hexagonal_prism])
@pytest.mark.parametrize("reverse", [False, True])
def test_exact_volume_of_single_polyhedra(solid, reverse):
    points, faces, exact = solid()
    if reverse:  # faces listed with inward normals: the cell is turned over
        faces = [f[::-1] for f in faces]
    split = split_polyhedra(points, *_stream([faces]), 1)
    volume, tetra = _volumes(points, split)
    assert volume[0] == pytest.approx(exact, rel=1e-13)
    assert tetra.inverted_cells == 0 and split.inverted_tetra == 0
    assert split.reversed_cells == int(reverse)
    assert len(split.tetra) == sum(len(f) for f in faces)  # one per edge of every face of 4+ corners


def test_triangle_faces_stay_whole():
    # a tetrahedron as a polyhedron: four tetrahedra about its centre, exact volume 1/6
    points = np.array([[0, 0, 0], [1, 0, 0], [0, 1, 0], [0, 0, 1]], float)
    split = split_polyhedra(points, *_stream([[(0, 2, 1), (0, 1, 3), (1, 2, 3), (0, 3, 2)]]), 1)
    assert len(split.tetra) == 4 and split.n_face_centres == 0
    assert _volumes(points, split)[0][0] == pytest.approx(1 / 6, rel=1e-14)


@pytest.mark.parametrize("jitter", [0.0, 0.3])
def test_hexahedra_as_polyhedra_give_the_trilinear_volumes(jitter):
    m = grid_mesh((5, 4, 3), kind="hexahedron", jitter=jitter, seed=4)
    conn = m.blocks[0].connectivity
    split = split_polyhedra(m.points, *cell_face_stream("hexahedron", conn), len(conn), diagonals=False)
    volume, _ = _volumes(m.points, split)
    # Grandy (1997): the 24-tetrahedra split is exact for the trilinear hexahedron (every quad face
    # centred: diagonals=False, or squares whose diagonals tie)
    assert np.allclose(volume, m.cell_measures, rtol=1e-12, atol=0)
    assert len(split.tetra) == 24 * len(conn)
    split = split_polyhedra(m.points, *cell_face_stream("hexahedron", conn), len(conn))
    volume, _ = _volumes(m.points, split)
    if not jitter:
        assert len(split.tetra) == 24 * len(conn)  # squares: the diagonals tie, the centres stay
        assert np.allclose(volume, m.cell_measures, rtol=1e-12, atol=0)
    else:  # the shorter diagonals: the trilinear volume to O(jitter^2) per cell, the total exact
        assert len(split.tetra) == 12 * len(conn)
        assert np.allclose(volume, m.cell_measures, rtol=0.15, atol=0)
    assert volume.sum() == pytest.approx(1.0, rel=1e-13)  # the unit cube (flat boundary faces)
    if not jitter:
        pv = pytest.importorskip("pyvista")
        grid = pv.UnstructuredGrid({pv.CellType.HEXAHEDRON: conn}, m.points)
        assert np.allclose(volume, grid.compute_cell_sizes()["Volume"], rtol=1e-12)  # [lib]


def test_shared_faces_get_one_centre_whatever_the_corner_order():
    m = grid_mesh((3, 3, 3), kind="mixed", jitter=0.2, seed=1)
    fp, fo, fc, n = [], [0], [], 0
    rng = np.random.default_rng(0)
    for block in m.blocks:
        p, o, c = cell_face_stream(block.cell_type, block.connectivity)
        for f in range(len(o) - 1):  # start every face loop at a random corner
            face = p[o[f]:o[f + 1]]
            fp.append(np.roll(face, rng.integers(len(face))))
            fo.append(fo[-1] + len(face))
        fc.append(c + n)
        n += len(block)
    split = split_polyhedra(m.points, np.concatenate(fp), np.array(fo), np.concatenate(fc), n)
    volume, tetra = _volumes(m.points, split)
    assert volume.sum() == pytest.approx(1.0, rel=1e-13)
    # conforming: every interior triangle is shared by exactly two tetrahedra
    corners = tetra.blocks[0].connectivity[:, [[0, 1, 2], [0, 1, 3], [1, 2, 3], [0, 2, 3]]]
    faces = np.sort(corners.reshape(-1, 3), axis=1)
    _, counts = np.unique(faces, axis=0, return_counts=True)
    assert counts.max() == 2
    assert len(tetra.boundary_faces[1]) == np.count_nonzero(counts == 1)


def test_centre_values_are_corner_means():
    points, faces, _ = _frustum()
    split = split_polyhedra(points, *_stream([faces]), 1)
    linear = points @ np.array([1.0, -2.0, 0.5]) + 3
    centres = split.centre_values(points)
    assert np.allclose(split.centre_values(linear), centres @ np.array([1.0, -2.0, 0.5]) + 3, atol=1e-14)
    assert np.allclose(centres[-1], points.mean(axis=0))  # the cell centre: mean of the distinct corners


@pytest.mark.parametrize("change, match", [
    (lambda f: f[1:], "not closed"),
    (lambda f: [f[0][::-1]] + f[1:], "inconsistent orientations"),
    (lambda f: f[:3], "fewer than 4 faces"),
    (lambda f: [f[0][:2]] + f[1:], "fewer than 3 corners"),
    (lambda f: [(0, 3, 2, 99)] + f[1:], "points outside"),
])
def test_bad_face_lists_are_refused(change, match):
    points, faces, _ = _frustum()
    with pytest.raises(UnsupportedMeshError, match=match) as err:
        split_polyhedra(points, *_stream([change(list(faces))]), 1, where="cells.vtu")
    assert "cells.vtu" in str(err.value) and "closed surface" in str(err.value)


def test_cell_not_star_shaped_from_its_centre_keeps_its_signed_volume():
    # a thin L-shaped prism (concave): its corner mean lies outside it, so some tetrahedra about
    # it are inverted; their signed volumes still add up to the prism's (area of the L x height)
    L = [(0, 0), (4, 0), (4, 0.2), (0.2, 0.2), (0.2, 4), (0, 4)]
    area = 4 * 0.2 + 0.2 * 3.8
    points = np.array([(x, y, 0.0) for x, y in L] + [(x, y, 1.0) for x, y in L])
    faces = [tuple(range(5, -1, -1)), tuple(range(6, 12))] + [(i, (i + 1) % 6, 6 + (i + 1) % 6, 6 + i)
                                                               for i in range(6)]
    split = split_polyhedra(points, *_stream([faces]), 1)
    assert split.inverted_tetra > 0
    volume, _ = _volumes(points, split)
    assert volume[0] == pytest.approx(area, rel=1e-13)  # elementary geometry


@pytest.mark.parametrize("change", [
    lambda f: f,
    lambda f: f[1:],
    lambda f: [f[0][::-1]] + f[1:],
    lambda f: f + [f[0]],
    lambda f: [(0, 3, 3, 2, 1)] + f[1:],
    lambda f: [(0, 3, 2, 1, 0, 3, 2, 1)] + f[1:],
])
def test_closed_by_sorted_keys_agrees_with_the_edge_grouping(change):
    # the two plain sorts say "closed, consistently oriented" exactly when the edge grouping
    # finds every edge twice in opposite directions (the grouping names the fault otherwise)
    from phasegauge.model import polyhedra

    points, faces, _ = _frustum()
    fp, fo, fc = _stream([change(list(faces))])
    sizes = np.diff(fo)
    nxt = polyhedra._next_corners(fo, sizes)
    edge_cell = np.repeat(fc, sizes)
    try:
        polyhedra._check_closed(fp, nxt, edge_cell, "", np.arange(1))
        grouped = True
    except UnsupportedMeshError:
        grouped = False
    assert polyhedra._closed_by_keys(fp, nxt, edge_cell, polyhedra._bits(len(points))) == grouped
