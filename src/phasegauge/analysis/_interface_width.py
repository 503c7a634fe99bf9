"""Interface width: band volume, threshold-free, second-moment and local profile fits.

All width integrals use the piecewise-linear interpolant of the point values of
c (clipped to [0, 1]) on the simplex split of the cells
(:func:`phasegauge.analysis._contour.split_cells`): band volumes, int c(1 - c)
and int |grad c| are then exact for that interpolant, so a band edge cutting a
cell is resolved below the cell size (a cell-wise band count would be off by up
to a cell layer).

The integrals run in chunks over the simplices of the cells where c is not
within 1e-6 of 0 or 1; only simplices a band edge passes through are sorted.
Meshes of triangles or tetrahedra are read straight from their connectivity;
regular hexahedral grids cut by the 6-tetrahedra table are integrated in grid
index space, each tetrahedron's gradient being corner differences over the
grid spacing. All paths give the same integrals up to round-off.

Every width is reported as the equivalent 5-95 % thickness of the logistic
profile c(n) = 1/2 (1 + tanh(n / (2 eps))) (Olsson & Kreiss 2005), which is
2 ln(19) eps = 5.889 eps, so that the estimators can be compared directly; the
logistic eps itself is returned as ``interface_eps``.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from ..errors import OptionError
from ..model._grouping import sort_columns
from ..model.mesh import Mesh
from ._contour import Contour, SimplexSplit, _corner_extremes, find_interface, split_cells

__all__ = ["interface_metrics", "interface_profile_table", "cell_gradient", "METRIC_KEYS",
           "WIDTH_PER_EPS"]

#: 5-95 % thickness of the logistic profile per unit eps: 2 ln(0.95 / 0.05)
WIDTH_PER_EPS = 2.0 * np.log(19.0)
#: 10-90 % thickness per unit eps: 2 ln 9
_WIDTH_10_90_PER_EPS = 2.0 * np.log(9.0)
#: below this many cells across 0.1 < c < 0.9 a stretch of interface counts as under-resolved
RESOLVED_CELLS = 4.0
#: cells whose corners all lie within this of 0 or of 1 are left out of the width integrals
_TAIL = 1e-6
#: the second moment is taken out to this many eps from the contour
_MOMENT_RANGE = 10.0

METRIC_KEYS = ("interface_size", "interface_width", "interface_width_cells", "width_threshold_free",
               "interface_eps", "width_second_moment", "interface_variance", "width_profile_median",
               "width_profile_p90", "widest_x", "widest_y", "widest_z",
               "under_resolved_interface_fraction")

PROFILE_COLUMNS = ("element", "cell", "x", "y", "z", "normal_x", "normal_y", "normal_z", "cell_size",
                   "offset", "interface_eps", "width", "width_cells", "n_samples", "weight")


# --------------------------------------------------------------------------- arguments

def _indicator_values(mesh: Mesh, indicator, *, need_cells: bool = True):
    """(cell values, point values) of an Indicator or a plain array (cells None if not needed)."""
    if hasattr(indicator, "cell") and hasattr(indicator, "point"):
        cell = np.asarray(indicator.cell, dtype=np.float64)
        point = np.asarray(indicator.point, dtype=np.float64)
        if cell.shape != (mesh.n_cells,) or point.shape != (mesh.n_points,):
            raise OptionError(f"indicator does not fit the mesh ({mesh.n_cells} cells, "
                              f"{mesh.n_points} points)", fix="build the indicator on this mesh")
        return cell, point
    values = np.asarray(indicator, dtype=np.float64)
    if values.shape == (mesh.n_points,):
        return (mesh.point_to_cell(values) if need_cells else None), values
    if values.shape == (mesh.n_cells,):
        return values, mesh.cell_to_point(values)
    raise OptionError(f"indicator must be an Indicator or an array of {mesh.n_points} point or "
                      f"{mesh.n_cells} cell values, found shape {values.shape}",
                      fix="pass make_indicator(...) or Indicator.point")


def _check_samples(max_samples) -> int:
    if isinstance(max_samples, bool) or not isinstance(max_samples, (int, np.integer)) or max_samples < 1:
        raise OptionError(f"max_samples must be a positive integer, found {max_samples!r}",
                          fix="for example max_samples=2000")
    return int(max_samples)


# --------------------------------------------------------------------------- gradients

def cell_gradient(mesh: Mesh, c_point, *, cells=None) -> np.ndarray:
    """Gradient of c in each cell by least squares over the cell's corners.

    Parameters
    ----------
    mesh : Mesh
    c_point : ndarray of shape (n_points,)
        Point values of c.
    cells : ndarray of int, optional
        Cells wanted (may repeat); default all.

    Returns
    -------
    ndarray of shape (n, dimension), in 1 / length units
        NaN for a cell with a NaN corner.

    Notes
    -----
    Solves sum_i (c_i - cbar - g . (x_i - xbar))^2 -> min over the corners: exact
    for the linear field of a triangle or tetrahedron, the centre gradient of
    the bilinear / trilinear field of a parallelogram or parallelepiped cell.

    References
    ----------
    .. [1] Barth, T. J. and Jespersen, D. C. (1989), "The design and
       application of upwind schemes on unstructured meshes", AIAA 89-0366
       (least-squares gradient reconstruction).
    """
    c = np.asarray(c_point, dtype=np.float64)
    X = mesh.coordinates
    dim = mesh.dimension
    if cells is None:
        wanted = np.arange(mesh.n_cells)
    else:
        wanted = np.asarray(cells, dtype=np.int64)
    unique, inverse = np.unique(wanted, return_inverse=True)
    out = np.full((unique.size, dim), np.nan)
    offsets = mesh.block_offsets
    for b, block in enumerate(mesh.blocks):
        lo, hi = offsets[b], offsets[b + 1]
        i0, i1 = np.searchsorted(unique, [lo, hi])
        if i1 == i0:
            continue
        conn = block.connectivity[unique[i0:i1] - lo]
        P = X[conn]
        v = c[conn]
        P = P - P.mean(axis=1, keepdims=True)
        v = v - v.mean(axis=1, keepdims=True)
        A = np.einsum("nki,nkj->nij", P, P)
        rhs = np.einsum("nki,nk->ni", P, v)
        scale = np.trace(A, axis1=1, axis2=2)[:, None, None]
        A = A + 1e-12 * scale * np.eye(dim)
        ok = scale[:, 0, 0] > 0
        g = np.full((conn.shape[0], dim), np.nan)
        g[ok] = np.linalg.solve(A[ok], rhs[ok][..., None])[..., 0]
        out[i0:i1] = g
    return out[inverse.ravel()]


#: simplices per chunk of the integral passes (temporaries stay in cache)
_CHUNK = 1 << 15
#: band edges of ``interface_width``
_LOW, _HIGH = 0.05, 0.95
#: cell types that are their own simplex split (integrated straight from the connectivity)
_DIRECT_TYPES = ("triangle", "tetra")


def _chunks(n: int, size: int = _CHUNK):
    """Slices of at most ``size`` items covering ``range(n)``."""
    return [slice(start, start + size) for start in range(0, n, size)]


def _simplex_gradients(columns: list, ids: list, values: list):
    """Unsigned measures and |grad c| of the linear field on each simplex.

    ``columns`` are the vertex coordinates by axis (dim arrays), ``ids`` the
    vertex ids of the simplices by corner (dim + 1 arrays of length n) and
    ``values`` the vertex values by corner. The gradient comes by Cramer's
    rule, |grad c| = |adj(E) dv| / |det E| (zero on a degenerate simplex); the
    determinant is d! times the signed measure.
    """
    x0 = [col[ids[0]] for col in columns]
    e = [[col[i] - start for col, start in zip(columns, x0)] for i in ids[1:]]
    dv = [v - values[0] for v in values[1:]]
    if len(columns) == 2:
        (ax, ay), (bx, by) = e
        det = ax * by - ay * bx
        gx = dv[0] * by - dv[1] * ay
        gy = dv[1] * ax - dv[0] * bx
        norm = np.sqrt(gx * gx + gy * gy)
        factorial = 2.0
    else:
        (ax, ay, az), (bx, by, bz), (cx, cy, cz) = e
        p, q, r = by * cz - bz * cy, bz * cx - bx * cz, bx * cy - by * cx  # b x c
        det = ax * p + ay * q + az * r
        gx, gy, gz = dv[0] * p, dv[0] * q, dv[0] * r
        p, q, r = cy * az - cz * ay, cz * ax - cx * az, cx * ay - cy * ax  # c x a
        gx += dv[1] * p
        gy += dv[1] * q
        gz += dv[1] * r
        p, q, r = ay * bz - az * by, az * bx - ax * bz, ax * by - ay * bx  # a x b
        gx += dv[2] * p
        gy += dv[2] * q
        gz += dv[2] * r
        norm = np.sqrt(gx * gx + gy * gy + gz * gz)
        factorial = 6.0
    size = np.abs(det)
    gnorm = np.divide(norm, size, out=np.zeros_like(norm), where=size != 0)
    return size / factorial, gnorm


def _band_volume(measures: np.ndarray, values: list) -> float:
    """Volume of 0.05 < c < 0.95 over simplices (vertex values by corner).

    Simplices wholly inside the band count their measure, wholly outside
    nothing; only those a band edge may cut are sorted and integrated.
    """
    low, high = values[0].copy(), values[0].copy()
    for v in values[1:]:
        np.minimum(low, v, out=low)
        np.maximum(high, v, out=high)
    inside = (low > _LOW) & (high < _HIGH)
    band = float(measures[inside].sum())
    cut = np.flatnonzero(~inside & (high >= _LOW) & (low <= _HIGH))
    if cut.size:
        ordered = sort_columns([v[cut] for v in values])
        band += float((measures[cut] * (_fraction_of(ordered, _HIGH) - _fraction_of(ordered, _LOW))).sum())
    return band


def _sums(values: list) -> tuple[np.ndarray, np.ndarray]:
    """Per simplex, the sum of the vertex values (by corner) and the sum of their squares."""
    total = values[0] + values[1]
    squares = values[0] * values[0] + values[1] * values[1]
    for v in values[2:]:
        total += v
        squares += v * v
    return total, squares


def _mixed_integral(measures: np.ndarray, values: list) -> float:
    """int c (1 - c) over simplices: measure x (sum c sum (1 - c) + sum c (1 - c)) / (k (k + 1))."""
    k = len(values)
    total, squares = _sums(values)
    return float((measures * (total * (k - total) + total - squares)).sum()) / (k * (k + 1))


def _fraction_of(ordered: list, t: float) -> np.ndarray:
    """:func:`_fraction_below` of vertex values sorted by column, each branch on its own rows.

    The same formulas and branch order row by row; 0 below the lowest vertex
    value, 1 from the highest on.
    """
    out = (t >= ordered[-1]).astype(np.float64)
    rows = np.flatnonzero((t >= ordered[0]) & (t < ordered[-1]))
    if rows.size == 0:
        return out
    v = [x[rows] for x in ordered]
    part = np.zeros(rows.size)
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        if len(v) == 3:
            v0, v1, v2 = v
            low = (t > v0) & (t <= v1)
            a, b, c = v0[low], v1[low], v2[low]
            part[low] = (t - a) ** 2 / ((b - a) * (c - a))
            high = t > v1
            a, b, c = v0[high], v1[high], v2[high]
            part[high] = 1.0 - (c - t) ** 2 / ((c - a) * (c - b))
        else:
            v0, v1, v2, v3 = v
            high = t >= v2
            low = (t > v0) & (t <= v1) & ~high
            mid = (t > v1) & ~high
            a, b, c, d = v0[low], v1[low], v2[low], v3[low]
            part[low] = (t - a) ** 3 / ((b - a) * (c - a) * (d - a))
            a, b, c, d = v0[high], v1[high], v2[high], v3[high]
            part[high] = 1.0 - (d - t) ** 3 / ((d - a) * (d - b) * (d - c))
            if mid.any():
                a, b, c2, c3 = v0[mid], v1[mid], v2[mid], v3[mid]
                gap = b - a
                tiny = gap <= 1e-6 * (c3 - a)
                # F = -(g(b) - g(a)) / (b - a), a divided difference; its limit -g'(a) on a tie
                value = -((t - b) ** 3 / ((c2 - b) * (c3 - b)) - (t - a) ** 3 / ((c2 - a) * (c3 - a))) \
                    / np.where(tiny, 1.0, gap)
                if tiny.any():
                    x, p, q = a[tiny], c2[tiny], c3[tiny]
                    deriv = (-3 * (t - x) ** 2 / ((p - x) * (q - x))
                             + (t - x) ** 3 * (1 / ((p - x) ** 2 * (q - x)) + 1 / ((p - x) * (q - x) ** 2)))
                    value[tiny] = -deriv
                part[mid] = value
    out[rows] = np.clip(part, 0.0, 1.0)
    return out


def _moment_sums(weights: np.ndarray, d: list) -> tuple[float, float, float]:
    """Sums of w, w mean(d) and w (int d^2 / measure) over simplices whose vertex distances are all known.

    ``weights`` is measure x |grad c| per simplex, ``d`` the vertex
    distances by corner (NaN where not known).
    """
    k = len(d)
    total, squares = _sums(d)
    ok = np.isfinite(total)
    w = weights[ok]
    total = total[ok]
    return (float(w.sum()), float((w * total).sum()) / k,
            float((w * (total * total + squares[ok])).sum()) / (k * (k + 1)))


class _SplitBand:
    """Width integrals on the simplex split of the active cells (any mesh).

    Attributes
    ----------
    count : int
        Number of simplices.
    band, mixed, total_gradient : float
        Band volume of 0.05 < c < 0.95, int c (1 - c) and int |grad c| over
        the simplices.
    known : ndarray of bool, shape (n_vertices,)
        Vertices of the simplices where c is not constant.
    """

    def __init__(self, mesh: Mesh, clipped: np.ndarray, active: np.ndarray):
        self.mesh = mesh
        if all(block.cell_type in _DIRECT_TYPES for block in mesh.blocks):
            # the cells are their own split: read them block by block, no copy
            self.split = SimplexSplit(mesh.coordinates, clipped, np.zeros((0, mesh.dimension + 1), np.int64),
                                      np.zeros(0, np.int64))
            self.active = active
        else:
            self.split = split_cells(mesh, clipped, active)
            self.active = None
        values = self.split.values
        columns = [np.ascontiguousarray(self.split.coordinates[:, i]) for i in range(mesh.dimension)]
        weights = []
        self.known = np.zeros(values.shape[0], dtype=bool)
        self.band = self.mixed = 0.0
        for ids in self._pieces():
            vertex_values = [values[i] for i in ids]
            measures, gnorm = _simplex_gradients(columns, ids, vertex_values)
            weights.append(measures * gnorm)
            self.band += _band_volume(measures, vertex_values)
            self.mixed += _mixed_integral(measures, vertex_values)
            varying = weights[-1] > 0
            for i in ids:
                self.known[i[varying]] = True
        self.weights = np.concatenate(weights) if weights else np.zeros(0)
        self.count = self.weights.size
        self.total_gradient = float(self.weights.sum())

    def _pieces(self):
        """Vertex ids by corner of the simplices, chunk by chunk (the same order every time)."""
        if self.active is None:
            S = self.split.simplices
            for part in _chunks(S.shape[0]):
                yield [np.ascontiguousarray(S[part, i]) for i in range(S.shape[1])]
            return
        for block, start in zip(self.mesh.blocks, self.mesh.block_offsets[:-1]):
            conn = block.connectivity
            for part in _chunks(len(block)):
                keep = self.active[start + part.start:start + min(part.stop, len(block))]
                rows = conn[part]
                if keep.any():
                    yield [rows[:, i][keep] for i in range(rows.shape[1])]

    def distances(self, geometry: _ContourGeometry, level: float, bound: float) -> np.ndarray:
        """Signed distances at the known vertices (NaN elsewhere and beyond ``bound``)."""
        return _vertex_distances(self.split, self.known, geometry, self.mesh.plane_axes, level, bound)

    def moments(self, dist: np.ndarray) -> tuple[float, float, float]:
        """(m0, m1, m2) of :func:`_moment_sums` over all simplices."""
        m = np.zeros(3)
        start = 0
        for ids in self._pieces():
            n = ids[0].size
            m += _moment_sums(self.weights[start:start + n], [dist[i] for i in ids])
            start += n
        return tuple(float(x) for x in m)

    def at_points(self, dist: np.ndarray):
        """(c, signed distance, known) at the mesh points, for the profile fits."""
        n = self.mesh.n_points
        return self.split.values[:n], dist[:n], self.known[:n]


def _grid_tetrahedra(mesh: Mesh):
    """Layout for the width integrals in grid index space, or None (cached per mesh).

    Applies to a 3D regular grid (:attr:`Mesh.regular_grid`) whose hexahedra
    list their corners in the VTK order from each cell's lowest grid corner and
    whose point coordinates equal the grid axes exactly. Its quad faces are then
    flat (exactly) and every cell is a translate of the others in index space,
    so the 6-tetrahedra table cuts each shared face along the same diagonal from
    both sides: :func:`split_cells` takes that table for all cells
    (:func:`_few_simplex_cells`, not needed here), and each tetrahedron's
    gradient is corner differences over the cell's spacing. Holds no per-cell
    arrays: the grid's own indices suffice.
    """

    def compute():
        from ._simplices import _SPLIT

        grid = mesh.regular_grid
        if mesh.dimension != 3 or grid is None or mesh.n_cells == 0:
            return None
        shape = grid.point_shape
        offsets = np.array([(0, 0, 0), (1, 0, 0), (1, 1, 0), (0, 1, 0),
                            (0, 0, 1), (1, 0, 1), (1, 1, 1), (0, 1, 1)])
        steps = offsets @ np.array([shape[1] * shape[2], shape[2], 1])
        start = 0
        for block in mesh.blocks:
            cells = grid.cell_index[start:start + len(block)]
            start += len(block)
            ijk = np.unravel_index(cells, grid.cell_shape)
            base = np.ravel_multi_index(ijk, shape)
            for corner, step in enumerate(steps):
                if not np.array_equal(grid.point_index[block.connectivity[:, corner]], base + step):
                    return None
        index = np.unravel_index(grid.point_index, shape)
        for d, axis_values in enumerate(grid.axes):
            if not np.array_equal(mesh.coordinates[:, d], axis_values[index[d]]):
                return None
        # each tetrahedron of the table is a path 0 -> a -> b -> 6 along three cell edges, one
        # per axis: its gradient is the three corner differences over the spacings
        tets, edges = [], {}
        for local in _SPLIT["hexahedron"]:
            middle = [q for q in local if q not in (0, 6)]
            for order in (middle, middle[::-1]):
                path = list(zip([0] + order, order + [6]))
                if all(sorted(offsets[b] - offsets[a]) == [0, 0, 1] for a, b in path):
                    break
            else:  # pragma: no cover - the table is fixed
                return None
            for a, b in path:
                edges[a, b] = int(np.argmax(offsets[b] - offsets[a]))
            tets.append((list(local), middle, path))
        return {"steps": steps, "tets": tets, "edges": edges}

    return mesh.memo("grid_tetrahedra", compute)


class _GridBand:
    """Width integrals on the 6-tetrahedra split of a regular hexahedral grid, in index space.

    Same attributes and methods as :class:`_SplitBand`; vertices are the
    grid points in C order (``RegularGrid.point_shape``).
    """

    def __init__(self, mesh: Mesh, clipped: np.ndarray, layout: dict):
        grid = mesh.regular_grid
        self.mesh, self.grid, self.layout = mesh, grid, layout
        values = np.empty(mesh.n_points)
        values[grid.point_index] = clipped
        self.values = values
        # per-cell corner extremes, one grid axis at a time
        low = high = values.reshape(grid.point_shape)
        for axis in range(3):
            head = tuple(slice(None, -1) if a == axis else slice(None) for a in range(3))
            tail = tuple(slice(1, None) if a == axis else slice(None) for a in range(3))
            low = np.minimum(low[head], low[tail])
            high = np.maximum(high[head], high[tail])
        cells = np.flatnonzero((high > _TAIL) & (low < 1.0 - _TAIL))
        low, high = low.ravel()[cells], high.ravel()[cells]
        nx, ny, nz = grid.cell_shape
        i, j, k = cells // (ny * nz), (cells // nz) % ny, cells % nz
        self.base = cells + i * (ny + nz + 1) + j  # flat index of each cell's lowest point
        del cells
        spacing = [np.diff(axis_values) for axis_values in grid.axes]
        h = [spacing[0][i], spacing[1][j], spacing[2][k]]
        del i, j, k
        n = self.base.size
        self.count = 6 * n
        self.weights = np.empty((6, n))
        varying = np.zeros(n, dtype=bool)
        self.known = np.zeros(mesh.n_points, dtype=bool)
        self.band = self.mixed = 0.0
        tets, edges = layout["tets"], layout["edges"]
        for part in _chunks(n, _CHUNK):
            ids = [self.base[part] + step for step in layout["steps"]]
            corner = [values[p] for p in ids]
            # every tetrahedron's gradient runs along three cell edges: (c[b] - c[a]) / h per axis
            slope = {}
            for (a, b), axis in edges.items():
                g = (corner[b] - corner[a]) / h[axis][part]
                slope[a, b] = g * g
            measures = h[0][part] * h[1][part] * h[2][part] / 6.0
            # int c (1 - c) over the six: measure (5 s - s^2 - q) / 20 each, s and q the sums of
            # the corner values and their squares; corners 0 and 6 are on every tetrahedron, the
            # others on two
            ends = corner[0] + corner[6]
            linear = 6.0 * ends
            squares = 6.0 * (corner[0] * corner[0] + corner[6] * corner[6])
            for q in (1, 2, 3, 4, 5, 7):
                linear += 2.0 * corner[q]
                squares += 2.0 * corner[q] * corner[q]
            mixed = 5.0 * linear - squares
            for t, (_, (a, b), path) in enumerate(tets):
                self.weights[t, part] = measures * np.sqrt(slope[path[0]] + slope[path[1]] + slope[path[2]])
                total = ends + corner[a] + corner[b]
                mixed -= total * total
            self.mixed += float((measures * mixed).sum()) / 20.0
            # band volume: whole cells inside or outside the band by their corner extremes
            lo, hi = low[part], high[part]
            inside = (lo > _LOW) & (hi < _HIGH)
            self.band += 6.0 * float(measures[inside].sum())
            cut = np.flatnonzero(~inside & (hi >= _LOW) & (lo <= _HIGH))
            if cut.size:
                for local, _, _ in tets:
                    self.band += _band_volume(measures[cut], [corner[q][cut] for q in local])
            # vertices of the tetrahedra where c varies: every corner of a cell where it varies on
            # all six (marked below, by cells), else tetrahedron by tetrahedron
            weights = self.weights[:, part]
            every = np.all(weights > 0, axis=0)
            varying[part] = every
            some = np.flatnonzero(~every)
            for t, (local, _, _) in enumerate(tets):
                which = some[weights[t, some] > 0]
                for q in local:
                    self.known[ids[q][which]] = True
        # corners of the cells marked: their lowest points, spread over the 8 corners
        lowest = np.zeros(mesh.n_points, dtype=bool)
        lowest[self.base[varying]] = True
        spread = lowest.reshape(grid.point_shape)
        for axis in range(3):
            head = tuple(slice(None, -1) if a == axis else slice(None) for a in range(3))
            tail = tuple(slice(1, None) if a == axis else slice(None) for a in range(3))
            spread = spread.copy()
            spread[tail] |= spread[head]
        self.known |= spread.ravel()
        self.total_gradient = float(self.weights.sum())

    def distances(self, geometry: _ContourGeometry, level: float, bound: float) -> np.ndarray:
        grid = self.grid
        wanted = np.flatnonzero(self.known)
        index = np.unravel_index(wanted, grid.point_shape)
        points = np.empty((wanted.size, 3))  # analysis coordinates: the grid axes, exactly
        for d, axis_values in enumerate(grid.axes):
            points[:, d] = axis_values[index[d]]
        dist = np.full(self.values.shape[0], np.nan)
        dist[wanted] = _signed_distance(points, self.values[wanted], geometry, self.mesh.plane_axes, level,
                                        bound)
        return dist

    def moments(self, dist: np.ndarray) -> tuple[float, float, float]:
        m = np.zeros(3)
        n = self.base.size
        for part in _chunks(n, _CHUNK // 2):
            base = self.base[part]
            d = [dist[base + step] for step in self.layout["steps"]]
            for t, (local, _, _) in enumerate(self.layout["tets"]):
                m += _moment_sums(self.weights[t, part], [d[q] for q in local])
        return tuple(float(x) for x in m)

    def at_points(self, dist: np.ndarray):
        index = self.grid.point_index
        return self.values[index], dist[index], self.known[index]


# --------------------------------------------------------------------------- simplex integrals

def _fraction_below(v: np.ndarray, t: float, *, presorted: bool = False) -> np.ndarray:
    """Measure fraction of each simplex where the linear field is below ``t``.

    ``v`` holds the vertex values, shape (n, d + 1) with d = 2 or 3 (sorted
    along axis 1 when ``presorted``). The distribution of a linear function
    over a simplex is a B-spline with knots at the vertex values; the branches
    below avoid dividing by a tie.
    """
    s = v if presorted else np.sort(v, axis=1)
    d = s.shape[1] - 1
    out = np.zeros(s.shape[0])
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        if d == 2:
            v0, v1, v2 = s.T
            low = (t > v0) & (t <= v1)
            out[low] = ((t - v0[low]) ** 2 / ((v1[low] - v0[low]) * (v2[low] - v0[low])))
            high = (t > v1) & (t < v2)
            out[high] = 1.0 - (v2[high] - t) ** 2 / ((v2[high] - v0[high]) * (v2[high] - v1[high]))
            out[t >= v2] = 1.0
            return out
        v0, v1, v2, v3 = s.T
        low = (t > v0) & (t <= v1)
        out[low] = (t - v0[low]) ** 3 / ((v1[low] - v0[low]) * (v2[low] - v0[low]) * (v3[low] - v0[low]))
        high = (t >= v2) & (t < v3)
        out[high] = 1.0 - (v3[high] - t) ** 3 / (
            (v3[high] - v0[high]) * (v3[high] - v1[high]) * (v3[high] - v2[high]))
        out[t >= v3] = 1.0
        mid = (t > v1) & (t < v2)
        if mid.any():
            a, b, c2, c3 = v0[mid], v1[mid], v2[mid], v3[mid]

            def g(x):
                return (t - x) ** 3 / ((c2 - x) * (c3 - x))

            gap = b - a
            tiny = gap <= 1e-6 * (c3 - a)
            # F = -(g(b) - g(a)) / (b - a), a divided difference; its limit -g'(a) on a tie
            direct = -(g(b) - g(a)) / np.where(tiny, 1.0, gap)
            x = a
            deriv = (-3 * (t - x) ** 2 / ((c2 - x) * (c3 - x))
                     + (t - x) ** 3 * (1 / ((c2 - x) ** 2 * (c3 - x)) + 1 / ((c2 - x) * (c3 - x) ** 2)))
            out[mid] = np.where(tiny, -deriv, direct)
    return np.clip(out, 0.0, 1.0)


# --------------------------------------------------------------------------- distances

#: query points per pass of the signed distances (the pass's temporaries stay small)
_QUERY_CHUNK = 1 << 16


def _nearest_plane_distance(points, rows, cent, normal, half, bound):
    """Distance from ``points[rows]`` to the nearest element's plane (see :func:`_signed_distance`)."""
    from scipy.spatial import cKDTree

    # a sliding-midpoint tree (not median-balanced): about 1.5-1.9x faster queries here, since the
    # centroids lie on a surface; equidistant centroids may resolve to another element than with a
    # balanced tree, which moved the second moment by 3e-11 relative on a 1M-cell grid
    tree = cKDTree(cent, balanced_tree=False, compact_nodes=False)
    out = np.full(rows.size, np.nan)
    for lo in range(0, rows.size, _QUERY_CHUNK):  # each query is on its own: chunks change nothing
        at = points[rows[lo:lo + _QUERY_CHUNK]]
        far, nearest = tree.query(at, k=1, distance_upper_bound=bound)
        near = np.isfinite(far)
        nearest = nearest[near]
        offset = at[near] - cent[nearest]
        across = np.abs(np.einsum("ij,ij->i", offset, normal[nearest]))
        lateral = np.sqrt(np.maximum(np.einsum("ij,ij->i", offset, offset) - across ** 2, 0.0))
        out[lo:lo + _QUERY_CHUNK][near] = np.sqrt(across ** 2 + np.maximum(lateral - half[nearest], 0.0) ** 2)
    return out


class _ContourGeometry:
    """A contour's element sizes, centroids and unit normals, computed once."""

    def __init__(self, contour: Contour):
        self.contour = contour
        self.sizes = contour.element_sizes
        self.size = float(self.sizes.sum())
        self.centroids = contour.centroids
        self.normals = contour.normals


def _signed_distance(points: np.ndarray, values: np.ndarray, geometry: _ContourGeometry, plane_axes,
                     level: float, bound: float = np.inf, near_band: float = 0.01) -> np.ndarray:
    """Signed distance from points (analysis coordinates) to the contour; positive where c > level.

    The distance is to the tangent line / plane of the nearest element (by
    centroid), continued as the distance to that element's centroid beyond
    its half-size: second-order accurate on a smooth interface. Points with
    c outside (near_band, 1 - near_band) search a thinned set of about 2000
    elements (a search from the middle of a sphere otherwise visits every
    element); their lateral allowance is the thinned spacing. Points farther
    than ``bound`` get NaN.
    """
    axes = list(plane_axes)
    contour = geometry.contour
    cent = geometry.centroids[:, axes]
    normal = geometry.normals[:, axes]
    sizes = geometry.sizes
    half = 0.5 * (sizes if contour.dimension == 2 else np.sqrt(sizes))
    dist = np.full(points.shape[0], np.nan)
    close = (values > near_band) & (values < 1.0 - near_band)
    rows = np.flatnonzero(close)
    dist[rows] = _nearest_plane_distance(points, rows, cent, normal, half, bound)
    rows = np.flatnonzero(~close)
    stride = max(1, contour.n_elements // 2000)
    if stride > 1:
        thin = slice(0, None, stride)
        spacing = (sizes.sum() / len(cent[thin])) ** (1.0 / (contour.dimension - 1))
        half_thin = np.maximum(half[thin], spacing)
        dist[rows] = _nearest_plane_distance(points, rows, cent[thin], normal[thin], half_thin, bound)
    else:
        dist[rows] = _nearest_plane_distance(points, rows, cent, normal, half, bound)
    np.negative(dist, out=dist, where=~(values > level))
    return dist


def _vertex_distances(split: SimplexSplit, wanted: np.ndarray, geometry: _ContourGeometry, plane_axes,
                      level: float, bound: float) -> np.ndarray:
    """Signed distances at the ``wanted`` split vertices (NaN elsewhere and beyond ``bound``).

    Computed at mesh points only: an added face or cell centre gets the mean of
    its corners' distances, as it got the mean of their coordinates and values
    (the same linear map; it differs from the centre's own distance by
    O(h^2 / R) on an interface of curvature radius R).
    """
    n = split.coordinates.shape[0] - sum(ids.size for ids, _ in split.centres)
    need = wanted[:n].copy()
    for ids, corners in split.centres:
        need[corners[wanted[ids]].ravel()] = True
    used = np.nonzero(need)[0]
    dist = np.full(n, np.nan)
    dist[used] = _signed_distance(split.coordinates[used], split.values[used], geometry,
                                  plane_axes, level, bound)
    return split.centre_means(dist)


# --------------------------------------------------------------------------- profile fits

def _fit_patches(group: np.ndarray, n_groups: int, d: np.ndarray, c: np.ndarray):
    """Weighted least squares of logit(c) = (d - d0) / eps in each group; returns eps, d0, count."""
    y = np.log(c / (1.0 - c))
    w = c * (1.0 - c)

    def total(x):
        return np.bincount(group, weights=x, minlength=n_groups)

    sw, sx, sy = total(w), total(w * d), total(w * y)
    sxx, sxy = total(w * d * d), total(w * d * y)
    count = np.bincount(group, minlength=n_groups)
    with np.errstate(divide="ignore", invalid="ignore"):
        mx, my = sx / sw, sy / sw
        vxx = sxx / sw - mx * mx
        slope = (sxy / sw - mx * my) / vxx
        eps = 1.0 / np.abs(slope)
        d0 = mx - my / slope
    spread = np.sqrt(np.maximum(vxx, 0.0))
    bad = (count < 3) | ~np.isfinite(eps) | ~(spread > 1e-9 * np.nanmax(np.abs(d), initial=1.0))
    eps[bad] = np.nan
    d0[bad] = np.nan
    return eps, d0, count


def _weighted_quantile(values: np.ndarray, weights: np.ndarray, q: float) -> float:
    ok = np.isfinite(values) & (weights > 0)
    if not ok.any():
        return float("nan")
    v, w = values[ok], weights[ok]
    order = np.argsort(v)
    v, w = v[order], w[order]
    cw = np.cumsum(w) - 0.5 * w
    return float(np.interp(q * w.sum(), cw, v))


def _profile_table(mesh: Mesh, geometry: _ContourGeometry, values: np.ndarray, dist: np.ndarray,
                   known: np.ndarray, width_guess: float, max_samples: int) -> pd.DataFrame:
    """Local logistic fits: the mesh points near each sampled element, c against normal distance."""
    from scipy.spatial import cKDTree

    contour = geometry.contour
    k = contour.n_elements
    stride = max(1, int(np.ceil(k / max_samples)))
    chosen = np.arange(0, k, stride)
    axes = list(mesh.plane_axes)
    n = mesh.n_points
    c = values[:n]
    band = known[:n] & np.isfinite(c) & (c > 0.05) & (c < 0.95)
    points = np.nonzero(band)[0]
    xyz = geometry.centroids[chosen]
    cells = contour.cells[chosen]
    h = mesh.cell_sizes[cells]
    guess = width_guess if np.isfinite(width_guess) else 0.0
    radius = np.maximum(0.35 * guess, 2.0 * h)
    if points.size:
        # every (sample, point) pair within the sample's radius, as arrays (no per-sample lists)
        pairs = cKDTree(xyz[:, axes]).sparse_distance_matrix(
            cKDTree(mesh.coordinates[points]), float(radius.max()), output_type="ndarray")
        pairs = pairs[pairs["v"] <= radius[pairs["i"]]]
        # sample by sample, points in increasing order: the sums below add up in a fixed order
        order = np.argsort(pairs["i"].astype(np.int64) * points.size + pairs["j"])
        group = pairs["i"][order].astype(np.int64)
        members = points[pairs["j"][order]]
        eps, d0, count = _fit_patches(group, len(chosen), dist[members], c[members])
    else:
        eps = d0 = np.full(len(chosen), np.nan)
        count = np.zeros(len(chosen), dtype=np.int64)
    width = WIDTH_PER_EPS * eps
    nrm = -geometry.normals[chosen]
    return pd.DataFrame({
        "element": chosen, "cell": cells, "x": xyz[:, 0], "y": xyz[:, 1], "z": xyz[:, 2],
        "normal_x": nrm[:, 0], "normal_y": nrm[:, 1], "normal_z": nrm[:, 2], "cell_size": h,
        "offset": d0, "interface_eps": eps, "width": width, "width_cells": width / h,
        "n_samples": count, "weight": geometry.sizes[chosen] * stride,
    }, columns=list(PROFILE_COLUMNS))


# --------------------------------------------------------------------------- main entry

class _Work:
    """Pieces shared by the metrics and the profile table."""

    def __init__(self, mesh: Mesh, indicator, level: float, contour):
        from ._contour import _check_level, _recall_extremes

        self.level = _check_level(level)
        self.mesh = mesh
        _, self.c_point = _indicator_values(mesh, indicator, need_cells=False)
        if contour is None:
            contour = find_interface(mesh, self.c_point, level=self.level)
        elif not isinstance(contour, Contour):
            raise OptionError(f"contour must be a Contour, found {type(contour).__name__}",
                              fix="pass the result of find_interface, or None")
        self.contour = contour
        self.clipped = np.clip(self.c_point, 0.0, 1.0)
        extremes = _recall_extremes(mesh, self.c_point)  # of find_interface on these values, if any
        layout = _grid_tetrahedra(mesh)
        if layout is not None:
            self.integrals = _GridBand(mesh, self.clipped, layout)
            return
        # the extremes of the clipped values are the clipped extremes: those of c will do
        lo, hi = extremes if extremes is not None else _corner_extremes(mesh, self.c_point)
        self.integrals = _SplitBand(mesh, self.clipped, (hi > _TAIL) & (lo < 1.0 - _TAIL))


def _nan_metrics() -> dict:
    return {key: float("nan") for key in METRIC_KEYS}


def interface_metrics(mesh: Mesh, indicator, *, level: float = 0.5, contour: Contour | None = None,
                      max_samples: int = 2000) -> dict:
    """Size and width of the interface, by four independent estimators.

    Parameters
    ----------
    mesh : Mesh
    indicator : Indicator or ndarray
        The phase indicator (:func:`phasegauge.make_indicator`), or an array
        of ``n_points`` point values or ``n_cells`` cell values (cell values
        are averaged to points with :meth:`Mesh.cell_to_point`).
    level : float
        Contour level, default 0.5.
    contour : Contour, optional
        The contour at ``level`` when already found (saves the work).
    max_samples : int
        At most this many contour elements (evenly strided) get a local
        profile fit.

    Returns
    -------
    dict
        ``interface_size`` : float, length (2D) or area (3D) of the contour.
        ``interface_width`` : float, length; band volume of 0.05 < c < 0.95
        divided by the interface size: the 5-95 % thickness (5.889 eps for
        the logistic profile).
        ``interface_width_cells`` : float; ``interface_width`` over the local
        cell size (length-weighted mean of the sizes of the cells the contour
        passes through).
        ``width_threshold_free`` : float, length; 5.889 ``interface_eps``.
        ``interface_eps`` : float, length; int c(1-c) dV / int |grad c| dV,
        the logistic eps with no threshold.
        ``width_second_moment`` : float, length; 5.889 sqrt(3 var) / pi, the
        logistic 5-95 % thickness with the same variance of dc/dn.
        ``interface_variance`` : float, length squared; variance of the
        normal-distance distribution weighted by |grad c| (of dc/dn), the
        quantity :func:`diffusion_audit` fits.
        ``width_profile_median``, ``width_profile_p90`` : float, length;
        length/area-weighted median and 90th percentile of the local logistic
        fits of c against normal distance (:func:`interface_profile_table`),
        as 5-95 % thickness.
        ``widest_x``, ``widest_y``, ``widest_z`` : float; where the local fit
        is widest.
        ``under_resolved_interface_fraction`` : float in [0, 1]; share of the
        interface size with fewer than 4 cells across 0.1 < c < 0.9 (common
        practice), the local 10-90 % thickness taken as ln 9 / (2 |grad c|).
        All NaN when c does not cross ``level``.

    Raises
    ------
    OptionError
        An indicator of the wrong shape, a non-finite level, a bad
        ``max_samples`` or a ``contour`` that is not a Contour.

    Notes
    -----
    Integrals use the piecewise-linear interpolant of the point values clipped
    to [0, 1] on the simplex split of every cell (exact for that interpolant),
    not the cell values: the band edges then cut cells at the right place.
    With cell data the point values are measure-weighted averages of the
    cells around each point, which smooths the profile slightly (widths come
    out a few % high at 4 cells across the interface, less when finer).
    Cells whose corners all lie within 1e-6 of 0 or of 1 are skipped; the
    second moment is taken out to max(10 eps, 4 h) from the contour (the
    logistic tails beyond hold 0.3 % of the variance: a small negative bias
    that cancels in the diffusion audit's relative terms).

    For the logistic profile c = 1/2 (1 + tanh(n / (2 eps))): band volume per
    area over a < c < 1 - a is 2 eps ln((1 - a) / a); int c(1 - c) dn = eps
    and int |dc/dn| dn = 1; dc/dn is a logistic density of variance
    pi^2 eps^2 / 3. The Cahn-Hilliard profile tanh(x / (sqrt(2) eps_CH)) in
    [-1, 1] is the same shape with eps = eps_CH / sqrt(2). The normal
    distance is measured to the contour itself; a curved interface adds
    O(w^2 / R) to the band and moment estimates.

    References
    ----------
    .. [1] Olsson, E. and Kreiss, G. (2005), "A conservative level set method
       for two phase flow", J. Comput. Phys. 210:225-246 (logistic profile).
    .. [2] Cahn, J. W. and Hilliard, J. E. (1958), "Free energy of a nonuniform
       system. I. Interfacial free energy", J. Chem. Phys. 28:258 (tanh profile).
    """
    max_samples = _check_samples(max_samples)
    work = _Work(mesh, indicator, level, contour)
    return _metrics(work, max_samples)[0]


def interface_profile_table(mesh: Mesh, indicator, *, level: float = 0.5,
                            contour: Contour | None = None, max_samples: int = 2000) -> pd.DataFrame:
    """Local logistic fits of c along interface normals, one row per sampled element.

    Parameters
    ----------
    mesh, indicator, level, contour, max_samples
        As for :func:`interface_metrics`.

    Returns
    -------
    pandas.DataFrame
        Columns ``element`` (contour element), ``cell`` (mesh cell), ``x, y,
        z`` (element centroid), ``normal_x, normal_y, normal_z`` (unit normal
        towards higher c), ``cell_size`` (length), ``offset`` (length, where
        the fit has c = 0.5 along the normal, from the centroid),
        ``interface_eps`` (length, local logistic eps), ``width`` (length,
        5.889 eps), ``width_cells``, ``n_samples`` (samples in 0.05 < c < 0.95
        used), ``weight`` (interface length/area the row stands for). Empty
        when c does not cross ``level``.

    Notes
    -----
    Each sampled element gathers the mesh points within max(0.35 w, 2 h) of
    its centroid (w the band-volume width, h the local cell size) whose c lies
    in 0.05 < c < 0.95, and fits logit(c) = (n - n0) / eps by weighted least
    squares (weights c (1 - c)), n being the signed normal distance of each
    point to the contour: the profile across the interface, sampled at the
    mesh's own points (no interpolation). A second interface farther than
    that radius is not mixed in. Rows with fewer than 3 points get NaN.

    References
    ----------
    .. [1] Olsson, E. and Kreiss, G. (2005), J. Comput. Phys. 210:225-246.
    """
    max_samples = _check_samples(max_samples)
    work = _Work(mesh, indicator, level, contour)
    return _metrics(work, max_samples)[1]


def _metrics(work: _Work, max_samples: int):
    mesh, contour, integrals = work.mesh, work.contour, work.integrals
    geometry = _ContourGeometry(contour)
    size = geometry.size
    if contour.n_elements == 0 or not size > 0 or integrals.count == 0:
        return _nan_metrics(), pd.DataFrame(columns=list(PROFILE_COLUMNS))
    width = integrals.band / size
    total_grad = integrals.total_gradient
    eps = integrals.mixed / total_grad if total_grad > 0 else float("nan")
    # second moment of the normal distance, weighted by |grad c|, out to 10 eps (the logistic
    # tails beyond hold 0.3 % of its variance) or 4 cells, whichever is farther
    sizes = geometry.sizes
    h = mesh.cell_sizes[contour.cells]
    h_interface = float((sizes * h).sum() / size)
    bound = max(_MOMENT_RANGE * eps, 4.0 * h_interface) if np.isfinite(eps) else np.inf
    dist = integrals.distances(geometry, work.level, bound)
    m0, m1, m2 = integrals.moments(dist)
    variance = m2 / m0 - (m1 / m0) ** 2 if m0 > 0 else float("nan")
    # cells of the contour
    g_el = cell_gradient(mesh, work.clipped, cells=contour.cells)
    with np.errstate(divide="ignore"):
        across = (_WIDTH_10_90_PER_EPS / (4.0 * np.linalg.norm(g_el, axis=1))) / h
    under = float(sizes[~(across >= RESOLVED_CELLS)].sum() / size)
    values, dist, known = integrals.at_points(dist)
    table = _profile_table(mesh, geometry, values, dist, known & np.isfinite(dist), width, max_samples)
    local = table["width"].to_numpy(dtype=float)
    w = table["weight"].to_numpy(dtype=float)
    if np.isfinite(local).any():
        i = int(np.nanargmax(local))
        widest = (float(table["x"].iat[i]), float(table["y"].iat[i]), float(table["z"].iat[i]))
    else:
        widest = (float("nan"),) * 3
    metrics = {
        "interface_size": float(size),
        "interface_width": width,
        "interface_width_cells": width / h_interface,
        "width_threshold_free": WIDTH_PER_EPS * eps,
        "interface_eps": eps,
        "width_second_moment": WIDTH_PER_EPS * np.sqrt(3.0 * max(variance, 0.0)) / np.pi,
        "interface_variance": float(variance),
        "width_profile_median": _weighted_quantile(local, w, 0.5),
        "width_profile_p90": _weighted_quantile(local, w, 0.9),
        "widest_x": widest[0], "widest_y": widest[1], "widest_z": widest[2],
        "under_resolved_interface_fraction": under,
    }
    return metrics, table
