"""Reading files and series through meshio into the model."""

import os
import pickle

import meshio
import numpy as np
import pytest

from phasegauge.errors import (FieldNotFoundError, FieldShapeError, InputFileNotFound, SeriesError,
                               UnreadableFileError)
from phasegauge.io import Series, natural_key, read_listing
from phasegauge.meshgen import grid_mesh, to_meshio

FORMATS = ["vtu", "vtk", "xdmf"]


def _write(path, mesh, point_data=None, cell_data=None, **kw):
    to_meshio(mesh, point_data, cell_data).write(path, **kw)
    return path


@pytest.mark.parametrize("fmt", FORMATS)
@pytest.mark.parametrize("kind", ["triangle", "mixed", "hexahedron", "tetra", "wedge", "pyramid"])
def test_round_trip_every_format(fmt, kind, tmp_path):
    shape = (4, 3) if kind in ("triangle",) else (3, 3, 2)
    if kind == "mixed":
        shape = (3, 3, 2)
    m = grid_mesh(shape, kind=kind, jitter=0.15)
    phi = m.points[:, 0] * 2 - 1
    vel = np.tile([1.0, 0.0, 0.0], (m.n_cells, 1))
    path = _write(tmp_path / f"a.{fmt}", m, {"phi": phi}, {"vel": vel})
    step = Series(path).read(0)
    assert step.mesh.n_cells == m.n_cells
    assert step.mesh.cell_type_counts == m.cell_type_counts
    # meshes read back after writing with meshio keep the exact domain measure
    assert step.mesh.total_measure == pytest.approx(m.total_measure, rel=1e-12)
    assert np.allclose(step.fields.point_data["phi"], phi)
    assert step.fields.cell_data["vel"].shape == (m.n_cells, 3)


def test_natural_order():
    names = ["run_10.vtu", "run_2.vtu", "run_1.vtu", "run_100.vtu"]
    assert sorted(names, key=natural_key) == ["run_1.vtu", "run_2.vtu", "run_10.vtu", "run_100.vtu"]


def test_folder_and_glob_in_natural_order(tmp_path):
    m = grid_mesh((2, 2), kind="triangle")
    for i in (1, 2, 10):
        _write(tmp_path / f"run_{i}.vtu", m, {"phi": np.full(m.n_points, float(i))})
    (tmp_path / "notes.md").write_text("not a mesh")
    for path in (tmp_path, str(tmp_path / "run_*.vtu")):
        s = Series(path)
        assert [os.path.basename(st.path) for st in s.steps] == ["run_1.vtu", "run_2.vtu", "run_10.vtu"]
        assert s.time_origins == ["index"]
        assert [float(st.fields.point_data["phi"][0]) for st in s] == [1.0, 2.0, 10.0]


def test_mesh_reused_while_topology_is_unchanged(tmp_path):
    m = grid_mesh((3, 3), kind="triangle")
    for i in range(3):
        _write(tmp_path / f"s_{i}.vtu", m, {"phi": np.full(m.n_points, float(i))})
    s = Series(tmp_path)
    meshes = [s.read(i).mesh for i in range(3)]
    assert meshes[0] is meshes[1] is meshes[2]


def test_listing_file(tmp_path):
    m = grid_mesh((2, 2), kind="triangle")
    for i in range(2):
        _write(tmp_path / f"f{i}.vtu", m, {"phi": np.zeros(m.n_points)})
    listing = tmp_path / "run.steps"
    listing.write_text("time,path\n# comment\n0.5, f0.vtu\n\n1.5,f1.vtu\n")
    s = Series(listing)
    assert list(s.times) == [0.5, 1.5] and s.time_origins == ["listing"]
    assert read_listing(listing)[1][1] == str(tmp_path / "f1.vtu")


def test_listing_errors(tmp_path):
    bad = tmp_path / "bad.steps"
    bad.write_text("0.1 f0.vtu\n")
    with pytest.raises(SeriesError, match="line 1 is not 'time,path'"):
        Series(bad)
    missing = tmp_path / "missing.steps"
    missing.write_text("0.0,nothere.vtu\n")
    with pytest.raises(InputFileNotFound, match="nothere.vtu"):
        Series(missing)


def test_xdmf_time_series_static_mesh(tmp_path, monkeypatch):
    monkeypatch.chdir(tmp_path)  # meshio's TimeSeriesWriter puts the HDF5 file in the working folder
    m = grid_mesh((3, 3), kind="triangle")
    path = tmp_path / "ts.xdmf"
    with meshio.xdmf.TimeSeriesWriter(path) as w:
        w.write_points_cells(m.points, [(b.cell_type, b.connectivity) for b in m.blocks])
        for t in (0.0, 0.25, 0.5):
            w.write_data(t, point_data={"phi": np.full(m.n_points, t)})
    s = Series(path)
    assert s.kind == "collection" and list(s.times) == [0.0, 0.25, 0.5] and s.time_origins == ["xdmf"]
    steps = list(s)
    assert steps[0].mesh is steps[2].mesh
    assert float(steps[2].fields.point_data["phi"][0]) == 0.5


def _collection(folder, name, times):
    """An XDMF time collection written by meshio's TimeSeriesWriter (the outside writer), HDF5 beside it."""
    m = grid_mesh((3, 3), kind="triangle")
    old = os.getcwd()
    os.chdir(folder)  # the writer puts the HDF5 file in the working folder
    try:
        with meshio.xdmf.TimeSeriesWriter(name) as w:
            w.write_points_cells(m.points, [(b.cell_type, b.connectivity) for b in m.blocks])
            for t in times:
                w.write_data(t, point_data={"phi": np.full(m.n_points, t)})
    finally:
        os.chdir(old)
    return folder / name


def test_folder_of_one_xdmf_collection_reads_its_steps(tmp_path):
    # a solver's output folder holding one time collection (and its HDF5 file) was read as one
    # file of one grid and refused by meshio; the steps are the collection's, as for its file
    path = _collection(tmp_path, "run.xdmf", (0.0, 0.25, 0.5))
    for given in (tmp_path, tmp_path / "*.xdmf"):
        s = Series(str(given))
        assert s.kind == "collection" and list(s.times) == [0.0, 0.25, 0.5] and s.files == [str(path)]
        assert float(s.read(2).fields.point_data["phi"][0]) == 0.5  # meshio wrote 0.5 at t = 0.5
    from phasegauge.io._inputs import input_files
    names = {os.path.basename(r["path"]) for r in input_files(Series(str(tmp_path)))}
    assert names == {"run.xdmf", "run.h5"}  # the manifest's inputs name the HDF5 data too


def test_folder_of_several_collections_or_beside_step_files_refused(tmp_path):
    # two collections (say a restart's second file) or a collection beside step files: which steps
    # are meant is not clear, and reading each file as one step would be wrong
    a, b = tmp_path / "a", tmp_path / "b"
    a.mkdir(), b.mkdir()
    _collection(a, "run_0.xdmf", (0.0, 0.1))
    _collection(a, "run_1.xdmf", (0.2, 0.3))
    with pytest.raises(SeriesError, match=r"2 XDMF time collections \(run_0.xdmf \(2 steps\), run_1.xdmf"):
        Series(str(a))
    _collection(b, "run.xdmf", (0.0, 0.1))
    _write(str(b / "extra.vtu"), grid_mesh((3, 3), kind="triangle"), {"phi": np.zeros(16)})
    with pytest.raises(SeriesError, match="1 XDMF time collection .*beside 1 other mesh file.*give one collection"):
        Series(str(b))


def test_xdmf_time_series_with_changing_mesh(tmp_path):
    # each temporal grid carries its own mesh: every grid is read with its own mesh
    import h5py

    meshes = [grid_mesh((2, 2), kind="triangle"), grid_mesh((3, 3), kind="triangle")]
    h5 = tmp_path / "d.h5"
    with h5py.File(h5, "w") as f:
        for i, m in enumerate(meshes):
            f[f"p{i}"] = m.points
            f[f"c{i}"] = m.blocks[0].connectivity
            f[f"phi{i}"] = np.full(m.n_points, float(i))
    grids = []
    for i, m in enumerate(meshes):
        grids.append(f"""<Grid Name="g{i}" GridType="Uniform"><Time Value="{i * 0.5}"/>
<Topology TopologyType="Triangle" NumberOfElements="{m.n_cells}">
<DataItem Dimensions="{m.n_cells} 3" NumberType="Int" Precision="8" Format="HDF">d.h5:/c{i}</DataItem></Topology>
<Geometry GeometryType="XYZ"><DataItem Dimensions="{m.n_points} 3" NumberType="Float" Precision="8"
 Format="HDF">d.h5:/p{i}</DataItem></Geometry>
<Attribute Name="phi" AttributeType="Scalar" Center="Node"><DataItem Dimensions="{m.n_points}"
 NumberType="Float" Precision="8" Format="HDF">d.h5:/phi{i}</DataItem></Attribute></Grid>""")
    (tmp_path / "moving.xdmf").write_text(
        '<?xml version="1.0"?><Xdmf Version="3.0"><Domain><Grid Name="TimeSeries" GridType="Collection" '
        'CollectionType="Temporal">' + "".join(grids) + "</Grid></Domain></Xdmf>")
    s = Series(tmp_path / "moving.xdmf")
    a, b = s.read(0), s.read(1)
    assert a.mesh.n_cells == 8 and b.mesh.n_cells == 18
    assert float(b.fields.point_data["phi"][0]) == 1.0
    from phasegauge.io.describe import describe_series

    assert describe_series(tmp_path / "moving.xdmf")["mesh_changes"] is True
    # one mesh, one step: no change (the first step's hash and the later steps' are one kind of hash)
    to_meshio(grid_mesh((4, 4)), point_data={"phi": np.zeros(25)}).write(tmp_path / "one.vtu")
    assert describe_series(tmp_path / "one.vtu")["mesh_changes"] is False


def test_xdmf_missing_hdf5_names_the_step(tmp_path, monkeypatch):
    monkeypatch.chdir(tmp_path)
    m = grid_mesh((2, 2), kind="triangle")
    path = tmp_path / "ts.xdmf"
    with meshio.xdmf.TimeSeriesWriter(path) as w:
        w.write_points_cells(m.points, [(b.cell_type, b.connectivity) for b in m.blocks])
        w.write_data(0.0, point_data={"phi": np.zeros(m.n_points)})
    os.remove(tmp_path / "ts.h5")
    with pytest.raises((InputFileNotFound, UnreadableFileError), match="ts.xdmf"):
        Series(path).read(0)


def _vtu_with_time(path, mesh, time):
    """A VTU with the time in its field data, as VTK's own writers store it (via pyvista)."""
    import pyvista as pv

    tmp = str(path) + ".tmp.vtu"
    _write(tmp, mesh, {"phi": np.zeros(mesh.n_points)})
    grid = pv.read(tmp)
    os.remove(tmp)
    grid.field_data["TimeValue"] = np.array([time])
    grid.save(path)
    return path


@pytest.mark.parametrize("binary", [True, False])
def test_time_from_file_field_data(tmp_path, binary):
    import pyvista as pv

    m = grid_mesh((2, 2), kind="triangle")
    for i, t in enumerate((0.1, 0.3)):
        _vtu_with_time(tmp_path / f"v_{i}.vtu", m, t)
        grid = pv.read(tmp_path / f"v_{i}.vtu")
        grid.save(tmp_path / f"l_{i}.vtk", binary=binary)
    s = Series(str(tmp_path / "v_*.vtu"))
    assert list(s.times) == [0.1, 0.3] and s.time_origins == ["file"]
    legacy = Series(str(tmp_path / "l_*.vtk"))
    assert np.allclose(legacy.times, [0.1, 0.3]) and legacy.time_origins == ["file"]


def test_vtk_pixel_cells_become_quads(tmp_path):
    import pyvista as pv

    img = pv.ImageData(dimensions=(4, 3, 1), spacing=(0.5, 1.0, 1.0)).cast_to_unstructured_grid()
    img.save(tmp_path / "img.vtu")
    mesh = Series(tmp_path / "img.vtu").read(0).mesh
    assert mesh.cell_type_counts == {"quad": 6}
    assert mesh.total_measure == pytest.approx(3.0)
    assert mesh.regular_grid is not None and mesh.regular_grid.cell_shape == (3, 2)


# -------------------------------------------------------------------- errors
@pytest.mark.parametrize("content,match", [
    (b"", "empty"),
    (b"this is not a mesh\n", "cannot be read as a mesh"),
])
def test_unreadable_files(tmp_path, content, match):
    path = tmp_path / "bad.vtu"
    path.write_bytes(content)
    with pytest.raises(UnreadableFileError, match=match):
        Series(path).read(0)


def test_truncated_vtu(tmp_path):
    m = grid_mesh((4, 4), kind="triangle")
    path = _write(tmp_path / "t.vtu", m, {"phi": np.zeros(m.n_points)}, binary=True)
    data = path.read_bytes()
    path.write_bytes(data[: len(data) // 2])
    with pytest.raises(UnreadableFileError, match="t.vtu"):
        Series(path).read(0)


def test_missing_path_and_wrong_suffix(tmp_path):
    with pytest.raises(InputFileNotFound, match="file not found"):
        Series(tmp_path / "nope.vtu")
    other = tmp_path / "x.dat"
    other.write_text("v 0 0 0\n")
    with pytest.raises(UnreadableFileError, match="neither a mesh file"):
        Series(other)
    with pytest.raises(SeriesError, match="holds no"):
        Series(tmp_path / "empty_dir" if (tmp_path / "empty_dir").mkdir() is None else None)


def test_errors_pickle_and_keep_their_parts():
    err = FieldNotFoundError("field 'phi' not found; fields there: c", where="a.vtu, step 3",
                             fix="name one of those fields with --field")
    back = pickle.loads(pickle.dumps(err))
    assert type(back) is FieldNotFoundError and back.where == "a.vtu, step 3"
    assert str(back) == "a.vtu, step 3: field 'phi' not found; fields there: c; name one of those fields with --field"
    assert isinstance(back, KeyError)
    assert isinstance(FieldShapeError("x"), ValueError)


def test_structured_vtk_formats_read_through_vtk(tmp_path):
    # VTK XML image, rectilinear and structured grids and legacy structured points: meshio does not
    # read them, VTK's own readers do (pyvista); measures checked against the exact box volume
    import pyvista as pv

    img = pv.ImageData(dimensions=(5, 4, 3), spacing=(0.25, 0.5, 1.0))
    img["phi"] = np.linspace(-1, 1, img.n_points)
    img.field_data["TimeValue"] = np.array([2.5])
    img.save(tmp_path / "a.vti")
    img.save(tmp_path / "legacy.vtk")
    rect = pv.RectilinearGrid(np.array([0, 1, 3.0]), np.array([0, 2.0]), np.array([0, 1.0]))
    rect.save(tmp_path / "b.vtr")
    x, y, z = np.meshgrid(np.linspace(0, 1, 3), np.linspace(0, 1, 4), np.linspace(0, 1, 2), indexing="ij")
    pv.StructuredGrid(x, y, z).save(tmp_path / "c.vts")
    s = Series(tmp_path / "a.vti")
    step = s.read(0)
    assert step.mesh.cell_type_counts == {"hexahedron": 24} and step.mesh.total_measure == pytest.approx(3.0)
    assert s.times[0] == 2.5 and s.time_origins == ["file"]
    assert step.mesh.regular_grid is not None
    assert Series(tmp_path / "legacy.vtk").read(0).mesh.total_measure == pytest.approx(3.0)
    assert Series(tmp_path / "b.vtr").read(0).mesh.total_measure == pytest.approx(6.0)
    assert Series(tmp_path / "c.vts").read(0).mesh.total_measure == pytest.approx(1.0)


def test_truncated_legacy_files_refused(tmp_path):
    # regression: a truncated legacy UNSTRUCTURED_GRID file was taken for a structured one and handed to
    # VTK's reader, which crashed the process; and a truncated binary structured file gave garbage values
    import pyvista as pv

    tri = grid_mesh((4, 4), kind="triangle")
    path = _write(tmp_path / "u.vtk", tri, {"phi": np.zeros(tri.n_points)}, binary=True)
    data = path.read_bytes()
    path.write_bytes(data[: int(len(data) * 0.7)])
    with pytest.raises(UnreadableFileError, match="u.vtk"):
        Series(path).read(0)
    img = pv.ImageData(dimensions=(6, 5, 4))
    img["phi"] = np.linspace(-1, 1, img.n_points)
    img.save(tmp_path / "full.vtk", binary=True)
    data = (tmp_path / "full.vtk").read_bytes()
    (tmp_path / "cut.vtk").write_bytes(data[: int(len(data) * 0.7)])
    with pytest.raises(UnreadableFileError, match="damaged or ends early"):
        Series(tmp_path / "cut.vtk").read(0)
