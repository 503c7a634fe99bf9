"""Cross-section profiles: exact plane sections of the mesh and their statistics.

A plane normal to one axis cuts every simplex of the cells it crosses
(:mod:`._simplices`) in a triangle or a quadrilateral (3D) or a segment (2D).
Point fields are interpolated linearly along the cut edges, cell fields are
constant on the pieces of their cell, so each piece carries the exact field of
the linear (or piecewise-constant) representation. The piece integrals of c,
c^2 and their products with the normal velocity are polynomials of degree 3 at
most in the barycentric coordinates and are integrated exactly by the simplex
moment formula (:func:`_section_integrals`); c is shifted by its median first
so the variance does not suffer from cancellation.

The pieces depend on the mesh and the planes only: they are built once
(:class:`_Sections`: the pieces, their cells, and for every corner the cut
edge and where along it) and cached on the mesh, so a step of a series only
interpolates its fields along the cut edges and sums the moments.
"""

from __future__ import annotations

from dataclasses import dataclass
from math import factorial

import numpy as np
import pandas as pd

from ..errors import OptionError
from ..model.indicator import Indicator
from ..model._grouping import index_dtype
from ..model.mesh import Mesh
from ._simplices import _flat_cells, _quad_faces, cell_extent, centre_states, node_states, split_cell_nodes
from ._sums import dot


__all__ = ["cross_sections", "PROFILE_COLUMNS"]

#: columns of the table :func:`cross_sections` returns, in order
PROFILE_COLUMNS = ["position", "area", "mean_area_weighted", "mean_flow_weighted",
                   "segregation_intensity", "segregation_intensity_flow", "mixing_index",
                   "mixing_index_flow", "flow_rate"]

_AXES = {"x": 0, "y": 1, "z": 2}


def normalize_axis(mesh: Mesh, axis) -> tuple[int, int]:
    """The global axis (0, 1, 2) and the analysis axis (index into ``mesh.coordinates``)."""
    key = axis.lower() if isinstance(axis, str) else axis
    if key in _AXES:
        key = _AXES[key]
    if not isinstance(key, (int, np.integer)) or isinstance(key, bool) or key not in (0, 1, 2):
        raise OptionError(f"axis must be 'x', 'y' or 'z', found {axis!r}",
                          fix="name the axis the planes are normal to, for example axis='x'")
    key = int(key)
    if key not in mesh.plane_axes:
        names = " or ".join("xyz"[a] for a in mesh.plane_axes)
        raise OptionError(f"axis '{'xyz'[key]}' is normal to the plane of this 2D mesh",
                          fix=f"choose {names}")
    return key, mesh.plane_axes.index(key)


def field_location(mesh: Mesh, values, name: str, location: str | None = None) -> tuple[np.ndarray, str]:
    """A field and where it lives: told by ``location``, by an Indicator, or by its length."""
    if isinstance(values, Indicator):
        if values.location == "point":
            return np.asarray(values.point, dtype=np.float64), "point"
        return np.asarray(values.cell, dtype=np.float64), "cell"
    array = np.asarray(values, dtype=np.float64)
    n = array.shape[0] if array.ndim else -1
    sizes = {"point": mesh.n_points, "cell": mesh.n_cells}
    if location is not None:
        if location not in sizes:
            raise OptionError(f"{name} location must be 'point' or 'cell', found {location!r}",
                              fix="say where the field lives")
        if n != sizes[location]:
            raise OptionError(f"{name} on {location}s must have {sizes[location]} values, found shape "
                              f"{array.shape}", fix="pass the field of the same step as the mesh")
        return array, location
    if n == mesh.n_points and n == mesh.n_cells:
        raise OptionError(f"{name} has {n} values and the mesh has as many points as cells",
                          fix=f"say where it lives ({name}_location='point' or 'cell'), or pass an Indicator")
    if n == mesh.n_points:
        return array, "point"
    if n == mesh.n_cells:
        return array, "cell"
    raise OptionError(f"{name} must have one value per point ({mesh.n_points}) or per cell "
                      f"({mesh.n_cells}), found shape {array.shape}",
                      fix="pass the field of the same step as the mesh")


def normal_velocity(mesh: Mesh, velocity, global_axis: int,
                    location: str | None = None) -> tuple[np.ndarray, str]:
    """The velocity component along the plane normal, on points or cells."""
    array, location = field_location(mesh, velocity, "velocity", location)
    if array.ndim == 1:
        return array, location
    if array.ndim != 2 or array.shape[1] not in (2, 3):
        raise OptionError(f"velocity must have 1, 2 or 3 components, found shape {array.shape}",
                          fix="pass the velocity vectors (n, 3), or the normal component (n,)")
    if array.shape[1] == 3:
        return array[:, global_axis], location
    if mesh.dimension == 3:
        raise OptionError("a 3D mesh needs velocity vectors with 3 components",
                          fix="pass the full velocity field (n, 3)")
    return array[:, mesh.plane_axes.index(global_axis)], location


def default_positions(mesh: Mesh, global_axis: int, count: int) -> np.ndarray:
    """``count`` planes at the centres of equal slabs between the mesh bounds."""
    if isinstance(count, bool) or not isinstance(count, (int, np.integer)) or count < 1:
        raise OptionError(f"count must be a positive whole number, found {count!r}",
                          fix="for example count=20")
    lo, hi = mesh.bounds[:, global_axis]
    return lo + (np.arange(count) + 0.5) * (hi - lo) / count


#: section operators kept per mesh: the latest ones built (a series uses one, for all its steps)
_KEEP = 4


@dataclass(frozen=True)
class _Sections:
    """Plane sections of a mesh as fixed maps from field values to section pieces.

    Mesh-only: built once per mesh, axis and plane positions, then reused for
    every step. The pieces (triangles in 3D, segments in 2D) of plane p are
    ``offsets[p]:offsets[p + 1]``. A piece corner lies on a cut edge of the
    cell split, between a node below the plane (``start``) and one above
    (``end``), at ``weight`` t along it: a point field is ``x[start] + t
    (x[end] - x[start])`` there, exactly as the split interpolates it. Cut
    edges are shared by the pieces of a plane, so each is stored once.
    Only what the fields' ``locations`` need is kept: the cut edges for point
    fields, the pieces' cells for cell fields (None otherwise).
    """

    locations: frozenset  # of 'point', 'cell': the fields this operator serves
    offsets: np.ndarray  # (n_planes + 1,) first piece of each plane
    areas: np.ndarray  # (n_planes,) section area (3D) or length (2D)
    measures: np.ndarray  # (n_pieces,) piece areas or lengths
    corners: np.ndarray | None  # (dimension, n_pieces) cut edge of each piece corner
    parent: np.ndarray | None  # (n_pieces,) cell of each piece
    start: np.ndarray | None  # (n_cuts,) node below the plane: a mesh point, or an added centre
    end: np.ndarray | None  # (n_cuts,) node above
    weight: np.ndarray | None  # (n_cuts,) t, in [0, 1]
    centred: tuple  # (block, rows) of the cells whose added centres are nodes, in node order

    def cut_values(self, mesh: Mesh, values: np.ndarray) -> np.ndarray:
        """A point field (n_points,) at every cut edge (n_cuts,), linear along the edge."""
        added = centre_states(mesh, self.centred, values)
        # numpy gathers much faster with intp indices than with the stored int32 ones
        low = node_states(values, added, self.start.astype(np.intp, copy=False))
        out = node_states(values, added, self.end.astype(np.intp, copy=False))
        with np.errstate(invalid="ignore"):  # non-finite values: the pieces are left out later
            out -= low
            out *= self.weight
            out += low  # low + t (high - low), as the split interpolates
        return out


def _plane_pieces(mesh: Mesh, axis: int, position: float, lower_end: bool, cells: np.ndarray,
                  first_added: int) -> tuple:
    """The section of ``cells`` by one plane: pieces and their corners on the cut edges.

    Added centres are numbered from ``first_added`` on. Returns the piece
    measures (n,), parents (n,), corner start and end nodes (n, dimension),
    corner weights t (n, dimension) and the centred cells of the split.
    """
    dim = mesh.dimension
    nodes, parent, centred = split_cell_nodes(mesh, cells)
    X = node_states(mesh.coordinates, centre_states(mesh, centred, mesh.coordinates), nodes)
    s = X[:, :, axis] - position
    below = np.count_nonzero(s <= 0 if lower_end else s < 0, axis=1)
    crossed = (below > 0) & (below < dim + 1)
    others = [a for a in range(dim) if a != axis]
    X, nodes, parent, s, below = X[crossed][:, :, others], nodes[crossed], parent[crossed], s[crossed], below[crossed]
    nodes = np.where(nodes >= mesh.n_points, nodes - mesh.n_points + first_added, nodes)
    order = np.argsort(s, axis=1, kind="stable")
    s = np.take_along_axis(s, order, axis=1)
    X = np.take_along_axis(X, order[:, :, None], axis=1)
    nodes = np.take_along_axis(nodes, order, axis=1)

    def case(k):
        # the simplices with k corners below the plane, gathered once for all their edges
        rows = below == k
        sk, Xk, Nk = s[rows], X[rows], nodes[rows]

        def edge(i, j):
            si, sj = sk[:, i], sk[:, j]
            t = si / (si - sj)
            Xi = Xk[:, i]
            return Xi + t[:, None] * (Xk[:, j] - Xi), Nk[:, i], Nk[:, j], t

        return edge, parent[rows]

    (one, p1), (two, p2) = case(1), case(2)
    if dim == 2:
        pieces = [[one(0, 1), one(0, 2)], [two(0, 2), two(1, 2)]]
        parents = [p1, p2]
    else:
        three, p3 = case(3)
        e02, e13 = two(0, 2), two(1, 3)
        pieces = [[one(0, 1), one(0, 2), one(0, 3)], [three(0, 3), three(1, 3), three(2, 3)],
                  [e02, two(0, 3), e13], [e02, e13, two(1, 2)]]
        parents = [p1, p3, p2, p2]
    # (n, dim) per item of a corner: position in the plane, start node, end node, t
    X, start, end, t = (np.concatenate([np.stack([corner[item] for corner in piece], axis=1)
                                        for piece in pieces]) for item in range(4))
    if dim == 2:
        measures = np.abs(X[:, 1, 0] - X[:, 0, 0])
    else:
        d1 = X[:, 1] - X[:, 0]
        d2 = X[:, 2] - X[:, 0]
        measures = 0.5 * np.abs(d1[:, 0] * d2[:, 1] - d1[:, 1] * d2[:, 0])
    return measures, np.concatenate(parents), start, end, t, centred


def _layer_pieces(mesh: Mesh, axis: int, position: float, lower_end: bool, cells: np.ndarray,
                  first_added: int) -> tuple | None:
    """:func:`_plane_pieces` for a layer of cells that all meet the plane alike, else None.

    When every crossed cell is of one block, is split without added centres, and has the
    same offsets ``s`` from the plane at its local corners (a layer of a structured grid),
    the split, the sort by ``s``, the cut simplices and the weights are the same in every
    cell: they are taken from the first cell (by :func:`_plane_pieces` itself) and repeated
    for the others, each with its own corner coordinates. The arrays are the ones
    :func:`_plane_pieces` returns for all the cells, value for value and in its order (the
    first cell's pieces one by one, each over all the cells): the same floating-point
    operations on the same numbers.
    """
    if cells.size < 2:
        return None
    offsets = mesh.block_offsets
    b = int(np.searchsorted(offsets, cells[0], side="right")) - 1
    if cells[-1] >= offsets[b + 1]:
        return None  # more than one block
    block = mesh.blocks[b]
    local = cells - offsets[b]
    if block.cell_type in ("hexahedron", "wedge", "pyramid") and not _flat_cells(mesh)[b][local].all():
        return None  # some are split about added centres
    conn = block.connectivity[local]
    X = mesh.coordinates
    along = X[:, axis]
    s = along[conn] - position
    if not (s == s[0]).all():
        return None
    template = _plane_pieces(mesh, axis, position, lower_end, cells[:1], first_added)
    measures, parents, start, end, t, centred = template
    if centred or measures.size == 0:
        return None
    row = conn[0]
    if np.unique(row).size != row.size:
        return None  # a corner repeated: the first cell's points do not name its corners
    slot = {int(point): j for j, point in enumerate(row)}
    j_start = np.vectorize(slot.__getitem__, otypes=[np.intp])(start)  # (k, dim) local corners
    j_end = np.vectorize(slot.__getitem__, otypes=[np.intp])(end)
    dim = mesh.dimension
    others = [a for a in range(dim) if a != axis]
    # (k pieces, n cells, dim corners): piece-major, as _plane_pieces orders its rows
    S, E = conn[:, j_start].transpose(1, 0, 2), conn[:, j_end].transpose(1, 0, 2)
    si, sj = along[S] - position, along[E] - position
    weight = si / (si - sj)
    P = []  # per in-plane axis, (k, n, dim): the corners, as _plane_pieces' edges place them
    for a in others:
        column = X[:, a]
        Xi = column[S]
        P.append(Xi + weight * (column[E] - Xi))
    if dim == 2:
        pieces = np.abs(P[0][:, :, 1] - P[0][:, :, 0])
    else:
        d1 = [q[:, :, 1] - q[:, :, 0] for q in P]
        d2 = [q[:, :, 2] - q[:, :, 0] for q in P]
        pieces = 0.5 * np.abs(d1[0] * d2[1] - d1[1] * d2[0])
    k, n = S.shape[0], cells.size
    return (pieces.reshape(-1), np.tile(cells.astype(parents.dtype), k), S.reshape(k * n, dim).astype(start.dtype),
            E.reshape(k * n, dim).astype(end.dtype), weight.reshape(k * n, dim), [])


def _build_sections(mesh: Mesh, axis: int, positions: np.ndarray, lower_ends: np.ndarray,
                    locations: frozenset) -> _Sections:
    """The section operator of ``positions`` along analysis axis ``axis`` (see :class:`_Sections`)."""
    lo, hi = cell_extent(mesh, axis, keep=False)  # the operator itself is kept
    dim = mesh.dimension
    offsets, n_cuts, n_added = [0], 0, 0
    measures, parents, corners, starts, ends, weights, centred = [], [], [], [], [], [], []
    for position, lower_end in zip(positions, lower_ends):
        crossed = (lo <= position) & (hi > position) if lower_end else (lo < position) & (hi >= position)
        cells = np.nonzero(crossed)[0]
        m, parent, start, end, t, plane_centred = (
            _layer_pieces(mesh, axis, float(position), bool(lower_end), cells, mesh.n_points + n_added)
            or _plane_pieces(mesh, axis, float(position), bool(lower_end), cells, mesh.n_points + n_added))
        # each cut edge once: the pieces of a plane share them. Numbered in the order the
        # pieces first use them, so the pieces read their corner values nearly in order
        start, end, t = start.ravel(), end.ravel(), t.ravel()
        key = start * np.int64(max(int(start.max(initial=0)), int(end.max(initial=0))) + 1) + end
        order = np.argsort(key, kind="stable")
        distinct = np.ones(key.size, dtype=bool)
        distinct[1:] = key[order[1:]] != key[order[:-1]]
        first = order[distinct]  # where each cut edge is used first, in key order
        by_use = np.argsort(first)
        number = np.empty(first.size, dtype=np.int64)
        number[by_use] = np.arange(first.size)
        cut = np.empty(key.size, dtype=np.int64)
        cut[order] = number[np.cumsum(distinct) - 1]
        first = first[by_use]
        n_added += sum(rows.size * (1 + _quad_faces(mesh.blocks[b].cell_type)) for b, rows in plane_centred)
        # kept per plane in the narrowest type their values need so far (joined below in the
        # final types): the planes' parts are what the building holds longest
        nodes = index_dtype(mesh.n_points + n_added)
        measures.append(m)
        parents.append(parent.astype(index_dtype(mesh.n_cells), copy=False))
        corners.append((cut.reshape(-1, dim) + n_cuts).astype(index_dtype(n_cuts + first.size), copy=False))
        starts.append(start[first].astype(nodes, copy=False))
        ends.append(end[first].astype(nodes, copy=False))
        weights.append(t[first])
        centred += plane_centred
        offsets.append(offsets[-1] + m.size)
        n_cuts += first.size
    node_type = index_dtype(mesh.n_points + n_added)

    def joined(arrays, dtype, shape=(0,), transposed=False):
        """The planes' arrays end to end in ``dtype`` (first axis; with ``transposed``, the last
        axis of the transposed parts). The list is emptied as its parts are copied, so no more
        than one plane's part is held twice (the first step's memory peak was here)."""
        if not arrays:
            return np.zeros(shape[::-1] if transposed else shape, dtype=dtype)
        total, rest = sum(a.shape[0] for a in arrays), arrays[0].shape[1:]
        out = np.empty(rest[::-1] + (total,) if transposed else (total,) + rest, dtype=dtype)
        at = 0
        while arrays:
            part = arrays.pop(0)
            rows = slice(at, at + part.shape[0])
            if transposed:
                out[..., rows] = part.T
            else:
                out[rows] = part
            at = rows.stop
        return out

    measures = joined(measures, np.float64)
    offsets = np.asarray(offsets, dtype=np.int64)
    points = "point" in locations
    return _Sections(
        locations=locations,
        offsets=offsets,
        areas=np.array([measures[a:b].sum() for a, b in zip(offsets[:-1], offsets[1:])]),
        measures=measures,
        corners=joined(corners, index_dtype(n_cuts), (0, dim), transposed=True) if points else None,
        parent=joined(parents, index_dtype(mesh.n_cells)) if "cell" in locations else None,
        start=joined(starts, node_type) if points else None,
        end=joined(ends, node_type) if points else None,
        weight=joined(weights, np.float64) if points else None,
        centred=tuple((b, rows.astype(index_dtype(mesh.n_cells))) for b, rows in centred) if points else ())


def _sections(mesh: Mesh, axis: int, positions: np.ndarray, lower_ends: np.ndarray,
              locations: frozenset) -> _Sections:
    """The section operator, from the mesh's cache when the same planes were cut before.

    ``locations``: where the fields live ('point', 'cell'); an operator kept
    for other locations is built again for all of them.
    """
    store = mesh.memo("cross_sections", dict)
    key = (int(axis), positions.tobytes())
    kept = store.pop(key, None)  # put back last: the newest
    if kept is None or not locations <= kept.locations:
        locations = locations | (kept.locations if kept is not None else frozenset())
        while len(store) >= _KEEP:
            store.pop(next(iter(store)))  # the oldest
        kept = _build_sections(mesh, axis, positions, lower_ends, locations)
    store[key] = kept
    return kept


def _section_integrals(measures: np.ndarray, c: list, u: list | None = None) -> tuple:
    """Exact integrals over simplices of the linear c (and u) given at their corners.

    ``c`` and ``u`` are lists of k corner value arrays (n,). Returns int c,
    int c^2, and with ``u``: int u, int u c, int u c^2.

    With k corners (dimension d = k - 1) and barycentric coordinates, int
    l_i l_j l_k = |S| d! a! b! c! / (d + n)! for a monomial of degree n
    (multiplicities a, b, c), which gives for corner values f, g, h:
    int f = |S| sum f / k; int f g = |S| (sum fg + sum f sum g) d! / (d + 2)!;
    int f g h = |S| (sum f sum g sum h + sum fg sum h + sum gh sum f + sum fh sum g
    + 2 sum fgh) d! / (d + 3)!.
    """
    k = len(c)
    d = k - 1
    # the sums are formed in the order (c0 + c1) + c2, as a sum over corners would
    sc = c[0] + c[1]
    cc = c[0] * c[0]
    work = c[1] * c[1]
    cc += work
    for ci in c[2:]:
        sc += ci
        np.multiply(ci, ci, out=work)
        cc += work
    np.multiply(sc, sc, out=work)
    work += cc
    out = [dot(measures, sc) / k, dot(measures, work) * factorial(d) / factorial(d + 2)]
    if u is None:
        return tuple(out)
    su = _corner_sum(u)
    uc = [ui * ci for ui, ci in zip(u, c)]
    suc = _corner_sum(uc)
    cubic = su * sc * sc + suc * sc + cc * su + suc * sc + 2 * _corner_sum([p * ci for p, ci in zip(uc, c)])
    out += [dot(measures, su) / k, dot(measures, suc + su * sc) * factorial(d) / factorial(d + 2),
            dot(measures, cubic) * factorial(d) / factorial(d + 3)]
    return tuple(out)


def _corner_sum(values: list) -> np.ndarray:
    """Sum of the corner arrays, added in corner order."""
    total = values[0] + values[1]
    for v in values[2:]:
        total += v
    return total


def _median(values: np.ndarray) -> float:
    """``np.median`` of a 1D array of finite values, the same number, faster on large arrays.

    The middle ranks are selected among the values between two quantiles of
    a sample (a few comparisons over the array instead of a partition of a
    copy of it); when they are not there, the plain median.
    """
    n = values.size
    middle = [(n - 1) // 2, n // 2]  # one rank for odd n, the two middle ones for even n
    if n < 65536:
        return float(np.median(values))
    sample = np.sort(values[::64])
    lo, hi = sample[int(0.45 * sample.size)], sample[int(0.55 * sample.size)]
    below = int(np.count_nonzero(values < lo))
    if below <= middle[0]:
        inside = values[(values >= lo) & (values <= hi)]
        if middle[1] < below + inside.size:
            chosen = np.partition(inside, [m - below for m in middle])[[m - below for m in middle]]
            return float(np.mean(chosen if n % 2 == 0 else chosen[:1]))
    return float(np.median(values))


def _statistics(weight_total: float, first: float, second: float, shift: float) -> tuple[float, float]:
    """Mean and intensity of segregation from int w, int w (c - shift), int w (c - shift)^2."""
    if not weight_total:
        return np.nan, np.nan
    offset = first / weight_total
    mean = shift + offset
    variance = max(second / weight_total - offset * offset, 0.0)
    spread = mean * (1.0 - mean)
    return mean, (variance / spread if spread > 0 else np.nan)


def cross_sections(mesh: Mesh, c_point_or_indicator, *, axis="x", positions=None, count: int = 20,
                   velocity=None, c_location: str | None = None,
                   velocity_location: str | None = None) -> pd.DataFrame:
    """Mean, intensity of segregation and mixing index on planes across the domain.

    Parameters
    ----------
    mesh : Mesh
    c_point_or_indicator : Indicator or ndarray of shape (n_points,) or (n_cells,)
        The phase indicator, dimensionless. Point values are interpolated
        linearly inside each cell's simplices; cell values are constant on
        each cell. An :class:`Indicator` is used where its input data lives.
    axis : {'x', 'y', 'z'}
        The planes are normal to this axis (for a 2D mesh, one of its plane's
        axes; the sections are then lines).
    positions : array_like of float, optional
        Plane positions along ``axis``, in mesh length units.
    count : int
        Without ``positions``: this many planes at the centres of equal slabs
        between the mesh bounds (the ends themselves are not sampled).
    velocity : ndarray of shape (n, 3), (n, 2) or (n,), optional
        Velocity on points or cells; (n,) is taken as the component along the
        plane normal. Gives the flow-weighted columns and ``flow_rate``.
    c_location, velocity_location : {'point', 'cell'}, optional
        Where an array lives; needed only when the mesh has as many points
        as cells (otherwise the length tells).

    Returns
    -------
    DataFrame
        One row per plane, columns :data:`PROFILE_COLUMNS`:

        - ``position``: plane position along ``axis``, length units;
        - ``area``: section area (3D) or length (2D), length units squared / length units;
        - ``mean_area_weighted``, ``mean_flow_weighted``: mean of c weighted by area and by u.n;
        - ``segregation_intensity``, ``segregation_intensity_flow``: I = var / (m (1 - m)) with
          the same weights; NaN when m (1 - m) <= 0 (a uniform pure phase, or m out of [0, 1]);
        - ``mixing_index``, ``mixing_index_flow``: 1 - sqrt(I);
        - ``flow_rate``: int u.n dA, volume per time (area per time in 2D), signed along +axis.

        Flow-weighted columns are NaN without ``velocity``, or where the net flow rate is 0.

    Raises
    ------
    OptionError
        Bad axis, count, positions, or fields whose length fits neither points nor cells.

    Notes
    -----
    The section is exact for the piecewise-linear interpolant on a split of
    every cell into simplices (quads into 2 triangles; hexahedra, wedges and
    pyramids into tetrahedra about their centre and face centres, so the
    split conforms even where quad faces are not flat): for simplex meshes
    this is the mesh's own interpolant; for quads and hexahedra it differs
    from the bilinear/trilinear one by O(h^2) inside a cell. A plane through mesh points takes the faces on its
    lower side (at the lowest mesh coordinate, those on its upper side), so
    every face counts once. Parts where c (or the velocity) is NaN are left
    out of the statistics and ``flow_rate`` but not of ``area``. Flow weights are signed: with
    back-flow through a plane the flow-weighted figures mix forward and
    backward flow. Values of c are not clipped, so overshoots can make I > 1.

    References
    ----------
    Danckwerts, P. V. (1952). The definition and measurement of some
    characteristics of mixtures. Applied Scientific Research A3, 279-296.
    """
    global_axis, plane_axis = normalize_axis(mesh, axis)
    c, c_location = field_location(mesh, c_point_or_indicator, "c", c_location)
    if c.ndim != 1:
        raise OptionError(f"c must be a scalar field, found shape {c.shape}", fix="pass the indicator")
    if positions is None:
        positions = default_positions(mesh, global_axis, count)
    positions = np.atleast_1d(np.asarray(positions, dtype=np.float64))
    if positions.ndim != 1 or not np.all(np.isfinite(positions)):
        raise OptionError("positions must be a list of finite numbers",
                          fix="for example positions=[0.1, 0.2, 0.5]")
    u = None
    if velocity is not None:
        u = normal_velocity(mesh, velocity, global_axis, velocity_location)
    finite = np.isfinite(c)
    finite_c = c if finite.all() else c[finite]
    shift = _median(finite_c) if finite_c.size else 0.0  # shifts c before squaring
    lo_bound = mesh.bounds[0, global_axis]
    tolerance = 1e-12 * max(float(np.ptp(mesh.bounds[:, global_axis])), 1e-300)
    # a plane through mesh points takes the faces on its lower side, except at the lower end
    lower_ends = positions <= lo_bound + tolerance
    locations = frozenset([c_location] + ([] if u is None else [u[1]]))
    sections = _sections(mesh, plane_axis, positions, lower_ends, locations)

    # point fields at the cut edges for all planes at once (c shifted there); cell fields are
    # read per piece from its cell. Non-finite values are looked for per piece only if there are any
    fields = [(c, c_location, shift)] + ([] if u is None else [(u[0], u[1], 0.0)])
    sources, all_finite = [], True
    for values, location, offset in fields:
        if location == "point":
            values = sections.cut_values(mesh, values)
            values -= offset
        all_finite = all_finite and bool(np.isfinite(values).all())
        sources.append(values)
    k = mesh.dimension

    def on_corners(field, a, b):
        values, (_, location, offset) = sources[field], fields[field]
        if location == "point":
            return [values[sections.corners[i, a:b].astype(np.intp)] for i in range(k)]
        return [values[sections.parent[a:b].astype(np.intp)] - offset] * k

    rows = []
    for p, position in enumerate(positions):
        a, b = sections.offsets[p], sections.offsets[p + 1]
        w = sections.measures[a:b]
        cv = on_corners(0, a, b)
        un = None if u is None else on_corners(1, a, b)
        if not all_finite:
            # parts where c or the velocity is not finite are left out (of all but the area)
            good = np.logical_and.reduce([np.isfinite(v) for v in cv + (un or [])])
            w, cv = w[good], [v[good] for v in cv]
            un = None if un is None else [v[good] for v in un]
        integrals = _section_integrals(w, cv, un)
        mean, intensity = _statistics(float(w.sum()), integrals[0], integrals[1], shift)
        row = {"position": float(position), "area": float(sections.areas[p]), "mean_area_weighted": mean,
               "segregation_intensity": intensity}
        if un is not None:
            flow, flow_c, flow_cc = integrals[2:]
            mean_f, intensity_f = _statistics(flow, flow_c, flow_cc, shift)
            row.update(mean_flow_weighted=mean_f, segregation_intensity_flow=intensity_f,
                       flow_rate=flow)
        rows.append(row)
    table = pd.DataFrame(rows, columns=PROFILE_COLUMNS, dtype=np.float64)
    with np.errstate(invalid="ignore"):
        table["mixing_index"] = 1.0 - np.sqrt(table["segregation_intensity"])
        table["mixing_index_flow"] = 1.0 - np.sqrt(table["segregation_intensity_flow"])
    return table

