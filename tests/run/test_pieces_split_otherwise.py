"""The same mesh split among processes differently at each step is one mesh, not a mesh that changes.

Outside references: the pieces are cut by pyvista (VTK's ``extract_cells``) from one grid and written by VTK's
own multiblock writer, split at another x at each step, as a load balancer moves the split; VTK's own reader
(pyvista.read, combined) gives each step's cells, whose sorted centroids are the same at every step and whose
cell fractions times compute_cell_sizes volumes give the phase volume expected.
"""

import warnings

import numpy as np
import pyvista

import phasegauge
from phasegauge.errors import SeriesWarning

pyvista.OFF_SCREEN = True
N = 8


def _grid(n=N):
    grid = pyvista.ImageData(dimensions=(n + 1,) * 3, spacing=(1 / n,) * 3).cast_to_unstructured_grid()
    c = grid.cell_centers().points
    grid.cell_data["alpha"] = (np.linalg.norm(c - 0.5, axis=1) < 0.3).astype(float)
    return grid


def _step(path, grid, cut, time):
    x = grid.cell_centers().points[:, 0]
    blocks = pyvista.MultiBlock()
    for rank, owned in enumerate((x < cut, x > cut)):
        piece = grid.extract_cells(np.flatnonzero(owned))
        for name in ("vtkOriginalCellIds", "vtkOriginalPointIds"):
            piece.cell_data.pop(name, None)
            piece.point_data.pop(name, None)
        blocks[f"p{rank}"] = piece
    blocks.field_data["TimeValue"] = np.array([time])
    blocks.save(path)


def _mesh_warnings(path):
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        result = phasegauge.measure(str(path), "alpha", analyses=("conservation",))
    return result, [str(w.message) for w in caught if issubclass(w.category, SeriesWarning)
                    and "mesh changes" in str(w.message)]


def test_the_same_cells_split_otherwise_are_not_a_mesh_change(tmp_path):
    for k, cut in enumerate((0.5, 0.375, 0.625)):
        _step(tmp_path / f"s{k}.vtm", _grid(), cut, 0.1 * k)
    read = [pyvista.read(tmp_path / f"s{k}.vtm").combine() for k in range(3)]
    centres = [np.asarray(sorted(map(tuple, np.round(r.cell_centers().points, 12)))) for r in read]
    assert all(np.array_equal(centres[0], c) for c in centres[1:])  # VTK's read: the same cells at each step
    assert read[0].n_points != read[1].n_points or not np.array_equal(read[0].points, read[1].points)
    expected = [float(np.sum(r.cell_data["alpha"] * r.compute_cell_sizes().cell_data["Volume"])) for r in read]
    result, said = _mesh_warnings(tmp_path)
    assert np.allclose(result.steps["phase_volume"], expected, rtol=1e-12)
    assert said == []


def test_a_step_on_other_cells_is_still_a_mesh_change(tmp_path):
    _step(tmp_path / "s0.vtm", _grid(), 0.5, 0.0)
    _step(tmp_path / "s1.vtm", _grid(2 * N), 0.5, 0.1)  # refined: other cells
    _, said = _mesh_warnings(tmp_path)
    assert len(said) == 1 and "at step 1" in said[0]


def test_the_cells_signature_does_not_depend_on_the_numbering():
    from phasegauge.model.mesh import Mesh

    grid = _grid(4).cast_to_unstructured_grid()
    cells = grid.cells_dict[pyvista.CellType.VOXEL]
    points = np.asarray(grid.points, dtype=float)
    rng = np.random.default_rng(0)
    new = rng.permutation(len(points))  # point k is written at place new[k]
    moved = np.empty_like(points)
    moved[new] = points
    renumbered = new[cells][rng.permutation(len(cells))]
    first = Mesh(points, [("hexahedron", cells[:, [0, 1, 3, 2, 4, 5, 7, 6]])])
    second = Mesh(moved, [("hexahedron", renumbered[:, [0, 1, 3, 2, 4, 5, 7, 6]])])
    assert first.signature != second.signature
    assert first.cells_signature == second.cells_signature
    assert Mesh(points * 1.5, [("hexahedron", cells[:, [0, 1, 3, 2, 4, 5, 7, 6]])]).cells_signature \
        != first.cells_signature


def test_polygons_of_several_corner_counts_have_a_cells_signature():
    # a polygon mesh written as two blocks, pentagons and hexagons (widths 5 and 6): the hash groups the blocks
    # by type and corner count (joining them failed), and stays free of the numbering
    from phasegauge.model.mesh import Mesh

    points = np.array([[np.cos(a), np.sin(a), 0.0] for a in np.linspace(0, 2 * np.pi, 11)[:-1]])
    points = np.vstack([points, [[0.0, 0.0, 0.0]]])
    blocks = [("polygon", np.array([[10, 0, 1, 2, 3]])), ("polygon", np.array([[10, 3, 4, 5, 6, 7]]))]
    turned = [("polygon", np.array([[3, 4, 5, 6, 7, 10]])), ("polygon", np.array([[1, 2, 3, 10, 0]]))]
    assert Mesh(points, blocks).cells_signature == Mesh(points, turned).cells_signature
