"""Reading a volume-of-fluid solver's converter layout: .vtm multiblock files, step folders, natural order.

The fixture is our own generator (phasegauge.samples._vof_tank): a sloshing tank written per
step as tank_<n>.vtm beside tank_<n>/internal.vtu and tank_<n>/boundary/*.vtp, with the time only
in each file's field data. Outside references: meshio and pyvista (VTK's own reader) reading the
same files.
"""

import os

import meshio
import numpy as np
import pytest
import pyvista

from phasegauge.errors import (BlocksLeftOutNote, InputFileNotFound, SeriesError, SeriesWarning,
                               UnreadableFileError)
from phasegauge.io import MESH_SUFFIXES, Series, natural_key
from phasegauge.io.describe import describe_series, format_description
from phasegauge.samples._vof_tank import TANK, write_vof_tank

STEPS = TANK.steps  # 0, 12, 114, 132, 1000: sorting whole paths as text gives 0, 1000, 114, 12, 132


@pytest.fixture(scope="module")
def tank(tmp_path_factory):
    folder = tmp_path_factory.mktemp("tank")
    write_vof_tank(folder)
    return folder


def _vtk_time(path):
    """The stored time as VTK's own reader (pyvista) sees it."""
    return float(np.asarray(pyvista.read(path).field_data["TimeValue"]).ravel()[0])


def test_the_fixture_is_laid_out_as_the_converter_writes(tank):
    for n in STEPS:
        assert os.path.isfile(tank / f"tank_{n}.vtm")
        assert os.path.isfile(tank / f"tank_{n}" / "internal.vtu")
        assert sorted(os.listdir(tank / f"tank_{n}" / "boundary")) == ["top.vtp", "walls.vtp"]
    raw = meshio.read(tank / "tank_114" / "internal.vtu")  # meshio, the outside reader
    assert [b.type for b in raw.cells] == ["hexahedron"]
    assert np.unique(raw.points[:, 2]).size == 2  # one cell thick in z
    alpha_cell, alpha_point = raw.cell_data["alpha"][0], raw.point_data["alpha"]
    assert alpha_cell.size == len(raw.cells[0].data) and alpha_point.size == len(raw.points)
    assert float(raw.field_data["TimeValue"][0]) == pytest.approx(114 * TANK.dt)
    # the two copies under one name differ: the point copy is the mean of the cells around each point
    # (numpy over the connectivity meshio read)
    hexes = raw.cells[0].data
    counts = np.bincount(hexes.ravel(), minlength=len(raw.points))
    mean = np.bincount(hexes.ravel(), weights=np.repeat(alpha_cell, 8), minlength=len(raw.points)) / counts
    assert np.allclose(alpha_point, mean, rtol=0, atol=1e-15)
    assert np.ptp(alpha_cell) == 1.0 and 0 < np.count_nonzero((alpha_cell > 0) & (alpha_cell < 1))
    # the stream function's velocity is zero on the wall patches
    walls = pyvista.read(tank / "tank_114" / "boundary" / "walls.vtp")
    assert np.all(np.asarray(walls.cell_data["U"]) == 0)


def test_stream_function_velocity_is_divergence_free_and_zero_on_walls():
    # analytic: u = dpsi/dy, v = -dpsi/dx of psi = A sin^2(pi x/L) sin^2(pi y/H), checked by central differences
    from phasegauge.samples._vof_tank import tank_velocity

    rng = np.random.default_rng(1)
    xy = rng.uniform(0.05, 0.55, size=(50, 2))
    h = 1e-6
    ddx = (tank_velocity(xy + [h, 0], 0.1)[:, 0] - tank_velocity(xy - [h, 0], 0.1)[:, 0]) / (2 * h)
    ddy = (tank_velocity(xy + [0, h], 0.1)[:, 1] - tank_velocity(xy - [0, h], 0.1)[:, 1]) / (2 * h)
    assert np.max(np.abs(ddx + ddy)) < 1e-6
    wall = np.array([[0.0, 0.3], [TANK.length, 0.2], [0.4, 0.0], [0.7, TANK.height]])
    assert np.max(np.abs(tank_velocity(wall, 0.1))) < 1e-15


def test_natural_order_compares_every_path_component():
    paths = [f"VTK/run_{n}/internal.vtu" for n in (114, 0, 1000, 12, 132)]
    assert sorted(paths) != sorted(paths, key=natural_key)  # the whole-path text order scrambles them
    assert sorted(paths, key=natural_key) == [f"VTK/run_{n}/internal.vtu" for n in (0, 12, 114, 132, 1000)]


@pytest.mark.parametrize("form", ["folder of vtm", "glob of vtm", "glob of step folders", "folder of step folders"])
def test_the_layout_reads_in_step_order_with_the_file_times(tank, tmp_path, form):
    if form == "folder of vtm":
        path = tank
    elif form == "glob of vtm":
        path = str(tank / "tank_*.vtm")
    elif form == "glob of step folders":
        path = str(tank / "tank_*" / "internal.vtu")
    else:  # the step folders alone, without the .vtm files
        import shutil

        for n in STEPS:
            shutil.copytree(tank / f"tank_{n}", tmp_path / f"tank_{n}")
        path = tmp_path
    series = Series(path)
    assert len(series) == len(STEPS)
    # the times each file stores, read by VTK's own reader, in solver step order
    expected = [_vtk_time(tank / f"tank_{n}" / "internal.vtu") for n in STEPS]
    assert series.times.tolist() == pytest.approx(expected)
    assert series.time_origins == ["file"]
    assert series.time_problem() is None


def test_vtm_is_a_registered_format_and_reads_the_volume_block(tank):
    assert ".vtm" in MESH_SUFFIXES
    step = Series(tank / "tank_132.vtm").read(0)
    reference = pyvista.read(tank / "tank_132.vtm")  # VTK's own multiblock reader
    volume = reference[0]
    assert step.mesh.n_cells == volume.n_cells and step.mesh.n_points == volume.n_points
    assert np.array_equal(step.fields.cell_data["alpha"], np.asarray(volume.cell_data["alpha"]))
    assert np.array_equal(step.fields.point_data["alpha"], np.asarray(volume.point_data["alpha"]))
    assert step.time == pytest.approx(132 * TANK.dt)
    assert step.mesh.total_measure == pytest.approx(volume.volume, rel=1e-12)


@pytest.mark.filterwarnings("ignore::phasegauge.errors.MeshWarning")  # the two pieces share their points
def test_several_volume_blocks_are_joined(tank, tmp_path):
    # two volume pieces in one multiblock file: the joined mesh has both (reference: pyvista's cell counts)
    text = (tank / "tank_12.vtm").read_text().replace(
        '<DataSet index="0" name="internal" file="tank_12/internal.vtu"/>',
        f'<DataSet index="0" name="a" file="{tank}/tank_12/internal.vtu"/>'
        f'<DataSet index="2" name="b" file="{tank}/tank_114/internal.vtu"/>')
    (tmp_path / "two.vtm").write_text(text)
    step = Series(tmp_path / "two.vtm").read(0)
    a, b = pyvista.read(tank / "tank_12" / "internal.vtu"), pyvista.read(tank / "tank_114" / "internal.vtu")
    assert step.mesh.n_cells == a.n_cells + b.n_cells
    assert np.array_equal(step.fields.cell_data["alpha"],
                          np.concatenate([np.asarray(a.cell_data["alpha"]), np.asarray(b.cell_data["alpha"])]))


def test_broken_multiblock_files_name_the_problem(tank, tmp_path):
    missing = tmp_path / "missing.vtm"
    missing.write_text((tank / "tank_0.vtm").read_text())  # its block files are not next to it
    with pytest.raises(InputFileNotFound, match="tank_0/internal.vtu' it names is missing"):
        Series(missing).read(0)
    patches_only = tmp_path / "patches.vtm"
    patches_only.write_text('<?xml version="1.0"?>\n<VTKFile type="vtkMultiBlockDataSet" version="1.0">'
                            '<vtkMultiBlockDataSet><DataSet index="0" name="walls" file="w.vtp"/>'
                            '</vtkMultiBlockDataSet></VTKFile>\n')
    with pytest.raises(UnreadableFileError, match="names no volume block .*blocks there: walls"):
        Series(patches_only).read(0)
    not_multiblock = tmp_path / "other.vtm"
    not_multiblock.write_text('<?xml version="1.0"?>\n<VTKFile type="UnstructuredGrid"></VTKFile>\n')
    with pytest.raises(UnreadableFileError, match="not a VTK XML multiblock or parallel file"):
        Series(not_multiblock).read(0)


def test_a_step_folder_with_several_mesh_files_is_refused(tmp_path):
    os.makedirs(tmp_path / "s_1")
    for name in ("a.vtu", "b.vtu"):
        (tmp_path / "s_1" / name).write_text("x")
    with pytest.raises(SeriesError, match="'s_1' holds 2 mesh files"):
        Series(tmp_path)


def test_inspect_reads_the_folder_and_names_the_patches_left_out(tank):
    desc = describe_series(tank)
    assert desc["steps"] == len(STEPS) and desc["kind"] == "folder"
    assert desc["blocks_left_out"] == ["walls", "top"]
    assert set(desc["field_copies"]) == {"alpha", "U"}
    assert "measure reads the cell copy, the solver's own values" in desc["field_copies"]["alpha"]
    text = format_description(desc)
    assert "holds no mesh files" not in text
    assert "left out    blocks walls, top" in text


def _scrambled(folder):
    """The tank with stored times that do not follow the step numbers (step 114 is written before 12)."""
    times = [0.0, 0.3, 0.2, 0.4, 0.5]
    write_vof_tank(folder, times=times)
    return times


def test_times_that_do_not_increase_name_the_full_path(tmp_path):
    _scrambled(tmp_path)
    problem = Series(str(tmp_path / "tank_*" / "internal.vtu")).time_problem()
    assert problem is not None
    assert os.path.join(str(tmp_path), "tank_114", "internal.vtu") in problem.where
    assert "--sort-by-time" in problem.fix


def test_sort_by_time_orders_by_the_file_times_with_a_warning(tmp_path):
    times = _scrambled(tmp_path)
    with pytest.warns(SeriesWarning, match="ordered by the times in their files"):
        series = Series(tmp_path, sort_by_time=True)
    assert series.times.tolist() == sorted(times)
    assert [os.path.basename(s.path) for s in series.steps] == [
        f"tank_{n}.vtm" for n in (0, 114, 12, 132, 1000)]
    assert [s.index for s in series.steps] == list(range(len(times)))
    assert series.time_problem() is None
    # reference: pyvista's stored time of the file each step reads
    for s in series.steps:
        assert _vtk_time(s.path.replace(".vtm", os.sep + "internal.vtu")) == s.time


def test_steps_sharing_a_file_name_are_named_by_their_folder_in_messages(tank):
    series = Series(str(tank / "tank_*" / "internal.vtu"))
    assert [s.where for s in series.steps] == [f"tank_{n}/internal.vtu, step {k}" for k, n in enumerate(STEPS)]
    assert Series(tank).steps[2].where == "tank_114.vtm, step 2"  # distinct names stay short


def test_a_patch_written_as_an_unstructured_grid_is_left_out(tank, tmp_path):
    # audit 12: a boundary patch block written as .vtu (faces only) was joined to the volume, and its
    # points merged with the wall points, averaging the patch's value (a boundary condition's) into the
    # volume's point values (a wall probe read 0.5025 for 0.105). Reference: pyvista's reading of the
    # volume block alone.
    patch = pyvista.read(tank / "tank_132" / "boundary" / "walls.vtp").cast_to_unstructured_grid()
    patch.point_data["alpha"] = np.full(patch.n_points, 0.9)
    patch.cell_data["alpha"] = np.full(patch.n_cells, 0.9)
    patch.save(tmp_path / "walls.vtu")
    text = (tank / "tank_132.vtm").read_text()
    text = text.replace('file="tank_132/internal.vtu"', f'file="{tank}/tank_132/internal.vtu"')
    text = text.replace('file="tank_132/boundary/walls.vtp"', f'file="{tmp_path}/walls.vtu"')
    assert "walls.vtu" in text
    (tmp_path / "patched.vtm").write_text(text)
    with pytest.warns(BlocksLeftOutNote, match="multiblock blocks left out: walls .boundary patches written as cells"):
        step = Series(tmp_path / "patched.vtm").read(0)
    volume = pyvista.read(tank / "tank_132" / "internal.vtu")
    assert step.mesh.n_points == volume.n_points and step.mesh.n_cells == volume.n_cells
    assert np.array_equal(step.fields.point_data["alpha"], np.asarray(volume.point_data["alpha"]))
