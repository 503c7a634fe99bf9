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


@pytest.mark.parametrize("kind", ["tetra", "wedge"])
def test_band_pairs_from_neighbour_rows_are_the_mesh_face_pairs(kind, monkeypatch):
    m = grid_mesh((60, 4, 4), kind=kind, jitter=0.2, seed=2)
    x = m.cell_centroids[:, 0]
    c = np.where((x < 0.1) | (x > 0.9), 1.0, np.where(x < 0.7, 0.3, 0.0))  # a wide plateau of band values
    cells = np.flatnonzero(c > 1e-3)
    local = np.full(m.n_cells + 1, cells.size)
    local[cells] = np.arange(cells.size)
    band_local = c[cells] <= 0.5
    pairs = _band_sharing._local_band_pairs(cells, np.take(local, neighbour_table(m)[cells]), band_local)
    p = m.face_pairs
    near = c > 1e-3
    band = near & (c <= 0.5)
    expected = p[near[p[:, 0]] & near[p[:, 1]] & (band[p[:, 0]] | band[p[:, 1]])]
    assert np.array_equal(pairs, expected)

    far = []
    original = _band_sharing.finish_far_band
    monkeypatch.setattr("phasegauge.analysis._labelling.finish_far_band",
                        lambda *a, **k: far.append(1) or original(*a, **k))
    found = label_droplets(m, c)
    assert far  # the plateau is wider than the rings: shared by distance
    # the same labelling with the pairs from all of the mesh's face pairs
    monkeypatch.setattr(_band_sharing, "_local_band_pairs",
                        lambda cells, nb, band: _band_sharing._band_face_pairs(m, near, band_of(cells, band)))

    def band_of(cells, band_local):
        out = np.zeros(m.n_cells, dtype=bool)
        out[cells[band_local]] = True
        return out

    again = label_droplets(m, c)
    assert found.count == again.count == 2
    assert np.array_equal(found.shared_labels, again.shared_labels)
    assert np.array_equal(found.table["volume"].to_numpy(), again.table["volume"].to_numpy())
