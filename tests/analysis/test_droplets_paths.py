"""Droplet labelling's fast paths pinned against mesh-wide computations of the same rules.

``label_droplets`` works on the near cells only (c above the band floor) with a per-mesh
neighbour table (index arithmetic on regular grids), numbers grid pieces in the raster order of
``scipy.ndimage.label``, and shares the band by breadth-first rings and pointer jumping. Here the
same quantities are computed over the whole mesh in the plainest way (connected components of
``Mesh.adjacency`` with ``scipy.sparse.csgraph``, the ring rule of the Notes one ring at a time)
and compared exactly; regular grids are also compared with the same mesh taken through the
general (unstructured) path.
"""

import numpy as np
import pytest
from scipy import ndimage, sparse
from scipy.sparse import csgraph

from phasegauge.analysis import _droplet_graph
from phasegauge.analysis.droplets import TABLE_COLUMNS, label_droplets
from phasegauge.model.mesh import Mesh
from phasegauge.meshgen import delaunay_mesh, grid_mesh

LEVEL, FLOOR = 0.5, 1e-3


# ----------------------------------------------------------------------------- helpers
def logistic(distance, eps):
    """Logistic profile c = 1/2 (1 - tanh(n / (2 eps))) (Olsson & Kreiss 2005)."""
    return 0.5 * (1.0 - np.tanh(distance / (2.0 * eps)))


def blob_field(mesh, seed, *, periodic=(), n_blobs=6, eps=0.03, nan_cells=0):
    """Diffuse discs/spheres at random centres and radii (no two cells tie in c), wrapped across
    the periodic axes (indices into the mesh coordinates)."""
    rng = np.random.default_rng(seed)
    X = mesh.cell_centroids
    plane = list(mesh.plane_axes[: mesh.dimension])
    lo, span = mesh.bounds[0, plane], mesh.bounds[1, plane] - mesh.bounds[0, plane]
    centres = lo + rng.random((n_blobs, mesh.dimension)) * span
    d = X[:, None, :] - centres[None]
    for ax in periodic:
        d[..., ax] -= span[ax] * np.round(d[..., ax] / span[ax])
    radius = rng.uniform(0.07, 0.16, n_blobs) * span.max()
    c = logistic((np.linalg.norm(d, axis=2) - radius).min(axis=1), eps * span.max())
    if nan_cells:
        c[rng.choice(mesh.n_cells, nan_cells, replace=False)] = np.nan
    return c


def twin_without_grid(mesh):
    """The same mesh, taken through the unstructured path (its regular-grid layout hidden)."""
    twin = Mesh(mesh.points, [(b.cell_type, b.connectivity) for b in mesh.blocks])
    twin.__dict__["regular_grid"] = None  # the cached property's slot: the grid is not seen
    return twin


def shuffled(mesh, seed):
    """The same cells in a random order (cell numbers no longer follow the grid's raster)."""
    (block,) = mesh.blocks
    order = np.random.default_rng(seed).permutation(mesh.n_cells)
    return Mesh(mesh.points, [(block.cell_type, block.connectivity[order])])


def periodic_pairs(mesh, axes):
    pairs = [_droplet_graph.periodic_pairs(mesh, ax)[0] for ax in axes]
    return np.concatenate(pairs) if pairs else np.empty((0, 2), np.int64)


def reference_labels(mesh, c, connectivity, extra):
    """Connected components of the c > level cells over the whole mesh
    (scipy.sparse.csgraph.connected_components on Mesh.adjacency plus the periodic pairs),
    numbered in the order of each droplet's first cell."""
    inside = np.nan_to_num(c, nan=0.0) > LEVEL
    adjacency = mesh.adjacency(connectivity).tocoo()
    i = np.concatenate([adjacency.row, extra[:, 0]])
    j = np.concatenate([adjacency.col, extra[:, 1]])
    keep = inside[i] & inside[j]
    graph = sparse.coo_matrix((np.ones(keep.sum()), (i[keep], j[keep])), shape=(mesh.n_cells,) * 2)
    _, comp = csgraph.connected_components(graph, directed=False)
    labels = np.full(mesh.n_cells, -1)
    cells = np.flatnonzero(inside)
    _, first = np.unique(comp[cells], return_index=True)
    number = {comp[cells[f]]: n for n, f in enumerate(np.sort(first))}
    labels[cells] = [number[x] for x in comp[cells]]
    return labels


def reference_shared(mesh, c, labels, extra, rings=32):
    """The Notes' band rule over the whole mesh, one ring at a time: every band cell next to an
    assigned cell takes the droplet of its assigned neighbour with the highest clipped c, the
    lowest cell number on a tie. Also returns whether cells were still growing after ``rings``."""
    c0 = np.nan_to_num(c, nan=0.0)
    near = c0 > FLOOR
    p = np.concatenate([mesh.face_pairs, extra])
    p = p[near[p[:, 0]] & near[p[:, 1]]]
    tail = np.concatenate([p[:, 0], p[:, 1]])
    head = np.concatenate([p[:, 1], p[:, 0]])
    cc = np.clip(c0, 0.0, 1.0)
    shared = labels.copy()
    for _ in range(rings):
        grow = (shared[tail] >= 0) & (shared[head] < 0)
        if not grow.any():
            return shared, False
        t, h = tail[grow], head[grow]
        order = np.lexsort((t, -cc[t], h))
        t, h = t[order], h[order]
        first = np.concatenate([[True], h[1:] != h[:-1]])
        shared[h[first]] = shared[t[first]]
    return shared, bool(((shared[tail] >= 0) & (shared[head] < 0)).any())


def corner_boxes(mesh):
    lo = np.vstack([mesh.coordinates[b.connectivity].min(axis=1) for b in mesh.blocks])
    hi = np.vstack([mesh.coordinates[b.connectivity].max(axis=1) for b in mesh.blocks])
    return lo, hi


def assert_same_result(a, b):
    np.testing.assert_array_equal(a.labels, b.labels)
    np.testing.assert_array_equal(a.shared_labels, b.shared_labels)
    np.testing.assert_array_equal(a.weights, b.weights)
    assert list(a.table.columns) == list(b.table.columns) == list(TABLE_COLUMNS)
    for column in TABLE_COLUMNS:
        np.testing.assert_allclose(a.table[column].to_numpy(float), b.table[column].to_numpy(float),
                                   rtol=1e-12, atol=0, err_msg=column)


CASES = [("quad", 2, 30), ("triangle", 2, 30), ("polygon", 2, 24), ("mixed", 2, 24),
         ("hexahedron", 3, 10), ("tetra", 3, 9), ("wedge", 3, 9), ("pyramid", 3, 7), ("mixed", 3, 8)]


def case_mesh(kind, dim, n):
    return grid_mesh((n,) * dim, kind=kind)


# ----------------------------------------------------------------------------- neighbour table
@pytest.mark.parametrize("kind, dim, n", CASES + [("delaunay", 2, 300), ("delaunay", 3, 200)])
def test_neighbour_table_lists_the_face_neighbours(kind, dim, n):
    """Each row of the cached table holds exactly the cell's row of Mesh.adjacency('face')
    (from the grid's index arithmetic on regular grids, from the face pairs elsewhere)."""
    mesh = delaunay_mesh(n, dim=dim, seed=3) if kind == "delaunay" else case_mesh(kind, dim, n)
    table = _droplet_graph.neighbour_table(mesh)
    adjacency = mesh.adjacency("face").tocsr()
    assert table.shape[0] == mesh.n_cells
    for cell in range(mesh.n_cells):
        row = table[cell]
        expected = adjacency.indices[adjacency.indptr[cell]:adjacency.indptr[cell + 1]]
        assert sorted(row[row >= 0].tolist()) == sorted(expected.tolist())


# ----------------------------------------------------------------------------- whole mesh vs near cells
@pytest.mark.parametrize("kind, dim, n", CASES)
@pytest.mark.parametrize("connectivity", ["face", "point"])
def test_labels_and_band_follow_the_mesh_wide_rule(kind, dim, n, connectivity):
    """Labels equal the connected components over the whole mesh (scipy.sparse.csgraph), the shared
    labels equal the ring rule applied to the whole mesh, and the table's sums equal numpy sums over
    the shared labels (exact up to the order of summation: rtol 1e-12)."""
    mesh = case_mesh(kind, dim, n)
    c = blob_field(mesh, seed=n + dim, nan_cells=3)
    result = label_droplets(mesh, c, connectivity=connectivity)
    extra = np.empty((0, 2), np.int64)
    labels = reference_labels(mesh, c, connectivity, extra)
    shared, growing = reference_shared(mesh, c, labels, extra)
    assert not growing and result.count >= 2
    np.testing.assert_array_equal(result.labels, labels)  # scipy.sparse.csgraph.connected_components, exact
    np.testing.assert_array_equal(result.shared_labels, shared)  # the Notes' ring rule over the whole mesh, exact

    c0 = np.nan_to_num(c, nan=0.0)
    dV = mesh.cell_measures
    member = shared >= 0
    inside = labels >= 0
    volume = np.bincount(shared[member], weights=(c0 * dV)[member])
    table = result.table
    np.testing.assert_allclose(table["volume"], volume, rtol=1e-12)  # numpy sums over the whole mesh
    np.testing.assert_allclose(table["threshold_volume"], np.bincount(labels[inside], weights=dV[inside]), rtol=1e-12)
    X = mesh.cell_centroids
    plane = [f"centroid_{'xyz'[a]}" for a in mesh.plane_axes[:dim]]
    for d, column in enumerate(plane):
        expected = np.bincount(shared[member], weights=(c0 * dV * X[:, d])[member]) / volume
        np.testing.assert_allclose(table[column], expected, rtol=1e-12)
    lo, hi = corner_boxes(mesh)  # corner min/max of every cell, numpy
    for d, a in enumerate(mesh.plane_axes[:dim]):
        for drop in range(result.count):
            cells = labels == drop
            assert table[f"bbox_min_{'xyz'[a]}"][drop] == lo[cells, d].min()
            assert table[f"bbox_max_{'xyz'[a]}"][drop] == hi[cells, d].max()


@pytest.mark.parametrize("kind, dim, n", [("quad", 2, 30), ("triangle", 2, 30), ("hexahedron", 3, 10),
                                          ("tetra", 3, 9)])
@pytest.mark.parametrize("axes", [("x",), ("x", "y")])
def test_periodic_labels_and_band_follow_the_mesh_wide_rule(kind, dim, n, axes):
    """With periodic axes the pieces joined across the boundary and the band grown through the
    periodic pairs equal the mesh-wide components and rings over face pairs plus periodic pairs."""
    mesh = case_mesh(kind, dim, n)
    index = tuple("xyz".index(a) for a in axes)
    c = blob_field(mesh, seed=7, periodic=index, n_blobs=8)
    result = label_droplets(mesh, c, periodic=axes)
    extra = periodic_pairs(mesh, index)
    assert extra.size
    labels = reference_labels(mesh, c, "face", extra)
    shared, growing = reference_shared(mesh, c, labels, extra)
    assert not growing
    assert result.count < len(np.unique(reference_labels(mesh, c, "face", extra[:0]))) - 1  # joins happened
    np.testing.assert_array_equal(result.labels, labels)  # scipy.sparse.csgraph.connected_components, exact
    np.testing.assert_array_equal(result.shared_labels, shared)  # the Notes' ring rule over the whole mesh, exact
    dV = mesh.cell_measures
    member = shared >= 0
    np.testing.assert_allclose(result.table["volume"],
                               np.bincount(shared[member], weights=(np.nan_to_num(c) * dV)[member]), rtol=1e-12)


# ----------------------------------------------------------------------------- regular grids vs the general path
@pytest.mark.parametrize("dim, n", [(2, 32), (3, 12)])
@pytest.mark.parametrize("order", ["raster", "shuffled"])
@pytest.mark.parametrize("connectivity", ["face", "point"])
@pytest.mark.parametrize("axes", [(), ("x", "y")])
def test_grid_path_gives_the_general_result(dim, n, order, connectivity, axes):
    """A regular grid (neighbours by index arithmetic, pieces numbered in scipy.ndimage.label's
    raster order) gives the same labels, shares and table as the same mesh through the unstructured
    path, also with its cells in random order, with point connectivity and periodic axes."""
    mesh = grid_mesh((n,) * dim, bounds=[(0.0, 1.0)] * (dim - 1) + [(0.0, 0.75)])
    if order == "shuffled":
        mesh = shuffled(mesh, seed=n)
    assert mesh.regular_grid is not None
    c = blob_field(mesh, seed=11, periodic=tuple("xyz".index(a) for a in axes), n_blobs=9)
    fast = label_droplets(mesh, c, connectivity=connectivity, periodic=axes)
    general = label_droplets(twin_without_grid(mesh), c, connectivity=connectivity, periodic=axes)
    assert fast.count >= 2
    assert_same_result(fast, general)


@pytest.mark.parametrize("dim", [2, 3])
def test_grid_pieces_are_numbered_as_ndimage_label(dim):
    """On a grid with shuffled cells, the pieces come numbered as scipy.ndimage.label numbers them
    (raster order of their first cell), which fixes the reference piece of every periodic droplet."""
    n = 24 if dim == 2 else 10
    mesh = shuffled(grid_mesh((n,) * dim), seed=5)
    c = blob_field(mesh, seed=2, n_blobs=8)
    near = np.flatnonzero(c > FLOOR)
    local = np.full(mesh.n_cells + 1, near.size)
    local[near] = np.arange(near.size)
    neighbours = local[_droplet_graph.neighbour_table(mesh)[near]]
    count, piece = _droplet_graph.pieces(mesh, near, c[near] > LEVEL, neighbours, "face")
    grid = mesh.regular_grid
    volume = np.zeros(mesh.n_cells, dtype=bool)
    volume[grid.cell_index] = c > LEVEL
    expected, expected_count = ndimage.label(volume.reshape(grid.cell_shape))  # scipy.ndimage.label
    assert count == expected_count >= 3
    np.testing.assert_array_equal(piece[:-1], expected.ravel()[grid.cell_index[near]] - 1)


# ----------------------------------------------------------------------------- ties, plateaus, edge cases
@pytest.mark.parametrize("kind", ["quad", "hexahedron"])
def test_ties_go_to_the_neighbour_with_the_lower_cell_number(kind):
    """Two equal droplets mirrored about x = 1/2 (c symmetric to the last bit): band cells on the
    mirror line see neighbours of equal c from both droplets and take the droplet of the
    lower-numbered one (the rule in the Notes)."""
    dim = 3 if kind == "hexahedron" else 2
    n = 13 if dim == 3 else 31  # odd: a middle column of cells
    mesh = grid_mesh((n,) * dim, kind=kind)
    X = mesh.cell_centroids
    column = np.floor(X[:, 0] * n).astype(int)
    from_middle = np.abs(2 * column - (n - 1)) / (2.0 * n)  # the same number for mirrored columns
    d = np.sqrt((from_middle - 0.2) ** 2 + ((X[:, 1:] - 0.5) ** 2).sum(axis=1))
    c = logistic(d - 0.12, 0.05)
    result = label_droplets(mesh, c)
    labels = reference_labels(mesh, c, "face", np.empty((0, 2), np.int64))
    shared, _ = reference_shared(mesh, c, labels, np.empty((0, 2), np.int64))
    assert result.count == 2
    np.testing.assert_array_equal(result.shared_labels, shared)  # the Notes' ring rule, lower cell number on a tie
    # ties did occur: some band cell has neighbours of equal c in both droplets
    p = mesh.face_pairs
    tail = np.concatenate([p[:, 0], p[:, 1]])
    head = np.concatenate([p[:, 1], p[:, 0]])
    band = (c > FLOOR) & (labels < 0)
    tie = False
    for h in np.flatnonzero(band & (np.abs(X[:, 0] - 0.5) < 1.0 / n)):
        nb = tail[head == h]
        owners = {shared[t] for t in nb if shared[t] >= 0 and c[t] == c[nb].max()}
        tie |= len(owners) == 2
    assert tie


@pytest.mark.parametrize("kind, shape", [("quad", (80, 4)), ("hexahedron", (80, 3, 3))])
def test_plateau_wider_than_the_rings_is_split_at_the_middle(kind, shape):
    """Two droplets at the ends of a strip with a flat band (c = 0.2) 74 cells long: after the 32 rings
    the rest goes by centroid distance (multi-source Dijkstra), splitting the band at the middle by
    symmetry; the grid and the general path agree."""
    mesh = grid_mesh(shape, bounds=[(0.0, 1.0)] + [(0.0, 0.05)] * (len(shape) - 1), kind=kind)
    x = mesh.cell_centroids[:, 0]
    c = np.where((x < 3 / 80) | (x > 77 / 80), 1.0, 0.2)
    result = label_droplets(mesh, c)
    assert result.count == 2
    left = result.labels[np.argmin(x)]
    right = result.labels[np.argmax(x)]
    np.testing.assert_array_equal(result.shared_labels, np.where(x < 0.5, left, right))  # mirror symmetry, exact
    assert_same_result(result, label_droplets(twin_without_grid(mesh), c))


def test_band_floor_below_zero_takes_every_cell():
    """A negative band floor makes every cell (NaN cells count as c = 0) a band cell: all go to the
    one droplet; the volume is the integral of c."""
    mesh = grid_mesh((20, 20), kind="triangle")
    X = mesh.cell_centroids
    c = logistic(np.linalg.norm(X - 0.5, axis=1) - 0.2, 0.02)
    c[0] = np.nan
    result = label_droplets(mesh, c, band_floor=-1.0)
    assert result.count == 1 and (result.shared_labels == 0).all()
    assert result.table["volume"][0] == pytest.approx(np.nansum(c * mesh.cell_measures), rel=1e-12)


@pytest.mark.parametrize("shape", [(1, 1), (1, 1, 1), (3, 1)])
def test_tiny_meshes(shape):
    mesh = grid_mesh(shape)
    c = np.ones(mesh.n_cells)
    result = label_droplets(mesh, c)
    assert result.count == 1 and (result.labels == 0).all()
    assert label_droplets(mesh, np.zeros(mesh.n_cells)).count == 0
