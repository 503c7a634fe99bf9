"""Cells a writer decomposed about an added centre: read as the whole cells their integer cell array numbers.

Some writers decompose each polyhedron: a point added at its centre, one pyramid per quad face and one
tetrahedron per triangle joined to it, the first piece at the cell's place and the others appended, every piece
carrying the cell's values, and an integer cell array numbering each piece's whole cell. The files here are
written by VTK itself (pyvista) [lib].

Outside references: the cellular flow u = (sin pi x cos pi y, -2 cos pi x sin pi y, 0) has u.n = 0 on every wall
of the unit cube [analytic], so a closed box reads no outflow and no drift; the volume of the phase is the sum of
c times the cells' volumes, which pyvista's ``compute_cell_sizes`` (VTK's vtkCellSizeFilter) gives [lib]; a cube
of side h split about its centre into 6 pyramids is one cell of size h [analytic]; the same cells written as VTK
polyhedra, which the reader cones about their centres itself (pyramids and tetrahedra beside whole hexahedra),
are the same pieces, so every width reads the same.
"""

import warnings

import numpy as np
import pytest

pv = pytest.importorskip("pyvista")

from conftest import hexahedra_as_polyhedra, hexahedron_faces_split_in_x  # noqa: E402
from phasegauge.errors import ReadingNote  # noqa: E402
from phasegauge.io import Series  # noqa: E402
from phasegauge.meshgen import grid_mesh  # noqa: E402
from phasegauge.model.cells import FACES  # noqa: E402

N = 6


def _decomposed(mesh, chosen, name="cellID"):
    """The hexahedra of ``mesh`` with the cells ``chosen`` (a mask) written decomposed: a point at each one's
    centre, a pyramid per quad face and a tetrahedron per triangle joined to it, the first piece at the cell's
    place, the others appended; the integer array ``name`` numbers each piece's cell."""
    conn = mesh.blocks[0].connectivity
    points, stream, types, first, rest, rest_ids = list(mesh.points), [], [], [], [], []
    for k, row in enumerate(conn):
        if not chosen[k]:
            first.append(([8, *row], pv.CellType.HEXAHEDRON))
            continue
        centre = len(points)
        points.append(mesh.points[row].mean(axis=0))
        # each face turned to face its centre
        pieces = [([len(face) + 1, face[0], *face[:0:-1], centre], pv.CellType.PYRAMID if len(face) == 4 else
                   pv.CellType.TETRA) for face in hexahedron_faces_split_in_x(mesh.points, row)]
        first.append(pieces[0])
        rest += pieces[1:]
        rest_ids += [k] * (len(pieces) - 1)
    for cell, kind in first + rest:
        stream += cell
        types.append(kind)
    grid = pv.UnstructuredGrid(np.array(stream), np.array(types, np.uint8), np.array(points))
    ids = np.concatenate([np.arange(len(conn)), rest_ids]).astype(np.int32)
    grid.cell_data[name] = ids
    return grid, ids


def _cellular(x, y, z):
    return np.stack([np.sin(np.pi * x) * np.cos(np.pi * y), -2 * np.cos(np.pi * x) * np.sin(np.pi * y),
                     0 * x], axis=1)


def _tanh_sphere(x, y, z):
    return 0.5 * (1 - np.tanh((np.sqrt((x - 0.5) ** 2 + (y - 0.5) ** 2 + (z - 0.5) ** 2) - 0.3) / 0.16))


@pytest.fixture(scope="module")
def hexahedra():
    return grid_mesh((N, N, N), kind="hexahedron")


def _save(grid, path, cell_values, ids=None):
    for name, values in cell_values.items():
        grid.cell_data[name] = values if ids is None else values[ids]
    grid.save(str(path))
    return str(path)


def test_the_pieces_are_read_as_their_whole_cells(tmp_path, hexahedra):
    grid, ids = _decomposed(hexahedra, np.ones(hexahedra.n_cells, bool))
    x, y, z = hexahedra.cell_centroids.T
    c = ((x > 0.6) & (y < 0.4)).astype(float)
    path = _save(grid, tmp_path / "decomposed.vtu", {"c": c}, ids)
    with pytest.warns(ReadingNote, match=r"864 pyramids and 864 tetrahedra read as the 216 whole cells that cell array "
                                         r"'cellID' numbers"):
        step = Series(path).read(0)
    mesh = step.mesh
    assert mesh.n_cells == 8 * N ** 3 and mesh.n_whole_cells == N ** 3  # 4 pyramids and 4 tetrahedra
    np.testing.assert_array_equal(mesh.cell_parents, ids)
    # a cube of side h about its centre is one cell of size h [analytic] (the pieces alone read 0.79 h)
    np.testing.assert_allclose(mesh.cell_sizes, 1 / N, rtol=1e-9)
    # the phase's volume: sum c V over VTK's own cell volumes [lib: vtkCellSizeFilter]
    volumes = grid.compute_cell_sizes(length=False, area=False, volume=True).cell_data["Volume"]
    assert (volumes > 0).all() and volumes.sum() == pytest.approx(1.0, rel=1e-12)
    assert float(np.dot(step.fields.cell_data["c"], mesh.cell_measures)) == pytest.approx(
        float(np.dot(c[ids], volumes)), rel=1e-12)


def test_a_closed_box_of_decomposed_cells_is_closed(tmp_path, hexahedra):
    # end to end, as three steps of a constant phase in the cellular flow: u.n = 0 on every wall [analytic], so
    # nothing crosses the walls and the drift is 0, as the same cells written as hexahedra read
    from phasegauge import measure

    x, y, z = hexahedra.cell_centroids.T
    cells = {"U": _cellular(x, y, z), "alpha": ((x > 0.6) & (y < 0.4)).astype(float)}
    results = {}
    for kind in ("decomposed", "hexahedra", "wall layer"):
        chosen = {"decomposed": np.ones(hexahedra.n_cells, bool), "hexahedra": np.zeros(hexahedra.n_cells, bool),
                  "wall layer": x > 1 - 2 / N}[kind]
        folder = tmp_path / kind.replace(" ", "_")
        folder.mkdir()
        for k in range(3):
            grid, ids = _decomposed(hexahedra, chosen)
            grid.field_data["TimeValue"] = np.array([0.1 * k])
            _save(grid, folder / f"box_{k}.vtu", cells, ids)
        res = measure(str(folder), "alpha", velocity="U", analyses=("conservation",))
        assert not res.steps["open_boundary"].any(), kind
        assert (res.steps["boundary_outflow"] == 0.0).all() and (res.steps["boundary_phase_outflow"] == 0.0).all()
        assert "phase_volume_drift_closed" not in res.steps
        assert not any(f.kind == "open_boundary" for f in res.findings)
        assert not any("lost" in f.text for f in res.findings), [f.text for f in res.findings]
        results[kind] = res
    from phasegauge.run._report_data import cells_read_as

    assert any("read as the" in line for line in results["decomposed"].reading)
    assert len(cells_read_as(results["decomposed"].results)) == 1 and not cells_read_as(results["hexahedra"].results)
    assert not any("read as the" in line for line in results["hexahedra"].reading)
    np.testing.assert_allclose(results["decomposed"].steps["phase_volume"], results["hexahedra"].steps["phase_volume"],
                               rtol=1e-12)


def test_widths_in_cells_are_those_of_the_same_cells_the_reader_splits(tmp_path, hexahedra):
    # a band of the cells decomposed by the writer, and the same band written as polyhedra that the reader cones
    # about their centres beside the whole hexahedra: the same pieces, so every width and size in cells is the same
    from phasegauge import measure

    x, y, z = hexahedra.cell_centroids.T
    band = (z > 0.3) & (z < 0.7)
    phi = _tanh_sphere(x, y, z)
    grid, ids = _decomposed(hexahedra, band)
    (tmp_path / "d").mkdir()
    (tmp_path / "p").mkdir()
    _save(grid, tmp_path / "d" / "s.vtu", {"phi": phi}, ids)
    _save(hexahedra_as_polyhedra(hexahedra, band), tmp_path / "p" / "s.vtu", {"phi": phi})
    got = measure(str(tmp_path / "d" / "s.vtu"), "phi").steps
    own = measure(str(tmp_path / "p" / "s.vtu"), "phi").steps
    for column in ("interface_cells_across", "interface_width_cells", "interface_width", "width_threshold_free",
                   "interface_size", "under_resolved_interface_fraction", "phase_volume"):
        assert got[column].iloc[0] == pytest.approx(own[column].iloc[0], rel=1e-9), column


def _kuhn_tetrahedra(n):
    """A box of n^3 cubes, each cut about a main diagonal into 6 tetrahedra (Kuhn's split), as a pyvista grid."""
    mesh = grid_mesh((n, n, n), kind="tetra")
    conn = mesh.blocks[0].connectivity
    return pv.UnstructuredGrid(np.hstack([np.full((len(conn), 1), 4), conn]).ravel(),
                               np.full(len(conn), pv.CellType.TETRA, np.uint8), mesh.points), mesh


def test_a_tetrahedral_mesh_with_an_integer_region_array_is_not_grouped(tmp_path):
    grid, mesh = _kuhn_tetrahedra(4)
    x, y, z = mesh.cell_centroids.T
    grid.cell_data["region"] = ((x > 0.5).astype(np.int32) + 2 * (y > 0.5))
    grid.cell_data["rank"] = np.zeros(grid.n_cells, np.int32)
    grid.cell_data["cube"] = np.arange(grid.n_cells, dtype=np.int32) // 6  # a cube's 6 tetrahedra share 2 points
    grid.cell_data["c"] = (x > 0.5).astype(float)
    _assert_read_cell_by_cell(grid, tmp_path / "tetra.vtu")


def test_a_hybrid_pyramid_and_tetrahedron_mesh_is_not_grouped(tmp_path, hexahedra):
    # cubes cut about their centres into pyramids (and tetrahedra on the x-normal faces), with integer arrays that
    # number regions of many cubes, or that leave a cube's centre shared by the pieces of two numbers
    grid, ids = _decomposed(hexahedra, np.ones(hexahedra.n_cells, bool), name="cube")
    x, y, z = hexahedra.cell_centroids.T
    grid.cell_data["region"] = ((x > 0.5).astype(np.int32) + 2 * (z > 0.5))[ids]
    halves = ids.copy()
    halves[hexahedra.n_cells:][::2] += 10 ** 6  # each cube's appended pieces in two numbers
    grid.cell_data["halves"] = halves
    del grid.cell_data["cube"]
    grid.cell_data["c"] = (x > 0.5).astype(float)[ids]
    _assert_read_cell_by_cell(grid, tmp_path / "hybrid.vtu")


def _assert_read_cell_by_cell(grid, path):
    """``grid`` saved at ``path`` reads as its own cells, none grouped, and says nothing of how cells were read."""
    grid.save(str(path))
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        step = Series(str(path)).read(0)
    assert step.mesh.cell_parents is None and step.mesh.n_whole_cells == grid.n_cells
    assert not [w for w in caught if issubclass(w.category, ReadingNote)]


def test_cells_written_as_tetrahedra_about_their_centre_and_in_blocks(tmp_path):
    # every face a pair of triangles: 12 tetrahedra a cube, no pyramid; a cube of side h is one cell of size h
    # [analytic]; two such files as the blocks of a .vtm keep their own cells apart (54 whole cells)
    mesh = grid_mesh((3, 3, 3), kind="hexahedron")
    conn = mesh.blocks[0].connectivity
    points, first, rest, rest_ids = list(mesh.points), [], [], []
    for k, row in enumerate(conn):
        centre = len(points)
        points.append(mesh.points[row].mean(axis=0))
        pieces = []
        for f in FACES["hexahedron"]:
            a, b, c, d = (int(p) for p in row[list(f)])
            pieces += [[4, a, c, b, centre], [4, a, d, c, centre]]
        first.append(pieces[0])
        rest += pieces[1:]
        rest_ids += [k] * (len(pieces) - 1)
    grid = pv.UnstructuredGrid(np.array([x for cell in first + rest for x in cell]),
                               np.full(len(first + rest), pv.CellType.TETRA, np.uint8), np.array(points))
    grid.cell_data["whole"] = np.concatenate([np.arange(len(conn)), rest_ids]).astype(np.int64)
    assert (grid.compute_cell_sizes().cell_data["Volume"] > 0).all()  # [lib: vtkCellSizeFilter]
    grid.save(str(tmp_path / "tetra.vtu"))
    with pytest.warns(ReadingNote, match=r"324 tetrahedra read as the 27 whole cells that cell array 'whole'"):
        mesh_read = Series(str(tmp_path / "tetra.vtu")).read(0).mesh
    assert mesh_read.n_whole_cells == 27
    np.testing.assert_allclose(mesh_read.cell_sizes, 1 / 3, rtol=1e-9)
    pv.MultiBlock({"a": grid, "b": grid.translate((1, 0, 0))}).save(str(tmp_path / "two.vtm"))
    with pytest.warns(ReadingNote):
        mesh_read = Series(str(tmp_path / "two.vtm")).read(0).mesh
    assert mesh_read.n_cells == 648 and mesh_read.n_whole_cells == 54
    np.testing.assert_allclose(mesh_read.cell_sizes, 1 / 3, rtol=1e-9)


def test_tetrahedra_refined_about_their_centroid_keep_their_small_cells(tmp_path):
    # a tetrahedral mesh refined by splitting each tetrahedron into 4 about its centroid, the solver's cells the
    # small ones, an integer array naming each one's coarse tetrahedron: four tetrahedra about a point are no
    # cell written decomposed (a four-faced cell is written whole), so the small cells stay the cells;
    # their volumes are VTK's [lib: vtkCellSizeFilter]
    g = pv.ImageData(dimensions=(4, 4, 4), spacing=(1 / 3,) * 3).triangulate()
    corners = np.asarray(g.cell_connectivity).reshape(-1, 4)
    points = np.asarray(g.points)
    centres = np.arange(len(corners)) + len(points)
    faces = [(1, 2, 3), (0, 3, 2), (0, 1, 3), (0, 2, 1)]
    small = np.vstack([np.c_[corners[:, list(f)], centres] for f in faces])
    grid = pv.UnstructuredGrid({pv.CellType.TETRA: small}, np.vstack([points, points[corners].mean(axis=1)]))
    volume = grid.compute_cell_sizes().cell_data["Volume"]
    small[volume < 0] = small[volume < 0][:, [1, 0, 2, 3]]
    grid = pv.UnstructuredGrid({pv.CellType.TETRA: small}, grid.points)
    grid.cell_data["coarse"] = np.tile(np.arange(len(corners)), 4).astype(np.int32)
    grid.save(str(tmp_path / "refined.vtu"))
    with warnings.catch_warnings():
        warnings.simplefilter("error", ReadingNote)
        mesh = Series(str(tmp_path / "refined.vtu")).read(0).mesh
    assert mesh.cell_parents is None and mesh.n_cells == 4 * len(corners)
    np.testing.assert_allclose(mesh.cell_measures, np.abs(grid.compute_cell_sizes().cell_data["Volume"]), rtol=1e-12)


def test_notes_of_one_kind_with_counts_that_differ_are_said_once():
    # one line per kind of note, however many steps or blocks gave it with their own counts
    from types import SimpleNamespace

    from phasegauge.run._report_data import cells_read_as

    steps = [SimpleNamespace(skipped=None, notes=[ReadingNote(f"{n} pyramids read as whole cells")])
             for n in (6, 12, 6)]
    assert cells_read_as(steps) == ["6 pyramids read as whole cells (and 1 more alike, by step or block)"]
