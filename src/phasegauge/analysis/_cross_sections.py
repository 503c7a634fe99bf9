"""Cross-section profiles: exact plane sections of the mesh and their statistics.

A plane normal to one axis cuts every simplex of the cells it crosses
(:mod:`._simplices`) in a triangle or a quadrilateral (3D) or a segment (2D).
Point fields are interpolated linearly along the cut edges, cell fields are
constant on the pieces of their cell, so each piece carries the exact field of
the linear (or piecewise-constant) representation. The piece integrals of c,
c^2 and their products with the normal velocity are polynomials of degree 3 at
most in the barycentric coordinates and are integrated exactly by the simplex
moment formula (:func:`simplex_moments`); c is shifted by its median first so
the variance does not suffer from cancellation.
"""

from __future__ import annotations

from math import factorial

import numpy as np
import pandas as pd

from ..errors import OptionError
from ..indicator import Indicator
from ..mesh import Mesh
from ._simplices import cell_extent, split_cells
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


def _section_pieces(mesh: Mesh, axis: int, position: float, lower_end: bool, state: np.ndarray,
                    cell_fields: list, cells: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """The section of ``cells`` by one plane, as simplices carrying the fields at their corners.

    Parameters
    ----------
    state : ndarray of shape (n_points, dimension + n_point_fields)
        Coordinates, then the point fields.
    cell_fields : list of ndarray of shape (n_cells,)

    Returns
    -------
    measures : ndarray of shape (n,)
        Areas of section triangles (3D) or lengths of section segments (2D).
    values : ndarray of shape (n, dimension, n_fields)
        Point fields, then cell fields, at the corners of each piece.
    """
    dim = mesh.dimension
    n_fields = state.shape[1] - dim + len(cell_fields)
    if cells.size == 0:
        return np.empty(0), np.empty((0, dim, n_fields))
    S, parent = split_cells(mesh, cells, state)
    s = S[:, :, axis] - position
    below = np.count_nonzero(s <= 0 if lower_end else s < 0, axis=1)
    crossed = (below > 0) & (below < dim + 1)
    S, parent, s, below = S[crossed], parent[crossed], s[crossed], below[crossed]
    others = [a for a in range(dim) if a != axis]
    columns = [S[:, :, others], S[:, :, dim:]]
    columns += [np.repeat(values[parent][:, None, None], S.shape[1], axis=1) for values in cell_fields]
    F = np.concatenate(columns, axis=2)
    order = np.argsort(s, axis=1, kind="stable")
    s = np.take_along_axis(s, order, axis=1)
    F = np.take_along_axis(F, order[:, :, None], axis=1)

    def case(k):
        # the simplices with k corners below the plane, gathered once for all their edges
        rows = below == k
        sk, Fk = s[rows], F[rows]

        def edge(i, j):
            si, sj = sk[:, i], sk[:, j]
            Fi = Fk[:, i]
            return Fi + (si / (si - sj))[:, None] * (Fk[:, j] - Fi)

        return edge

    n_plane = len(others)
    one, two = case(1), case(2)
    if dim == 2:
        pieces = np.concatenate([np.stack([one(0, 1), one(0, 2)], axis=1),
                                 np.stack([two(0, 2), two(1, 2)], axis=1)])
        measures = np.abs(pieces[:, 1, 0] - pieces[:, 0, 0])
        return measures, pieces[:, :, n_plane:]
    three = case(3)
    e02, e13 = two(0, 2), two(1, 3)
    pieces = np.concatenate([
        np.stack([one(0, 1), one(0, 2), one(0, 3)], axis=1),
        np.stack([three(0, 3), three(1, 3), three(2, 3)], axis=1),
        np.stack([e02, two(0, 3), e13], axis=1),
        np.stack([e02, e13, two(1, 2)], axis=1),
    ])
    d1 = pieces[:, 1, :2] - pieces[:, 0, :2]
    d2 = pieces[:, 2, :2] - pieces[:, 0, :2]
    measures = 0.5 * np.abs(d1[:, 0] * d2[:, 1] - d1[:, 1] * d2[:, 0])
    return measures, pieces[:, :, n_plane:]


def simplex_moments(measures: np.ndarray, f: np.ndarray, g: np.ndarray | None = None,
                    h: np.ndarray | None = None) -> float:
    """Exact integral of f (g) (h) over simplices on which f, g, h are linear.

    With k corners (dimension d = k - 1) and barycentric coordinates, int
    l_i l_j l_k = |S| d! a! b! c! / (d + n)! for a monomial of degree n
    (multiplicities a, b, c), which gives for corner values (n, k):
    int f = |S| sum f / k; int f g = |S| (sum fg + sum f sum g) d! / (d + 2)!;
    int f g h = |S| (sum f sum g sum h + sum fg sum h + sum gh sum f + sum fh sum g
    + 2 sum fgh) d! / (d + 3)!.
    """
    k = f.shape[1]
    d = k - 1
    sf = f.sum(axis=1)
    if g is None:
        return float(dot(measures, sf) / k)
    sg = g.sum(axis=1)
    fg = f * g
    if h is None:
        return float(dot(measures, fg.sum(axis=1) + sf * sg) * factorial(d) / factorial(d + 2))
    sh = h.sum(axis=1)
    total = (sf * sg * sh + fg.sum(axis=1) * sh + (g * h).sum(axis=1) * sf + (f * h).sum(axis=1) * sg
             + 2 * (fg * h).sum(axis=1))
    return float(dot(measures, total) * factorial(d) / factorial(d + 3))


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
    fields = [(c, c_location)]
    if velocity is not None:
        fields.append(normal_velocity(mesh, velocity, global_axis, velocity_location))
    # point fields travel with the coordinates through the split; cell fields follow the parent
    point_fields = [values for values, location in fields if location == "point"]
    cell_fields = [values for values, location in fields if location == "cell"]
    state = np.column_stack([mesh.coordinates] + point_fields)
    order = np.argsort([0 if location == "point" else 1 for _, location in fields], kind="stable")
    slot = np.empty(len(fields), dtype=int)
    slot[order] = np.arange(len(fields))  # where each field sits among the piece values
    finite_c = c[np.isfinite(c)]
    shift = float(np.median(finite_c)) if finite_c.size else 0.0  # shifts c before squaring
    lo_bound = mesh.bounds[0, global_axis]
    tolerance = 1e-12 * max(float(np.ptp(mesh.bounds[:, global_axis])), 1e-300)
    lo, hi = cell_extent(mesh, plane_axis)
    rows = []
    for position in positions:
        lower_end = bool(position <= lo_bound + tolerance)
        crossed = (lo <= position) & (hi > position) if lower_end else (lo < position) & (hi >= position)
        measures, values = _section_pieces(mesh, plane_axis, float(position), lower_end, state,
                                           cell_fields, np.nonzero(crossed)[0])
        good = np.all(np.isfinite(values), axis=(1, 2))
        w, v = measures[good], values[good]
        cv = np.ascontiguousarray(v[:, :, slot[0]]) - shift
        total = float(w.sum())
        mean, intensity = _statistics(total, simplex_moments(w, cv), simplex_moments(w, cv, cv), shift)
        row = {"position": float(position), "area": float(measures.sum()), "mean_area_weighted": mean,
               "segregation_intensity": intensity}
        if velocity is not None:
            un = np.ascontiguousarray(v[:, :, slot[1]])
            flow = simplex_moments(w, un)
            mean_f, intensity_f = _statistics(flow, simplex_moments(w, un, cv),
                                              simplex_moments(w, un, cv, cv), shift)
            row.update(mean_flow_weighted=mean_f, segregation_intensity_flow=intensity_f,
                       flow_rate=flow)
        rows.append(row)
    table = pd.DataFrame(rows, columns=PROFILE_COLUMNS, dtype=np.float64)
    with np.errstate(invalid="ignore"):
        table["mixing_index"] = 1.0 - np.sqrt(table["segregation_intensity"])
        table["mixing_index_flow"] = 1.0 - np.sqrt(table["segregation_intensity_flow"])
    return table

