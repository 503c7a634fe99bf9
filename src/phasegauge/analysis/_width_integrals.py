"""Width integrals over the simplex split: band volume, int c (1 - c), int |grad c|, moments.

All integrals use the piecewise-linear interpolant of the point values of c (clipped to
[0, 1]) on the conforming simplex split of the cells
(:func:`phasegauge.model.simplices.split_cells`, quads about their centre): band
volumes, int c(1 - c) and int |grad c| are then exact for that interpolant, so a band
edge cutting a cell is resolved below the cell size (a cell-wise band count would be off
by up to a cell layer).

The integrals run in chunks over the simplices of the cells where c is not within 1e-6
of 0 or 1; only simplices a band edge passes through are sorted. Meshes of triangles or
tetrahedra are read straight from their connectivity (:class:`_SplitBand`); regular
hexahedral grids cut by the 6-tetrahedra table are integrated in grid index space, each
tetrahedron's gradient being corner differences over the grid spacing
(:class:`_GridBand`); hexahedra the split cones from their cell centre (bent faces: jittered
and curvilinear grids) are integrated cell by cell over the same tetrahedra (12 per cell, more
with face centres), formed from each cell's corners (:class:`._hex_integrals._HexBand`). All
paths give the same integrals up to
round-off.
"""

from __future__ import annotations

import numpy as np

from ..model._grouping import sort_columns
from ..model._split_tables import TABLE
from ..model.corners import corner_sum
from ..model.mesh import Mesh
from ..model.simplices import SimplexSplit, grid_corner_steps, split_cells
from ..model.polyhedra import SPLIT_CENTRES
from ._signed_distance import (_centre_reach, _centre_split_distance, _ContourGeometry, _signed_distance,
                               _vertex_distances, _whole_cell_pieces)

#: cells whose corners all lie within this of 0 or of 1 are left out of the width integrals
_TAIL = 1e-6
#: simplices per chunk of the integral passes (temporaries stay in cache)
_CHUNK = 1 << 15
#: band edges of ``interface_width``
_LOW, _HIGH = 0.05, 0.95
#: cell types that are their own simplex split (integrated straight from the connectivity)
_DIRECT_TYPES = ("triangle", "tetra")
#: the distances of points with c within this of a bulk search a thinned set of the contour's elements
#: (:func:`._signed_distance._signed_distance`); the second moment's integrals search every element at every
#: point (-inf): with noise, which points are near a bulk follows the noise, and the thinned set's error with it
NEAR_BAND = 0.01


def moment_cells(low: np.ndarray, high: np.ndarray, tail: float) -> np.ndarray:
    """The cells the second moment reads, by the corner extremes ``low``, ``high`` of the values as written: those
    where c varies that do not lie wholly within ``tail`` of 0 or of 1. A cell wholly above 1 or below 0 counts
    (an overshoot's fall back to its bulk weighs as much as its rise); on values within [0, 1] these are the
    widths' own cells, ``high > tail`` and ``low < 1 - tail``, less those where c is constant (no weight)."""
    return ((high > low) & ~((low >= -tail) & (high <= tail))
            & ~((low >= 1.0 - tail) & (high <= 1.0 + tail)))


def _chunks(n: int, size: int = _CHUNK):
    """Slices of at most ``size`` items covering ``range(n)``."""
    return [slice(start, start + size) for start in range(0, n, size)]


def _adjugate_times(adjugate, values: list) -> list:
    """adj(E) dv by axis (``adjugate``: :func:`_adjugate` of the simplices; ``values``: vertex values by corner, dv
    their differences from the first): det E times the gradient of the linear field (Cramer's rule)."""
    cols = adjugate[2]
    dv = [v - values[0] for v in values[1:]]
    return [sum(x * col[axis] for x, col in zip(dv, cols)) for axis in range(len(cols))]


def _simplex_gradients(adjugate, g: list):
    """Unsigned measures and |grad c| of the linear field on each simplex: |grad c| = |adj(E) dv| / |det E| (zero
    on a degenerate simplex; ``g`` :func:`_adjugate_times` of ``adjugate``, :func:`_adjugate`); the determinant is
    d! times the signed measure."""
    size, factorial, _ = adjugate
    norm = np.sqrt(sum(x * x for x in g))
    gnorm = np.divide(norm, size, out=np.zeros_like(norm), where=size != 0)
    return size / factorial, gnorm


def _normal_coefficients(adjugate, g: list) -> list:
    """Per simplex, the coefficients of the vertex differences of any linear d in measure x grad c . grad d
    (by corner after the first): (adj(E)_k . adj(E) dc) / (d! |det E|), adj(E)_k the adjugate's k-th column
    (grad d = adj(E) dd / det E); zero on a degenerate simplex. ``adjugate``: :func:`_adjugate`; ``g``: its
    :func:`_adjugate_times` of c."""
    size, factorial, cols = adjugate
    scale = np.divide(1.0, factorial * size, out=np.zeros_like(size), where=size != 0)
    return [sum(col[axis] * g[axis] for axis in range(len(cols))) * scale for col in cols]


def _weights_of(coefficients: list, d: list) -> np.ndarray:
    """measure x grad c . grad d from :func:`_normal_coefficients` and d's vertex values by corner."""
    return sum(k * (v - d[0]) for k, v in zip(coefficients, d[1:]))


def _adjugate(columns: list, ids: list):
    """|det E|, d! and the adjugate's columns by axis (adj(E) dv = sum_k dv_k adj(E)_k), E the simplices' edge
    vectors from their first vertex."""
    x0 = [col[ids[0]] for col in columns]
    e = [[col[i] - start for col, start in zip(columns, x0)] for i in ids[1:]]
    if len(columns) == 2:
        (ax, ay), (bx, by) = e
        return np.abs(ax * by - ay * bx), 2.0, [(by, -bx), (-ay, ax)]
    (ax, ay, az), (bx, by, bz), (cx, cy, cz) = e
    bc = (by * cz - bz * cy, bz * cx - bx * cz, bx * cy - by * cx)  # b x c
    ca = (cy * az - cz * ay, cz * ax - cx * az, cx * ay - cy * ax)  # c x a
    ab = (ay * bz - az * by, az * bx - ax * bz, ax * by - ay * bx)  # a x b
    return np.abs(ax * bc[0] + ay * bc[1] + az * bc[2]), 6.0, [bc, ca, ab]


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
    return corner_sum(values), corner_sum(v * v for v in values)


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

    ``weights`` is measure x grad c . grad d per simplex (:func:`_normal_coefficients`, :func:`_weights_of`),
    ``d`` the vertex distances by corner (NaN where not known).
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

    def __init__(self, mesh: Mesh, clipped: np.ndarray, active: np.ndarray, *, near_band: float = NEAR_BAND):
        self.mesh, self.near_band = mesh, near_band
        if all(block.cell_type in _DIRECT_TYPES for block in mesh.blocks):
            # the cells are their own split: read them block by block, no copy
            self.split = SimplexSplit(mesh.coordinates, np.zeros((0, mesh.dimension + 1), np.int64),
                                      np.zeros(0, np.int64), point_values=clipped)
            self.active = active
        else:
            self.split = split_cells(mesh, active, values=clipped, quads="centre")
            self.active = None
        values = self.split.values
        self.columns = columns = [np.ascontiguousarray(self.split.coordinates[:, i]) for i in range(mesh.dimension)]
        weights = []
        self.known = np.zeros(values.shape[0], dtype=bool)
        self.band = self.mixed = 0.0
        self._coefficients = []  # per piece, the second moment's weight coefficients of its varying simplices
        for ids in self._pieces():
            vertex_values = [values[i] for i in ids]
            adjugate = _adjugate(columns, ids)
            g = _adjugate_times(adjugate, vertex_values)  # det E grad c, read by both below
            measures, gnorm = _simplex_gradients(adjugate, g)
            weights.append(measures * gnorm)
            self.band += _band_volume(measures, vertex_values)
            self.mixed += _mixed_integral(measures, vertex_values)
            varying = weights[-1] > 0
            for i in ids:
                self.known[i[varying]] = True
            # kept (dim floats a varying simplex) so the moments need only the distances' differences
            picked = (adjugate[0][varying], adjugate[1], [[x[varying] for x in col] for col in adjugate[2]])
            self._coefficients.append(_normal_coefficients(picked, [x[varying] for x in g]))
            del adjugate, picked, g
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

    @staticmethod
    def merges_pieces(mesh: Mesh) -> bool:
        """Whether :meth:`distances` searches one element per crossed whole cell (a mesh a reader split)."""
        return mesh.cell_parents is not None

    def distances(self, geometry: _ContourGeometry, level: float, bound: float, threads: int = 1) -> np.ndarray:
        """Signed distances at the known vertices (NaN elsewhere and beyond ``bound``), each search
        on up to ``threads`` threads.

        On a mesh a reader split (polyhedra: ``mesh.cell_parents``) the search runs against one
        element per crossed whole cell (:func:`._signed_distance._cell_pieces`), and the centres
        the reader added (their corner lists handed over as ``mesh.memo(SPLIT_CENTRES)``) are
        measured against their corners' 3 nearest elements instead of searched
        (:func:`._signed_distance._centre_split_distance`); other meshes search the contour's own
        elements.
        """
        mesh = self.mesh
        if self.merges_pieces(mesh):
            geometry = _whole_cell_pieces(mesh, geometry)
            centres = mesh.memo(SPLIT_CENTRES, lambda: None, keep=False)
            if centres is not None and self.active is not None:
                reach = mesh.memo("split_centre_reach", lambda: _centre_reach(mesh.coordinates, centres))
                return _centre_split_distance(mesh.coordinates, self.split.point_values, self.known, centres,
                                              geometry, mesh.plane_axes, level, bound, reach,
                                              near_band=self.near_band, threads=threads)
        return _vertex_distances(self.split, self.known, geometry, self.mesh.plane_axes, level, bound,
                                 threads=threads, near_band=self.near_band)

    def moments(self, dist: np.ndarray) -> tuple[float, float, float]:
        """(m0, m1, m2) of :func:`_moment_sums` over all simplices where c varies, weighted by
        the stored :func:`_normal_coefficients` (:func:`_weights_of`)."""
        m = np.zeros(3)
        start = 0
        for ids, coefficients in zip(self._pieces(), self._coefficients):
            n = ids[0].size
            varying = self.weights[start:start + n] > 0
            start += n
            if not varying.any():
                continue
            d = [dist[i[varying]] for i in ids]
            m += _moment_sums(_weights_of(coefficients, d), d)
        return tuple(float(x) for x in m)

    def at_points(self, dist: np.ndarray):
        """(c, signed distance, known) at the mesh points, for the profile fits."""
        n = self.mesh.n_points
        return self.split.values[:n], dist[:n], self.known[:n]


def _grid_tetrahedra(mesh: Mesh):
    """Layout for the width integrals in grid index space, or None (cached per mesh).

    Applies to a 3D regular grid whose hexahedra list their corners in the VTK
    order from each cell's lowest grid corner and whose point coordinates equal
    the grid axes exactly (:func:`phasegauge.model.simplices.grid_corner_steps`):
    :func:`split_cells` cuts every cell by the 6-tetrahedra table, and each
    tetrahedron's gradient is corner differences over the cell's spacing. Holds
    no per-cell arrays: the grid's own indices suffice.
    """

    def compute():
        steps = grid_corner_steps(mesh)
        if steps is None:
            return None
        offsets = np.array([(0, 0, 0), (1, 0, 0), (1, 1, 0), (0, 1, 0),
                            (0, 0, 1), (1, 0, 1), (1, 1, 1), (0, 1, 1)])
        # each tetrahedron of the table is a path 0 -> a -> b -> 6 along three cell edges, one
        # per axis: its gradient is the three corner differences over the spacings
        tets, edges = [], {}
        for local in TABLE["hexahedron"]:
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

    def __init__(self, mesh: Mesh, clipped: np.ndarray, layout: dict, *, cutoff: float = _TAIL,
                 near_band: float = NEAR_BAND, written: bool = False):
        grid = mesh.regular_grid
        self.mesh, self.grid, self.layout, self.near_band = mesh, grid, layout, near_band
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
        # (``written``: the second moment's values as written, cells by :func:`moment_cells`)
        cells = np.flatnonzero(moment_cells(low, high, cutoff) if written else (high > cutoff) & (low < 1.0 - cutoff))
        low, high = low.ravel()[cells], high.ravel()[cells]
        nx, ny, nz = grid.cell_shape
        i, j, k = cells // (ny * nz), (cells // nz) % ny, cells % nz
        self.base = cells + i * (ny + nz + 1) + j  # flat index of each cell's lowest point
        del cells
        spacing = [np.diff(axis_values) for axis_values in grid.axes]
        self.h = h = [spacing[0][i], spacing[1][j], spacing[2][k]]  # per cell (the moments read them again)
        del i, j, k
        n = self.base.size
        self.count = 6 * n
        weights = np.empty((6, n))  # (read only here: nothing keeps it)
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
                weights[t, part] = measures * np.sqrt(slope[path[0]] + slope[path[1]] + slope[path[2]])
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
            chunk = weights[:, part]
            every = np.all(chunk > 0, axis=0)
            varying[part] = every
            some = np.flatnonzero(~every)
            for t, (local, _, _) in enumerate(tets):
                which = some[chunk[t, some] > 0]
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
        self.total_gradient = float(weights.sum())

    @staticmethod
    def merges_pieces(mesh: Mesh) -> bool:
        """False: :meth:`distances` searches the contour's own elements."""
        return False

    def distances(self, geometry: _ContourGeometry, level: float, bound: float, threads: int = 1) -> np.ndarray:
        grid = self.grid
        wanted = np.flatnonzero(self.known)
        index = np.unravel_index(wanted, grid.point_shape)
        points = np.empty((wanted.size, 3))  # analysis coordinates: the grid axes, exactly
        for d, axis_values in enumerate(grid.axes):
            points[:, d] = axis_values[index[d]]
        dist = np.full(self.values.shape[0], np.nan)
        dist[wanted] = _signed_distance(points, self.values[wanted], geometry, self.mesh.plane_axes, level,
                                        bound, near_band=self.near_band, threads=threads)
        return dist

    def moments(self, dist: np.ndarray) -> tuple[float, float, float]:
        m = np.zeros(3)
        n = self.base.size
        edges = self.layout["edges"]
        for part in _chunks(n, _CHUNK // 2):
            base = self.base[part]
            d = [dist[base + step] for step in self.layout["steps"]]
            c = [self.values[base + step] for step in self.layout["steps"]]
            h = [x[part] for x in self.h]
            # grad c . grad d along each cell edge of the paths: (c[b] - c[a]) (d[b] - d[a]) / h^2
            product = {(a, b): (c[b] - c[a]) * (d[b] - d[a]) / (h[axis] * h[axis]) for (a, b), axis in edges.items()}
            measures = h[0] * h[1] * h[2] / 6.0
            for t, (local, _, path) in enumerate(self.layout["tets"]):
                weights = measures * (product[path[0]] + product[path[1]] + product[path[2]])
                m += _moment_sums(weights, [d[q] for q in local])
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
