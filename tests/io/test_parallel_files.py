"""A decomposed step's pieces read through their index: VTK's parallel XML files (.pvtu) and ghost cells.

Outside references: the pieces are written by VTK's own writers (through pyvista); the .pvtu index is
the layout of VTK's file-format documentation, and VTK's own parallel reader (pyvista.read) reads it
to the same cells; the phase volume expected is numpy's sum of the whole grid's cell fractions
times the cell areas. Ghost cells carry VTK's mark of a cell another piece owns (vtkGhostType, bit 1).
"""

import numpy as np
import pytest
import pyvista

import phasegauge
from phasegauge.errors import InputFileNotFound, UnreadableFileError, UnsupportedMeshError
from phasegauge.io import Series
from phasegauge.io._multiblock import without_indexed_files

pyvista.OFF_SCREEN = True
N = 40


def _whole():
    grid = pyvista.ImageData(dimensions=(N + 1, N + 1, 1), spacing=(1 / N, 1 / N, 1))
    c = grid.cell_centers().points
    grid.cell_data["c"] = (np.hypot(c[:, 0] - 0.5, c[:, 1] - 0.5) < 0.3).astype(float)
    return grid


def _pieces(ghost_layer=0):
    """Two pieces split at x = 0.5, each with ``ghost_layer`` columns of the other's cells marked as ghosts."""
    grid, out = _whole(), []
    for lo, hi, own in ((0, N // 2 + ghost_layer, lambda x: x < 0.5), (N // 2 - ghost_layer, N, lambda x: x > 0.5)):
        piece = grid.extract_subset([lo, hi, 0, N, 0, 0]).cast_to_unstructured_grid()
        if ghost_layer:
            piece.cell_data["vtkGhostType"] = np.where(own(piece.cell_centers().points[:, 0]), 0, 1).astype(np.uint8)
        out.append(piece)
    return out


def _pvtu(folder, step):
    names = []
    for rank, piece in enumerate(_pieces()):
        piece.field_data["TimeValue"] = np.array([0.1 * step])
        piece.save(folder / f"s{step}_p{rank}.vtu")
        names.append(f"s{step}_p{rank}.vtu")
    (folder / f"s{step}.pvtu").write_text(
        '<?xml version="1.0"?>\n<VTKFile type="PUnstructuredGrid" version="0.1" byte_order="LittleEndian">\n'
        '<PUnstructuredGrid GhostLevel="0"><PCellData><PDataArray type="Float64" Name="c"/></PCellData>\n'
        '<PPoints><PDataArray type="Float32" NumberOfComponents="3"/></PPoints>\n'
        + "".join(f'<Piece Source="{n}"/>\n' for n in names) + "</PUnstructuredGrid></VTKFile>\n")
    return folder / f"s{step}.pvtu"


def test_a_folder_of_pvtu_steps_reads_each_step_whole(tmp_path):
    for step in range(3):
        index = _pvtu(tmp_path, step)
    assert pyvista.read(index).n_cells == N * N  # VTK's own parallel reader: the pieces' cells
    series = Series(str(tmp_path))  # the pieces beside their index are read through it only
    assert [p.rsplit("/", 1)[1] for p in series.files] == ["s0.pvtu", "s1.pvtu", "s2.pvtu"]
    assert np.allclose(series.times, [0.0, 0.1, 0.2])
    result = phasegauge.measure(str(tmp_path), "c", analyses=("conservation", "droplets"))
    expected = _whole().cell_data["c"].sum() / N ** 2
    assert np.allclose(result.steps["phase_volume"], expected, rtol=1e-12)
    assert result.steps["droplet_count"].tolist() == [1, 1, 1]


def test_ghost_cells_left_out_of_a_join(tmp_path):
    pyvista.MultiBlock(_pieces(ghost_layer=1)).save(tmp_path / "ghost.vtm")
    result = phasegauge.measure(str(tmp_path / "ghost.vtm"), "c", analyses=("conservation", "droplets"))
    assert np.isclose(result.steps["phase_volume"].iloc[0], _whole().cell_data["c"].sum() / N ** 2, rtol=1e-12)
    assert int(result.steps["droplet_count"].iloc[0]) == 1
    # the same overlap without VTK's marks: the cells repeated would count twice, refused
    pieces = _pieces(ghost_layer=1)
    for piece in pieces:
        del piece.cell_data["vtkGhostType"]
    pyvista.MultiBlock(pieces).save(tmp_path / "overlap.vtm")
    with pytest.raises(UnsupportedMeshError, match="shared by more than two cells"):
        phasegauge.measure(str(tmp_path / "overlap.vtm"), "c", analyses=("conservation",))


def test_an_xml_collection_of_step_files_refused_with_the_ways_to_give_the_steps(tmp_path):
    # an XML index of step files written for another program (VTK's XML root, type "Collection"), told by
    # its head whatever its name: refused in one line with the folder, glob and listing routes
    (tmp_path / "run.index").write_text('<?xml version="1.0"?><VTKFile type="Collection"><Collection/></VTKFile>')
    with pytest.raises(UnreadableFileError, match=r"an XML collection of step files, which is not read.*listing"):
        Series(str(tmp_path / "run.index"))


def test_files_named_by_an_index_left_out_of_a_folder(tmp_path):
    index = _pvtu(tmp_path, 0)
    files = sorted(str(p) for p in tmp_path.iterdir())
    assert without_indexed_files(files) == [str(index)]


def test_ghost_cells_and_a_seam_rounded_apart(tmp_path):
    # block 1 writes the seam x = 0.5 a rounding (1e-13) beyond block 0's, and both carry a ghost
    # layer: once the ghosts go, the seam is on each block's own box again, and is joined
    pieces = _pieces(ghost_layer=1)
    x = pieces[1].points[:, 0]
    x[x == 0.5] += 1e-13
    pieces[1].points[:, 0] = x
    pyvista.MultiBlock(pieces).save(tmp_path / "ghost.vtm")
    result = phasegauge.measure(str(tmp_path / "ghost.vtm"), "c", analyses=("conservation", "droplets"))
    assert int(result.steps["droplet_count"].iloc[0]) == 1
    assert np.isclose(result.steps["phase_volume"].iloc[0], _whole().cell_data["c"].sum() / N ** 2, rtol=1e-9)


def test_a_missing_piece_named_with_its_index(tmp_path):
    index = _pvtu(tmp_path, 0)
    (tmp_path / "s0_p1.vtu").unlink()
    with pytest.raises(InputFileNotFound, match=r"the piece file 's0_p1.vtu' it names is missing; restore the "
                                                r"step's piece files next to the \.pvtu file"):
        Series(str(index)).read(0)
