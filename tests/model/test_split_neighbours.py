"""The face neighbours of a polyhedra split's tetrahedra, found from the polyhedra's faces
(model/_split_neighbours.py), against the tetrahedra's faces matched by their corner sets.

Outside check: the neighbours are compared with an adjacency built here from Python sets of
each tetrahedron's face corners (elementary: two tetrahedra are face neighbours when they have
three corners in common), and with the mesh's own grouping of the tetrahedra's faces, which
the split's neighbours replace (``face_pairs``, ``boundary_faces``, the droplet neighbour table).
"""

from collections import defaultdict

import numpy as np
import pytest

from phasegauge.analysis._droplet_graph import _build_neighbour_table
from phasegauge.meshgen import grid_mesh
from phasegauge.model._faces import SPLIT_FACES, face_topology
from phasegauge.model.mesh import Mesh
from phasegauge.model.polyhedra import cell_face_stream, split_polyhedra

# hexahedra written as polyhedra, split as polyhedra of other shapes are (conftest)
pytestmark = pytest.mark.usefixtures("every_polyhedron_split")


def _mesh_stream(m, *, rotate=False, inward=False, seed=0):
    """Face stream of every cell of ``m`` (loops started at a random corner, odd cells turned inward)."""
    rng = np.random.default_rng(seed)
    fp, fo, fc, n = [], [0], [], 0
    for block in m.blocks:
        p, o, c = cell_face_stream(block.cell_type, block.connectivity)
        for f in range(len(o) - 1):
            face = p[o[f]:o[f + 1]]
            if rotate:
                face = np.roll(face, rng.integers(len(face)))
            if inward and (c[f] + n) % 2:
                face = face[::-1]
            fp.append(face)
            fo.append(fo[-1] + len(face))
        fc.append(c + n)
        n += len(block)
    return np.concatenate(fp), np.array(fo), np.concatenate(fc), n


def _by_sets(tetra):
    """Face neighbours from sets of face corners, each row: higher numbers, then lower, increasing."""
    owners = defaultdict(list)
    for t, corners in enumerate(tetra.tolist()):
        for skip in range(4):
            owners[frozenset(corners[:skip] + corners[skip + 1:])].append(t)
    rows = [[] for _ in range(len(tetra))]
    for cells in owners.values():
        assert len(cells) <= 2
        if len(cells) == 2:
            rows[cells[0]].append(cells[1])
            rows[cells[1]].append(cells[0])
    out = np.full((len(tetra), 4), -1)
    for t, row in enumerate(rows):
        ordered = sorted(x for x in row if x > t) + sorted(x for x in row if x < t)
        out[t, :len(ordered)] = ordered
    return out


@pytest.mark.parametrize("kind, rotate, inward", [
    ("hexahedron", False, False), ("hexahedron", True, True), ("mixed", True, False), ("mixed", False, True),
    ("wedge", True, True), ("pyramid", False, False),
])
def test_split_neighbours_are_the_tetrahedra_sharing_three_corners(kind, rotate, inward):
    m = grid_mesh((4, 3, 3), kind=kind, jitter=0.2, seed=3)
    fp, fo, fc, n = _mesh_stream(m, rotate=rotate, inward=inward)
    split = split_polyhedra(m.points, fp, fo, fc, n)
    assert split.neighbours is not None
    assert np.array_equal(split.neighbours, _by_sets(split.tetra))  # elementary sets of corners

    # the mesh's face topology and droplet neighbour table from them: as grouping the faces
    Y = np.concatenate([m.points, split.centre_values(m.points)])
    grouped = Mesh(Y, [("tetra", split.tetra)])
    given = Mesh(Y, [("tetra", split.tetra)])
    given.memo(SPLIT_FACES, lambda: split.neighbours)
    a, b = face_topology(grouped), face_topology(given)
    assert b["pairs"] is None  # not kept: read from the neighbours
    assert np.array_equal(grouped.face_pairs, given.face_pairs) and grouped.face_pairs.dtype == given.face_pairs.dtype
    for j in range(2):
        assert np.array_equal(a["boundary"][j], b["boundary"][j])
    assert all(a[k] == b[k] for k in ("count", "crowded", "shared_faces", "numbers", "pair_count"))
    table = _build_neighbour_table(given)
    assert table is split.neighbours  # no copy
    assert np.array_equal(_build_neighbour_table(grouped), table)


def test_no_neighbours_where_the_faces_do_not_allow_them():
    # three cells on one face (crowded): the mesh groups the tetrahedra's faces itself
    m = grid_mesh((2, 1, 1), kind="hexahedron")
    fp, fo, fc, n = _mesh_stream(m)
    first = fc == 0
    starts = fo[:-1][first]
    extra = np.concatenate([fp[s:s + 4] for s in starts])
    fp3 = np.concatenate([fp, extra])
    fo3 = np.concatenate([fo, fo[-1] + 4 * np.arange(1, first.sum() + 1)])
    fc3 = np.concatenate([fc, np.full(first.sum(), n)])
    assert split_polyhedra(m.points, fp3, fo3, fc3, n + 1).neighbours is None
    # cells listed out of order in the stream: split as before, without the neighbours
    order = np.argsort(-fc, kind="stable")
    sizes = np.diff(fo)[order]
    loops = [fp[fo[f]:fo[f + 1]] for f in order]
    split = split_polyhedra(m.points, np.concatenate(loops), np.concatenate([[0], np.cumsum(sizes)]), fc[order], n)
    assert split.neighbours is None and len(split.tetra) == 48


def test_a_polyhedral_file_gives_its_mesh_the_neighbours(tmp_path):
    pv = pytest.importorskip("pyvista")
    from phasegauge.io import Series
    from phasegauge.meshgen import to_polyhedral_grid

    m = grid_mesh((3, 4, 2), kind="mixed", jitter=0.2, seed=5)
    grid = to_polyhedral_grid(m)
    grid.point_data["c"] = m.points[:, 0]
    grid.save(str(tmp_path / "poly.vtu"))
    mesh = Series(str(tmp_path / "poly.vtu")).read(0).mesh
    given = mesh.memo(SPLIT_FACES, lambda: None, keep=False)
    assert isinstance(grid, pv.UnstructuredGrid) and given is not None
    assert np.array_equal(given, _by_sets(mesh.blocks[0].connectivity))  # elementary sets of corners
    again = Mesh(mesh.points, [("tetra", mesh.blocks[0].connectivity.copy())])
    assert np.array_equal(mesh.face_pairs, again.face_pairs)
    assert np.array_equal(mesh.boundary_faces[0], again.boundary_faces[0])


@pytest.mark.parametrize("damage", [None, "face twice", "face turned", "face missing"])
def test_edge_twins_are_each_edge_run_back_in_its_cell(damage):
    # each position's twin found by a Python dictionary of every cell's directed edges; a stream
    # whose cells are not closed, consistently oriented surfaces has none (None)
    from phasegauge.model._split_neighbours import edge_twins

    m = grid_mesh((3, 2, 2), kind="hexahedron", jitter=0.2, seed=4)
    points, offsets, face_cell = cell_face_stream("hexahedron", m.blocks[0].connectivity)
    faces = [list(points[offsets[i]:offsets[i + 1]]) for i in range(offsets.size - 1)]
    cells = list(face_cell)
    if damage == "face twice":
        faces.insert(7, faces[6])
        cells.insert(7, cells[6])
    elif damage == "face turned":
        faces[6] = faces[6][::-1]
    elif damage == "face missing":
        del faces[6], cells[6]
    stream = np.array([p for f in faces for p in f])
    nxt = np.concatenate([np.roll(np.arange(len(f)), -1) + sum(len(g) for g in faces[:i]) for i, f in enumerate(faces)])
    edge_cell = np.repeat(np.array(cells), [len(f) for f in faces])
    twin = edge_twins(stream, nxt, edge_cell, m.n_points)
    if damage is not None:
        assert twin is None
        return
    where = defaultdict(list)
    for position, (a, b, c) in enumerate(zip(stream, stream[nxt], edge_cell)):
        where[(c, a, b)].append(position)
    expected = [where[(c, b, a)] for a, b, c in zip(stream, stream[nxt], edge_cell)]
    assert all(len(e) == 1 for e in expected)
    np.testing.assert_array_equal(twin, [e[0] for e in expected])


@pytest.mark.parametrize("dtype", [np.int8, np.int32, np.int64])
def test_ordered_rows_as_the_rule_says_whatever_the_width(dtype):
    # each row: the higher numbers increasing, then the lower increasing, then -1 (the order a table
    # built from sorted face pairs has), written out row by row in Python; int8 with 100 rows puts
    # "lower number + rows" past the signed range (a key that once came back negative)
    from phasegauge.model._split_neighbours import ordered_rows

    rng = np.random.default_rng(7)
    n, k = 100, 4
    rows = np.full((n, k), -1, dtype=np.int64)
    for i in range(n):
        m = rng.integers(0, k + 1)
        rows[i, :m] = rng.choice(np.delete(np.arange(n), i), size=m, replace=False)
        rng.shuffle(rows[i])
    expected = np.array([sorted(v for v in r if v > i) + sorted(v for v in r if 0 <= v < i)
                         + [-1] * sum(v < 0 for v in r) for i, r in enumerate(rows.tolist())])
    got = ordered_rows(rows.astype(dtype))
    assert got.dtype == dtype
    np.testing.assert_array_equal(got.astype(np.int64), expected)
