"""The cell graph of droplet labelling: face neighbours, periodic pairs, connected pieces, periodic joins.

Steps 1 and 2 of :func:`phasegauge.analysis.droplets.label_droplets` (see ``_labelling``): the
per-mesh tables (``neighbour_table``, ``periodic_pairs``, cached through ``Mesh.memo``), the
connected pieces of the core cells and their joins across periodic boundaries.
"""

from __future__ import annotations

import numpy as np
from scipy import sparse
from scipy.sparse import csgraph
from scipy.spatial import cKDTree

from ..model._faces import SPLIT_FACES, pairs_as_neighbours
from ..model._grouping import unique_ints
from ..model._whole_cells import WholeCells, whole_cell_count
from ..model.corners import incidence_rows
from ..model.mesh import Mesh

__all__ = ["periodic_pairs", "neighbour_table", "pieces", "join_periodic", "pairs_through_points"]


def periodic_pairs(mesh: Mesh, axis: int, *, whole: bool = False):
    """Cell pairs across the periodic boundary of ``axis``: (low-side cell, high-side cell), period.

    With ``whole`` (a split mesh, :attr:`Mesh.cell_parents`), the pairs of whole cells that the
    pieces' pairs join, each once, sorted (numbers of :class:`~phasegauge.model._whole_cells.WholeCells`).
    Cached on the mesh (``mesh.memo``).
    """
    if whole:
        return mesh.memo(("droplet_periodic_pairs_whole", int(axis)), lambda: _whole_periodic_pairs(mesh, axis))
    return mesh.memo(("droplet_periodic_pairs", int(axis)), lambda: _find_periodic_pairs(mesh, axis))


def _whole_periodic_pairs(mesh: Mesh, axis: int):
    pairs, lo, period = _find_periodic_pairs(mesh, axis)  # the pieces' pairs: not kept, read once here
    n = max(whole_cell_count(mesh), 1)
    key = unique_ints(mesh.cell_parents[pairs[:, 0]].astype(np.int64) * n + mesh.cell_parents[pairs[:, 1]])
    return np.stack([key // n, key % n], axis=1), lo, period


def _find_periodic_pairs(mesh: Mesh, axis: int):
    corners, owner = mesh.boundary_faces
    X = mesh.coordinates
    valid = corners >= 0
    pts = X[np.where(valid, corners, 0)]
    centre = (pts * valid[..., None]).sum(axis=1) / valid.sum(axis=1)[:, None]
    used = X[mesh.used_points]
    lo, hi = float(used[:, axis].min()), float(used[:, axis].max())
    period = hi - lo
    tol = 1e-6 * period
    on_lo = np.abs(centre[:, axis] - lo) <= tol
    on_hi = np.abs(centre[:, axis] - hi) <= tol
    other = [d for d in range(mesh.dimension) if d != axis]
    pairs = np.empty((0, 2), dtype=np.int64)
    if on_lo.any() and on_hi.any():
        tree = cKDTree(centre[on_hi][:, other])
        dist, j = tree.query(centre[on_lo][:, other])
        lo_cells = owner[on_lo]
        accept = dist <= 0.5 * mesh.cell_sizes_of(lo_cells)
        pairs = np.stack([lo_cells[accept], owner[on_hi][j[accept]]], axis=1)
    return pairs, lo, period


#: face pairs placed in the neighbour table per pass
_PAIR_CHUNK = 1 << 18


def neighbour_table(mesh: Mesh) -> np.ndarray:
    """Face neighbours of every cell, shape (n_cells, m), -1 padded; cached per mesh.

    From the cell array's index arithmetic on regular grids (no face grouping needed),
    else from ``mesh.face_pairs`` (each pair once as (a, b) in row a, once as (b, a) in row b);
    the whole cells' own table for a :class:`~phasegauge.model._whole_cells.WholeCells` view.
    """
    if isinstance(mesh, WholeCells):
        return mesh.face_neighbours
    return mesh.memo("droplet_neighbours", lambda: _build_neighbour_table(mesh))


def _build_neighbour_table(mesh: Mesh) -> np.ndarray:
    n = mesh.n_cells
    dtype = np.int32 if n < np.iinfo(np.int32).max else np.int64
    grid = mesh.regular_grid
    given = mesh.memo(SPLIT_FACES, lambda: None, keep=False)  # a reader's split: rows in this order
    if given is not None:
        width = max(int(np.count_nonzero(given >= 0, axis=1).max(initial=0)), 1)
        return given if width == given.shape[1] else np.ascontiguousarray(given[:, :width])
    if grid is not None:
        order = grid.cell_order.astype(dtype, copy=False).reshape(grid.cell_shape)
        dim = order.ndim
        table = np.full(order.shape + (2 * dim,), -1, dtype=dtype)
        for axis in range(dim):
            lo = tuple(slice(None, -1) if d == axis else slice(None) for d in range(dim))
            hi = tuple(slice(1, None) if d == axis else slice(None) for d in range(dim))
            table[hi + (2 * axis,)] = order[lo]  # neighbour on the low side
            table[lo + (2 * axis + 1,)] = order[hi]  # on the high side
        table = np.take(table.reshape(-1, 2 * dim), grid.cell_index, axis=0)
    else:
        p = mesh.face_pairs  # sorted by first cell
        a, b = p[:, 0], p[:, 1]
        deg_a = np.bincount(a, minlength=n)
        deg_b = np.bincount(b, minlength=n)
        width = max(int((deg_a + deg_b).max(initial=0)), 1)
        table = np.full((n, width), -1, dtype=dtype)
        flat = table.reshape(-1)
        # row a holds its b's first, in pair order: pair r goes to slot r - (row a's first pair);
        # row b then its a's, in pair order: the r-th pair sorted by b goes to slot deg_a[b] +
        # r - (row b's first pair). In chunks of pairs (intp arithmetic: a * width must not
        # overflow int32), so the temporaries stay small: the first step's memory peak was here
        off_a = np.cumsum(deg_a)
        off_a -= deg_a
        np.negative(off_a, out=off_a)
        off_b = np.cumsum(deg_b)
        off_b -= deg_b
        np.subtract(deg_a, off_b, out=off_b)
        del deg_a, deg_b
        by_b = np.argsort(b, kind="stable")
        for lo in range(0, a.size, _PAIR_CHUNK):
            rank = np.arange(lo, min(lo + _PAIR_CHUNK, a.size))
            rows = a[lo:lo + _PAIR_CHUNK].astype(np.intp)
            flat[rows * width + rank + off_a[rows]] = b[lo:lo + _PAIR_CHUNK]
            order = by_b[lo:lo + _PAIR_CHUNK]
            rows = b[order].astype(np.intp)
            flat[rows * width + rank + off_b[rows]] = a[order]
        del a, b, p, by_b
        pairs_as_neighbours(mesh, table)  # the mesh reads its face pairs back from the table
    return table


def pieces(mesh: Mesh, cells: np.ndarray, core: np.ndarray, neighbours: np.ndarray,
            connectivity: str, above: np.ndarray | None = None) -> tuple[int, np.ndarray]:
    """Connected pieces of the core cells without periodic joins: (count, piece per local cell, -1 off core).

    ``cells`` are the mesh cells of the local numbering (sorted), ``core`` marks those with
    c > level, ``neighbours`` (len(cells), m) their face neighbours in local numbers (len(cells):
    none). Pieces are numbered in the order of their first cell (raster order of the cell
    array on regular grids, as ``scipy.ndimage.label``; mesh order elsewhere). With ``above``
    (data on points: True at the points with c > level) and face connectivity, two core cells
    join where they share a point above the level (:func:`_through_points`), not through any face.
    """
    grid = mesh.regular_grid
    n_local = cells.size
    out = np.full(n_local + 1, -1, dtype=np.int64)  # slot n_local: "no cell"
    core_local = np.flatnonzero(core)
    if connectivity == "face" and above is not None:
        count, out[core_local] = _through_points(mesh, cells[core_local], above)
        return count, out
    if connectivity == "point" and grid is not None:
        from scipy import ndimage  # imported here: it costs ~0.7 s and only this case uses it

        structure = ndimage.generate_binary_structure(mesh.dimension, mesh.dimension)
        volume = np.zeros(int(np.prod(grid.cell_shape)), dtype=bool)
        volume[grid.cell_index[cells[core_local]]] = True
        lab, count = ndimage.label(volume.reshape(grid.cell_shape), structure=structure)
        out[core_local] = lab.ravel()[grid.cell_index[cells[core_local]]].astype(np.int64) - 1
        return int(count), out
    k = core_local.size
    if connectivity == "face":
        rank = np.full(n_local + 1, -1, dtype=np.int64)
        rank[core_local] = np.arange(k)
        nb = np.take(rank, np.take(neighbours, core_local, axis=0))
        keep = nb >= 0
        indptr = np.concatenate([[0], np.cumsum(keep.sum(axis=1))])  # rows: the core cells in order
        graph = sparse.csr_matrix((np.ones(indptr[-1], dtype=np.int8), nb[keep], indptr), shape=(k, k))
        count, sub = csgraph.connected_components(graph, directed=False)
        if grid is not None and count:  # number as ndimage.label: by the raster position of the first cell
            raster = grid.cell_index[cells[core_local]]
            first = np.full(count, raster.max() + 1)
            np.minimum.at(first, sub, raster)
            rank_of = np.empty(count, dtype=np.int64)
            rank_of[np.argsort(first)] = np.arange(count)
            sub = rank_of[sub]
    else:
        # cells and their corner points as one bipartite graph: point-connected cells
        # are in one component; points of no inside cell form their own components
        incidence = incidence_rows(mesh, cells[core_local]).tocoo()
        n = k + mesh.n_points
        graph = sparse.coo_matrix((np.ones(incidence.nnz, dtype=np.int8),
                                   (incidence.row, k + incidence.col)), shape=(n, n))
        _, comp = csgraph.connected_components(graph, directed=False)
        count, sub = np.unique(comp[:k], return_inverse=True)
        count = int(count.size)
    out[core_local] = sub
    return int(count), out


def _through_points(mesh: Mesh, core_cells: np.ndarray, above: np.ndarray) -> tuple[int, np.ndarray]:
    """Pieces of the core cells joined through their corners above the level: (count, piece per core cell).

    The graph of the core cells and the points with c > level, a cell linked to each of its corners
    above the level. The region where the interpolant of the point values exceeds the level holds a
    neighbourhood of each such point, so cells sharing one are joined there; cells sharing only
    points below the level (a film between two drops, one row of points thick) are not, as the
    contour c = level of the points is two pieces there. Pieces in the order of their first cell
    (``connected_components`` numbers them in node order, and the cells come first).
    """
    k = core_cells.size
    if k == 0:
        return 0, np.empty(0, dtype=np.int64)
    starts, corners = _corners_above(mesh, core_cells, above)
    used = np.zeros(above.size, dtype=bool)  # the corners above, numbered after the cells
    used[corners] = True
    points = np.flatnonzero(used)
    del used
    number = np.empty(above.size, dtype=np.int64)
    number[points] = np.arange(k, k + points.size)
    n = k + points.size
    indptr = np.empty(n + 1, dtype=np.int64)  # rows of the cells, then the points' (empty: one side is enough)
    indptr[:k + 1] = starts
    indptr[k + 1:] = starts[-1]
    graph = sparse.csr_matrix((np.ones(corners.size, dtype=np.int8), number[corners], indptr), shape=(n, n))
    count, comp = csgraph.connected_components(graph, directed=False)  # every point joins a cell
    return int(count), comp[:k].astype(np.int64, copy=False)


def _corners_above(mesh: Mesh, cells: np.ndarray, above: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """The corners above the level of ``cells`` (sorted), row by row: (row starts (len(cells) + 1), corners)."""
    if not hasattr(mesh, "blocks"):  # a view of whole cells: its own rows of corners
        incidence = incidence_rows(mesh, cells)
        keep = above[incidence.indices]
        kept = np.zeros(keep.size + 1, dtype=np.int64)
        np.cumsum(keep, out=kept[1:])
        return kept[incidence.indptr], incidence.indices[keep]
    counts, corner_parts = [], []
    bounds = np.searchsorted(cells, mesh.block_offsets)
    for b, block in enumerate(mesh.blocks):
        lo, hi = int(bounds[b]), int(bounds[b + 1])
        if hi > lo:
            corners = block.connectivity[cells[lo:hi] - mesh.block_offsets[b]]
            keep = above[corners]  # a corner repeated in a degenerate cell: one more link, the same graph
            counts.append(np.count_nonzero(keep, axis=1))
            corner_parts.append(corners[keep])
    starts = np.zeros(cells.size + 1, dtype=np.int64)
    np.cumsum(np.concatenate(counts), out=starts[1:])
    return starts, np.concatenate(corner_parts)


def pairs_through_points(mesh: Mesh, coordinates: np.ndarray, cells: np.ndarray, core: np.ndarray,
                         pairs: np.ndarray, above: np.ndarray, axis: int, lo: float, period: float) -> np.ndarray:
    """The periodic pairs (local numbers, ``cells.size``: none) of two core cells joined through a point above
    the level on the periodic plane: the low cell's on the low plane or the high cell's on the high plane
    (a point written on both planes, or the two planes a spacing apart); with data on points, as
    :func:`_through_points` joins the cells inside the mesh."""
    n = cells.size
    inside = (pairs < n).all(axis=1)
    pairs = pairs[inside]
    pairs = pairs[core[pairs[:, 0]] & core[pairs[:, 1]]]
    if not pairs.size:
        return pairs
    tol = 1e-6 * period
    keep = (_above_on_plane(mesh, coordinates, cells[pairs[:, 0]], above, axis, lo, tol)
            | _above_on_plane(mesh, coordinates, cells[pairs[:, 1]], above, axis, lo + period, tol))
    return pairs[keep]


def _above_on_plane(mesh: Mesh, coordinates: np.ndarray, cells: np.ndarray, above: np.ndarray, axis: int,
                    plane: float, tol: float) -> np.ndarray:
    """True for each of ``cells`` with a corner above the level on the plane ``x[axis] = plane``."""
    unique, back = np.unique(cells, return_inverse=True)
    starts, corners = _corners_above(mesh, unique, above)
    on = np.zeros(corners.size + 1, dtype=np.int64)
    np.cumsum(np.abs(coordinates[corners, axis] - plane) <= tol, out=on[1:])
    return (on[starts[1:]] > on[starts[:-1]])[back.ravel()]


def join_periodic(n_pieces: int, piece: np.ndarray, links):
    """Join pieces across periodic boundaries.

    Parameters
    ----------
    links : list of (pairs, low end, period) per periodic axis; pairs (k, 2) of (low cell, high cell)

    Returns
    -------
    droplet_of_piece : ndarray (n_pieces,)
    offset : ndarray (n_pieces, n_axes) shift (in coordinate units) that unwraps each piece
    spanning : ndarray (n_droplets,) bool
    """
    n_axes = len(links)
    a_list, b_list, s_list = [], [], []
    for k, (pairs, _lo, period) in enumerate(links):
        pa, pb = piece[pairs[:, 1]], piece[pairs[:, 0]]  # high-side piece a, low-side piece b
        keep = (pa >= 0) & (pb >= 0)
        shift = np.zeros((int(keep.sum()), n_axes))
        shift[:, k] = period  # seen from a (at the high side), b's cells lie one period further
        a_list.append(pa[keep])
        b_list.append(pb[keep])
        s_list.append(shift)
    a = np.concatenate(a_list) if a_list else np.empty(0, np.int64)
    b = np.concatenate(b_list) if b_list else np.empty(0, np.int64)
    s = np.concatenate(s_list) if s_list else np.empty((0, n_axes))
    if a.size:
        edges, first = np.unique(np.column_stack([a, b, s]), axis=0, return_index=True)
        a, b, s = edges[:, 0].astype(np.int64), edges[:, 1].astype(np.int64), edges[:, 2:]
    graph = sparse.coo_matrix((np.ones(a.size), (a, b)), shape=(n_pieces, n_pieces))
    n_drop, droplet_of_piece = csgraph.connected_components(graph, directed=False)
    offset = np.zeros((n_pieces, n_axes))
    if a.size == 0:
        return n_drop, droplet_of_piece, offset, np.zeros(n_drop, dtype=bool)
    # spanning forest: a virtual root joined to the first piece of every droplet
    roots = np.unique(droplet_of_piece, return_index=True)[1]
    root = n_pieces
    rows = np.concatenate([a, np.full(roots.size, root)])
    cols = np.concatenate([b, roots])
    forest = sparse.coo_matrix((np.ones(rows.size), (rows, cols)), shape=(n_pieces + 1, n_pieces + 1)).tocsr()
    _, pred = csgraph.breadth_first_order(forest, root, directed=False, return_predecessors=True)
    pred = pred[:n_pieces]
    # shift of each piece relative to its predecessor, looked up in the directed edge list
    da = np.concatenate([a, b])
    db = np.concatenate([b, a])
    ds = np.concatenate([s, -s])
    key = da * (n_pieces + 1) + db
    order = np.argsort(key, kind="stable")
    is_tree = (pred >= 0) & (pred != root)
    want = pred[is_tree] * (n_pieces + 1) + np.flatnonzero(is_tree)
    where = order[np.searchsorted(key[order], want)]
    offset[is_tree] = ds[where]
    parent = np.where(is_tree, pred, np.arange(n_pieces))
    while True:  # pointer jumping: log2(depth) rounds
        grand = parent[parent]
        offset = offset + np.where((parent != np.arange(n_pieces))[:, None], offset[parent], 0.0)
        if np.array_equal(grand, parent):
            break
        parent = grand
    residual = offset[a] + s - offset[b]
    scale = max(float(np.abs(s).max()), 1.0)
    open_cycle = np.any(np.abs(residual) > 1e-9 * scale, axis=1)
    spanning = np.zeros(n_drop, dtype=bool)
    spanning[droplet_of_piece[a[open_cycle]]] = True
    return n_drop, droplet_of_piece, offset, spanning
