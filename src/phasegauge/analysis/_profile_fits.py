"""Local profile fits: logistic fits of c against the normal distance near contour elements."""

from __future__ import annotations

import numpy as np
import pandas as pd

from ..model.mesh import Mesh
from ._signed_distance import _ContourGeometry

#: 5-95 % thickness of the logistic profile per unit eps: 2 ln(0.95 / 0.05)
WIDTH_PER_EPS = 2.0 * np.log(19.0)

PROFILE_COLUMNS = ("element", "cell", "x", "y", "z", "normal_x", "normal_y", "normal_z", "cell_size",
                   "offset", "interface_eps", "width", "width_cells", "n_samples", "weight")


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
    h = mesh.cell_sizes_of(cells)
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
