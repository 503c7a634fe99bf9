"""What a level-set run is measured by instead of interface widths: how far it is from a distance function.

A level-set field phi is a signed distance to its zero contour only where |grad phi| = 1; advection
stretches and squeezes it, and a solver reinitialises phi to restore the slope. Where the slope has
drifted, what rests on phi being a distance (curvature from its second derivatives, a narrow band of
a few cells, the smoothed Heaviside of surface tension) is off, while the zero contour and the phase
volumes still hold. The interface of a level-set run has no width of its own: the width columns are
empty (NaN), the width estimators are not run, and the numerical-diffusion audit is not made.
"""

from __future__ import annotations

import numpy as np

from ..model._statistics import weighted_quantile
from ..model.cells import EDGES
from ..model.corners import cell_gradient, corner_extremes
from ..model.mesh import Mesh
from ._interface_width import METRIC_KEYS

__all__ = ["level_set_widths", "distance_errors", "near_interface", "LEVEL_SET_COLUMNS", "NEAR_CELLS"]

#: steps.csv columns of a level-set run
LEVEL_SET_COLUMNS = ("distance_error_median", "distance_error_p90")
#: the slope is judged on cells with a corner within this many of their own sizes of the interface
NEAR_CELLS = 2.0


def level_set_widths(size: float, low: float, high: float) -> dict:
    """The width columns of a level-set step (:data:`METRIC_KEYS`, in that order): the contour's ``size``
    and the bulk values ``low``, ``high`` (0 and 1 by construction); the widths empty (NaN)."""
    out = {key: float("nan") for key in METRIC_KEYS}
    out.update(interface_size=float(size), bulk_c_low=float(low), bulk_c_high=float(high))
    return out


def distance_errors(mesh: Mesh, phi_point: np.ndarray) -> dict:
    """``distance_error_median``, ``distance_error_p90``: the volume-weighted median and 90th percentile
    of | |grad phi| - 1 | over the cells near the interface (:func:`near_interface`; the gradient by
    least squares over each cell's corners: exact for linear phi on simplices). 0 for an exact distance
    function resolved by the mesh; NaN without such cells."""
    phi = np.asarray(phi_point, dtype=np.float64)
    near = near_interface(mesh, phi)
    if near.size == 0:
        return {"distance_error_median": float("nan"), "distance_error_p90": float("nan")}
    error = np.abs(np.linalg.norm(cell_gradient(mesh, phi, cells=near), axis=1) - 1.0)
    weights = mesh.cell_measures[near]
    keep = np.isfinite(error)
    median, p90 = (weighted_quantile(error[keep], weights[keep], q) if keep.any() else float("nan")
                   for q in (0.5, 0.9))
    return {"distance_error_median": float(median), "distance_error_p90": float(p90)}


def near_interface(mesh: Mesh, phi: np.ndarray, reach: float = NEAR_CELLS) -> np.ndarray:
    """The cells with a corner within ``reach`` of their own sizes (:attr:`Mesh.cell_sizes`) of
    phi = 0, increasing cell numbers. The distance is measured on the mesh, not read from phi (a
    field that is no distance, squeezed or clipped to a narrow band, cannot say itself which cells
    are near): to the nearest point where phi = 0 on an edge of a cell phi changes sign across
    (linear along the edge), from every point within ``reach`` of the largest cell's size. On a
    straight interface the nearest such point lies within half an edge of the nearest point of the
    interface."""
    from scipy.spatial import cKDTree

    low, high = corner_extremes(mesh, phi)
    cut = ((low < 0) & (high >= 0)) | ((low <= 0) & (high > 0))
    if not cut.any():
        return np.zeros(0, dtype=np.int64)
    X = mesh.coordinates
    crossings = []
    for block, start, stop in zip(mesh.blocks, mesh.block_offsets[:-1], mesh.block_offsets[1:]):
        conn = block.connectivity[cut[start:stop]]
        k = conn.shape[1]
        edges = EDGES.get(block.cell_type) or tuple((i, (i + 1) % k) for i in range(k))
        for a, b in edges:
            pa, pb = phi[conn[:, a]], phi[conn[:, b]]
            on = (pa * pb <= 0) & (pa != pb)
            t = (pa[on] / (pa[on] - pb[on]))[:, None]
            crossings.append(X[conn[on, a]] + t * (X[conn[on, b]] - X[conn[on, a]]))
    tree = cKDTree(np.concatenate(crossings))
    # every point within reach of the largest cell: a coarse cell beside a refined band counts by its
    # own size (rings of cells from the cut ones would stop at the fine cells' reach)
    size = mesh.cell_sizes
    distance = tree.query(X, distance_upper_bound=reach * float(np.nanmax(size)))[0]
    nearest = corner_extremes(mesh, distance).low
    return np.flatnonzero(nearest <= reach * size)
