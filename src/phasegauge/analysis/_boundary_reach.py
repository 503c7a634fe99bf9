"""How much of an interface lies within a reach of the domain's boundary, where its profile is cut short.

The widths' second moment integrates the profile out to a reach from the contour (ten eps, or
four cells); where the domain's boundary comes nearer, the integral stops at the boundary and the
width, and the numerical diffusivity read from its growth, come out low (a logistic drop whose
interface came within 4 cells of a wall read a diffusivity 9 % below the same drop in the open:
``tests/analysis/test_boundary_reach.py``).
"""

from __future__ import annotations

import numpy as np

__all__ = ["boundary_share"]


#: buckets along the longest side of the box of the boundary's points (:func:`_boundary_buckets`)
_BUCKETS = 64
#: nearest boundary points looked at from each interface element
_NEAREST = 16


def _boundary_tree(mesh):
    """A search tree of the points on the mesh's boundary faces, in the mesh's own axes (None: none)."""
    from scipy.spatial import cKDTree

    corners = np.asarray(mesh.boundary_faces[0])
    ids = np.unique(corners[corners >= 0])
    if ids.size == 0:
        return None
    return cKDTree(np.asarray(mesh.coordinates)[ids])


def _boundary_buckets(points: np.ndarray) -> tuple:
    """A grid of buckets over the boundary's points and, per bucket, a lower bound of the distance from
    any place in it to the nearest boundary point: the Euclidean distance transform of the buckets that
    hold one (scipy's), less a bucket's diagonal (each place and each point lie within half a diagonal
    of their bucket's centre). Returns ``(lo, side, shape, lower_bound)``."""
    from scipy.ndimage import distance_transform_edt

    lo, hi = points.min(axis=0), points.max(axis=0)
    side = max(float((hi - lo).max()) / _BUCKETS, np.finfo(float).tiny)
    shape = tuple(int(v) for v in np.floor((hi - lo) / side).astype(np.int64) + 1)
    marked = np.ones(shape, dtype=bool)
    marked[tuple(np.minimum(((points - lo) / side).astype(np.int64), np.array(shape) - 1).T)] = False
    bound = (distance_transform_edt(marked) - np.sqrt(points.shape[1])) * side
    return lo, side, shape, bound


def boundary_share(mesh, centroids: np.ndarray, sizes: np.ndarray, reach: float, normals=None,
                   lateral: float = 0.0) -> float:
    """The share of the interface (element sizes ``sizes`` at ``centroids``) whose profile the domain's
    boundary cuts within ``reach``: a boundary point nearer than ``reach`` to the element and within
    ``lateral`` (about a cell) of the line through it along its unit normal (``normals``; any boundary
    point within reach without them). A wall along the normal (a channel's side walls beside a slab
    across it) cuts no profile, except for the elements next to it.
    0 where the domain has no boundary; NaN without elements or reach.

    Elements are first passed over where a grid of buckets (made once a mesh) shows no boundary point
    within reach (exact: a lower bound); of each other element's boundary points within reach the 16
    nearest are looked at (a facing wall beyond 16 nearer side-wall points is missed); a wall is seen
    through its points, so ``lateral`` must be at least about their spacing.
    """
    total = float(np.sum(sizes))
    if sizes.size == 0 or not total > 0 or not np.isfinite(reach) or not reach > 0:
        return float("nan")
    tree = mesh.memo("boundary_point_tree", lambda: _boundary_tree(mesh))
    if tree is None:
        return 0.0
    lo, side, shape, bound = mesh.memo("boundary_buckets", lambda: _boundary_buckets(tree.data))
    axes = list(mesh.plane_axes) if mesh.dimension == 2 else [0, 1, 2]  # the elements' 3D points, in those axes
    at = np.asarray(centroids, dtype=float)[:, axes]
    bucket = np.clip(((at - lo) / side).astype(np.int64), 0, np.array(shape) - 1)
    outside = np.any((at < lo - reach) | (at > lo + np.array(shape) * side + reach), axis=1)
    rows = np.flatnonzero(~outside & (bound[tuple(bucket.T)] <= reach))
    cut = np.zeros(at.shape[0], dtype=bool)
    if rows.size:
        at = at[rows]
        near, nearest = tree.query(at, k=min(_NEAREST, tree.n), distance_upper_bound=reach)
        near, nearest = near.reshape(rows.size, -1), nearest.reshape(rows.size, -1)
        within = np.isfinite(near)
        if normals is None:
            cut[rows] = within.any(axis=1)
        else:
            offset = tree.data[np.where(within, nearest, 0)] - at[:, None, :]
            along = np.einsum("ikj,ij->ik", offset, np.asarray(normals, dtype=float)[rows][:, axes])
            off_line = np.einsum("ikj,ikj->ik", offset, offset) - along ** 2
            cut[rows] = (within & (off_line <= lateral ** 2)).any(axis=1)
    return float(np.sum(sizes[cut]) / total)
