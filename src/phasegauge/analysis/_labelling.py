"""Droplet labelling: connected regions of c > level, periodic joins, band sharing, per-droplet table.

The algorithm, in vectorised steps. Everything after the first pass over c runs on the
*near* cells only (c above the band floor: the droplet cores and their diffuse band, a
small part of a large mesh), numbered locally in mesh order, with their face neighbours
taken from a per-mesh table (``_neighbour_table``: index arithmetic on a regular grid,
``mesh.face_pairs`` elsewhere):

1. *Pieces.* Cells with ``c > level`` are grouped into connected pieces by
   ``scipy.sparse.csgraph.connected_components`` on the face graph restricted
   to those cells (on a regular grid numbered in the raster order of
   ``scipy.ndimage.label``), or for point adjacency on the cell-point graph
   (``scipy.ndimage.label`` with the full structure on a regular grid).
2. *Periodic joins.* Boundary faces on the low and high side of each periodic
   axis are matched by their centre coordinates in the other axes (a KD-tree),
   giving cell pairs across the boundary. Pieces linked by such pairs form one
   droplet. A spanning tree of the piece graph gives each piece the period
   shift that unwraps it next to its neighbours (pointer jumping along the
   tree); a link whose shifts do not close (a cycle with a net shift) marks a
   droplet that wraps the whole period: ``spanning``.
3. *Band sharing.* Cells with ``band_floor < c <= level`` (the diffuse band
   below the level) go to the droplet nearest to them along the face graph
   (plus periodic pairs): rings of cells grown breadth first from the
   droplet cores, each new cell taking the droplet of its neighbour in the
   ring before with the highest c (one pass over the neighbour table for
   all rings, then down these parent links ring by ring; a wide plateau
   is finished by a multi-source Dijkstra search along centroid distances).
   Band cells whose band region touches no droplet (a dissolving remnant
   below the level) stay unassigned.
4. *Table.* Integrals with weights ``c dV`` over each droplet's cells,
   threshold cells and band share, by ``numpy.bincount``; boxes from the
   corners of the core cells.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
import pandas as pd
from scipy import sparse
from scipy.sparse import csgraph
from scipy.spatial import cKDTree

from ..errors import OptionError
from ..model.axes import AXIS_INDEX, AXIS_NAMES
from ..model.fields import cell_values, vector_values
from ..model.corners import corner_extremes
from ..model.mesh import Mesh

__all__ = ["DropletLabels", "label_droplets", "TABLE_COLUMNS"]

#: columns of :attr:`DropletLabels.table`, in order
TABLE_COLUMNS = (
    ["droplet", "volume", "threshold_volume", "centroid_x", "centroid_y", "centroid_z",
     "equivalent_diameter", "circularity", "sphericity"]
    + [f"bbox_{end}_{a}" for end in ("min", "max") for a in AXIS_NAMES]
    + ["velocity_x", "velocity_y", "velocity_z", "under_resolved", "spanning"]
)

@dataclass(frozen=True)
class DropletLabels:
    """Result of :func:`label_droplets`.

    Attributes
    ----------
    labels : ndarray of shape (n_cells,), int32
        Droplet number of each cell with ``c > level``; -1 elsewhere.
    shared_labels : ndarray of shape (n_cells,), int32
        As ``labels``, plus the diffuse-band cells shared out to droplets
        (the cells each droplet's ``volume`` integrates over).
    table : pandas.DataFrame
        One row per droplet, columns :data:`TABLE_COLUMNS`.
    weights : ndarray of shape (n_cells,), float64
        ``c dV`` of every cell (0 where c is not finite), in volume units.
    level : float
    periodic : tuple of str
        The periodic axes used, e.g. ``('x',)``.
    """

    labels: np.ndarray
    shared_labels: np.ndarray
    table: pd.DataFrame
    weights: np.ndarray
    level: float
    periodic: tuple = field(default=())

    @property
    def count(self) -> int:
        """Number of droplets."""
        return int(len(self.table))


# --------------------------------------------------------------------------- arguments
def _normalize_periodic(mesh: Mesh, periodic) -> tuple:
    """Periodic axis names -> (names, indices into ``mesh.coordinates`` columns)."""
    if periodic is None:
        return (), ()
    if isinstance(periodic, str):
        periodic = (periodic,)
    names, index = [], []
    plane = list(mesh.plane_axes[: mesh.dimension])
    for name in periodic:
        key = str(name).lower()
        if key not in AXIS_NAMES:
            raise OptionError(f"periodic axes must be among 'x', 'y', 'z', found {name!r}",
                              fix="name the periodic axes, e.g. periodic=('x',)")
        axis = AXIS_INDEX[key]
        if axis not in plane:
            raise OptionError(
                f"periodic axis '{key}' is not an axis of this {mesh.dimension}D mesh "
                f"(it spans {', '.join(AXIS_NAMES[a] for a in plane)})",
                fix="name only axes the mesh spans")
        if key not in names:
            names.append(key)
            index.append(plane.index(axis))
    return tuple(names), tuple(index)


# --------------------------------------------------------------------------- geometry caches
def _periodic_pairs(mesh: Mesh, axis: int):
    """Cell pairs across the periodic boundary of ``axis``: (low-side cell, high-side cell), period.

    Cached on the mesh (``mesh.memo``).
    """
    return mesh.memo(("droplet_periodic_pairs", int(axis)), lambda: _find_periodic_pairs(mesh, axis))


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
        accept = dist <= 0.5 * mesh.cell_sizes[lo_cells]
        pairs = np.stack([lo_cells[accept], owner[on_hi][j[accept]]], axis=1)
    return pairs, lo, period


#: face pairs placed in the neighbour table per pass
_PAIR_CHUNK = 1 << 18


def _neighbour_table(mesh: Mesh) -> np.ndarray:
    """Face neighbours of every cell, shape (n_cells, m), -1 padded; cached per mesh.

    From the cell array's index arithmetic on regular grids (no face grouping needed),
    else from ``mesh.face_pairs`` (each pair once as (a, b) in row a, once as (b, a) in row b).
    """
    return mesh.memo("droplet_neighbours", lambda: _build_neighbour_table(mesh))


def _build_neighbour_table(mesh: Mesh) -> np.ndarray:
    n = mesh.n_cells
    dtype = np.int32 if n < np.iinfo(np.int32).max else np.int64
    grid = mesh.regular_grid
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
    return table


def _face_lengths(mesh: Mesh, pairs: np.ndarray) -> np.ndarray:
    return np.linalg.norm(mesh.cell_centroids[pairs[:, 0]] - mesh.cell_centroids[pairs[:, 1]], axis=1)


# --------------------------------------------------------------------------- labelling steps
def _pieces(mesh: Mesh, cells: np.ndarray, core: np.ndarray, neighbours: np.ndarray,
            connectivity: str) -> tuple[int, np.ndarray]:
    """Connected pieces of the core cells without periodic joins: (count, piece per local cell, -1 off core).

    ``cells`` are the mesh cells of the local numbering (sorted), ``core`` marks those with
    c > level, ``neighbours`` (len(cells), m) their face neighbours in local numbers (len(cells):
    none). Pieces are numbered in the order of their first cell (raster order of the cell
    array on regular grids, as ``scipy.ndimage.label``; mesh order elsewhere).
    """
    grid = mesh.regular_grid
    n_local = cells.size
    out = np.full(n_local + 1, -1, dtype=np.int64)  # slot n_local: "no cell"
    core_local = np.flatnonzero(core)
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
        incidence = mesh.incidence[cells[core_local]].tocoo()
        n = k + mesh.n_points
        graph = sparse.coo_matrix((np.ones(incidence.nnz, dtype=np.int8),
                                   (incidence.row, k + incidence.col)), shape=(n, n))
        _, comp = csgraph.connected_components(graph, directed=False)
        count, sub = np.unique(comp[:k], return_inverse=True)
        count = int(count.size)
    out[core_local] = sub
    return int(count), out


def _join_periodic(n_pieces: int, piece: np.ndarray, links):
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


def _grid_order(mesh: Mesh) -> np.ndarray:
    """Mesh cell at each position of a regular grid's cell array (C order), cached."""
    grid = mesh.regular_grid
    return grid.cell_order.reshape(grid.cell_shape)


def _band_face_pairs(mesh: Mesh, member: np.ndarray, band: np.ndarray) -> np.ndarray:
    """Face pairs of member cells with at least one band cell; from the cell array on regular grids."""
    grid = mesh.regular_grid
    if grid is None:
        p = mesh.face_pairs
        keep = member[p[:, 0]] & member[p[:, 1]] & (band[p[:, 0]] | band[p[:, 1]])
        return p[keep]
    order = _grid_order(mesh)
    m = member[order]
    b = band[order]
    out = []
    for axis in range(order.ndim):
        lo = tuple(slice(None, -1) if d == axis else slice(None) for d in range(order.ndim))
        hi = tuple(slice(1, None) if d == axis else slice(None) for d in range(order.ndim))
        ok = m[lo] & m[hi] & (b[lo] | b[hi])
        out.append(np.stack([order[lo][ok], order[hi][ok]], axis=1))
    return np.concatenate(out)


def _share_band(label: np.ndarray, c: np.ndarray, neighbours: np.ndarray, extra: np.ndarray,
                rings: int = 32):
    """Band cells given to the nearest droplet, in the local numbering of the near cells.

    Parameters
    ----------
    label : ndarray (k,), droplet of each core cell, -1 for band cells
    c : ndarray (k,), indicator of each cell
    neighbours : ndarray (k, m), face neighbours in local numbers (k: none)
    extra : ndarray (e, 2), further neighbour pairs in local numbers (periodic pairs)
    rings : int, breadth-first rings before a cell counts as far (below 127)

    Returns
    -------
    shared : ndarray (k,), droplet of every cell (-1: none, or far)
    root : ndarray (k,), the core cell (local number) each cell's droplet came from
    far : bool, some cells lie more than ``rings`` rings from every core

    Ring r holds the band cells r steps from the nearest core cell (breadth first over
    the face graph plus ``extra``). Each cell of ring r takes the droplet of its neighbour
    in ring r - 1 with the highest c clipped to [0, 1], the lower local number (so the
    lower cell number) on a tie; the droplets then run down these parent links from
    the cores, ring by ring.
    """
    k = c.size
    # ring numbers in int8 (rings < 127): small arrays make the many gathers cheaper
    ring = np.full(k + 1, 127, dtype=np.int8)  # 127: not visited
    ring[k] = -2  # the "no cell" slot: never counted as not visited, never in a ring before
    frontier = np.flatnonzero(label >= 0)
    ring[frontier] = 0
    if extra.size:
        tail = np.concatenate([extra[:, 0], extra[:, 1]])
        head = np.concatenate([extra[:, 1], extra[:, 0]])
    stamp = np.empty(k + 1, dtype=np.int64)
    by_ring = []  # the cells of ring 1, 2, ...
    far = False
    for r in range(1, rings + 2):
        reached = np.take(neighbours, frontier, axis=0).ravel()  # take: much faster than [] on rows
        if extra.size:
            on = np.zeros(k + 1, dtype=bool)
            on[frontier] = True
            reached = np.concatenate([reached, head[on[tail]]])
        reached = reached[np.take(ring, reached) > r]  # not visited yet (the slot k never passes)
        if reached.size == 0:
            break
        if r > rings:
            far = True
            break
        ring[reached] = r
        order = np.arange(reached.size)
        stamp[reached] = order  # one position per cell survives: the ring's cells once each
        frontier = reached[np.take(stamp, reached) == order]
        by_ring.append(frontier)
    # parents: for each cell of ring r, its neighbour in ring r - 1 with the highest c (lowest number on a tie)
    root = np.arange(k)
    if by_ring:
        rows = np.flatnonzero((ring[:k] >= 1) & (ring[:k] <= rings))  # in order: gathers stay local
        cc = np.append(np.clip(c, 0.0, 1.0), -np.inf)
        previous = np.take(ring, rows) - np.int8(1)
        nb = np.take(neighbours, rows, axis=0)
        values = []  # column by column: faster than reductions along a short axis
        for j in range(nb.shape[1]):
            cand = nb[:, j]
            values.append(np.where(np.take(ring, cand) == previous, np.take(cc, cand), -np.inf))
        best = np.maximum.reduce(values)  # -inf only where the parent is across a periodic pair
        pick = np.full(rows.size, k, dtype=np.int64)
        for j, value in enumerate(values):
            pick = np.minimum(pick, np.where(value == best, nb[:, j], k))
        if extra.size:  # periodic pairs: few, but several per cell possible
            row_of = np.full(k + 1, -1, dtype=np.int64)
            row_of[rows] = np.arange(rows.size)
            at = row_of[head]
            ok = (at >= 0) & (ring[tail] == ring[head] - 1)
            at, via = at[ok], tail[ok]
            raised = best.copy()
            np.maximum.at(raised, at, cc[via])
            pick[raised > best] = k
            tie = cc[via] == raised[at]
            np.minimum.at(pick, at[tie], via[tie])
        # droplets run down the parent links ring by ring
        parent = np.empty(k, dtype=np.int64)
        parent[rows] = pick
        for cells in by_ring:
            root[cells] = root[parent[cells]]
    return label[root], root, far


def _finish_far_band(mesh: Mesh, cells: np.ndarray, label: np.ndarray, shared: np.ndarray, root: np.ndarray,
                     links) -> tuple[np.ndarray, np.ndarray]:
    """Band cells beyond the rings (a wide plateau): each goes to the nearest assigned cell along
    centroid distances, over the mesh-wide band graph; returns the local ``shared`` and ``root``."""
    n = mesh.n_cells
    member = np.zeros(n, dtype=bool)
    member[cells] = True
    band = np.zeros(n, dtype=bool)
    band[cells[label < 0]] = True
    pairs = _band_face_pairs(mesh, member, band)
    extra_pairs = np.concatenate([p for p, _, _ in links]) if links else np.empty((0, 2), np.int64)
    if extra_pairs.size:
        keep = member[extra_pairs[:, 0]] & member[extra_pairs[:, 1]]
        pairs = np.concatenate([pairs, extra_pairs[keep & (band[extra_pairs[:, 0]] | band[extra_pairs[:, 1]])]])
    full_shared = np.full(n, -1, dtype=np.int64)
    full_shared[cells] = shared
    source_cell = np.arange(n)
    source_cell[cells] = cells[root]
    _finish_band_by_distance(mesh, pairs, full_shared, source_cell, extra_pairs)
    return full_shared[cells], np.searchsorted(cells, source_cell[cells])


def _finish_band_by_distance(mesh, pairs, shared, source_cell, extra_pairs):
    """Give the band cells still unassigned to the nearest assigned cell (multi-source Dijkstra), in place."""
    length = _face_lengths(mesh, pairs)
    if extra_pairs.size:  # across a periodic boundary the centroid distance is meaningless: use h
        key = np.sort(pairs, axis=1) @ np.array([mesh.n_cells, 1])
        across = np.isin(key, np.sort(extra_pairs, axis=1) @ np.array([mesh.n_cells, 1]))
        h = mesh.cell_sizes
        length[across] = 0.5 * (h[pairs[across, 0]] + h[pairs[across, 1]])
    length = np.maximum(length, 1e-300)
    used = np.zeros(mesh.n_cells, dtype=bool)
    used[pairs.ravel()] = True
    nodes = np.flatnonzero(used)
    local = (np.cumsum(used) - 1)[pairs]
    graph = sparse.coo_matrix((length, (local[:, 0], local[:, 1])), shape=(nodes.size, nodes.size)).tocsr()
    sources = np.flatnonzero(shared[nodes] >= 0)
    dist, _, origin = csgraph.dijkstra(graph, directed=False, indices=sources, min_only=True,
                                       return_predecessors=True)
    reached = np.isfinite(dist) & (origin >= 0) & (shared[nodes] < 0)
    cells = nodes[reached]
    start = nodes[origin[reached]]
    shared[cells] = shared[start]
    source_cell[cells] = source_cell[start]


def _group_extrema(groups: np.ndarray, lo: np.ndarray, hi: np.ndarray, n: int):
    """Per-group min of ``lo`` and max of ``hi`` rows (groups >= 0, every group present or NaN)."""
    out_lo = np.full((n, lo.shape[1]), np.nan)
    out_hi = np.full((n, hi.shape[1]), np.nan)
    if groups.size == 0:
        return out_lo, out_hi
    if n <= np.iinfo(np.int16).max:
        order = np.argsort(groups.astype(np.int16), kind="stable")  # a radix sort for 16-bit keys
    else:
        order = np.argsort(groups, kind="stable")
    g = groups[order]
    starts = np.flatnonzero(np.concatenate([[True], g[1:] != g[:-1]]))
    out_lo[g[starts]] = np.minimum.reduceat(lo[order], starts, axis=0)
    out_hi[g[starts]] = np.maximum.reduceat(hi[order], starts, axis=0)
    return out_lo, out_hi


# --------------------------------------------------------------------------- public
def label_droplets(mesh: Mesh, c_cell, *, level: float = 0.5, connectivity: str = "face",
                   periodic=(), velocity=None, interface_cells=None, interface_sizes=None,
                   band_floor: float = 1e-3, resolution_cells: float = 2.0) -> DropletLabels:
    """Label the droplets (connected regions of ``c > level``) and measure each one.

    Parameters
    ----------
    mesh : Mesh
    c_cell : ndarray of shape (n_cells,), dimensionless, nominally in [0, 1]
        Phase indicator per cell. NaN cells belong to no droplet and are kept
        out of every integral; values are used as given (not clipped).
    level : float
        Cells with ``c > level`` form the droplets' cores.
    connectivity : {'face', 'point'}
        Cells are connected through a shared edge (2D) or face (3D), or
        through any shared point. Point adjacency joins droplets that touch
        only at a corner.
    periodic : sequence of {'x', 'y', 'z'}
        Periodic axes: regions crossing the boundary are joined, their
        centroids unwrapped, and a region wrapping the whole period is marked
        ``spanning``. The mesh's opposite boundary faces must match (their
        centres are paired within half a cell).
    velocity : ndarray of shape (n_cells, dim) or (n_cells, 3), optional
        Cell velocities, in length units per time unit.
    interface_cells : ndarray of shape (k,), int, optional
        Cell holding each element (segment in 2D, triangle in 3D) of the
        ``c = level`` contour computed elsewhere.
    interface_sizes : ndarray of shape (k,), optional
        Length (2D) or area (3D) of each contour element.
    band_floor : float
        Band cells with ``band_floor < c <= level`` are shared out to droplets.
    resolution_cells : float
        ``under_resolved`` when the equivalent radius is below this many local
        cell sizes (2 after Hendrickson, Weymouth & Yue 2020).

    Returns
    -------
    DropletLabels
        ``labels``, ``shared_labels``, ``weights`` and ``table``, one row per
        droplet with columns:

        * ``droplet``: number, 0.. in the order of each droplet's first cell;
        * ``volume``: int c dV over the droplet's cells and its band share
          (area in 2D), threshold-free;
        * ``threshold_volume``: measure of its cells with ``c > level``;
        * ``centroid_x, centroid_y, centroid_z``: int c x dV / volume,
          unwrapped across periodic boundaries and then put back in the domain;
          the coordinate normal to a 2D mesh's plane is that plane's value;
        * ``equivalent_diameter``: of the circle (2D) or sphere (3D) of
          ``volume``;
        * ``circularity`` (2D; NaN in 3D): pi d / P (Hysing et al. 2009) and
          ``sphericity`` (3D; NaN in 2D): pi^(1/3) (6 V)^(2/3) / A (Wadell
          1935), P and A summed over the contour elements in the droplet's
          cells (NaN without contour elements);
        * ``bbox_min_x .. bbox_max_z``: box of the corners of its ``c > level``
          cells, in the unwrapped frame (it can reach past a periodic boundary);
        * ``velocity_x, velocity_y, velocity_z``: int c u dV / volume (NaN
          without a velocity);
        * ``under_resolved``: equivalent radius < ``resolution_cells`` mean
          cell sizes of the droplet;
        * ``spanning``: the droplet wraps a whole periodic axis.

    Raises
    ------
    OptionError
        An argument of the wrong shape or value.

    Notes
    -----
    Band sharing: every cell with ``band_floor < c <= level`` goes to the
    droplet nearest to it along the cell graph (face pairs and periodic
    pairs), counted in rings of cells grown breadth first from all droplet
    cores at once; a cell reached from two droplets in the same ring takes
    the droplet of its neighbour with the higher c (clipped to [0, 1]; on
    equal c, the neighbour with the lower cell number). Between two droplets
    the band is thus split at the middle. After 32 rings (a wide plateau of
    band values) the remaining cells go to the nearest assigned cell along
    centroid distances (multi-source Dijkstra). Band cells in a band
    region that touches no droplet are left out of every droplet. The contour
    elements are assigned through the same shared labels, so a segment lying
    in a band cell counts for the droplet that cell was given to. Point
    connectivity applies to the cores; the band is always shared through
    faces.

    Circularity and sphericity take the threshold-free ``volume``, which for a
    diffuse profile exceeds the volume inside the ``c = level`` contour by a
    term of order (width / radius)^2 (logistic profile: a factor
    1 + pi^2 eps^2 / (3 R^2) in 2D, 1 + pi^2 eps^2 / R^2 in 3D), so a circle
    or sphere reads slightly above 1.

    References
    ----------
    Hendrickson, K., Weymouth, G. D., Yue, D. K.-P. (2020). Informed component
    label algorithm for robust identification of connected components with
    volume of fluid method. Computers & Fluids.

    Hysing, S. et al. (2009). Quantitative benchmark computations of
    two-dimensional bubble dynamics. Int. J. Numer. Meth. Fluids 60:1259.

    Wadell, H. (1935). Volume, shape, and roundness of quartz particles.
    Journal of Geology 43:250.

    Examples
    --------
    >>> import numpy as np
    >>> from phasegauge.meshgen import grid_mesh
    >>> mesh = grid_mesh((20, 20))
    >>> x, y = mesh.cell_centroids.T
    >>> c = ((x - 0.3) ** 2 + (y - 0.5) ** 2 < 0.1 ** 2) | ((x - 0.7) ** 2 + (y - 0.5) ** 2 < 0.1 ** 2)
    >>> label_droplets(mesh, c.astype(float)).count
    2
    """
    # cheap checks first
    if connectivity not in ("face", "point"):
        raise OptionError(f"connectivity must be 'face' or 'point', found {connectivity!r}",
                          fix="use connectivity='face' (default) or 'point'")
    level = float(level)
    if not np.isfinite(level):
        raise OptionError(f"level must be a finite number, found {level}", fix="use e.g. level=0.5")
    band_floor = float(band_floor)
    if not (np.isfinite(band_floor) and band_floor < level):
        raise OptionError(f"band_floor must be below level ({level}), found {band_floor}",
                          fix="use a small value such as 1e-3")
    if (interface_cells is None) != (interface_sizes is None):
        raise OptionError("interface_cells and interface_sizes must be given together",
                          fix="give both contour arrays or neither")
    names, axes = _normalize_periodic(mesh, periodic)
    c = cell_values(mesh, c_cell, "c_cell")
    vel = None if velocity is None else vector_values(mesh, velocity, "velocity", "cell")[0]
    if interface_cells is not None:
        icells = np.asarray(interface_cells)
        isizes = np.asarray(interface_sizes, dtype=np.float64)
        if icells.ndim != 1 or isizes.shape != icells.shape:
            raise OptionError(f"interface_cells and interface_sizes must be 1D of one length, found "
                              f"{icells.shape} and {isizes.shape}", fix="give one cell and one size per element")
        if icells.size and (not np.issubdtype(icells.dtype, np.integer) or icells.min() < 0
                            or icells.max() >= mesh.n_cells):
            raise OptionError(f"interface_cells must be cell indices in [0, {mesh.n_cells}), found "
                              f"{icells.dtype} in [{icells.min()}, {icells.max()}]",
                              fix="pass the index of the cell holding each contour element")

    dim = mesh.dimension
    n_cells = mesh.n_cells
    finite = np.isfinite(c)
    c0 = np.where(finite, c, 0.0)
    dV = mesh.cell_measures
    weights = c0 * dV
    # all further work on the near cells (c above the band floor: cores and band), numbered
    # locally in mesh order; local number k stands for "no cell"
    cells = np.flatnonzero(c0 > band_floor)
    k = cells.size
    local = np.full(n_cells + 1, k, dtype=np.int64)  # entry n_cells (index -1): "no cell"
    local[cells] = np.arange(k)
    c_near = c0[cells]
    core = c_near > level
    neighbours = np.take(local, np.take(_neighbour_table(mesh), cells, axis=0))  # take: faster than [] on rows

    n_pieces, piece = _pieces(mesh, cells, core, neighbours, connectivity)
    links = [_periodic_pairs(mesh, ax) for ax in axes]  # (pairs, low end, period) per axis
    local_links = [(local[pairs], lo, period) for pairs, lo, period in links]
    n_drop, droplet_of_piece, offset, spanning = _join_periodic(n_pieces, piece, local_links)

    # number droplets in the order of their first cell, whatever path labelled them
    core_local = np.flatnonzero(core)
    raw = droplet_of_piece[piece[core_local]]
    first = np.full(n_drop, k, dtype=np.int64)
    found, where = np.unique(raw, return_index=True)
    first[found] = core_local[where]
    rank = np.empty(n_drop, dtype=np.int64)
    rank[np.argsort(first, kind="stable")] = np.arange(n_drop)
    label = np.full(k, -1, dtype=np.int64)
    label[core_local] = rank[raw]
    spanning_raw, spanning = spanning, np.zeros(n_drop, dtype=bool)
    spanning[rank] = spanning_raw

    extra = np.concatenate([p for p, _, _ in local_links]) if links else np.empty((0, 2), np.int64)
    extra = extra[(extra < k).all(axis=1)]
    shared, root, far = _share_band(label, c_near, neighbours, extra)
    if far:  # a wide plateau: the rest by distance along the centroids
        shared, root = _finish_far_band(mesh, cells, label, shared, root, links)

    # unwrapped coordinates: core cells by their piece's shift, band cells next to their root cell
    member = np.flatnonzero(shared >= 0)
    g = shared[member]
    member_cells = cells[member]
    X = np.take(mesh.cell_centroids, member_cells, axis=0)
    box_lo, box_hi = corner_extremes(mesh, mesh.coordinates, cells[core_local])  # corner boxes
    if axes:
        shift = np.zeros((k, dim))
        for j, ax in enumerate(axes):
            shift[core_local, ax] = offset[piece[core_local], j]
        band_member = member[~core[member]]
        source = root[band_member]
        centroid_all = mesh.cell_centroids
        for ax, (_, _, period) in zip(axes, links):
            ref = centroid_all[cells[source], ax] + shift[source, ax]
            shift[band_member, ax] = period * np.round((ref - centroid_all[cells[band_member], ax]) / period)
        X = X + shift[member]
        box_lo = box_lo + shift[core_local]
        box_hi = box_hi + shift[core_local]

    w = weights[member_cells]
    volume = np.bincount(g, weights=w, minlength=n_drop)
    threshold_volume = np.bincount(label[core_local], weights=dV[cells[core_local]], minlength=n_drop)
    with np.errstate(invalid="ignore", divide="ignore"):
        centroid = np.stack([np.bincount(g, weights=w * X[:, d], minlength=n_drop)
                             for d in range(dim)], axis=1) / volume[:, None]
        h_local = np.bincount(g, weights=w * mesh.cell_sizes[member_cells], minlength=n_drop) / volume
    back = np.zeros((n_drop, dim))  # whole periods that put each centroid back in the domain
    for ax, (_, lo, period) in zip(axes, links):
        back[:, ax] = period * np.floor((centroid[:, ax] - lo) / period)
    centroid -= back
    vol_pos = np.where(volume > 0, volume, np.nan)
    if dim == 2:
        diameter = 2.0 * np.sqrt(vol_pos / np.pi)
    else:
        diameter = np.cbrt(6.0 * vol_pos / np.pi)
    bmin, bmax = _group_extrema(label[core_local], box_lo, box_hi, n_drop)
    bmin -= back
    bmax -= back

    labels_out = np.full(n_cells, -1, dtype=np.int32)
    labels_out[cells] = label
    shared_out = np.full(n_cells, -1, dtype=np.int32)
    shared_out[cells] = shared
    size = np.full(n_drop, np.nan)
    if interface_cells is not None and icells.size:
        owner = shared_out[icells]
        ok = owner >= 0
        size = np.bincount(owner[ok], weights=isizes[ok], minlength=n_drop).astype(float)
        size[size <= 0] = np.nan
    circularity = np.full(n_drop, np.nan)
    sphericity = np.full(n_drop, np.nan)
    with np.errstate(invalid="ignore", divide="ignore"):
        if dim == 2:
            circularity = np.pi * diameter / size
        else:
            sphericity = np.pi ** (1.0 / 3.0) * (6.0 * vol_pos) ** (2.0 / 3.0) / size

    velocity_mean = np.full((n_drop, 3), np.nan)
    if vel is not None:
        plane = list(mesh.plane_axes[:dim])
        comps = plane if vel.shape[1] == dim else [0, 1, 2]
        vsel = np.take(vel, member_cells, axis=0)
        for j, axis in enumerate(comps):
            if vel.shape[1] == 3:
                j = axis
            v = vsel[:, j]
            ok = np.isfinite(v)
            with np.errstate(invalid="ignore", divide="ignore"):
                velocity_mean[:, axis] = (np.bincount(g[ok], weights=w[ok] * v[ok], minlength=n_drop)
                                          / np.bincount(g[ok], weights=w[ok], minlength=n_drop))

    table = pd.DataFrame({"droplet": np.arange(n_drop, dtype=np.int64),
                          "volume": volume, "threshold_volume": threshold_volume})
    full_centroid = np.full((n_drop, 3), np.nan)
    full_min = np.full((n_drop, 3), np.nan)
    full_max = np.full((n_drop, 3), np.nan)
    plane = list(mesh.plane_axes[:dim])
    full_centroid[:, plane] = centroid
    full_min[:, plane] = bmin
    full_max[:, plane] = bmax
    if dim == 2:
        normal = [a for a in range(3) if a not in plane][0]
        value = float(mesh.points[mesh.used_points[0], normal])
        full_centroid[:, normal] = value
        full_min[:, normal] = value
        full_max[:, normal] = value
    for a, name in enumerate(AXIS_NAMES):
        table[f"centroid_{name}"] = full_centroid[:, a]
    table["equivalent_diameter"] = diameter
    table["circularity"] = circularity
    table["sphericity"] = sphericity
    for a, name in enumerate(AXIS_NAMES):
        table[f"bbox_min_{name}"] = full_min[:, a]
    for a, name in enumerate(AXIS_NAMES):
        table[f"bbox_max_{name}"] = full_max[:, a]
    for a, name in enumerate(AXIS_NAMES):
        table[f"velocity_{name}"] = velocity_mean[:, a]
    table["under_resolved"] = np.asarray(0.5 * np.nan_to_num(diameter) < resolution_cells * h_local, dtype=bool)
    table["spanning"] = spanning.astype(bool)
    table = table[list(TABLE_COLUMNS)]
    return DropletLabels(labels=labels_out, shared_labels=shared_out,
                         table=table, weights=weights, level=level, periodic=names)
