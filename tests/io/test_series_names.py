"""Step order and series from file and folder names as solvers write them: time folders named by
their time (``0.05``, ``1e-05``), no time stored in the files, boundary patches beside the volume.

Outside references: Python's own ``float()`` reading the names (the order of their values), the
disc droplet's centre as written (analytic), the files' sizes as the operating system gives them,
``glob.escape`` and ``glob`` themselves (the suggested fixes are followed), and the times VTK's own
writer (pyvista) stores in each file.
"""

import os

import meshio
import numpy as np
import pytest
import pyvista

import phasegauge
from phasegauge.errors import SeriesError, SeriesWarning
from phasegauge.io import Series, natural_key

N = 30  # cells a side of the unit square


def _square(n=N):
    x = np.linspace(0.0, 1.0, n + 1)
    X, Y = np.meshgrid(x, x, indexing="ij")
    points = np.column_stack([X.ravel(), Y.ravel(), np.zeros(X.size)])
    i, j = np.meshgrid(np.arange(n), np.arange(n), indexing="ij")
    a = (i * (n + 1) + j).ravel()
    quads = np.column_stack([a, a + n + 1, a + n + 2, a + 1])
    return points, quads


def _write_disc(path, centre_x, n=N):
    """A disc of radius 0.15 at (centre_x, 0.5) as a volume fraction on the cells (no time stored)."""
    points, quads = _square(n)
    centres = points[quads].mean(axis=1)
    alpha = (np.hypot(centres[:, 0] - centre_x, centres[:, 1] - 0.5) < 0.15).astype(float)
    os.makedirs(os.path.dirname(path), exist_ok=True)
    meshio.write(path, meshio.Mesh(points, [("quad", quads)], cell_data={"alpha": [alpha]}))


def _write_patch(path):
    """A boundary patch: the bottom edge as line cells, with the field on them."""
    x = np.linspace(0.0, 1.0, N + 1)
    points = np.column_stack([x, np.zeros_like(x), np.zeros_like(x)])
    lines = np.column_stack([np.arange(N), np.arange(1, N + 1)])
    meshio.write(path, meshio.Mesh(points, [("line", lines)], cell_data={"alpha": [np.zeros(N)]}))


TIMES = ["0", "0.05", "0.1", "0.15", "0.2"]  # in text order: 0, 0.05, 0.1, 0.15, 0.2 by luck; by digits 0.1 < 0.05


def test_decimal_and_exponent_names_order_as_their_values():
    names = ["0.2", "1e-05", "0", "0.0001", "2e-05", "0.05", "0.1", "0.15", "10"]
    # outside: Python's float() of each name orders them by value
    assert sorted(names, key=natural_key) == sorted(names, key=float)
    paths = [f"case/{t}/internal.vtu" for t in names]
    assert sorted(paths, key=natural_key) == [f"case/{t}/internal.vtu" for t in sorted(names, key=float)]
    files = [f"alpha_{t}.vtu" for t in ("0.2", "0.05", "0.15", "0.1")]
    assert sorted(files, key=natural_key) == ["alpha_0.05.vtu", "alpha_0.1.vtu", "alpha_0.15.vtu", "alpha_0.2.vtu"]
    # plain step numbers keep their order, and a file's suffix is no decimal part
    assert sorted(["s_10.vtu", "s_9.vtu", "s_100.vtu"], key=natural_key) == ["s_9.vtu", "s_10.vtu", "s_100.vtu"]


def test_time_folders_are_measured_in_time_order(tmp_path):
    # the disc moves +0.1 in x a step: written at 0.2, 0.3, ... in the folders' time order
    for k, t in enumerate(TIMES):
        _write_disc(str(tmp_path / "case" / t / "internal.vtu"), 0.2 + 0.1 * k)
    series = Series(str(tmp_path / "case"))
    assert [os.path.basename(os.path.dirname(s.path)) for s in series.steps] == TIMES
    result = phasegauge.measure(str(tmp_path / "case"), "alpha", analyses=("droplets",))
    x = result.droplets.sort_values("step")["centroid_x"].to_numpy()
    # analytic: the centres written, to within a cell (the disc is cut along cell edges)
    assert np.allclose(x, 0.2 + 0.1 * np.arange(len(TIMES)), atol=1.0 / N)


def test_time_folders_give_the_times_when_the_files_store_none(tmp_path):
    # the folders' names are the times (Python's float() of each name); the disc moves +0.1 a step at
    # uneven output times, so its speed is per time, not per step
    times = ["0", "0.05", "0.1", "0.125", "0.2"]
    for k, t in enumerate(times):
        _write_disc(str(tmp_path / "case" / t / "internal.vtu"), 0.2 + 0.1 * k)
    with _no_series_warning():
        series = Series(str(tmp_path / "case"))
    assert series.times.tolist() == [float(t) for t in times] and series.time_origins == ["folder_name"]
    out = tmp_path / "out"
    result = phasegauge.measure(str(tmp_path / "case"), "alpha", analyses=("droplets",), out=str(out))
    assert result.steps["time"].tolist() == [float(t) for t in times]
    import json

    assert json.loads((out / "manifest.json").read_text())["series"]["time_origin"] == "folder_name"
    # a missing output among time folders is named from their times
    for t in ("0", "0.1", "0.2", "0.4", "0.5"):
        _write_disc(str(tmp_path / "gap" / t / "internal.vtu"), 0.5)
    with pytest.warns(SeriesWarning, match=r"step times jump \(0\.2 to 0\.4\)"):
        Series(str(tmp_path / "gap"))
    # folders of whole numbers may count outputs: the step index stays; so does a time a file stores
    for t in ("1", "2", "4"):
        _write_disc(str(tmp_path / "counted" / t / "internal.vtu"), 0.5)
    assert Series(str(tmp_path / "counted")).time_origins == ["index"]
    for k, t in enumerate(("0.1", "0.2", "0.3")):
        path = tmp_path / "stored" / t / "internal.vtu"
        _write_disc(str(path), 0.5)
        grid = pyvista.read(path)  # VTK's own writer stores the time, as solvers do
        grid.field_data["TimeValue"] = np.array([0.5 * k])
        grid.save(path)
    stored = Series(str(tmp_path / "stored"))
    assert stored.times.tolist() == [0.0, 0.5, 1.0] and stored.time_origins == ["file"]


def test_decimal_file_names_show_only_their_real_gap(tmp_path):
    for t in ("0.05", "0.1", "0.15", "0.2"):
        _write_disc(str(tmp_path / "even" / f"alpha_{t}.vtu"), 0.5)
    with _no_series_warning():
        Series(str(tmp_path / "even"))
    for t in ("0.05", "0.1", "0.2", "0.25"):  # 0.15 missing
        _write_disc(str(tmp_path / "gap" / f"alpha_{t}.vtu"), 0.5)
    with pytest.warns(SeriesWarning, match=r"file numbers jump \(0\.1 to 0\.2\)"):
        Series(str(tmp_path / "gap"))


class _no_series_warning:
    def __enter__(self):
        import warnings

        self._catch = warnings.catch_warnings(record=True)
        self.caught = self._catch.__enter__()
        warnings.simplefilter("always")
        return self

    def __exit__(self, *exc):
        self._catch.__exit__(*exc)
        assert not [w for w in self.caught if issubclass(w.category, SeriesWarning)]


@pytest.mark.parametrize("how", ["folder", "glob"])
def test_patch_files_beside_the_volume_are_refused_with_a_glob_that_works(tmp_path, how):
    for k in range(3):
        _write_disc(str(tmp_path / f"out_{k:04d}.vtu"), 0.5)
        _write_patch(str(tmp_path / f"wall_{k:04d}.vtu"))
        _write_patch(str(tmp_path / f"frontAndBack_{k:04d}.vtu"))
    # outside: the operating system's sizes say the volume files are the largest
    assert os.path.getsize(tmp_path / "out_0000.vtu") > os.path.getsize(tmp_path / "wall_0000.vtu")
    path = str(tmp_path) if how == "folder" else str(tmp_path / "*.vtu")
    with pytest.raises(SeriesError, match="3 series named differently") as caught:
        Series(path)
    suggested = os.path.join(str(tmp_path), "out_*.vtu")
    assert f"'{suggested}'" in caught.value.fix
    series = Series(suggested)  # the fix as given works: the three volume steps
    assert [os.path.basename(s.path) for s in series.steps] == [f"out_{k:04d}.vtu" for k in range(3)]


def test_one_odd_file_beside_the_steps_is_no_second_series(tmp_path):
    for k in range(3):
        _write_disc(str(tmp_path / f"out_{k:04d}.vtu"), 0.5)
    _write_disc(str(tmp_path / "initial.vtu"), 0.5)
    assert len(Series(str(tmp_path)).steps) == 4  # as before: one family of two or more files only


def test_sort_by_time_without_stored_times_warns_and_keeps_the_name_order(tmp_path):
    for t in ("0.2", "0.05", "0.1"):
        _write_disc(str(tmp_path / f"alpha_{t}.vtu"), 0.5)
    with pytest.warns(SeriesWarning, match="no step stores its time"):
        series = Series(str(tmp_path), sort_by_time=True)
    assert [os.path.basename(s.path) for s in series.steps] == ["alpha_0.05.vtu", "alpha_0.1.vtu", "alpha_0.2.vtu"]
    assert {s.time_origin for s in series.steps} == {"index"}


def test_the_suggested_glob_leaves_out_series_whose_names_contain_it(tmp_path):
    # 'case_*.vtu' would match the patch files 'case_wall_*.vtu' too: the fix must not
    for k in range(3):
        _write_disc(str(tmp_path / f"case_{k:04d}.vtu"), 0.5)
        _write_patch(str(tmp_path / f"case_wall_{k:04d}.vtu"))
    with pytest.raises(SeriesError, match="2 series named differently") as caught:
        Series(str(tmp_path))
    suggested = os.path.join(str(tmp_path), "case_[0-9]*.vtu")
    assert f"'{suggested}'" in caught.value.fix
    assert [os.path.basename(s.path) for s in Series(suggested).steps] == [f"case_{k:04d}.vtu" for k in range(3)]


def test_the_suggested_glob_escapes_the_names(tmp_path):
    for k in range(2):
        _write_disc(str(tmp_path / f"out[a]_{k}.vtu"), 0.5)
        _write_patch(str(tmp_path / f"wall_{k}.vtu"))
    with pytest.raises(SeriesError) as caught:
        Series(str(tmp_path))
    suggested = os.path.join(str(tmp_path), "out[[]a]_*.vtu")  # glob.escape's own form of '['
    assert f"'{suggested}'" in caught.value.fix
    assert len(Series(suggested).steps) == 2


def test_dotted_frame_numbers_read_as_decimals_are_warned_of(tmp_path):
    # frames 8 to 11 after a dot: as decimals 1.10 and 1.11 come before 1.8 (no steady interval)
    for frame in (8, 9, 10, 11):
        _write_disc(str(tmp_path / f"data_1.{frame}.vtu"), 0.5)
    with pytest.warns(SeriesWarning, match=r"taken as decimals: data_1\.10\.vtu is step 0 \(as frame numbers "
                                           r"data_1\.8\.vtu would be\)"):
        Series(str(tmp_path))


def test_time_folders_at_a_steady_interval_raise_no_doubt(tmp_path):
    for t in TIMES:
        _write_disc(str(tmp_path / t / "internal.vtu"), 0.5)
    with _no_series_warning():
        Series(str(tmp_path))


def test_a_folder_name_with_glob_characters_is_escaped_in_the_fix(tmp_path):
    folder = tmp_path / "run[1]"
    for k in range(2):
        _write_disc(str(folder / f"out_{k}.vtu"), 0.5)
        _write_patch(str(folder / f"wall_{k}.vtu"))
    with pytest.raises(SeriesError) as caught:
        Series(str(folder))
    suggested = caught.value.fix.split("'")[1]
    assert len(Series(suggested).steps) == 2  # the fix as given works


@pytest.mark.parametrize("layout", ["exponents", "uneven time folders"])
def test_names_that_are_numbers_raise_no_frame_doubt(tmp_path, layout):
    if layout == "exponents":  # no decimal point: nothing to read as frame numbers
        for t in ("1e5", "2e5", "3e4"):
            _write_disc(str(tmp_path / f"s_{t}.vtu"), 0.5)
    else:  # adaptive output times, each folder named by its time alone
        for t in ("0", "0.05", "0.1", "0.125", "0.2"):
            _write_disc(str(tmp_path / t / "internal.vtu"), 0.5)
    with _no_series_warning():
        Series(str(tmp_path))


def test_an_unreadable_step_is_no_missing_step(tmp_path):
    # times stored in the files at 0.1 steps; the third file is cut short: its time is unknown, and
    # the jump from 0.1 to 0.3 around it is that step, not a missing one
    for k in range(5):
        _write_disc(str(tmp_path / f"s_{k}.vtu"), 0.5)
        grid = pyvista.read(tmp_path / f"s_{k}.vtu")  # VTK's own writer stores the time, as solvers do
        grid.field_data["TimeValue"] = np.array([0.1 * k])
        grid.save(tmp_path / f"s_{k}.vtu")
    data = (tmp_path / "s_2.vtu").read_bytes()
    (tmp_path / "s_2.vtu").write_bytes(data[: len(data) // 2])
    with _no_series_warning():
        series = Series(str(tmp_path))
    assert [s.time_origin for s in series.steps] == ["file", "file", "unknown", "file", "file"]


def test_a_step_file_that_is_no_xml_is_unreadable_not_timeless(tmp_path):
    # regression: a damaged file whose head holds no VTK XML read as a step that stores no time, and
    # the whole series was refused as mixing stored times and step numbers
    for k in range(4):
        _write_disc(str(tmp_path / f"s_{k}.vtu"), 0.5)
        grid = pyvista.read(tmp_path / f"s_{k}.vtu")
        grid.field_data["TimeValue"] = np.array([0.1 * k])
        grid.save(tmp_path / f"s_{k}.vtu")
    (tmp_path / "s_2.vtu").write_bytes(b"<VTKFile broken")
    with _no_series_warning():
        series = Series(str(tmp_path))
    assert [s.time_origin for s in series.steps] == ["file", "file", "unknown", "file"]


def test_an_unreadable_step_does_not_hide_missing_ones(tmp_path):
    # times 0, 0.1, (unreadable), 0.5, 0.6, 0.7: one file cut short cannot fill three intervals, so
    # steps are missing between 0.1 and 0.5 (the most common interval 0.1, from the times VTK stored)
    for k, t in enumerate((0.0, 0.1, 0.2, 0.5, 0.6, 0.7)):
        _write_disc(str(tmp_path / f"s_{k}.vtu"), 0.5)
        grid = pyvista.read(tmp_path / f"s_{k}.vtu")
        grid.field_data["TimeValue"] = np.array([t])
        grid.save(tmp_path / f"s_{k}.vtu")
    data = (tmp_path / "s_2.vtu").read_bytes()
    (tmp_path / "s_2.vtu").write_bytes(data[: len(data) // 2])
    with pytest.warns(SeriesWarning, match=r"step times jump \(0\.1 to 0\.5\)"):
        Series(str(tmp_path))
    from phasegauge.io.describe import describe_series, format_description

    text = format_description(describe_series(str(tmp_path)))
    assert "none where the file could not be read" in text
