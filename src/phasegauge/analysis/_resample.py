"""Resampling a point field of any mesh onto a regular sampling grid.

Two runs on different meshes are compared on one regular grid. Each sample is
placed at the centre of a grid box (so ``n`` samples along an axis of length
``L`` sit at ``lo + (i + 1/2) L / n``), and every box stands for the volume
``prod(spacing)``: sums over samples are midpoint-rule integrals.

Interpolation inside the mesh:

* a rectilinear grid of quads or hexahedra (:attr:`Mesh.regular_grid`) is
  interpolated multilinearly (bilinear / trilinear, the cells' own shape
  functions) with ``scipy.interpolate.RegularGridInterpolator``;
* any other mesh is split into simplices (quads and polygons into triangles,
  hexahedra into six tetrahedra, wedges into three, pyramids into two), each
  simplex is rasterised onto the sampling grid (only samples inside its
  bounding box are tested) and samples that pass the barycentric test get the
  linear interpolant of the corner values. The loop runs over cell types and
  chunks of cells, never over single cells.

Samples outside the mesh (or in cells with a non-finite corner value) are NaN.
"""

from __future__ import annotations

import warnings
from dataclasses import dataclass

import numpy as np

from ..errors import InputError, OptionError, ResolutionWarning
from ..model.mesh import Mesh

__all__ = ["SamplingGrid", "common_grid", "resample_to_grid"]

#: candidate (sample, simplex) pairs tested at once; bounds the memory of one chunk
_CANDIDATES_PER_CHUNK = 2_000_000
#: barycentric coordinates down to -_INSIDE_TOL count as inside (samples on shared faces)
_INSIDE_TOL = 1e-10
#: samples in gaps between warped cells: accepted this far outside a simplex (barycentric)
_GAP_TOL = 0.5
#: nearest simplices (by centroid) tried for a sample in such a gap
_GAP_NEIGHBOURS = 24

# simplices (corner indices in VTK order) each linear cell type is split into
_SPLITS = {
    "triangle": [(0, 1, 2)],
    "quad": [(0, 1, 2), (0, 2, 3)],
    "tetra": [(0, 1, 2, 3)],
    "hexahedron": [(0, 1, 2, 6), (0, 2, 3, 6), (0, 3, 7, 6), (0, 7, 4, 6), (0, 4, 5, 6), (0, 5, 1, 6)],
    "wedge": [(0, 1, 2, 3), (1, 2, 3, 4), (2, 3, 4, 5)],
    "pyramid": [(0, 1, 2, 4), (0, 2, 3, 4)],
}


@dataclass(frozen=True)
class SamplingGrid:
    """A regular grid of samples at box centres.

    Parameters
    ----------
    bounds : sequence of (lo, hi)
        Extent per axis, 2 entries in 2D, 3 in 3D, in mesh length units (the
        axes are those of :attr:`Mesh.coordinates`: the in-plane axes of a 2D mesh).
    shape : sequence of int
        Number of samples per axis.

    Attributes
    ----------
    dimension : int
    spacing : ndarray of shape (dimension,), in length units
    cell_volume : float
        Area (2D) or volume (3D) each sample stands for.
    axes : tuple of ndarray
        Sample coordinates along each axis.

    Examples
    --------
    >>> g = SamplingGrid([(0, 1), (0, 2)], (4, 8))
    >>> g.spacing.tolist(), g.cell_volume
    ([0.25, 0.25], 0.0625)
    """

    bounds: tuple
    shape: tuple

    def __post_init__(self):
        try:
            bounds = tuple((float(lo), float(hi)) for lo, hi in self.bounds)
            shape = tuple(int(n) for n in self.shape)
        except (TypeError, ValueError):
            raise OptionError(f"sampling grid needs bounds as (lo, hi) pairs and integer sizes, found "
                              f"bounds={self.bounds!r}, shape={self.shape!r}",
                              fix="for example SamplingGrid([(0, 1), (0, 2)], (200, 400))") from None
        if len(bounds) not in (2, 3) or len(shape) != len(bounds):
            raise OptionError(f"sampling grid needs 2 or 3 axes with one size each, found {len(bounds)} "
                              f"bounds and {len(shape)} sizes", fix="give one (lo, hi) and one size per axis")
        if any(not (np.isfinite(lo) and np.isfinite(hi) and hi > lo) for lo, hi in bounds):
            raise OptionError(f"sampling grid bounds must be finite with hi > lo, found {bounds}",
                              fix="give each axis as (lo, hi)")
        if any(n < 1 for n in shape):
            raise OptionError(f"sampling grid sizes must be positive, found {shape}",
                              fix="give at least one sample per axis")
        object.__setattr__(self, "bounds", bounds)
        object.__setattr__(self, "shape", shape)

    @property
    def dimension(self) -> int:
        return len(self.shape)

    @property
    def lower(self) -> np.ndarray:
        return np.array([lo for lo, _ in self.bounds])

    @property
    def spacing(self) -> np.ndarray:
        return np.array([(hi - lo) / n for (lo, hi), n in zip(self.bounds, self.shape)])

    @property
    def origin(self) -> np.ndarray:
        """Coordinates of the first sample (a half spacing inside the lower bounds)."""
        return self.lower + 0.5 * self.spacing

    @property
    def cell_volume(self) -> float:
        return float(np.prod(self.spacing))

    @property
    def n_samples(self) -> int:
        return int(np.prod(self.shape))

    @property
    def axes(self) -> tuple:
        return tuple(o + h * np.arange(n) for o, h, n in zip(self.origin, self.spacing, self.shape))

    def points(self) -> np.ndarray:
        """Sample coordinates, shape (n_samples, dimension), C order of ``shape``."""
        grids = np.meshgrid(*self.axes, indexing="ij")
        return np.stack([g.ravel() for g in grids], axis=1)

    def to_physical(self, index_coordinates: np.ndarray) -> np.ndarray:
        """Map (fractional) sample indices, shape (n, dimension), to coordinates."""
        return self.origin + np.asarray(index_coordinates, dtype=np.float64) * self.spacing


def _analysis_bounds(mesh: Mesh) -> np.ndarray:
    used = mesh.coordinates[mesh.used_points]
    return np.vstack([used.min(axis=0), used.max(axis=0)])


def check_same_space(mesh_a: Mesh, mesh_b: Mesh) -> None:
    """Raise :class:`InputError` when two meshes cannot be compared point by point."""
    if mesh_a.dimension != mesh_b.dimension:
        raise InputError(f"run A is {mesh_a.dimension}D and run B is {mesh_b.dimension}D",
                         fix="compare runs of the same dimension")
    if mesh_a.dimension == 2 and tuple(mesh_a.plane_axes) != tuple(mesh_b.plane_axes):
        names = "xyz"
        pa = "".join(names[i] for i in mesh_a.plane_axes)
        pb = "".join(names[i] for i in mesh_b.plane_axes)
        raise InputError(f"run A lies in the {pa} plane and run B in the {pb} plane",
                         fix="write both 2D runs in the same coordinate plane")


def common_grid(mesh_a: Mesh, mesh_b: Mesh | None = None, *, spacing: float | None = None,
                max_samples: int = 2_000_000, bounds=None) -> SamplingGrid:
    """A sampling grid over the region both meshes cover, finer than both by default.

    Parameters
    ----------
    mesh_a, mesh_b : Mesh
        The two runs' meshes (``mesh_b`` may be omitted for one mesh).
    spacing : float, optional, in length units
        Wanted sample spacing; default half the smaller median cell size
        (:attr:`Mesh.cell_sizes`) of the two meshes. The spacing used is at
        most this (the extent is divided into whole boxes).
    max_samples : int
        Cap on the number of samples; a grid that would be larger is made
        coarser, with a :class:`ResolutionWarning` when that makes it coarser
        than the finer mesh.
    bounds : sequence of (lo, hi), optional
        Region to sample; default the intersection of the meshes' bounding boxes.

    Returns
    -------
    SamplingGrid

    Raises
    ------
    OptionError
        Non-positive spacing or sample cap.
    InputError
        Meshes of different dimension or plane, or domains that do not overlap.
    """
    if spacing is not None and not (np.isfinite(spacing) and spacing > 0):
        raise OptionError(f"sampling spacing must be a positive length, found {spacing!r}",
                          fix="give the grid spacing in mesh length units")
    if int(max_samples) < 1:
        raise OptionError(f"max_samples must be positive, found {max_samples!r}", fix="for example 2000000")
    meshes = [m for m in (mesh_a, mesh_b) if m is not None]
    if len(meshes) == 2:
        check_same_space(*meshes)
    dim = meshes[0].dimension
    if bounds is None:
        boxes = [_analysis_bounds(m) for m in meshes]
        lo = np.max([b[0] for b in boxes], axis=0)
        hi = np.min([b[1] for b in boxes], axis=0)
        if np.any(hi <= lo):
            raise InputError("the two runs' domains do not overlap",
                             fix="check that both runs use the same coordinates and units")
        bounds = list(zip(lo, hi))
    extent = np.array([hi - lo for lo, hi in bounds], dtype=np.float64)
    finest = min(float(np.median(m.cell_sizes)) for m in meshes)
    h = 0.5 * finest if spacing is None else float(spacing)
    shape = np.maximum(1, np.ceil(extent / h - 1e-9)).astype(np.int64)
    total = float(np.prod(shape.astype(np.float64)))
    if total > max_samples:
        h_cap = h * (total / max_samples) ** (1.0 / dim)
        shape = np.maximum(1, np.floor(extent / h_cap)).astype(np.int64)
        while np.prod(shape.astype(np.float64)) > max_samples:  # rounding: a few passes at most
            shape = np.maximum(1, shape - 1)
        if float(np.max(extent / shape)) > finest:
            warnings.warn(f"the sampling grid is capped at {max_samples} samples, so its spacing "
                          f"{float(np.max(extent / shape)):.4g} is coarser than the finer mesh "
                          f"(median cell size {finest:.4g}); raise max_samples for a finer comparison",
                          ResolutionWarning, stacklevel=2)
    return SamplingGrid(tuple(bounds), tuple(int(n) for n in shape))


def resample_to_grid(mesh: Mesh, c_point, grid: SamplingGrid) -> np.ndarray:
    """Interpolate a point field of ``mesh`` at the samples of ``grid``.

    Parameters
    ----------
    mesh : Mesh
        Any mesh of linear cells (2D or 3D).
    c_point : array_like of shape (n_points,)
        Values at the mesh points (e.g. :attr:`Indicator.point`).
    grid : SamplingGrid
        Of the mesh's dimension, in the mesh's analysis coordinates.

    Returns
    -------
    ndarray of shape ``grid.shape``
        Interpolated values; NaN outside the mesh and in cells with a
        non-finite corner value.

    Raises
    ------
    OptionError
        Wrong number of values or a grid of another dimension.

    Notes
    -----
    Rectilinear quad/hexahedron grids are interpolated multilinearly; every
    other mesh piecewise linearly on a split of its cells into simplices (for a
    quad or a hexahedron that is not the cell's own bilinear/trilinear
    interpolant; both are second-order accurate). A sample on a face shared by
    two cells takes either cell's value (equal for a continuous field).

    References
    ----------
    Barycentric point location in simplices: e.g. de Berg et al. (2008),
    *Computational Geometry*, chapter 6.

    Examples
    --------
    >>> from phasegauge.meshgen import grid_mesh
    >>> m = grid_mesh((4, 4), kind="triangle")
    >>> x, y = m.coordinates.T
    >>> v = resample_to_grid(m, x + 2 * y, SamplingGrid([(0, 1), (0, 1)], (2, 2)))
    >>> np.round(v, 12).tolist()
    [[0.75, 1.75], [1.25, 2.25]]
    """
    if not isinstance(grid, SamplingGrid):
        raise OptionError(f"grid must be a SamplingGrid, found {type(grid).__name__}",
                          fix="build one with SamplingGrid(bounds, shape) or common_grid(mesh_a, mesh_b)")
    c = np.asarray(c_point, dtype=np.float64)
    if c.shape != (mesh.n_points,):
        raise OptionError(f"expected {mesh.n_points} point values, found an array of shape {c.shape}",
                          fix="pass the indicator on points (Indicator.point)")
    if grid.dimension != mesh.dimension:
        raise OptionError(f"the sampling grid is {grid.dimension}D but the mesh is {mesh.dimension}D",
                          fix="build the grid from the mesh (common_grid)")
    if mesh.regular_grid is not None:
        return _resample_rectilinear(mesh, c, grid)
    out = np.full(grid.n_samples, np.nan)
    located = np.zeros(grid.n_samples, dtype=bool)
    X = mesh.coordinates
    for simplices in _simplex_blocks(mesh):
        _rasterise(X, c, simplices, grid, out, located)
    _fill_gaps(mesh, c, grid, out, located)
    return out.reshape(grid.shape)


def _simplex_blocks(mesh: Mesh):
    """Yield the simplices (corner point indices) of each cell block, one split at a time."""
    for block in mesh.blocks:
        conn = block.connectivity
        if block.cell_type == "polygon":
            k = conn.shape[1]
            local = [(0, i, i + 1) for i in range(1, k - 1)]
        else:
            local = _SPLITS[block.cell_type]
        for corners in local:
            yield conn[:, list(corners)]


def _fill_gaps(mesh: Mesh, c: np.ndarray, grid: SamplingGrid, out: np.ndarray,
               located: np.ndarray) -> None:
    """Locate samples that fell between the simplices of neighbouring warped cells.

    The simplex splits of two cells sharing a non-planar quad face need not
    match, which leaves thin gaps. A sample inside the mesh's bounding box that
    no simplex claimed is tried against the simplices with the nearest centroids
    (KD-tree); within ``_GAP_TOL`` of one (in barycentric coordinates) it takes
    that simplex's value with the coordinates clipped to the simplex.
    """
    from scipy.spatial import cKDTree

    lo, hi = _analysis_bounds(mesh)
    P = grid.points()
    todo = np.nonzero(~located & np.all((P >= lo) & (P <= hi), axis=1))[0]
    if todo.size == 0:
        return
    simplices = np.concatenate(list(_simplex_blocks(mesh)))
    X = mesh.coordinates
    V = X[simplices]
    tree = cKDTree(V.mean(axis=1))
    k = min(_GAP_NEIGHBOURS, len(simplices))
    _, near = tree.query(P[todo], k=k)
    near = near.reshape(todo.size, k)
    dim = grid.dimension
    best = np.full(todo.size, -np.inf)
    best_value = np.full(todo.size, np.nan)
    for j in range(k):
        ids = near[:, j]
        ref = V[ids, dim, :]
        E = np.swapaxes(V[ids, :dim, :] - ref[:, None, :], 1, 2)
        det = np.linalg.det(E)
        ok = np.abs(det) > 1e-12 * np.maximum(np.abs(E).max(axis=(1, 2)) ** dim, 1e-300)
        lam = np.full((todo.size, dim + 1), -np.inf)
        if np.any(ok):
            T = np.linalg.inv(E[ok])
            partial = np.einsum("nij,nj->ni", T, P[todo[ok]] - ref[ok])
            lam[ok] = np.column_stack([partial, 1.0 - partial.sum(axis=1)])
        worst = lam.min(axis=1)
        better = worst > best
        if not np.any(better):
            continue
        w = np.clip(lam[better], 0.0, None)
        w /= w.sum(axis=1, keepdims=True)
        best[better] = worst[better]
        best_value[better] = np.einsum("ni,ni->n", w, c[simplices[ids[better]]])
    take = best >= -_GAP_TOL
    out[todo[take]] = best_value[take]
    located[todo[take]] = True


def _resample_rectilinear(mesh: Mesh, c: np.ndarray, grid: SamplingGrid) -> np.ndarray:
    from scipy.interpolate import RegularGridInterpolator

    layout = mesh.regular_grid
    values = layout.points_to_array(c)
    interp = RegularGridInterpolator(layout.axes, values, method="linear", bounds_error=False,
                                     fill_value=np.nan)
    return interp(grid.points()).reshape(grid.shape)


def _rasterise(X: np.ndarray, c: np.ndarray, simplices: np.ndarray, grid: SamplingGrid,
               out: np.ndarray, located: np.ndarray) -> None:
    """Write the linear interpolant of every simplex at the grid samples inside it."""
    dim = grid.dimension
    origin, h, shape = grid.origin, grid.spacing, np.array(grid.shape)
    strides = np.array([int(np.prod(shape[d + 1:])) for d in range(dim)], dtype=np.int64)
    V = X[simplices]  # (n, dim+1, dim)
    lo_idx = np.ceil((V.min(axis=1) - origin) / h - 1e-9).astype(np.int64)
    hi_idx = np.floor((V.max(axis=1) - origin) / h + 1e-9).astype(np.int64)
    lo_idx = np.maximum(lo_idx, 0)
    hi_idx = np.minimum(hi_idx, shape - 1)
    box = np.maximum(hi_idx - lo_idx + 1, 0)
    counts = box.prod(axis=1)
    keep = np.nonzero(counts > 0)[0]
    if keep.size == 0:
        return
    ends = np.cumsum(counts[keep])
    start = 0
    while start < keep.size:
        base = ends[start - 1] if start else 0
        stop = int(np.searchsorted(ends, base + _CANDIDATES_PER_CHUNK, side="right"))
        stop = max(stop, start + 1)
        _rasterise_chunk(keep[start:stop], V, simplices, c, lo_idx, box, counts, origin, h,
                         strides, out, located)
        start = stop


def _rasterise_chunk(ids, V, simplices, c, lo_idx, box, counts, origin, h, strides, out,
                     located) -> None:
    dim = V.shape[2]
    Vs = V[ids]
    ref = Vs[:, dim, :]  # last corner as origin of the barycentric map
    E = np.swapaxes(Vs[:, :dim, :] - ref[:, None, :], 1, 2)  # columns: edge vectors
    det = np.linalg.det(E)
    scale = np.abs(E).max(axis=(1, 2)) ** dim
    good = np.abs(det) > 1e-12 * np.maximum(scale, 1e-300)
    if not np.any(good):
        return
    ids, ref, E = ids[good], ref[good], E[good]
    T = np.linalg.inv(E)  # (n, dim, dim)
    n_each = counts[ids]
    owner = np.repeat(np.arange(ids.size), n_each)
    offset = np.arange(owner.size) - np.repeat(np.cumsum(n_each) - n_each, n_each)
    # unravel the offset inside each simplex's box (C order)
    b = box[ids][owner]
    local = np.empty((owner.size, dim), dtype=np.int64)
    rest = offset
    for d in range(dim - 1, -1, -1):
        local[:, d] = rest % b[:, d]
        rest = rest // b[:, d]
    index = lo_idx[ids][owner] + local
    x = origin + index * h
    lam = np.einsum("nij,nj->ni", T[owner], x - ref[owner])
    lam_last = 1.0 - lam.sum(axis=1)
    inside = (lam.min(axis=1) >= -_INSIDE_TOL) & (lam_last >= -_INSIDE_TOL)
    if not np.any(inside):
        return
    owner, lam, lam_last, index = owner[inside], lam[inside], lam_last[inside], index[inside]
    corner_values = c[simplices[ids[owner]]]  # (m, dim+1)
    value = np.einsum("ni,ni->n", lam, corner_values[:, :dim]) + lam_last * corner_values[:, dim]
    flat = index @ strides
    located[flat] = True
    finite = np.isfinite(value)  # a sample on a face shared with a NaN cell keeps the finite value
    out[flat[finite]] = value[finite]
