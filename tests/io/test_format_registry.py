"""The format registry (one table: suffix -> reader, time peeker), XDMF data files and input hashes."""

import hashlib
import os
import xml.etree.ElementTree as ET

import numpy as np
import pytest

from phasegauge import io
from phasegauge.errors import UnreadableFileError
from phasegauge.meshgen import grid_mesh, to_meshio

ROOT = os.path.dirname(os.path.dirname(os.path.dirname(os.path.abspath(__file__))))
SAMPLES = os.path.join(ROOT, "sample_fields")


def test_every_suffix_has_one_format_and_mesh_suffixes_come_from_the_table():
    formats = io.formats()
    suffixes = [s for f in formats for s in f.suffixes]
    assert len(suffixes) == len(set(suffixes))
    assert tuple(suffixes) == io.MESH_SUFFIXES
    assert set(io.MESH_SUFFIXES) >= {".vtu", ".vtk", ".vti", ".vtr", ".vts", ".xdmf", ".xmf"}
    for f in formats:
        for suffix in f.suffixes:
            assert io.format_for("run_0001" + suffix.upper()) is f
            assert callable(f.read)
    assert io.format_for("notes.txt") is None


def test_register_format_checks_the_suffixes():
    fmt = io.register_format("demo", [".DeMo"], read=lambda path: None)
    assert fmt.suffixes == (".demo",) and fmt.peek_time is None
    with pytest.raises(ValueError, match="start with a dot"):
        io.register_format("bad", ["demo"], read=lambda path: None)


def test_an_unknown_suffix_is_refused_with_the_known_ones(tmp_path):
    path = tmp_path / "step.dat"
    path.write_text("1 2 3\n")
    with pytest.raises(UnreadableFileError, match=r"is not a mesh file \(\.vtu, \.vtk, .*\.xmf\)"):
        io.read_mesh_file(str(path))


def test_the_registered_reader_reads_a_file_meshio_wrote(tmp_path):
    # reference: meshio's own writer; the registry's reader must give back the same points and data
    mesh = grid_mesh((3, 2), kind="triangle")
    path = str(tmp_path / "a.vtk")
    to_meshio(mesh, cell_data={"c": np.arange(mesh.n_cells, dtype=float)}).write(path)
    raw = io.read_mesh_file(path)
    np.testing.assert_array_equal(np.asarray(raw.points)[:, :2], mesh.points[:, :2])
    np.testing.assert_array_equal(np.concatenate(raw.cell_data["c"]), np.arange(mesh.n_cells))
    assert io.read_meshio is io.read_mesh_file


@pytest.mark.parametrize("name", [os.path.join("channel_mixing", "flow_rate_1.xdmf"), "filament_breakup.xdmf"])
def test_xdmf_data_files_are_the_hdf5_files_its_data_items_name(name):
    # reference: the DataItem texts parsed with the standard library's XML parser ("file.h5:/path")
    path = os.path.join(SAMPLES, name)
    items = [node.text.strip() for node in ET.parse(path).getroot().iter("DataItem")
             if node.get("Format") == "HDF" and node.text]
    expected = sorted({os.path.join(os.path.dirname(path), text.split(":")[0]) for text in items})
    assert io.xdmf_data_files(path) == expected and all(os.path.isfile(f) for f in expected)


def test_input_files_list_the_steps_and_data_with_their_sha256():
    # reference: hashlib over each file's bytes
    series = io.Series(os.path.join(SAMPLES, "channel_mixing", "flow_rate_1.xdmf"))
    files = io.input_files(series)
    assert [f["path"] for f in files] == [os.path.abspath(os.path.join(SAMPLES, "channel_mixing", n))
                                         for n in ("flow_rate_1.xdmf", "flow_rate_1.h5")]
    for f in files:
        data = open(f["path"], "rb").read()
        assert f["bytes"] == len(data) and f["sha256"] == hashlib.sha256(data).hexdigest()
        assert io.file_sha256(f["path"]) == f["sha256"]
    # a hash already known is reused, not computed again
    known = {series.files[0]: "0" * 64}
    assert io.input_files(series, known)[0]["sha256"] == "0" * 64
