"""Per-droplet measures of droplet labelling: integrals, unwrapped centroids, boxes, shape factors, table.

Step 4 of :func:`phasegauge.analysis.droplets.label_droplets` (see ``_labelling``): integrals with
weights ``c dV`` over each droplet's cells by ``numpy.bincount``, boxes from the corners of the
core cells, and the table in the order of :data:`TABLE_COLUMNS`.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from ..model.axes import AXIS_NAMES
from ..model.mesh import Mesh
from ..model._centroids import cell_centroids_of
from ..model.corners import incidence_rows

__all__ = ["TABLE_COLUMNS", "volume_integrals", "droplet_boxes", "box_contacts", "contour_owners", "shape_factors",
           "mean_velocity", "droplet_table"]

#: columns of :attr:`DropletLabels.table`, in order
TABLE_COLUMNS = (
    ("droplet", "volume", "threshold_volume", "centroid_x", "centroid_y", "centroid_z",
     "equivalent_diameter", "circularity", "sphericity")
    + tuple(f"bbox_{end}_{a}" for end in ("min", "max") for a in AXIS_NAMES)
    + ("velocity_x", "velocity_y", "velocity_z", "under_resolved", "spanning")
)


def volume_integrals(mesh: Mesh, g: np.ndarray, w: np.ndarray, member_cells: np.ndarray, X: np.ndarray,
                     n_drop: int, periods) -> tuple:
    """Volume, c-weighted centroid (put back in the domain), mean cell size and the periods removed.

    ``g`` is the droplet of each member cell, ``w`` its ``c dV``, ``X`` its unwrapped centroid;
    ``periods`` are (axis, low end, period) of the periodic axes. Returns ``volume``,
    ``centroid`` (n_drop, dim), ``h_local`` and ``back`` (the whole periods subtracted).
    """
    dim = mesh.dimension
    volume = np.bincount(g, weights=w, minlength=n_drop)
    with np.errstate(invalid="ignore", divide="ignore"):
        centroid = np.stack([np.bincount(g, weights=w * X[:, d], minlength=n_drop)
                             for d in range(dim)], axis=1) / volume[:, None]
        h_local = np.bincount(g, weights=w * mesh.cell_sizes_of(member_cells), minlength=n_drop) / volume
    back = np.zeros((n_drop, dim))  # whole periods that put each centroid back in the domain
    for ax, lo, period in periods:
        back[:, ax] = period * np.floor((centroid[:, ax] - lo) / period)
    centroid -= back
    return volume, centroid, h_local, back


def _group_extrema(groups: np.ndarray, lo: np.ndarray, hi: np.ndarray, n: int):
    """Per-group min of ``lo`` and max of ``hi`` rows (groups >= 0, every group present or NaN)."""
    out_lo = np.full((n, lo.shape[1]), np.nan)
    out_hi = np.full((n, hi.shape[1]), np.nan)
    if groups.size == 0:
        return out_lo, out_hi
    if n <= np.iinfo(np.int16).max:
        order = np.argsort(groups.astype(np.int16), kind="stable")  # a radix sort for 16-bit keys
    else:
        order = np.argsort(groups, kind="stable")
    g = groups[order]
    starts = np.flatnonzero(np.concatenate([[True], g[1:] != g[:-1]]))
    out_lo[g[starts]] = np.minimum.reduceat(lo[order], starts, axis=0)
    out_hi[g[starts]] = np.maximum.reduceat(hi[order], starts, axis=0)
    return out_lo, out_hi


def droplet_boxes(core_labels: np.ndarray, box_lo: np.ndarray, box_hi: np.ndarray, n_drop: int,
                  back: np.ndarray) -> tuple:
    """Box of each droplet from its core cells' corner boxes, shifted by ``back`` like the centroid."""
    bmin, bmax = _group_extrema(core_labels, box_lo, box_hi, n_drop)
    bmin -= back
    bmax -= back
    return bmin, bmax


def contour_owners(mesh: Mesh, cells: np.ndarray, label: np.ndarray, c_near: np.ndarray, owner: np.ndarray,
                   icells: np.ndarray, places) -> np.ndarray:
    """The droplet of every contour element, -1 for none.

    ``cells`` are the near cells (sorted), ``label`` their droplets as cores (-1 off the cores) and
    ``c_near`` their c; ``owner`` the droplet each element's cell was shared to (-1 for none),
    ``icells`` the elements' cells and ``places`` their centres moved half a cell into the measured
    phase, (k, dim), or None (then their cells' centroids).

    An element in a core cell bounds that cell's droplet. Elsewhere the ``c = level`` contour of
    the point values runs where the corners above the level take their values from core cells
    sharing those corners (point values rebuilt from cell data lie within the range of the cells
    around them), also through empty cells beside full ones. So an element in a cell that is not
    a core goes to the droplet whose core cells share a corner with its cell; where the cores of
    several droplets do (drops a cell apart), to the one whose core cell's centroid lies nearest
    the element's place (on equal distance the higher c, then the lower centroid coordinates: no
    cell numbers decide). An element with no core cell around its cell keeps ``owner``.
    """
    core = np.flatnonzero(label >= 0)
    ask = np.flatnonzero(_at_cells(cells, label, icells) < 0)  # elements outside the cores
    if not ask.size or not core.size:
        return owner
    around, where = np.unique(icells[ask], return_inverse=True)
    # corners shared: (around, core), from those cells' rows of the cells' corner incidence
    touch = (incidence_rows(mesh, around) @ incidence_rows(mesh, cells[core]).T).tocsr()
    touch.sort_indices()
    per_cell = np.diff(touch.indptr)
    drop = label[core[touch.indices]]
    has = per_cell > 0
    low = np.full(around.size, -1, dtype=np.int64)
    high = np.full(around.size, -1, dtype=np.int64)
    if drop.size:
        low[has] = np.minimum.reduceat(drop, touch.indptr[:-1][has])
        high[has] = np.maximum.reduceat(drop, touch.indptr[:-1][has])
    owner = owner.copy()
    one = (has & (low == high))[where]
    owner[ask[one]] = low[where[one]]
    several = (has & (low != high))[where]
    if not several.any():
        return owner
    lost, cell = ask[several], where[several]
    count = per_cell[cell]
    element = np.repeat(lost, count)
    first = np.repeat(touch.indptr[cell] - (np.cumsum(count) - count), count)
    candidate = core[touch.indices[first + np.arange(element.size)]]  # local numbers of core cells
    at = cell_centroids_of(mesh, cells[candidate])
    if places is None:
        centres = cell_centroids_of(mesh, around[np.repeat(cell, count)])
    else:
        centres = places[element]
    distance = np.sum((at - centres) ** 2, axis=1)
    keys = tuple(at[:, d] for d in range(at.shape[1] - 1, -1, -1)) + (-c_near[candidate], distance, element)
    order = np.lexsort(keys)
    element, candidate = element[order], candidate[order]
    head = np.concatenate([[True], element[1:] != element[:-1]])
    owner[element[head]] = label[candidate[head]]
    return owner


def _at_cells(cells: np.ndarray, local_values: np.ndarray, query: np.ndarray) -> np.ndarray:
    """The local value (droplet number) of each mesh cell of ``query``, -1 off the near ``cells``
    (sorted), without a mesh-wide array."""
    if not cells.size:
        return np.full(query.shape, -1, dtype=np.int64)
    at = np.minimum(np.searchsorted(cells, query), cells.size - 1)
    return np.where(cells[at] == query, local_values[at], -1)


def shape_factors(dim: int, volume: np.ndarray, diameter: np.ndarray, owner, isizes, n_drop: int) -> tuple:
    """Circularity (2D) and sphericity (3D) from the contour elements of each droplet
    (``owner``: the droplet of each element, -1 for none, see :func:`contour_owners`; None without elements)."""
    size = np.full(n_drop, np.nan)
    if owner is not None and owner.size:
        ok = owner >= 0
        size = np.bincount(owner[ok], weights=isizes[ok], minlength=n_drop).astype(float)
        size[size <= 0] = np.nan
    circularity = np.full(n_drop, np.nan)
    sphericity = np.full(n_drop, np.nan)
    with np.errstate(invalid="ignore", divide="ignore"):
        if dim == 2:
            circularity = np.pi * diameter / size
        else:
            sphericity = np.pi ** (1.0 / 3.0) * (6.0 * volume) ** (2.0 / 3.0) / size
    return circularity, sphericity


def mean_velocity(mesh: Mesh, vel, g: np.ndarray, w: np.ndarray, member_cells: np.ndarray, n_drop: int):
    """``int c u dV / int c dV`` per droplet over the finite velocities, shape (n_drop, 3); NaN without one."""
    velocity_mean = np.full((n_drop, 3), np.nan)
    if vel is None:
        return velocity_mean
    dim = mesh.dimension
    plane = list(mesh.plane_axes[:dim])
    comps = plane if vel.shape[1] == dim else [0, 1, 2]
    vsel = np.take(vel, member_cells, axis=0)
    for j, axis in enumerate(comps):
        if vel.shape[1] == 3:
            j = axis
        v = vsel[:, j]
        ok = np.isfinite(v)
        with np.errstate(invalid="ignore", divide="ignore"):
            velocity_mean[:, axis] = (np.bincount(g[ok], weights=w[ok] * v[ok], minlength=n_drop)
                                      / np.bincount(g[ok], weights=w[ok], minlength=n_drop))
    return velocity_mean


def _in_space(mesh: Mesh, values: np.ndarray) -> np.ndarray:
    """(n, dim) values in the mesh's plane axes -> (n, 3); a 2D mesh's normal axis takes its plane's value."""
    dim = mesh.dimension
    full = np.full((values.shape[0], 3), np.nan)
    plane = list(mesh.plane_axes[:dim])
    full[:, plane] = values
    if dim == 2:
        normal = [a for a in range(3) if a not in plane][0]
        full[:, normal] = float(mesh.points[mesh.used_points[0], normal])
    return full


def droplet_table(mesh: Mesh, columns: dict, *, centroid, bmin, bmax, velocity_mean) -> pd.DataFrame:
    """The droplet table: ``columns`` (droplet, volume, threshold_volume, equivalent_diameter,
    circularity, sphericity, under_resolved, spanning) and the per-axis columns, in TABLE_COLUMNS order."""
    table = pd.DataFrame(dict(columns))
    for prefix, values in (("centroid", _in_space(mesh, centroid)), ("bbox_min", _in_space(mesh, bmin)),
                           ("bbox_max", _in_space(mesh, bmax)), ("velocity", velocity_mean)):
        for a, name in enumerate(AXIS_NAMES):
            table[f"{prefix}_{name}"] = values[:, a]
    return table[list(TABLE_COLUMNS)]


def box_contacts(table: pd.DataFrame, bounds) -> dict:
    """Per axis the domain spans (``bounds``: ``[[xmin, ymin, zmin], [xmax, ymax, zmax]]``, as
    :attr:`Mesh.bounds`), whether each row's box (``bbox_min_*``, ``bbox_max_*`` of a droplet table)
    reaches the domain's low side and its high side: ``{axis name: (low, high)}``, within 1e-9 of the
    domain's largest extent (the box's corners are mesh points, so round-off only)."""
    bounds = np.asarray(bounds, dtype=float)
    extent = bounds[1] - bounds[0]
    near = 1e-9 * float(np.max(extent)) if np.max(extent) > 0 else 0.0
    out = {}
    for k, axis in enumerate(AXIS_NAMES):
        if extent[k] > 0 and f"bbox_min_{axis}" in table and f"bbox_max_{axis}" in table:
            out[axis] = (table[f"bbox_min_{axis}"].to_numpy(dtype=float) <= bounds[0, k] + near,
                         table[f"bbox_max_{axis}"].to_numpy(dtype=float) >= bounds[1, k] - near)
    return out
