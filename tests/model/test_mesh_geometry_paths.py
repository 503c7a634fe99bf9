"""The mesh's fast paths against its general paths and outside references.

Cell geometry: affine hexahedra and wedges take the triple product, quads a closed form,
other hexahedra and pyramids the closed-form integrals of the trilinear map; each is checked
against the general per-block Gauss quadrature (``_block_geometry``, kept as the reference
path), against pyvista/VTK's ``compute_cell_sizes`` and against exact formulas. Face
grouping (packed sorts) is checked against ``numpy.unique``; the coincident-point check
against ``numpy.unique(axis=0)``.
"""

import numpy as np
import pytest

from phasegauge.model import _geometry, _grouping, cells
from phasegauge.model import _places
from phasegauge.model._faces import local_faces
from phasegauge.model.mesh import Mesh
from phasegauge.meshgen import grid_mesh, to_meshio


def _general_geometry(m):
    """Signed measures and centroids by the general Gauss path, block by block (each cell
    about its corner mean, so that a far origin costs the reference no digits)."""
    signed, cent = [], []
    for block in m.blocks:
        X = m.coordinates[block.connectivity]
        middle = X.mean(axis=1, keepdims=True)
        s, c = _geometry._block_geometry(block.cell_type, X - middle)
        signed.append(s)
        cent.append(c + middle[:, 0])
    return np.concatenate(signed), np.concatenate(cent)


def _affine_copy(m, matrix, shift):
    pts = m.coordinates @ np.asarray(matrix, float).T + np.asarray(shift, float)
    return Mesh(pts, [(b.cell_type, b.connectivity) for b in m.blocks])


_SHEAR = [[1.0, 0.3, 0.1], [0.2, 0.9, -0.4], [0.05, 0.1, 1.3]]


def _bend(m, amount, seed=0):
    """Move every point of ``m`` at random by up to ``amount`` (a fraction of the cell size)."""
    rng = np.random.default_rng(seed)
    h = float(np.median(m.cell_sizes))
    pts = m.points + amount * h * rng.uniform(-1, 1, m.points.shape) * (np.ptp(m.points, axis=0) > 0)
    return Mesh(pts, [(b.cell_type, b.connectivity) for b in m.blocks])


def _assert_same_geometry(m):
    # the general path (2-point Gauss per direction, exact for these maps) is the reference
    signed, cent = _general_geometry(m)
    assert np.allclose(m.signed_measures, signed, rtol=1e-12, atol=0)
    h = float(np.median(m.cell_sizes))
    assert np.max(np.abs(m.cell_centroids - cent)) <= 1e-12 * max(h, float(np.abs(cent).max()))


# ------------------------------------------------------------------ cell geometry
@pytest.mark.parametrize("kind", ["hexahedron", "wedge", "pyramid", "tetra", "mixed"])
@pytest.mark.parametrize("shape", ["grid", "sheared far away", "jittered", "bent", "partly bent"])
def test_fast_geometry_matches_the_general_path(kind, shape):
    m = grid_mesh((4, 3, 3), [(0, 1), (0, 0.7), (0, 0.5)], kind=kind, jitter=0.3 if shape == "jittered" else 0.0,
                  seed=2)
    if shape == "sheared far away":
        m = _affine_copy(m, _SHEAR, [1.0e3, -2.0e3, 5.0e2])
    if shape == "bent":
        m = _bend(m, 1e-9)  # just past the affine tolerance: the Gauss path, for nearly flat cells
    if shape == "partly bent":  # affine and bent cells side by side in one chunk
        moved = (np.arange(m.n_points) % 5 == 0)[:, None]
        m = Mesh(np.where(moved, _bend(m, 0.2).points, m.points), [(b.cell_type, b.connectivity) for b in m.blocks])
    _assert_same_geometry(m)


@pytest.mark.parametrize("kind", ["quad", "triangle", "mixed", "polygon"])
@pytest.mark.parametrize("jitter", [0.0, 0.3])
def test_fast_geometry_matches_the_general_path_2d(kind, jitter):
    m = grid_mesh((5, 4), [(-1, 2), (3, 4)], kind=kind, jitter=jitter, seed=5)
    _assert_same_geometry(m)
    sheared = _affine_copy(m, [[1.0, 0.4], [-0.2, 0.8]], [50.0, -20.0])
    _assert_same_geometry(sheared)


def test_parallelepiped_volumes_are_the_determinant():
    # exact: an affine map x -> A x scales every volume by |det A| (elementary linear algebra);
    # the centroid of a parallelepiped is the image of the unit cell's centre
    m = grid_mesh((3, 2, 2), kind="hexahedron")
    s = _affine_copy(m, _SHEAR, [10.0, 20.0, -30.0])
    det = np.linalg.det(np.array(_SHEAR))
    assert np.allclose(s.cell_measures, abs(det) * m.cell_measures, rtol=1e-13, atol=0)
    expected = m.cell_centroids @ np.array(_SHEAR).T + [10.0, 20.0, -30.0]
    assert np.allclose(s.cell_centroids, expected, rtol=0, atol=1e-12)


def test_prism_with_parallel_ends_volume_is_base_times_height():
    # exact: a prism whose top is its base moved by t has volume area(base) * (t . n)
    base = np.array([[0.0, 0.0, 0.0], [2.0, 0.0, 0.0], [0.5, 1.5, 0.0]])
    t = np.array([0.3, -0.2, 2.5])
    w = Mesh(np.vstack([base, base + t]), [("wedge", [[0, 1, 2, 3, 4, 5]])])
    assert w.cell_measures[0] == pytest.approx(0.5 * 2.0 * 1.5 * 2.5, rel=1e-14)
    assert w.cell_centroids[0] == pytest.approx(base.mean(axis=0) + t / 2, rel=1e-14)
    assert w.inverted_cells == 0


def test_bilinear_quad_closed_form_is_exact():
    # a trapezoid: area (a + b) / 2 * h and centroid height h (2b + a) / (3 (a + b)) above
    # the side a (elementary geometry); here a = 4 at y = 0, b = 2 at y = 3
    q = Mesh([[0, 0], [4, 0], [3, 3], [1, 3]], [("quad", [[0, 1, 2, 3]])])
    assert q.cell_measures[0] == pytest.approx(9.0, rel=1e-15)
    assert q.cell_centroids[0] == pytest.approx([2.0, 3 * (2 * 2 + 4) / (3 * 6)], rel=1e-15)


def _trilinear_point(corners, u, v, w):
    """VTK's hexahedron map at (u, v, w) in [0, 1]^3 and its Jacobian determinant."""
    weights = [(1 - u) * (1 - v) * (1 - w), u * (1 - v) * (1 - w), u * v * (1 - w), (1 - u) * v * (1 - w),
               (1 - u) * (1 - v) * w, u * (1 - v) * w, u * v * w, (1 - u) * v * w]
    du = [-(1 - v) * (1 - w), (1 - v) * (1 - w), v * (1 - w), -v * (1 - w), -(1 - v) * w, (1 - v) * w, v * w, -v * w]
    dv = [-(1 - u) * (1 - w), -u * (1 - w), u * (1 - w), (1 - u) * (1 - w), -(1 - u) * w, -u * w, u * w, (1 - u) * w]
    dw = [-(1 - u) * (1 - v), -u * (1 - v), -u * v, -(1 - u) * v, (1 - u) * (1 - v), u * (1 - v), u * v, (1 - u) * v]
    jacobian = np.stack([np.dot(d, corners) for d in (du, dv, dw)], axis=1)
    return np.dot(weights, corners), np.linalg.det(jacobian)


@pytest.mark.parametrize("seed", [0, 1, 2, 3])
def test_bent_hexahedron_closed_form_against_legendre_quadrature(seed):
    # volume and centroid of a bent (trilinear) hexahedron: the closed form against numpy's
    # Gauss-Legendre rule (numpy.polynomial.legendre.leggauss, 4 points per direction: exact for
    # det J and x det J, of degree 3 in each reference coordinate) over the reference cube
    rng = np.random.default_rng(seed)
    unit = np.array([[0, 0, 0], [1, 0, 0], [1, 1, 0], [0, 1, 0], [0, 0, 1], [1, 0, 1], [1, 1, 1], [0, 1, 1]], float)
    corners = unit * [1.0, 2.0, 1.5] + rng.uniform(-0.4, 0.4, (8, 3)) + [5.0, -2.0, 1.0]
    m = Mesh(corners, [("hexahedron", [list(range(8))])])
    nodes, weights = np.polynomial.legendre.leggauss(4)
    nodes, weights = 0.5 * (nodes + 1.0), 0.5 * weights  # on [0, 1]
    volume, moment = 0.0, np.zeros(3)
    for u, wu in zip(nodes, weights):
        for v, wv in zip(nodes, weights):
            for w, ww in zip(nodes, weights):
                x, det = _trilinear_point(corners, u, v, w)
                volume += wu * wv * ww * det
                moment += wu * wv * ww * det * x
    assert m.cell_measures[0] == pytest.approx(volume, rel=1e-13)
    assert m.cell_centroids[0] == pytest.approx(moment / volume, rel=1e-13)
    # and the general per-block Gauss rule (exact for a trilinear map) to rounding
    gauss_volume, gauss_centroid = _geometry._block_geometry("hexahedron", corners[None])
    assert m.cell_measures[0] == pytest.approx(gauss_volume[0], rel=1e-14)
    assert m.cell_centroids[0] == pytest.approx(gauss_centroid[0], rel=1e-14)


@pytest.mark.parametrize("kind", ["hexahedron", "wedge", "pyramid"])
def test_fast_geometry_against_pyvista(kind, tmp_path):
    import pyvista as pv

    m = _affine_copy(grid_mesh((3, 3, 2), kind=kind), _SHEAR, [3.0, 0.0, -1.0])
    path = tmp_path / "m.vtu"
    to_meshio(m).write(path)
    sizes = pv.read(path).compute_cell_sizes(length=False, area=False, volume=True)
    # pyvista.compute_cell_sizes (VTK); wedge volumes compared in magnitude (REFERENCES.md)
    assert np.allclose(m.cell_measures, np.abs(np.asarray(sizes["Volume"])), rtol=1e-9, atol=0)


def test_measures_share_the_signed_array_only_when_nothing_is_inverted():
    m = grid_mesh((2, 2, 2))
    assert m.cell_measures is m.signed_measures
    flipped = Mesh(m.points, [("hexahedron", m.blocks[0].connectivity[:, [4, 5, 6, 7, 0, 1, 2, 3]])])
    assert np.all(flipped.signed_measures < 0)
    assert np.all(flipped.cell_measures > 0) and flipped.cell_measures is not flipped.signed_measures


# ------------------------------------------------------------------ face grouping
def _reference_groups(rows):
    """Lexicographic groups of equal rows by numpy.unique (the reference library)."""
    uniq, inverse = np.unique(rows, axis=0, return_inverse=True)
    return uniq, inverse.ravel()


@pytest.mark.parametrize("span", [7, 3_000, 2 ** 30])
@pytest.mark.parametrize("width", [1, 2, 3, 4])
def test_group_columns_against_numpy_unique(span, width):
    rng = np.random.default_rng(span + width)
    distinct = rng.integers(-5, span, size=(300, width))
    rows = distinct[rng.integers(0, 300, 2000)]
    order, starts = _grouping.group_columns([rows[:, j].copy() for j in range(width)])
    uniq, inverse = _reference_groups(rows)
    sorted_rows = rows[order]
    # lexicographic order, one start per distinct row
    assert np.array_equal(sorted_rows[starts], uniq)
    group = np.repeat(np.arange(starts.size), np.diff(np.append(starts, rows.shape[0])))
    assert np.array_equal(inverse[order], group)


def test_group_columns_constant_and_empty():
    order, starts = _grouping.group_columns([np.full(5, 3), np.full(5, -1)])
    assert sorted(order) == list(range(5)) and list(starts) == [0]
    order, starts = _grouping.group_columns([np.zeros(0, dtype=np.int64)])
    assert order.size == 0 and starts.size == 0


@pytest.mark.parametrize("threads", [1, 2])
def test_group_columns_in_buckets_against_numpy_lexsort(threads):
    # 150 000 rows of 20 + 14 + 14 + 3 bits with 18 bits of position: one packed pass over all rows
    # does not hold them, buckets of the first column's values do (the path taken is checked)
    rng = np.random.default_rng(7)
    distinct = np.stack([rng.integers(-1, 2 ** 20 - 1, 90_000), rng.integers(0, 2 ** 14, 90_000),
                         rng.integers(0, 2 ** 14, 90_000), rng.integers(0, 8, 90_000)], axis=1)
    rows = distinct[rng.integers(0, 90_000, 150_000)]
    rows[::7, 0] = 5  # a crowded value of the leading column
    columns = [rows[:, j].astype(np.int32) for j in range(4)]
    lows = [int(c.min()) for c in columns]
    widths = [_grouping._bits(int(c.max()) - lo + 1) for c, lo in zip(columns, lows)]
    assert _grouping._bucketed_groups(columns, lows, widths) is not None
    order, starts = _grouping.group_columns(columns, threads=threads)
    # numpy.lexsort is stable: equal rows keep their order, as group_columns promises
    assert np.array_equal(order, np.lexsort([rows[:, j] for j in (3, 2, 1, 0)]))
    uniq, _ = _reference_groups(rows)
    assert np.array_equal(rows[order[starts]], uniq)


@pytest.mark.parametrize("threads", [1, 2])
def test_group_columns_in_buckets_of_capped_rows(threads):
    # buckets capped at 500 rows: some 270 buckets (numbered in uint16), and a value of the leading
    # column holding 20 000 rows (more than the cap: a bin alone may) in a bucket of its own;
    # the same order as numpy.lexsort (stable) and the same groups as numpy.unique
    rng = np.random.default_rng(10)
    distinct = np.stack([rng.integers(0, 2 ** 20, 60_000), rng.integers(0, 2 ** 16, 60_000),
                         rng.integers(0, 2 ** 16, 60_000)], axis=1)
    rows = distinct[rng.integers(0, 60_000, 150_000)]
    rows[:20_000, 0] = 777
    columns = [rows[:, j].copy() for j in range(3)]
    lows = [int(c.min()) for c in columns]
    widths = [_grouping._bits(int(c.max()) - lo + 1) for c, lo in zip(columns, lows)]
    with pytest.MonkeyPatch.context() as patch:
        patch.setattr(_grouping, "_BUCKET_ROWS", 500)
        shift = widths[0] - _grouping._BINS_BITS
        total = np.concatenate([[0], np.cumsum(np.bincount((rows[:, 0] - lows[0]) >> shift))])
        edges = np.array(_grouping._bucket_edges(total, shift, widths[1] + widths[2]))
        assert _grouping._bucketed_groups(columns, lows, widths, threads=threads) is not None
        order, starts = _grouping.group_columns(columns, threads=threads)
    held = total[edges[1:]] - total[edges[:-1]]
    assert edges.size - 1 > 257  # more buckets than uint8 numbers
    assert np.all((held <= 500) | (np.diff(edges) == 1))  # past the cap only a bin alone
    assert held.max() >= 20_000
    assert np.array_equal(order, np.lexsort([rows[:, j] for j in (2, 1, 0)]))
    assert np.array_equal(rows[order[starts]], _reference_groups(rows)[0])


@pytest.mark.parametrize("count", [256, 257])
def test_group_columns_in_as_many_buckets_as_uint8_numbers_and_one_more(count):
    # one row a bucket (cap 1) and three rows a value of the leading column: 256 buckets are the
    # most uint8 numbers, 257 take uint16; numpy.lexsort's order (stable) and numpy.unique's groups
    rng = np.random.default_rng(11)
    rows = np.stack([np.repeat(np.arange(count), 3), rng.integers(0, 2 ** 26, 3 * count),
                     rng.integers(0, 2 ** 26, 3 * count)], axis=1)
    rows[1::3, 1:] = rows[::3, 1:]  # equal rows: groups of two
    columns = [rows[:, j].copy() for j in range(3)]
    lows = [int(c.min()) for c in columns]
    widths = [_grouping._bits(int(c.max()) - lo + 1) for c, lo in zip(columns, lows)]
    with pytest.MonkeyPatch.context() as patch:
        patch.setattr(_grouping, "_BUCKET_ROWS", 1)
        total = np.concatenate([[0], np.cumsum(np.bincount(rows[:, 0]))])
        assert len(_grouping._bucket_edges(total, 0, widths[1] + widths[2])) - 1 == count
        order, starts = _grouping.group_columns(columns)
    assert np.array_equal(order, np.lexsort([rows[:, j] for j in (2, 1, 0)]))
    assert np.array_equal(rows[order[starts]], _reference_groups(rows)[0])


def test_group_columns_leading_column_too_crowded_for_buckets():
    # one value of the leading column holds most rows: no bucket fits, the passes over all rows run
    rng = np.random.default_rng(8)
    rows = np.stack([np.where(rng.random(100_000) < 0.9, 3, rng.integers(0, 2 ** 20, 100_000)),
                     rng.integers(0, 2 ** 21, 100_000), rng.integers(0, 2 ** 21, 100_000)], axis=1)
    columns = [rows[:, j].copy() for j in range(3)]
    lows = [int(c.min()) for c in columns]
    widths = [_grouping._bits(int(c.max()) - lo + 1) for c, lo in zip(columns, lows)]
    assert _grouping._bucketed_groups(columns, lows, widths) is None
    order, starts = _grouping.group_columns(columns)
    assert np.array_equal(order, np.lexsort([rows[:, j] for j in (2, 1, 0)]))  # numpy.lexsort (stable)
    assert np.array_equal(rows[order[starts]], _reference_groups(rows)[0])


def test_group_columns_in_buckets_with_an_int32_column_spanning_its_range():
    # an int32 leading column from -2**31 to 2**31 - 1: its offsets from the low need int64
    rng = np.random.default_rng(9)
    first = rng.integers(-2 ** 31, 2 ** 31, 50_000).astype(np.int32)
    first[:2] = (-2 ** 31, 2 ** 31 - 1)
    rows = np.stack([first, rng.integers(0, 2 ** 20, 50_000)], axis=1)
    columns = [first, rows[:, 1].copy()]
    lows = [int(c.min()) for c in columns]
    widths = [_grouping._bits(int(c.max()) - lo + 1) for c, lo in zip(columns, lows)]
    assert _grouping._bucketed_groups(columns, lows, widths) is not None
    order, starts = _grouping.group_columns(columns)
    assert np.array_equal(order, np.lexsort([rows[:, 1], rows[:, 0]]))  # numpy.lexsort (stable)
    assert np.array_equal(rows[order[starts]], _reference_groups(rows)[0])


def _reference_pairs(m):
    """Face pairs by numpy alone: sorted corner rows grouped by np.unique, pairs by np.unique."""
    rows, owners = [], []
    for block, start in zip(m.blocks, m.block_offsets[:-1]):
        for face in local_faces(block):
            f = np.full((len(block), 4), -1, dtype=np.int64)
            f[:, 4 - len(face):] = np.sort(block.connectivity[:, list(face)], axis=1)
            rows.append(f)
            owners.append(np.arange(start, start + len(block)))
    rows, owners = np.concatenate(rows), np.concatenate(owners)
    _, inverse, counts = np.unique(rows, axis=0, return_inverse=True, return_counts=True)
    inverse = inverse.ravel()
    twice = np.flatnonzero(counts[inverse] == 2)
    twice = twice[np.argsort(inverse[twice], kind="stable")].reshape(-1, 2)
    a, b = owners[twice[:, 0]], owners[twice[:, 1]]
    apart = a != b
    return np.unique(np.stack([np.minimum(a, b), np.maximum(a, b)], axis=1)[apart], axis=0)


def test_face_topology_in_buckets_on_a_larger_mesh():
    # 40^3 jittered hexahedra: 384 000 face rows whose corners (17 bits, offsets of 11) need two
    # packed passes over all rows, or one over buckets; the same pairs as numpy's grouping
    m = grid_mesh((40, 40, 40), kind="hexahedron", jitter=0.2)
    taken = []
    real = _grouping._bucketed_groups
    with pytest.MonkeyPatch.context() as patch:
        patch.setattr(_grouping, "_bucketed_groups", lambda *a, **k: taken.append(real(*a, **k)) or taken[-1])
        pairs = m.face_pairs
    assert taken and taken[0] is not None  # the bucketed path was taken
    reference = _reference_pairs(m)
    assert np.array_equal(pairs, reference)
    assert m._face_topology["shared_faces"] == len(reference)  # no two cells share two faces here
    assert len(m.boundary_faces[1]) == 6 * 40 * 40


def test_cell_pairs_beside_a_polygon_of_many_sides():
    # a 40-sided polygon ringed by triangles: past the table's width the pairs come from one sort;
    # the same pairs as numpy's grouping
    k = 40
    angle = 2 * np.pi * np.arange(k) / k
    inner = np.stack([np.cos(angle), np.sin(angle)], axis=1)
    outer = 2.0 * np.stack([np.cos(angle + np.pi / k), np.sin(angle + np.pi / k)], axis=1)
    ring = np.stack([np.arange(k), (np.arange(k) + 1) % k, k + np.arange(k)], axis=1)
    m = Mesh(np.vstack([inner, outer]), [("polygon", np.arange(k)[None, :]), ("triangle", ring)])
    assert np.array_equal(m.face_pairs, _reference_pairs(m))
    assert m._face_topology["shared_faces"] == k


def _reference_topology(m):
    """Face pairs and boundary faces from numpy.unique on sorted corner rows."""
    rows, owners = [], []
    width = 4 if m.dimension == 3 else 2
    for block, start in zip(m.blocks, m.block_offsets[:-1]):
        for face in local_faces(block):
            f = np.full((len(block), width), -1, dtype=np.int64)
            f[:, width - len(face):] = np.sort(block.connectivity[:, list(face)], axis=1)
            rows.append(f)
            owners.append(np.arange(start, start + len(block)))
    rows, owners = np.concatenate(rows), np.concatenate(owners)
    uniq, inverse = _reference_groups(rows)
    counts = np.bincount(inverse)
    pairs = set()
    for g in np.flatnonzero(counts == 2):
        a, b = owners[inverse == g]
        if a != b:
            pairs.add((min(a, b), max(a, b)))
    lone = np.flatnonzero(counts[inverse] == 1)
    lone = lone[np.argsort(inverse[lone])]
    return np.array(sorted(pairs)).reshape(-1, 2), rows[lone], owners[lone], uniq, inverse


@pytest.mark.parametrize("kind", ["hexahedron", "tetra", "wedge", "pyramid", "mixed", "quad", "triangle",
                                  "polygon"])
def test_face_topology_against_numpy_unique(kind):
    dim = 2 if kind in ("quad", "triangle", "polygon") else 3
    m = grid_mesh((3, 3, 2)[:dim], kind="mixed" if kind == "mixed" else kind, jitter=0.2)
    pairs, corners, owner, _, inverse = _reference_topology(m)
    assert np.array_equal(m.face_pairs, pairs)
    assert np.array_equal(m.boundary_faces[0], corners)  # lexicographic order of the corners
    assert np.array_equal(m.boundary_faces[1], owner)
    numbers = m.face_numbers()
    row = 0
    for block, ids in zip(m.blocks, numbers):
        local = len(local_faces(block))
        expected = inverse[row:row + local * len(block)].reshape(local, len(block)).T
        row += local * len(block)
        if block.cell_type in ("hexahedron", "wedge", "pyramid"):
            assert np.array_equal(ids, expected)  # faces numbered in lexicographic order
        else:
            assert ids is None


def test_face_topology_with_point_ids_too_wide_for_one_pass():
    # point ids spread over 600 000 (20 bits each): four corner columns need two packed passes
    m = grid_mesh((3, 2, 2), kind="hexahedron", jitter=0.1)
    rng = np.random.default_rng(0)
    ids = np.sort(rng.choice(600_000, m.n_points, replace=False))
    points = np.zeros((600_000, 3))
    points[ids] = m.points
    big = Mesh(points, [("hexahedron", ids[m.blocks[0].connectivity])])
    pairs, corners, owner, _, _ = _reference_topology(big)
    assert np.array_equal(big.face_pairs, pairs)
    assert np.array_equal(big.boundary_faces[0], corners) and np.array_equal(big.boundary_faces[1], owner)
    assert np.array_equal(big.face_pairs, m.face_pairs)


def _same_partition(a, b):
    """True when two face numberings name the same faces (a relabelling, one to one)."""
    pairs = {}
    return all(pairs.setdefault(x, y) == y for x, y in zip(a.ravel(), b.ravel())) and \
        len(set(pairs.values())) == len(pairs)


def _lexicographic_numbers(m):
    _, _, _, _, inverse = _reference_topology(m)
    return inverse.reshape(6, -1).T


def test_grid_face_numbers_name_the_same_faces():
    # a regular grid whose cells list their corners in four different local orders
    m = grid_mesh((4, 3, 2), [(0, 1), (0, 2), (0, 3)])
    turns = np.array([[0, 1, 2, 3, 4, 5, 6, 7], [1, 2, 3, 0, 5, 6, 7, 4], [4, 7, 6, 5, 0, 3, 2, 1],
                      [3, 0, 1, 2, 7, 4, 5, 6]])
    conn = m.blocks[0].connectivity
    conn = conn[np.arange(len(conn))[:, None], turns[np.arange(len(conn)) % 4]]
    g = Mesh(m.points, [("hexahedron", conn)])
    assert g.regular_grid is not None and g._grid_face_numbers is not None
    assert _same_partition(g.face_numbers()[0], _lexicographic_numbers(g))
    assert "_face_topology" not in g.__dict__  # no grouping was needed


def test_grid_face_numbers_fall_back_for_a_degenerate_face():
    m = grid_mesh((2, 2, 2))
    conn = m.blocks[0].connectivity.copy()
    first = int(np.argmin(conn[:, 0]))  # the cell at the origin
    conn[first, 7] = conn[first, 6]  # its top face repeats a corner (still spans one grid step)
    g = Mesh(m.points, [("hexahedron", conn)])
    assert g.regular_grid is not None and g._grid_face_numbers is None
    assert np.array_equal(g.face_numbers()[0], _lexicographic_numbers(g))


def test_old_face_layout_still_available():
    m = grid_mesh((2, 2, 1), kind="mixed")
    faces, owners, order, starts = m._faces
    assert faces.shape == (owners.size, 4) and order.size == owners.size
    grouped = faces[order]
    assert np.all(np.any(grouped[starts[1:]] != grouped[starts[1:] - 1], axis=1))


# ------------------------------------------------------------------ coincident points
def _reference_coincident(points):
    """Distinct points numbered by first appearance, from numpy.unique(axis=0)."""
    p = points + 0.0
    _, first, inverse = np.unique(p, axis=0, return_index=True, return_inverse=True)
    rank = np.empty(first.size, dtype=np.int64)
    rank[np.argsort(first)] = np.arange(first.size)
    return rank[inverse.ravel()], first.size


@pytest.mark.parametrize("seed", range(5))
def test_coincident_points_against_numpy_unique(seed):
    rng = np.random.default_rng(seed)
    base = rng.integers(-2, 3, size=(40, 3)).astype(float) * 0.5
    points = base[rng.integers(0, 40, 200)]
    points[rng.random(200) < 0.2] *= -1.0  # -0.0 and 0.0 are one point
    inverse, n = _places.coincident_points(points)
    ref_inverse, ref_n = _reference_coincident(points)
    assert n == ref_n and np.array_equal(inverse, ref_inverse)


def test_coincident_points_exact_when_keys_collide(monkeypatch):
    # every key equal: the exact fallback must still separate different points
    monkeypatch.setattr(_places, "_MIX", np.zeros(3, dtype=np.uint64))
    rng = np.random.default_rng(1)
    points = rng.integers(0, 3, size=(100, 3)).astype(float)
    inverse, n = _places.coincident_points(points)
    ref_inverse, ref_n = _reference_coincident(points)
    assert n == ref_n and np.array_equal(inverse, ref_inverse)


def test_coincident_points_all_distinct():
    points = np.random.default_rng(2).random((1000, 3))
    inverse, n = _places.coincident_points(points)
    assert n == 1000 and np.array_equal(inverse, np.arange(1000))


# ------------------------------------------------------------------ grid checks
def test_regular_grid_found_with_shuffled_points_and_cells():
    m = grid_mesh((4, 3, 2), [(0, 2), (0, 1), (5, 6)])
    rng = np.random.default_rng(3)
    perm = rng.permutation(m.n_points)
    inverse = np.argsort(perm)
    conn = inverse[m.blocks[0].connectivity][rng.permutation(m.n_cells)]
    s = Mesh(m.points[perm], [("hexahedron", conn)])
    g = s.regular_grid
    assert g is not None and g.cell_shape == (4, 3, 2)
    # scattering the cell centroids gives the grid's own cell centres
    arr = g.cells_to_array(s.cell_centroids[:, 0])
    assert np.allclose(arr[:, 1, 1], (np.arange(4) + 0.5) / 2)


def test_regular_grid_refused_for_sheared_or_incomplete_grids():
    m = grid_mesh((3, 3, 3))
    assert _affine_copy(m, _SHEAR, [0, 0, 0]).regular_grid is None
    # one cell left out: the points no longer make a full grid of cells
    part = Mesh(m.points, [("hexahedron", m.blocks[0].connectivity[1:])])
    assert part.regular_grid is None
    # a cell whose corners skip a grid line
    conn = m.blocks[0].connectivity.copy()
    conn[0, 6] = conn[-1, 6]
    assert Mesh(m.points, [("hexahedron", conn)]).regular_grid is None


# ------------------------------------------------------------------ flat faces
def test_flat_faces_columnwise_matches_the_vector_formula():
    from phasegauge.model import simplices

    m = grid_mesh((4, 4, 3), kind="hexahedron")
    moved = np.zeros(m.n_points, dtype=bool)
    moved[::7] = True  # some cells bent by 1e-6 of their size, the others flat
    bent = _bend(m, 1e-6, seed=4)
    m = Mesh(np.where(moved[:, None], bent.points, m.points), [("hexahedron", m.blocks[0].connectivity)])
    X = m.coordinates[m.blocks[0].connectivity]
    columns = [np.ascontiguousarray(m.coordinates[:, i]) for i in range(3)]
    flat = simplices._flat_faces("hexahedron", [[x[m.blocks[0].connectivity[:, j]] for x in columns]
                                                for j in range(8)])
    # the same test written with np.cross and a dot product, face by face
    expected = np.ones((m.n_cells, 6), dtype=bool)
    for q, face in enumerate(cells.FACES["hexahedron"]):
        P = X[:, list(face)]
        e1, e2, e3 = P[:, 1] - P[:, 0], P[:, 2] - P[:, 0], P[:, 3] - P[:, 0]
        volume = np.abs(np.einsum("nd,nd->n", e1, np.cross(e2, e3)))
        expected[:, q] = volume <= simplices._FLAT * np.einsum("nd,nd->n", e2, e2) ** 1.5
    assert np.array_equal(flat, expected)
    assert np.array_equal(simplices._flat_faces("hexahedron", X), expected)
    assert flat.any() and not flat.all()


@pytest.mark.parametrize("kind, jitter, coned", [("hexahedron", 0.0, "none"), ("wedge", 0.0, "some"),
                                                 ("wedge", 0.2, "all"), ("hexahedron", 0.2, "all"),
                                                 ("mixed", 0.0, "some")])
def test_cells_are_coned_only_where_a_face_needs_a_centre(kind, jitter, coned):
    # flat faces cut alike from both sides keep the few-simplex tables; bent faces, and faces the
    # two sides' tables cut along different diagonals, get a centre and cone their cells
    from phasegauge.model import simplices

    m = grid_mesh((3, 3, 3), kind=kind, jitter=jitter)
    plan = simplices._split_plan(m)
    flags = np.concatenate([np.zeros(len(block), bool) if p is None else p.coned
                            for block, p in zip(m.blocks, plan)])
    assert {"none": not flags.any(), "some": flags.any() and not flags.all(), "all": flags.all()}[coned]
