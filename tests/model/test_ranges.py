"""Ragged-row positions (``model._grouping.ranges``) against Python's own ranges."""

import numpy as np

from phasegauge.model._grouping import ranges


def test_ranges_match_python_ranges():
    # the items of ragged rows, against Python's own range objects joined in order
    offsets = np.array([0, 3, 3, 7, 8, 12])
    for which in ([4, 0, 2], [1], [], [1, 1, 3]):
        expected = [k for j in which for k in range(offsets[j], offsets[j + 1])]
        got = ranges(offsets, np.array(which, dtype=np.int64))
        assert got.dtype == np.int64 and got.tolist() == expected
