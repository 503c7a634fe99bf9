"""The work behind the mesh's point <-> cell conversions: corner sums by gathers, the linear point fit.

:meth:`phasegauge.model.mesh.Mesh.point_to_cell` adds corner values with :func:`corner_sums`
(bit-identical to the incidence product, without building it); :meth:`~phasegauge.model.mesh.Mesh.cell_to_point`
fits a limited least-squares linear function through the cells around each point
(:func:`linear_point_values` on the stencil of :func:`point_stencil`).
"""

from __future__ import annotations

from typing import TYPE_CHECKING

import numpy as np

from ._grouping import CHUNK

if TYPE_CHECKING:
    from .mesh import Mesh

__all__ = ["corner_sums", "point_stencil", "linear_point_values"]


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
        for start in range(0, len(block), CHUNK):
            corners = conn[start:start + CHUNK].T
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


def linear_point_values(mesh: Mesh, flat: np.ndarray, good: np.ndarray, fallback: np.ndarray) -> np.ndarray:
    """Point values of the least-squares linear fit through the good cells around each point, kept in
    their range; ``fallback`` where the fit is ill-posed."""
    rows, cols, dx, w, indptr = mesh._point_stencil
    d = mesh.dimension
    ok = good[cols]
    wk = np.where(ok, w, 0.0)
    basis = np.concatenate([np.ones((len(rows), 1)), dx], axis=1)  # (m, d+1)
    n = mesh.n_points
    A = np.empty((n, d + 1, d + 1))
    for i in range(d + 1):
        for j in range(i, d + 1):
            A[:, i, j] = A[:, j, i] = np.bincount(rows, weights=wk * basis[:, i] * basis[:, j], minlength=n)
    k = flat.shape[1]
    vals = np.where(ok[:, None], flat[cols], 0.0)
    B = np.empty((n, d + 1, k))
    for i in range(d + 1):
        for c in range(k):
            B[:, i, c] = np.bincount(rows, weights=wk * basis[:, i] * vals[:, c], minlength=n)
    count = np.bincount(rows, weights=ok.astype(np.float64), minlength=n)
    # a well-posed fit needs more cells than unknowns and a matrix far from singular
    diag = np.einsum("nii->n", A)
    det = np.linalg.det(A)
    posed = (count > d + 1) & (np.abs(det) > 1e-10 * np.maximum(diag, 1e-300) ** (d + 1))
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
