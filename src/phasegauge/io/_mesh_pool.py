"""Meshes kept for reuse: the reader hands out a kept mesh (with its caches) when a step has the same mesh.

A :class:`MeshPool` is an explicit object: a :class:`phasegauge.io.Series` owns
one (or is given one), and a run can give one pool to every series it opens,
so the work cached on a mesh (measures, adjacency, face grouping) is done once
while the points and cells stay the same. Pickling a pool keeps its size and
leaves the meshes behind (a process that receives it builds its own), the way a
file manager pickles how to open a file but not the open handle; a forked
process inherits the meshes with their caches.
"""

from __future__ import annotations

import numpy as np

from ..errors import OptionError
from ..model.mesh import Mesh

__all__ = ["MeshPool"]


class MeshPool:
    """The last ``size`` distinct meshes a reader built, most recently used first.

    Parameters
    ----------
    size : int
        How many distinct meshes are kept (each with its cached geometry and
        topology); 1 keeps the last one, enough for a series whose mesh stays
        the same.

    Examples
    --------
    >>> pool = MeshPool(size=2)
    >>> len(pool)
    0
    """

    def __init__(self, size: int = 1):
        if isinstance(size, bool) or int(size) != size or size < 1:
            raise OptionError(f"a mesh pool keeps at least 1 mesh, found size={size!r}", fix="for example size=1")
        self.size = int(size)
        self._meshes: list = []

    def __len__(self) -> int:
        return len(self._meshes)

    def __iter__(self):
        return iter(list(self._meshes))

    def __repr__(self) -> str:
        return f"MeshPool(size={self.size}, {len(self._meshes)} kept)"

    def match(self, candidate: Mesh) -> Mesh | None:
        """A kept mesh with the same points and cells as ``candidate``, or None."""
        for mesh in self._meshes:
            if mesh is candidate or (mesh.n_points == candidate.n_points
                                     and mesh.same_topology(candidate.points, candidate.blocks)
                                     and _same_numbers(getattr(mesh, "file_cells", None), candidate.file_cells)):
                return mesh
        return None

    def find(self, signature: str) -> Mesh | None:
        """The kept mesh with this :attr:`Mesh.signature` (or the 2D mesh of a kept quasi-2D one), or None."""
        from ..model.quasi2d import flat_mesh_if_built

        for mesh in self._meshes:
            if mesh.signature == signature:
                return mesh
            flat = flat_mesh_if_built(mesh)
            if flat is not None and flat.signature == signature:
                return flat
        return None

    def add(self, mesh: Mesh | None) -> None:
        """Keep ``mesh`` as the most recent one (dropping the oldest beyond ``size``)."""
        if mesh is None:
            return
        kept = [m for m in self._meshes if m is not mesh]
        self._meshes = [mesh] + kept[: self.size - 1]

    def clear(self) -> None:
        """Drop every kept mesh."""
        self._meshes = []

    def __getstate__(self):
        return {"size": self.size}

    def __setstate__(self, state):
        self.size = state["size"]
        self._meshes = []


def _same_numbers(a, b) -> bool:
    """Whether two meshes number their cells alike in their files (:attr:`Mesh.file_cells`)."""
    return (a is None and b is None) or (a is not None and b is not None and np.array_equal(a, b))
