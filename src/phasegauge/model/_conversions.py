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

__all__ = ["corner_sums", "point_stencil", "point_fit", "PointFit", "linear_point_values"]

#: cells per chunk of :func:`corner_sums` (the chunk's sums stay in cache: 1 << 15 took 1.5x the
#: time on 1M hexahedra)
_SUM_CHUNK = 1 << 13


def corner_sums(mesh: Mesh, values: np.ndarray, finite: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """``incidence @ values`` and ``incidence @ finite`` by gathers, block by block, in chunks.

    Corners are added in connectivity order from zero, the order of the CSR product
    (bit-identical results), without building the incidence matrix.
    """
    k = values.shape[1]
    total = np.zeros((mesh.n_cells, k))
    count = np.zeros((mesh.n_cells, k))
    one = k == 1
    vals = values[:, 0] if one else values
    good = finite[:, 0] if one else finite
    for block, offset in zip(mesh.blocks, mesh.block_offsets[:-1]):
        conn = block.connectivity
        for start in range(0, len(block), _SUM_CHUNK):
            corners = conn[start:start + _SUM_CHUNK].T
            rows = slice(int(offset) + start, int(offset) + start + corners.shape[1])
            t = total[rows, 0] if one else total[rows]
            c = count[rows, 0] if one else count[rows]
            for col in corners:
                t += np.take(vals, col, axis=0)
                c += np.take(good, col, axis=0)
    return total, count


def point_stencil(mesh: Mesh):
    """(point, cell) pairs of the point-cell incidence with centroid offsets, grouped by point."""
    at = mesh._incidence_t
    rows = np.repeat(np.arange(mesh.n_points), np.diff(at.indptr))
    cols = at.indices.astype(np.int64)
    dx = mesh.cell_centroids[cols] - mesh.coordinates[rows]
    dist2 = np.einsum("nd,nd->n", dx, dx)
    scale = np.median(mesh.cell_sizes) ** 2 if mesh.n_cells else 1.0
    w = 1.0 / np.maximum(dist2, 1e-12 * scale)
    return rows, cols, dx, w, at.indptr


class PointFit(NamedTuple):
    """The least-squares point fit through every cell around each point, as one weight per pair.

    With every cell good the fit's matrix depends on the mesh only, so the fitted value of point
    p is ``sum coef[j] * value[cols[j]]`` over its pairs j: ``coef`` is the pair's inverse-distance
    weight times its basis row dotted with the first column of the point's inverse matrix.
    """

    cols: np.ndarray    # cell of each (point, cell) pair, grouped by point
    starts: np.ndarray  # first pair of each point that has pairs
    points: np.ndarray  # those points
    coef: np.ndarray    # weight of each pair's cell value in its point's fit (0 where not posed)
    posed: np.ndarray   # per point of ``points``: the fit is well posed


def _normal_matrix(rows, basis, wk, n, d):
    A = np.empty((n, d + 1, d + 1))
    for i in range(d + 1):
        for j in range(i, d + 1):
            A[:, i, j] = A[:, j, i] = np.bincount(rows, weights=wk * basis[:, i] * basis[:, j], minlength=n)
    return A


def _well_posed(A, count, d):
    """A well-posed fit needs more cells than unknowns and a matrix far from singular."""
    diag = np.einsum("nii->n", A)
    det = np.linalg.det(A)
    return (count > d + 1) & (np.abs(det) > 1e-10 * np.maximum(diag, 1e-300) ** (d + 1))


def _stencil(mesh: Mesh, keep: bool = True):
    """The mesh's :func:`point_stencil` (through ``mesh.memo``; ``keep=False``: not kept if new)."""
    return mesh.memo("point_stencil", lambda: point_stencil(mesh), keep=keep)


def point_fit(mesh: Mesh) -> PointFit:
    """The :class:`PointFit` of ``mesh`` with every cell good (built once per mesh; the stencil
    it is made from is not kept)."""

    def compute():
        rows, cols, dx, w, indptr = _stencil(mesh, keep=False)
        d, n = mesh.dimension, mesh.n_points
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

    return mesh.memo("point_fit", compute)


def linear_point_values(mesh: Mesh, flat: np.ndarray, good: np.ndarray, fallback: np.ndarray) -> np.ndarray:
    """Point values of the least-squares linear fit through the good cells around each point, kept in
    their range; ``fallback`` where the fit is ill-posed."""
    if good.all():
        return _fit_all_good(point_fit(mesh), flat, fallback)
    return _fit_some_good(mesh, flat, good, fallback)


def _fit_some_good(mesh: Mesh, flat: np.ndarray, good: np.ndarray, fallback: np.ndarray) -> np.ndarray:
    """:func:`linear_point_values` with the bad cells left out of each point's fit."""
    rows, cols, dx, w, indptr = _stencil(mesh)
    d = mesh.dimension
    ok = good[cols]
    wk = np.where(ok, w, 0.0)
    basis = np.concatenate([np.ones((len(rows), 1)), dx], axis=1)  # (m, d+1)
    n = mesh.n_points
    A = _normal_matrix(rows, basis, wk, n, d)
    k = flat.shape[1]
    vals = np.where(ok[:, None], flat[cols], 0.0)
    B = np.empty((n, d + 1, k))
    for i in range(d + 1):
        for c in range(k):
            B[:, i, c] = np.bincount(rows, weights=wk * basis[:, i] * vals[:, c], minlength=n)
    count = np.bincount(rows, weights=ok.astype(np.float64), minlength=n)
    posed = _well_posed(A, count, d)
    out = fallback.copy()
    if posed.any():
        sol = np.linalg.solve(A[posed], B[posed])[:, 0, :]
        # keep within the range of the cells around the point (no new extremes)
        hi = np.where(ok[:, None], flat[cols], -np.inf)
        lo = np.where(ok[:, None], flat[cols], np.inf)
        starts = indptr[:-1]
        nonempty = np.diff(indptr) > 0
        vmax = np.full((n, k), -np.inf)
        vmin = np.full((n, k), np.inf)
        vmax[nonempty] = np.maximum.reduceat(hi, starts[nonempty], axis=0)
        vmin[nonempty] = np.minimum.reduceat(lo, starts[nonempty], axis=0)
        out[posed] = np.clip(sol, vmin[posed], vmax[posed])
    return out


def _fit_all_good(fit: PointFit, flat: np.ndarray, fallback: np.ndarray) -> np.ndarray:
    """:func:`linear_point_values` with every cell good, on the mesh's :class:`PointFit`."""
    out = fallback.copy()
    if not fit.posed.any():
        return out
    vals = np.take(flat, fit.cols, axis=0)  # (m, k)
    value = np.add.reduceat(fit.coef[:, None] * vals, fit.starts, axis=0)
    vmax = np.maximum.reduceat(vals, fit.starts, axis=0)
    vmin = np.minimum.reduceat(vals, fit.starts, axis=0)
    keep = fit.posed
    out[fit.points[keep]] = np.clip(value[keep], vmin[keep], vmax[keep])
    return out
