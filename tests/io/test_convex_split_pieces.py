"""Convex point set cells split about their centre are pieces of one cell: sizes and counts are the cell's.

Outside checks: VTK's own volumes of the same cells written as wedges (pyvista `compute_cell_sizes`) [lib];
the same mesh written as ordinary wedge cells, read by meshio, as the second way to the same counts;
the unit cube's volume and the 1/8 x 1/6 rectangles of a 2D grid (elementary geometry).
"""

import numpy as np
import pytest

pv = pytest.importorskip("pyvista")

from phasegauge.analysis.interface import interface_metrics  # noqa: E402
from phasegauge.analysis.thermo import bulk_compositions  # noqa: E402
from phasegauge.io import Series  # noqa: E402
from phasegauge.io.describe import describe_series  # noqa: E402
from phasegauge.meshgen import grid_mesh, to_meshio  # noqa: E402

CONVEX_POINT_SET = 41
N = 10


def _drop(points):
    return 0.5 * (1 - np.tanh((np.linalg.norm(points - 0.5, axis=1) - 0.3) / 0.06))


def _pair(tmp_path):
    """The same wedge mesh as wedge cells and as convex point sets (corners shuffled, split about their centre)."""
    mesh = grid_mesh((N, N, N), kind="wedge")
    c = _drop(mesh.cell_centroids)
    wedges = str(tmp_path / "wedges" / "w_0.vtu")
    (tmp_path / "wedges").mkdir()
    to_meshio(mesh, cell_data={"c": c}).write(wedges)
    rng = np.random.default_rng(5)
    cells = [rng.permutation(row) for row in mesh.blocks[0].connectivity]
    flat = np.concatenate([[len(row), *row] for row in cells]).astype(np.int64)
    grid = pv.UnstructuredGrid(flat, np.full(len(cells), CONVEX_POINT_SET, np.uint8), mesh.points)
    grid.cell_data["c"] = c
    (tmp_path / "convex").mkdir()
    convex = str(tmp_path / "convex" / "p_0.vtu")
    grid.save(convex)
    return wedges, convex, mesh


def test_pieces_of_a_split_cell_take_the_whole_cells_size_and_count_once(tmp_path):
    wedges, convex, mesh = _pair(tmp_path)
    whole = Series(wedges).read(0).mesh
    split = Series(convex).read(0).mesh
    assert split.cell_type_counts == {"tetra": split.n_cells} and split.n_cells > whole.n_cells  # split, as before
    # regression: the pieces were not marked, so each tetrahedron counted as a cell of its own size
    assert split.cell_parents is not None
    assert split.n_whole_cells == whole.n_cells == whole.n_whole_cells == len(mesh.blocks[0])
    volumes = pv.read(wedges).compute_cell_sizes()["Volume"]  # VTK's wedge volumes [lib]
    # a wedge's size is the side of the cube two such wedges fill: the grid's spacing (elementary
    # geometry); the convex cells, named by no type, take the side of the cube of their volume
    np.testing.assert_allclose(whole.cell_sizes, (2 * volumes) ** (1 / 3), rtol=1e-12)
    np.testing.assert_allclose(whole.cell_sizes, 1 / N, rtol=1e-12)
    vtk_sizes = volumes ** (1 / 3)
    np.testing.assert_allclose(split.cell_sizes, vtk_sizes[split.cell_parents], rtol=1e-12)
    # some pieces' sizes without the mesh-wide array: the same numbers, and only whole cells' sizes kept
    some = np.arange(0, split.n_cells, 3)
    assert np.array_equal(split.cell_sizes_of(some), split.cell_sizes[some])
    np.testing.assert_allclose(split.cell_sizes_of(some), vtk_sizes[split.cell_parents[some]], rtol=1e-12)  # [lib]
    assert split._whole_cell_sizes.size == whole.n_cells
    assert describe_series(convex)["cells"] == describe_series(wedges)["cells"] == whole.n_cells
    # the bulk cells of each phase are counted as cells, not pieces
    c_whole = _drop(whole.cell_centroids)
    c_split = c_whole[split.cell_parents]  # each piece holds its cell's value, as the reader gives it
    counts = [bulk_compositions(m, c, c - 0.5, width=0.01, multiple=1.0) for m, c in
              ((whole, c_whole), (split, c_split))]
    assert counts[0]["bulk_cells_rich"] == counts[1]["bulk_cells_rich"] > 0
    assert counts[0]["bulk_cells_lean"] == counts[1]["bulk_cells_lean"] > 0


def test_interface_resolution_of_split_cells_is_that_of_the_cells(tmp_path):
    wedges, convex, _ = _pair(tmp_path)
    volume = float(np.median(pv.read(wedges).compute_cell_sizes()["Volume"]))  # VTK [lib]
    # the wedges: the side of the cube two of them fill, the grid's spacing; the convex cells split
    # about their centres: the side of the cube of the whole cell's volume
    for path, size in ((wedges, (2 * volume) ** (1 / 3)), (convex, volume ** (1 / 3))):
        mesh = Series(path).read(0).mesh
        figures = interface_metrics(mesh, _drop(mesh.points))  # the drop on the points, exact
        # the cell size along the interface (width over width in cells) is the whole cells' on both
        # meshes; the pieces' size was about 1 / 12 ** (1 / 3) of it
        h_interface = figures["interface_width"] / figures["interface_width_cells"]
        assert h_interface == pytest.approx(size, rel=1e-9), path
    assert (2 * volume) ** (1 / 3) == pytest.approx(1 / N, rel=1e-12)


def test_neighbouring_split_cells_share_their_face_centres_and_the_mesh_is_measured(tmp_path):
    # regression: each cell's hull cut its quad faces along its own diagonal, so two split neighbours
    # cut a shared face differently; the faces did not match and measure refused the mesh as overlapping
    from phasegauge import measure

    wedges, convex, mesh = _pair(tmp_path)
    split = Series(convex).read(0).mesh
    np.testing.assert_allclose(split.total_measure, 1.0, rtol=1e-12)  # the unit cube (elementary geometry)
    corners = split.boundary_faces[0]
    middle = np.array([split.points[row[row >= 0]].mean(axis=0) for row in corners])
    on_surface = np.any(np.isclose(middle, 0.0, atol=1e-12) | np.isclose(middle, 1.0, atol=1e-12), axis=1)
    assert on_surface.all(), f"{np.count_nonzero(~on_surface)} faces inside the cube are unmatched"
    tables = [measure(path, field="c").steps.iloc[0] for path in (wedges, convex)]
    assert tables[1]["phase_volume"] == pytest.approx(tables[0]["phase_volume"], rel=1e-12)  # the same cell data


def test_pieces_stay_marked_in_a_multiblock_file(tmp_path):
    # regression: joining the volume blocks of a .vtm file dropped the marks of split cells
    wedges, convex, mesh = _pair(tmp_path)
    block = pv.read(convex)
    other = pv.read(wedges).translate((2.0, 0.0, 0.0))  # ordinary wedges beside it
    path = str(tmp_path / "step_0.vtm")
    pv.MultiBlock({"internal": block, "more": other}).save(path)
    joined = Series(path).read(0).mesh
    assert joined.cell_parents is not None
    assert joined.n_whole_cells == 2 * len(mesh.blocks[0])
    # the convex cells' pieces: the cube of the whole cell's volume; the wedges kept whole beside
    # them: the side of the cube two of them fill, the grid's spacing (elementary geometry)
    whole = joined.cell_types == "wedge"
    assert whole.sum() == len(mesh.blocks[0])
    np.testing.assert_allclose(joined.cell_sizes[~whole], (0.5 / N ** 3) ** (1 / 3), rtol=1e-9)
    np.testing.assert_allclose(joined.cell_sizes[whole], 1 / N, rtol=1e-9)


@pytest.mark.parametrize("kind", ["polygon", "convex"])
def test_polygon_mesh_counts_and_sizes_equal_the_same_mesh_as_quads(tmp_path, kind):
    quads = grid_mesh((8, 6))
    c = _drop(np.c_[quads.cell_centroids, np.full(quads.n_cells, 0.5)])
    (tmp_path / "q").mkdir()
    (tmp_path / "p").mkdir()
    to_meshio(quads, cell_data={"c": c}).write(str(tmp_path / "q" / "q_0.vtu"))
    if kind == "polygon":
        to_meshio(grid_mesh((8, 6), kind="polygon"), cell_data={"c": c}).write(str(tmp_path / "p" / "p_0.vtu"))
    else:  # convex point sets with shuffled corners
        rng = np.random.default_rng(7)
        rows = [rng.permutation(row) for row in quads.blocks[0].connectivity]
        flat = np.concatenate([[4, *row] for row in rows]).astype(np.int64)
        grid = pv.UnstructuredGrid(flat, np.full(len(rows), CONVEX_POINT_SET, np.uint8), quads.points)
        grid.cell_data["c"] = c
        grid.save(str(tmp_path / "p" / "p_0.vtu"))
    a, b = (Series(str(tmp_path / f / f"{f}_0.vtu")).read(0).mesh for f in ("q", "p"))
    assert a.n_whole_cells == b.n_whole_cells == 48
    np.testing.assert_allclose(b.cell_sizes, a.cell_sizes, rtol=1e-12)
    np.testing.assert_allclose(a.cell_sizes, np.sqrt(1 / 48), rtol=1e-12)  # 1/8 x 1/6 rectangles
    descs = [describe_series(str(tmp_path / f / f"{f}_0.vtu")) for f in ("q", "p")]
    assert descs[0]["cells"] == descs[1]["cells"] == 48
    assert descs[0]["cell_size"] == pytest.approx(descs[1]["cell_size"], rel=1e-12)


def test_pieces_stay_marked_beside_polyhedra_in_one_file(tmp_path):
    # regression: a file with polyhedra (VTK 42) and convex point sets (VTK 41) lost the convex
    # cells' piece marks when the polyhedra's tetrahedra were marked, so every piece of a split
    # wedge counted as a cell of its own size
    from phasegauge.meshgen import to_polyhedral_grid

    poly = to_polyhedral_grid(grid_mesh((2, 2, 2))).cast_to_unstructured_grid()
    wedges = grid_mesh((2, 2, 2), kind="wedge")
    rng = np.random.default_rng(5)
    cells = [rng.permutation(row) for row in wedges.blocks[0].connectivity]  # shuffled: split about the centre
    flat = np.concatenate([[len(row), *row] for row in cells]).astype(np.int64)
    convex = pv.UnstructuredGrid(flat, np.full(len(cells), CONVEX_POINT_SET, np.uint8), wedges.points + [2.0, 0, 0])
    grid = poly.merge(convex, merge_points=False)
    path = str(tmp_path / "mixed.vtu")
    grid.save(path)
    mesh = Series(path).read(0).mesh
    assert mesh.n_whole_cells == grid.n_cells == 8 + 16
    vtk_sizes = grid.compute_cell_sizes()["Volume"] ** (1 / 3)  # VTK's volumes of the cells [lib]
    np.testing.assert_allclose(np.sort(np.unique(mesh.cell_sizes.round(12))), np.unique(vtk_sizes.round(12)),
                               rtol=1e-9)
    np.testing.assert_allclose(mesh.cell_sizes ** 3, np.where(mesh.cell_centroids[:, 0] > 1.5, 1 / 16, 1 / 8),
                               rtol=1e-9)  # the halves of the 1/8 boxes (elementary geometry)
