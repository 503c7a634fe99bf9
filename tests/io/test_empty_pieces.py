"""Pieces of 0 points and 0 cells (written by a process that owns no cells) in a decomposed step.

Outside references: the pieces are written by VTK's own XML writer (through pyvista and vtkmodules), in its
three encodings; VTK's own parallel reader (pyvista.read of the .pvtu) reads the same step, and the phase
volume expected is the sum of its cell fractions times pyvista's compute_cell_sizes volumes.
"""

import numpy as np
import pytest
import pyvista

import phasegauge
from phasegauge.errors import UnreadableFileError

pyvista.OFF_SCREEN = True
N = 8


def _grid():
    grid = pyvista.ImageData(dimensions=(N + 1,) * 3, spacing=(1 / N,) * 3).cast_to_unstructured_grid()
    c = grid.cell_centers().points
    grid.cell_data["alpha"] = (np.linalg.norm(c - 0.5, axis=1) < 0.3).astype(float)
    return grid


def _empty_piece(path, encoding, *, fields=True):
    """An unstructured piece of 0 points and 0 cells holding 'alpha' (or no field), as VTK's writer leaves it."""
    from vtkmodules.vtkIOXML import vtkXMLUnstructuredGridWriter

    empty = pyvista.UnstructuredGrid()
    if fields:
        empty.cell_data["alpha"] = np.zeros(0)
    writer = vtkXMLUnstructuredGridWriter()
    writer.SetInputData(empty)
    writer.SetFileName(str(path))
    {"binary": writer.SetDataModeToBinary, "ascii": writer.SetDataModeToAscii,
     "appended": writer.SetDataModeToAppended}[encoding]()
    if encoding == "appended":
        writer.SetCompressorTypeToNone()
        writer.EncodeAppendedDataOff()
    writer.Write()


def _pvtu(folder, encoding, step=0):
    grid = _grid()
    x = grid.cell_centers().points[:, 0]
    for rank, cut in enumerate((x < 0.5, x > 0.5)):
        piece = grid.extract_cells(np.flatnonzero(cut))
        for name in ("vtkOriginalCellIds", "vtkOriginalPointIds"):
            piece.cell_data.pop(name, None)
            piece.point_data.pop(name, None)
        piece.field_data["TimeValue"] = np.array([0.1 * step])
        piece.save(folder / f"s{step}_{rank}.vtu")
    _empty_piece(folder / f"s{step}_2.vtu", encoding)
    (folder / f"s{step}.pvtu").write_text(
        '<?xml version="1.0"?>\n<VTKFile type="PUnstructuredGrid" version="0.1" byte_order="LittleEndian">\n'
        '<PUnstructuredGrid GhostLevel="0"><PCellData><PDataArray type="Float64" Name="alpha"/></PCellData>\n'
        '<PPoints><PDataArray type="Float32" NumberOfComponents="3"/></PPoints>\n'
        + "".join(f'<Piece Source="s{step}_{rank}.vtu"/>\n' for rank in range(3)) + "</PUnstructuredGrid></VTKFile>\n")
    return folder / f"s{step}.pvtu"


def _reference(path):
    """Cells and phase volume of VTK's own read of the parallel file."""
    data = pyvista.read(path)
    volumes = data.compute_cell_sizes(length=False, area=False, volume=True).cell_data["Volume"]
    return data.n_cells, float(np.sum(data.cell_data["alpha"] * volumes))


@pytest.mark.parametrize("encoding", ["binary", "ascii", "appended"])
def test_an_empty_piece_of_a_pvtu_is_left_out(tmp_path, encoding):
    index = _pvtu(tmp_path, encoding)
    cells, volume = _reference(index)
    assert cells == N ** 3
    result = phasegauge.measure(str(index), "alpha", analyses=("conservation",))
    assert np.isclose(result.steps["phase_volume"].iloc[0], volume, rtol=1e-12)


def test_an_empty_piece_holding_no_fields_keeps_the_others_fields(tmp_path):
    grid = _grid()
    x = grid.cell_centers().points[:, 0]
    blocks = pyvista.MultiBlock()
    blocks["p0"] = grid.extract_cells(np.flatnonzero(x < 0.5))
    blocks["p1"] = grid.extract_cells(np.flatnonzero(x > 0.5))
    blocks.save(tmp_path / "step.vtm")
    data = pyvista.read(tmp_path / "step.vtm").combine()
    _empty_piece(tmp_path / "step" / "step_2.vtu", "binary", fields=False)  # no points, no cells, no arrays
    index = (tmp_path / "step.vtm").read_text()
    (tmp_path / "step.vtm").write_text(index.replace("</vtkMultiBlockDataSet>",
                                                     '<DataSet index="2" name="p2" file="step/step_2.vtu"/>\n'
                                                     "</vtkMultiBlockDataSet>"))
    assert pyvista.read(tmp_path / "step.vtm").combine().n_cells == data.n_cells == N ** 3
    expected = float(np.sum(data.cell_data["alpha"] * data.compute_cell_sizes(length=False, area=False)
                            .cell_data["Volume"]))
    result = phasegauge.measure(str(tmp_path / "step.vtm"), "alpha", analyses=("conservation",))
    assert np.isclose(result.steps["phase_volume"].iloc[0], expected, rtol=1e-12)


def test_a_series_step_with_an_empty_piece_is_measured(tmp_path):
    for step in range(3):
        index = _pvtu(tmp_path, "binary", step)
    _, volume = _reference(index)
    result = phasegauge.measure(str(tmp_path), "alpha", analyses=("conservation",))
    assert np.allclose(result.steps["time"], [0.0, 0.1, 0.2])
    assert np.allclose(result.steps["phase_volume"], volume, rtol=1e-12)


def test_an_empty_unstructured_file_given_as_a_step_holds_no_cells(tmp_path):
    _empty_piece(tmp_path / "empty.vtu", "binary")
    with pytest.raises(UnreadableFileError, match="empty.vtu.*holds no cells"):
        phasegauge.measure(str(tmp_path / "empty.vtu"), "alpha", analyses=("conservation",))
    every = _pvtu(tmp_path, "binary")
    (tmp_path / "none.pvtu").write_text(every.read_text().replace('Source="s0_0', 'Source="s0_2')
                                        .replace('Source="s0_1', 'Source="s0_2'))
    with pytest.raises(UnreadableFileError, match="every piece it names holds no cells"):
        phasegauge.measure(str(tmp_path / "none.pvtu"), "alpha", analyses=("conservation",))
