"""Resampling a point field of any mesh onto a regular sampling grid.

Two runs on different meshes are compared on one regular grid. Each sample is
placed at the centre of a grid box (so ``n`` samples along an axis of length
``L`` sit at ``lo + (i + 1/2) L / n``), and every box stands for the volume
``prod(spacing)``: sums over samples are midpoint-rule integrals.

Interpolation inside the mesh:

* a rectilinear grid of quads or hexahedra (:attr:`Mesh.regular_grid`) is
  interpolated multilinearly (bilinear / trilinear, the cells' own shape
  functions) with ``scipy.interpolate.RegularGridInterpolator``;
* any other mesh is split into simplices by the conforming split of
  :func:`phasegauge.model.simplices.split_cells` (no gaps between cells, even
  where quad faces are bent), each simplex is rasterised onto the sampling grid
  (only samples inside its bounding box are tested) and samples that pass the
  barycentric test get the linear interpolant of the corner values. The loop
  runs over chunks of simplices, never over single cells.

Samples outside the mesh (or in cells with a non-finite corner value) are NaN.
"""

from __future__ import annotations

import warnings
from dataclasses import dataclass

import numpy as np

from ..errors import InputError, OptionError, ResolutionWarning
from ..model.axes import AXIS_NAMES
from ..model.mesh import Mesh
from ..model.simplices import split_cells

__all__ = ["SamplingGrid", "common_grid", "resample_to_grid"]

#: candidate (sample, simplex) pairs tested at once; bounds the memory of one chunk
_CANDIDATES_PER_CHUNK = 2_000_000
#: barycentric coordinates down to -_INSIDE_TOL count as inside (samples on shared faces)
_INSIDE_TOL = 1e-10
#: simplices rasterised per pass (bounds the memory of their corner coordinates)
_SIMPLICES_PER_PASS = 1 << 18


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
        pa = "".join(AXIS_NAMES[i] for i in mesh_a.plane_axes)
        pb = "".join(AXIS_NAMES[i] for i in mesh_b.plane_axes)
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
    other mesh piecewise linearly on the conforming split of its cells into
    simplices (for a quad or a hexahedron that is not the cell's own
    bilinear/trilinear interpolant; both are second-order accurate, and both
    reproduce a linear field exactly). A sample on a face shared by two cells
    takes either cell's value (equal: the interpolant is continuous).

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
    split = split_cells(mesh, values=c)
    X, values, S = split.coordinates, split.values, split.simplices
    for start in range(0, S.shape[0], _SIMPLICES_PER_PASS):
        _rasterise(X, values, S[start:start + _SIMPLICES_PER_PASS], grid, out)
    return out.reshape(grid.shape)


def _resample_rectilinear(mesh: Mesh, c: np.ndarray, grid: SamplingGrid) -> np.ndarray:
    from scipy.interpolate import RegularGridInterpolator

    layout = mesh.regular_grid
    values = layout.points_to_array(c)
    interp = RegularGridInterpolator(layout.axes, values, method="linear", bounds_error=False,
                                     fill_value=np.nan)
    return interp(grid.points()).reshape(grid.shape)


def _rasterise(X: np.ndarray, c: np.ndarray, simplices: np.ndarray, grid: SamplingGrid,
               out: np.ndarray) -> None:
    """Write the linear interpolant of every simplex at the grid samples inside it."""
    dim = grid.dimension
    origin, h, shape = grid.origin, grid.spacing, grid.shape
    strides = np.array([int(np.prod(shape[d + 1:])) for d in range(dim)], dtype=np.int64)
    columns = [np.ascontiguousarray(X[:, a]) for a in range(dim)]
    # corner by corner, axis by axis: P[j][a] is coordinate a of corner j of every simplex
    P = [[column[simplices[:, j]] for column in columns] for j in range(dim + 1)]
    # per axis, the first and the number of samples in each simplex's bounding box
    first, size = [], []
    counts = np.ones(simplices.shape[0], dtype=np.int64)
    for a in range(dim):
        low, high = P[0][a].copy(), P[0][a].copy()
        for j in range(1, dim + 1):
            np.minimum(low, P[j][a], out=low)
            np.maximum(high, P[j][a], out=high)
        for bound in (low, high):
            bound -= origin[a]
            bound /= h[a]
        np.ceil(low - 1e-9, out=low)
        np.floor(high + 1e-9, out=high)
        np.maximum(low, 0, out=low)
        np.minimum(high, shape[a] - 1, out=high)
        high -= low
        high += 1
        np.maximum(high, 0, out=high)
        first.append(low.astype(np.int64))
        size.append(high.astype(np.int64))
        counts *= size[-1]
    keep = np.flatnonzero(counts)
    if keep.size == 0:
        return
    inverse, ref, good = _barycentric_maps([[p[keep] for p in corner] for corner in P])
    keep = keep[good]
    inverse, ref = [[e[good] for e in row] for row in inverse], [r[good] for r in ref]
    low = np.stack([f[keep] for f in first], axis=1)
    size = [n[keep] for n in size]
    # simplices grouped by the shape of their box of samples: a group tests the same offsets from
    # each simplex's lowest sample, so its candidates are one broadcast, with no per-pair indexing
    key = size[0]
    for n in size[1:]:
        key = key * (int(n.max()) + 1) + n
    if key.max() < 2 ** 15:
        key = key.astype(np.int16)  # a radix sort
    order = np.argsort(key, kind="stable")
    starts = np.flatnonzero(np.diff(key[order], prepend=-1))
    for begin, end in zip(starts, np.append(starts[1:], order.size)):
        group = order[begin:end]
        box = [int(n[group[0]]) for n in size]
        offsets = np.stack(np.meshgrid(*[np.arange(n) for n in box], indexing="ij"), axis=-1).reshape(-1, dim)
        per_pass = max(1, _CANDIDATES_PER_CHUNK // offsets.shape[0])
        for at in range(0, group.size, per_pass):
            rows = group[at:at + per_pass]
            _rasterise_group(keep[rows], [[e[rows] for e in row] for row in inverse], [r[rows] for r in ref],
                             low[rows], offsets, simplices, c, grid, strides, out)


def _barycentric_maps(P: list) -> tuple:
    """Per simplex, the map from a point to its first ``dim`` barycentric coordinates.

    ``P[j][a]``: coordinate a of corner j (arrays (n,)). Returns the inverse of the
    edge matrix (columns: corner j minus the last corner) as rows of entry arrays
    (n,), the last corner by axis, and True for simplices that are not degenerate
    (|det| above 1e-12 of the largest edge component to the power dim). The inverse
    by cofactors (rows: cross products of the other edges over the determinant), as
    Cramer's rule gives it.
    """
    dim = len(P) - 1
    ref = P[dim]
    e = [[p[a] - ref[a] for a in range(dim)] for p in P[:dim]]  # e[j][a]: edge j, axis a
    if dim == 2:
        (ax, ay), (bx, by) = e
        det = ax * by - bx * ay
        rows = [[by, -bx], [-ay, ax]]
    else:
        (ax, ay, az), (bx, by, bz), (cx, cy, cz) = e
        rows = [[by * cz - bz * cy, bz * cx - bx * cz, bx * cy - by * cx],  # b x c
                [cy * az - cz * ay, cz * ax - cx * az, cx * ay - cy * ax],  # c x a
                [ay * bz - az * by, az * bx - ax * bz, ax * by - ay * bx]]  # a x b
        det = ax * rows[0][0] + ay * rows[0][1] + az * rows[0][2]
    scale = np.abs(e[0][0])
    for edge in e:
        for component in edge:
            np.maximum(scale, np.abs(component), out=scale)
    good = np.abs(det) > 1e-12 * np.maximum(scale ** dim, 1e-300)
    with np.errstate(divide="ignore", invalid="ignore"):
        reciprocal = 1.0 / det
    for row in rows:
        for entry in row:
            entry *= reciprocal
    return rows, ref, good


def _rasterise_group(ids, inverse, ref, low, offsets, simplices, c, grid, strides, out) -> None:
    """Test the samples at ``offsets`` (m, dim) from each simplex's lowest sample ``low`` (n, dim);
    write the interpolant at those inside."""
    dim = len(ref)
    origin, h = grid.origin, grid.spacing
    # each candidate minus the simplex's last corner, per axis: (n, m)
    d = [(low[:, j] * h[j] + (origin[j] - ref[j]))[:, None] + (offsets[:, j] * h[j])[None, :] for j in range(dim)]
    lam = []  # barycentric coordinates of the first dim corners, (n, m) each
    for row in inverse:
        value = row[0][:, None] * d[0]
        for j in range(1, dim):
            value += row[j][:, None] * d[j]
        lam.append(value)
    lam_last = 1.0 - sum(lam)
    inside = lam_last >= -_INSIDE_TOL
    for value in lam:
        inside &= value >= -_INSIDE_TOL
    which, at = np.nonzero(inside)
    if which.size == 0:
        return
    lam, lam_last = [value[which, at] for value in lam], lam_last[which, at]
    corners = simplices[ids[which]]
    value = lam_last * c[corners[:, dim]]
    for j in range(dim):
        value += lam[j] * c[corners[:, j]]
    flat = (low[which] + offsets[at]) @ strides
    finite = np.isfinite(value)  # a sample on a face shared with a NaN cell keeps the finite value
    out[flat[finite]] = value[finite]
