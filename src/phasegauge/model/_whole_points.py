"""Cell values to points on a split mesh: the pieces of one whole cell as one sample.

A reader that splits cells (polyhedra into tetrahedra about face and cell centres, :attr:`Mesh.cell_parents`)
gives each piece its whole cell's value, the file's. Were each piece its own sample of the point fit, at its
own centroid, a boundary point whose pieces belong to few whole cells would fit a gradient the whole cells do
not have (a field of slope 1.5 on hexagonal prisms of 1/20: 8.2e-2 off). So the point fit and the
measure-weighted mean of :meth:`Mesh.cell_to_point` (and :func:`.level_set.level_set_points`) run on the whole
cells: :class:`WholePoints` is the view they read, each whole cell one sample at its centroid
(:func:`._centroids.whole_cell_centroids`) weighted by its measure, the cells around a point the whole cells
of the pieces around it; :func:`whole_values` gives each whole cell its pieces' measure-weighted mean (the
file's value, to round-off, where every piece carries it; the value at the whole cell's centroid for values
linear over its pieces). A point's fit is then posed, or not, as on a mesh of the whole cells themselves.
"""

from __future__ import annotations

from functools import cached_property

import numpy as np

from ._centroids import whole_cell_centroids
from ._conversions import PointCells
from .corners import incidence_matrix
from .mesh import Mesh

__all__ = ["WholePoints", "whole_points", "whole_values"]


def whole_points(mesh: Mesh) -> "WholePoints":
    """The :class:`WholePoints` view of a split mesh (``mesh.cell_parents`` not None), kept with the mesh
    (its point fit, through the view's own ``memo``, with it)."""
    return mesh.memo("whole_points", lambda: WholePoints(mesh))


def whole_values(view: "WholePoints", flat: np.ndarray) -> np.ndarray:
    """Each whole cell's measure-weighted mean of its pieces' values ``flat`` (n_pieces, k): (n_whole, k),
    NaN where a piece is not finite and for a number with no pieces; a whole cell of zero measure takes its
    pieces' plain mean, a cell that is its own one piece that piece's value."""
    parents, n = view.parents, view.n_cells
    out = np.empty((n, flat.shape[1]))
    has = view.piece_counts > 0
    zero = has & ~(view.cell_measures > 0)
    with np.errstate(invalid="ignore", divide="ignore"):
        for j in range(flat.shape[1]):
            column = flat[:, j]
            out[:, j] = np.bincount(parents, weights=column * view.piece_measures, minlength=n) / view.cell_measures
            if zero.any():
                out[zero, j] = (np.bincount(parents, weights=column, minlength=n)[zero]
                                / view.piece_counts[zero])
    out[~has] = np.nan
    out[view.single_cells] = flat[view.single_pieces]  # a cell that is its own one piece: its value itself
    return out


class WholePoints:
    """The whole cells of a split mesh as the point conversions read a mesh.

    Attributes
    ----------
    n_cells : int
        Whole-cell numbers, ``cell_parents.max() + 1`` (a number with no pieces: measure 0, no point).
    n_points, dimension, coordinates
        The mesh's (its corners, with the centres a reader added).
    cell_centroids, cell_measures, cell_sizes : ndarray
        Each whole cell's centroid, measure (its pieces' sum) and size.
    parents, piece_measures, piece_counts : ndarray
        The whole cell of each piece (:attr:`Mesh.cell_parents`), each piece's measure, each whole
        cell's number of pieces.
    single_cells, single_pieces : ndarray
        The whole cells that are their own one piece (a cell kept whole beside split ones), and that piece.
    inner_points, inner_cells : ndarray
        The points every piece of one whole cell holds, and no other cell (a split cell's own centre), and
        that cell.
    """

    cell_parents = None

    def __init__(self, mesh: Mesh):
        parents = mesh.cell_parents
        if parents is None:
            raise ValueError("WholePoints needs a mesh of split cells (mesh.cell_parents)")
        n = int(parents.max()) + 1 if parents.size else 0
        self.n_cells, self.n_points, self.dimension = n, int(mesh.n_points), int(mesh.dimension)
        self.coordinates = mesh.coordinates
        self.parents = parents
        self.piece_measures = mesh.cell_measures
        self.piece_counts = np.bincount(parents, minlength=n)
        self.cell_measures = np.bincount(parents, weights=self.piece_measures, minlength=n)
        piece = np.empty(n, dtype=np.int64)
        piece[parents] = np.arange(parents.size)
        self.single_cells = np.flatnonzero(self.piece_counts == 1)
        self.single_pieces = piece[self.single_cells]
        self.cell_centroids = whole_cell_centroids(mesh)
        self.cell_sizes = mesh._whole_cell_sizes
        self._point_cells, self.inner_points, self.inner_cells = _whole_point_cells(mesh, parents, n,
                                                                                    self.piece_counts)

    def __repr__(self) -> str:
        return f"WholePoints({self.dimension}D, {self.n_cells} whole cells, {self.n_points} points)"

    #: as :meth:`Mesh.memo`, on this view (its point fit kept as long as the view, so as the mesh)
    memo = Mesh.memo

    @cached_property
    def incidence(self):
        """Sparse (n_cells, n_points) matrix, 1 where a point is a corner of a piece of the whole cell."""
        from scipy import sparse

        pc = self._point_cells
        at = sparse.csr_matrix((np.ones(pc.indices.size), pc.indices, pc.indptr), shape=(self.n_points, self.n_cells))
        return at.T.tocsr()


def _whole_point_cells(mesh: Mesh, parents: np.ndarray, n: int, piece_counts: np.ndarray) -> tuple:
    """The whole cells around each point (:class:`.PointCells`, each point's increasing), and the points
    every piece of one whole cell holds, with that cell (a split cell's own centre: ``(points, cells)``)."""
    from scipy import sparse

    pieces = incidence_matrix(mesh)  # (pieces, points), made for this and let go
    owner = sparse.csr_matrix((np.ones(parents.size), (parents, np.arange(parents.size))), shape=(n, parents.size))
    at = (owner @ pieces).T.tocsr()  # (points, whole cells): how many of each whole cell's pieces hold the point
    del pieces, owner
    at.sort_indices()
    counts = np.diff(at.indptr)
    one = np.flatnonzero(counts == 1)
    cells = at.indices[at.indptr[one]]
    inner = at.data[at.indptr[one]] == piece_counts[cells]
    return PointCells(at.indptr, at.indices), one[inner], cells[inner].astype(np.int64)
