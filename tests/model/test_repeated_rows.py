"""Repeated cells found through a 64-bit mix of the sorted corner rows, against numpy's unique rows."""

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
