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

__all__ = ["MeshOutline", "DOMAIN_TOLERANCE", "DISJOINT_SHARE"]

#: a domain's box, volume or centroid moving by more than this share (of its longest side, or of
#: its volume) between meshes is a change of the domain (:meth:`MeshOutline.domain_change`): far
#: above what remeshing the same domain moves (a boundary's facets, about a cell)
DOMAIN_TOLERANCE = 0.05

#: two meshes whose boxes share less than this share of the smaller box (along each axis that is
#: not flat) lie side by side: the pieces of one domain, not one domain at two times
#: (:meth:`MeshOutline.side_by_side`); a wall or a frame that moves between outputs keeps most
DISJOINT_SHARE = 0.5


def _domain(mesh) -> tuple:
    """The domain's volume (area in 2D) and centroid (as :attr:`Mesh.cell_centroids` gives them) of ``mesh``."""
    w = mesh.cell_measures
    total = float(w.sum())
    if not total > 0:
        return float("nan"), None
    return total, w @ mesh.cell_centroids / total


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
    measure: float = float("nan")  # the domain's volume (area in 2D): the cells' measures summed
    centre: np.ndarray | None = None  # the domain's centroid (cells' centroids weighted by measure)

    @classmethod
    def of(cls, mesh, *, centroids: bool = False) -> "MeshOutline":
        """The outline of ``mesh``; with ``centroids``, one object per mesh (kept with ``mesh.memo``)."""
        measure, centre = mesh.memo("domain_extent", lambda: _domain(mesh))
        if centroids:
            from ._centroids import whole_cell_centroids

            return mesh.memo("outline_with_centroids", lambda: cls(
                mesh.signature, int(mesh.n_cells), int(mesh.dimension), tuple(mesh.plane_axes),
                mesh.bounds, whole_cell_centroids(mesh), mesh.cell_parents, measure, centre))
        return cls(mesh.signature, int(mesh.n_cells), int(mesh.dimension), tuple(mesh.plane_axes), mesh.bounds,
                   measure=measure, centre=centre)

    def side_by_side(self, other: "MeshOutline") -> bool:
        """True when the two meshes' boxes share less than :data:`DISJOINT_SHARE` of the smaller box
        along some axis that is not flat in both (two pieces of a box-wise decomposition share 0)."""
        lo = np.maximum(self.bounds[0], other.bounds[0])
        hi = np.minimum(self.bounds[1], other.bounds[1])
        smaller = np.minimum(self.bounds[1] - self.bounds[0], other.bounds[1] - other.bounds[0])
        solid = smaller > 0
        return bool(np.any(np.maximum(hi - lo, 0.0)[solid] < DISJOINT_SHARE * smaller[solid]))

    def domain_change(self, other: "MeshOutline") -> str | None:
        """How the domain of ``other`` differs from this one's, in words, or None (the same domain).

        The domain is taken as its bounding box, its volume (area in 2D) and its centroid; any of
        them moving by more than :data:`DOMAIN_TOLERANCE` (of the larger box's longest side, or of
        the larger volume) is a change. A mesh refined or remeshed over the same domain moves none
        of them that far; the pieces of a domain decomposition (a parallel run's files of one step)
        differ in at least one.
        """
        if (other.signature == self.signature or self.centre is None or other.centre is None
                or other.centre.shape != self.centre.shape):
            return None
        size = float(max((self.bounds[1] - self.bounds[0]).max(), (other.bounds[1] - other.bounds[0]).max()))
        if size <= 0 or not (np.isfinite(self.measure) and np.isfinite(other.measure)):
            return None
        moved = np.abs(other.bounds - self.bounds)
        if moved.max() > DOMAIN_TOLERANCE * size:
            axis = int(np.argmax(moved)) % moved.shape[1]  # the axis whose lower or upper bound moved most
            name = "xyz"[axis]
            return (f"{name} from [{self.bounds[0, axis]:.6g}, {self.bounds[1, axis]:.6g}] to "
                    f"[{other.bounds[0, axis]:.6g}, {other.bounds[1, axis]:.6g}]")
        if abs(other.measure - self.measure) > DOMAIN_TOLERANCE * max(self.measure, other.measure):
            return f"its {'volume' if self.dimension == 3 else 'area'} from {self.measure:.6g} to {other.measure:.6g}"
        shift = float(np.linalg.norm(other.centre - self.centre))
        if shift > DOMAIN_TOLERANCE * size:
            return f"its centroid by {shift:.3g} ({shift / size:.0%} of its size)"
        return None

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
