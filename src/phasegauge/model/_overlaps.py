"""Cells that cover the same space twice: repeated cells, faces shared by more than two cells, and
cells whose measures add up to more than the region their boundary encloses.

Such meshes read without error but count their phase twice where cells overlap (the phase
volume grows, droplets split). Three checks, each exact or to rounding:

* repeated cells: the same corner set twice in a block (exact: a sum of 64-bit corner mixes
  picks the few candidates, whose sorted corner rows are then compared);
* crowded faces: a face (3D) or edge (2D) that more than two cells have (from the face grouping);
* covered boundary faces: a face that only one cell has, whose outer side lies inside another
  cell (triangle and tetrahedron meshes); overlapping cells that share no face are found this way.
"""

from __future__ import annotations

import numpy as np

from . import _places
from ._centroids import cell_centroids_of
from ._grouping import group_columns, sort_small_rows

__all__ = ["cell_overlaps", "overlap_problem"]


def cell_overlaps(mesh) -> dict:
    """How far the cells of ``mesh`` cover space twice (kept with ``mesh.memo``).

    Returns
    -------
    dict
        ``duplicate_cells`` (int: cells whose corner set an earlier cell of the block has),
        ``crowded_faces`` (int: faces or edges of more than two cells), ``covered_boundary_faces``
        (int: faces of one cell whose outer side lies inside another cell).
    """
    return mesh.memo("cell_overlaps", lambda: _overlaps(mesh))


def overlap_problem(mesh) -> str | None:
    """What makes the cells of ``mesh`` cover space twice, with the count, or None.

    Repeated cells and overlapping cells count their phase twice (the phase volume grows, droplets
    split), so a run refuses such a mesh rather than measure it.
    """
    found = cell_overlaps(mesh)
    if found["duplicate_cells"]:
        n = found["duplicate_cells"]
        return (f"{n} cell{'s' if n > 1 else ''} repeat{'' if n > 1 else 's'} the corners of another cell (stored "
                f"twice), so {'their' if n > 1 else 'its'} phase would count twice")
    if found["crowded_faces"]:
        n = found["crowded_faces"]
        face = "edge" if mesh.dimension == 2 else "face"
        return (f"{n} {face}{'s are' if n > 1 else ' is'} shared by more than two cells, so cells overlap and "
                f"their phase would count twice")
    if found["covered_boundary_faces"]:
        n = found["covered_boundary_faces"]
        face = "edge" if mesh.dimension == 2 else "face"
        return (f"{n} boundary {face}{'s lie' if n > 1 else ' lies'} inside other cells, so cells overlap and "
                "their phase would count twice")
    return None


def _overlaps(mesh) -> dict:
    regular = mesh.regular_grid is not None
    topology = None if regular else mesh._face_topology
    crowded = 0 if regular else topology["crowded"]
    # two simplices with the same corners have the same faces: each face is then crowded, or the two
    # cells share every face (their pair is seen more than once); neither, and no simplex repeats
    # (the corner sort below is skipped, the costliest part on a clean mesh)
    repeats_possible = regular or crowded or topology["shared_faces"] != topology["pair_count"]
    duplicates = 0
    for block in mesh.blocks:
        if len(block) < 2 or (not repeats_possible and block.cell_type in _SIMPLICES):
            continue
        duplicates += _repeated_sets(np.asarray(block.connectivity))
    covered = 0 if regular or duplicates or crowded else _covered_boundary_faces(mesh)
    return {"duplicate_cells": duplicates, "crowded_faces": crowded, "covered_boundary_faces": covered}


_SIMPLICES = ("triangle", "tetra")

#: cells per chunk of :func:`_repeated_sets` (the mixing temporaries stay in cache)
_CHUNK = 1 << 14


def _repeated_sets(connectivity: np.ndarray) -> int:
    """Rows of ``connectivity`` (n, k) whose corner set (with repeats) equals an earlier row's, exactly.

    A 64-bit mix of each corner, summed over the row (the same for any order of the corners, so
    the rows need no sort): rows with distinct sums differ, so only the rows whose sum repeats
    (none on a valid mesh, a few by chance) are sorted and grouped column by column
    (:func:`_repeated_rows`). Sorting every row first cost about 0.1-0.2 s on 1M hexahedra.
    """
    n, k = connectivity.shape
    mix = np.empty(n, dtype=np.uint64)
    with np.errstate(over="ignore"):
        for lo in range(0, n, _CHUNK):
            part = connectivity[lo:lo + _CHUNK]
            total = np.zeros(part.shape[0], dtype=np.uint64)
            for j in range(k):
                total += _mixed(part[:, j])
            mix[lo:lo + _CHUNK] = total
    again = _repeating(mix)
    return 0 if again is None else _repeated_rows(sort_small_rows(connectivity[again]))


def _repeating(mix: np.ndarray):
    """Where ``mix`` holds a value that occurs more than once (a mask), or None if none does."""
    ordered = np.sort(mix)
    repeats = ordered[1:][ordered[1:] == ordered[:-1]]
    return np.isin(mix, repeats) if repeats.size else None


def _mixed(values: np.ndarray) -> np.ndarray:
    """A 64-bit mix of each integer (the finaliser of SplitMix64 after its increment: distinct inputs stay
    distinct)."""
    return _places._mixed(values.astype(np.uint64) + np.uint64(0x9E3779B97F4A7C15))


def _repeated_rows(rows: np.ndarray) -> int:
    """Rows (sorted corner sets) equal to an earlier row, exactly: grouped column by column.

    :func:`_repeated_sets` hands over only the rows whose corner mix repeats (none on a valid
    mesh, a few by chance, all of them on a mesh written twice).
    """
    if rows.shape[0] < 2:
        return 0
    _, starts = group_columns([rows[:, j] for j in range(rows.shape[1])])
    return rows.shape[0] - int(starts.size)


def _covered_boundary_faces(mesh, neighbours: int = 8) -> int:
    """Boundary faces (edges in 2D) whose outer side lies inside another cell: cells that overlap
    without sharing a face. Simplicial meshes (triangles, tetrahedra) only; others give 0.

    A point of each boundary face is moved a little outward (away from the cell that owns it) and
    tested against the few cells whose centroids are nearest (barycentric coordinates, exact
    for simplices).
    """
    from scipy.spatial import cKDTree

    if any(b.cell_type not in _SIMPLICES for b in mesh.blocks):
        return 0
    corners, owners = mesh.boundary_faces
    if corners.shape[0] == 0:
        return 0
    d = mesh.dimension
    x = mesh.coordinates
    width = d  # corners of a face: d (edge: 2, triangle: 3); 3D rows are padded with -1 in front
    face = x[corners[:, corners.shape[1] - width:]]
    # a point of the face off its middle (uneven weights), so that faces of a symmetric layout
    # do not send every probe along another cell's face
    weights = np.array([0.41, 0.59]) if width == 2 else np.array([0.23, 0.33, 0.44])
    middle = np.einsum("k,nkd->nd", weights, face)
    size = mesh.cell_sizes_of(owners)
    away = middle - cell_centroids_of(mesh, owners)  # a split mesh keeps no centroids: the owners' alone
    away /= np.maximum(np.linalg.norm(away, axis=1), 1e-300)[:, None]
    probe = middle + 1e-3 * size[:, None] * away
    # a probe beyond the box of all points lies in no cell (every cell lies in that box): on a
    # box-shaped domain every probe is, and the k-d tree over all centroids is not built; the margin
    # (a millionth of the cell size, the probe moves a thousandth) leaves rounding to the test below
    margin = 1e-6 * size[:, None]
    beyond = np.any((probe < x.min(axis=0) - margin) | (probe > x.max(axis=0) + margin), axis=1)
    if beyond.all():
        return 0
    if beyond.any():
        keep = ~beyond
        probe, owners, size = probe[keep], owners[keep], size[keep]
    blocks = [np.asarray(b.connectivity) for b in mesh.blocks]
    simplices = blocks[0] if len(blocks) == 1 else np.concatenate(blocks)  # one block: no copy
    k = min(neighbours, len(simplices))
    # sliding-midpoint tree: about a third of the balanced tree's build time on a million centroids
    _, near = cKDTree(mesh.cell_centroids, balanced_tree=False, compact_nodes=False).query(probe, k=k)
    near = near.reshape(len(probe), k)
    inside = np.zeros(len(probe), dtype=bool)
    scale = np.maximum(size ** d, 1e-300)
    parents, found = mesh.cell_parents, []
    for j in range(k):
        cell = near[:, j]
        verts = x[simplices[cell]]  # (n, d + 1, d)
        lam, det = _barycentric(verts, probe)
        hit = (np.abs(det) > 1e-14 * scale) & np.all(lam > _INSIDE, axis=1) & (cell != owners)
        if parents is not None:  # pieces of one split cell overlap where it is not star-shaped
            hit &= parents[cell] != parents[owners]
            found.append(np.stack([np.flatnonzero(hit), parents[cell[hit]]], axis=1))
        inside |= hit
    if parents is not None and inside.any():
        pairs = np.unique(np.concatenate(found), axis=0)
        inside[:] = False
        held = _held_by_whole_cells(x, simplices, parents, probe[pairs[:, 0]], pairs[:, 1], size[pairs[:, 0]])
        inside[pairs[held, 0]] = True
    return int(np.count_nonzero(inside))


#: least barycentric coordinate of a point inside a simplex (rounding: a point on a face is outside)
_INSIDE = 1e-9


def _held_by_whole_cells(x: np.ndarray, simplices: np.ndarray, parents: np.ndarray, points: np.ndarray,
                         whole: np.ndarray, sizes: np.ndarray) -> np.ndarray:
    """Which ``points`` (n, d) lie inside the whole cells ``whole`` (n,) of a split mesh: the signs of
    the cell's pieces that hold the point, summed (its winding number; the pieces of a cell not
    star-shaped overlap where it does not reach, turned against each other, and sum to 0 there).

    A point on a face between two pieces is held by neither, and the sum can miss one: such a point is
    moved by a millionth of ``sizes`` (its cell's size) along a fixed slant (a second one where it is
    still on a face) and counted again. Pairs are taken a chunk at a time (a cell's pieces each hold a
    row of the work).
    """
    order = None if np.all(parents[1:] >= parents[:-1]) else np.argsort(parents, kind="stable")
    start = np.searchsorted(parents, whole, sorter=order)
    count = np.searchsorted(parents, whole, side="right", sorter=order) - start
    slants = [s / np.linalg.norm(s) for s in np.array([[0.5773, 0.3141, 0.7544], [-0.2718, 0.8284, 0.4142]])
              [:, :points.shape[1]]]
    held = np.zeros(whole.size, dtype=bool)
    total = np.cumsum(count)
    bounds = np.unique(np.concatenate([[0], np.searchsorted(total, np.arange(_PIECES, total[-1], _PIECES)),
                                       [whole.size]])) if whole.size else np.zeros(1, dtype=np.int64)
    for lo, hi in zip(bounds[:-1], bounds[1:]):
        part = slice(int(lo), int(hi))
        pieces, pair = _pieces_of(start[part], count[part], order)
        winding, unsure = _winding(x, simplices[pieces], points[part][pair], pair, int(hi - lo))
        for slant in slants:  # a second slant where the first runs along the face
            if not unsure.any():
                break
            moved = points[part] + 1e-6 * sizes[part][:, None] * slant
            again, still = _winding(x, simplices[pieces], moved[pair], pair, int(hi - lo))
            winding[unsure] = again[unsure]
            unsure &= still
        held[part] = winding != 0
    return held


#: pieces (point, piece of its cell) tested together by :func:`_held_by_whole_cells`
_PIECES = 1 << 16


def _pieces_of(start: np.ndarray, count: np.ndarray, order) -> tuple[np.ndarray, np.ndarray]:
    """The pieces of each whole cell (its pieces ``start`` to ``start + count`` in parent order), and
    for each the index of its cell in ``start``."""
    pair = np.repeat(np.arange(start.size), count)
    at = np.repeat(start - (np.cumsum(count) - count), count) + np.arange(pair.size)
    return (at if order is None else order[at]), pair


def _winding(x: np.ndarray, corners: np.ndarray, points: np.ndarray, pair: np.ndarray, n: int) -> tuple:
    """Per pair, the signs of the pieces (``corners``) holding its point summed, and whether the point
    lies on a piece's face (within rounding: some piece's least barycentric coordinate about 0)."""
    lam, det = _barycentric(x[corners], points)
    least = lam.min(axis=1)
    real = det != 0
    held = real & (least > _INSIDE)
    on_face = real & (np.abs(least) <= _INSIDE)
    winding = np.bincount(pair, weights=np.where(held, np.sign(det), 0.0), minlength=n)
    return winding, np.bincount(pair, weights=on_face, minlength=n) > 0


def _barycentric(verts: np.ndarray, point: np.ndarray):
    """Barycentric coordinates (n, d + 1) of ``point`` (n, d) in the simplices ``verts`` (n, d + 1, d), and
    the simplices' determinants (n,), by Cramer's rule (0 coordinates where the determinant is 0)."""
    base = verts[:, 1:, :] - verts[:, :1, :]
    rel = point - verts[:, 0, :]
    if verts.shape[2] == 2:
        a, b = base[:, 0], base[:, 1]
        det = a[:, 0] * b[:, 1] - a[:, 1] * b[:, 0]
        parts = [rel[:, 0] * b[:, 1] - rel[:, 1] * b[:, 0], a[:, 0] * rel[:, 1] - a[:, 1] * rel[:, 0]]
    else:
        a, b, c = base[:, 0], base[:, 1], base[:, 2]
        bc, ca, ab = np.cross(b, c), np.cross(c, a), np.cross(a, b)
        det = np.einsum("ij,ij->i", a, bc)
        parts = [np.einsum("ij,ij->i", rel, bc), np.einsum("ij,ij->i", rel, ca), np.einsum("ij,ij->i", rel, ab)]
    lam = np.zeros((len(point), verts.shape[2] + 1))
    ok = det != 0
    safe = np.where(ok, det, 1.0)
    for i, part in enumerate(parts):
        lam[:, i + 1] = np.where(ok, part / safe, 0.0)
    lam[:, 0] = np.where(ok, 1.0 - lam[:, 1:].sum(axis=1), 0.0)
    return lam, det

