"""The one conforming simplex split: shared faces cut alike, measures and linear fields exact.

Checks against things the split does not define itself: the faces of the mesh (each shared face
must be cut into the same triangles from both of its cells, and cut completely), the boundary of
the unit square / cube (exact geometry), cell sizes from pyvista's ``compute_cell_sizes`` (VTK),
and linear fields (reproduced exactly by any linear interpolation).
"""

import itertools
from collections import Counter, defaultdict

import numpy as np
import pytest

from phasegauge.meshgen import grid_mesh, to_meshio
from phasegauge.model.cells import FACES
from phasegauge.model.mesh import Mesh
from phasegauge.model.simplices import split_cells

#: a cube symmetry per row, keeping VTK's corner order rules: quarter turns about the axis 0-4 and
#: the cell upside down (the same hexahedron, its corners listed from another corner)
_HEX_TURNS = np.array([(0, 1, 2, 3, 4, 5, 6, 7), (1, 2, 3, 0, 5, 6, 7, 4), (2, 3, 0, 1, 6, 7, 4, 5),
                       (3, 0, 1, 2, 7, 4, 5, 6), (4, 7, 6, 5, 0, 3, 2, 1), (5, 4, 7, 6, 1, 0, 3, 2)])


def _turned(mesh: Mesh, seed: int = 0) -> Mesh:
    """The same hexahedra with their corners listed from a random corner each: shared faces are
    then cut along different diagonals by the two cells' tables (and need a centre)."""
    rng = np.random.default_rng(seed)
    conn = mesh.blocks[0].connectivity
    turns = _HEX_TURNS[rng.integers(0, len(_HEX_TURNS), conn.shape[0])]
    return Mesh(mesh.points, [("hexahedron", np.take_along_axis(conn, turns, axis=1))])


def _mesh(kind: str, jitter: float = 0.0) -> Mesh:
    if kind == "turned":
        return _turned(grid_mesh((3, 3, 3), kind="hexahedron", jitter=jitter, seed=2), seed=5)
    if kind in ("quad", "polygon", "mixed2d", "triangle"):
        return grid_mesh((5, 4), kind="mixed" if kind == "mixed2d" else kind, jitter=jitter, seed=2)
    return grid_mesh((3, 3, 3), kind=kind, jitter=jitter, seed=2)


CASES = [("quad", 0.0), ("quad", 0.25), ("polygon", 0.25), ("mixed2d", 0.25), ("triangle", 0.25),
         ("tetra", 0.25), ("hexahedron", 0.0), ("hexahedron", 0.25), ("turned", 0.0), ("wedge", 0.0),
         ("wedge", 0.25), ("pyramid", 0.0), ("pyramid", 0.25), ("mixed", 0.0), ("mixed", 0.25)]


def _local_faces(block) -> list:
    if block.cell_type == "polygon":
        k = block.connectivity.shape[1]
        return [(i, (i + 1) % k) for i in range(k)]
    return FACES[block.cell_type]


def _area(points: np.ndarray) -> float:
    """Length of a segment or area of a triangle, points (2 or 3, dim)."""
    if len(points) == 2:
        return float(np.linalg.norm(points[1] - points[0]))
    a, b = points[1] - points[0], points[2] - points[0]
    if a.size == 2:
        return 0.5 * abs(a[0] * b[1] - a[1] * b[0])
    return 0.5 * float(np.linalg.norm(np.cross(a, b)))


def _face_triangulations(mesh: Mesh, split) -> dict:
    """Per face of the mesh (its corner points), per cell around it: the split's facets on that face."""
    dim = mesh.dimension
    centre_of = {}
    for ids, corners in split.centres:
        for vertex, around in zip(ids.tolist(), corners.tolist()):
            centre_of[vertex] = frozenset(around)
    facets_of = defaultdict(set)
    for simplex, owner in zip(split.simplices.tolist(), split.owner.tolist()):
        for facet in itertools.combinations(sorted(simplex), dim):
            facets_of[owner].add(facet)
    faces = defaultdict(dict)
    for block, start in zip(mesh.blocks, mesh.block_offsets[:-1]):
        for row, conn in enumerate(block.connectivity.tolist()):
            cell = int(start) + row
            for face in _local_faces(block):
                corners = frozenset(conn[j] for j in face)
                faces[corners][cell] = {f for f in facets_of[cell]
                                        if all(v in corners or centre_of.get(v) == corners for v in f)}
    return faces


@pytest.mark.parametrize("kind,jitter", CASES)
@pytest.mark.parametrize("quads", ["diagonal", "centre"])
def test_shared_faces_are_cut_alike_from_both_sides(kind, jitter, quads):
    mesh = _mesh(kind, jitter)
    split = split_cells(mesh, quads=quads)
    X = split.coordinates
    shared = 0
    for corners, sides in _face_triangulations(mesh, split).items():
        cut = list(sides.values())
        # the same triangles (edges in 2D) from every cell around the face ...
        assert all(c == cut[0] for c in cut), (kind, sorted(corners))
        shared += len(cut) == 2
        # ... and the whole face: their areas add up to the face's, taken as the fan of triangles
        # about its corner mean where the split added a centre, else as the two triangles along
        # the shorter diagonal (the face itself when flat, whichever diagonal; a bent quad face is
        # cut so, its centre kept only where the two diagonals tie)
        ring = [p for p in _ring(mesh, corners)]
        centre = X[ring].mean(axis=0)
        fan = any(v >= mesh.n_points for f in cut[0] for v in f) or len(ring) != 4
        if len(ring) == 2:
            whole = _area(X[ring])
        elif fan:
            whole = sum(_area(np.array([X[ring[i]], X[ring[(i + 1) % len(ring)]], centre])) for i in range(len(ring)))
        else:
            a, b, c, d = ring
            if np.linalg.norm(X[b] - X[d]) < np.linalg.norm(X[a] - X[c]):
                a, b, c, d = b, c, d, a
            whole = _area(X[[a, b, c]]) + _area(X[[a, c, d]])
        assert sum(_area(X[list(f)]) for f in cut[0]) == pytest.approx(whole, rel=1e-12)
    assert shared > 0


def _ring(mesh: Mesh, corners: frozenset) -> list:
    """The corners of a face in the order some cell lists them (around the face)."""
    for block in mesh.blocks:
        for conn in block.connectivity.tolist():
            if corners <= set(conn):
                for face in _local_faces(block):
                    if frozenset(conn[j] for j in face) == corners:
                        return [conn[j] for j in face]
    raise AssertionError("face not found")


@pytest.mark.parametrize("kind,jitter", CASES)
def test_split_leaves_no_gap_inside_and_covers_the_boundary(kind, jitter):
    # a facet inside the domain belongs to exactly two simplices; those of one simplex only make up
    # the boundary of the unit square / cube: perimeter 4 or surface 6 (exact geometry)
    mesh = _mesh(kind, jitter)
    split = split_cells(mesh, quads="centre")
    count = Counter(facet for simplex in split.simplices.tolist()
                    for facet in itertools.combinations(sorted(simplex), mesh.dimension))
    assert max(count.values()) == 2
    outer = sum(_area(split.coordinates[list(f)]) for f, n in count.items() if n == 1)
    assert outer == pytest.approx(4.0 if mesh.dimension == 2 else 6.0, rel=1e-12)


def _enclosed_volumes(mesh: Mesh) -> np.ndarray:
    """Per 3D cell, the volume its faces enclose (divergence theorem: a sixth of the sum of
    a . (b x c) over its boundary triangles), each quad face cut along its shorter diagonal, or
    about its corner mean where the two diagonals tie (the rule of ``model/_face_diagonals.py``;
    a flat face encloses the same volume whichever way it is cut)."""
    out = []
    X = mesh.coordinates
    for block in mesh.blocks:
        if block.cell_type == "tetra":  # (not asked for: no quad face)
            out += [np.nan] * len(block)
            continue
        for conn in block.connectivity.tolist():
            volume = 0.0
            for face in FACES[block.cell_type]:
                ring = [X[conn[j]] for j in face]
                if len(ring) == 3:
                    triangles = [ring]
                else:
                    a, b, c, d = ring
                    d02, d13 = np.linalg.norm(a - c), np.linalg.norm(b - d)
                    if abs(d02 - d13) <= 1e-9 * max(d02, d13):
                        m = (a + b + c + d) / 4
                        triangles = [[ring[i], ring[(i + 1) % 4], m] for i in range(4)]
                    elif d13 < d02:
                        triangles = [[b, c, d], [b, d, a]]
                    else:
                        triangles = [[a, b, c], [a, c, d]]
                volume += sum(float(np.dot(t[0], np.cross(t[1], t[2]))) for t in triangles)
            out.append(abs(volume) / 6.0)
    return np.array(out)


@pytest.mark.parametrize("kind,jitter", CASES)
def test_simplex_measures_add_up_to_vtk_cell_sizes(kind, jitter):
    # pyvista / VTK compute_cell_sizes (wedge volumes come out negative in VTK's orientation: abs):
    # cell by cell where the faces are flat (VTK's volume is the trilinear map's); with bent quad
    # faces cut along a diagonal a cell gains or loses what lies between the face and its two
    # triangles, which its neighbour loses or gains: cell by cell the volume the triangulated faces
    # enclose (divergence theorem), and over the mesh VTK's total (the unit cube's faces are flat)
    import pyvista

    mesh = _mesh(kind, jitter)
    sizes = pyvista.from_meshio(to_meshio(mesh)).compute_cell_sizes(
        length=False, area=mesh.dimension == 2, volume=mesh.dimension == 3)
    reference = np.abs(sizes.cell_data["Area" if mesh.dimension == 2 else "Volume"])
    for quads in ("diagonal", "centre"):
        split = split_cells(mesh, quads=quads)
        ours = np.bincount(split.owner, split.measures, minlength=mesh.n_cells)
        if mesh.dimension == 3 and jitter > 0:
            quad_faced = np.concatenate([np.full(len(b), b.cell_type != "tetra") for b in mesh.blocks])
            expected = np.where(quad_faced, _enclosed_volumes(mesh), reference)
            np.testing.assert_allclose(ours, expected, rtol=1e-12)
            assert ours.sum() == pytest.approx(reference.sum(), rel=1e-12)
        else:
            np.testing.assert_allclose(ours, reference, rtol=1e-12)


@pytest.mark.parametrize("kind,jitter", CASES)
def test_linear_field_is_reproduced_exactly(kind, jitter):
    # analytic: a centre carries its corners' mean, which is the linear field at the centre, so the
    # piecewise-linear interpolant on the simplices is the linear field itself
    mesh = _mesh(kind, jitter)
    coef = np.array([0.7, -1.3, 0.4])[:mesh.dimension]
    values = 0.3 + mesh.coordinates @ coef
    split = split_cells(mesh, values=values, quads="centre")
    np.testing.assert_allclose(split.values, 0.3 + split.coordinates @ coef, rtol=0, atol=1e-13)
    # every simplex's gradient is the field's
    X, v = split.corner_values(mesh.coordinates), split.corner_values(values)
    gradient = np.linalg.solve(X[:, 1:] - X[:, :1], (v[:, 1:] - v[:, :1])[..., None])[..., 0]
    np.testing.assert_allclose(gradient, np.broadcast_to(coef, gradient.shape), rtol=0, atol=1e-10)


def _keyed(split, point_names=None) -> Counter:
    """The split's simplices with their cells, vertices named by point (mesh points) or corner set
    (centres): comparable between splits of differently numbered meshes."""
    name = {}
    for ids, corners in split.centres:
        for vertex, around in zip(ids.tolist(), corners.tolist()):
            name[vertex] = frozenset(around if point_names is None else point_names[around].tolist())
    def key(v):
        return name[v] if v in name else (v if point_names is None else int(point_names[v]))
    return Counter((owner, frozenset(map(key, simplex)))
                   for simplex, owner in zip(split.simplices.tolist(), split.owner.tolist()))


@pytest.mark.parametrize("kind", ["wedge", "mixed", "pyramid", "turned", "hexahedron"])
def test_renumbering_points_leaves_the_split_alone(kind):
    # the tables read local corner orders and compare diagonals by the points they join, never by
    # point numbers (the earlier wedge rule cut faces through their lowest point number, so
    # renumbering the points moved contours by O(h^2))
    mesh = _mesh(kind, 0.25)
    rng = np.random.default_rng(4)
    perm = rng.permutation(mesh.n_points)  # new point i is old point perm[i]
    new_number = np.empty_like(perm)
    new_number[perm] = np.arange(mesh.n_points)
    renumbered = Mesh(mesh.points[perm], [(b.cell_type, new_number[b.connectivity]) for b in mesh.blocks])
    assert _keyed(split_cells(renumbered), point_names=perm) == _keyed(split_cells(mesh))


@pytest.mark.parametrize("kind,jitter", [("turned", 0.0), ("mixed", 0.25), ("wedge", 0.0), ("quad", 0.25)])
def test_splitting_some_cells_gives_their_part_of_the_whole_split(kind, jitter):
    # the contour and the width split only the cells the level crosses; sections only the cells a
    # plane crosses: the same simplices as in the split of every cell, by mask or by index
    mesh = _mesh(kind, jitter)
    chosen = np.random.default_rng(1).random(mesh.n_cells) < 0.4
    whole = _keyed(split_cells(mesh, quads="centre"))
    part = Counter({k: n for k, n in whole.items() if chosen[k[0]]})
    assert _keyed(split_cells(mesh, chosen, quads="centre")) == part
    assert _keyed(split_cells(mesh, np.flatnonzero(chosen), quads="centre")) == part


def test_table_cells_take_the_few_simplex_tables():
    # a regular grid in VTK order: six tetrahedra per hexahedron, no centre; quads in two triangles
    # along a diagonal or four about their centre
    grid = grid_mesh((3, 3, 3))
    split = split_cells(grid)
    assert split.simplices.shape[0] == 6 * grid.n_cells and split.centres == ()
    quads = grid_mesh((4, 3))
    assert split_cells(quads).simplices.shape[0] == 2 * quads.n_cells
    centred = split_cells(quads, quads="centre")
    assert centred.simplices.shape[0] == 4 * quads.n_cells and centred.n_vertices == quads.n_points + quads.n_cells
    with pytest.raises(ValueError, match="quads must be"):
        split_cells(quads, quads="fan")


def test_values_at_some_vertices_equal_the_whole_table_rows():
    # at_vertices and corner_values gather the added centres' values for the ids asked only; they
    # are the rows of the table of every vertex, whose centres are their corners' means (numpy's
    # mean of the corner rows, to round-off)
    mesh = grid_mesh((5, 4, 3), kind="hexahedron", jitter=0.25, seed=7)
    split = split_cells(mesh, np.arange(0, mesh.n_cells, 2), values=mesh.coordinates[:, 0] ** 2)
    assert split.centres  # jittered hexahedra are coned about added centres
    ids = np.random.default_rng(1).integers(0, split.n_vertices, (40, 3))
    for values in (split.point_values, split.points):
        table = split.centre_means(values)
        assert np.array_equal(split.at_vertices(values, ids), table[ids])
        assert np.array_equal(split.at_vertices(values, ids, split.added_values(values)), table[ids])
        assert np.array_equal(split.corner_values(values), table[split.simplices])
    for ids_c, corners in split.centres:
        np.testing.assert_allclose(split.coordinates[ids_c], mesh.coordinates[corners].mean(axis=1), rtol=1e-14)


def test_jittered_hexahedra_take_twelve_tetrahedra_that_conform_and_fill_each_cell():
    # every inner face of a jittered hexahedral mesh is bent: cut along its shorter diagonal, the
    # cells coned from their centre to two triangles a face, no face centre. Checked against the
    # mesh itself: every inner facet shared by exactly two tetrahedra and the boundary ones making
    # up the unit cube's surface 6 (exact geometry); each cell's tetrahedra filling the volume its
    # triangulated faces enclose (divergence theorem), and all of them VTK's total volume
    # (pyvista compute_cell_sizes; the trilinear cell volume differs cell by cell, by what lies
    # between a bent face and its two triangles, which the cell across the face gains or loses)
    import pyvista

    mesh = grid_mesh((5, 4, 3), kind="hexahedron", jitter=0.2, seed=11)
    split = split_cells(mesh)
    assert split.simplices.shape[0] == 12 * mesh.n_cells
    # no tetrahedron turned inside out: every one of a cell's tetrahedra has its cell's orientation
    # (jitter 0.25 turns one here: a face bent so far that the cell centre sees a triangle from behind)
    X = split.corner_values(split.points)
    E = X[:, 1:] - X[:, :1]
    orientation = np.sign(np.einsum("ni,ni->n", E[:, 0], np.cross(E[:, 1], E[:, 2])))
    assert np.all(np.bincount(split.owner, orientation) == 12 * orientation[0])
    assert sum(ids.size for ids, _ in split.centres) == mesh.n_cells  # the cell centres only
    count = Counter(facet for simplex in split.simplices.tolist()
                    for facet in itertools.combinations(sorted(simplex), 3))
    assert set(count.values()) == {1, 2}
    outer = sum(_area(split.coordinates[list(f)]) for f, n in count.items() if n == 1)
    assert outer == pytest.approx(6.0, rel=1e-12)
    ours = np.bincount(split.owner, split.measures, minlength=mesh.n_cells)
    np.testing.assert_allclose(ours, _enclosed_volumes(mesh), rtol=1e-12)
    vtk = np.abs(pyvista.from_meshio(to_meshio(mesh)).compute_cell_sizes(length=False, area=False).cell_data["Volume"])
    assert ours.sum() == pytest.approx(vtk.sum(), rel=1e-12) == pytest.approx(1.0, rel=1e-12)
    assert not np.allclose(ours, mesh.cell_measures, rtol=1e-6)  # (the trilinear volumes are others)
    np.testing.assert_allclose(mesh.cell_measures, vtk, rtol=1e-12)


@pytest.mark.parametrize("centres", [True, False])
def test_faces_cut_two_ways_take_the_shorter_diagonal_or_a_centre_on_a_tie(centres):
    # cells listing their corners from random corners: the tables cut shared faces along different
    # diagonals. Parallelogram faces (the grid sheared) are cut along their shorter diagonal, no
    # face centre; square faces (the unit cube) have no shorter one and keep a centre. Either way the
    # split conforms (each inner facet in two tetrahedra) and fills the box (volume det S)
    shear = np.eye(3) if centres else np.array([[1.0, 0.3, 0.1], [0.0, 1.0, -0.2], [0.0, 0.0, 1.0]])
    grid = grid_mesh((3, 3, 3), kind="hexahedron")
    mesh = _turned(Mesh(grid.points @ shear.T, [("hexahedron", grid.blocks[0].connectivity)]), seed=5)
    split = split_cells(mesh)
    face_centres = [ids for ids, corners in split.centres if corners.shape[1] == 4]
    assert bool(face_centres) == centres
    count = Counter(facet for simplex in split.simplices.tolist()
                    for facet in itertools.combinations(sorted(simplex), 3))
    assert set(count.values()) == {1, 2}
    assert split.measures.sum() == pytest.approx(np.linalg.det(shear), rel=1e-12)


def _turned_cells(split, n_cells) -> int:
    """Cells with tetrahedra of both orientations (the split overlapping itself there)."""
    X = split.corner_values(split.points)
    E = X[:, 1:] - X[:, :1]
    positive = np.einsum("ni,ni->n", E[:, 0], np.cross(E[:, 1], E[:, 2])) > 0
    count = np.bincount(split.owner, minlength=n_cells)
    up = np.bincount(split.owner, positive, minlength=n_cells)
    return int(np.count_nonzero((up > 0) & (up < count)))


def test_faces_bent_so_far_a_diagonal_would_turn_a_tetrahedron_keep_a_centre(monkeypatch):
    # corners moved up to 0.3 of a cell: some faces are bent so far that a triangle of their
    # shorter diagonal, joined to a cell centre, is seen from behind (a tetrahedron of the other
    # orientation: the split would overlap itself). Those faces keep a centre: no cell then has
    # tetrahedra of both orientations (geometry of the mesh itself), the split conforms and fills
    # the unit cube; without the fallback some cells would
    from phasegauge.model import simplices

    mesh = grid_mesh((8, 8, 8), kind="hexahedron", jitter=0.3, seed=11)
    split = split_cells(mesh)
    assert any(corners.shape[1] == 4 for _, corners in split.centres)
    assert _turned_cells(split, mesh.n_cells) == 0
    count = Counter(facet for simplex in split.simplices.tolist()
                    for facet in itertools.combinations(sorted(simplex), 3))
    assert set(count.values()) == {1, 2}
    assert split.measures.sum() == pytest.approx(1.0, rel=1e-12)
    monkeypatch.setattr(simplices, "turned_faces", lambda kind, P, along13: np.zeros(along13.shape, bool))
    bare = grid_mesh((8, 8, 8), kind="hexahedron", jitter=0.3, seed=11)
    assert _turned_cells(split_cells(bare), bare.n_cells) > 0


@pytest.mark.parametrize("seed", [0, 1, 11])
def test_flat_faces_whose_table_diagonal_runs_outside_them_are_cut_otherwise(seed):
    # corners moved up to 0.35 of a cell leave some flat boundary quads with a reflex corner: the
    # table's diagonal then runs outside the face and a tetrahedron of its cell turns (found by
    # review on these meshes: 1 to 4 such cells each). Such a face is cut as a bent one is (its
    # shorter diagonal, or a centre): no cell has tetrahedra of both orientations, and the split
    # fills the unit cube exactly (the cube's volume, analytic)
    mesh = grid_mesh((20, 20, 20), kind="hexahedron", jitter=0.35, seed=seed)
    split = split_cells(mesh)
    assert _turned_cells(split, mesh.n_cells) == 0
    assert split.measures.sum() == pytest.approx(1.0, rel=1e-13)
