"""The time of a multiblock step: VTK's multiblock writer stores it in the ``.vtm`` itself, not in the blocks.

Outside references: the files are written by pyvista's ``MultiBlock.save`` (VTK's
``vtkXMLMultiBlockDataWriter``), and the times expected are those VTK's own reader gives back
(``pyvista.read(...).field_data``).
"""

import numpy as np
import pytest
import pyvista

from phasegauge.errors import MeshWarning
from phasegauge.io import Series

pyvista.OFF_SCREEN = True

TIMES = (0.0, 0.05, 0.1)


def _volume(shift=0.0):
    grid = pyvista.ImageData(dimensions=(7, 7, 7), spacing=(1 / 6,) * 3).cast_to_unstructured_grid()
    centres = grid.cell_centers().points
    grid.cell_data["alpha"] = (np.linalg.norm(centres - [0.4 + shift, 0.5, 0.5], axis=1) < 0.25).astype(float)
    return grid


def _step(path, time, block_time=None):
    volume = _volume(time)
    if block_time is not None:
        volume.field_data["TimeValue"] = [block_time]
    steps = pyvista.MultiBlock()
    steps["internal"] = volume
    steps.field_data["TimeValue"] = [time]
    steps.save(path)
    return path


def _vtk_time(path):
    """The time VTK's own multiblock reader gives the file."""
    return float(np.asarray(pyvista.read(path).field_data["TimeValue"]).ravel()[0])


def test_the_time_stored_in_the_vtm_itself_is_the_steps(tmp_path):
    paths = [_step(tmp_path / f"case_{k}.vtm", t) for k, t in enumerate(TIMES)]
    assert [_vtk_time(p) for p in paths] == list(TIMES)  # VTK's reader: the times are in the .vtm
    assert "TimeValue" not in pyvista.read(tmp_path / "case_1" / "case_1_0.vtu").field_data  # not in the block
    series = Series(tmp_path)
    assert series.times.tolist() == [_vtk_time(p) for p in paths]
    assert series.time_origins == ["file"]
    alone = Series(paths[1])  # one step given alone keeps its time too
    assert alone.times.tolist() == [0.05]
    assert alone.read(0).time == 0.05


def test_a_binary_time_and_an_ascii_time_are_peeked(tmp_path):
    from phasegauge.io._multiblock import own_time, peek_multiblock_time

    binary = _step(tmp_path / "binary.vtm", 0.05)
    assert repr(own_time(binary, decode=False)) == "TIME_NEEDS_FULL_READ"
    assert float(own_time(binary)["TimeValue"][0]) == _vtk_time(binary)
    assert peek_multiblock_time(binary) == _vtk_time(binary)  # decoded when peeked: no block is read for it
    text = binary.read_text()
    start, end = text.index("<DataArray"), text.index("</DataArray>") + len("</DataArray>")
    ascii_path = tmp_path / "ascii.vtm"
    ascii_path.write_text(text[:start] + '<DataArray type="Float64" Name="TimeValue" NumberOfTuples="1" '
                          'format="ascii">0.125</DataArray>' + text[end:])
    assert peek_multiblock_time(ascii_path) == _vtk_time(ascii_path) == 0.125


def test_the_vtm_time_wins_over_a_blocks_other_time_with_a_warning(tmp_path):
    path = _step(tmp_path / "case.vtm", 0.5, block_time=0.1)
    assert _vtk_time(path) == 0.5
    with pytest.warns(MeshWarning, match=r"stores time 0\.5 and its block internal stores 0\.1: the multiblock"):
        step = Series(path).read(0)
    assert step.time == 0.5


def test_the_same_time_in_vtm_and_block_gives_no_warning(tmp_path, recwarn):
    path = _step(tmp_path / "case.vtm", 0.05, block_time=0.05)
    assert Series(path).read(0).time == 0.05
    assert not [w for w in recwarn if issubclass(w.category, MeshWarning)]


def _untyped_time_step(folder, k, time):
    """A step as some simulation codes' own writers leave it: the ``.vtm``'s TimeValue is text with no
    ``format`` (nor ``NumberOfTuples``), and its block, written by VTK, stores the same time."""
    volume = _volume(time)
    volume.field_data["TimeValue"] = [time]
    (folder / f"step_{k}").mkdir()
    volume.save(folder / f"step_{k}" / "volume.vtu")
    path = folder / f"step_{k}.vtm"
    path.write_text('<?xml version="1.0" encoding="UTF-8"?>\n<VTKFile type="vtkMultiBlockDataSet" version="1.0">\n'
                    f'  <vtkMultiBlockDataSet>\n    <DataSet name="data" index="0" file="step_{k}/volume.vtu"/>\n'
                    '  </vtkMultiBlockDataSet>\n  <FieldData>\n'
                    f'    <DataArray type="Float32" Name="TimeValue">{time:f}</DataArray>\n'
                    '  </FieldData>\n</VTKFile>\n')
    return path


def test_a_vtm_time_with_no_format_is_text(tmp_path, recwarn):
    from phasegauge.io._multiblock import own_time

    paths = [_untyped_time_step(tmp_path, k, t) for k, t in enumerate(TIMES)]
    # VTK's reader decodes nothing from the .vtm's own array (no format), so the references are the blocks'
    # TimeValue as VTK reads them and the .vtm's text
    assert np.asarray(pyvista.read(paths[1]).field_data["TimeValue"]).size == 0
    blocks = [float(pyvista.read(tmp_path / f"step_{k}" / "volume.vtu").field_data["TimeValue"][0])
              for k in range(3)]
    texts = [float(p.read_text().split('Name="TimeValue">')[1].split("<")[0]) for p in paths]
    assert blocks == texts == list(TIMES)
    assert float(own_time(paths[1])["TimeValue"][0]) == pytest.approx(0.05, abs=1e-8)  # Float32's digits
    series = Series(tmp_path)
    assert series.times.tolist() == pytest.approx(texts, abs=1e-8)
    assert [series.read(k).time for k in range(3)] == pytest.approx(blocks, abs=1e-8)
    assert Series(paths[2]).read(0).time == pytest.approx(0.1, abs=1e-8)  # one step given alone
    assert not [w for w in recwarn if issubclass(w.category, MeshWarning)]  # the .vtm and its block agree


def test_an_empty_vtm_time_is_no_time(tmp_path):
    from phasegauge.io._multiblock import own_time

    path = _step(tmp_path / "case.vtm", 0.05, block_time=0.05)
    text = path.read_text()
    start, end = text.index("<DataArray"), text.index("</DataArray>") + len("</DataArray>")
    path.write_text(text[:start] + '<DataArray type="Float64" Name="TimeValue" format="binary"></DataArray>'
                    + text[end:])
    assert np.asarray(pyvista.read(path).field_data["TimeValue"]).size == 0  # VTK decodes nothing
    assert own_time(path) == {}
    assert Series(path).times.tolist() == [0.05]  # the block's time is the step's
    assert Series(path).read(0).time == 0.05


def test_times_a_billionth_apart_at_1000_are_told_apart(tmp_path):
    # the two times differ in the 13th significant digit: written to 10 digits both read "1000"
    vtm_time, block_time = 1000.000000001, 1000.0
    path = _step(tmp_path / "case.vtm", vtm_time, block_time=block_time)
    assert _vtk_time(path) == vtm_time  # VTK's reader gives the .vtm's time back exactly
    with pytest.warns(MeshWarning) as caught:
        step = Series(path).read(0)
    (said,) = [str(w.message) for w in caught if "stores time" in str(w.message)]
    # Python's repr of a float: the shortest text that reads back as the same number [lib]
    assert f"stores time {vtm_time!r} and its block internal stores {block_time!r}:" in said
    assert float(said.split("stores time ")[1].split(" ")[0]) == _vtk_time(path) == step.time
