"""Tables stay bit for bit the same when code only moves (the layout guard; see table_fingerprints.py)."""

import json
import os

import pytest

from table_fingerprints import fingerprints

HERE = os.path.dirname(os.path.abspath(__file__))


@pytest.fixture(scope="module")
def measured():
    return fingerprints()


def test_every_table_column_matches_the_committed_fingerprints(measured):
    expected = json.load(open(os.path.join(HERE, "table_fingerprints.json")))
    changed = []
    for case, tables in expected.items():
        for table, columns in tables.items():
            got = measured[case][table]
            for column, digest in columns.items():
                if got.get(column) != digest:
                    changed.append(f"{case}/{table}/{column}")
    assert not changed, ("columns changed (regenerate the fingerprints only for an intended change): "
                         + ", ".join(changed))
