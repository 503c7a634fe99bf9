"""What is read from the corners of cells, simplices or faces: sums, means, extremes, gradients.

Every corner sum of the package adds the corners in corner order, ``(a0 + a1) + a2 ...``,
so a quantity formed in two places (a face centre seen from both of its cells, a cell
value and its simplices') is the same number bit for bit. The arrays are added one by one
into a new array: no ``(n, k, ...)`` temporary of all corners at once (the corner passes work
in chunks of rows whose gathered corners stay in cache).
"""

from __future__ import annotations

from typing import TYPE_CHECKING, NamedTuple

import numpy as np

from ._grouping import index_dtype

if TYPE_CHECKING:  # the mesh imports this module (its geometry sums corners)
    from .mesh import Mesh

__all__ = ["corner_sum", "corner_mean", "CornerExtremes", "corner_extremes", "cell_extent", "cell_gradient",
           "incidence_matrix", "incidence_rows"]

#: rows per chunk of the corner passes (the temporaries stay in cache: 1 << 15 took 1.4-1.8x the
#: time of corner_extremes on 1M hexahedra)
_CHUNK = 1 << 13
#: rows per chunk of :func:`corner_mean` (its gathered corners, k values a row, stay in cache)
_MEAN_CHUNK = 1 << 16


def corner_sum(arrays) -> np.ndarray:
    """Sum of two or more corner arrays, added in order into a new array.

    Parameters
    ----------
    arrays : iterable of ndarray
        One array per corner, all of one shape (a generator is fine: each
        array is used once, then dropped).

    Returns
    -------
    ndarray
        ``(a0 + a1) + a2 + ...``.
    """
    items = iter(arrays)
    total = next(items) + next(items)
    for item in items:
        total += item
    return total


def corner_mean(values: np.ndarray, corners: np.ndarray) -> np.ndarray:
    """Mean of ``values`` over the corners of each row of ``corners``, summed in corner order.

    Parameters
    ----------
    values : ndarray of shape (n_points,) or (n_points, q)
    corners : ndarray of shape (n, k), int, k >= 2
        Point ids of each row's corners.

    Returns
    -------
    ndarray of shape (n,) or (n, q)
        The value of the bilinear / trilinear interpolant at a quad's or
        hexahedron's centre; the centroid value of a linear field.
    """
    n, k = corners.shape
    out = np.empty((n,) + values.shape[1:], dtype=(values[:0] / k).dtype)  # the dtype of a sum / k
    # per chunk of rows: one gather of the chunk's corners, then the columns added in order (a
    # strided column gather over the whole table is about 2x slower; the sums are the same)
    for lo in range(0, n, _MEAN_CHUNK):
        gathered = np.take(values, corners[lo:lo + _MEAN_CHUNK], axis=0)
        out[lo:lo + _MEAN_CHUNK] = corner_sum(gathered[:, j] for j in range(k))
    out /= k
    return out


# --------------------------------------------------------------------------- corner extremes

class CornerExtremes(NamedTuple):
    """Per cell, the lowest and highest value at its corners (NaN where a corner is NaN)."""

    low: np.ndarray
    high: np.ndarray


def corner_extremes(mesh: Mesh, values: np.ndarray, cells: np.ndarray | None = None) -> CornerExtremes:
    """Lowest and highest corner value of each cell.

    Parameters
    ----------
    mesh : Mesh
    values : ndarray of shape (n_points,) or (n_points, q)
    cells : ndarray of int, optional
        Cells wanted, in increasing order; default all.

    Returns
    -------
    CornerExtremes
        ``low`` and ``high``, each of shape (n,) or (n, q) for the n cells
        wanted; NaN where a corner value is NaN.
    """
    n = mesh.n_cells if cells is None else cells.size
    low = np.empty((n,) + values.shape[1:])
    high = np.empty_like(low)
    offsets = mesh.block_offsets
    bounds = [0] * len(offsets) if cells is None else np.searchsorted(cells, offsets)
    for b, (block, start) in enumerate(zip(mesh.blocks, offsets[:-1])):
        if cells is None:
            conn, first = block.connectivity, int(start)
        else:
            conn, first = np.take(block.connectivity, cells[bounds[b]:bounds[b + 1]] - start, axis=0), int(bounds[b])
        for lo in range(0, conn.shape[0], _CHUNK):
            # rows in chunks, then corner by corner: faster than a reduction over the short axis
            part = conn[lo:lo + _CHUNK]
            rows = slice(first + lo, first + lo + part.shape[0])
            least, most = low[rows], high[rows]
            first_corner, second = values[part[:, 0]], values[part[:, 1]]  # each gathered once
            np.minimum(first_corner, second, out=least)
            np.maximum(first_corner, second, out=most)
            del first_corner, second
            for j in range(2, part.shape[1]):
                corner = values[part[:, j]]
                np.minimum(least, corner, out=least)
                np.maximum(most, corner, out=most)
    return CornerExtremes(low, high)


def cell_extent(mesh: Mesh, axis: int, keep: bool = True) -> CornerExtremes:
    """Lowest and highest corner coordinate of every cell along analysis axis ``axis``.

    Mesh-only: with ``keep``, computed once per mesh and axis, then reused (do not modify
    the arrays); without it, reused if kept before, else computed and not kept (for work
    that is itself cached, such as the section planes: 16 bytes a cell saved).
    """
    return mesh.memo(("cell_extent", int(axis)),
                     lambda: corner_extremes(mesh, np.ascontiguousarray(mesh.coordinates[:, axis])), keep=keep)


# --------------------------------------------------------------------------- cell gradients

def cell_gradient(mesh: Mesh, c_point, *, cells=None) -> np.ndarray:
    """Gradient of c in each cell by least squares over the cell's corners.

    Parameters
    ----------
    mesh : Mesh
    c_point : ndarray of shape (n_points,)
        Point values of c.
    cells : ndarray of int, optional
        Cells wanted (may repeat); default all.

    Returns
    -------
    ndarray of shape (n, dimension), in 1 / length units
        NaN for a cell with a NaN corner.

    Notes
    -----
    Solves sum_i (c_i - cbar - g . (x_i - xbar))^2 -> min over the corners: exact
    for the linear field of a triangle or tetrahedron, the centre gradient of
    the bilinear / trilinear field of a parallelogram or parallelepiped cell.

    References
    ----------
    .. [1] Barth, T. J. and Jespersen, D. C. (1989), "The design and
       application of upwind schemes on unstructured meshes", AIAA 89-0366
       (least-squares gradient reconstruction).
    """
    c = np.asarray(c_point, dtype=np.float64)
    X = mesh.coordinates
    dim = mesh.dimension
    wanted = np.arange(mesh.n_cells) if cells is None else np.asarray(cells, dtype=np.int64)
    unique, inverse = np.unique(wanted, return_inverse=True)
    out = np.full((unique.size, dim), np.nan)
    offsets = mesh.block_offsets
    for b, block in enumerate(mesh.blocks):
        lo, hi = offsets[b], offsets[b + 1]
        i0, i1 = np.searchsorted(unique, [lo, hi])
        if i1 == i0:
            continue
        conn = block.connectivity[unique[i0:i1] - lo]
        P = X[conn]
        v = c[conn]
        P = P - P.mean(axis=1, keepdims=True)
        v = v - v.mean(axis=1, keepdims=True)
        A = np.einsum("nki,nkj->nij", P, P)
        rhs = np.einsum("nki,nk->ni", P, v)
        scale = np.trace(A, axis1=1, axis2=2)[:, None, None]
        A = A + 1e-12 * scale * np.eye(dim)
        ok = scale[:, 0, 0] > 0
        g = np.full((conn.shape[0], dim), np.nan)
        g[ok] = np.linalg.solve(A[ok], rhs[ok][..., None])[..., 0]
        out[i0:i1] = g
    return out[inverse.ravel()]


def incidence_matrix(mesh: Mesh):
    """Sparse (n_cells, n_points) matrix, 1 where a point is a corner of a cell (a corner repeated
    in a polygon or in a cell of zero measure once), made anew on every call: :attr:`Mesh.incidence`
    keeps it, the corner sums' transposed copy (:meth:`Mesh.cell_to_point`) is made from one not kept."""
    from scipy import sparse

    nnz = sum(b.connectivity.size for b in mesh.blocks)
    dtype = index_dtype(max(nnz, mesh.n_points) + 1)
    indptr = np.empty(mesh.n_cells + 1, dtype=dtype)
    indices = np.empty(nnz, dtype=dtype)
    indptr[0] = last = 0
    for block, start in zip(mesh.blocks, mesh.block_offsets[:-1]):
        n, k = block.connectivity.shape
        indptr[start + 1:start + n + 1] = np.arange(last + k, last + k * n + 1, k, dtype=dtype)
        indices[last:last + n * k] = block.connectivity.ravel()
        last += n * k
    m = sparse.csr_matrix((np.ones(nnz), indices, indptr), shape=(mesh.n_cells, mesh.n_points))
    if any(b.cell_type == "polygon" for b in mesh.blocks) or mesh._flat_cells:
        m.sum_duplicates()
        m.data[:] = 1.0  # a corner repeated in a degenerate cell counts once
    return m


def incidence_rows(mesh: Mesh, cells: np.ndarray):
    """The rows ``cells`` of :attr:`Mesh.incidence` (sparse, (len(cells), n_points), 1 at each
    cell's corners, a corner repeated in a degenerate cell once), made from the connectivity of
    those cells only: the mesh-wide matrix (13 MB at 0.25M tetrahedra) is not made or kept for
    a few rows. A view of whole cells (:class:`._whole_cells.WholeCells`, whose rows join their
    pieces' corners) gives the rows of its own matrix."""
    from scipy import sparse

    cells = np.asarray(cells, dtype=np.int64).ravel()
    if not hasattr(mesh, "blocks"):  # a view of whole cells
        rows = mesh.incidence[cells]
        rows.sum_duplicates()
        return rows
    block = np.searchsorted(mesh.block_offsets, cells, side="right") - 1
    width = np.array([b.connectivity.shape[1] for b in mesh.blocks], dtype=np.int64)[block]
    indptr = np.zeros(cells.size + 1, dtype=np.int64)
    np.cumsum(width, out=indptr[1:])
    indices = np.empty(int(indptr[-1]), dtype=np.int64)
    for b, item in enumerate(mesh.blocks):
        rows = np.flatnonzero(block == b)
        if not rows.size:
            continue
        corners = item.connectivity[cells[rows] - mesh.block_offsets[b]]
        k = corners.shape[1]
        indices[(indptr[rows][:, None] + np.arange(k)).ravel()] = corners.ravel()
    m = sparse.csr_matrix((np.ones(indices.size), indices, indptr), shape=(cells.size, mesh.n_points))
    m.sum_duplicates()
    m.data[:] = 1.0
    return m
