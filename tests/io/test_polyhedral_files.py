"""Files with polyhedral cells (VTK 42) and 2D polygons (VTK 7) of any size, mixed with other cells.

Outside checks: files written by VTK itself (pyvista 0.49 / VTK 9: .vtu format 2.3 with
`face_connectivity`, and legacy .vtk 5.1) and by meshio (.vtu with `faces`/`faceoffsets`);
cell sizes from pyvista's `compute_cell_sizes` of the same files [lib]; contour areas from
pyvista's `contour` filter [lib]; exact volumes and areas of a box (elementary geometry).
"""

import numpy as np
import pytest

pv = pytest.importorskip("pyvista")

from phasegauge.analysis.interface import find_interface  # noqa: E402
from phasegauge.errors import UnsupportedMeshError  # noqa: E402
from phasegauge.io import Series  # noqa: E402
from phasegauge.io.describe import describe_series  # noqa: E402
from phasegauge.meshgen import grid_mesh, to_polyhedral_grid  # noqa: E402
from phasegauge.model._threads import _glibc  # noqa: E402

# hexahedra written as polyhedra, split as polyhedra of other shapes are (conftest)
pytestmark = pytest.mark.usefixtures("every_polyhedron_split")


def _affine(mesh, seed=0):
    """The mesh's points mapped by a random affine map (faces stay flat; VTK's volumes are exact)."""
    rng = np.random.default_rng(seed)
    A = np.eye(3) + 0.3 * rng.standard_normal((3, 3))
    if np.linalg.det(A) < 0:
        A[:, 0] *= -1
    return A


def _written(tmp_path, kind="hexahedron", shape=(4, 3, 5), name="poly.vtu", reverse=False, seed=0):
    m = grid_mesh(shape, kind=kind, bounds=[(0, 1), (0, 2), (0, 0.5)], seed=seed)
    A = _affine(m, seed)
    points = m.points @ A.T
    grid = to_polyhedral_grid(m, reverse=reverse)
    grid.points = points
    grid.cell_data["id"] = np.arange(m.n_cells, dtype=float)
    grid.point_data["p"] = points @ np.array([1.0, -0.5, 2.0])
    path = str(tmp_path / name)
    grid.save(path)
    return path, grid, abs(np.linalg.det(A)) * m.cell_measures


def _per_cell(step):
    ids = step.fields.cell_data["id"].astype(int)
    return np.bincount(ids, weights=step.mesh.cell_measures)


@pytest.mark.parametrize("kind", ["hexahedron", "mixed"])
@pytest.mark.parametrize("suffix", [".vtu", ".vtk"])
def test_polyhedra_written_by_vtk_read_against_pyvista(tmp_path, kind, suffix):
    path, grid, volumes = _written(tmp_path, kind=kind, name="poly" + suffix)
    step = Series(path).read(0)
    assert set(step.mesh.cell_type_counts) == {"tetra"} and step.mesh.inverted_cells == 0
    # every polyhedron's tetrahedra add up to its exact volume (affine images of boxes, prisms
    # and pyramids) and to VTK's volume of it [lib]; VTK 9.7 gives some of the pyramids written
    # as polyhedra no volume (0), so those are left out of the comparison with VTK
    got = _per_cell(step)
    np.testing.assert_allclose(got, volumes, rtol=1e-11)
    vtk_volumes = grid.compute_cell_sizes()["Volume"]
    measured = vtk_volumes > 0
    assert np.count_nonzero(measured) >= 0.8 * measured.size
    np.testing.assert_allclose(got[measured], vtk_volumes[measured], rtol=1e-11)
    # the added centres carry the corners' mean of the point data (a linear field: exact)
    p = step.fields.point_data["p"]
    np.testing.assert_allclose(p, step.mesh.points @ np.array([1.0, -0.5, 2.0]), atol=1e-12)
    desc = describe_series(path)
    assert "polyhedral cells (VTK 42) read as" in desc["cells_read_as"]


def test_inward_faces_read_alike(tmp_path):
    path, grid, volumes = _written(tmp_path, reverse=True)
    step = Series(path).read(0)
    assert step.mesh.inverted_cells == 0
    np.testing.assert_allclose(_per_cell(step), volumes, rtol=1e-11)


def test_polyhedra_mixed_with_hexahedra_tetrahedra_and_polygons(tmp_path):
    # a column of polyhedra beside ordinary hexahedra, with tetrahedra and boundary polygons in
    # the same file: the hexahedra are split like the polyhedra, so the shared faces conform
    m = grid_mesh((4, 2, 2), kind="hexahedron", jitter=0.25, seed=3)
    conn = m.blocks[0].connectivity
    as_poly = to_polyhedral_grid(m)
    poly_ids = np.arange(0, m.n_cells, 2)
    parts = [as_poly.extract_cells(poly_ids).cast_to_unstructured_grid()]
    hexa = pv.UnstructuredGrid({pv.CellType.HEXAHEDRON: conn[1::2]}, m.points)
    parts.append(hexa)
    corner = np.array([[5.0, 0, 0], [6, 0, 0], [5, 1, 0], [5, 0, 1]])  # a unit right tetrahedron apart
    parts.append(pv.UnstructuredGrid({pv.CellType.TETRA: np.array([[0, 1, 2, 3]])}, corner))
    pentagon = pv.UnstructuredGrid(np.array([5, 0, 1, 2, 3, 4]), [pv.CellType.POLYGON],
                                   np.array([[0, 0, -1], [1, 0, -1], [1.3, 0.6, -1], [0.5, 1, -1], [-0.3, 0.6, -1]]))
    grid = parts[0].merge(parts[1:] + [pentagon], merge_points=True)
    grid.cell_data["id"] = np.arange(grid.n_cells, dtype=float)
    path = str(tmp_path / "mixed.vtu")
    grid.save(path)
    step = Series(path).read(0)
    got = _per_cell(step)
    # the unit box (trilinear hexahedra, flat outer faces: exact) and the tetrahedron, 1/6
    assert got.sum() == pytest.approx(1.0 + 1 / 6, rel=1e-12)
    is_tetra = grid.celltypes[grid.celltypes != pv.CellType.POLYGON] == pv.CellType.TETRA
    assert got[is_tetra][0] == pytest.approx(1 / 6, rel=1e-14)
    # VTK's volumes [lib]: the tetrahedron's exactly; for the polyhedra and hexahedra with bent
    # faces (cut along their shorter diagonals, each hexahedron like a polyhedron) VTK and the
    # split differ per cell at O(jitter^2) (here under 15%; the box's total is exact, above)
    vtk_sizes = grid.compute_cell_sizes()["Volume"]
    np.testing.assert_allclose(got[16], vtk_sizes[16], rtol=1e-12)
    np.testing.assert_allclose(got[:16], vtk_sizes[:16], rtol=0.15)
    assert step.mesh.boundary_type_counts == {"polygon": 1}
    assert step.mesh.inverted_cells == 0
    # conforming: the face neighbours of the tetrahedra join every cell of the box into one piece
    from scipy.sparse.csgraph import connected_components

    n, _ = connected_components(step.mesh.adjacency("face"), directed=False)
    assert n == 2  # the box and the tetrahedron apart


def test_meshio_polyhedra_of_the_older_format(tmp_path):
    # meshio writes .vtu polyhedra with the `faces` and `faceoffsets` arrays (format before 2.3)
    import meshio

    from phasegauge.model.cells import FACES

    m = grid_mesh((3, 2, 2), kind="hexahedron", seed=5)
    faces = [[list(row[list(f)]) for f in FACES["hexahedron"]] for row in m.blocks[0].connectivity]
    out = meshio.Mesh(m.points, [("polyhedron8", faces)], cell_data={"id": [np.arange(m.n_cells, dtype=float)]})
    path = str(tmp_path / "meshio.vtu")
    out.write(path)
    step = Series(path).read(0)
    np.testing.assert_allclose(_per_cell(step), m.cell_measures, rtol=1e-12)  # exact box volumes
    np.testing.assert_allclose(_per_cell(step), pv.read(path).compute_cell_sizes()["Volume"], rtol=1e-12)  # [lib]


@pytest.mark.parametrize("field", ["linear", "ball"])
def test_contour_on_polyhedra_against_pyvista(tmp_path, field):
    m = grid_mesh((10, 10, 10), kind="hexahedron", seed=2)
    X = m.points
    r = np.linalg.norm(X - 0.5, axis=1)
    c = (X[:, 2] - 0.37) / 0.5 + 0.5 if field == "linear" else 0.5 - (r - 0.3) / 0.2
    grid = to_polyhedral_grid(m, point_data={"c": c})
    path = str(tmp_path / "ball.vtu")
    grid.save(path)
    step = Series(path).read(0)
    area = find_interface(step.mesh, step.fields.point_data["c"]).size
    iso = grid.contour([0.5], scalars="c")  # VTK's contour of its polyhedra [lib]
    reference = float(np.abs(iso.compute_cell_sizes(length=False, area=True, volume=False)["Area"]).sum())
    if field == "linear":  # the plane z = 0.37 across the unit box: both exact
        assert area == pytest.approx(1.0, rel=1e-12) and reference == pytest.approx(1.0, rel=1e-9)
    else:  # different interpolants inside the cells: within 1% (sphere area 4 pi 0.3^2 to 5%)
        assert area == pytest.approx(reference, rel=1e-2)
        assert 0.95 * 4 * np.pi * 0.09 < area < 4 * np.pi * 0.09  # the sphere's area, from below


def test_polygons_of_several_sizes_in_2d_against_pyvista(tmp_path):
    points = np.array([[0, 0, 0], [1, 0, 0], [2, 0, 0], [2, 1, 0], [1, 1, 0], [0, 1, 0], [1.5, 1.8, 0],
                       [0.5, 1.6, 0], [-0.5, 0.5, 0], [2.6, 0.4, 0]], float)
    cells = np.array([5, 0, 1, 4, 7, 5, 4, 1, 2, 3, 4, 3, 4, 3, 6, 3, 0, 5, 8, 3, 2, 9, 3])
    types = [pv.CellType.POLYGON, pv.CellType.POLYGON, pv.CellType.TRIANGLE, pv.CellType.TRIANGLE,
             pv.CellType.TRIANGLE]
    grid = pv.UnstructuredGrid(cells, types, points)
    grid.cell_data["id"] = np.arange(5.0)
    grid.point_data["c"] = points[:, 0] / 2.6
    path = str(tmp_path / "polygons.vtu")
    grid.save(path)
    step = Series(path).read(0)
    assert step.mesh.dimension == 2 and step.mesh.cell_type_counts == {"polygon": 2, "triangle": 3}
    np.testing.assert_allclose(_per_cell(step), grid.compute_cell_sizes()["Area"], rtol=1e-12)  # [lib]
    # the line x = 1.3 (c = 0.5 of a linear c): through the quad (y 0 to 1) and the triangle
    # (y 1 to 1.48), exact length 1.48 (elementary geometry); VTK's contour [lib] alike
    length = find_interface(step.mesh, step.fields.point_data["c"]).size
    iso = grid.contour([0.5], scalars="c")  # [lib]
    reference = float(np.abs(iso.compute_cell_sizes(length=True, area=False, volume=False)["Length"]).sum())
    assert length == pytest.approx(1.48, rel=1e-12) and reference == pytest.approx(1.48, rel=1e-6)


@pytest.mark.parametrize("damage, match", [("open", "not closed"), ("turned", "inconsistent orientations")])
def test_bad_polyhedra_are_refused_naming_the_file(tmp_path, damage, match):
    m = grid_mesh((2, 1, 1), kind="hexahedron")
    from phasegauge.model.cells import FACES

    stream = []
    for c, row in enumerate(m.blocks[0].connectivity):
        faces = [list(row[list(f)]) for f in FACES["hexahedron"]]
        if c == 1 and damage == "open":  # the second cell of the file
            faces = faces[:-1]
        if c == 1 and damage == "turned":
            faces[0] = faces[0][::-1]
        stream += [sum(len(f) + 1 for f in faces) + 1, len(faces)] + [x for f in faces for x in [len(f), *f]]
    grid = pv.UnstructuredGrid(np.array(stream), [pv.CellType.POLYHEDRON] * 2, m.points)
    path = str(tmp_path / "bad.vtu")
    grid.save(path)
    with pytest.raises(UnsupportedMeshError, match=match) as err:
        Series(path).read(0)
    text = str(err.value)
    assert "bad.vtu" in text and "closed surface" in text and "\n" not in text
    assert "the first: cell 1)" in text  # the file's cell number


_HEAP = """
import numpy as np
from phasegauge.model._threads import heap_back_to_system
def rss_mb():
    with open("/proc/self/statm") as f:
        return int(f.read().split()[1]) * 4096 / 2 ** 20
blocks = [np.ones(8000) for _ in range(4000)]  # 64 KB each: below glibc's mapping threshold, in the heap
blocks = blocks[-1:]  # (the last kept: the heap's top stays in use, so free() alone gives nothing back)
before = rss_mb()
heap_back_to_system()
print(before, rss_mb())
"""


@pytest.mark.skipif(_glibc() is None, reason="malloc_trim is glibc's")
def test_the_heap_goes_back_before_vtk_reads_a_step(tmp_path, monkeypatch):
    """VTK's reader maps the file's arrays beside the heap, so what the heap keeps free is handed back
    first. Outside check: the resident size the Linux kernel counts (/proc/self/statm), in a fresh
    process, drops by most of 250 MB freed inside the heap."""
    import subprocess
    import sys

    import phasegauge.io._polyhedra as polyhedra

    from conftest import subprocess_env

    # (without the user's allocator settings: a mapping threshold would keep the blocks out of the heap)
    done = subprocess.run([sys.executable, "-c", _HEAP], capture_output=True, text=True, timeout=120,
                          env=subprocess_env(malloc_defaults=True))
    assert done.returncode == 0, done.stderr
    before, after = (float(x) for x in done.stdout.split())
    assert before - after > 150, (before, after)
    calls = []
    real = polyhedra.heap_back_to_system
    monkeypatch.setattr(polyhedra, "heap_back_to_system", lambda: calls.append(1) or real())
    path = _written(tmp_path)[0]
    Series(path).read(0)
    assert calls == [1]
