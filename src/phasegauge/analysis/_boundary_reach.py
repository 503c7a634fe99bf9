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
#: at most this many points along each half of an element's normal line (:func:`_facing_cut`)
_MAX_SAMPLES = 64
#: faces first asked for near each point of a line; a point with this many within its radius asks for all
_FIRST = 16
#: line points per pass of :func:`_facing_cut` (the pass's temporaries stay small)
_CHUNK = 1 << 14
#: a boundary face faces an element when their normals lie within 45 degrees of each other
_FACING = np.cos(np.pi / 4)


def _boundary_faces(mesh):
    """The centroids and unit normals of the mesh's boundary faces (edges in 2D), in the mesh's own axes,
    as ``(centroids, normals)``; None when the mesh has no boundary."""
    corners = np.asarray(mesh.boundary_faces[0])
    if corners.shape[0] == 0:
        return None
    xyz = np.asarray(mesh.coordinates, dtype=float)
    if corners.shape[1] == 2:  # edges: the normal is the edge turned a right angle
        a, b = xyz[corners[:, 0]], xyz[corners[:, 1]]
        edge = b - a
        normal = np.c_[edge[:, 1], -edge[:, 0]]
        centre = 0.5 * (a + b)
    else:  # quads and triangles padded with -1 in front; the corners are sorted by number, not in their
        # loop, so the normal is the largest of the cross products of three corners' triangles (any three
        # corners of a flat quad span its plane; the sign does not matter here)
        tri = corners[:, 0] < 0
        first = np.where(tri, corners[:, 1], corners[:, 0])
        p0, p1, p2, p3 = xyz[first], xyz[corners[:, 1]], xyz[corners[:, 2]], xyz[corners[:, 3]]
        candidates = np.stack([np.cross(p1 - p0, p2 - p0), np.cross(p1 - p0, p3 - p0), np.cross(p2 - p0, p3 - p0)])
        candidates[:, tri] = np.cross(p2 - p1, p3 - p1)[None, tri]
        best = np.argmax(np.linalg.norm(candidates, axis=2), axis=0)
        normal = candidates[best, np.arange(corners.shape[0])]
        centre = np.where(tri[:, None], (p1 + p2 + p3) / 3.0, 0.25 * (p0 + p1 + p2 + p3))
    length = np.linalg.norm(normal, axis=1)
    return centre, normal / np.where(length > 0, length, 1.0)[:, None]


def periodic_columns(mesh, periodic) -> tuple:
    """The columns of the mesh's coordinates (its plane axes in 2D) along the ``periodic`` axes named
    (``'x'``...), sorted; axes the mesh does not span are left out."""
    from ..model.axes import AXIS_INDEX

    axes = list(mesh.plane_axes) if mesh.dimension == 2 else [0, 1, 2]
    return tuple(sorted(axes.index(AXIS_INDEX[a]) for a in periodic if AXIS_INDEX[a] in axes))


def on_periodic_planes(centre: np.ndarray, columns: tuple) -> np.ndarray:
    """Which boundary faces (their centres, in the mesh's coordinates) lie on the lowest or highest plane of
    the boundary along one of ``columns`` (:func:`periodic_columns`), to 1e-9 of its largest extent: no
    boundary, what leaves through one comes back through the other."""
    on = np.zeros(centre.shape[0], dtype=bool)
    if not columns or not centre.shape[0]:
        return on
    lo, hi = centre.min(axis=0), centre.max(axis=0)
    tolerance = 1e-9 * float(np.max(hi - lo))
    for column in columns:
        along = centre[:, column]
        on |= (np.abs(along - lo[column]) <= tolerance) | (np.abs(along - hi[column]) <= tolerance)
    return on


def _boundary_tree(mesh, periodic: tuple):
    """A search tree of the boundary faces' centroids and their unit normals, the faces on the planes of
    ``periodic`` axes (mesh axis numbers) left out: no boundary there. None: no boundary left."""
    from scipy.spatial import cKDTree

    faces = _boundary_faces(mesh)
    if faces is None:
        return None
    centre, normal = faces
    keep = ~on_periodic_planes(centre, periodic)
    if not keep.any():
        return None
    return cKDTree(centre[keep]), normal[keep]


def boundary_face_tree(mesh, wrapped: tuple = ()):
    """:func:`_boundary_tree` of the mesh with the planes of the ``wrapped`` columns left out (made once a
    mesh and kept): ``(tree, normals)``, or None where no boundary is left."""
    return mesh.memo(("boundary_face_tree", wrapped), lambda: _boundary_tree(mesh, wrapped))


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
                   lateral: float = 0.0, periodic: tuple = ()) -> float:
    """The share of the interface (element sizes ``sizes`` at ``centroids``) whose profile the domain's
    boundary cuts within ``reach``: a boundary face whose centroid lies nearer than ``reach`` to the
    element, within ``lateral`` (about a cell) of the line through it along its unit normal
    (``normals``), and which faces it (the face's normal within 45 degrees of the element's). A wall
    along the normal (a channel's side walls beside a slab across it) cuts no profile. Without
    ``normals``, any boundary face within reach. ``periodic``: axis names (``'x'``...) along which the
    domain wraps: its faces on those planes are no boundary. 0 where the domain has no boundary; NaN
    without elements or reach.

    Elements are first passed over where a grid of buckets (made once a mesh) shows no boundary face
    within reach (exact: a lower bound); each other element's normal line is searched at points a
    ``lateral`` apart (:func:`_facing_cut`: every face it could count lies within a radius of one of
    them), so a facing wall is found however many side-wall faces lie nearer. A reach longer than 64
    laterals (64 cells: a profile smeared across much of the domain) is cut to that, which keeps the
    searches' balls about a cell wide. A seam of hanging faces
    where a mesh is refined is taken for a boundary (its faces are owned by one cell).
    """
    total = float(np.sum(sizes))
    if sizes.size == 0 or not total > 0 or not np.isfinite(reach) or not reach > 0:
        return float("nan")
    axes = list(mesh.plane_axes) if mesh.dimension == 2 else [0, 1, 2]  # the elements' 3D points, in those axes
    wrapped = periodic_columns(mesh, periodic)
    found = boundary_face_tree(mesh, wrapped)
    if found is None:
        return 0.0
    tree, face_normals = found
    buckets = mesh.memo(("boundary_buckets", wrapped), lambda: _boundary_buckets(tree.data))
    at = np.asarray(centroids, dtype=float)[:, axes]
    rows = np.flatnonzero(_lower_bound(at, buckets) <= reach)
    cut = np.zeros(at.shape[0], dtype=bool)
    if rows.size and normals is None:
        cut[rows] = np.isfinite(tree.query(at[rows], k=1, distance_upper_bound=reach)[0])
    elif rows.size:
        own = np.asarray(normals, dtype=float)[rows][:, axes]
        own /= np.maximum(np.linalg.norm(own, axis=1), 1e-300)[:, None]
        cut[rows] = _facing_cut(tree, face_normals, buckets, at[rows], own, reach, lateral)
    return float(np.sum(sizes[cut]) / total)


def _lower_bound(at: np.ndarray, buckets: tuple) -> np.ndarray:
    """A lower bound of the distance from each point ``at`` to the nearest boundary face's centroid. A
    point outside the buckets' box takes its clipped bucket's bound: its projection onto the box lies
    in that bucket and is no farther from any centroid (all inside the box)."""
    lo, side, shape, bound = buckets
    bucket = np.clip(((at - lo) / side).astype(np.int64), 0, np.array(shape) - 1)
    return bound[tuple(bucket.T)]


def _facing_cut(tree, face_normals, buckets, at, own, reach, lateral) -> np.ndarray:
    """Whether a boundary face within ``reach`` of each element (``at``, unit normals ``own``) lies within
    ``lateral`` of its normal line and faces it.

    The line from -reach to +reach is sampled at ``2 m + 1`` points a step ``reach / m <= lateral`` apart
    (``m`` at most :data:`_MAX_SAMPLES`); a face at distance ``t`` along the line and ``o <= lateral``
    off it lies within ``radius = hypot(lateral, step / 2)`` of the point nearest ``t``. Only points
    whose bucket bound allows a face within the radius are searched, first for the :data:`_FIRST`
    nearest faces, then (where that many lie within the radius) for all of them; the candidates are
    then tested exactly. Exact: no face that counts is missed.
    """
    # no face lies farther than the box of the elements and the faces; a reach longer than _MAX_SAMPLES
    # cells is cut to that (a reach that long is a profile smeared across the domain: see the caller)
    lo = np.minimum(at.min(axis=0), tree.data.min(axis=0))
    hi = np.maximum(at.max(axis=0), tree.data.max(axis=0))
    reach = min(reach, float(np.linalg.norm(hi - lo)) * (1 + 1e-9))
    if lateral > 0:
        reach = min(reach, _MAX_SAMPLES * lateral)
    m = max(1, min(_MAX_SAMPLES, int(np.ceil(reach / lateral)) if lateral > 0 else _MAX_SAMPLES))
    along = np.linspace(-reach, reach, 2 * m + 1)
    radius = float(np.hypot(lateral, 0.5 * reach / m))
    cut = np.zeros(at.shape[0], dtype=bool)
    per = max(1, _CHUNK // along.size)
    for start in range(0, at.shape[0], per):
        p, n = at[start:start + per], own[start:start + per]
        points = (p[:, None, :] + along[None, :, None] * n[:, None, :]).reshape(-1, at.shape[1])
        kept = np.flatnonzero(_lower_bound(points, buckets) <= radius)
        element, face = _faces_within(tree, points[kept], radius)
        element = kept[element] // along.size
        offset = tree.data[face] - p[element]
        on_line = np.einsum("ij,ij->i", offset, n[element])
        square = np.einsum("ij,ij->i", offset, offset)
        facing = np.abs(np.einsum("ij,ij->i", face_normals[face], n[element])) >= _FACING
        counts = (square < reach ** 2) & (square - on_line ** 2 <= lateral ** 2) & facing
        cut[start + element[counts]] = True
    return cut


def _faces_within(tree, points: np.ndarray, radius: float) -> tuple:
    """Every (point, face) pair with the face's centroid within ``radius`` of the point, as two arrays:
    the :data:`_FIRST` nearest from one bounded search, all of them by a ball search where that many
    lie within the radius."""
    if points.shape[0] == 0:
        return np.zeros(0, dtype=np.int64), np.zeros(0, dtype=np.int64)
    k = min(_FIRST, tree.n)
    far, face = tree.query(points, k=k, distance_upper_bound=radius)
    far, face = far.reshape(points.shape[0], -1), face.reshape(points.shape[0], -1)
    within = np.isfinite(far)
    full = within.all(axis=1) if k < tree.n else np.zeros(points.shape[0], dtype=bool)
    within[full] = False
    point, column = np.nonzero(within)
    pairs_point, pairs_face = [point], [face[point, column]]
    if full.any():
        rows = np.flatnonzero(full)
        found = tree.query_ball_point(points[rows], radius)
        sizes = np.fromiter((len(f) for f in found), dtype=np.int64, count=rows.size)
        pairs_point.append(np.repeat(rows, sizes))
        pairs_face.append(np.concatenate([np.asarray(f, dtype=np.int64) for f in found]))
    return np.concatenate(pairs_point), np.concatenate(pairs_face)
