"""Signed distances to a contour: of mesh points and split vertices, for the moment and profile fits."""

from __future__ import annotations

from typing import NamedTuple

import numpy as np

from ..model._centroids import cell_centroids_of
from ..model._grouping import ranges
from ..model._threads import share_one_arena
from ..model.contour import Contour
from ..model.simplices import SimplexSplit

#: query points per pass of the signed distances (the pass's temporaries stay small)
_QUERY_CHUNK = 1 << 16
#: at most about this many buckets in :func:`_maybe_near`'s grid
_MAX_BUCKETS = 1 << 18
#: nearest elements of each corner an added centre is measured against (:func:`_centre_split_distance`)
_CANDIDATES = 3
#: added centres per pass of :func:`_centre_split_distance` (about 15 candidates each)
_CENTRE_CHUNK = 1 << 12
#: about this many elements searched from the far rows (see :func:`_search_sets`)
_THIN_TO = 2000
#: least half-size of a merged piece, in sizes of its cell (:func:`_whole_cell_pieces`)
_LEAST_HALF = 0.45


def _nearest_plane_distance(points, rows, cent, normal, half, bound, compact=False, threads=1):
    """Distance from ``points[rows]`` to the nearest element's plane (see :func:`_signed_distance`);
    each query of the tree on up to ``threads`` threads (scipy's ``workers``: the same results)."""
    tree = _plane_tree(cent, compact)
    if threads > 1:  # (scipy's threads allocate too)
        share_one_arena()
    out = np.full(rows.size, np.nan)
    for lo in range(0, rows.size, _QUERY_CHUNK):  # each query is on its own: chunks change nothing
        at = points[rows[lo:lo + _QUERY_CHUNK]]
        far, nearest = tree.query(at, k=1, distance_upper_bound=bound, workers=threads)
        near = np.isfinite(far)
        out[lo:lo + _QUERY_CHUNK][near] = _plane_distance(at[near], nearest[near], cent, normal, half)
    return out


def _plane_tree(cent: np.ndarray, compact: bool = False):
    """The search tree of the elements' centroids, as every signed-distance search builds it.

    A sliding-midpoint tree (not median-balanced): about 1.5-1.9x faster queries here, since the
    centroids lie on a surface; equidistant centroids may resolve to another element than with a
    balanced tree, which moved the second moment by 3e-11 relative on a 1M-cell grid. Leaves of
    64 (not 16): 1.9x faster queries from points near a dense contour (jittered hexahedra), the
    same elements found on the guarded triangle, tetrahedron and grid runs. Nodes shrunk to their
    points (``compact``) are built a little slower and searched 2-3x faster from points far off the
    surface.
    """
    from scipy.spatial import cKDTree

    return cKDTree(cent, leafsize=64, balanced_tree=False, compact_nodes=compact)


def _plane_distance(at: np.ndarray, nearest: np.ndarray, cent, normal, half) -> np.ndarray:
    """Distance from each point ``at`` to the plane of its element ``nearest``, continued beyond its half-size."""
    offset = at - cent[nearest]
    across = np.abs(np.einsum("ij,ij->i", offset, normal[nearest]))
    lateral = np.sqrt(np.maximum(np.einsum("ij,ij->i", offset, offset) - across ** 2, 0.0))
    return np.sqrt(across ** 2 + np.maximum(lateral - half[nearest], 0.0) ** 2)


def _maybe_near(points: np.ndarray, centres: np.ndarray, reach: float) -> np.ndarray:
    """False where a point is farther than ``reach`` from every centre, else True.

    Two tests, each exact: first a grid of buckets of side ``s >= reach / 8`` (coarser on a
    large box: at most about 2^18 buckets) where the centres are marked; a
    point is kept when
    the bucket-centre distance to the nearest marked bucket (Euclidean distance transform) is
    at most ``reach + s sqrt(d)`` (each point and centre lies within half a bucket diagonal of
    its bucket's centre). Points outside the centres' box grown by ``reach`` are far. Then the
    points kept are searched for a centre within ``reach`` in a tree whose nodes are shrunk to
    their points (several times faster for points just beyond ``reach`` than the tree of
    :func:`_nearest_plane_distance`; whether any centre lies that near does not depend on the
    tree). A search bounded by ``reach`` finds nothing for the points called far.
    """
    near = np.zeros(points.shape[0], dtype=bool)
    if centres.shape[0] == 0 or points.shape[0] == 0:
        return near
    dim = points.shape[1]
    lo = centres.min(axis=0) - reach
    hi = centres.max(axis=0) + reach
    extent = hi - lo
    side = max(0.125 * reach, float(np.prod(extent) / _MAX_BUCKETS) ** (1.0 / dim))
    shape = np.maximum(np.ceil(extent / side).astype(np.int64), 1)
    close = _close_buckets(_bucket_of(centres, lo, side, shape), shape, reach / side + np.sqrt(dim) + 1e-9)
    outside = np.zeros(points.shape[0], dtype=bool)
    for axis in range(dim):
        outside |= (points[:, axis] < lo[axis]) | (points[:, axis] > hi[axis])
    kept = np.flatnonzero(~outside)
    kept = kept[close.ravel()[_flat_bucket(points[kept], lo, side, shape)]]
    near[kept] = _any_within(points[kept], centres, reach)
    return near


def _bucket_of(points: np.ndarray, lo: np.ndarray, side: float, shape) -> np.ndarray:
    """The bucket index along each axis of each point (clipped to the grid), shape (n, dim)."""
    return np.clip(((points - lo) / side).astype(np.int64), 0, np.asarray(shape) - 1)


def _flat_bucket(points: np.ndarray, lo: np.ndarray, side: float, shape) -> np.ndarray:
    """The flat (C-order) bucket index of each point, clipped to the grid, one axis at a time."""
    flat = np.zeros(points.shape[0], dtype=np.int64)
    for axis in range(points.shape[1]):
        flat *= shape[axis]
        flat += np.clip(((points[:, axis] - lo[axis]) / side).astype(np.int64), 0, shape[axis] - 1)
    return flat


def _close_buckets(at: np.ndarray, shape, limit: float) -> np.ndarray:
    """Buckets whose centre lies within ``limit`` buckets of a marked bucket's centre (marks: ``at``).

    The Euclidean distance transform runs on the box of the marks grown by the limit: a bucket
    outside it is farther than the limit from every mark along one axis alone.
    """
    from scipy.ndimage import distance_transform_edt

    grow = int(np.ceil(limit)) + 1
    box = tuple(slice(int(a), int(b)) for a, b in zip(np.maximum(at.min(axis=0) - grow, 0),
                                                     np.minimum(at.max(axis=0) + grow + 1, shape)))
    marked = np.zeros(tuple(s.stop - s.start for s in box), dtype=bool)
    marked[tuple((at - [s.start for s in box]).T)] = True
    close = np.zeros(tuple(int(n) for n in shape), dtype=bool)
    close[box] = distance_transform_edt(~marked) <= limit
    return close


def _any_within(points: np.ndarray, centres: np.ndarray, reach: float) -> np.ndarray:
    """Whether any centre lies within ``reach`` of each point (a tree with nodes shrunk to their points)."""
    from scipy.spatial import cKDTree

    near = np.zeros(points.shape[0], dtype=bool)
    if points.shape[0] == 0:
        return near
    tree = cKDTree(centres, balanced_tree=False, compact_nodes=True)
    for lo_row in range(0, points.shape[0], _QUERY_CHUNK):
        # a little beyond reach: rounding in the tree's distances never drops a point
        found, _ = tree.query(points[lo_row:lo_row + _QUERY_CHUNK], k=1, distance_upper_bound=reach * (1 + 1e-9))
        near[lo_row:lo_row + _QUERY_CHUNK] = np.isfinite(found)
    return near


class _CentroidBuckets(NamedTuple):
    """A fixed grid of buckets over a mesh's box and the bucket of every cell centroid."""

    lo: np.ndarray
    side: float
    shape: tuple
    flat: np.ndarray  # int32 flat bucket index of each cell centroid


def _centroid_buckets(mesh) -> _CentroidBuckets:
    """The mesh's fixed bucket grid (about ``_MAX_BUCKETS`` buckets over its points' box), once per mesh."""

    def compute():
        coords = mesh.coordinates
        lo, hi = coords.min(axis=0), coords.max(axis=0)
        extent = np.maximum(hi - lo, 1e-300)
        dim = coords.shape[1]
        side = float(np.prod(extent) / _MAX_BUCKETS) ** (1.0 / dim)
        side = max(side, float(extent.max()) / 4096.0)  # a flat box: not more buckets along its long side
        shape = np.maximum(np.ceil(extent / side).astype(np.int64), 1)
        flat = _flat_bucket(mesh.cell_centroids, lo, side, shape)
        return _CentroidBuckets(lo, side, tuple(int(n) for n in shape), flat.astype(np.int32))

    return mesh.memo("centroid_buckets", compute)


def _maybe_near_cells(mesh, cells: np.ndarray, centres: np.ndarray, reach: float) -> np.ndarray:
    """:func:`_maybe_near` for the centroids of ``cells``, on the mesh's fixed bucket grid.

    The same two exact tests; the buckets of the centroids are found once per mesh instead of
    every call (where the fixed grid is coarser than half of ``reach``, the grid of
    :func:`_maybe_near` about the centres is used instead).
    """
    grid = _centroid_buckets(mesh)
    if centres.shape[0] == 0 or cells.size == 0 or not grid.side <= 0.5 * reach:
        return _maybe_near(cell_centroids_of(mesh, cells), centres, reach)
    limit = reach / grid.side + np.sqrt(centres.shape[1]) + 1e-9  # in buckets
    close = _close_buckets(_bucket_of(centres, grid.lo, grid.side, grid.shape), grid.shape, limit)
    near = np.zeros(cells.size, dtype=bool)
    kept = np.flatnonzero(close.ravel()[grid.flat[cells]])
    near[kept] = _any_within(cell_centroids_of(mesh, cells[kept]), centres, reach)
    return near


class _ContourGeometry:
    """A contour's element sizes, centroids and unit normals, computed once."""

    def __init__(self, contour: Contour):
        self.contour = contour
        self.sizes = contour.element_sizes
        self.size = float(self.sizes.sum())
        self.centroids = contour.centroids
        self.normals = contour.normals
        self.halves = None  # half the elements' sizes (of the square root of their areas in 3D)
        self.merged = False  # whether the elements are merged pieces (:func:`_cell_pieces`)

    @classmethod
    def of_pieces(cls, contour: Contour, sizes, centroids, normals, halves) -> "_ContourGeometry":
        """A geometry of other elements than the contour's own (one per cell piece, say)."""
        out = cls.__new__(cls)
        out.contour = contour
        out.sizes, out.centroids, out.normals, out.halves = sizes, centroids, normals, halves
        out.size = float(sizes.sum())
        out.merged = True
        return out


def _cell_pieces(geometry: _ContourGeometry, *, cells: np.ndarray | None = None, least: np.ndarray | None = None,
                 flat: float = 0.95) -> _ContourGeometry:
    """The contour's elements merged into one element per mesh cell, where the cell's piece is flat.

    ``cells`` numbers the cell of each element (default the contour's own cells; the whole cells
    of a split mesh, ``mesh.cell_parents[contour.cells]``, merge the pieces of every polyhedron).
    ``least`` (per element) is the least half-size of the piece holding it. A geometry already
    merged is returned as it is.

    Each cell's element stands for its piece: the area-weighted centroid, the unit normal of the
    summed area vector, the summed area, and as half-size the distance from the centroid to the
    piece's farthest corner. A piece counts as flat when its summed area vector is at least
    ``flat`` times its area (an interface of curvature radius R in cells of size h bends by
    O(h / R) within a cell); other cells (the level crossing one twice, a fold) keep their own
    elements. The plane of a piece is within O(h^2 / R) of its elements' own, so the distances
    move at that order; the search tree is several times smaller (several triangles per cell on
    the 12-tetrahedra split of a coned hexahedron). The merge covers every cell of the contour: on a
    mesh with coned hexahedra the pieces in its wedges, pyramids and tetrahedra merge too.

    Measured against the analytic distance |r - R| to a sphere (with the least half-size of
    :func:`_whole_cell_pieces`), at the points the widths searched: on jittered hexahedra
    (``tests/analysis/test_hex_integrals.py``) about 0.02 h root mean square and at most
    0.09-0.12 h, against 0.03 h and 0.21-0.29 h with the elements themselves; on the same cells
    as polyhedra (``tests/analysis/test_polyhedral_distances.py``, corners and centres) 0.009-0.012 h
    and at most 0.05-0.085 h, against 0.018-0.021 h and 0.17-0.24 h.
    """
    contour = geometry.contour
    cells = contour.cells if cells is None else np.asarray(cells)
    if geometry.merged or contour.dimension != 3 or cells.size == 0:
        return geometry
    sizes = geometry.sizes
    crossed = np.bincount(cells) > 0
    cells = (np.cumsum(crossed) - 1)[cells]  # the cells the contour crosses, numbered 0.. in order
    n = int(np.count_nonzero(crossed))
    area = np.bincount(cells, weights=sizes, minlength=n)
    vector = np.empty((n, 3))
    centre = np.empty((n, 3))
    for k in range(3):
        vector[:, k] = np.bincount(cells, weights=sizes * geometry.normals[:, k], minlength=n)
        centre[:, k] = np.bincount(cells, weights=sizes * geometry.centroids[:, k], minlength=n)
    length = np.sqrt(np.einsum("ij,ij->i", vector, vector))
    merged = (area > 0) & (length >= flat * area)
    keep = np.flatnonzero(merged)
    alone = np.flatnonzero(~merged[cells])  # elements of the cells not merged
    if alone.size == cells.size:
        return geometry
    centre[keep] /= area[keep, None]
    # a piece's half-size: the farthest of its elements' corners from its centroid (a piece is
    # often long and thin, a corner of its cell cut off: the root of its area would call points
    # beside it off its edge)
    own = centre[cells]
    farthest = np.zeros(cells.size)
    for k in range(3):
        offset = contour.points[contour.elements[:, k]] - own
        np.maximum(farthest, np.einsum("ij,ij->i", offset, offset), out=farthest)
    if least is not None:
        np.maximum(farthest, np.square(least), out=farthest)
    reach = np.zeros(n)
    np.maximum.at(reach, cells, farthest)
    np.sqrt(reach, out=reach)
    sizes_out = np.concatenate([area[keep], sizes[alone]])
    centroids = np.concatenate([centre[keep], geometry.centroids[alone]])
    normals = np.concatenate([vector[keep] / length[keep, None], geometry.normals[alone]])
    halves = np.concatenate([reach[keep], 0.5 * np.sqrt(sizes[alone])])
    return _ContourGeometry.of_pieces(contour, sizes_out, centroids, normals, halves)


def _whole_cell_pieces(mesh, geometry: _ContourGeometry) -> _ContourGeometry:
    """:func:`_cell_pieces` per whole cell (the pieces of a cell a reader split, ``mesh.cell_parents``, as one).

    A piece's half-size is at least ``_LEAST_HALF`` of its cell's size: a sliver (a cell's corner
    barely cut) would otherwise stand for its centroid alone, and a point beside it whose nearest
    centroid it is would be measured to that centroid instead of to the plane (up to 0.37 h off
    at cell centres of polyhedra, see the module's tests).
    """
    if geometry.merged:
        return geometry
    cells = geometry.contour.cells
    parents = mesh.cell_parents
    least = _LEAST_HALF * mesh.cell_sizes_of(cells)
    return _cell_pieces(geometry, cells=None if parents is None else parents[cells], least=least)


class MeasuredDistances(NamedTuple):
    """Signed distances the width estimators measured at the mesh points, with the contour's geometry.

    ``point`` : ndarray of shape (n_points,), in mesh length units; positive where c > level,
    +-inf where the search found no element within ``bound``, NaN where none was searched
    (c flat around the point).
    ``geometry`` : the contour's element sizes, centroids and normals.
    ``bound`` : how far the search reached, in mesh length units.
    """

    point: np.ndarray
    geometry: _ContourGeometry
    bound: float


def _signed_distance(points: np.ndarray, values: np.ndarray, geometry: _ContourGeometry, plane_axes,
                     level: float, bound: float = np.inf, near_band: float = 0.01, compact: bool = False,
                     threads: int = 1) -> np.ndarray:
    """Signed distance from points (analysis coordinates) to the contour; positive where c > level.

    The distance is to the tangent line / plane of the nearest element (by
    centroid), continued as the distance to that element's centroid beyond
    its half-size: second-order accurate on a smooth interface. Points with
    c outside (near_band, 1 - near_band) search a thinned set of about 2000
    elements (a search from the middle of a sphere otherwise visits every
    element); their lateral allowance is the thinned spacing. Points farther
    than ``bound`` get NaN. ``compact`` builds the search trees with nodes shrunk to their
    points (faster for points far off the contour; equidistant elements may resolve otherwise).
    ``threads``: threads of each search (the same distances on any number).
    """
    close_set, far_set = _search_sets(geometry, plane_axes)
    dist = np.full(points.shape[0], np.nan)
    if far_set is close_set:  # few elements, none thinned: one search of every row
        rows = np.arange(points.shape[0])
        dist[rows] = _nearest_plane_distance(points, rows, *close_set, bound, compact, threads)
    else:
        close = (values > near_band) & (values < 1.0 - near_band)
        rows = np.flatnonzero(close)
        dist[rows] = _nearest_plane_distance(points, rows, *close_set, bound, compact, threads)
        rows = np.flatnonzero(~close)
        dist[rows] = _nearest_plane_distance(points, rows, *far_set, bound, compact, threads)
    np.negative(dist, out=dist, where=~(values > level))
    return dist


def _search_sets(geometry: _ContourGeometry, plane_axes) -> tuple[tuple, tuple]:
    """The elements (centroids, normals, half-sizes) the close rows search, and those the far rows search.

    The far rows' set is thinned to about 2000 elements, their half-sizes at least the thinned
    spacing (see :func:`_signed_distance`); it is the close rows' own set when there are fewer
    than 4000.
    """
    axes = list(plane_axes)
    contour = geometry.contour
    cent = geometry.centroids[:, axes]
    normal = geometry.normals[:, axes]
    sizes = geometry.sizes
    half = geometry.halves
    if half is None:
        half = 0.5 * (sizes if contour.dimension == 2 else np.sqrt(sizes))
    stride = max(1, sizes.size // _THIN_TO)
    if stride == 1:  # the far rows search the close rows' own set (the same object: callers test it)
        both = (cent, normal, half)
        return both, both
    thin = slice(0, None, stride)
    spacing = (sizes.sum() / len(cent[thin])) ** (1.0 / (contour.dimension - 1))
    return (cent, normal, half), (cent[thin], normal[thin], np.maximum(half[thin], spacing))


def _centre_reach(points: np.ndarray, centres) -> float:
    """The largest distance from an added centre to one of its corners (:class:`SplitCentres` ``centres``)."""
    at, corners, offsets = centres
    reach = 0.0
    n = offsets.size - 1
    for lo in range(0, n, _QUERY_CHUNK):
        hi = min(lo + _QUERY_CHUNK, n)
        own = np.repeat(points[at[lo:hi]], np.diff(offsets[lo:hi + 1]), axis=0)
        offset = points[corners[offsets[lo]:offsets[hi]]] - own
        reach = max(reach, float(np.einsum("ij,ij->i", offset, offset).max(initial=0.0)))
    return float(np.sqrt(reach))


def _centre_split_distance(points: np.ndarray, values: np.ndarray, wanted: np.ndarray, centres,
                           geometry: _ContourGeometry, plane_axes, level: float, bound: float, reach: float,
                           near_band: float = 0.01, threads: int = 1) -> np.ndarray:
    """Signed distances at the ``wanted`` points of a mesh whose points ``centres.points`` are
    centres a reader added (:class:`phasegauge.model.polyhedra.SplitCentres`); NaN elsewhere and
    beyond ``bound``.

    The mesh's own points (the centres' corners among them) are searched for their 3 nearest
    elements (by centroid), in the sets :func:`_signed_distance` searches (close rows the whole
    set, far rows the thinned one), each point by its own value and each centre's corners by the
    centre's; a point's own distance is to the first of them, as :func:`_signed_distance` gives
    it. An added centre is not searched: it is measured to the plane of the nearest (by centroid)
    of its corners' candidates, which is the search's own element whenever that element is among
    them (at 98-99 % of the centres on jittered polyhedra, see benchmarks/RESULTS.md, "Twelfth
    round: the added centres' distances") and otherwise a near neighbour of it. With one element
    per crossed whole cell (:func:`_whole_cell_pieces`) the centres keep the search's accuracy
    against a sphere; with several elements a cell (the contour's own triangles) 3 candidates a
    corner are too few (the search's element at about two in three centres). ``reach`` is at
    least the largest distance from a centre to one of its corners: the corners search up to
    ``bound + reach``, so that any element within ``bound`` of a centre is found among its
    corners' candidates whenever a search without bound would find it. About half of the points
    the widths search on polyhedra are centres (four in five while every quad face had a centre).
    """
    at_centre, corners, offsets = centres
    close_set, far_set = _search_sets(geometry, plane_axes)
    dist = np.full(points.shape[0], np.nan)
    close = (values > near_band) & (values < 1.0 - near_band)
    ids = np.flatnonzero(wanted[at_centre])  # the wanted centres, numbered among the centres
    plain = wanted.copy()
    plain[at_centre] = False  # the wanted points that are no centre
    passes = [(None, close_set)] if far_set is close_set else [(close, close_set), (~close, far_set)]
    for cls, (cent, normal, half) in passes:
        own = plain if cls is None else plain & cls
        picked = ids if cls is None else ids[cls[at_centre[ids]]]
        need = own.copy()
        need[corners[ranges(offsets, picked)]] = True
        rows = np.flatnonzero(need)
        tree = _plane_tree(cent)  # as _nearest_plane_distance's: the corners find the search's elements
        if threads > 1:
            share_one_arena()
        found = np.empty((rows.size, _CANDIDATES), dtype=np.intp)
        for lo in range(0, rows.size, _QUERY_CHUNK):
            at = points[rows[lo:lo + _QUERY_CHUNK]]
            # (fewer than k found: the index cent.shape[0] and an infinite distance)
            # (the tree's bound is strict: the margin keeps an element at bound + reach to round-off)
            far, nearest = tree.query(at, k=_CANDIDATES, distance_upper_bound=(bound + reach) * (1 + 1e-9),
                                      workers=threads)
            found[lo:lo + at.shape[0]] = nearest
            mine = np.flatnonzero(own[rows[lo:lo + _QUERY_CHUNK]] & (far[:, 0] < bound))
            dist[rows[lo + mine]] = _plane_distance(at[mine], nearest[mine, 0], cent, normal, half)
        slot = np.zeros(points.shape[0], dtype=np.intp)
        slot[rows] = np.arange(rows.size)
        # each corner's candidates' centroids, k x dim coordinates a row (none found: at infinity)
        k, dim = _CANDIDATES, cent.shape[1]
        table = np.concatenate([cent, np.full((1, dim), np.inf)])[found].reshape(rows.size, k * dim)
        sizes = offsets[picked + 1] - offsets[picked]
        for size in np.unique(sizes):  # centres of as many corners at a time: their candidates a row each
            group = picked[sizes == size]
            for lo in range(0, group.size, _CENTRE_CHUNK):
                which = group[lo:lo + _CENTRE_CHUNK]
                pairs = slot[corners[offsets[which][:, None] + np.arange(size)]]  # (centres, corners)
                at = points[at_centre[which]]
                offset = table[pairs].reshape(which.size, size * k, dim)
                offset -= at[:, None, :]
                far = np.einsum("ijk,ijk->ij", offset, offset)
                best = np.argmin(far, axis=1)  # the first nearest of each centre's candidates
                keep = np.flatnonzero(far[np.arange(which.size), best] < bound * bound)
                best = best[keep]
                nearest = found[pairs[keep, best // k], best % k]
                dist[at_centre[which[keep]]] = _plane_distance(at[keep], nearest, cent, normal, half)
    np.negative(dist, out=dist, where=~(values > level))
    return dist


def _vertex_distances(split: SimplexSplit, wanted: np.ndarray, geometry: _ContourGeometry, plane_axes,
                      level: float, bound: float, threads: int = 1, near_band: float = 0.01) -> np.ndarray:
    """Signed distances at the ``wanted`` split vertices (NaN elsewhere and beyond ``bound``; ``near_band`` as
    :func:`_signed_distance` takes it).

    Computed at mesh points only: an added face or cell centre gets the mean of
    its corners' distances, as it got the mean of their coordinates and values
    (the same linear map; it differs from the centre's own distance by
    O(h^2 / R) on an interface of curvature radius R).
    """
    n = split.n_points
    need = wanted[:n].copy()
    for ids, corners in split.centres:
        need[corners[wanted[ids]].ravel()] = True
    used = np.nonzero(need)[0]
    dist = np.full(n, np.nan)
    dist[used] = _signed_distance(split.points[used], split.point_values[used], geometry,
                                  plane_axes, level, bound, near_band=near_band, threads=threads)
    return split.centre_means(dist)
