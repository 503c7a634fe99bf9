"""The fields of a VTK XML file read without its mesh (`io/_xml_fields.py`).

Outside check: the files are written by VTK (pyvista 0.49's `save`, VTK's XML writer) and the
fields compared with VTK's own reader (`pyvista.read`) [lib]: every array equal, bit for bit,
in type and shape.
"""

import numpy as np
import pytest

pv = pytest.importorskip("pyvista")

from phasegauge.io._xml_fields import read_fields, scan_layout  # noqa: E402
from phasegauge.meshgen import grid_mesh, to_polyhedral_grid  # noqa: E402


def _grid(seed=0, points_shift=0.0):
    m = grid_mesh((3, 2, 2), kind="hexahedron", jitter=0.2, seed=1)
    grid = to_polyhedral_grid(m)
    grid.points = grid.points + points_shift
    rng = np.random.default_rng(seed)
    grid.point_data["c"] = rng.random(grid.n_points)
    grid.point_data["U"] = rng.standard_normal((grid.n_points, 3)).astype(np.float32)
    grid.point_data["tag"] = rng.integers(-5, 5, grid.n_points).astype(np.int32)
    grid.cell_data["p"] = rng.random(grid.n_cells)
    grid.cell_data["id"] = np.arange(grid.n_cells, dtype=np.int64)
    grid.field_data["time"] = np.array([0.25 * (seed + 1)])
    return grid


def _write_vtk(grid, path, *, mode="binary", compress=True, header64=False, big_endian=False):
    """The grid written by VTK's XML writer with the given data mode, compression and header."""
    from vtkmodules.vtkIOXML import vtkXMLUnstructuredGridWriter

    writer = vtkXMLUnstructuredGridWriter()
    writer.SetFileName(str(path))
    writer.SetInputData(grid)
    {"binary": writer.SetDataModeToBinary, "ascii": writer.SetDataModeToAscii,
     "appended": writer.SetDataModeToAppended}[mode]()
    if not compress:
        writer.SetCompressorTypeToNone()
    if header64:
        writer.SetHeaderTypeToUInt64()
    if big_endian:
        writer.SetByteOrderToBigEndian()
    writer.Write()
    return str(path)


def _assert_same_as_vtk(path):
    layout = scan_layout(path)
    assert layout is not None
    point, cell, field = read_fields(path, layout)
    grid = pv.read(path)  # [lib]
    for ours, theirs in ((point, grid.point_data), (cell, grid.cell_data), (field, grid.field_data)):
        assert list(ours) == list(theirs.keys())
        for name, values in ours.items():
            expected = np.asarray(theirs[name])
            assert values.dtype == expected.dtype and values.shape == expected.shape
            np.testing.assert_array_equal(values, expected)
    return layout


@pytest.mark.parametrize("compress", [True, False])
@pytest.mark.parametrize("header64", [False, True])
@pytest.mark.parametrize("big_endian", [False, True])
def test_fields_read_alone_equal_vtks_reader(tmp_path, compress, header64, big_endian):
    path = _write_vtk(_grid(), tmp_path / "a.vtu", compress=compress, header64=header64, big_endian=big_endian)
    _assert_same_as_vtk(path)


def test_pyvista_save_read_alike(tmp_path):
    path = str(tmp_path / "a.vtu")
    _grid().save(path)
    _assert_same_as_vtk(path)


def test_the_signature_follows_the_mesh_not_the_fields(tmp_path):
    first = scan_layout(_write_vtk(_grid(seed=0), tmp_path / "a.vtu"))
    other_fields = scan_layout(_write_vtk(_grid(seed=1), tmp_path / "b.vtu"))
    other_points = scan_layout(_write_vtk(_grid(seed=0, points_shift=1e-9), tmp_path / "c.vtu"))
    assert first.signature == other_fields.signature
    assert first.signature != other_points.signature


@pytest.mark.parametrize("mode", ["ascii", "appended"])
def test_other_layouts_are_left_to_vtks_reader(tmp_path, mode):
    assert scan_layout(_write_vtk(_grid(), tmp_path / "a.vtu", mode=mode)) is None


def test_a_file_written_in_part_has_no_layout(tmp_path):
    path = _write_vtk(_grid(), tmp_path / "a.vtu")
    with open(path, "rb") as handle:
        data = handle.read()
    with open(path, "wb") as handle:
        handle.write(data[: len(data) - 200])
    assert scan_layout(path) is None


def test_a_damaged_field_is_not_read(tmp_path):
    path = _write_vtk(_grid(), tmp_path / "a.vtu", compress=False)
    layout = scan_layout(path)
    first = layout.arrays[0]
    with open(path, "rb") as handle:
        data = bytearray(handle.read())
    del data[first.end - 9:first.end - 1]  # eight base64 characters less: six bytes short
    with open(path, "wb") as handle:
        handle.write(bytes(data))
    layout = scan_layout(path)
    assert layout is not None and read_fields(path, layout) is None


def test_files_scanned_in_small_chunks_read_alike(tmp_path, monkeypatch):
    # tags and the polyhedra's face array names cut across the chunks' ends: the same layout
    import phasegauge.io._polyhedra as polyhedral_io
    import phasegauge.io._xml_fields as xml_fields

    path = _write_vtk(_grid(), tmp_path / "a.vtu")
    whole = scan_layout(path)
    assert polyhedral_io.xml_holds_polyhedra(path)
    for size in (5, 13, 64):
        monkeypatch.setattr(xml_fields, "CHUNK", size)
        monkeypatch.setattr(polyhedral_io, "CHUNK", size)
        assert scan_layout(path) == whole
        assert polyhedral_io.xml_holds_polyhedra(path)
    _assert_same_as_vtk(path)
