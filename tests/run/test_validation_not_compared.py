"""Measured values the run gives no simulated value for: counted and named, never dropped unsaid.

The fields are linear in x, y and t, so the simulated value at a measured point and time is known exactly
[analytic reference]; the summary figures are checked against numpy on the same differences.
"""

import warnings

import numpy as np
import pytest
from conftest import write_listing

from phasegauge import measure
from phasegauge.analysis.probes import validation_summary, validation_table
from phasegauge.errors import PhasegaugeWarning
from phasegauge.io import read_measured_file
from phasegauge.meshgen import grid_mesh
from phasegauge.run.options import MeasureOptions


def _field(x, y, t):
    return 0.2 + 0.3 * x + 0.2 * y + 0.1 * t  # linear in space and time [analytic reference]


def _run(tmp_path, times, measured, *, hole_at=(), empty=()):
    """Measure a series of a linear field on cells: ``hole_at`` steps have no value in the cell at
    (0.525, 0.525); ``empty`` steps are written as empty files (skipped as damaged)."""
    mesh = grid_mesh((20, 20), kind="quad")
    centre = mesh.cell_centroids
    hole = int(np.argmin(np.hypot(centre[:, 0] - 0.525, centre[:, 1] - 0.525)))
    steps = []
    for k, t in enumerate(times):
        values = _field(centre[:, 0], centre[:, 1], t)
        if k in hole_at:
            values[hole] = np.nan
        steps.append((t, f"s_{k}.vtu", mesh, {"f": values}))
    listing = write_listing(str(tmp_path), steps)
    for k in empty:
        (tmp_path / f"s_{k}.vtu").write_bytes(b"")
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        result = measure(listing, options=MeasureOptions(field="f", analyses=("conservation",), measured=measured))
    return result, [str(w.message) for w in caught]


def test_a_measured_time_on_a_step_takes_that_step_alone():
    # the step after (and, at the last step, the one before) has no value there: 0 x NaN emptied the value
    # at a step with a good one, and the summary read "points 1, within 1.0" for 1 of 3 within
    times = np.array([0.0, 1.0, 2.0, 3.0])
    exact = _field(0.52, 0.53, times)
    simulated = exact.copy()[:, None]
    simulated[2, 0] = np.nan
    off = {1.0: 0.05, 3.0: 0.05}
    measured = [(0.52, 0.53, 0.0, _field(0.52, 0.53, t) + off.get(t, 0.0), t, 0.01) for t in (0.0, 1.0, 3.0)]
    measured.append((0.52, 0.53, 0.0, 0.5, 1.0 + 1e-15, 0.01))  # on step 1 to round-off
    table = validation_table(measured, times, np.repeat(simulated, len(measured), axis=1))
    got = table.set_index("time")["simulated"]
    assert got.iloc[:3].to_numpy() == pytest.approx(exact[[0, 1, 1]], abs=1e-15)
    assert got.loc[3.0] == pytest.approx(exact[3], abs=1e-15)
    assert table["step"].tolist() == [0, 1, 1, 3]
    overall = validation_summary(table[table["measured"] != 0.5]).iloc[-1]
    diff = np.array([0.0, -0.05, -0.05])  # numpy on the same differences
    assert overall["points"] == 3 and overall["not_compared"] == 0
    assert overall["rms_error"] == pytest.approx(np.sqrt(np.mean(diff ** 2)), abs=1e-12)
    assert overall["within_uncertainty"] == pytest.approx(1 / 3)


def test_a_time_between_steps_one_of_them_empty_is_counted_not_compared(tmp_path):
    times = (0.0, 1.0, 2.0, 3.0)
    measured = tuple((0.52, 0.53, 0.0, _field(0.52, 0.53, t) + d, t, 0.01)
                     for t, d in ((0.0, 0.0), (1.0, 0.05), (1.5, 0.05), (3.0, 0.05)))
    result, texts = _run(tmp_path, times, measured, hole_at=(2,))
    table = result.validation.set_index("time")
    assert table.loc[[0.0, 1.0, 3.0], "simulated"].to_numpy() == pytest.approx(
        _field(0.52, 0.53, np.array([0.0, 1.0, 3.0])), abs=1e-12)  # exact inside the mesh [analytic]
    assert np.isnan(table.loc[1.5, "simulated"])
    overall = result.validation_summary.iloc[-1]
    assert (overall["points"], overall["not_compared"]) == (3, 1)
    assert overall["within_uncertainty"] == pytest.approx(1 / 3)
    assert any("1 measured value(s) with times have no simulated value" in t and "(0.52, 0.53, 0) at t = 1.5" in t
               for t in texts), texts


def test_a_value_without_a_time_empty_at_the_last_step_is_counted_not_compared(tmp_path):
    # it disagreed at every earlier step and left the overall row, which then read "within 1.0"
    times = (0.0, 1.0, 2.0, 3.0, 4.0)
    measured = ((0.52, 0.53, 0.0, 0.9, np.nan, 0.01), (0.2, 0.2, 0.0, _field(0.2, 0.2, 4.0), 4.0, 0.01))
    result, texts = _run(tmp_path, times, measured, hole_at=(4,))
    summary = result.validation_summary
    overall = summary.iloc[-1]
    assert (overall["points"], overall["not_compared"]) == (1, 1)
    assert summary.loc[summary["time"] == 4.0, "not_compared"].tolist() == [1]
    last = 0.9 - _field(0.52, 0.53, 3.0)  # its difference at step 3, the last with a value [analytic]
    assert any("without a time have no simulated value at the last step 4" in t and
               f"last value at step 3, difference {-last:.3g}" in t for t in texts), texts


def test_a_measured_time_across_a_skipped_step_is_not_compared(tmp_path):
    # the file of t = 2 is damaged (empty): the value measured at t = 2 (and at 1.5) was compared with an
    # interpolation across the gap, with no word; the steps around it still give their own values
    times = (0.0, 1.0, 2.0, 3.0, 4.0)
    measured = tuple((0.3, 0.7, 0.0, _field(0.3, 0.7, t), t, 0.01) for t in (1.0, 1.5, 2.0, 3.0, 3.5))
    result, texts = _run(tmp_path, times, measured, empty=(2,))
    table = result.validation.set_index("time")
    assert table.loc[[1.5, 2.0], "simulated"].isna().all()
    assert table.loc[[1.0, 3.0, 3.5], "simulated"].to_numpy() == pytest.approx(
        _field(0.3, 0.7, np.array([1.0, 3.0, 3.5])), abs=1e-12)  # [analytic]
    overall = result.validation_summary.iloc[-1]
    assert (overall["points"], overall["not_compared"]) == (3, 2)
    assert any("2 measured value(s) between steps 1 and 3, across a skipped step, not compared" in t and
               "at t = 1.5" in t and "at t = 2" in t for t in texts), texts


def test_a_blank_time_in_a_file_with_times_is_named(tmp_path):
    path = tmp_path / "m.csv"
    path.write_text("# sensor log\nx,y,value,time,uncertainty\n0.5,0.5,0.5,0.5,0.01\n# lost\n0.7,0.5,0.56,,0.01\n")
    with pytest.warns(PhasegaugeWarning, match=r"1 of 2 measured values have no time \(line 5\)") as caught:
        rows = read_measured_file(path)
    assert str(path) in str(caught[0].message)
    assert np.isnan(rows[1][4])
    untimed = tmp_path / "u.csv"
    untimed.write_text("x,y,value\n0.5,0.5,0.5\n")
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        read_measured_file(untimed)


def test_a_bad_number_is_named_by_its_line_in_the_file(tmp_path):
    # comment lines count: line 4 of the file below (the error read "line 3", the third table row's place)
    from phasegauge.errors import InputError

    path = tmp_path / "m.csv"
    path.write_text("# sensor log\nx,y,value\n0.5,0.5,0.5\n0.7,0.5,inf\n")
    with pytest.raises(InputError, match="column 'value' of the measured file is not a finite number on line 4"):
        read_measured_file(path)


def test_the_overlay_title_counts_the_values_not_compared():
    from phasegauge.report._plots_probes import plot_validation_overlay

    times = np.array([0.0, 1.0])
    measured = [(0.0, 0.0, 0.0, 1.0, 0.0, 0.1), (0.0, 0.0, 0.0, 1.0, 0.5, 0.1), (0.0, 0.0, 0.0, 1.0, 1.0, 0.1)]
    table = validation_table(measured, times, np.array([[1.0] * 3, [np.nan] * 3]))
    figure = plot_validation_overlay(table, validation_summary(table))
    assert "2 of 3 values not compared" in figure.axes[0].get_title()


def test_the_not_compared_warnings_stay_whole_with_many_values():
    # each warning names a few values and counts the rest, within the message's length limit (our limit,
    # errors.WHAT_LIMIT): cut in the middle, it would lose its count or its fix
    from phasegauge.errors import WHAT_LIMIT
    from phasegauge.run._sampling import _not_compared_notes

    times = np.array([0.0, 1.0, 2.0, 3.0])
    rng = np.random.default_rng(1)
    at = np.r_[rng.uniform(1.1, 1.9, 5), rng.uniform(2.1, 2.9, 5)]
    timed = [(*rng.uniform(0.1, 0.9, 3), 0.5, t, 0.01) for t in at]
    untimed = [(*rng.uniform(0.1, 0.9, 3), 0.5, np.nan, 0.01) for _ in range(5)]
    simulated = np.full((4, 15), 0.123456789)
    simulated[2:, :] = np.nan  # steps 2 and 3 empty; between steps 1 and 2 a skipped step (gaps)
    table = validation_table(timed + untimed, times, simulated)
    gaps = np.array([False, True, False])
    notes = _not_compared_notes(table, times, np.arange(4), gaps, np.zeros(0))
    assert len(notes) == 3
    for _, text, _ in notes:
        assert len(text) <= WHAT_LIMIT and " more" in text, text
    assert notes[-1][1].endswith("see that step's warnings")


def test_a_measured_time_a_hair_off_a_written_time_is_that_steps():
    # a solver writes t = 0.333333 (six digits), the experiment's log 0.3333333: the step's time, not a time between
    # steps 1 and 3 across the damaged step 2 (not compared); a time off by a share of the interval above 1e-6
    # (our threshold) stays between steps [analytic: the field linear in time]
    times = np.array([0.0, 0.333333, 1.0])
    simulated = np.array([[0.0], [0.333333], [1.0]])
    measured = [(0.5, 0.5, 0.0, 0.3333333, 0.3333333, 0.01), (0.5, 0.5, 0.0, 0.34, 0.34, 0.01)]
    gaps = np.array([False, True])  # a damaged step between 0.333333 and 1.0
    table = validation_table(measured, times, np.repeat(simulated, 2, axis=1), gaps=gaps)
    first, second = table.iloc[0], table.iloc[1]
    assert first["step"] == 1 and first["simulated"] == pytest.approx(0.333333, abs=1e-15)
    assert np.isnan(second["simulated"])  # 0.34 lies between steps 1 and 2 across the damaged one
