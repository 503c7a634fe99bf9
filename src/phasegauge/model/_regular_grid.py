"""The layout of a mesh that is a full rectilinear grid of quads or hexahedra, and its detection.

:class:`RegularGrid` maps mesh cells and points to C-order positions of grid arrays;
:func:`find_regular_grid` finds it from the coordinates and connectivity (what
:attr:`phasegauge.model.mesh.Mesh.regular_grid` caches).
"""

from __future__ import annotations

from dataclasses import dataclass
from functools import cached_property
from typing import TYPE_CHECKING

import numpy as np

from ._grouping import CHUNK, all_distinct, index_dtype

if TYPE_CHECKING:
    from .mesh import Mesh

__all__ = ["RegularGrid", "find_regular_grid"]

#: about this many points sampled before the full search
_SAMPLE = 4096


@dataclass(frozen=True)
class RegularGrid:
    """Layout of a mesh that is a rectilinear grid of quads or hexahedra.

    Attributes
    ----------
    axes : tuple of ndarray
        Point coordinates along each grid axis (2 in 2D, 3 in 3D), increasing.
    mesh_axes : tuple of int
        Which of the mesh's x, y, z coordinates each grid axis is.
    cell_index : ndarray of shape (n_cells,), int32 (int64 for more than 2**31 cells)
        Flat C-order index of each mesh cell in the array of shape ``cell_shape``.
    point_index : ndarray of shape (n_points,), int32 (int64 for more than 2**31 points)
        Flat C-order index of each mesh point in the array of shape ``point_shape``.
    uniform : bool
        True when every axis has one spacing.
    """

    axes: tuple
    mesh_axes: tuple
    cell_index: np.ndarray
    point_index: np.ndarray
    uniform: bool

    @property
    def point_shape(self) -> tuple:
        return tuple(len(a) for a in self.axes)

    @property
    def cell_shape(self) -> tuple:
        return tuple(len(a) - 1 for a in self.axes)

    @cached_property
    def cell_order(self) -> np.ndarray:
        """The mesh cell at each flat C-order position of the ``cell_shape`` array (the inverse
        of ``cell_index``, same dtype), computed once."""
        n = self.cell_index.size
        order = np.empty(n, dtype=self.cell_index.dtype)
        order[self.cell_index] = np.arange(n, dtype=self.cell_index.dtype)
        order.flags.writeable = False
        return order

    @property
    def spacing(self) -> tuple:
        """Mean spacing along each axis."""
        return tuple(float(np.mean(np.diff(a))) for a in self.axes)

    def cells_to_array(self, values: np.ndarray, fill=np.nan) -> np.ndarray:
        """Scatter per-cell values into an array of shape ``cell_shape``."""
        out = np.full(int(np.prod(self.cell_shape)), fill, dtype=np.result_type(values, np.float64))
        out[self.cell_index] = values
        return out.reshape(self.cell_shape)

    def points_to_array(self, values: np.ndarray, fill=np.nan) -> np.ndarray:
        """Scatter per-point values into an array of shape ``point_shape``."""
        out = np.full(int(np.prod(self.point_shape)), fill, dtype=np.result_type(values, np.float64))
        out[self.point_index] = values
        return out.reshape(self.point_shape)


def find_regular_grid(mesh: Mesh) -> RegularGrid | None:
    """The grid layout when the mesh is a full rectilinear grid of quads or hexahedra, else None."""
    wanted = "quad" if mesh.dimension == 2 else "hexahedron"
    if any(b.cell_type != wanted for b in mesh.blocks):
        return None
    X = mesh.coordinates
    used = mesh.used_points
    if used.size != mesh.n_points:
        return None
    axes = []
    # the extents of the used points, all of them here (the flat axis of a 2D mesh, beyond its
    # coordinates, spans less than the others)
    scale = float(np.ptp(mesh.bounds, axis=0).max()) or 1.0
    tol = 1e-9 * scale
    # a grid's points lie within tol of their axis value (checked below), so a sample of them has
    # no more distinct values along an axis than the grid: their product above the point count
    # ends the search before every coordinate is sorted (a jittered mesh)
    sample = X[::max(1, mesh.n_points // _SAMPLE)]
    distinct = 1
    for d in range(mesh.dimension):
        distinct *= 1 + int(np.count_nonzero(np.diff(np.sort(sample[:, d])) > tol))
    if distinct > mesh.n_points:
        return None
    for d in range(mesh.dimension):
        s = np.sort(X[:, d])
        starts = np.concatenate([[0], np.flatnonzero(np.diff(s) > tol) + 1])
        if starts.size < 2:
            return None
        axes.append(s[starts])
        # a grid's point count is the product of its axes' (each at least 2): an axis of
        # distinct values that does not divide it ends the search (a jittered mesh, after one sort)
        if mesh.n_points % starts.size or starts.size << (mesh.dimension - 1) > mesh.n_points:
            return None
    point_shape = tuple(len(a) for a in axes)
    cell_shape = tuple(n - 1 for n in point_shape)
    if int(np.prod(point_shape)) != mesh.n_points or int(np.prod(cell_shape)) != mesh.n_cells:
        return None
    idx = []
    small = np.int16 if max(point_shape) < 2 ** 15 else np.int64
    for d, values in enumerate(axes):
        col = X[:, d]
        i = np.searchsorted(values + tol, col)
        if np.any(np.abs(values[np.minimum(i, values.size - 1)] - col) > tol):
            return None
        idx.append(i.astype(small))
    flat_points = np.ravel_multi_index(tuple(idx), point_shape).astype(index_dtype(mesh.n_points), copy=False)
    if not all_distinct(flat_points, mesh.n_points):
        return None
    # every cell spans one step along every axis: corner indices column by column, in chunks
    conn = mesh.blocks[0].connectivity if len(mesh.blocks) == 1 else np.concatenate(
        [b.connectivity for b in mesh.blocks])
    lows = [np.empty(mesh.n_cells, dtype=small) for _ in idx]
    for start in range(0, mesh.n_cells, CHUNK):
        corners = np.ascontiguousarray(conn[start:start + CHUNK].T)
        for i, low in zip(idx, lows):
            lo, hi = i[corners[0]], i[corners[0]]
            for c in corners[1:]:
                v = i[c]
                np.minimum(lo, v, out=lo)
                np.maximum(hi, v, out=hi)
            hi -= lo
            if np.any(hi != 1):
                return None
            low[start:start + CHUNK] = lo
    flat_cells = np.ravel_multi_index(tuple(lows), cell_shape).astype(index_dtype(mesh.n_cells), copy=False)
    if not all_distinct(flat_cells, mesh.n_cells):
        return None
    steps = [np.diff(a) for a in axes]
    uniform = all(np.allclose(s, s.mean(), rtol=1e-6, atol=0) for s in steps)
    return RegularGrid(axes=tuple(axes), mesh_axes=tuple(mesh.plane_axes[: mesh.dimension]),
                       cell_index=flat_cells, point_index=flat_points, uniform=bool(uniform))
