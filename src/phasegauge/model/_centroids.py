"""Cell centroids of split meshes: computed where they are read, not kept with the mesh.

A mesh whose cells a reader split into pieces (:attr:`Mesh.cell_parents`: the tetrahedra of
polyhedra, 24 for a six-faced cell) would keep ``n_cells x dimension`` floats of centroids for its
whole life (137 MiB at 6M tetrahedra), though every reader after the first step takes some cells'
centroids only. Such a mesh keeps its signed measures alone (:func:`signed_measures`); its
readers take the centroids of the cells they need (:func:`cell_centroids_of`) or of the whole
cells (:func:`whole_cell_centroids`). The numbers are those :func:`cell_geometry` gives for the
whole block: it computes each cell from its own corners, so a cell's centroid does not depend on
the other cells computed with it. A mesh of unsplit cells keeps its centroids as before.
"""

from __future__ import annotations

import numpy as np

from ._geometry import cell_geometry

__all__ = ["keeps_centroids", "mesh_geometry", "signed_measures", "cell_centroids_of", "whole_cell_centroids"]

#: cells computed at a time (the chunk's corner coordinates and results stay small)
_CHUNK = 1 << 16


def keeps_centroids(mesh) -> bool:
    """True when ``mesh`` keeps every cell's centroid (its cells are not pieces of split cells)."""
    return getattr(mesh, "cell_parents", None) is None


def mesh_geometry(mesh) -> tuple:
    """Signed measures and centroids of every cell (read-only: shared by every step), the centroids
    None where the mesh keeps none (:func:`keeps_centroids`)."""
    X = mesh.coordinates
    if keeps_centroids(mesh):
        signed, cent = np.empty(mesh.n_cells), np.empty((mesh.n_cells, X.shape[1]))
        for block, start in zip(mesh.blocks, mesh.block_offsets[:-1]):
            sl = slice(int(start), int(start) + len(block))
            cell_geometry(block.cell_type, X, block.connectivity, out=(signed[sl], cent[sl]))
        cent.flags.writeable = False
    else:
        signed, cent = signed_measures(mesh, X), None
    signed.flags.writeable = False
    return signed, cent


def signed_measures(mesh, X: np.ndarray) -> np.ndarray:
    """Signed measures of every cell of ``mesh`` (coordinates ``X``), their centroids made a chunk at
    a time and let go."""
    signed = np.empty(mesh.n_cells)
    scratch = np.empty((min(_CHUNK, mesh.n_cells), X.shape[1]))
    for block, start in zip(mesh.blocks, mesh.block_offsets[:-1]):
        conn, start = block.connectivity, int(start)
        for lo in range(0, len(block), _CHUNK):
            part = conn[lo:lo + _CHUNK]
            n = part.shape[0]
            cell_geometry(block.cell_type, X, part, out=(signed[start + lo:start + lo + n], scratch[:n]))
    return signed


def cell_centroids_of(mesh, cells=None) -> np.ndarray:
    """Centroids of ``cells`` (indices; None: every cell), shape (k, dimension).

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
            _fill(block, X, np.arange(len(block)), out[int(start):int(start) + len(block)])
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


def _fill(block, X: np.ndarray, rows: np.ndarray, out: np.ndarray) -> None:
    """Centroids of the ``rows`` of one block into ``out``, a chunk at a time."""
    conn = block.connectivity
    signed = np.empty(min(_CHUNK, rows.size))
    for lo in range(0, rows.size, _CHUNK):
        part = conn[rows[lo:lo + _CHUNK]]
        n = part.shape[0]
        cell_geometry(block.cell_type, X, part, out=(signed[:n], out[lo:lo + n]))


def whole_cell_centroids(mesh) -> np.ndarray:
    """Centroid of each whole cell (numbered by :attr:`Mesh.cell_parents`): its pieces' centroids
    weighted by their measures; for a mesh of unsplit cells, :attr:`Mesh.cell_centroids`."""
    if keeps_centroids(mesh):
        return mesh.cell_centroids
    parents, measures = mesh.cell_parents, mesh.cell_measures
    n_whole = int(parents.max()) + 1 if parents.size else 0
    dim = mesh.coordinates.shape[1]
    moment = np.zeros((n_whole, dim))
    for lo in range(0, mesh.n_cells, _CHUNK):
        cells = np.arange(lo, min(lo + _CHUNK, mesh.n_cells))
        weight = measures[cells]
        centre = cell_centroids_of(mesh, cells)
        for d in range(dim):
            moment[:, d] += np.bincount(parents[cells], weights=weight * centre[:, d], minlength=n_whole)
    whole = np.bincount(parents, weights=measures, minlength=n_whole)
    return moment / np.where(whole > 0, whole, 1.0)[:, None]
