"""`convex_cells.split_beside`: ordinary cells meeting convex cells split about face centres.

Outside checks: volumes of boxes, prisms and pyramids (elementary geometry); scipy's ConvexHull
volume of each cell's corners [lib] as the second way to the pieces' volumes.
"""

import numpy as np
import pytest
from scipy.spatial import ConvexHull

from phasegauge.meshgen import grid_mesh
from phasegauge.model.convex_cells import convert_convex_point_sets, split_beside


def _volumes(X, tets):
    p = X[tets]
    return np.einsum("ij,ij->i", np.cross(p[:, 1] - p[:, 0], p[:, 2] - p[:, 0]), p[:, 3] - p[:, 0]) / 6


@pytest.mark.parametrize("kind", ["hexahedron", "wedge", "pyramid"])
def test_cells_beside_split_ones_become_positive_pieces_of_their_volume(kind):
    mesh = grid_mesh((2, 1, 1), kind=kind)  # two unit-half boxes side by side, as cells of `kind`
    block = mesh.blocks[0]
    X = mesh.points
    right = X[block.connectivity].mean(axis=1)[:, 0] > 0.5
    convex = block.connectivity[right][:, ::-1]  # the right half as convex sets
    if kind == "hexahedron":
        # a box's eight corners are recognised as a hexahedron and nothing would be split: a ninth
        # corner beyond the right face (a box with a roof) makes the right cell one split about its centre
        X = np.vstack([X, [[1.25, 0.5, 0.5]]])
        convex = np.column_stack([convex, np.full(len(convex), len(X) - 1)])
    out = convert_convex_point_sets(X, convex)
    assert out.counts.get("split") and out.face_centres
    blocks = [(kind, block.connectivity[~right])] + out.blocks
    data = {"c": [np.arange(len(b[1]), dtype=float) for b in blocks]}
    n_before = out.n_centres
    new_blocks, pieces, new_data = split_beside(X, blocks, [None] + [None] * len(out.blocks), data, out)
    left = block.connectivity[~right]
    if kind == "pyramid":
        # of the six pyramids about the left box's centre, only the one whose base is the shared
        # face x = 1/2 meets the split cells through a quad face; the five others stay whole
        assert new_blocks[0][0] == "pyramid" and len(new_blocks[0][1]) == 5
        assert pieces[0] is None  # whole cells
        is_kept = (left[:, None, :] == new_blocks[0][1][None]).all(axis=2).any(axis=1)
        np.testing.assert_array_equal(new_data["c"][0], data["c"][0][is_kept])
        new_blocks, pieces, new_data = new_blocks[1:], pieces[1:], {"c": new_data["c"][1:]}
        split_rows = np.flatnonzero(~is_kept)
        assert split_rows.size == 1 and np.allclose(X[left[split_rows[0], :4], 0], 0.5)
    else:
        split_rows = np.arange(len(left))  # every left cell meets the split cells through a quad face
    assert new_blocks[0][0] == "tetra"
    coords = np.vstack([X] + [X[c].mean(axis=1) for c in out.centre_corners])
    assert out.n_centres > n_before
    tets, owner = new_blocks[0][1], pieces[0]  # owner: the row of the cell in the input block
    v = _volumes(coords, tets)
    assert np.all(v > 0)  # positively oriented
    whole = [ConvexHull(X[row]).volume for row in left]  # scipy [lib]
    np.testing.assert_allclose(np.bincount(owner, weights=v, minlength=len(left))[split_rows],
                               np.array(whole)[split_rows], rtol=1e-12)
    np.testing.assert_allclose(sum(whole), 0.5, rtol=1e-12)  # the left half of the unit box
    np.testing.assert_array_equal(new_data["c"][0], data["c"][0][owner])  # each piece its cell's value


def test_a_mesh_without_face_centres_is_returned_as_it_is():
    mesh = grid_mesh((2, 2, 2))
    out = convert_convex_point_sets(mesh.points, mesh.blocks[0].connectivity)  # recognised hexahedra
    assert not out.face_centres
    blocks = [("hexahedron", mesh.blocks[0].connectivity)]
    result = split_beside(mesh.points, blocks, [None], {}, out)
    assert result[0] is blocks and out.n_centres == 0


@pytest.mark.parametrize("high", [3, 1000, 2 ** 40])
def test_quad_faces_are_grouped_as_numpy_groups_them(high):
    # the split's face grouping by packed sorts against numpy's np.unique(axis=0) [lib]: the same
    # rows in the same order and the same row numbers (the new face centres are numbered in it)
    from phasegauge.model._grouping import unique_rows as _unique_rows

    rng = np.random.default_rng(high % 97)
    rows = rng.integers(0, high, size=(400, 4))
    rows = np.concatenate([rows, rows[::3]])  # repeated faces
    unique, inverse = _unique_rows(rows)
    expected, expected_inverse = np.unique(rows, axis=0, return_inverse=True)
    np.testing.assert_array_equal(unique, expected)
    np.testing.assert_array_equal(inverse, expected_inverse.ravel())
    assert _unique_rows(rows[:0])[0].shape == (0, 4)
    one, where = _unique_rows(rows[:1].repeat(3, axis=0))  # one group: every row number 0
    assert one.shape == (1, 4) and not where.any()


@pytest.mark.parametrize("high", [5, 1000, 2 ** 33])
def test_first_rows_and_group_numbers_as_numpy_gives_them(high):
    # the split's centred faces take each face's first row and every row's face number from one
    # stable packed sort: against np.unique(return_index=True, return_inverse=True) [lib]
    from phasegauge.model._grouping import group_columns, group_numbers

    ids = np.random.default_rng(high % 89).integers(0, high, size=500)
    order, starts = group_columns([ids])
    expected, first, inverse = np.unique(ids, return_index=True, return_inverse=True)
    np.testing.assert_array_equal(order[starts], first)
    np.testing.assert_array_equal(group_numbers(order, starts), inverse.ravel())
