"""Times stored in single precision: warned of where their spacing is a share of the step interval.

Outside references: the files are written by VTK (through pyvista) with the time in the field data
as ``float32`` or ``float64``; the resolution expected is numpy's ``np.spacing`` of the float32 time
(IEEE 754 single precision: 24-bit significand, spacing 2**-23 at 1).
"""

import warnings

import numpy as np
import pytest
import pyvista

from phasegauge.errors import SeriesWarning
from phasegauge.io import Series
from phasegauge.io._series_gaps import two_times

pyvista.OFF_SCREEN = True


def _series(folder, times, dtype):
    folder.mkdir()
    for k, t in enumerate(times):
        grid = pyvista.ImageData(dimensions=(5, 5, 1)).cast_to_unstructured_grid()
        grid.cell_data["c"] = np.full(grid.n_cells, 0.5)
        grid.field_data["TimeValue"] = np.array([t], dtype=dtype)
        grid.save(folder / f"s_{k:03d}.vtu")
    return str(folder)


def _messages(path):
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        series = Series(path)
    return series, [str(w.message) for w in caught if issubclass(w.category, SeriesWarning)]


def test_single_precision_times_at_fine_steps_warned(tmp_path):
    # t = 1 s, steps of 1e-7 s: float32 holds 1, 1.0000001, 1.0000002, 1.0000004 (spacing 1.19e-7)
    series, said = _messages(_series(tmp_path / "run", [1.0 + k * 1e-7 for k in range(4)], np.float32))
    assert [s.time_resolution for s in series.steps] == [float(np.spacing(np.float32(1.0)))] * 4
    assert np.spacing(np.float32(1.0)) == 2.0 ** -23
    (line,) = said  # the jump 1.0000002 to 1.0000004 is the rounding: not warned as missing steps
    assert "store the times in single precision" in line and "1.2e-07" in line and "1e-07" in line
    assert "double precision" in line


def test_double_precision_and_coarse_steps_not_warned(tmp_path):
    series, said = _messages(_series(tmp_path / "d", [1.0 + k * 1e-7 for k in range(4)], np.float64))
    assert said == [] and all(s.time_resolution == 0 for s in series.steps)
    assert np.allclose(np.diff(series.times), 1e-7, rtol=1e-6)
    # single precision at steps of 0.1: spacing 6e-8 at 0.4, under a millionth of the interval
    series, said = _messages(_series(tmp_path / "f", [0.1 * k for k in range(5)], np.float32))
    assert said == [] and list(series.times) == [0.0, 0.1, 0.2, 0.3, 0.4]


def test_times_single_precision_made_equal_refused_with_the_cause(tmp_path):
    # six steps: 1 + 3e-7 and 1 + 4e-7 both round to float32's 1.00000036
    assert np.float32(1 + 3e-7) == np.float32(1 + 4e-7)
    series, _ = _messages(_series(tmp_path / "run", [1.0 + k * 1e-7 for k in range(6)], np.float32))
    problem = series.time_problem()
    assert problem is not None
    text = problem.one_line()
    assert "time 1.0000004 after 1.0000004" in text and "single precision" in text


@pytest.mark.parametrize("a, b, shown", [(1.0, 1.0000001, ("1", "1.0000001")), (0.5, 0.75, ("0.5", "0.75")),
                                         (1.0000004, 1.0000004, ("1.0000004", "1.0000004")),
                                         (2.0, 2.0, ("2", "2"))])
def test_two_times_shown_apart(a, b, shown):
    # Python's float() of each text gives the time back, or tells the two apart
    assert two_times(a, b) == shown


def test_a_repeated_step_in_single_precision_is_not_blamed_on_precision(tmp_path):
    # a restart wrote t = 2 twice, steps of 1 s: single precision's spacing at 2 (2.4e-7) is no share
    # of the interval, so the fix is the repeated step's
    series, _ = _messages(_series(tmp_path / "run", [0.0, 1.0, 2.0, 2.0, 3.0], np.float32))
    text = series.time_problem().one_line()
    assert "time 2 after 2" in text and "choose the steps" in text and "single precision" not in text


def test_each_time_judged_against_its_own_interval(tmp_path):
    # outputs every 1e-3 s up to 0.2 s, then every 10 s up to 260 s: at 260 the spacing (3.1e-5) is
    # a tiny share of its own 10 s interval, though 3 % of the median interval (1e-3)
    times = [0.001 * k for k in range(201)] + [0.2 + 10.0 * k for k in range(1, 27)]
    series, said = _messages(_series(tmp_path / "run", times, np.float32))
    assert np.spacing(np.float32(260.2)) / 1e-3 > 0.01
    assert not [line for line in said if "single precision" in line]
