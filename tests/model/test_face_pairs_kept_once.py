"""The face pairs are kept once: after the droplet neighbour table is built from them, the mesh
reads them back from that table, the same array value for value (sorted, same type)."""

import numpy as np
import pytest

from phasegauge.analysis._droplet_graph import neighbour_table
from phasegauge.meshgen import grid_mesh
from phasegauge.model.mesh import Mesh


def _mixed_mesh():
    # two hexahedra side by side, a wedge and a tetrahedron on top of them
    points = np.array([[0, 0, 0], [1, 0, 0], [2, 0, 0], [0, 1, 0], [1, 1, 0], [2, 1, 0],
                       [0, 0, 1], [1, 0, 1], [2, 0, 1], [0, 1, 1], [1, 1, 1], [2, 1, 1],
                       [0.5, 0, 2], [0.5, 1, 2], [1.5, 0.5, 2]], dtype=float)
    hexahedra = np.array([[0, 1, 4, 3, 6, 7, 10, 9], [1, 2, 5, 4, 7, 8, 11, 10]])
    wedge = np.array([[6, 7, 12, 9, 10, 13]])
    tetra = np.array([[7, 8, 10, 14]])
    return Mesh(points, [("hexahedron", hexahedra), ("wedge", wedge), ("tetra", tetra)])


@pytest.mark.parametrize("make", [lambda: grid_mesh((5, 4, 3), kind="tetra", jitter=0.2, seed=1),
                                  lambda: grid_mesh((5, 4, 3), kind="hexahedron", jitter=0.2, seed=2),
                                  lambda: grid_mesh((6, 5), kind="triangle", jitter=0.2, seed=3),
                                  _mixed_mesh])
def test_face_pairs_read_back_from_the_neighbour_table(make):
    mesh = make()
    grouped = mesh.face_pairs.copy()
    table = neighbour_table(mesh)
    assert mesh._face_topology["pairs"] is None  # one copy kept: the table's
    again = mesh.face_pairs
    assert again.dtype == grouped.dtype
    np.testing.assert_array_equal(again, grouped)
    # every pair once in each of its two rows
    assert np.count_nonzero(table >= 0) == 2 * len(grouped)
