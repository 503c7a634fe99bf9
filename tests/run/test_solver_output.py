"""Measure runs on a volume-of-fluid solver's converter output: the cell copy, the step order, the listing.

The tank fixture is our own generator (phasegauge.samples._vof_tank); every figure checked here is
recomputed from the files with meshio and numpy (sums over cell volumes), scipy.ndimage (droplet
labels) or pyvista (stored times), never with phasegauge itself.
"""

import json
import os

import meshio
import numpy as np
import pytest
from click.testing import CliRunner
from scipy import ndimage

import phasegauge as pg
from phasegauge.cli import main
from phasegauge.errors import FieldNotFoundError, SeriesError
from phasegauge.samples._vof_tank import TANK, write_vof_tank

STEPS = TANK.steps


@pytest.fixture(scope="module")
def tank(tmp_path_factory):
    folder = tmp_path_factory.mktemp("tank")
    write_vof_tank(folder)
    return folder


def _reference(tank, n):
    """Cell volumes, both copies of alpha and the corner means of the point copy, by meshio + numpy."""
    raw = meshio.read(tank / f"tank_{n}" / "internal.vtu")
    hexes = raw.cells[0].data
    corners = raw.points[hexes]  # (n_cells, 8, 3): axis-aligned boxes
    volume = np.prod(corners.max(axis=1) - corners.min(axis=1), axis=1)
    alpha_point = raw.point_data["alpha"]
    return volume, raw.cell_data["alpha"][0], alpha_point, alpha_point[hexes].mean(axis=1)


def _cells_grid(values):
    nx, ny = TANK.cells
    return values.reshape(ny, nx)  # cells are written x fastest


def test_integrals_and_droplets_use_the_solver_cell_values(tank):
    result = pg.measure(tank, "alpha")
    steps = result.steps
    assert steps["time"].tolist() == pytest.approx([n * TANK.dt for n in STEPS])
    for k, n in enumerate(STEPS):
        volume, alpha_cell, _, corner_mean = _reference(tank, n)
        truth = float(np.sum(alpha_cell * volume))  # numpy: sum(alpha_cell * cell volume)
        # one cell thick: measured per unit depth (quasi-2D), times the depth is the 3D volume
        assert steps["phase_volume"][k] * steps["depth"][k] == pytest.approx(truth, rel=1e-12, abs=0)
        assert steps["c_min"][k] == alpha_cell.min() and steps["c_max"][k] == alpha_cell.max()
        # droplets: scipy's face-connected labelling of the cells above the level
        _, count = ndimage.label(_cells_grid(alpha_cell) > 0.5)
        assert steps["droplet_count"][k] == count
    # the point copy, averaged back to cells, gives another volume: a silent error of 0.1 % or more
    _, alpha_cell, _, corner_mean = _reference(tank, 0)
    volume = _reference(tank, 0)[0]
    assert abs(np.sum(corner_mean * volume) / np.sum(alpha_cell * volume) - 1) > 1e-3


def test_the_point_copy_is_read_only_when_asked(tank):
    result = pg.measure(tank, "alpha", field_location="point", analyses=("conservation", "droplets"))
    for k, n in enumerate(STEPS):
        volume, alpha_cell, _, corner_mean = _reference(tank, n)
        measured = result.steps["phase_volume"][k] * result.steps["depth"][k]  # per unit depth x depth
        assert measured == pytest.approx(np.sum(corner_mean * volume), rel=1e-12)
        assert measured != pytest.approx(np.sum(alpha_cell * volume), rel=1e-3)
    # the droplet counts of the point copy are wrong at some steps (scipy's labels of the cell values)
    truth = [ndimage.label(_cells_grid(_reference(tank, n)[1]) > 0.5)[1] for n in STEPS]
    assert result.steps["droplet_count"].tolist() != truth


def test_the_default_equals_a_file_without_the_point_copy(tank, tmp_path):
    write_vof_tank(tmp_path, point_copy=False)
    a = pg.measure(tank, "alpha", velocity="U").steps
    b = pg.measure(tmp_path, "alpha", velocity="U").steps
    assert a.equals(b)


def test_report_and_manifest_say_which_copy_was_read(tank, tmp_path):
    out = tmp_path / "out"
    pg.measure(tank, "alpha", out=out, analyses=("conservation",))
    manifest = json.loads((out / "manifest.json").read_text())
    assert "cell data, the solver's own values" in manifest["series"]["field_read"]
    assert manifest["series"]["blocks_left_out"][:2] == ["walls", "top"]
    assert manifest["options"]["field_location"] == "auto"
    page = (out / "report.html").read_text()
    assert "field read" in page and "point copy exists too" in page
    assert "blocks left out" in page and "walls, top" in page


def test_cli_field_location_and_a_field_missing_there(tank, tmp_path):
    res = CliRunner().invoke(main, ["measure", str(tank), "-f", "alpha", "--field-location", "point",
                                    "--analyses", "conservation", "-o", str(tmp_path / "o"), "-q"])
    assert res.exit_code == 0, res.output
    manifest = json.loads((tmp_path / "o" / "manifest.json").read_text())
    assert manifest["options"]["field_location"] == "point"
    assert "point data, as chosen" in manifest["series"]["field_read"]
    m = pg.meshgen.grid_mesh((3, 3), kind="quad")
    pg.meshgen.to_meshio(m, point_data={"c": np.zeros(m.n_points)}).write(tmp_path / "p.vtu")
    with pytest.raises(FieldNotFoundError, match="no cell data here"):
        pg.measure(tmp_path / "p.vtu", "c", field_location="cell")


def test_measure_refuses_scrambled_times_with_the_full_path(tmp_path):
    write_vof_tank(tmp_path, times=[0.0, 0.3, 0.2, 0.4, 0.5])
    pattern = str(tmp_path / "tank_*" / "internal.vtu")
    with pytest.raises(SeriesError, match="times do not increase"):
        pg.measure(pattern, "alpha")
    res = CliRunner().invoke(main, ["measure", pattern, "-f", "alpha", "-o", str(tmp_path / "o")])
    lines = [ln for ln in res.stderr.splitlines() if ln.strip()]
    assert res.exit_code == 2 and len(lines) == 1
    assert os.path.join(str(tmp_path), "tank_114", "internal.vtu") + ", step 2" in lines[0]
    assert "--sort-by-time" in lines[0]
    assert not os.path.exists(tmp_path / "o")
    # inspect says the same, as a warning, and describes the series
    res = CliRunner().invoke(main, ["inspect", pattern])
    assert res.exit_code == 0 and "times do not increase" in res.stderr and "measure refuses" in res.stderr


def test_sort_by_time_from_the_cli_and_a_recipe(tmp_path):
    write_vof_tank(tmp_path / "case", times=[0.0, 0.3, 0.2, 0.4, 0.5])
    res = CliRunner().invoke(main, ["measure", str(tmp_path / "case"), "-f", "alpha", "--sort-by-time",
                                    "--analyses", "conservation", "-o", str(tmp_path / "o"), "-q"])
    assert res.exit_code == 0, res.output
    assert "ordered by the times in their files" in res.stderr
    import pandas as pd

    steps = pd.read_csv(tmp_path / "o" / "steps.csv")
    assert steps["time"].tolist() == [0.0, 0.2, 0.3, 0.4, 0.5]
    # step 1 is tank_114 (time 0.2): its phase volume is numpy's sum over that file's cells
    raw = meshio.read(tmp_path / "case" / "tank_114" / "internal.vtu")
    corners = raw.points[raw.cells[0].data]
    volume = np.prod(corners.max(axis=1) - corners.min(axis=1), axis=1)
    assert steps["phase_volume"][1] * steps["depth"][1] == pytest.approx(np.sum(raw.cell_data["alpha"][0] * volume),
                                                                           rel=1e-9)
    recipe = tmp_path / "r.toml"
    recipe.write_text('[input]\npath = "case"\nfield = "alpha"\nfield_location = "point"\nsort_by_time = true\n'
                      '[run]\nanalyses = ["conservation"]\n[output]\nfolder = "out"\n')
    res = CliRunner().invoke(main, ["run", str(recipe), "-q"])
    assert res.exit_code == 0, res.output
    manifest = json.loads((tmp_path / "out" / "manifest.json").read_text())
    assert manifest["options"]["sort_by_time"] is True and manifest["options"]["field_location"] == "point"


def test_compare_reads_the_copy_and_order_each_run_asks_for(tank, tmp_path):
    from phasegauge.run.compare import RunSpec, compare_runs

    write_vof_tank(tmp_path / "scrambled", times=[0.0, 0.3, 0.2, 0.4, 0.5])
    first = RunSpec(str(tank), "alpha", label="cells")
    second = RunSpec(str(tmp_path / "scrambled"), "alpha", field_location="point", sort_by_time=True, label="points")
    with pytest.warns(pg.errors.SeriesWarning, match="ordered by the times in their files"):
        result = compare_runs(first, second, time_tolerance=1e-9)
    # each run's phase volume is numpy's sum over its own copy (cells; corner means of the points)
    volume, alpha_cell, _, _ = _reference(tank, 0)
    first_steps = result.first.steps  # one cell thick: per unit depth, times the depth
    assert first_steps["phase_volume"][0] * first_steps["depth"][0] == pytest.approx(np.sum(alpha_cell * volume),
                                                                                      rel=1e-12)
    volume, _, _, corner_mean = _reference(tmp_path / "scrambled", 0)
    second_steps = result.second.steps
    assert second_steps["phase_volume"][0] * second_steps["depth"][0] == pytest.approx(np.sum(corner_mean * volume),
                                                                                        rel=1e-12)
    assert result.second.steps["time"].tolist() == [0.0, 0.2, 0.3, 0.4, 0.5]
    assert len(result.pairs) == 1  # only time 0 is shared by both runs


def _vtu_with_trailing_time(path, mesh, time):
    """A VTU file whose TimeValue comes after its piece, where only a full read finds it in a large file."""
    import warnings

    with warnings.catch_warnings():
        warnings.simplefilter("ignore")  # meshio: ASCII VTU is meant for debugging
        pg.meshgen.to_meshio(mesh, None, {"c": np.zeros(mesh.n_cells)}).write(path, binary=False)
    text = open(path).read().replace(
        "</UnstructuredGrid>", '<FieldData><DataArray type="Float64" Name="TimeValue" NumberOfTuples="1" '
        f'format="ascii">{time}</DataArray></FieldData></UnstructuredGrid>')
    open(path, "w").write(text)


def test_times_found_only_by_reading_the_files_are_checked_too(tmp_path):
    # regression: discovery saw no time (the head of a large file holds none), so the step index was
    # used, the files' own times replaced it while the steps were read, and measure wrote drift and
    # tracking over steps out of order without a word
    from phasegauge.io import Series
    from phasegauge.meshgen import grid_mesh

    big = grid_mesh((80, 80), kind="quad")
    for k, t in enumerate([0.0, 0.2, 0.1]):
        _vtu_with_trailing_time(tmp_path / f"s_{k}.vtu", big, t)
    assert os.path.getsize(tmp_path / "s_0.vtu") > 1 << 16
    assert Series(tmp_path).time_origins == ["index"]  # nothing seen before reading
    assert float(meshio.read(tmp_path / "s_2.vtu").field_data["TimeValue"][0]) == 0.1  # meshio finds it
    with pytest.raises(SeriesError, match="times do not increase: step 2 has time 0.1 after 0.2") as err:
        pg.measure(tmp_path, "c", analyses=("conservation",))
    assert str(tmp_path / "s_2.vtu") + ", step 2" in err.value.where
    # in a small file the time after the piece lies in the head and is seen at once
    small = grid_mesh((3, 3), kind="quad")
    for k, t in enumerate([0.0, 0.2, 0.1]):
        _vtu_with_trailing_time(tmp_path / f"small_{k}.vtu", small, t)
    series = Series(str(tmp_path / "small_*.vtu"))
    assert series.times.tolist() == [0.0, 0.2, 0.1] and series.time_problem() is not None


def test_time_folders_give_way_to_times_the_files_store_beyond_their_heads(tmp_path):
    # review 43: time folders whose large files store their times after the piece (only a full read finds
    # them): the folders' names were the times at discovery (a false gap warning 0.1 to 0.2 from them),
    # the files' times once read, and compare's manifest named both origins
    import json
    import warnings

    from phasegauge.io import Series
    from phasegauge.meshgen import grid_mesh
    from phasegauge.run.compare import RunSpec, compare_runs

    big = grid_mesh((80, 80), kind="quad")
    for k, name in enumerate(("0", "0.05", "0.1", "0.2", "0.25")):  # regular stored times, a gap in the names
        (tmp_path / "late" / name).mkdir(parents=True)
        _vtu_with_trailing_time(tmp_path / "late" / name / "internal.vtu", big, 0.05 * k)
    with warnings.catch_warnings():
        warnings.simplefilter("error")  # no gap warning
        series = Series(str(tmp_path / "late"))
    assert series.time_origins == ["index"]  # the first file, read whole, stores its time: no folder times
    result = pg.measure(str(tmp_path / "late"), "c", analyses=("conservation",))
    assert result.steps["time"].tolist() == pytest.approx([0.0, 0.05, 0.1, 0.15, 0.2])
    out = tmp_path / "c"
    compare_runs(RunSpec(str(tmp_path / "late"), "c"), RunSpec(str(tmp_path / "late"), "c"), out=str(out))
    assert json.loads((out / "manifest.json").read_text())["time_origin"] == {"first": "file", "second": "file"}
    # only the last file stores a time: the others take their folders' names, refused once it is read
    for k, name in enumerate(("0", "0.05", "0.1", "0.15")):
        (tmp_path / "mixed" / name).mkdir(parents=True)
        pg.meshgen.to_meshio(big, None, {"c": np.zeros(big.n_cells)}).write(tmp_path / "mixed" / name / "a.vtu")
    (tmp_path / "mixed" / "0.2").mkdir()
    _vtu_with_trailing_time(tmp_path / "mixed" / "0.2" / "a.vtu", big, 20.0)
    assert Series(str(tmp_path / "mixed")).time_origins == ["folder_name"]
    with pytest.raises(SeriesError, match=r"some steps store their times and others do not \(step 0 takes its "
                                          r"folder's name; step 4 stores 20\)"):
        pg.measure(str(tmp_path / "mixed"), "c", analyses=("conservation",))


def test_cli_compare_takes_the_field_location_and_the_order(tank, tmp_path):
    write_vof_tank(tmp_path / "scrambled", times=[0.0, 0.3, 0.2, 0.4, 0.5])
    res = CliRunner().invoke(main, ["compare", str(tank), str(tmp_path / "scrambled"), "--field-a", "alpha",
                                    "--field-b", "alpha", "--field-location", "point", "--sort-by-time",
                                    "--time-tolerance", "1e-9", "-o", str(tmp_path / "o"), "-q"])
    assert res.exit_code == 0, res.output + res.stderr
    assert (tmp_path / "o" / "report.html").exists()


def test_measure_says_what_it_read_in_info_lines(tank, tmp_path):
    res = CliRunner().invoke(main, ["measure", str(tank), "-f", "alpha", "--analyses", "conservation",
                                    "-o", str(tmp_path / "o")])
    assert res.exit_code == 0, res.output
    assert "read 'alpha': cell data, the solver's own values" in res.stdout
    assert "multiblock blocks left out: walls, top" in res.stdout


def test_resume_sees_a_rewritten_volume_block_behind_an_unchanged_vtm(tmp_path):
    # regression: the resume cache keyed a .vtm step by the .vtm file alone, which does not change when
    # the converter rewrites the step's internal mesh; reference: numpy's sums over the new files
    from phasegauge.samples._vof_tank import TankCase

    case, out = tmp_path / "case", tmp_path / "out"
    write_vof_tank(case)
    vtm = (case / "tank_12.vtm").read_text()
    pg.measure(case, "alpha", out=out, analyses=("conservation",), keep_cache=True)
    manifest = json.loads((out / "manifest.json").read_text())
    listed = [os.path.relpath(f["path"], case) for f in manifest["inputs"]]
    assert listed[:2] == ["tank_0.vtm", os.path.join("tank_0", "internal.vtu")]
    write_vof_tank(case, case=TankCase(fill=0.25))
    assert (case / "tank_12.vtm").read_text() == vtm
    # the resume sees the change and refuses to mix old and new steps (issue 21: series that change)
    with pytest.raises(SeriesError, match="changed since the run that is being resumed"):
        pg.measure(case, "alpha", out=out, analyses=("conservation",), resume=True)
    result = pg.measure(case, "alpha", out=out, analyses=("conservation",), overwrite=True)
    for k, n in enumerate(STEPS):
        volume, alpha_cell, _, _ = _reference(case, n)
        measured = result.steps["phase_volume"][k] * result.steps["depth"][k]  # per unit depth x depth
        assert measured == pytest.approx(np.sum(alpha_cell * volume), rel=1e-12)


@pytest.mark.filterwarnings("ignore:.*ordered by the times in their files")
def test_local_workers_follow_the_time_order(tmp_path):
    write_vof_tank(tmp_path, times=[0.0, 0.3, 0.2, 0.4, 0.5])
    serial = pg.measure(tmp_path, "alpha", sort_by_time=True, analyses=("conservation", "droplets"))
    forked = pg.measure(tmp_path, "alpha", sort_by_time=True, analyses=("conservation", "droplets"), workers=2)
    assert serial.steps.equals(forked.steps)
    assert serial.steps["time"].tolist() == [0.0, 0.2, 0.3, 0.4, 0.5]
