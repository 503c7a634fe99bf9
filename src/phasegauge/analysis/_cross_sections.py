"""Cross-section profiles: exact plane sections of the mesh and their statistics.

A plane normal to one axis cuts every simplex of the cells it crosses
(:mod:`._simplices`) in a triangle or a quadrilateral (3D) or a segment (2D).
Point fields are interpolated linearly along the cut edges, cell fields are
constant on the pieces of their cell, so each piece carries the exact field of
the linear (or piecewise-constant) representation. The piece integrals of c,
(c - m)^2 and their products with the normal velocity are polynomials of degree
3 at most and are integrated exactly: a degree-4 triangle rule in 3D, two-point
Gauss on segments in 2D.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from ..errors import OptionError
from ..indicator import Indicator
from ..mesh import _TRI4_POINTS, _TRI4_WEIGHTS, Mesh
from ._simplices import cell_extent, split_cells

__all__ = ["cross_sections", "PROFILE_COLUMNS"]

#: columns of the table :func:`cross_sections` returns, in order
PROFILE_COLUMNS = ["position", "area", "mean_area_weighted", "mean_flow_weighted",
                   "segregation_intensity", "segregation_intensity_flow", "mixing_index",
                   "mixing_index_flow", "flow_rate"]

_AXES = {"x": 0, "y": 1, "z": 2}
_GAUSS2 = (0.5 - 0.5 / np.sqrt(3.0), 0.5 + 0.5 / np.sqrt(3.0))


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


def _section_pieces(mesh: Mesh, axis: int, position: float, lower_end: bool, fields,
                    cells: np.ndarray):
    """Quadrature weights and field values on the section of ``cells`` by one plane.

    Returns ``weights`` (n_q,) in length units (2D) or squared (3D) and
    ``values`` (n_q, n_fields).
    """
    n_fields = len(fields)
    if cells.size == 0:
        return np.empty(0), np.empty((0, n_fields))
    others = [a for a in range(mesh.dimension) if a != axis]
    # corner state: coordinates, then every field (cell fields are added per simplex)
    point_fields = [values for values, location in fields if location == "point"]
    state = np.column_stack([mesh.coordinates] + point_fields)
    S, parent = split_cells(mesh, cells, state)
    columns, next_point = [S[:, :, others]], mesh.dimension
    for values, location in fields:
        if location == "point":
            columns.append(S[:, :, next_point:next_point + 1])
            next_point += 1
        else:
            columns.append(np.repeat(values[parent][:, None, None], S.shape[1], axis=1))
    F = np.concatenate(columns, axis=2)
    s = S[:, :, axis] - position
    order = np.argsort(s, axis=1, kind="stable")
    s = np.take_along_axis(s, order, axis=1)
    F = np.take_along_axis(F, order[:, :, None], axis=1)
    below = np.count_nonzero(s <= 0 if lower_end else s < 0, axis=1)

    def edge(mask, i, j):
        si, sj = s[mask, i], s[mask, j]
        t = (si / (si - sj))[:, None]
        return F[mask, i] + t * (F[mask, j] - F[mask, i])

    n_plane = len(others)
    if mesh.dimension == 2:
        one, two = below == 1, below == 2
        a = np.concatenate([edge(one, 0, 1), edge(two, 0, 2)])
        b = np.concatenate([edge(one, 0, 2), edge(two, 1, 2)])
        length = np.abs(b[:, 0] - a[:, 0])
        weights = np.concatenate([0.5 * length] * 2)
        values = np.concatenate([(1 - g) * a[:, n_plane:] + g * b[:, n_plane:] for g in _GAUSS2])
        return weights, values
    one, two, three = below == 1, below == 2, below == 3
    e02, e13 = edge(two, 0, 2), edge(two, 1, 3)
    triangles = [
        np.stack([edge(one, 0, 1), edge(one, 0, 2), edge(one, 0, 3)], axis=1),
        np.stack([edge(three, 0, 3), edge(three, 1, 3), edge(three, 2, 3)], axis=1),
        np.stack([e02, edge(two, 0, 3), e13], axis=1),
        np.stack([e02, e13, edge(two, 1, 2)], axis=1),
    ]
    T = np.concatenate(triangles)
    d1 = T[:, 1, :2] - T[:, 0, :2]
    d2 = T[:, 2, :2] - T[:, 0, :2]
    area = 0.5 * np.abs(d1[:, 0] * d2[:, 1] - d1[:, 1] * d2[:, 0])
    weights = (area[:, None] * _TRI4_WEIGHTS[None, :]).ravel()
    values = np.einsum("qk,nkf->nqf", _TRI4_POINTS, T[:, :, n_plane:]).reshape(-1, n_fields)
    return weights, values


def _weighted(weights: np.ndarray, c: np.ndarray) -> tuple[float, float]:
    """Weighted mean and intensity of segregation (NaN when undefined)."""
    total = weights.sum()
    if weights.size == 0 or total == 0:
        return np.nan, np.nan
    mean = float(np.dot(weights, c) / total)
    variance = float(np.dot(weights, (c - mean) ** 2) / total)
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
    out of the statistics but not of ``area``. Flow weights are signed: with
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
    lo_bound = mesh.bounds[0, global_axis]
    tolerance = 1e-12 * max(float(np.ptp(mesh.bounds[:, global_axis])), 1e-300)
    lo, hi = cell_extent(mesh, plane_axis)
    rows = []
    for position in positions:
        lower_end = bool(position <= lo_bound + tolerance)
        crossed = (lo <= position) & (hi > position) if lower_end else (lo < position) & (hi >= position)
        weights, values = _section_pieces(mesh, plane_axis, float(position), lower_end, fields,
                                          np.nonzero(crossed)[0])
        good = np.all(np.isfinite(values), axis=1)
        w, v = weights[good], values[good]
        mean, intensity = _weighted(w, v[:, 0])
        row = {"position": float(position), "area": float(weights.sum()), "mean_area_weighted": mean,
               "segregation_intensity": intensity}
        if velocity is not None:
            flow = w * v[:, 1]
            mean_f, intensity_f = _weighted(flow, v[:, 0])
            row.update(mean_flow_weighted=mean_f, segregation_intensity_flow=intensity_f,
                       flow_rate=float(flow.sum()))
        rows.append(row)
    table = pd.DataFrame(rows, columns=PROFILE_COLUMNS, dtype=np.float64)
    with np.errstate(invalid="ignore"):
        table["mixing_index"] = 1.0 - np.sqrt(table["segregation_intensity"])
        table["mixing_index_flow"] = 1.0 - np.sqrt(table["segregation_intensity_flow"])
    return table

