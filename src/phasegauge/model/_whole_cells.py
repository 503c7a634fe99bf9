"""The whole cells of a split mesh: measures, centroids, face neighbours and corner boxes per whole cell.

A reader that splits cells into pieces (polyhedra into about 12 tetrahedra each about their cell
centres, :attr:`Mesh.cell_parents`: the whole cell of each piece) hands the analyses a
mesh of pieces. Where a metric is defined per cell of the solver (a droplet is a set of the
solver's cells, as a hexahedral mesh's droplet is a set of hexahedra), it runs on the whole cells.
:class:`WholeCells` is that view, built once per mesh (:func:`whole_cells`, through ``mesh.memo``):

* ``cell_measures``: each whole cell's measure, the sum of its pieces';
* ``cell_centroids``: its centroid, its pieces' centroids weighted by their measures
  (:func:`._centroids.whole_cell_centroids`, the same array);
* ``face_neighbours``: the whole cells whose pieces share a face, read from the pieces' face
  topology (the reader's split neighbours when it gave them, else the mesh's face pairs);
* :meth:`WholeCells.corner_boxes`: the extremes of whole cells' corners (of their pieces' corners:
  the face and cell centres of a split are means of the cell's corners, so inside their box), made for
  the cells asked (a droplet's core cells), from an index of each whole cell's pieces;
* :meth:`WholeCells.mean_of`: a per-piece value as the whole cell's mean, ``sum(V_piece * v_piece)
  / V_whole``: the cell integral ``v dV`` is unchanged.

Whole cells are numbered as :attr:`Mesh.cell_parents` numbers them, ``0 .. cell_parents.max()``:
a number with no pieces (a block split in part keeps its rows' numbers) has measure 0, no
neighbour, centroid 0 (as ``whole_cell_centroids`` gives it) and NaN mean. The view holds arrays
only (no reference back to the mesh), and exposes the few mesh attributes the droplet labelling
reads (``n_cells`` counts whole cells, ``cell_parents`` is None: the view keeps its centroids).
"""

from __future__ import annotations

import numpy as np

from ._centroids import add_whole_sums, whole_cell_centroids
from ._faces import kept_neighbours
from ._grouping import index_dtype, ranges, unique_ints
from .corners import corner_extremes
from .mesh import Mesh

__all__ = ["WholeCells", "whole_cells", "whole_cell_count"]

#: pieces read at a time (the chunk's temporaries stay small)
_CHUNK = 1 << 16


def whole_cell_count(mesh) -> int:
    """Whole-cell numbers of a split mesh, ``cell_parents.max() + 1`` (numbers with no pieces included)."""
    parents = mesh.cell_parents
    return int(parents.max()) + 1 if parents.size else 0


def whole_cells(mesh) -> "WholeCells":
    """The :class:`WholeCells` view of a split mesh (``mesh.cell_parents`` not None), kept with the mesh."""
    return mesh.memo("whole_cells", lambda: WholeCells(mesh))


def _whole_sums(parents: np.ndarray, values: np.ndarray, n: int, weights: np.ndarray) -> np.ndarray:
    """Sums of ``weights * values`` (pieces, or (pieces, q)) per whole cell, shape (n,) or (n, q), a
    chunk at a time (no product over every piece at once).

    The pieces of a polyhedron come one after another (a short range of whole numbers a chunk);
    a chunk whose numbers spread over the mesh is summed over the numbers present.
    """
    flat = values.ndim == 1
    cols = values[:, None] if flat else values
    out = np.zeros((n, cols.shape[1]))
    for lo in range(0, parents.size, _CHUNK):
        add_whole_sums(out, parents[lo:lo + _CHUNK], (cols[lo:lo + _CHUNK, d] * weights[lo:lo + _CHUNK]
                                                      for d in range(cols.shape[1])))
    return out[:, 0] if flat else out


def _ordered_sums(starts: np.ndarray, values: np.ndarray, n: int, weights: np.ndarray) -> np.ndarray:
    """As :func:`_whole_sums` for pieces that come whole cell after whole cell (whole cell w's pieces
    ``starts[w]:starts[w + 1]``): one ``numpy.add.reduceat`` per chunk of whole cells."""
    flat = values.ndim == 1
    cols = values[:, None] if flat else values
    out = np.zeros((n, cols.shape[1]))
    step = max(1, int(_CHUNK * n / max(int(starts[-1]), 1)))  # about _CHUNK pieces a chunk
    for w0 in range(0, n, step):
        w1 = min(w0 + step, n)
        lo, hi = int(starts[w0]), int(starts[w1])
        if hi == lo:
            continue
        local = starts[w0:w1] - lo
        has = local < hi - lo  # reduceat reads past the end for a trailing cell with no pieces
        has[:-1] &= local[1:] > local[:-1]  # and one element for a cell with none
        has[-1] &= hi > int(starts[w1 - 1])
        part = cols[lo:hi] * weights[lo:hi, None]
        out[w0:w1][has] = np.add.reduceat(part, local[has], axis=0)
    return out[:, 0] if flat else out


def _whole_pairs(mesh, parents: np.ndarray, n: int) -> np.ndarray:
    """Pairs (a, b), a < b, of whole cells whose pieces share a face, sorted; int64 (k, 2)."""
    table = kept_neighbours(mesh)
    keys = []
    if table is not None:  # the reader's split (or a table built before): row by row, column by column
        for lo in range(0, table.shape[0], _CHUNK):
            rows = parents[lo:lo + _CHUNK]
            for j in range(table.shape[1]):
                nb = table[lo:lo + _CHUNK, j]
                other = np.take(parents, nb)  # -1 (no neighbour) reads the last piece's: dropped below
                # each face is in both of its pieces' rows: kept from the lower whole cell's
                keep = (rows < other) & (nb >= 0)
                key = rows[keep].astype(np.int64)
                key *= n
                key += other[keep]
                keys.append(key)
    else:
        pairs = mesh.face_pairs
        for lo in range(0, pairs.shape[0], _CHUNK):
            a = parents[pairs[lo:lo + _CHUNK, 0]].astype(np.int64)
            b = parents[pairs[lo:lo + _CHUNK, 1]].astype(np.int64)
            low, high = np.minimum(a, b), np.maximum(a, b)
            keep = low != high
            keys.append(low[keep] * n + high[keep])
    key = unique_ints(np.concatenate(keys)) if keys else np.zeros(0, dtype=np.int64)
    return np.stack([key // n, key % n], axis=1)


def _neighbour_table(pairs: np.ndarray, n: int) -> np.ndarray:
    """Neighbours of every whole cell, shape (n, m), -1 padded, each row increasing."""
    dtype = index_dtype(n + 1)
    rows = np.concatenate([pairs[:, 0], pairs[:, 1]])
    cols = np.concatenate([pairs[:, 1], pairs[:, 0]])
    order = np.lexsort((cols, rows))
    rows, cols = rows[order], cols[order]
    degree = np.bincount(rows, minlength=n)
    width = max(int(degree.max(initial=0)), 1)
    start = np.cumsum(degree) - degree
    table = np.full((n, width), -1, dtype=dtype)
    table[rows, np.arange(rows.size) - start[rows]] = cols
    return table


def _piece_index(parents: np.ndarray, n: int) -> tuple:
    """Where each whole cell's pieces are: (order or None, starts); the pieces of whole cell w are
    ``order[starts[w]:starts[w + 1]]`` (``order`` None: the pieces come whole cell after whole cell,
    as a polyhedral split gives them, and are that range itself)."""
    ordered = bool(np.all(parents[1:] >= parents[:-1]))
    order = None if ordered else np.argsort(parents, kind="stable").astype(index_dtype(parents.size + 1))
    sorted_parents = parents if order is None else parents[order]
    starts = np.searchsorted(sorted_parents, np.arange(n + 1)).astype(index_dtype(parents.size + 1))
    return order, starts


class _Blocks:
    """The cell blocks of a mesh, as :func:`.corners.corner_extremes` reads them."""

    def __init__(self, blocks, block_offsets):
        self.blocks, self.block_offsets = blocks, block_offsets
        self.n_cells = int(block_offsets[-1])


class WholeCells:
    """The whole cells of a split mesh, with what the droplet labelling reads of a mesh.

    Parameters
    ----------
    mesh : Mesh
        A mesh of split cells (:attr:`Mesh.cell_parents` not None).

    Attributes
    ----------
    cell_parents_of_pieces : ndarray of shape (n_pieces,), int
        :attr:`Mesh.cell_parents` (the same array): the whole cell of each piece.
    n_cells : int
        Whole-cell numbers, ``cell_parents.max() + 1``.
    n_pieces : int
        Cells of the split mesh.
    cell_measures : ndarray of shape (n_cells,), float
        Measure of each whole cell (area in 2D, volume in 3D), its pieces' sum.
    cell_centroids : ndarray of shape (n_cells, dimension)
        Centroid of each whole cell (:func:`._centroids.whole_cell_centroids`).
    face_neighbours : ndarray of shape (n_cells, m), int
        Whole cells sharing a face with each whole cell, increasing, -1 padded.
    face_pairs : ndarray of shape (n_pairs, 2), int64
        The same pairs once each, ``a < b``, sorted.
    dimension, plane_axes, points, used_points, coordinates, n_points
        As the mesh's (the pieces' corners, with their face and cell centres).
    regular_grid, cell_parents : None
        A view of whole cells is neither a regular grid nor split.
    """

    regular_grid = None
    cell_parents = None

    def __init__(self, mesh):
        parents = mesh.cell_parents
        if parents is None:
            raise ValueError("WholeCells needs a mesh of split cells (mesh.cell_parents)")
        n = whole_cell_count(mesh)
        self.cell_parents_of_pieces = parents
        self.n_cells = n
        self.n_pieces = int(mesh.n_cells)
        self.dimension = int(mesh.dimension)
        self.plane_axes = tuple(mesh.plane_axes)
        self.points = mesh.points
        self.used_points = mesh.used_points
        self.coordinates = mesh.coordinates
        self.n_points = int(mesh.n_points)
        self.piece_measures = mesh.cell_measures
        self.cell_measures = np.bincount(parents, weights=self.piece_measures, minlength=n)
        self.cell_centroids = whole_cell_centroids(mesh)
        self._sizes = mesh._whole_cell_sizes
        self.face_neighbours = _neighbour_table(_whole_pairs(mesh, parents, n), n)
        self._piece_order, self._piece_starts = _piece_index(parents, n)
        self._cell_blocks = _Blocks(mesh.blocks, mesh.block_offsets)  # the pieces' corners
        for array in (self.cell_measures, self._sizes, self.face_neighbours):
            array.flags.writeable = False

    def __repr__(self) -> str:
        return f"WholeCells({self.dimension}D, {self.n_cells} whole cells of {self.n_pieces} pieces)"

    #: as :meth:`Mesh.memo`, on this view (kept as long as the view, so as the mesh)
    memo = Mesh.memo

    @property
    def face_pairs(self) -> np.ndarray:
        """The pairs (a, b), a < b, of whole cells sharing a face, sorted, int64 (n_pairs, 2): read
        from :attr:`face_neighbours` (each row's higher neighbours), not kept."""
        table = self.face_neighbours
        higher = table > np.arange(self.n_cells, dtype=table.dtype)[:, None]
        first = np.repeat(np.arange(self.n_cells, dtype=np.int64), higher.sum(axis=1))
        return np.stack([first, table[higher].astype(np.int64)], axis=1)

    def cell_sizes_of(self, cells) -> np.ndarray:
        """The sizes of the whole ``cells`` (:meth:`Mesh.cell_sizes_of` of their pieces)."""
        return self._sizes[cells]

    def pieces_of(self, cells: np.ndarray) -> tuple:
        """The pieces of whole ``cells``: (pieces, counts), ``pieces`` grouped cell by cell in the order
        of ``cells``, ``counts`` the number of each cell's pieces."""
        cells = np.asarray(cells, dtype=np.intp)
        counts = self._piece_starts[cells + 1].astype(np.int64) - self._piece_starts[cells]
        at = ranges(self._piece_starts, cells)
        return (at if self._piece_order is None else self._piece_order[at].astype(np.int64)), counts

    def corner_boxes(self, cells: np.ndarray) -> tuple:
        """Lowest and highest corner coordinates of whole ``cells``: (low, high), each (k, dimension),
        in mesh length units; NaN for a number with no pieces."""
        cells = np.asarray(cells)
        dim = self.coordinates.shape[1]
        low, high = np.full((cells.size, dim), np.nan), np.full((cells.size, dim), np.nan)
        pieces, counts = self.pieces_of(cells)
        if not pieces.size:
            return low, high
        ascending = bool(np.all(pieces[1:] > pieces[:-1]))
        order = None if ascending else np.argsort(pieces, kind="stable")
        ext = corner_extremes(self._cell_blocks, self.coordinates, pieces if order is None else pieces[order])
        plow, phigh = ext.low, ext.high
        if order is not None:  # back to the pieces' order, grouped by whole cell
            back = np.empty_like(order)
            back[order] = np.arange(order.size)
            plow, phigh = plow[back], phigh[back]
        has = counts > 0
        starts = (np.cumsum(counts) - counts)[has]
        low[has] = np.minimum.reduceat(plow, starts, axis=0)
        high[has] = np.maximum.reduceat(phigh, starts, axis=0)
        return low, high

    def mean_of(self, values: np.ndarray) -> np.ndarray:
        """Each whole cell's mean of a per-piece value, ``sum(V_piece * v_piece) / V_whole``.

        Parameters
        ----------
        values : ndarray of shape (n_pieces,) or (n_pieces, q)

        Returns
        -------
        ndarray of shape (n_cells,) or (n_cells, q)
            NaN where a piece's value is NaN, and for a number with no pieces.
        """
        values = np.asarray(values, dtype=np.float64)
        if self._piece_order is None:  # pieces whole cell after whole cell (a polyhedral split)
            sums = _ordered_sums(self._piece_starts, values, self.n_cells, self.piece_measures)
        else:
            sums = _whole_sums(self.cell_parents_of_pieces, values, self.n_cells, self.piece_measures)
        with np.errstate(invalid="ignore", divide="ignore"):
            measure = self.cell_measures if values.ndim == 1 else self.cell_measures[:, None]
            return np.where(measure > 0, sums / measure, np.nan)

    @property
    def incidence(self):
        """Sparse (n_cells, n_points) matrix, 1 where a point is a corner of a piece of the whole cell."""
        def build():
            from scipy import sparse

            blocks = [(b.connectivity, int(s)) for b, s in zip(self._cell_blocks.blocks,
                                                               self._cell_blocks.block_offsets[:-1])]
            rows = np.concatenate([np.repeat(self.cell_parents_of_pieces[s:s + len(c)], c.shape[1])
                                   for c, s in blocks])
            cols = np.concatenate([c.ravel() for c, _ in blocks])
            m = sparse.csr_matrix((np.ones(rows.size), (rows, cols)), shape=(self.n_cells, self.n_points))
            m.sum_duplicates()
            m.data[:] = 1.0
            return m

        return self.memo("incidence", build)
