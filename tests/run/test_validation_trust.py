"""Measured values, probes and lines where a solver's output could mislead them (audit 12)."""

import warnings

import numpy as np
import pytest
from conftest import write_listing

from phasegauge import measure
from phasegauge.errors import SeriesError
from phasegauge.meshgen import grid_mesh, to_meshio
from phasegauge.run.options import MeasureOptions


def _field(x, y, t):
    return 0.1 + 0.3 * x + 0.2 * y + 0.5 * t  # linear in space and time [analytic reference]


def _untimed_files(folder, times=(0.0, 0.1, 0.2, 0.3)):
    # a solver's files that store no time: the steps are numbered 0, 1, 2 ...
    folder.mkdir()
    mesh = grid_mesh((8, 8))
    for k, t in enumerate(times):
        to_meshio(mesh, point_data={"f": _field(mesh.points[:, 0], mesh.points[:, 1], t)}).write(folder / f"s_{k}.vtu")
    return folder


def test_measured_times_against_numbered_steps_are_refused_before_measuring(tmp_path):
    # the measured values are the exact field at t = 0.05 ... 0.3 s; against steps numbered 0, 1, 2, 3
    # they were compared at "t = 0.05 steps" and read 0 % within uncertainty, bias -0.07, with exit 0
    folder = _untimed_files(tmp_path / "run")
    measured = tuple((0.23, 0.37, 0.0, _field(0.23, 0.37, t), t, 0.01) for t in (0.05, 0.1, 0.3))
    options = MeasureOptions(field="f", analyses=("conservation",), measured=measured)
    with pytest.raises(SeriesError, match="measured values have times, but the steps' files store none") as err:
        measure(folder, options=options)
    assert "time,path" in err.value.fix
    # without times the values stand for every step, as before
    untimed = tuple(m[:4] + (np.nan, 0.01) for m in measured)
    result = measure(folder, options=MeasureOptions(field="f", analyses=("conservation",), measured=untimed))
    assert len(result.validation) == 3 * 4


def test_measured_times_outside_the_steps_are_named(tmp_path):
    # times written in ms against steps in s: every row empty, and before this no word of it
    mesh = grid_mesh((8, 8))
    x, y = mesh.points[:, 0], mesh.points[:, 1]
    listing = write_listing(str(tmp_path), ((t, f"s_{k}.vtu", mesh, None, {"f": _field(x, y, t)})
                                            for k, t in enumerate((0.0, 0.1, 0.2))))
    measured = tuple((0.5, 0.5, 0.0, 0.5, t, 0.01) for t in (100.0, 200.0))
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        result = measure(listing, options=MeasureOptions(field="f", analyses=("conservation",), measured=measured))
    texts = [str(w.message) for w in caught]
    assert any("2 of 2 measured value(s) with times lie outside the steps' times (0 to 0.2" in t for t in texts), texts
    assert result.validation["simulated"].isna().all()
    assert any("outside the steps' times" in f.text for f in result.findings)


def _plane_series(folder, plane):
    # a 2D case written in the x-z (or y-z) plane, as solvers with gravity along z write it; the field
    # 0.5 + 0.3 a + 0.4 b in the plane's own axes (a, b) [analytic]
    mesh = grid_mesh((10, 10), bounds=((0.0, 1.0), (-0.5, 0.5)))
    folder.mkdir()
    a_axis, b_axis = {"xz": (0, 2), "yz": (1, 2), "xy": (0, 1)}[plane]
    for k in range(2):
        m = to_meshio(mesh, point_data={"f": 0.5 + 0.3 * mesh.points[:, 0] + 0.4 * mesh.points[:, 1]})
        points = np.zeros((len(m.points), 3))
        points[:, a_axis], points[:, b_axis] = m.points[:, 0], m.points[:, 1]
        m.points = points
        m.write(folder / f"p_{k}.vtu")
    return folder


def test_a_file_without_z_is_refused_on_a_mesh_in_the_xz_plane(tmp_path):
    # audit 12: the probes' two columns were read as x and y, the y dropped as the plane's normal and
    # every probe put on z = 0: 0.575 read for the 0.695 at (x, z) = (0.25, 0.3), with exit 0
    from phasegauge.errors import OptionError

    folder = _plane_series(tmp_path / "xz", "xz")
    two = MeasureOptions(field="f", analyses=("conservation",), probes=(("a", 0.25, 0.3),))
    with pytest.raises(OptionError, match="give no z, but the mesh lies in the x-z plane") as err:
        measure(folder, options=two)
    assert "x, y and z columns" in err.value.fix
    three = MeasureOptions(field="f", analyses=("conservation",), probes=(("a", 0.25, 0.0, 0.3),),
                           lines=(("l", 0.0, 0.0, 0.3, 1.0, 0.0, 0.3, 5),))
    result = measure(folder, options=three)
    assert result.probes["value"].to_numpy() == pytest.approx(0.5 + 0.3 * 0.25 + 0.4 * 0.3, abs=1e-12)
    assert result.lines["distance"].max() == pytest.approx(1.0)


def test_a_file_without_z_on_a_mesh_in_the_xy_plane_takes_z_0(tmp_path):
    folder = _plane_series(tmp_path / "xy", "xy")
    options = MeasureOptions(field="f", analyses=("conservation",), probes=(("a", 0.25, 0.3),),
                             lines=(("l", 0.0, 0.3, 1.0, 0.3, 5),))
    result = measure(folder, options=options)
    assert result.probes["value"].to_numpy() == pytest.approx(0.5 + 0.3 * 0.25 + 0.4 * 0.3, abs=1e-12)
    assert (result.probes["z"] == 0.0).all() and (result.lines["z"] == 0.0).all()
    assert result.lines["distance"].max() == pytest.approx(1.0)


def test_a_value_without_a_time_counts_once_in_the_overall_figures():
    # audit 12: one untimed value counted once per step (21 times, the initial state included) beside ten
    # timed values and made the overall figures its history: 0.32 within, RMS 0.133 where 10 of 11 agree
    from phasegauge.analysis.probes import validation_summary, validation_table

    times = np.linspace(0.0, 2.0, 21)
    timed = [(0.5, 0.5, 0.0, 0.5 - 0.005, t, 0.01) for t in times[1::2]]  # each 0.005 off: within
    untimed = [(0.2, 0.2, 0.0, 0.25, np.nan, 0.01)]  # a steady reading the run approaches
    simulated = np.empty((21, 11))
    simulated[:, :10] = 0.5
    simulated[:, 10] = 0.25 * times / 2.0  # from 0 at t = 0 to 0.25 at the end
    table = validation_table(timed + untimed, times, simulated)
    assert table["every_step"].sum() == 21 and (~table["every_step"]).sum() == 10
    overall = validation_summary(table).iloc[-1]
    assert overall["scope"] == "overall" and overall["points"] == 11
    assert overall["within_uncertainty"] == pytest.approx(1.0)  # the untimed value at the last step: exact
    assert overall["rms_error"] == pytest.approx(np.sqrt(10 * 0.005 ** 2 / 11))


def test_an_uncertainty_of_zero_allows_round_off():
    # audit 12: equal values 1e-16 apart with uncertainty 0 read "outside"
    from phasegauge.analysis.probes import validation_table

    table = validation_table([(0.0, 0.0, 0.0, 0.1 + 0.2, 0.0, 0.0), (0.0, 0.0, 0.0, 0.31, 0.0, 0.0)],
                             np.array([0.0]), np.array([[0.3, 0.3]]))
    assert table["within_uncertainty"].tolist() == [True, False]


def test_a_probe_in_a_cell_without_a_value_reads_empty(tmp_path):
    # audit 12: a probe inside a cell whose value is NaN read a value rebuilt from the neighbours (0.325),
    # where the same data on points gives NaN
    from phasegauge.errors import MeshWarning

    mesh = grid_mesh((8, 8))
    centre = mesh.cell_centroids
    for k in range(2):
        c = _field(centre[:, 0], centre[:, 1], 0.0)
        hole = int(np.argmin(np.hypot(centre[:, 0] - 0.5625, centre[:, 1] - 0.5625)))
        c[hole] = np.nan
        to_meshio(mesh, cell_data={"f": c}).write(tmp_path / f"n_{k}.vtu")
    options = MeasureOptions(field="f", analyses=("conservation",),
                             probes=(("in_hole", 0.5625, 0.5625), ("elsewhere", 0.2, 0.2)))
    with pytest.warns(MeshWarning, match="points in cells with no finite value.*in_hole"):
        result = measure(tmp_path, options=options)
    by_name = result.probes.groupby("probe")["value"]
    assert by_name.apply(lambda v: v.isna().all())["in_hole"]
    assert np.isfinite(result.probes.loc[result.probes["probe"] == "elsewhere", "value"]).all()


def test_the_python_sampler_takes_the_same_rule_for_points_without_z(tmp_path):
    # review 51: sample_points refused read_probe_file's rows (z NaN) on an x-y mesh, and two-column
    # points on a mesh in the x-z plane still sat on z = 0 (0.15 for 0.39)
    from phasegauge.analysis.probes import sample_points
    from phasegauge.errors import OptionError
    from phasegauge.io import Series

    for plane, refused in (("xy", False), ("xz", True)):
        step = Series(_plane_series(tmp_path / plane, plane)).read(0)
        values = np.asarray(step.fields.point_data["f"])
        for points in ([[0.25, 0.3]], [[0.25, 0.3, np.nan]]):
            if refused:
                with pytest.raises(OptionError, match="give no z, but the mesh lies in the x-z plane"):
                    sample_points(step.mesh, values, points)
            else:  # the field in the plane's axes (x, y) [analytic]
                assert sample_points(step.mesh, values, points)[0] == pytest.approx(0.5 + 0.3 * 0.25 + 0.4 * 0.3)
    step = Series(tmp_path / "xz").read(0)
    got = sample_points(step.mesh, np.asarray(step.fields.point_data["f"]), [[0.25, 0.0, 0.3]])
    assert got[0] == pytest.approx(0.5 + 0.3 * 0.25 + 0.4 * 0.3)


def test_a_measured_time_at_a_run_end_accumulated_in_floating_point_is_inside_the_run():
    # steps at 0, 0.1, 0.2 and 0.2999999 (a time accumulated by the solver) and a value measured at 0.3:
    # the run covers it within 1e-6 of its output interval, as the convergence pairing and the reference
    # checks take it (span_reach); the simulated value is the run's last (linear interpolation clamps)
    from phasegauge.analysis._validation import validation_table

    times = np.array([0.0, 0.1, 0.2, 0.2999999])
    simulated = np.array([[1.0], [2.0], [3.0], [4.0]])
    table = validation_table([(0.0, 0.0, 0.0, 4.0, 0.3, 0.1)], times, simulated)
    row = table[table["time"] == 0.3].iloc[0]
    assert row["simulated"] == pytest.approx(4.0, abs=1e-5)
    beyond = validation_table([(0.0, 0.0, 0.0, 4.0, 0.31, 0.1)], times, simulated)
    assert np.isnan(beyond[beyond["time"] == 0.31].iloc[0]["simulated"])
