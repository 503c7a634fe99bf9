"""Face neighbours of the tetrahedra of a polyhedra split, from the polyhedra's own faces.

A tetrahedron of :func:`phasegauge.model.polyhedra.split_polyhedra` stands on one edge
``a -> b`` of one face of its cell (with the face centre, or the third corner of a triangular
face) and has the cell centre as its last corner. Its four faces meet:

* ``(a, b, cell centre)``: the tetrahedron on the same edge, run the other way, in the cell's
  other face on that edge (the edge's twin: the closed-surface check pairs them anyway);
* ``(a, face centre, cell centre)`` and ``(b, face centre, cell centre)``: the tetrahedra of
  the edges before and after it around the same face;
* the face triangle ``(a, b, face centre)``: the tetrahedron on the same edge of the same face
  seen from the neighbouring cell (faces matched by their corner sets), or none on the boundary.

So only the polyhedra's faces need grouping (a quarter of the rows of the tetrahedra's faces)
and the edges' twins within each cell: no grouping of the tetrahedra's 4 faces each. The result
is the same face adjacency as grouping the tetrahedra's faces by their corners, and is given
only when that is certain: every face of one or two different cells, no corner twice in a face,
no face twice in a cell; otherwise None (the mesh groups the tetrahedra's faces itself).
"""

from __future__ import annotations

import numpy as np

from ._grouping import CHUNK, _bits, _sort_order, group_columns, index_dtype, sort_columns, sort_small_rows

__all__ = ["edge_twins", "split_neighbours", "ordered_rows", "sorted_with_places"]


def edge_twins(face_points: np.ndarray, nxt: np.ndarray, edge_cell: np.ndarray, n_points: int) -> np.ndarray | None:
    """For each face-stream position (edge ``a -> b`` of its cell), the position of ``b -> a`` in the same cell.

    None when that is not one position for every edge (the surface is not closed and consistently
    oriented, a corner follows itself) or when the stream does not list its cells in order (the
    caller then checks the surface by other means). Sorted by packed undirected ``(min, max)`` keys with the
    position below them, in chunks of whole cells so that the key fits in 63 bits.
    """
    n = face_points.size
    if n == 0:
        return np.zeros(0, dtype=np.int64)
    if np.any(edge_cell[1:] < edge_cell[:-1]):
        return None
    bits = max(_bits(n_points), 1)
    room = 63 - 2 * bits
    if room < 8:
        return None
    b = face_points[nxt]
    if np.any(face_points == b):
        return None
    twin = np.empty(n, dtype=index_dtype(n))
    cell_start = np.flatnonzero(np.concatenate([[True], edge_cell[1:] != edge_cell[:-1]]))
    span = 1 << min(room, 30)
    lo = 0
    while lo < n:
        hi = min(lo + span, n)
        if hi < n:  # end the chunk at the start of a cell
            cut = cell_start[np.searchsorted(cell_start, hi, side="right") - 1]
            if cut <= lo:
                return None  # one cell's stream longer than a chunk
            hi = int(cut)
        found = _chunk_twins(face_points[lo:hi], b[lo:hi], edge_cell[lo:hi], bits)
        if found is None:
            return None
        twin[lo:hi] = found + lo
        lo = hi
    return twin


def _chunk_twins(a: np.ndarray, b: np.ndarray, cell: np.ndarray, bits: int) -> np.ndarray | None:
    """Twins within one run of whole cells (positions local to the run).

    One sort of the undirected edges ``(min, max)``, ties by position (so by cell): where every
    edge of a cell is run once each way, the sorted entries pair up two by two, each pair one
    cell's edge in both directions, and no two pairs in a row are the same cell's edge.
    """
    m = a.size
    if m % 2:
        return None
    key = np.minimum(a, b).astype(np.int64)
    key <<= np.int64(bits)
    key |= np.maximum(a, b)
    order, key = _sort_order(key, 2 * bits)
    first, second = order[0::2], order[1::2]
    if not (np.array_equal(key[0::2], key[1::2]) and np.array_equal(cell[first], cell[second])
            and np.array_equal(a[first], b[second])):
        return None
    if np.any((key[2::2] == key[1:-1:2]) & (cell[first[1:]] == cell[second[:-1]])):
        return None  # one cell's edge more than once each way
    twin = np.empty(m, dtype=np.int64)
    twin[first] = second
    twin[second] = first
    return twin


def _matched_faces(rows_sorted: np.ndarray, faces: np.ndarray, face_cell: np.ndarray, grouped=None):
    """Faces of one size grouped by their corner sets: (first, second) of each shared face, or None.

    None when a face has a corner twice, a corner set is had by more than two faces, or both
    faces of a pair belong to one cell. ``grouped``: the rows' ``group_columns`` when known.
    """
    if rows_sorted.shape[1] > 1 and np.any(rows_sorted[:, 1:] == rows_sorted[:, :-1]):
        return None
    order, starts = group_columns(list(rows_sorted.T)) if grouped is None else grouped
    counts = np.diff(starts, append=order.size)
    if np.any(counts > 2):
        return None
    pair = starts[counts == 2]
    first, second = order[pair], order[pair + 1]
    if np.any(face_cell[faces[first]] == face_cell[faces[second]]):
        return None
    return first, second


def split_neighbours(face_points, face_offsets, sizes, nxt, face_cell, twin, n_points: int,
                     centred_groups, tet_of_position, n_tetra: int, *, centred=None,
                     diagonal=None) -> np.ndarray | None:
    """Face neighbours of every tetrahedron of the split (before any reordering), or None.

    Parameters
    ----------
    face_points, face_offsets, sizes, nxt, face_cell
        The checked face stream (see :func:`phasegauge.model.polyhedra.split_polyhedra`).
    twin : ndarray
        :func:`edge_twins` of the stream.
    centred_groups : list of (faces, rows_sorted, local, (order, starts))
        Per face size of 4 or more: the faces, their corners sorted, where each sorted corner
        sits in the face (``rows_sorted[i, j] == face_points[offset[i] + local[i, j]]``) and the
        rows' grouping (:func:`._grouping.group_columns`).
    tet_of_position : ndarray (q,)
        The tetrahedron standing on each stream position's edge (a triangular face's three
        positions: its one tetrahedron; a quad cut along a diagonal: the tetrahedron of the
        triangle holding the edge).
    centred : ndarray of shape (n_faces,), bool, optional
        The faces cut about a centre (default: every face of 4 or more corners).
    diagonal : list of 4 ndarrays, optional
        The stream positions of the corners ``q0..q3`` of the quad faces cut along ``q0 - q2``
        into the triangles ``(q0, q1, q2)`` and ``(q0, q2, q3)``, whose tetrahedra are neighbours
        across the diagonal (these faces are in ``centred_groups`` too: matched across the cells).

    Returns
    -------
    ndarray of shape (n_tetra, 4), int32 or int64, -1 where a face lies on the boundary.
    """
    dtype = tet_of_position.dtype
    out = np.empty((n_tetra, 4), dtype=dtype)
    triangles = np.flatnonzero(sizes == 3)
    prev = np.arange(-1, nxt.size - 1, dtype=nxt.dtype)  # the position before, around its face
    prev[face_offsets[:-1]] = face_offsets[1:] - 1
    if centred is None:
        centred = sizes >= 4
    if triangles.size == 0 and (diagonal is None or diagonal[0].size == 0):
        # every face centred: the tetrahedra are numbered as the stream positions they stand on
        for lo in range(0, n_tetra, CHUNK):  # a chunk of rows at a time (written while in cache)
            part = out[lo:lo + CHUNK]
            part[:, 0] = twin[lo:lo + CHUNK]  # the edge's twin in the cell
            part[:, 1] = nxt[lo:lo + CHUNK]  # around the face: the edges after and before
            part[:, 2] = prev[lo:lo + CHUNK]
            part[:, 3] = -1
    else:
        pos = np.flatnonzero(np.repeat(centred, sizes))
        tets = tet_of_position[pos]
        out[tets, 0] = tet_of_position[twin[pos]]
        out[tets, 1] = tet_of_position[nxt[pos]]
        out[tets, 2] = tet_of_position[prev[pos]]
        del tets, pos
        start = face_offsets[triangles]
        tri = tet_of_position[start]
        for j in range(3):  # a triangle's three edges: their twins in the cell
            out[tri, j] = tet_of_position[twin[start + j]]
        del start, tri
        if diagonal is not None and diagonal[0].size:
            first, second = tet_of_position[diagonal[0]], tet_of_position[diagonal[2]]
            for tets, (p, q), other in ((first, diagonal[:2], second), (second, diagonal[2:], first)):
                out[tets, 0] = tet_of_position[twin[p]]  # its two face edges' twins in the cell
                out[tets, 1] = tet_of_position[twin[q]]
                out[tets, 2] = other  # across the diagonal
        out[:, 3] = -1
    del prev
    # across the faces between cells
    for faces, rows_sorted, local, grouped in centred_groups:
        matched = _matched_faces(rows_sorted, faces, face_cell, grouped)
        if matched is None:
            return None
        first, second = matched
        if not _join_centred(out, faces[first], faces[second], local[first], local[second], face_offsets,
                             tet_of_position):
            return None
    if triangles.size:
        rows = sort_small_rows(face_points[face_offsets[triangles][:, None] + np.arange(3)])
        matched = _matched_faces(rows, triangles, face_cell)
        if matched is None:
            return None
        f, g = triangles[matched[0]], triangles[matched[1]]
        tf, tg = tet_of_position[face_offsets[f]], tet_of_position[face_offsets[g]]
        out[tf, 3] = tg
        out[tg, 3] = tf
    return out


def _join_centred(out, f, g, local_f, local_g, face_offsets, tet_of_position) -> bool:
    """Tetrahedra on the same edge of the faces ``f`` and ``g`` (same corner sets, other cells) joined."""
    if f.size == 0:
        return True
    k = local_f.shape[1]
    # where each corner of f (by its place in f) sits in g
    in_g = np.empty_like(local_g)
    np.put_along_axis(in_g, local_f, local_g, axis=1)
    for i in range(k):
        ga, gb = in_g[:, i], in_g[:, (i + 1) % k]
        same = (ga + 1) % k == gb  # g runs a -> b too (a cell listing its faces the other way)
        opposite = (gb + 1) % k == ga
        if not np.all(same | opposite):
            return False  # the same corners in another order: not one face
        j = np.where(same, ga, gb)
        tf = tet_of_position[face_offsets[f] + i]
        tg = tet_of_position[face_offsets[g] + j]
        out[tf, 3] = tg
        out[tg, 3] = tf
    return True


def ordered_rows(neighbours: np.ndarray) -> np.ndarray:
    """Each row's neighbours in the order of a neighbour table built from sorted face pairs: the
    higher cell numbers first, then the lower, each increasing, -1 at the end (in place).

    Sorted as unsigned keys of the same width: a higher number is itself, a lower one plus the
    number of rows, and -1 wraps to the largest key; no key is rebuilt after the sort but the
    lower ones, while still unsigned (the largest key read signed is -1 again).
    """
    n = neighbours.shape[0]
    unsigned = np.dtype(f"u{neighbours.itemsize}")
    shift = unsigned.type(n)
    wrapped = np.iinfo(unsigned).max  # -1, a boundary face
    for lo in range(0, n, CHUNK):  # chunks that stay in cache
        nb = neighbours[lo:lo + CHUNK]
        own = np.arange(lo, lo + nb.shape[0], dtype=unsigned)
        keys = []
        for j in range(nb.shape[1]):
            key = nb[:, j].astype(unsigned)  # -1 (a boundary face) becomes the largest key
            np.add(key, shift, out=key, where=key < own)  # the lower numbers after the higher
            keys.append(key)
        for j, key in enumerate(sort_columns(keys) if len(keys) <= 4 else list(np.sort(np.stack(keys, 1), 1).T)):
            # back to the lower numbers while unsigned (a key past the signed range reads negative)
            np.subtract(key, shift, out=key, where=(key >= shift) & (key != wrapped))
            nb[:, j] = key.view(neighbours.dtype)
    return neighbours


def sorted_with_places(rows: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Each row sorted, and where each sorted entry was in its row: ``(sorted, local)``, ``local`` int8
    (``sorted[i, j] == rows[i, local[i, j]]``; rows of non-negative integers, at most 127 wide).

    Rows are taken a chunk at a time, so that the packed keys stay in cache."""
    n, k = rows.shape
    shift = np.int64(max(int(k - 1).bit_length(), 1))
    mask = np.int64((1 << int(shift)) - 1)
    ordered = np.empty(rows.shape, dtype=rows.dtype)
    local = np.empty(rows.shape, dtype=np.int8)
    for lo in range(0, n, CHUNK):
        part = rows[lo:lo + CHUNK]
        keys = [(part[:, j].astype(np.int64) << shift) | j for j in range(k)]
        keys = sort_columns(keys) if k <= 4 else list(np.sort(np.stack(keys, 1), 1).T)
        for j, key in enumerate(keys):
            local[lo:lo + CHUNK, j] = key & mask
            key >>= shift
            ordered[lo:lo + CHUNK, j] = key
    return ordered, local
