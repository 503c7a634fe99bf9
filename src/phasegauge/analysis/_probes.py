"""Values at chosen points: point location on the mesh's own cells and exact linear interpolation.

A point is located in one simplex of the conforming split of the cells
(:func:`phasegauge.model.simplices.split_cells`), and the value there is the
linear interpolant of the simplex's corner values (barycentric weights). An
added centre carries the mean of its corners, so the value at any point is a
fixed weighted sum of point values: the weights are worked out once per mesh
and point set (kept with :meth:`Mesh.memo`) and every step only multiplies.
A field linear in space is reproduced to rounding on every cell type.

Candidate cells come from a k-d tree of cell centroids: first the nearest few,
then, for points not found in those, every cell whose centroid lies within the
largest centroid-to-corner distance of the mesh (any cell holding the point is
among them, so a point found in none lies outside the mesh).
"""

from __future__ import annotations

import hashlib
from dataclasses import dataclass

import numpy as np

from ..errors import OptionError
from ..model.mesh import Mesh

__all__ = ["PointSampler", "point_sampler", "sample_points", "line_points", "plane_needing_z"]

#: a point lies in a simplex when every barycentric weight is at least minus this
_INSIDE = 1e-9
#: nearest cells tried first per point
_NEAREST = 8
#: points per chunk of the candidate search
_CHUNK = 4096


@dataclass(frozen=True, eq=False)
class PointSampler:
    """Interpolation of point values at fixed points of one mesh.

    Attributes
    ----------
    weights : scipy.sparse.csr_matrix of shape (n_query, n_points)
        Row i holds the weights of the mesh points whose weighted sum is the
        value at query point i (rows of points outside the mesh are empty).
    inside : ndarray of shape (n_query,), bool
        True where the query point lies in a cell of the mesh.
    cells : ndarray of shape (n_query,), int64
        The cell holding each point (-1 outside).
    """

    weights: object
    inside: np.ndarray
    cells: np.ndarray

    def __call__(self, point_values) -> np.ndarray:
        """Values at the query points, NaN outside the mesh.

        Parameters
        ----------
        point_values : ndarray of shape (n_points,)

        Returns
        -------
        ndarray of shape (n_query,)
        """
        values = np.asarray(self.weights @ np.asarray(point_values, dtype=float), dtype=float)
        values[~self.inside] = np.nan
        return values


def _as_points(points, mesh: Mesh) -> np.ndarray:
    """Points as (n, 3); z not given (two columns, or NaN as a file without z columns reads) is 0 on a 2D
    mesh in the x-y plane (its normal) and refused on any other mesh (two numbers would be read as x and
    y where the plane is x-z or y-z, or put on z = 0 in 3D)."""
    P = np.asarray(points, dtype=float)
    if P.ndim != 2 or P.shape[1] not in (2, 3):
        raise OptionError(f"points must be an array of shape (n, 2) or (n, 3), found shape {P.shape}",
                          fix="give x, y and (in 3D) z of each point")
    if P.shape[1] == 2:
        P = np.column_stack([P, np.full(len(P), np.nan)])
    if not (np.isfinite(P[:, :2]).all() and not np.isinf(P[:, 2]).any()):
        raise OptionError("point coordinates must be finite numbers", fix="check the probe or line file")
    missing = np.isnan(P[:, 2])
    if missing.any():
        plane = plane_needing_z(mesh)
        if plane is not None:
            raise OptionError(f"{int(missing.sum())} point(s) give no z, but the mesh lies in {plane}: only a mesh in "
                              "the x-y plane takes points without z (as z = 0)", fix="give x, y and z of each point")
        P = P.copy()
        P[missing, 2] = 0.0
    return P


def plane_needing_z(mesh: Mesh) -> str | None:
    """None for a 2D mesh in the x-y plane (z its normal: points without z take z = 0), else where the
    mesh lies ('the x-z plane', '3D'), which points without z would misplace."""
    if mesh.dimension == 2 and 2 not in tuple(mesh.plane_axes):
        return None
    return "the " + "-".join("xyz"[a] for a in mesh.plane_axes) + " plane" if mesh.dimension == 2 else "3D"


def point_sampler(mesh: Mesh, points) -> PointSampler:
    """The interpolation of point values at ``points`` on ``mesh`` (cached per mesh and point set).

    Parameters
    ----------
    mesh : Mesh
    points : array_like of shape (n, 3) or (n, 2)
        x, y, z of each point in mesh length units. For a 2D mesh the
        coordinate normal to its plane is ignored. Two columns (or z NaN) are x
        and y of a mesh in the x-y plane; any other mesh refuses them.

    Returns
    -------
    PointSampler

    References
    ----------
    Barycentric (linear) interpolation on simplices, e.g. Zienkiewicz, O. C., Taylor, R. L. and
    Zhu, J. Z. (2013), The Finite Element Method: Its Basis and Fundamentals, 7th ed., ch. 6.
    """
    P = _as_points(points, mesh)
    digest = hashlib.sha1(np.ascontiguousarray(P).tobytes()).hexdigest()
    return mesh.memo(("point_sampler", digest), lambda: _build(mesh, P))


def sample_points(mesh: Mesh, point_values, points) -> np.ndarray:
    """Values of a point field at ``points`` (NaN outside the mesh); see :func:`point_sampler`."""
    return point_sampler(mesh, points)(point_values)


def line_points(start, end, count: int) -> tuple[np.ndarray, np.ndarray]:
    """``count`` evenly spaced points from ``start`` to ``end`` (both included).

    Returns
    -------
    points : ndarray of shape (count, 3)
    distance : ndarray of shape (count,), distance from ``start`` in mesh length units
    """
    count = int(count)
    if count < 2:
        raise OptionError(f"a line needs at least 2 points, found {count}", fix="for example 50")
    a = np.zeros(3)
    b = np.zeros(3)
    a[:len(start)] = start
    b[:len(end)] = end
    s = np.linspace(0.0, 1.0, count)
    # a coordinate not given at both ends (NaN: a 2D file's z) adds nothing to the distance
    return a + s[:, None] * (b - a), s * float(np.linalg.norm(np.nan_to_num(b - a)))


def _reach(mesh: Mesh) -> float:
    """Largest distance from a cell's centroid to one of its corners."""
    def compute():
        X, C = mesh.coordinates, mesh.cell_centroids
        reach = 0.0
        for block, start in zip(mesh.blocks, mesh.block_offsets[:-1]):
            conn = block.connectivity
            for j in range(conn.shape[1]):
                d = X[conn[:, j]] - C[start:start + len(block)]
                reach = max(reach, float(np.sqrt(np.einsum("ij,ij->i", d, d).max(initial=0.0))))
        return reach
    return mesh.memo("cell_reach", compute)


def _build(mesh: Mesh, P: np.ndarray) -> PointSampler:
    from scipy import sparse
    from scipy.spatial import cKDTree

    dim = mesh.dimension
    axes = list(mesh.plane_axes) if dim == 2 else [0, 1, 2]
    Q = np.ascontiguousarray(P[:, axes])
    n = len(Q)
    best = np.full(n, -np.inf)  # smallest barycentric weight of the best simplex so far
    verts = np.zeros((n, dim + 1), dtype=np.int64)
    lam = np.zeros((n, dim + 1))
    cells = np.full(n, -1, dtype=np.int64)
    centres = {}  # query point -> (mesh points, weights) where its simplex has an added centre
    if n and mesh.n_cells:
        tree = mesh.memo("centroid_tree", lambda: cKDTree(mesh.cell_centroids), keep=False)  # only the weights stay
        k = min(_NEAREST, mesh.n_cells)
        for lo in range(0, n, _CHUNK):
            ids = np.arange(lo, min(n, lo + _CHUNK))
            _, near = tree.query(Q[ids], k=k)
            near = near.reshape(len(ids), k)
            _try(mesh, Q, np.repeat(ids, k), near.ravel(), best, verts, lam, cells, centres)
        missing = np.flatnonzero(best < -_INSIDE)
        if missing.size:
            found = tree.query_ball_point(Q[missing], r=_reach(mesh) * (1 + 1e-9) + 1e-300)
            counts = np.array([len(f) for f in found], dtype=np.int64)
            if counts.sum():
                pts = np.repeat(missing, counts)
                cand = np.concatenate([np.asarray(f, dtype=np.int64) for f in found if len(f)])
                for lo in range(0, len(pts), _CHUNK * _NEAREST):
                    sl = slice(lo, lo + _CHUNK * _NEAREST)
                    _try(mesh, Q, pts[sl], cand[sl], best, verts, lam, cells, centres)
    inside = best >= -_INSIDE
    cells[~inside] = -1
    rows, cols, vals = [], [], []
    n_points = mesh.n_points
    plain_rows = inside.copy()
    for t, (c, w) in centres.items():  # points whose simplex has an added centre
        if inside[t]:
            plain_rows[t] = False
            rows.append(np.full(len(c), t))
            cols.append(c)
            vals.append(w)
    r = np.flatnonzero(plain_rows)
    for j in range(dim + 1):
        rows.append(r)
        cols.append(verts[r, j])
        vals.append(lam[r, j])
    weights = sparse.csr_matrix((np.concatenate(vals) if vals else np.zeros(0),
                                 (np.concatenate(rows) if rows else np.zeros(0, int),
                                  np.concatenate(cols) if cols else np.zeros(0, int))), shape=(n, n_points))
    weights.sum_duplicates()
    weights.eliminate_zeros()
    return PointSampler(weights, inside, cells)


def _try(mesh, Q, pts, cand, best, verts, lam, cells, centres) -> None:
    """Test points ``pts`` against the simplices of candidate cells ``cand`` (pairs); keep the best fit."""
    from ..model.simplices import split_cells

    todo = best[pts] < -_INSIDE
    pts, cand = pts[todo], cand[todo]
    if not pts.size:
        return
    unique = np.unique(cand)
    split = split_cells(mesh, unique)
    owner = split.owner
    order = np.argsort(owner, kind="stable")
    starts = np.searchsorted(owner[order], unique)
    stops = np.searchsorted(owner[order], unique, side="right")
    slot = np.searchsorted(unique, cand)
    count = stops[slot] - starts[slot]
    pair_pts = np.repeat(pts, count)
    first = np.repeat(starts[slot], count)
    offset = np.arange(count.sum()) - np.repeat(np.cumsum(count) - count, count)
    simplex = order[first + offset]
    S = split.simplices[simplex]
    V = split.coordinates[S]  # (m, d + 1, d)
    d = V.shape[2]
    M = np.ones((len(S), d + 1, d + 1))
    M[:, 1:, :] = np.transpose(V, (0, 2, 1))
    det = np.linalg.det(M)
    scale = np.abs(V - V[:, :1]).max(axis=(1, 2)) ** d
    good = np.abs(det) > 1e-13 * np.maximum(scale, 1e-300)
    L = np.empty((len(S), d + 1))
    p = Q[pair_pts]
    for i in range(d + 1):
        Mi = M.copy()
        Mi[:, 1:, i] = p
        L[:, i] = np.linalg.det(Mi)
    with np.errstate(divide="ignore", invalid="ignore"):
        L /= np.where(good, det, 1.0)[:, None]
    low = np.where(good, L.min(axis=1), -np.inf)
    # per point, the pair with the largest smallest weight (the simplex it is most inside)
    rank = np.lexsort((-low, pair_pts))
    head = np.ones(len(rank), dtype=bool)
    head[1:] = pair_pts[rank[1:]] != pair_pts[rank[:-1]]
    pick = rank[head]
    target = pair_pts[pick]
    better = low[pick] > best[target]
    pick, target = pick[better], target[better]
    best[target] = low[pick]
    verts[target] = S[pick]
    lam[target] = L[pick]
    cells[target] = split.owner[simplex[pick]]
    n_points = split.n_points
    with_centre = (S[pick] >= n_points).any(axis=1)
    for t in target[~with_centre]:
        centres.pop(int(t), None)
    if with_centre.any():
        lookup = {}
        for ids, corners in split.centres:
            for vid, cor in zip(ids, corners):
                lookup[int(vid)] = cor
        for t, simplex_vertices, weights in zip(target[with_centre], S[pick][with_centre], L[pick][with_centre]):
            cols, vals = [], []
            for v, w in zip(simplex_vertices, weights):
                if v < n_points:
                    cols.append(np.array([v]))
                    vals.append(np.array([w]))
                else:  # an added centre: the mean of its corners
                    cor = np.asarray(lookup[int(v)], dtype=np.int64)
                    cols.append(cor)
                    vals.append(np.full(len(cor), w / len(cor)))
            centres[int(t)] = (np.concatenate(cols), np.concatenate(vals))
