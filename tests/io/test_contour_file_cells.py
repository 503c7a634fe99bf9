"""A contour's ``cell`` array numbers the cells as the input file does, blocks left out counted.

A file whose cell list holds boundary lines (a Gmsh mesh converted by meshio) or faces before the
volume cells: the mesh leaves those out, and the contour still names the file's cells.

Outside checks: the file's cell list as meshio reads it (its blocks in the file's order) [lib]; each
contour element's midpoint lies in the quad its ``cell`` names, by the signs of the cross products of
the quad's edges and the point (a point is in a convex polygon when it is on the inner side of every
edge: elementary geometry, in numpy); the polyhedra's own cell numbers written by VTK (pyvista) [lib].
"""

import meshio
import numpy as np
import pytest

from phasegauge import measure
from phasegauge.io import Series, read_contour


def _drop_file(path, with_lines: bool) -> None:
    """A 40 x 40 quad grid of the unit square with a tanh drop of c on the cells (radius 0.25), written with the
    40 line cells of its bottom edge before the quads, or without them."""
    n = 40
    x = np.linspace(0, 1, n + 1)
    xx, yy = np.meshgrid(x, x, indexing="ij")
    points = np.c_[xx.ravel(), yy.ravel(), 0 * xx.ravel()]
    idx = np.arange(points.shape[0]).reshape(n + 1, n + 1)
    quads = np.c_[idx[:-1, :-1].ravel(), idx[1:, :-1].ravel(), idx[1:, 1:].ravel(), idx[:-1, 1:].ravel()]
    lines = np.c_[idx[:-1, 0], idx[1:, 0]]
    centre = points[quads].mean(1)
    c = 1 / (1 + np.exp((np.hypot(centre[:, 0] - 0.5, centre[:, 1] - 0.5) - 0.25) / 0.02))
    blocks, data = [("quad", quads)], [c]
    if with_lines:
        blocks, data = [("line", lines)] + blocks, [np.zeros(len(lines))] + data
    meshio.write(path, meshio.Mesh(points, blocks, cell_data={"c": data}))


def _inside_named_cells(contour_path, mesh_path) -> tuple:
    """How many contour elements have their midpoint in the file cell their ``cell`` names, and how many there
    are; the file's cells as meshio lists them, all blocks in order [lib]."""
    contour = read_contour(contour_path)
    src = meshio.read(mesh_path)
    listed = [(b.type, row) for b in src.cells for row in np.asarray(b.data)]
    mid = contour.points[contour.elements].mean(axis=1)[:, :2]
    inside = 0
    for point, cell in zip(mid, contour.cells):
        kind, row = listed[cell]
        if kind != "quad":
            continue
        q = src.points[row][:, :2]
        edge, to_point = np.roll(q, -1, axis=0) - q, point - q
        cross = edge[:, 0] * to_point[:, 1] - edge[:, 1] * to_point[:, 0]  # counter-clockwise quad: all >= 0
        inside += bool(np.all(cross >= -1e-12))
    return inside, len(contour.cells)


@pytest.mark.parametrize("with_lines", [True, False])
def test_contour_cells_are_the_files_cells(tmp_path, with_lines):
    path = str(tmp_path / "m_0.vtu")
    _drop_file(path, with_lines)
    measure(path, "c", out=tmp_path / "out", analyses=("interface",), contours=True)
    inside, total = _inside_named_cells(str(tmp_path / "out" / "contours" / "interface_000000.vtu"), path)
    assert total > 50 and inside == total  # before: 0 of 76 with the lines first (each id 40 short)
    mesh = Series(path).read(0).mesh
    if with_lines:
        np.testing.assert_array_equal(mesh.file_cells, np.arange(40, 40 + 1600))
    else:  # no block left out: the mesh's own numbers, nothing kept
        assert mesh.file_cells is None and mesh.cell_parents is None


def test_meshes_numbered_differently_in_their_files_are_not_shared(tmp_path):
    """Two steps with the same volume cells, one with the boundary lines first: each keeps its own numbers."""
    _drop_file(str(tmp_path / "s_0.vtu"), False)
    _drop_file(str(tmp_path / "s_1.vtu"), True)
    series = Series(str(tmp_path / "s_*.vtu"))
    first, second = series.read(0).mesh, series.read(1).mesh
    assert first.file_cells is None and second.file_cells[0] == 40


def test_one_cell_thick_mesh_with_its_faces_first(tmp_path):
    """Hexahedra one cell thick (measured on their lower plane) with their 400 lower faces listed first."""
    n = 20
    x = np.linspace(0, 1, n + 1)
    xx, yy, zz = np.meshgrid(x, x, [0.0, 0.05], indexing="ij")
    points = np.c_[xx.ravel(), yy.ravel(), zz.ravel()]
    idx = np.arange(points.shape[0]).reshape(n + 1, n + 1, 2)
    lower = np.c_[idx[:-1, :-1, 0].ravel(), idx[1:, :-1, 0].ravel(), idx[1:, 1:, 0].ravel(), idx[:-1, 1:, 0].ravel()]
    upper = np.c_[idx[:-1, :-1, 1].ravel(), idx[1:, :-1, 1].ravel(), idx[1:, 1:, 1].ravel(), idx[:-1, 1:, 1].ravel()]
    hexes = np.c_[lower, upper]
    centre = points[hexes].mean(1)
    c = 1 / (1 + np.exp((np.hypot(centre[:, 0] - 0.5, centre[:, 1] - 0.5) - 0.25) / 0.04))
    path = str(tmp_path / "q_0.vtu")
    meshio.write(path, meshio.Mesh(points, [("quad", lower), ("hexahedron", hexes)],
                                   cell_data={"c": [np.zeros(len(lower)), c]}))
    measure(path, "c", out=tmp_path / "out", analyses=("interface",), contours=True)
    contour = read_contour(str(tmp_path / "out" / "contours" / "interface_000000.vtu"))
    src = meshio.read(path)  # the file's cells as meshio lists them [lib]
    assert np.all(contour.cells >= len(lower))  # hexahedra, not the faces before them
    box = src.points[np.asarray(src.cells[1].data)[contour.cells - len(lower)]]
    mid = contour.points[contour.elements].mean(axis=1)
    inside = np.all((mid[:, None, :2] >= box[:, :, :2].min(1)[:, None] - 1e-12)
                    & (mid[:, None, :2] <= box[:, :, :2].max(1)[:, None] + 1e-12), axis=2)[:, 0]
    assert len(mid) > 20 and inside.all()  # each midpoint in its hexahedron's footprint (axis-aligned boxes)


def _ghost_block(z0, layers, ghost):
    """A 10 x 10 x ``layers`` hexahedron block from height z0 (cell 0.1), c = 1 in a ball about (0.5, 0.5, 0.75) of
    radius 0.2, its top or bottom layer marked a ghost (vtkGhostType 1: a duplicate cell, as VTK marks them)."""
    import pyvista

    n, h = 10, 0.1
    block = pyvista.ImageData(dimensions=(n + 1, n + 1, layers + 1), spacing=(h, h, h),
                              origin=(0, 0, z0)).cast_to_unstructured_grid()
    centre = block.cell_centers().points
    block.cell_data["c"] = (np.linalg.norm(centre - [0.5, 0.5, 0.75], axis=1) < 0.2).astype(float)
    marks = np.zeros(block.n_cells, dtype=np.uint8)
    if ghost == "top":
        marks[centre[:, 2] > z0 + (layers - 1) * h] = 1
    if ghost == "bottom":
        marks[centre[:, 2] < z0 + h] = 1
    block.cell_data["vtkGhostType"] = marks
    return block


@pytest.mark.parametrize("ghost_at", ["top", "bottom"])
def test_multiblock_cells_offset_by_whole_files_ghosts_counted(tmp_path, ghost_at):
    # a duplicate layer at the top of block 0, or at the bottom of block 1: each block's numbers start after
    # all the cells of the files before it (ghosts counted), so a number less the offset is the file's row
    pyvista = pytest.importorskip("pyvista")
    if ghost_at == "top":
        first, second = _ghost_block(0.0, 6, "top"), _ghost_block(0.5, 5, None)
    else:
        first, second = _ghost_block(0.0, 5, None), _ghost_block(0.4, 6, "bottom")
    folder = tmp_path / "g"
    folder.mkdir()
    pyvista.MultiBlock({"a": first, "b": second}).save(folder / "case_0.vtm")
    measure(str(folder / "case_0.vtm"), "c", out=str(tmp_path / "out"), analyses=("interface",), contours=True)
    contour = pyvista.read(next((tmp_path / "out" / "contours").glob("interface_*.vtu")))
    cells = np.asarray(contour.cell_data["cell"])
    # the block-1 file cell holding each element's midpoint, as VTK finds it [lib]; -1 outside it
    found = second.find_containing_cell(contour.cell_centers().points)
    assert cells.size > 50 and (found >= 0).all()
    offset = first.n_cells  # all of block 0's file cells, ghosts counted
    hits = np.mean(cells - found == offset)
    assert hits > 0.95  # our threshold: a midpoint on a face between two cells may be found in the other
