"""Repeated cells found by grouping the sorted corner rows, against numpy's unique rows."""

import numpy as np
import pytest

from phasegauge.model._overlaps import _repeated_rows


@pytest.mark.parametrize("k,high", [(4, 6), (8, 3), (8, 10 ** 6), (3, 2 ** 40)])
def test_repeated_rows_match_numpy_unique(k, high):
    # many repeats (small ids), none but planted ones (large ids), and ids beyond 32 bits
    rng = np.random.default_rng(k + high % 97)
    rows = np.sort(rng.integers(0, high, (4000, k)), axis=1)
    rows = np.concatenate([rows, rows[rng.integers(0, rows.shape[0], 25)]])
    expected = rows.shape[0] - np.unique(rows, axis=0).shape[0]  # numpy's exact row grouping
    assert _repeated_rows(rows) == expected
    assert _repeated_rows(np.unique(rows, axis=0)) == 0


@pytest.mark.parametrize("k,high", [(4, 6), (8, 3), (8, 10 ** 6), (5, 2 ** 40)])
def test_repeated_corner_sets_in_any_order_match_numpy_unique(k, high):
    # rows compared as corner sets: a repeat may list its corners in another order (unsorted rows)
    from phasegauge.model._overlaps import _repeated_sets

    rng = np.random.default_rng(7 * k + high % 89)
    rows = rng.integers(0, high, (3000, k))
    copies = rows[rng.integers(0, rows.shape[0], 30)]
    copies = np.take_along_axis(copies, rng.permuted(np.tile(np.arange(k), (30, 1)), axis=1), axis=1)
    rows = np.concatenate([rows, copies])
    expected = rows.shape[0] - np.unique(np.sort(rows, axis=1), axis=0).shape[0]  # numpy's exact grouping
    assert _repeated_sets(rows) == expected


def test_repeated_corner_sets_exact_when_every_mix_collides(monkeypatch):
    # the sums of mixes only pick candidates: with every row's sum equal, the count is still exact
    from phasegauge.model import _overlaps

    monkeypatch.setattr(_overlaps, "_mixed", lambda values: np.zeros(values.shape, dtype=np.uint64))
    rows = np.array([[0, 1, 2, 3], [3, 2, 1, 0], [0, 1, 2, 4], [4, 2, 1, 0], [5, 6, 7, 8], [1, 0, 3, 2]])
    assert _overlaps._repeated_sets(rows) == 3  # numpy: 6 rows, 3 distinct sorted rows
    assert rows.shape[0] - np.unique(np.sort(rows, axis=1), axis=0).shape[0] == 3
