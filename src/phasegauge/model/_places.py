"""Points at one place: cells written with their own copies of their corners (each cell its own
points) are one mesh once their coincident points are known.

Exactly equal coordinates only (no tolerance): the copies a solver writes of one corner are the
same numbers, and points apart by rounding are no copies.
"""

from __future__ import annotations

import numpy as np

__all__ = ["coincident_points", "corner_means", "first_copies", "in_coordinate_order", "numbering_free_signature"]


def first_copies(points) -> np.ndarray | None:
    """The first point at each point's place, or None when no two points share one (cells written
    with their own copies of their corners are split with their faces matched by place)."""
    inverse, n_unique = coincident_points(points)
    if n_unique == len(inverse):
        return None
    first = np.flatnonzero(np.concatenate([[True], inverse[1:] > np.maximum.accumulate(inverse)[:-1]]))
    return first[inverse]  # (places are numbered in order of their first point)


def coincident_points(points: np.ndarray) -> tuple[np.ndarray, int]:
    """Index of each point among the distinct ones (exactly equal coordinates), and their number.

    Distinct points are numbered in order of first appearance. The coordinates' bits are
    mixed into one 64-bit key and sorted; only points whose key is not unique are compared
    exactly (a key shared by different points falls back to an exact sort of the rows).
    """
    points = np.asarray(points, dtype=np.float64)
    n = points.shape[0]
    if n < 2:
        return np.arange(n, dtype=np.int64), n
    with np.errstate(over="ignore"):
        key = np.zeros(n, dtype=np.uint64)
        for j in range(points.shape[1]):  # column by column: one column's copy at a time
            bits = (points[:, j] + 0.0).view(np.uint64)  # -0.0 -> 0.0
            bits += np.uint64(j + 1)
            key ^= bits
            key *= _MIX[j % len(_MIX)]
            key ^= key >> np.uint64(31)
        del bits
    ks = np.sort(key)
    if not np.any(ks[1:] == ks[:-1]):  # all keys differ, so do all points
        return np.arange(n, dtype=np.int64), n
    order = np.argsort(key)
    ks = key[order]
    repeated = ks[1:] == ks[:-1]
    # positions (in key order) of the runs of equal keys
    in_run = np.zeros(n, dtype=bool)
    in_run[1:] |= repeated
    in_run[:-1] |= repeated
    cand = order[in_run]  # the candidates, grouped by key
    ck = ks[in_run]
    new_run = np.concatenate([[True], ck[1:] != ck[:-1]])
    rows = points[cand] + 0.0
    same = np.all(rows[1:] == rows[:-1], axis=1)
    if np.any(~new_run[1:] & ~same):  # one key for different points: sort the candidates exactly
        _, inverse = np.unique(rows, axis=0, return_inverse=True)
        inverse = inverse.ravel()
        group_order = np.argsort(inverse, kind="stable")
        cand = cand[group_order]
        ordered = inverse[group_order]
        new_run = np.concatenate([[True], ordered[1:] != ordered[:-1]])
    # every point's representative: the first point of its group (others stand for themselves)
    starts = np.flatnonzero(new_run)
    first = np.minimum.reduceat(cand, starts)
    rep = np.arange(n, dtype=np.int64)
    rep[cand] = np.repeat(first, np.diff(np.append(starts, cand.size)))
    is_first = rep == np.arange(n)
    rank = np.cumsum(is_first) - 1
    return rank[rep].astype(np.int64), int(np.count_nonzero(is_first))


_MIX = np.array([0x9E3779B97F4A7C15, 0xC2B2AE3D27D4EB4F, 0x165667B19E3779F9], dtype=np.uint64)
_MIX.flags.writeable = False


def in_coordinate_order(X: np.ndarray, corners: np.ndarray) -> np.ndarray:
    """Each row of ``corners`` (point ids, (n, k)) put in the order of its points' coordinates (x, then y,
    then z; ties in the row's order).

    A centre is the mean of its corners summed in this order (one after the other), so it is the same
    to the bit whichever point ids name the corners: a face that each of its two cells writes with its
    own copies of the corners gets one centre twice, and the copies and the centres merge as the mesh
    joins coincident points (before, the sums in another order left cracks; found by review). The
    polyhedra's split and the convex point sets' (and the cells split beside them) make their face
    centres so, and meet.
    """
    if corners.size == 0:
        return corners
    n, k = corners.shape
    flat = corners.ravel()
    order = np.lexsort((X[flat, 2], X[flat, 1], X[flat, 0], np.repeat(np.arange(n), k)))
    return flat[order].reshape(n, k)


def corner_means(values, points: np.ndarray, offsets: np.ndarray) -> np.ndarray:
    """Per centre (``offsets``, (n + 1,)) the mean of the ``values`` of its corners ``points``, in float64.

    The corners are summed one after the other in their order (``np.add.reduceat``): every split that
    adds centres makes them here, so a face centre made twice from the same corners in the same order
    (:func:`in_coordinate_order`) is the same to the bit (``np.mean`` over an axis sums otherwise).
    """
    v = np.asarray(values, dtype=np.float64)
    n = offsets.size - 1
    if n <= 0:
        return np.zeros((0,) + v.shape[1:])
    out = np.empty((n,) + v.shape[1:])
    chunk = 1 << 14  # centres at a time: their corners' values stay in cache (the same sums)
    for lo in range(0, n, chunk):
        hi = min(lo + chunk, n)
        first = offsets[lo]
        corners = v[points[first:offsets[hi]]]
        sums = np.add.reduceat(corners, offsets[lo:hi] - first, axis=0)
        counts = np.diff(offsets[lo:hi + 1])
        np.divide(sums, counts.reshape((-1,) + (1,) * (v.ndim - 1)), out=out[lo:hi])
    return out


def numbering_free_signature(points, blocks) -> str:
    """A hash of the mesh's cells that does not depend on how its points and cells are numbered: equal for the
    same cells written in another order (a decomposed mesh's pieces joined in another split).

    Each point is a 64-bit mix of its coordinates' bits; each cell the mix of its corners' sum (integer sums
    wrap and commute: the same whatever the corners' order); each kind of cell the sums of two mixes of its
    cells' keys (the same whatever the cells' order). No sort: 0.3 -> 0.05 s on 1M tetrahedra.
    """
    import hashlib

    coordinates = np.asarray(points, dtype=np.float64) + 0.0  # -0.0 as 0.0
    key = np.zeros(coordinates.shape[0], dtype=np.uint64)
    with np.errstate(over="ignore"):
        for axis in range(coordinates.shape[1]):
            key = _mixed(key ^ np.ascontiguousarray(coordinates[:, axis]).view(np.uint64) + _MIX[axis % len(_MIX)])
        h = hashlib.sha256()
        # blocks of one type and corner count together (polygons of 5 and of 6 corners are two kinds)
        for cell_type, width in sorted({(b.cell_type, np.shape(b.connectivity)[1]) for b in blocks}):
            conn = np.concatenate([np.asarray(b.connectivity) for b in blocks
                                   if b.cell_type == cell_type and np.shape(b.connectivity)[1] == width])
            cell = _mixed(key[conn].sum(axis=1, dtype=np.uint64))
            totals = np.array([cell.sum(dtype=np.uint64), _mixed(cell ^ _MIX[1]).sum(dtype=np.uint64)])
            h.update(f"{cell_type}:{conn.shape[0]}:{conn.shape[1]};".encode())
            h.update(totals.tobytes())
    return h.hexdigest()[:32]


def _mixed(z: np.ndarray) -> np.ndarray:
    """A 64-bit mix of each value (the splitmix64 finaliser; uint64, wrapping)."""
    z = (z ^ (z >> np.uint64(30))) * np.uint64(0xBF58476D1CE4E5B9)
    z = (z ^ (z >> np.uint64(27))) * np.uint64(0x94D049BB133111EB)
    return z ^ (z >> np.uint64(31))
