"""The level contour type: polylines in 2D, a triangulated surface in 3D.

Found by :func:`phasegauge.analysis.interface.find_interface`, written and read by the
contour files of :mod:`phasegauge.io`, drawn by the report.
"""

from __future__ import annotations

from dataclasses import dataclass
from functools import cached_property

import numpy as np

__all__ = ["Contour"]


@dataclass(frozen=True)
class Contour:
    """A level contour: polylines in 2D, a triangulated surface in 3D.

    Attributes
    ----------
    points : ndarray of shape (m, 3), float
        Vertices in the mesh's 3D coordinates (a 2D mesh's constant
        coordinate is kept).
    elements : ndarray of shape (k, 2) or (k, 3), int
        Line segments (2D) or triangles (3D), as indices into ``points``.
    cells : ndarray of shape (k,), int
        The mesh cell each element lies in.
    dimension : {2, 3}
        Dimension of the mesh the contour was found on.
    plane_axes : tuple of int
        The coordinate axes the mesh spans (``(0, 1)`` for a 2D mesh in the
        x-y plane, ``(0, 1, 2)`` in 3D).
    """

    points: np.ndarray
    elements: np.ndarray
    cells: np.ndarray
    dimension: int
    plane_axes: tuple = (0, 1, 2)

    @property
    def n_elements(self) -> int:
        """Number of segments (2D) or triangles (3D)."""
        return int(self.elements.shape[0])

    @cached_property
    def element_sizes(self) -> np.ndarray:
        """Segment lengths (2D) or triangle areas (3D), shape (k,), in length units (squared).

        Computed once per contour (a step reads them three times) and kept read-only.
        """
        if self.n_elements == 0:
            sizes = np.zeros(0)
        else:
            p = self.points[self.elements]
            if self.dimension == 2:
                sizes = np.linalg.norm(p[:, 1] - p[:, 0], axis=1)
            else:
                sizes = 0.5 * np.linalg.norm(np.cross(p[:, 1] - p[:, 0], p[:, 2] - p[:, 0]), axis=1)
        sizes.flags.writeable = False
        return sizes

    @property
    def size(self) -> float:
        """Total length (2D) or area (3D), in length units (squared)."""
        return float(self.element_sizes.sum())

    @property
    def centroids(self) -> np.ndarray:
        """Element midpoints / centroids, shape (k, 3)."""
        if self.n_elements == 0:
            return np.zeros((0, 3))
        # the corners added in order, as the mean over them adds them (from 0: a -0.0 corner gives 0.0),
        # without the (k, corners, 3) table
        total = self.points[self.elements[:, 0]] + 0.0
        for j in range(1, self.elements.shape[1]):
            total += self.points[self.elements[:, j]]
        total /= self.elements.shape[1]
        return total

    @property
    def normals(self) -> np.ndarray:
        """Unit normals of the elements in 3D coordinates, shape (k, 3).

        They point out of the measured phase (towards lower c) when the
        elements carry the orientation :func:`find_interface` gives them.
        """
        if self.n_elements == 0:
            return np.zeros((0, 3))
        p = self.points[self.elements]
        if self.dimension == 2:
            a, b = self.plane_axes[0], self.plane_axes[1]
            t = p[:, 1] - p[:, 0]
            n = np.zeros_like(t)
            n[:, a] = t[:, b]   # right-hand normal of the segment: the lower-c side
            n[:, b] = -t[:, a]
        else:
            n = np.cross(p[:, 1] - p[:, 0], p[:, 2] - p[:, 0])
        length = np.linalg.norm(n, axis=1, keepdims=True)
        return np.divide(n, length, out=np.zeros_like(n), where=length > 0)

    def __repr__(self) -> str:
        kind = "segments" if self.dimension == 2 else "triangles"
        return f"Contour({self.n_elements} {kind}, size {self.size:.6g})"
