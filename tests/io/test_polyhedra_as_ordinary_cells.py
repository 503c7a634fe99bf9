"""Files whose polyhedra (VTK 42) are all hexahedra, wedges, pyramids or tetrahedra written as faces.

Such a file is read as those ordinary cells (``io/_polyhedra._ordinary_cells``); beside polyhedra of
other shapes they are kept whole too (``tests/io/test_polyhedra_beside_whole_cells.py``), and a file
with no ordinary cell is split into tetrahedra (``tests/io/test_polyhedral_files.py``).

Outside checks: the files are written by VTK itself (pyvista) [lib]; cell volumes against pyvista's
``compute_cell_sizes`` of the polyhedra (affine images of boxes, flat faces: exact) [lib]; the volume
of the unit cube (elementary geometry); the whole run against the same cells written as ordinary
VTK hexahedra and read by meshio [lib] (the same cells: the same numbers to round-off).
"""

import numpy as np
import pytest

pv = pytest.importorskip("pyvista")

from phasegauge import measure  # noqa: E402
from phasegauge.io import Series  # noqa: E402
from phasegauge.io.describe import describe_series  # noqa: E402
from phasegauge.meshgen import grid_mesh, to_meshio, to_polyhedral_grid  # noqa: E402


def _sheared(kind, seed=0):
    mesh = grid_mesh((4, 3, 5), kind=kind, bounds=[(0, 1), (0, 2), (0, 0.5)], seed=seed)
    rng = np.random.default_rng(seed)
    A = np.eye(3) + 0.3 * rng.standard_normal((3, 3))
    A[:, 0] *= np.sign(np.linalg.det(A))
    return mesh, mesh.points @ A.T


@pytest.mark.parametrize("reverse", [False, True])
@pytest.mark.parametrize("kind", ["hexahedron", "mixed", "wedge", "pyramid", "tetra"])
def test_polyhedra_read_as_the_cells_they_are(tmp_path, kind, reverse):
    mesh, points = _sheared(kind)
    grid = to_polyhedral_grid(mesh, reverse=reverse)
    grid.points = points
    grid.cell_data["id"] = np.arange(mesh.n_cells, dtype=float)
    path = str(tmp_path / "poly.vtu")
    grid.save(path)
    step = Series(path).read(0)
    read = step.mesh
    assert read.cell_parents is None and read.n_cells == mesh.n_cells
    assert set(read.cell_type_counts) == set(mesh.cell_type_counts)
    assert read.inverted_cells == 0 and np.all(read.signed_measures > 0)
    # each cell's volume, matched through its id: the affine image of the cell's exact volume, and
    # VTK's volume of the polyhedron [lib] (VTK 9.7 gives some pyramids written as polyhedra none: left out)
    ids = step.fields.cell_data["id"].astype(int)
    A = np.linalg.lstsq(mesh.points - mesh.points[0], points - points[0], rcond=None)[0]
    np.testing.assert_allclose(read.cell_measures, abs(np.linalg.det(A)) * mesh.cell_measures[ids], rtol=1e-11)
    vtk_volumes = grid.compute_cell_sizes()["Volume"][ids]
    measured = vtk_volumes > 0
    assert np.count_nonzero(measured) >= 0.6 * measured.size  # a third of the pyramids go without
    np.testing.assert_allclose(read.cell_measures[measured], vtk_volumes[measured], rtol=1e-11)
    assert "read as the ordinary cells their faces make" in describe_series(path)["cells_read_as"]


def test_a_run_on_hexahedra_written_as_polyhedra_equals_the_run_on_the_hexahedra(tmp_path):
    mesh = grid_mesh((12, 12, 12), kind="hexahedron", jitter=0.25, seed=7)
    X = mesh.points
    c = 0.5 * (1 - np.tanh((np.linalg.norm(X - 0.5, axis=1) - 0.3) / 0.06))
    (tmp_path / "poly").mkdir()
    (tmp_path / "hexa").mkdir()
    grid = to_polyhedral_grid(mesh, point_data={"c": c})
    grid.save(str(tmp_path / "poly" / "step_0.vtu"))
    to_meshio(mesh, point_data={"c": c}).write(str(tmp_path / "hexa" / "step_0.vtu"))
    read = Series(str(tmp_path / "poly")).read(0).mesh
    np.testing.assert_allclose(read.total_measure, 1.0, rtol=1e-12)  # the unit cube
    runs = [measure(str(tmp_path / name), "c", out=str(tmp_path / f"out_{name}")).steps for name in ("poly", "hexa")]
    for column in ("phase_volume", "interface_size", "width_threshold_free", "mean_indicator", "droplet_count"):
        np.testing.assert_allclose(runs[0][column], runs[1][column], rtol=1e-9, err_msg=column)


def test_one_polyhedron_of_another_shape_leaves_the_others_whole(tmp_path):
    from phasegauge.model.cells import FACES

    mesh = grid_mesh((3, 3, 3), kind="hexahedron", jitter=0.2, seed=1)
    stream = []
    for k, row in enumerate(mesh.blocks[0].connectivity):
        faces = [list(row[list(f)]) for f in FACES["hexahedron"]]
        if k == 0:  # the first cell's first face (on the boundary) cut into two triangles: 7 faces, no ordinary cell
            a, b, c, d = faces[0]
            faces[:1] = [[a, b, c], [a, c, d]]
        cell = [len(faces)] + [x for f in faces for x in [len(f), *f]]
        stream += [len(cell), *cell]
    types = np.full(mesh.n_cells, pv.CellType.POLYHEDRON, np.uint8)
    path = str(tmp_path / "odd.vtu")
    pv.UnstructuredGrid(np.array(stream), types, mesh.points).save(path)
    read = Series(path).read(0).mesh
    # it alone read as pyramids (5 quads) and tetrahedra (2 triangles) about its centre
    # (tests/io/test_polyhedra_beside_whole_cells.py)
    assert read.cell_type_counts == {"hexahedron": mesh.n_cells - 1, "pyramid": 5, "tetra": 2}
    assert read.n_whole_cells == mesh.n_cells
    np.testing.assert_allclose(read.total_measure, mesh.total_measure, rtol=1e-12)


@pytest.mark.parametrize("read_as", ["hexahedra", "split"])
def test_a_series_reads_its_polyhedra_once(tmp_path, monkeypatch, read_as):
    # the recognition (or, polyhedra of other shapes, the split) is made for the first step and taken
    # from the pooled mesh for the others: the same mesh object, each step's own point values
    from phasegauge.io import _polyhedra
    from phasegauge.model import _polyhedron_shapes, polyhedra

    mesh = grid_mesh((3, 3, 3), kind="hexahedron", jitter=0.2, seed=6)
    grid = to_polyhedral_grid(mesh)
    for k in range(3):
        grid.point_data["c"] = mesh.points[:, 0] * (k + 1) / 3
        grid.save(str(tmp_path / f"step_{k}.vtu"))
    if read_as == "split":
        monkeypatch.setattr(_polyhedra, "_ordinary_cells", lambda points, made, **_: None)  # (conftest's fixture)
    module, name = (polyhedra, "split_polyhedra") if read_as == "split" else (_polyhedron_shapes, "ordinary_shapes")
    calls, original = [], getattr(module, name)
    monkeypatch.setattr(module, name, lambda *a, **k: calls.append(1) or original(*a, **k))
    series = Series(str(tmp_path))
    steps = [series.read(k) for k in range(3)]
    assert len(calls) == 1 and steps[0].mesh is steps[2].mesh
    assert set(steps[0].mesh.cell_type_counts) == ({"tetra"} if read_as == "split" else {"hexahedron"})
    # each step's own point values (the split's centres as their corners' means: a linear field, exact)
    for k, step in enumerate(steps):
        np.testing.assert_allclose(step.fields.point_data["c"], step.mesh.points[:, 0] * (k + 1) / 3, atol=1e-14)


@pytest.mark.parametrize("vtk_type", [25, 26, 27, 32])
def test_quadratic_cells_beside_polyhedra_keep_their_corners(tmp_path, vtk_type):
    # regression (found by review): a quadratic wedge (VTK 26, 32) or pyramid (27) beside polyhedra that
    # are all ordinary cells was kept under meshio's quadratic name (refused) or in VTK's wedge order
    # (inverted); its linear corners are kept, a wedge's in meshio's order. Volumes: elementary geometry.
    from phasegauge.model.cells import FACES

    cube = grid_mesh((1, 1, 1), kind="hexahedron")
    faces = [[int(cube.blocks[0].connectivity[0][i]) for i in f] for f in FACES["hexahedron"]]
    poly = [len(faces)] + [x for f in faces for x in (len(f), *f)]
    if vtk_type == 25:  # hexahedron20
        W = [(3, 0, 0), (4, 0, 0), (4, 1, 0), (3, 1, 0), (3, 0, 1), (4, 0, 1), (4, 1, 1), (3, 1, 1)]
        edges = [(0, 1), (1, 2), (2, 3), (3, 0), (4, 5), (5, 6), (6, 7), (7, 4), (0, 4), (1, 5), (2, 6), (3, 7)]
        volume = 1.0
    elif vtk_type == 27:  # pyramid13
        W = [(3, 0, 0), (4, 0, 0), (4, 1, 0), (3, 1, 0), (3.5, 0.5, 1)]
        edges = [(0, 1), (1, 2), (2, 3), (3, 0), (0, 4), (1, 4), (2, 4), (3, 4)]
        volume = 1 / 3
    else:  # wedge15, wedge18 (VTK's order: the first triangle counter-clockwise from the second)
        W = [(3, 0, 0), (4, 0, 0), (3, 1, 0), (3, 0, 1), (4, 0, 1), (3, 1, 1)]
        edges = [(0, 1), (1, 2), (2, 0), (3, 4), (4, 5), (5, 3), (0, 3), (1, 4), (2, 5)]
        volume = 0.5
    W = np.array(W, float)
    Q = np.vstack([W, [(W[a] + W[b]) / 2 for a, b in edges]])
    if vtk_type == 32:  # wedge18: the three quad faces' centres too
        Q = np.vstack([Q, [W[[0, 1, 4, 3]].mean(axis=0), W[[1, 2, 5, 4]].mean(axis=0), W[[2, 0, 3, 5]].mean(axis=0)]])
    n0 = cube.n_points
    cells = np.array([len(poly), *poly, len(Q), *range(n0, n0 + len(Q))])
    path = str(tmp_path / "mixed.vtu")
    pv.UnstructuredGrid(cells, np.array([42, vtk_type], np.uint8), np.vstack([cube.points, Q])).save(path)
    read = Series(path).read(0).mesh
    assert read.inverted_cells == 0 and np.all(read.signed_measures > 0)
    np.testing.assert_allclose(np.sort(read.cell_measures), np.sort([1.0, volume]), rtol=1e-12)


def test_faces_that_do_not_close_are_refused_with_recognition_on(tmp_path):
    # the polyhedra's own checks still refuse what is no closed, consistently oriented surface
    from phasegauge.errors import UnsupportedMeshError
    from phasegauge.model.cells import FACES

    mesh = grid_mesh((2, 1, 1), kind="hexahedron")
    for how in ("open", "turned"):
        stream = []
        for k, row in enumerate(mesh.blocks[0].connectivity):
            faces = [list(row[list(f)]) for f in FACES["hexahedron"]]
            if k == 0 and how == "open":
                faces = faces[1:]
            if k == 0 and how == "turned":
                faces[0] = faces[0][::-1]
            cell = [len(faces)] + [x for f in faces for x in [len(f), *f]]
            stream += [len(cell), *cell]
        path = str(tmp_path / f"{how}.vtu")
        pv.UnstructuredGrid(np.array(stream), np.full(2, 42, np.uint8), mesh.points).save(path)
        with pytest.raises(UnsupportedMeshError, match="closed surface|outward"):
            Series(path).read(0)
