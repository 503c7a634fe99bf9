"""A mesh's outline: what series-level work needs of a step's mesh once the step is done.

Steps are analysed one at a time, in any process; the series-level work
(droplet tracking, drawing the interface snapshots) runs afterwards in the
process that assembles the run. It needs only a little of each step's mesh,
and this carries it, so that no step has to be read again: the mesh's identity
(``signature``, ``n_cells``), its extent and plane (``dimension``,
``plane_axes``, ``bounds``) and, for droplet tracking, the cell centroids: of the whole cells
for a mesh whose cells a reader split (with each piece's whole cell), so that a run keeps one
centroid a polyhedron rather than one a tetrahedron of its split.
"""

from __future__ import annotations

from dataclasses import dataclass, replace

import numpy as np

__all__ = ["MeshOutline"]


@dataclass(frozen=True, eq=False)
class MeshOutline:
    """Identity, extent, plane and (optionally) cell centroids of a mesh.

    Attributes
    ----------
    signature : str
        :attr:`Mesh.signature` (equal signatures: the same mesh).
    n_cells, dimension : int
    plane_axes : tuple of int
        :attr:`Mesh.plane_axes`.
    bounds : ndarray of shape (2, 3)
        :attr:`Mesh.bounds`, in mesh length units.
    cell_centroids : ndarray of shape (n_cells, dimension) or None
        :attr:`Mesh.cell_centroids` (the same array, not a copy, when taken from a mesh); for a
        mesh of split cells, the whole cells' centroids, shape (n_whole_cells, dimension).
    cell_parents : ndarray of shape (n_cells,), int, or None
        :attr:`Mesh.cell_parents` of a mesh of split cells (the same array), with its centroids.
    """

    signature: str
    n_cells: int
    dimension: int
    plane_axes: tuple
    bounds: np.ndarray
    cell_centroids: np.ndarray | None = None
    cell_parents: np.ndarray | None = None

    @classmethod
    def of(cls, mesh, *, centroids: bool = False) -> "MeshOutline":
        """The outline of ``mesh``; with ``centroids``, one object per mesh (kept with ``mesh.memo``)."""
        if centroids:
            from ._centroids import whole_cell_centroids

            return mesh.memo("outline_with_centroids", lambda: cls(
                mesh.signature, int(mesh.n_cells), int(mesh.dimension), tuple(mesh.plane_axes),
                mesh.bounds, whole_cell_centroids(mesh), mesh.cell_parents))
        return cls(mesh.signature, int(mesh.n_cells), int(mesh.dimension), tuple(mesh.plane_axes), mesh.bounds)

    @property
    def has_centroids(self) -> bool:
        return self.cell_centroids is not None

    def without_centroids(self) -> "MeshOutline":
        """The same outline without the centroids (small: it crosses processes with every step)."""
        return self if self.cell_centroids is None else replace(self, cell_centroids=None, cell_parents=None)

    @property
    def nbytes(self) -> int:
        """Bytes of the arrays held."""
        return int(self.bounds.nbytes) + sum(int(a.nbytes) for a in (self.cell_centroids, self.cell_parents)
                                             if a is not None)
