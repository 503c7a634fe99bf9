"""Cell centroids of split meshes: computed where they are read, not kept with the mesh.

A mesh whose cells a reader split into pieces (:attr:`Mesh.cell_parents`: the tetrahedra of
polyhedra, 24 for a six-faced cell) would keep ``n_cells x dimension`` floats of centroids for its
whole life (137 MiB at 6M tetrahedra), though every reader after the first step takes some cells'
centroids only. Such a mesh keeps its signed measures and its whole cells' centroids
(:func:`mesh_geometry`, one pass); its readers take the centroids of the cells they need
(:func:`cell_centroids_of`) or of the whole cells (:func:`whole_cell_centroids`). The numbers are those
:func:`cell_geometry` gives for the whole block: it computes each cell from its own corners, so a cell's
centroid does not depend on the other cells computed with it. A mesh of unsplit cells keeps its centroids as before.
"""

from __future__ import annotations

import numpy as np

from ._geometry import cell_geometry
from .cells import CELLS_PER_CUBE
from .corners import corner_sum

__all__ = ["keeps_centroids", "mesh_geometry", "piece_measures", "whole_cell_sizes", "cell_centroids_of",
           "whole_cell_centroids", "add_whole_sums", "zero_measures"]

#: cells computed at a time (the chunk's corner coordinates and results stay small)
_CHUNK = 1 << 16


def keeps_centroids(mesh) -> bool:
    """True when ``mesh`` keeps every cell's centroid (its cells are not pieces of split cells)."""
    return getattr(mesh, "cell_parents", None) is None


def mesh_geometry(mesh) -> tuple:
    """Signed measures and centroids of every cell (read-only: shared by every step), the centroids
    None where the mesh keeps none (:func:`keeps_centroids`; its whole cells' centroids are kept
    instead, made in the same pass: :func:`whole_cell_centroids`)."""
    X = mesh.coordinates
    if keeps_centroids(mesh):
        signed, cent = np.empty(mesh.n_cells), np.empty((mesh.n_cells, X.shape[1]))
        for block, start in zip(mesh.blocks, mesh.block_offsets[:-1]):
            sl = slice(int(start), int(start) + len(block))
            cell_geometry(block.cell_type, X, block.connectivity, out=(signed[sl], cent[sl]))
        cent.flags.writeable = False
    else:
        (signed, whole, scale), cent = _split_geometry(mesh, X), None
        mesh.memo(_WHOLE, lambda: whole)
        mesh.memo(_SCALE, lambda: scale)
    signed.flags.writeable = False
    return signed, cent


#: memo keys of a split mesh's whole-cell centroids and of its pieces' measure scales
_WHOLE, _SCALE = "whole_cell_centroids", "piece_measure_scales"


def piece_measures(mesh, signed: np.ndarray) -> np.ndarray:
    """The cells' measures (:attr:`Mesh.cell_measures`) from their signed measures: their magnitudes,
    and where a reader split a cell not star-shaped from its centre (some pieces turned over), its
    pieces' magnitudes scaled to add up to the cell's own measure, the pieces' signed sum (the
    divergence theorem: exact for any closed polyhedron; the magnitudes alone add the overlap twice,
    6.33 instead of 5 for an L-shaped prism). ``signed`` itself where none is negative."""
    if not np.signbit(signed).any():
        return signed
    measures = np.abs(signed)
    if mesh.cell_parents is not None:
        scale = mesh.memo(_SCALE, lambda: _split_geometry(mesh, mesh.coordinates)[2])
        if scale is not None:
            measures *= scale[mesh.cell_parents]
    return measures


def _split_geometry(mesh, X: np.ndarray) -> tuple:
    """Signed measures of every cell of a split mesh, its whole cells' centroids (the pieces' centroids
    weighted by their measures; in a cell not star-shaped from its centre by their signed measures,
    exact: its turned pieces take away what the others add twice), and per whole cell the scale of its
    pieces' magnitudes (:func:`piece_measures`; None when no cell has turned pieces); the pieces'
    centroids made a chunk at a time and let go."""
    parents = mesh.cell_parents
    n_whole, dim = (int(parents.max()) + 1 if parents.size else 0), X.shape[1]
    signed = np.empty(mesh.n_cells)
    # sums of signed measure x centroid, of measure x centroid, of signed measure, of measure
    moment = np.zeros((n_whole, 2 * dim + 2))
    scratch = np.empty((min(_CHUNK, mesh.n_cells), dim))
    X = np.asfortranarray(X)  # each call of cell_geometry then takes the coordinate columns as they are
    for block, start in zip(mesh.blocks, mesh.block_offsets[:-1]):
        conn, start = block.connectivity, int(start)
        for lo in range(0, len(block), _CHUNK):
            part = conn[lo:lo + _CHUNK]
            n = part.shape[0]
            cells = slice(start + lo, start + lo + n)
            cell_geometry(block.cell_type, X, part, out=(signed[cells], scratch[:n]))
            weight, size = signed[cells], np.abs(signed[cells])
            add_whole_sums(moment, parents[cells], [weight * scratch[:n, d] for d in range(dim)]
                           + [size * scratch[:n, d] for d in range(dim)] + [weight, size])
    total, size = np.abs(moment[:, 2 * dim]), moment[:, 2 * dim + 1]
    # cells with pieces turned against the others (the sums equal to the bit where none is), however thin
    # (the reader refuses faces listed both ways); a signed sum of nothing at all is no cell: its magnitudes
    turned = (total < size) & (total > _LEAST_SHARE * size)
    centroids = moment[:, dim:2 * dim] / np.where(size > 0, size, 1.0)[:, None]
    scale = None
    if turned.any():
        centroids[turned] = moment[turned, :dim] / moment[turned, 2 * dim][:, None]
        scale = np.ones(n_whole)
        scale[turned] = total[turned] / size[turned]
    return signed, centroids, scale


#: least signed sum of a cell's pieces, as a share of their magnitudes' sum, taken as its measure
#: (rounding only: a thin L-shaped prism, 200 long and 0.01 wide, has a share of 1e-4)
_LEAST_SHARE = 1e-9


def add_whole_sums(out: np.ndarray, whole: np.ndarray, columns) -> None:
    """Add each column's per-piece values into ``out[:, d]`` summed per whole cell (``whole``: the
    whole cell of each piece of one chunk; ``columns``: one (pieces,) array per column of ``out``).

    The polyhedra's pieces come whole cell after whole cell (a short range of numbers a chunk);
    cones of a block split in part come face after face (numbers from all over the block): such a
    chunk is summed over the numbers present.
    """
    if not whole.size:
        return
    first = int(whole.min())
    spread = int(whole.max()) - first >= 2 * whole.size
    at, whole = np.unique(whole, return_inverse=True) if spread else (None, whole - first)
    for d, values in enumerate(columns):
        part_sum = np.bincount(whole, weights=values)
        if at is None:
            out[first:first + part_sum.size, d] += part_sum
        else:
            out[at, d] += part_sum


def cell_centroids_of(mesh, cells=None) -> np.ndarray:
    """Centroids of ``cells`` (indices or a mask; None: every cell), shape (k, dimension).

    A mesh that keeps its centroids gives them from :attr:`Mesh.cell_centroids`; a split one
    computes them from the cells' corners (the same numbers).
    """
    if keeps_centroids(mesh):
        return mesh.cell_centroids if cells is None else mesh.cell_centroids[cells]
    X = mesh.coordinates
    offsets = mesh.block_offsets
    if cells is None:
        out = np.empty((mesh.n_cells, X.shape[1]))
        for block, start in zip(mesh.blocks, offsets[:-1]):
            _fill(block, X, slice(0, len(block)), out[int(start):int(start) + len(block)])
        return out
    cells = np.asarray(cells)
    if cells.dtype == bool:
        cells = np.flatnonzero(cells)
    out = np.empty((cells.size, X.shape[1]))
    if len(mesh.blocks) == 1:
        _fill(mesh.blocks[0], X, cells, out)
        return out
    which = np.searchsorted(offsets, cells, side="right") - 1
    for b, block in enumerate(mesh.blocks):
        at = np.flatnonzero(which == b)
        if at.size:
            part = np.empty((at.size, X.shape[1]))
            _fill(block, X, cells[at] - offsets[b], part)
            out[at] = part
    return out


def _fill(block, X: np.ndarray, rows, out: np.ndarray) -> None:
    """Centroids of the ``rows`` (indices, or a slice) of one block into ``out``, a chunk at a time.

    Simplices: the corners' mean summed in corner order, as :func:`cell_geometry` computes it (the
    same floats), each corner's coordinates gathered by a contiguous column of corner numbers; other
    cells through :func:`cell_geometry`.
    """
    conn = block.connectivity
    whole = isinstance(rows, slice)
    n_rows = rows.stop - rows.start if whole else rows.size
    simplex = block.cell_type in ("triangle", "tetra")
    if not simplex:
        X = np.asfortranarray(X)  # cell_geometry takes each coordinate column without a copy
        signed = np.empty(min(_CHUNK, n_rows))
    for lo in range(0, n_rows, _CHUNK):
        hi = min(lo + _CHUNK, n_rows)
        part = conn[rows.start + lo:rows.start + hi] if whole else conn[rows[lo:hi]]
        if simplex:
            corners = np.ascontiguousarray(part.T)
            for i in range(X.shape[1]):
                column = X[:, i]
                out[lo:hi, i] = corner_sum(column[c] for c in corners) / corners.shape[0]
        else:
            cell_geometry(block.cell_type, X, part, out=(signed[:hi - lo], out[lo:hi]))


def whole_cell_centroids(mesh) -> np.ndarray:
    """Centroid of each whole cell (numbered by :attr:`Mesh.cell_parents`): its pieces' centroids
    weighted by their measures, made with the mesh's geometry; for a mesh of unsplit cells,
    :attr:`Mesh.cell_centroids`."""
    if keeps_centroids(mesh):
        return mesh.cell_centroids
    mesh.signed_measures  # noqa: B018  (the geometry's pass keeps them with the mesh)
    return mesh.memo(_WHOLE, lambda: _split_geometry(mesh, mesh.coordinates)[1])


def zero_measures(measures: np.ndarray, parents: np.ndarray | None = None) -> int:
    """How many cells have zero measure (to round-off against the median); with ``parents``, whole
    cells (their pieces' measures summed; numbers with no piece left out)."""
    if parents is not None:
        measures = np.bincount(parents, weights=measures)[np.bincount(parents) > 0]
    scale = float(np.median(measures)) if measures.size else 0.0
    return int(np.sum(measures <= 1e-12 * scale))


def whole_cell_sizes(mesh) -> np.ndarray:
    """The size of each whole cell (numbered by ``mesh.cell_parents``), or cell: (n x measure) **
    (1 / dimension), n the count of such cells filling a square or cube
    (:data:`.cells.CELLS_PER_CUBE`; 1 for the rest).

    A cell a reader split about its centre (a polyhedron, a convex point set) takes 1 with its
    pieces' measure; a cell that is its own one piece (the tetrahedra, wedges and pyramids kept
    whole beside split polyhedra) takes its kind's count, as in a mesh of no split cells.
    """
    measures, parents = mesh.cell_measures, mesh.cell_parents
    counts = [CELLS_PER_CUBE.get(b.cell_type, 1) for b in mesh.blocks]
    if parents is None:  # one array made, as the measures' root alone made it
        out = np.array(measures, dtype=np.float64)
        for count, lo, hi in zip(counts, mesh.block_offsets[:-1], mesh.block_offsets[1:]):
            if count != 1:
                out[lo:hi] *= count
        return np.power(out, 1.0 / mesh.dimension, out=out)
    whole = np.bincount(parents, weights=measures)
    if max(counts) > 1:
        pieces = np.bincount(parents, minlength=whole.size)
        for count, lo, hi in zip(counts, mesh.block_offsets[:-1], mesh.block_offsets[1:]):
            if count > 1:  # (block by block: no array over all the pieces)
                own = parents[lo:hi]
                own = own[pieces[own] == 1]
                whole[own] *= count
    return whole ** (1.0 / mesh.dimension)
