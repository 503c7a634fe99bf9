"""The far band's face pairs read from the near cells' neighbour rows (analysis/_band_sharing.py).

Checked against the mesh's face pairs filtered here directly (both cells near, one in the band),
and the droplets of a wide plateau (shared by distance) against the same labelling with the
pairs taken from every face pair of the mesh.
"""

import numpy as np
import pytest

from phasegauge.analysis import _band_sharing
from phasegauge.analysis._droplet_graph import neighbour_table
from phasegauge.analysis.droplets import label_droplets
from phasegauge.meshgen import grid_mesh


@pytest.mark.parametrize("kind, periodic", [("tetra", ()), ("wedge", ()), ("tetra", ("x",))])
def test_band_pairs_from_neighbour_rows_are_the_mesh_face_pairs(kind, periodic, monkeypatch):
    m = grid_mesh((60, 4, 4), kind=kind, jitter=0.2, seed=2)
    x = m.cell_centroids[:, 0]
    c = np.where((x < 0.1) | (x > 0.9), 1.0, np.where(x < 0.7, 0.3, 0.0))  # a wide plateau of band values
    if periodic:  # one droplet, its plateau across the periodic boundary
        c = np.where((x > 0.45) & (x < 0.55), 1.0, np.where((x < 0.45) | (x > 0.8), 0.3, 0.0))
    cells = np.flatnonzero(c > 1e-3)
    local = np.full(m.n_cells + 1, cells.size)
    local[cells] = np.arange(cells.size)
    band_local = c[cells] <= 0.5
    pairs = cells[_band_sharing._near_band_pairs(np.take(local, neighbour_table(m)[cells]), band_local)]
    p = m.face_pairs
    near = c > 1e-3
    band = near & (c <= 0.5)
    expected = p[near[p[:, 0]] & near[p[:, 1]] & (band[p[:, 0]] | band[p[:, 1]])]
    assert np.array_equal(pairs, expected)

    far = []
    original = _band_sharing.finish_far_band
    monkeypatch.setattr("phasegauge.analysis._labelling.finish_far_band",
                        lambda *a, **k: far.append(1) or original(*a, **k))
    found = label_droplets(m, c, periodic=periodic)
    assert far  # the plateau is wider than the rings: shared by distance
    # the same labelling through the mesh-wide path (pairs from all of the mesh's face pairs)
    monkeypatch.setattr("phasegauge.analysis._labelling.finish_far_band",
                        lambda *a, **k: original(*a[:5]))
    again = label_droplets(m, c, periodic=periodic)
    assert found.count == again.count == (1 if periodic else 2)
    if periodic:  # the band reaches across the boundary (its pairs' lengths are cell sizes there)
        assert found.shared_labels[np.flatnonzero(x > 0.95)].min() == 0
    assert np.array_equal(found.shared_labels, again.shared_labels)
    assert np.array_equal(found.table["volume"].to_numpy(), again.table["volume"].to_numpy())


def test_far_band_goes_to_the_nearest_assigned_cell_over_the_whole_band():
    # the graph of pairs with an unassigned end gives every unassigned cell the nearest assigned
    # cell over the graph of every band pair: scipy's multi-source Dijkstra on the whole band [lib]
    from scipy import sparse
    from scipy.sparse import csgraph

    m = grid_mesh((60, 4, 4), kind="tetra", jitter=0.2, seed=5)
    x = m.cell_centroids[:, 0]
    c = np.where((x < 0.1) | (x > 0.9), 1.0, np.where(x < 0.7, 0.3, 0.0))
    cells = np.flatnonzero(c > 1e-3)
    local = np.full(m.n_cells + 1, cells.size)
    local[cells] = np.arange(cells.size)
    neighbours = np.take(local, neighbour_table(m)[cells])
    near_c = c[cells]
    label = np.where(near_c > 0.5, (x[cells] > 0.5).astype(np.int64), -1)
    shared, root, far = _band_sharing.share_band(label, near_c, neighbours, np.empty((0, 2), np.int64))
    assert far
    got, _ = _band_sharing.finish_far_band(m, cells, shared, root, [], neighbours)

    pairs = _band_sharing._near_band_pairs(neighbours, label < 0)
    X = m.cell_centroids[cells]
    length = np.linalg.norm(X[pairs[:, 0]] - X[pairs[:, 1]], axis=1)
    graph = sparse.coo_matrix((length, (pairs[:, 0], pairs[:, 1])), shape=(cells.size, cells.size)).tocsr()
    sources = np.flatnonzero(shared >= 0)
    dist, _, origin = csgraph.dijkstra(graph, directed=False, indices=sources, min_only=True,
                                       return_predecessors=True)
    todo = (shared < 0) & np.isfinite(dist)
    assert np.count_nonzero(todo) > 100
    np.testing.assert_array_equal(got[todo], shared[origin[todo]])
    np.testing.assert_array_equal(got[~todo], shared[~todo])
