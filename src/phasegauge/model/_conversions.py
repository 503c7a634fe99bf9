"""The work behind the mesh's point <-> cell conversions: corner sums by gathers, the linear point fit.

:meth:`phasegauge.model.mesh.Mesh.point_to_cell` adds corner values with :func:`corner_sums`
(bit-identical to the incidence product, without building it); :meth:`~phasegauge.model.mesh.Mesh.cell_to_point`
fits a limited least-squares linear function through the cells around each point
(:func:`linear_point_values` on the stencil of :func:`point_stencil`).
"""

from __future__ import annotations

from typing import TYPE_CHECKING, NamedTuple

import numpy as np


if TYPE_CHECKING:
    from .mesh import Mesh

__all__ = ["corner_sums", "point_stencil", "point_fit", "good_cells_fit", "PointFit", "PointCells",
           "linear_point_values", "weighted_point_means", "with_centre_means"]

#: cells per chunk of :func:`corner_sums` (the chunk's sums stay in cache: 1 << 15 took 1.5x the
#: time on 1M hexahedra)
_SUM_CHUNK = 1 << 13


def corner_sums(mesh: Mesh, values: np.ndarray, finite: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """``incidence @ values`` and ``incidence @ finite`` by gathers, block by block, in chunks.

    Corners are added in connectivity order from zero, the order of the CSR product
    (bit-identical results), without building the incidence matrix. When every value is finite
    the counts are each block's number of corners (the same sums of ones), not gathered.
    """
    k = values.shape[1]
    total = np.zeros((mesh.n_cells, k))
    all_finite = bool(finite.all())
    count = np.empty((mesh.n_cells, k)) if all_finite else np.zeros((mesh.n_cells, k))
    one = k == 1
    vals = values[:, 0] if one else values
    good = finite[:, 0] if one else finite
    for block, offset, end in zip(mesh.blocks, mesh.block_offsets[:-1], mesh.block_offsets[1:]):
        conn = block.connectivity
        if all_finite:
            count[int(offset):int(end)] = float(conn.shape[1])
        for start in range(0, len(block), _SUM_CHUNK):
            corners = conn[start:start + _SUM_CHUNK].T
            rows = slice(int(offset) + start, int(offset) + start + corners.shape[1])
            t = total[rows, 0] if one else total[rows]
            c = count[rows, 0] if one else count[rows]
            for col in corners:
                t += np.take(vals, col, axis=0)
                if not all_finite:
                    c += np.take(good, col, axis=0)
    return total, count


def point_stencil(mesh: Mesh, span: tuple | None = None, scale: float | None = None):
    """(point, cell) pairs of the point-cell incidence with centroid offsets and inverse-distance weights,
    grouped by point: ``(rows, cols, dx, w, indptr)``. With ``span`` ``(p0, p1)``, the pairs of those points
    only (``rows`` still the points' own numbers, ``indptr`` from 0); ``scale``: the squared median cell
    size that floors the distances (formed here if not given)."""
    at = mesh._point_cells
    p0, p1 = (0, mesh.n_points) if span is None else span
    a, b = int(at.indptr[p0]), int(at.indptr[p1])
    indptr = at.indptr if span is None else (at.indptr[p0:p1 + 1] - a).astype(np.int64)
    rows = np.repeat(np.arange(p0, p1), np.diff(indptr))
    cols = at.indices[a:b].astype(np.int64)
    dx = mesh.cell_centroids[cols] - mesh.coordinates[rows]
    dist2 = np.einsum("nd,nd->n", dx, dx)
    if scale is None:
        scale = np.median(mesh.cell_sizes) ** 2 if mesh.n_cells else 1.0
    w = 1.0 / np.maximum(dist2, 1e-12 * scale)
    return rows, cols, dx, w, indptr


class PointCells(NamedTuple):
    """The cells around each point, grouped by point: the transposed incidence's pattern (``indptr``,
    ``indices`` as scipy's CSR holds them), kept without its ones (8 bytes a (point, cell) pair)."""

    indptr: np.ndarray
    indices: np.ndarray


def weighted_point_means(mesh: Mesh, flat: np.ndarray, finite: np.ndarray, points: np.ndarray | None = None):
    """The measure-weighted mean of the finite values ``flat`` (n_cells, k) of the cells around each of
    ``points`` (increasing; all points by default), NaN at a point with no finite cell: (len(points), k).

    A chunk of about :data:`_FIT_PAIRS` pairs at a time, each a CSR matrix of the chunk's rows of the
    transposed incidence (ones made for the chunk only): every point's sums are scipy's products over its
    own row, as one product over the whole matrix gives them, bit for bit."""
    from scipy import sparse

    pc = mesh._point_cells
    w = mesh.cell_measures[:, None] * finite
    weighted = np.where(finite, flat, 0.0) * w
    points = np.arange(mesh.n_points) if points is None else np.asarray(points)
    counts = np.diff(pc.indptr)[points]
    heads = np.zeros(points.size + 1, dtype=np.int64)
    np.cumsum(counts, out=heads[1:])
    total = np.zeros((points.size, flat.shape[1]))
    weight = np.zeros_like(total)
    bounds = _chunk_bounds(heads) if points.size else np.zeros(1, dtype=np.int64)
    for j0, j1 in zip(bounds[:-1].tolist(), bounds[1:].tolist()):
        first, last = int(points[j0]), int(points[j1 - 1])
        if last - first == j1 - j0 - 1:  # a run of consecutive points: their pairs are one slice
            a = int(pc.indptr[first])
            cols = pc.indices[a:int(pc.indptr[last + 1])]
            indptr = pc.indptr[first:last + 2] - pc.indptr.dtype.type(a)
        else:
            indptr = heads[j0:j1 + 1] - heads[j0]
            starts = np.repeat(pc.indptr[points[j0:j1]].astype(np.int64) - indptr[:-1], counts[j0:j1])
            cols = pc.indices[starts + np.arange(indptr[-1])]
        rows = sparse.csr_matrix((np.ones(cols.size), cols, indptr), shape=(j1 - j0, mesh.n_cells))
        total[j0:j1] = rows @ weighted
        weight[j0:j1] = rows @ w
    with np.errstate(invalid="ignore", divide="ignore"):
        return np.where(weight > 0, total / np.where(weight > 0, weight, 1.0), np.nan)


def _chunk_bounds(heads: np.ndarray) -> np.ndarray:
    """Item numbers splitting items whose pairs start at ``heads`` (increasing; the last entry the pairs'
    end) into chunks of about :data:`_FIT_PAIRS` pairs, an item never split: from 0 to the item count."""
    k = heads.size - 1
    return np.unique(np.concatenate([[0], np.searchsorted(heads, np.arange(_FIT_PAIRS, heads[-1], _FIT_PAIRS)),
                                     [k]]))


class PointFit(NamedTuple):
    """The least-squares point fit through the (good) cells around each point, as one weight per pair.

    The fit's matrix depends on the mesh and on which cells are good only, so the fitted value of
    point p is ``sum coef[j] * value[cols[j]]`` over its pairs j: ``coef`` is the pair's
    inverse-distance weight times its basis row dotted with the first column of the point's
    inverse matrix.
    """

    cols: np.ndarray    # cell of each (point, cell) pair, grouped by point
    starts: np.ndarray  # first pair of each point that has pairs
    points: np.ndarray  # those points
    coef: np.ndarray    # weight of each pair's cell value in its point's fit (0 where not posed)
    posed: np.ndarray   # per point of ``points``: the fit is well posed


def _well_posed(A, count, d):
    """A well-posed fit needs more cells than unknowns and a matrix far from singular: its determinant
    above 1e-10 of the product of its diagonal (at most that product for a positive definite matrix,
    and the same share in any length unit: the test reads no length scale)."""
    diag = np.einsum("nii->ni", A)
    det = np.linalg.det(A)
    return (count > d + 1) & (np.abs(det) > 1e-10 * np.maximum(np.prod(diag, axis=1), 1e-300))


def _stencil(mesh: Mesh, keep: bool = True):
    """The mesh's :func:`point_stencil` (through ``mesh.memo``; ``keep=False``: not kept if new)."""
    return mesh.memo("point_stencil", lambda: point_stencil(mesh), keep=keep)


def _fit_of(rows, cols, dx, w, indptr, d: int, n: int) -> PointFit:
    """The :class:`PointFit` of the (point, cell) pairs of a stencil (grouped by point, ``indptr``)."""
    nonempty = np.flatnonzero(np.diff(indptr) > 0)
    starts = indptr[:-1][nonempty]
    offsets = np.ascontiguousarray(dx.T)  # the basis is (1, dx): its first column is not formed
    del dx
    # the normal matrices, summed over each point's run of pairs (the pairs are grouped by point)
    A = np.zeros((n, d + 1, d + 1))
    for i in range(d + 1):
        for j in range(i, d + 1):
            weight = w if j == 0 else w * offsets[j - 1] if i == 0 else w * offsets[i - 1] * offsets[j - 1]
            A[nonempty, i, j] = A[nonempty, j, i] = np.add.reduceat(weight, starts)
    posed = _well_posed(A, np.diff(indptr), d)
    first = np.zeros((d + 1, n))  # first column of the inverse of each posed matrix, by component
    if posed.any():
        e0 = np.zeros((int(posed.sum()), d + 1, 1))
        e0[:, 0, 0] = 1.0
        first[:, posed] = np.linalg.solve(A[posed], e0)[:, :, 0].T
    del A
    coef = first[0][rows]
    for i in range(d):
        coef += offsets[i] * first[i + 1][rows]
    coef *= w
    return PointFit(cols, starts, nonempty, coef, posed[nonempty])


def point_fit(mesh: Mesh, *, threads: int = 1) -> PointFit:
    """The :class:`PointFit` of ``mesh`` with every cell good (built once per mesh).

    Made a chunk of points at a time (about :data:`_FIT_PAIRS` (point, cell) pairs each), the chunks on
    up to ``threads`` threads: the stencil's offsets and weights (48 bytes a pair) and the normal matrices
    exist for the chunks at work only, the same numbers bit for bit as one pass over all points (every sum
    runs over one point's pairs) on any number of threads. The fit's cells are the transposed incidence's
    own column indices (shared, not copied)."""
    return mesh.memo("point_fit", lambda: _chunked_fit(mesh, threads))


#: (point, cell) pairs per chunk of :func:`point_fit` (0.25M tetrahedra, 1M pairs: a first fit's peak
#: +89 MB in one pass)
_FIT_PAIRS = 1 << 16


def _chunked_fit(mesh: Mesh, threads: int = 1) -> PointFit:
    """:func:`point_fit`'s work: :func:`_fit_of` over the stencil of each chunk of points."""
    from ._threads import ordered_map

    at = mesh._point_cells
    indptr, d = at.indptr, mesh.dimension
    scale = np.median(mesh.cell_sizes) ** 2 if mesh.n_cells else 1.0
    mesh.cell_centroids, mesh.coordinates  # noqa: B018  (made before the threads read them)
    coef = np.empty(at.indices.size)
    bounds = _chunk_bounds(indptr)

    def chunk(span):  # writes its own slice of coef only
        p0, p1 = span
        a, b = int(indptr[p0]), int(indptr[p1])
        rows, cols, dx, w, local = point_stencil(mesh, span, scale)
        part = _fit_of(rows - p0, cols, dx, w, local, d, p1 - p0)
        coef[a:b] = part.coef
        return part.starts + a, part.points + p0, part.posed

    parts = list(ordered_map(chunk, zip(bounds[:-1].tolist(), bounds[1:].tolist()), threads=threads))
    join = (lambda k, dtype: np.concatenate([p[k] for p in parts]) if parts else np.zeros(0, dtype=dtype))
    return PointFit(at.indices, join(0, np.int64), join(1, np.int64), coef, join(2, bool))


def good_cells_fit(mesh: Mesh, good: np.ndarray) -> PointFit:
    """The :class:`PointFit` of ``mesh`` through its ``good`` cells only (the others left out of each
    point's fit, its count and its range): built when the pattern of good cells is new, kept for
    the next step with the same pattern (a series whose NaN cells stay where they are).

    The last pattern is kept, on the mesh (``mesh.memo``), packed a bit a cell, with its fit: 16
    bytes a (point, good cell) pair, as :func:`point_fit`. The stencil it is built from (48 bytes a
    pair) is kept only once the pattern has changed (NaN cells that move from step to step).
    """
    kept = mesh.memo("point_fit_of_good_cells", dict)  # {'last': (packed pattern, PointFit)}
    packed = np.packbits(good)
    last = kept.get("last")  # one read: another thread may replace it meanwhile
    if last is not None and np.array_equal(last[0], packed):
        return last[1]
    moved = last is not None  # the pattern moved: the stencil is kept for the next move
    kept.pop("last", None)  # the earlier pattern's fit goes before the new one is built
    rows, cols, dx, w, indptr = _stencil(mesh, keep=moved)
    ok = good[cols]
    lost = np.zeros(mesh.n_points, dtype=bool)
    lost[rows[~ok]] = True  # points beside a bad cell
    rows, cols, dx, w = rows[ok], cols[ok], dx[ok], w[ok]
    counts = np.bincount(rows, minlength=mesh.n_points)
    indptr = np.zeros(mesh.n_points + 1, dtype=indptr.dtype)
    np.cumsum(counts, out=indptr[1:])
    fit = _fit_of(rows, cols, dx, w, indptr, mesh.dimension, mesh.n_points)
    posed = np.zeros(mesh.n_points, dtype=bool)
    posed[fit.points[fit.posed]] = True
    short = np.flatnonzero(lost & ~posed & (counts > 0))
    if short.size:
        fit = _fit_of(*_with_second_ring(mesh, good, short, rows, cols, dx, w), mesh.dimension, mesh.n_points)
    kept["last"] = (packed, fit)
    return fit


def _with_second_ring(mesh: Mesh, good: np.ndarray, short: np.ndarray, rows, cols, dx, w) -> tuple:
    """The good cells' stencil with, for the points ``short`` (beside a bad cell, too few good cells left for
    a fit: the corner of a blank quad keeps 3), the good cells one ring further (those sharing a point
    with a good cell of theirs): a linear field is still reproduced there, where the cells' mean is off
    by up to a third of a cell's change. Returns ``(rows, cols, dx, w, indptr)`` grouped by point."""
    from scipy import sparse

    pc = mesh._point_cells
    around = sparse.csr_matrix((np.ones(pc.indices.size), pc.indices, pc.indptr), shape=(mesh.n_points, mesh.n_cells))
    own = around[short].multiply(good[None, :].astype(np.float64)).tocsr()  # their good cells
    reach = ((own @ around.T) @ around).tocoo()  # cells of the points of those cells
    take = good[reach.col]
    extra_rows, extra_cols = short[reach.row[take]], reach.col[take].astype(cols.dtype)
    extra_dx = mesh.cell_centroids[extra_cols] - mesh.coordinates[extra_rows]
    scale = np.median(mesh.cell_sizes) ** 2 if mesh.n_cells else 1.0  # as point_stencil floors them
    extra_w = 1.0 / np.maximum(np.einsum("nd,nd->n", extra_dx, extra_dx), 1e-12 * scale)
    keep = ~np.isin(rows, short)  # their first ring is within the second
    rows = np.concatenate([rows[keep], extra_rows])
    order = np.argsort(rows, kind="stable")
    rows = rows[order]
    cols = np.concatenate([cols[keep], extra_cols])[order]
    dx = np.concatenate([dx[keep], extra_dx])[order]
    w = np.concatenate([w[keep], extra_w])[order]
    indptr = np.zeros(mesh.n_points + 1, dtype=np.int64)
    np.cumsum(np.bincount(rows, minlength=mesh.n_points), out=indptr[1:])
    return rows, cols, dx, w, indptr


def linear_point_values(mesh: Mesh, flat: np.ndarray, good: np.ndarray, fallback, *,
                        limited: bool = True, threads: int = 1) -> np.ndarray:
    """Point values of the least-squares linear fit through the good cells around each point, kept in
    their range (unless not ``limited``); ``fallback(points)`` (the rows of those points, increasing) where
    the fit is ill-posed: asked for those points only. A new mesh's fit of every cell is made on up to
    ``threads`` threads (:func:`point_fit`)."""
    fit = point_fit(mesh, threads=threads) if good.all() else good_cells_fit(mesh, good)
    return _fitted_values(fit, flat, fallback, mesh.n_points, limited)


def _fitted_values(fit: PointFit, flat: np.ndarray, fallback, n_points: int, limited: bool = True) -> np.ndarray:
    """:func:`linear_point_values` by a :class:`PointFit` (every cell's, or the good cells').

    A chunk of points at a time (about :data:`_FIT_PAIRS` pairs each): the gathered cell values and
    their products (16 bytes a pair and column) exist for one chunk only; every sum runs over one
    point's pairs, so the values are those of one pass bit for bit."""
    posed = np.zeros(n_points, dtype=bool)
    posed[fit.points[fit.posed]] = True
    rest = np.flatnonzero(~posed)
    out = np.empty((n_points, flat.shape[1]))
    out[rest] = fallback(rest)
    if rest.size == n_points:
        return out
    heads = np.append(fit.starts, fit.cols.size)  # each point's first pair, and the end
    bounds = _chunk_bounds(heads)
    for j0, j1 in zip(bounds[:-1].tolist(), bounds[1:].tolist()):
        a, b = int(heads[j0]), int(heads[j1])
        keep = fit.posed[j0:j1]
        if not keep.any():
            continue
        at = fit.starts[j0:j1] - a
        vals = np.take(flat, fit.cols[a:b], axis=0)  # (pairs, k)
        value = np.add.reduceat(fit.coef[a:b, None] * vals, at, axis=0)
        if limited:
            value = np.clip(value, np.minimum.reduceat(vals, at, axis=0), np.maximum.reduceat(vals, at, axis=0))
        out[fit.points[j0:j1][keep]] = value[keep]
    return out


def with_centre_means(mesh: Mesh, point_values: np.ndarray) -> np.ndarray:
    """``point_values`` (n_points, ...) with the centres a reader added to split cells
    (``mesh.memo(SPLIT_CENTRES)``) set to the mean of their corners' values, in place; unchanged on
    other meshes.

    A point fit from the cells around an added centre sees the pieces of one cell only, so it
    returns that cell's value (0 or 1 for a volume fraction); the mean of the corners is the
    value the reader gives the centres of point data (one rule for both). No corner is a centre,
    so face and cell centres are set in one pass, wherever they sit among the points.
    """
    from .polyhedra import SPLIT_CENTRES

    centres = mesh.memo(SPLIT_CENTRES, lambda: None, keep=False)
    if centres is not None:
        point_values[centres.points] = centres.centre_values(point_values)
    return point_values
