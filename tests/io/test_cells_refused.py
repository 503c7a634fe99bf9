"""Cells meshio's readers name but cannot hold, or leave out: refused in one line, never read in part.

Outside checks: the files are written by VTK itself (pyvista) [lib]; the cell types are VTK's
(the VTK file format's cell type numbers).
"""

import numpy as np
import pytest

pv = pytest.importorskip("pyvista")

from phasegauge.errors import UnsupportedMeshError  # noqa: E402
from phasegauge.io import Series  # noqa: E402
from phasegauge.meshgen import grid_mesh  # noqa: E402


@pytest.mark.parametrize("vtk_type, corners", [(26, 15), (27, 13), (31, 12), (33, 24)])
def test_cells_meshio_cannot_hold_are_refused_naming_them(tmp_path, vtk_type, corners):
    # without polyhedra the file goes to meshio, whose meshes cannot hold these cells (quadratic
    # wedges and pyramids, wedge12, hexahedron24: it raised a KeyError, reported as damaged data):
    # one line naming the cells and the fix
    points = np.random.default_rng(0).random((corners, 3))
    path = str(tmp_path / "quadratic.vtu")
    pv.UnstructuredGrid(np.array([corners, *range(corners)]), np.array([vtk_type], np.uint8), points).save(path)
    with pytest.raises(UnsupportedMeshError, match="cells of type .*linear cells") as err:
        Series(path).read(0)
    assert "quadratic.vtu" in str(err.value) and "\n" not in str(err.value)


@pytest.mark.parametrize("suffix", [".vtu", ".vtk"])
def test_cells_meshio_leaves_out_are_refused_not_dropped(tmp_path, suffix):
    # regression (found by review): meshio leaves out cells of a type it does not know (VTK 37, a
    # triquadratic pyramid) with a printed warning; beside other cells the mesh was read without them,
    # silently (volumes, droplets, fluxes of part of the domain); alone it was called a point cloud
    cube = grid_mesh((1, 1, 1), kind="hexahedron")
    extra = np.random.default_rng(1).random((19, 3)) + [2.0, 0, 0]
    cells = np.array([8, *cube.blocks[0].connectivity[0], 19, *range(8, 27)])
    path = str(tmp_path / f"mixed{suffix}")
    pv.UnstructuredGrid(cells, np.array([12, 37], np.uint8), np.vstack([cube.points, extra])).save(path)
    with pytest.raises(UnsupportedMeshError, match="VTK type 37.*left out") as err:
        Series(path).read(0)
    assert f"mixed{suffix}" in str(err.value) and "\n" not in str(err.value)
