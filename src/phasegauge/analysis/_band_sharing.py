"""Band sharing of droplet labelling: diffuse-band cells go to the droplet nearest along the cell graph.

Step 3 of :func:`phasegauge.analysis.droplets.label_droplets` (see ``_labelling``): breadth-first
rings from the droplet cores with parent links by the highest c, and a multi-source Dijkstra
search along centroid distances for the cells of a wide plateau beyond the rings.
"""

from __future__ import annotations

import numpy as np
from scipy import sparse
from scipy.sparse import csgraph

from ..model._centroids import cell_centroids_of, keeps_centroids
from ..model._grouping import index_dtype
from ..model.mesh import Mesh

__all__ = ["share_band", "finish_far_band"]


#: face pairs measured at a time: the (n, 3) temporaries of a chunk, not of the whole band
_PAIR_CHUNK = 1 << 16


def _face_lengths(mesh: Mesh, local: np.ndarray, nodes: np.ndarray) -> np.ndarray:
    """Centroid distance across each face pair, the pairs ``local`` in numbers 0.. of the mesh cells
    ``nodes``: each node's centroid made once (a split mesh keeps none), the pairs measured chunk by
    chunk (each row's norm is the same number as from the two centroids made apart)."""
    kept = keeps_centroids(mesh)  # then read from the mesh's own: no (nodes, 3) copy
    X = mesh.cell_centroids if kept else cell_centroids_of(mesh, nodes)
    out = np.empty(local.shape[0])
    for lo in range(0, local.shape[0], _PAIR_CHUNK):  # the (n, 3) temporaries of a chunk
        part = nodes[local[lo:lo + _PAIR_CHUNK]] if kept else local[lo:lo + _PAIR_CHUNK]
        out[lo:lo + part.shape[0]] = np.linalg.norm(np.take(X, part[:, 0], axis=0)
                                                    - np.take(X, part[:, 1], axis=0), axis=1)
    return out


def _across_period(mesh: Mesh, pairs: np.ndarray) -> np.ndarray:
    """Centroid distance of cell pairs joined across a periodic boundary: each component of their
    offset less the whole periods of the mesh's extent in it (the nearest image)."""
    offset = cell_centroids_of(mesh, pairs[:, 0]) - cell_centroids_of(mesh, pairs[:, 1])
    lo, hi = mesh.bounds
    extent = (hi - lo)[list(mesh.plane_axes)[:mesh.dimension]]
    offset -= extent * np.round(offset / np.where(extent > 0, extent, 1.0))
    return np.linalg.norm(offset, axis=1)


def _grid_order(mesh: Mesh) -> np.ndarray:
    """Mesh cell at each position of a regular grid's cell array (C order), cached."""
    grid = mesh.regular_grid
    return grid.cell_order.reshape(grid.cell_shape)


def _near_band_pairs(neighbours: np.ndarray, band_local: np.ndarray) -> np.ndarray:
    """Face pairs (local numbers) of the near cells with at least one band cell, from their local
    neighbour rows: the pairs of ``mesh.face_pairs`` between near cells, in the same (sorted) order."""
    k, width = neighbours.shape
    # only the band cells' rows and their neighbours' hold such pairs (face neighbours are mutual):
    # those rows are read, in order, rather than all k
    band_rows = np.flatnonzero(band_local)
    reached = np.take(neighbours, band_rows, axis=0).ravel()
    candidate = np.zeros(k + 1, dtype=bool)  # slot k: "no cell"
    candidate[reached] = True
    candidate[band_rows] = True
    rows = np.flatnonzero(candidate[:k]).astype(neighbours.dtype)  # the local numbers' type (int32)
    del reached, candidate, band_rows
    cols = np.take(neighbours, rows, axis=0).ravel()
    rows = np.repeat(rows, width)
    keep = cols < k
    rows, cols = rows[keep], cols[keep]
    keep = (rows < cols) & (band_local[rows] | band_local[cols])
    # each row's higher neighbours come first, increasing (the neighbour table's order)
    return np.stack([rows[keep], cols[keep]], axis=1)


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


def share_band(label: np.ndarray, c: np.ndarray, neighbours: np.ndarray, extra: np.ndarray,
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


def finish_far_band(mesh: Mesh, cells: np.ndarray, shared: np.ndarray, root: np.ndarray,
                     links, neighbours: np.ndarray | None = None) -> tuple[np.ndarray, np.ndarray]:
    """Band cells beyond the rings (a wide plateau): each goes to the nearest assigned cell along
    centroid distances, over the band graph; returns the local ``shared`` and ``root``.

    ``neighbours``: the near cells' face neighbours in local numbers (as :func:`share_band`); the
    band's face pairs are then read from them rather than from all of ``mesh.face_pairs``.

    The graph holds only the face pairs with a cell not yet assigned at one end or both: a
    shortest path from an unassigned cell to the nearest assigned one runs through unassigned
    cells up to its last step (the first assigned cell on it is at least as near), so the
    distances are those over every pair of the band, with a quarter of the pairs on a wide plateau.
    """
    extra_pairs = np.concatenate([p for p, _, _ in links]) if links else np.empty((0, 2), np.int64)
    open_local = shared < 0  # not assigned by the rings
    if neighbours is not None and mesh.regular_grid is None:  # all in the near cells' local numbers
        pairs = _near_band_pairs(neighbours, open_local)
        if extra_pairs.size:
            at = np.minimum(np.searchsorted(cells, extra_pairs), cells.size - 1)
            keep = (cells[at] == extra_pairs).all(axis=1)
            keep &= open_local[at[:, 0]] | open_local[at[:, 1]]
            pairs = np.concatenate([pairs, at[keep]])
        shared, root = shared.copy(), root.copy()
        _finish_band_by_distance(mesh, pairs, shared, root, extra_pairs, cells=cells)
        return shared, root
    n = mesh.n_cells
    member = np.zeros(n, dtype=bool)
    member[cells] = True
    band = np.zeros(n, dtype=bool)  # the cells not assigned by the rings
    band[cells[open_local]] = True
    pairs = _band_face_pairs(mesh, member, band)
    if extra_pairs.size:
        keep = member[extra_pairs[:, 0]] & member[extra_pairs[:, 1]]
        pairs = np.concatenate([pairs, extra_pairs[keep & (band[extra_pairs[:, 0]] | band[extra_pairs[:, 1]])]])
    full_shared = np.full(n, -1, dtype=np.int64)
    full_shared[cells] = shared
    source_cell = np.arange(n)
    source_cell[cells] = cells[root]
    _finish_band_by_distance(mesh, pairs, full_shared, source_cell, extra_pairs)
    return full_shared[cells], np.searchsorted(cells, source_cell[cells])


def _finish_band_by_distance(mesh, pairs, shared, source_cell, extra_pairs, cells=None):
    """Give the band cells still unassigned to the nearest assigned cell (multi-source Dijkstra), in place.

    ``pairs``, ``shared`` and ``source_cell`` in mesh numbers, or in the local numbers of ``cells``.
    """
    used = np.zeros(mesh.n_cells if cells is None else cells.size, dtype=bool)
    used[pairs.ravel()] = True
    nodes = np.flatnonzero(used)
    number = np.cumsum(used, dtype=index_dtype(used.size + 1))  # int32 where it fits: (n, 2) below
    number -= 1
    local = number[pairs]
    del number, used
    length = _face_lengths(mesh, local, nodes if cells is None else cells[nodes])
    if extra_pairs.size:  # across a periodic boundary: the centroids' distance less the period
        on_mesh = pairs if cells is None else cells[pairs]
        key = np.sort(on_mesh, axis=1) @ np.array([mesh.n_cells, 1])
        across = np.isin(key, np.sort(extra_pairs, axis=1) @ np.array([mesh.n_cells, 1]))
        length[across] = _across_period(mesh, on_mesh[across])
        del on_mesh
    np.maximum(length, 1e-300, out=length)
    graph = sparse.coo_matrix((length, (local[:, 0], local[:, 1])), shape=(nodes.size, nodes.size)).tocsr()
    del length, local  # the graph holds them
    sources = np.flatnonzero(shared[nodes] >= 0)
    dist, _, origin = csgraph.dijkstra(graph, directed=False, indices=sources, min_only=True,
                                       return_predecessors=True)
    reached = np.isfinite(dist) & (origin >= 0) & (shared[nodes] < 0)
    cells = nodes[reached]
    start = nodes[origin[reached]]
    shared[cells] = shared[start]
    source_cell[cells] = source_cell[start]
