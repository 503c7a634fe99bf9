"""Faces that meet at hanging nodes: a cell's face lying on part of a larger face of another cell.

Adaptive solvers refine a cell without its neighbour. The fine cells' faces (edges in 2D) then lie
on the coarse cell's face and share only some of its corners, so grouping faces by their corners
(:func:`._faces.face_topology`) leaves every one of them owned by one cell: the seam reads as a
wall, and a drop across it falls apart into several droplets. :func:`hanging_face_links` finds the
faces that lie within a larger boundary face, facing it, so the face topology can join their cells
and take the seam out of the boundary. Two equal faces at one place (points written twice) are left
apart: they may be a baffle, a wall inside the domain.

The test is geometric, to a tolerance of 1e-2 of the larger face's size (a hanging node of a mapped
mesh lies on the curved mesh line, off the coarse face's plane by its sagitta): every corner of the
smaller face lies in the larger face's plane (on its line in 2D) and inside it, the two faces'
outward normals are opposed, and some smaller face of the larger one shares a corner with it (a
baffle written with points of its own shares none). A larger face the smaller ones cover in part (a
wall beside the seam) stays a boundary face, and so do they; their cells are joined all the same. A
face on a plane of the mesh's bounding box is never part of a seam (a cell would lie on each side of
it), so on a box-shaped domain without refinement seams no face is tested.
"""

from __future__ import annotations

import numpy as np

from ..errors import UnsupportedMeshError
from ._centroids import cell_centroids_of

__all__ = ["hanging_face_links", "HANGING_TOLERANCE"]

#: distances within this share of the larger face's size count as zero (rounding of written points,
#: and a hanging node placed on a curved mesh line rather than on the coarse face's straight edge)
HANGING_TOLERANCE = 1e-2
#: least opposition of the two faces' unit outward normals (cos 8 degrees)
_OPPOSED = 0.99


def hanging_face_links(mesh, corners: np.ndarray, owners: np.ndarray):
    """Pairs of boundary faces where one lies within the other, facing it: ``(small, large, covered)``.

    Parameters
    ----------
    mesh : Mesh
    corners, owners : ndarray
        The boundary faces as the face topology keeps them: sorted corner ids ((n, 2) in 2D; (n, 4)
        in 3D, triangles padded with -1 in front) and the cell owning each.

    Returns
    -------
    tuple or None
        None when no face lies within a larger one. Else ``small`` and ``large`` (int64 indices into
        the faces, one row per pair: ``small`` within ``large``; two equal faces, as at points written
        twice, are no pair: they may be a baffle) and ``covered`` (bool per face: a larger face the
        smaller ones cover to 1e-6 of its measure, or one of those smaller faces: no boundary).
    """
    n = corners.shape[0]
    d = mesh.dimension
    if n < 2 or mesh.regular_grid is not None:
        return None
    try:
        x = mesh.coordinates
    except UnsupportedMeshError:  # 2D cells off a coordinate plane: refused where the geometry is read
        return None
    width = 2 if d == 2 else 4
    cols = corners[:, corners.shape[1] - width:]
    valid = cols >= 0
    # the faces' points, triangles with their first corner repeated in the pad
    pts = x[np.where(valid, cols, cols[:, -1:])]  # (n, width, d)
    corner = [pts[:, k] for k in range(width)]  # (numpy reduces over short trailing axes slowly)
    centre = sum(corner[k] * valid[:, k, None] for k in range(width)) / valid.sum(axis=1)[:, None]
    radius = np.sqrt(np.maximum.reduce([np.einsum("ij,ij->i", p - centre, p - centre) for p in corner]))
    tol = HANGING_TOLERANCE * radius
    low, high = np.minimum.reduce(corner), np.maximum.reduce(corner)  # each face's box
    lo, hi = low.min(axis=0), high.max(axis=0)  # the mesh's box is its boundary's
    # every corner on one plane of the mesh's box: outer boundary
    on_box = np.zeros(n, dtype=bool)
    for axis in range(d):
        on_box |= (high[:, axis] - lo[axis] <= tol) | (hi[axis] - low[:, axis] <= tol)
    inner = np.flatnonzero(~on_box & (radius > 0))
    if inner.size < 2:
        return None
    large, small = _candidates(centre, radius, inner)
    offset = centre[small] - centre[large]
    keep = np.einsum("ij,ij->i", offset, offset) <= (radius[large] * (1 + HANGING_TOLERANCE)) ** 2
    keep &= (small != large) & (owners[small] != owners[large])
    large, small = large[keep], small[keep]
    if large.size == 0:
        return None
    seen = np.zeros(n, dtype=bool)
    seen[large] = seen[small] = True
    normal = _outward_normals(mesh, pts, centre, owners, np.flatnonzero(seen))
    keep = np.einsum("ij,ij->i", normal[large], normal[small]) <= -_OPPOSED
    large, small = large[keep], small[keep]
    keep = _within(pts[small], valid[small], pts[large], normal[large], tol[large], d)
    large, small = large[keep], small[keep]
    if large.size == 0:
        return None
    # a face equal to the other (points written twice at one place) may be a baffle, a wall inside
    # the domain: only a strictly smaller face is joined; and a seam shares points with the larger
    # face (its corners are corners of some smaller face), a baffle written with points of its own none
    measure = _measures(pts, valid, normal, d)
    shares = np.any((cols[small][:, :, None] == cols[large][:, None, :]) & valid[small][:, :, None], axis=(1, 2))
    keep = (measure[small] < (1 - 1e-6) * measure[large]) & (np.bincount(large, shares, n)[large] > 0)
    large, small = large[keep], small[keep]
    if large.size == 0:
        return None
    # a larger face the smaller ones cover whole leaves the boundary with them; one covered in part
    # (a wall beside the seam) stays, and so do its smaller faces, as before
    held = np.bincount(large, weights=measure[small], minlength=n)
    whole = (held > 0) & (held >= (1 - 1e-6) * measure)
    covered = whole.copy()
    covered[small[whole[large]]] = True
    return small.astype(np.int64), large.astype(np.int64), covered


def _candidates(centre: np.ndarray, radius: np.ndarray, inner: np.ndarray) -> tuple:
    """Pairs ``(large, small)`` of the faces ``inner``, each pair at most once, among which are all whose
    centres lie within the first face's size of each other: every pair within the 90th percentile of
    the sizes (both ways round, kept where the first face is not larger), and from each larger face
    every face within its own size."""
    from scipy.spatial import cKDTree

    reach = radius[inner] * (1 + HANGING_TOLERANCE)
    cut = float(np.quantile(reach, 0.9))
    tree = cKDTree(centre[inner])
    pairs = tree.query_pairs(cut, output_type="ndarray")
    first, second = np.concatenate([pairs[:, 0], pairs[:, 1]]), np.concatenate([pairs[:, 1], pairs[:, 0]])
    small_first = reach[first] <= cut
    large, small = [inner[first[small_first]]], [inner[second[small_first]]]
    big = np.flatnonzero(reach > cut)
    if big.size:
        found = tree.query_ball_point(centre[inner[big]], reach[big], return_sorted=False)
        counts = np.fromiter(map(len, found), dtype=np.int64, count=big.size)
        large.append(np.repeat(inner[big], counts))
        small.append(inner[np.concatenate([np.asarray(f, dtype=np.int64) for f in found])])
    return np.concatenate(large), np.concatenate(small)


def _outward_normals(mesh, pts: np.ndarray, centre: np.ndarray, owners: np.ndarray, which: np.ndarray) -> np.ndarray:
    """Unit normals of the faces ``which`` (zero elsewhere), pointing away from the cell owning each."""
    d = pts.shape[2]
    normal = np.zeros((pts.shape[0], d))
    p = pts[which]
    if d == 2:
        t = p[:, 1] - p[:, 0]
        m = np.stack([t[:, 1], -t[:, 0]], axis=1)
    else:  # any three corners of a flat face span its plane; the last three avoid a triangle's pad
        m = np.cross(p[:, 2] - p[:, 1], p[:, 3] - p[:, 1])
    m /= np.maximum(np.linalg.norm(m, axis=1), 1e-300)[:, None]
    inward = cell_centroids_of(mesh, owners[which]) - centre[which]
    m[np.einsum("ij,ij->i", m, inward) > 0] *= -1.0
    normal[which] = m
    return normal


def _ordered(poly: np.ndarray, normal: np.ndarray) -> np.ndarray:
    """The corners of flat convex faces (m, 4, 3) in order around each face (by angle in its plane)."""
    centre = poly.mean(axis=1, keepdims=True)
    rel = poly - centre
    e1 = rel[:, 0] / np.maximum(np.linalg.norm(rel[:, 0], axis=1), 1e-300)[:, None]
    e2 = np.cross(normal, e1)
    angle = np.arctan2(np.einsum("mkd,md->mk", rel, e2), np.einsum("mkd,md->mk", rel, e1))
    return np.take_along_axis(poly, np.argsort(angle, axis=1)[:, :, None], axis=1)


def _within(small: np.ndarray, valid: np.ndarray, large: np.ndarray, normal: np.ndarray, tol: np.ndarray,
            d: int) -> np.ndarray:
    """Whether every corner of each face ``small`` lies within the face ``large`` of its row (to ``tol``)."""
    inside = np.ones(small.shape[0], dtype=bool)
    if d == 2:
        a, b = large[:, 0], large[:, 1]
        t = b - a
        length2 = np.maximum(np.einsum("ij,ij->i", t, t), 1e-300)
        for q in range(small.shape[1]):
            r = small[:, q] - a
            along = np.einsum("ij,ij->i", r, t) / length2
            off = np.abs(r[:, 0] * t[:, 1] - r[:, 1] * t[:, 0]) / np.sqrt(length2)
            slack = tol / np.sqrt(length2)
            inside &= (off <= tol) & (along >= -slack) & (along <= 1 + slack)
        return inside
    poly = _ordered(large, normal)  # a triangle's repeated corner gives an edge of length 0
    for q in range(small.shape[1]):
        p = small[:, q]
        ok = np.abs(np.einsum("ij,ij->i", p - poly[:, 0], normal)) <= tol
        for e in range(4):
            a, b = poly[:, e], poly[:, (e + 1) % 4]
            side = np.einsum("ij,ij->i", np.cross(b - a, p - a), normal)
            ok &= side >= -tol * np.linalg.norm(b - a, axis=1)
        inside &= ok | ~valid[:, q]
    return inside


def _measures(pts: np.ndarray, valid: np.ndarray, normal: np.ndarray, d: int) -> np.ndarray:
    """Length (2D) or area (3D) of each face (those with a normal; 0 elsewhere)."""
    if d == 2:
        return np.linalg.norm(pts[:, 1] - pts[:, 0], axis=1)
    out = np.zeros(pts.shape[0])
    has = np.flatnonzero(np.any(normal != 0, axis=1))
    poly = _ordered(pts[has], normal[has])
    total = sum(np.cross(poly[:, e], poly[:, (e + 1) % 4]) for e in range(4))
    out[has] = 0.5 * np.abs(np.einsum("ij,ij->i", total, normal[has]))
    return out
