"""The CSV tables read back with pandas as the DataFrames the API returns: the same dtypes, the same values.

Outside references: Python writes a float as the shortest text that reads back as the same float
(``repr``, David Gay's correctly rounded conversion; Python's "Floating Point Arithmetic" tutorial),
and pandas' ``to_csv`` writes floats so unless told another format; ``pandas.read_csv`` infers each
column's dtype from its text (a column of whole numbers without a decimal point is int64). The check
is pandas' own ``assert_frame_equal`` with exact values and dtypes.
"""

import os

import numpy as np
import pandas as pd
import pytest

from phasegauge.report import atomic_write_csv

ROOT = os.path.dirname(os.path.dirname(os.path.dirname(os.path.abspath(__file__))))
SAMPLE = os.path.join(ROOT, "sample_fields", "filament_breakup.xdmf")


def test_written_table_reads_back_exactly(tmp_path):
    frame = pd.DataFrame({
        "step": np.array([0, 1, 2, 3, 4, 5], dtype=np.int64),
        # 1e-9 apart at t = 1000: ten significant digits would make the two one time
        "time": [1000.0, 1000.0 + 1e-9, 1000.0 + 2e-9, 0.1 + 0.2, 5e-324, 1.7976931348623157e308],
        "whole": [0.0, 2.0, -0.0, 1e16, 3.0, 4.0],  # whole-number floats stay floats
        "gaps": [np.nan, 1.0, np.inf, -np.inf, np.nan, 2.5],
        "kind": pd.Series(["breakup", "coalescence", "[]", "complex", "a,b", 'say "x"'], dtype=str),
        "flag": [True, False, True, True, False, False],
    })
    path = tmp_path / "table.csv"
    atomic_write_csv(path, frame)
    back = pd.read_csv(path)
    pd.testing.assert_frame_equal(back, frame, check_exact=True)
    assert back["time"].nunique() == 6


@pytest.fixture(scope="module")
def run(tmp_path_factory):
    from phasegauge.run.measure import measure

    out = tmp_path_factory.mktemp("tables")
    # breakups (two ids after), disappearances (none after), probes, lines and section profiles
    result = measure(SAMPLE, "phi", range=(-1, 1), periodic=("x", "y"), out=out, section_axis="x",
                     probes=(("a", 0.3, 0.5, 0.0), ("b", 0.7, 0.2, 0.0)),
                     lines=(("l", 0.0, 0.5, 0.0, 1.0, 0.5, 0.0, 5),))
    return result, out


@pytest.mark.parametrize("name", ["steps", "droplets", "events", "profiles", "probes", "lines"])
def test_run_tables_read_back_as_the_api_returns_them(run, name):
    result, out = run
    frame = getattr(result, name)
    assert len(frame)
    back = pd.read_csv(out / f"{name}.csv")
    pd.testing.assert_frame_equal(back, frame.reset_index(drop=True), check_exact=True)
    if name == "events":  # both kinds of side: several ids, and none
        assert {"breakup", "disappearance"} <= set(frame["kind"])
        assert "[]" in set(back["after"]) and any(" " in text for text in back["after"])
