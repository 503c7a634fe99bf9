"""The contour files' ``cell`` array names the input file's cells where the reader splits them.

Polyhedra that are no ordinary cell (here hexahedra whose horizontal faces are written as two
triangles each, a conforming mesh) are split about their centres; the contour is found on the
pieces, and each element's ``cell`` is the file's cell it lies in, not the piece's number.

Outside check: the meshes are 12^3 structured grids written by VTK itself (pyvista) in the order
i, j, k, so the cell holding a point x is the analytic grid cell floor(n x) numbered
i n^2 + j n + k (elementary geometry), read for each element's centroid.
"""

import numpy as np
import pytest

pv = pytest.importorskip("pyvista")
meshio = pytest.importorskip("meshio")

from phasegauge.run.measure import measure  # noqa: E402

N = 12


def _grid(polyhedral_from: int):
    """A 12^3 grid of the unit cube: cells with i >= ``polyhedral_from`` as polyhedra, the rest hexahedra."""
    x = np.linspace(0, 1, N + 1)
    pts = np.stack(np.meshgrid(x, x, x, indexing="ij"), axis=-1).reshape(-1, 3)
    idx = np.arange(len(pts)).reshape(N + 1, N + 1, N + 1)
    cells, types = [], []
    for i in range(N):
        for j in range(N):
            for k in range(N):
                a, b, c, d = idx[i, j, k], idx[i + 1, j, k], idx[i + 1, j + 1, k], idx[i, j + 1, k]
                e, f, g, h = idx[i, j, k + 1], idx[i + 1, j, k + 1], idx[i + 1, j + 1, k + 1], idx[i, j + 1, k + 1]
                if i < polyhedral_from:
                    cells += [8, a, b, c, d, e, f, g, h]
                    types.append(pv.CellType.HEXAHEDRON)
                    continue
                faces = [[a, d, c], [a, c, b], [a, b, f, e], [b, c, g, f], [c, d, h, g], [d, a, e, h], [e, f, g],
                         [e, g, h]]
                stream = [len(faces)] + [v for face in faces for v in [len(face)] + face]
                cells += [len(stream)] + stream
                types.append(pv.CellType.POLYHEDRON)
    grid = pv.UnstructuredGrid(np.array(cells), np.array(types, dtype=np.uint8), pts)
    r = np.linalg.norm(pts - 0.5, axis=1)
    grid.point_data["c"] = 0.5 * (1 - np.tanh((r - 0.3) / 0.04))
    return grid


@pytest.mark.parametrize("polyhedral_from", [N // 2, 0], ids=["half polyhedra", "all polyhedra"])
def test_contour_cell_is_the_file_cell_of_each_element(tmp_path, polyhedral_from):
    path = tmp_path / "grid.vtu"
    _grid(polyhedral_from).save(str(path))
    measure(str(path), "c", out=tmp_path / "out", analyses=("interface",))
    written = meshio.read(str(tmp_path / "out" / "contours" / "interface_000000.vtu"))
    triangles = written.cells_dict["triangle"]
    cell = written.cell_data_dict["cell"]["triangle"]
    centroids = written.points[triangles].mean(axis=1)
    ijk = np.clip(np.floor(centroids * N).astype(int), 0, N - 1)
    expected = ijk[:, 0] * N * N + ijk[:, 1] * N + ijk[:, 2]  # the analytic grid cell (see the module's note)
    assert len(cell) > 1000
    assert cell.max() < N ** 3
    np.testing.assert_array_equal(cell, expected)
