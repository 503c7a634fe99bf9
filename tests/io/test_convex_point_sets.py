"""Convex point set cells (VTK type 41): read, recognised by their corners or split about their centre.

Outside checks: exact areas and volumes of rectangles and boxes (elementary geometry), and
pyvista/VTK's own reading of the same files (`compute_cell_sizes`, `triangulate`) [lib].
"""

import json
import subprocess
import sys
import os

import numpy as np
import pytest

pv = pytest.importorskip("pyvista")

from phasegauge.io import Series  # noqa: E402
from phasegauge.io.describe import describe_series  # noqa: E402

CONVEX_POINT_SET = 41


def _write(path, points, cells, values=None):
    """A .vtu of convex point set cells written by VTK itself (pyvista)."""
    flat = np.concatenate([[len(c), *c] for c in cells]).astype(np.int64)
    grid = pv.UnstructuredGrid(flat, np.full(len(cells), CONVEX_POINT_SET, np.uint8), np.asarray(points, float))
    grid.cell_data["c"] = np.arange(len(cells), dtype=float) if values is None else values
    grid.point_data["p"] = grid.points[:, 0] + 2 * grid.points[:, 1]
    grid.save(path)
    return grid


def _grid_2d(xs, ys, rng):
    X, Y = np.meshgrid(xs, ys, indexing="ij")
    points = np.c_[X.ravel(), Y.ravel(), np.zeros(X.size)]
    ny = len(ys)
    cells, areas = [], []
    for i in range(len(xs) - 1):
        for j in range(len(ys) - 1):
            ids = [i * ny + j, (i + 1) * ny + j, (i + 1) * ny + j + 1, i * ny + j + 1]
            cells.append(rng.permutation(ids))
            areas.append((xs[i + 1] - xs[i]) * (ys[j + 1] - ys[j]))
    return points, cells, np.array(areas)


def _boxes_3d(xs, rng, rotation=None):
    n = len(xs)
    X, Y, Z = np.meshgrid(xs, xs, xs, indexing="ij")
    points = np.c_[X.ravel(), Y.ravel(), Z.ravel()]
    if rotation is not None:
        points = points @ rotation.T
    cells, volumes = [], []
    for i in range(n - 1):
        for j in range(n - 1):
            for k in range(n - 1):
                ids = [(i + a) * n * n + (j + b) * n + (k + c) for a in (0, 1) for b in (0, 1) for c in (0, 1)]
                cells.append(rng.permutation(ids))
                volumes.append((xs[i + 1] - xs[i]) * (xs[j + 1] - xs[j]) * (xs[k + 1] - xs[k]))
    return points, cells, np.array(volumes)


def _rotation(a, b):
    ca, sa, cb, sb = np.cos(a), np.sin(a), np.cos(b), np.sin(b)
    rz = np.array([[ca, -sa, 0], [sa, ca, 0], [0, 0, 1]])
    rx = np.array([[1, 0, 0], [0, cb, -sb], [0, sb, cb]])
    return rz @ rx


def test_2d_shuffled_corners_read_as_quads_with_exact_areas(tmp_path):
    rng = np.random.default_rng(1)
    xs, ys = np.array([0, 0.1, 0.35, 0.5, 1.0]), np.array([0, 0.2, 0.3, 0.7])
    points, cells, areas = _grid_2d(xs, ys, rng)
    path = str(tmp_path / "grid.vtu")
    grid = _write(path, points, cells)
    step = Series(path).read(0)
    mesh = step.mesh
    assert mesh.cell_type_counts == {"quad": len(cells)}
    # exact rectangle areas (elementary geometry); cell order and cell data kept
    np.testing.assert_allclose(mesh.cell_measures, areas, rtol=1e-12)
    np.testing.assert_array_equal(step.fields.cell_data["c"], np.arange(len(cells)))
    # VTK gives 2D convex point sets no area; its Delaunay triangulation of the points does [lib]
    tri = pv.PolyData(grid.points).delaunay_2d().compute_cell_sizes()
    assert abs(tri["Area"].sum() - mesh.total_measure) < 1e-12
    assert mesh.inverted_cells == 0 and mesh.regular_grid is not None


@pytest.mark.parametrize("rotated", [False, True])
def test_3d_boxes_read_as_hexahedra_against_pyvista(tmp_path, rotated):
    rng = np.random.default_rng(2)
    xs = np.array([0, 0.15, 0.5, 1.1])  # distinct sides: the principal axes are unique
    rotation = _rotation(0.4, 0.7) if rotated else None
    points, cells, volumes = _boxes_3d(xs, rng, rotation)
    path = str(tmp_path / "boxes.vtu")
    grid = _write(path, points, cells)
    mesh = Series(path).read(0).mesh
    assert mesh.cell_type_counts == {"hexahedron": len(cells)}
    assert mesh.inverted_cells == 0
    np.testing.assert_allclose(mesh.cell_measures, volumes, rtol=1e-12)  # exact box volumes
    vtk_volumes = grid.compute_cell_sizes()["Volume"]  # VTK's own convex point set volumes [lib]
    np.testing.assert_allclose(mesh.cell_measures, vtk_volumes, rtol=1e-9)


def test_rotated_cube_is_a_hexahedron_and_prisms_split_about_their_centre(tmp_path):
    rng = np.random.default_rng(3)
    cube = np.array([[a, b, c] for a in (0, 1) for b in (0, 1) for c in (0, 1)], float) @ _rotation(0.3, 0.5).T
    angles = np.arange(5) * 2 * np.pi / 5
    ring = np.c_[np.cos(angles), np.sin(angles)]
    prism = np.vstack([np.c_[ring, np.zeros(5)], np.c_[ring, np.ones(5)]]) + [3, 0, 0]
    wedge = np.array([[0, 0, 0], [2, 0, 0], [0, 1, 0], [0, 0, 3], [2, 0, 3], [0, 1, 3]], float) + [6, 0, 0]
    points = np.vstack([cube, prism, wedge])
    cells = [rng.permutation(8), 8 + rng.permutation(10), 18 + rng.permutation(6)]
    path = str(tmp_path / "odd.vtu")
    grid = _write(path, points, cells, values=np.array([0.25, 0.5, 0.75]))
    step = Series(path).read(0)
    mesh = step.mesh
    assert mesh.cell_type_counts["hexahedron"] == 1 and set(mesh.cell_type_counts) == {"hexahedron", "tetra"}
    pentagon = 5 / 2 * np.sin(2 * np.pi / 5)  # area of the unit-circumradius pentagon
    exact = np.array([1.0, pentagon, 3.0])  # unit cube, pentagonal prism of height 1, wedge 2 x 1 / 2 x 3
    owner = step.fields.cell_data["c"]
    np.testing.assert_allclose([mesh.cell_measures[owner == v].sum() for v in (0.25, 0.5, 0.75)], exact,
                               rtol=1e-12)
    np.testing.assert_allclose(grid.compute_cell_sizes()["Volume"], exact, rtol=1e-9)  # [lib]
    assert mesh.inverted_cells == 0
    # the centres carry their corners' mean of the point data (linear field p = x + 2 y: exact)
    p = step.fields.point_data["p"]
    np.testing.assert_allclose(p, mesh.points[:, 0] + 2 * mesh.points[:, 1], atol=1e-12)
    desc = describe_series(path)
    assert desc["cells_read_as"].startswith("convex point set cells (VTK 41) read 1 as hexahedra, "
                                            "2 split about their centre into")


def test_inspect_says_how_cells_were_read_and_prints_json_without_meshio_warnings(tmp_path):
    rng = np.random.default_rng(4)
    points, cells, _ = _grid_2d(np.linspace(0, 1, 5), np.linspace(0, 1, 4), rng)
    folder = tmp_path / "run"
    folder.mkdir()
    for i in range(3):
        _write(str(folder / f"s_{i}.vtu"), points, cells)
    env = dict(os.environ, PYTHONPATH=os.pathsep.join(sys.path))
    done = subprocess.run([sys.executable, "-m", "phasegauge", "inspect", str(folder), "--json"],
                          capture_output=True, text=True, env=env, check=True)
    desc = json.loads(done.stdout)
    assert desc["cells"] == 12 and desc["cell_types"] == {"quad": 12}
    assert desc["cells_read_as"] == "convex point set cells (VTK 41) read 12 as quads"
    assert "meshio" not in done.stderr and "type 41" not in done.stderr
    text = subprocess.run([sys.executable, "-m", "phasegauge", "inspect", str(folder)],
                          capture_output=True, text=True, env=env, check=True)
    assert "read as     convex point set cells (VTK 41) read 12 as quads" in text.stdout


def test_face_centres_written_in_the_file_are_no_duplicate_points(tmp_path):
    # boxes written as convex point sets of their 8 corners and their two x-face centres, a face centre
    # one point of the file shared by the two cells: the file has no two points alike (numpy's unique),
    # so no "duplicate points merged" warning, though the reader's own centres of the split's faces fall on
    # those points; the same file with one corner written twice still says 1 (the duplicate it has)
    import warnings

    from phasegauge.errors import MeshWarning

    n = 3
    xs = np.linspace(0.0, 1.0, n + 1)
    X, Y, Z = np.meshgrid(xs, xs, xs, indexing="ij")
    corners = np.c_[X.ravel(), Y.ravel(), Z.ravel()]
    index = lambda i, j, k: (i * (n + 1) + j) * (n + 1) + k  # noqa: E731
    centres, cells = {}, []
    for i in range(n):
        for j in range(n):
            for k in range(n):
                box = [index(i + a, j + b, k + c) for a in (0, 1) for b in (0, 1) for c in (0, 1)]
                faces = []
                for a in (i, i + 1):
                    key = (a, j, k)
                    if key not in centres:
                        centres[key] = len(corners) + len(centres)
                    faces.append(centres[key])
                cells.append(box + faces)
    extra = np.array([[xs[a], 0.5 * (xs[j] + xs[j + 1]), 0.5 * (xs[k] + xs[k + 1])] for a, j, k in centres])
    points = np.vstack([corners, extra])
    assert np.unique(points, axis=0).shape[0] == points.shape[0]
    path = str(tmp_path / "boxes.vtu")
    _write(path, points, cells)
    with warnings.catch_warnings():
        warnings.simplefilter("error", MeshWarning)
        mesh = Series(path).read(0).mesh
    np.testing.assert_allclose(mesh.cell_measures.sum(), 1.0, rtol=1e-12)  # the unit box (elementary)
    twice = np.vstack([points, points[:1]])
    cells[0] = [len(points) if p == 0 else p for p in cells[0]]
    _write(str(tmp_path / "twice.vtu"), twice, cells)
    with pytest.warns(MeshWarning, match=r"^.*: 1 duplicate points merged"):
        Series(str(tmp_path / "twice.vtu")).read(0)
