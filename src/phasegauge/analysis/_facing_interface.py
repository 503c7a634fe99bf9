"""How much of an interface has another stretch of interface, facing the other way, within the widths' reach.

The widths' second moment takes each point's distance to the nearest contour. Where two interfaces lie
closer than the reach (a thin film or a ligament, two drops about to merge, the far side of a small drop),
each profile is cut at the line halfway between them and the variance, and the numerical diffusivity read
from its growth, come out low: the exact diffusion of a slab started sharp, 0.08 and 0.06 thick on 128^2
cells, read 0.93 and 0.78 of its diffusivity over six outputs (``tests/analysis/test_facing_interface.py``).
A logistic profile's tails reach farther than an erf's: a facing interface counts within :data:`FACING_REACH`
times the reach.
"""

from __future__ import annotations

import numpy as np

__all__ = ["facing_interface_share", "FACING_SAMPLE", "FACING_REACH"]

#: a facing interface counts within this many times the second moment's reach (our threshold): a logistic film
#: whose interfaces stay beyond one reach of each other (L / eps over the run 15 -> 12.2 and 12.9 -> 10.5) read
#: its diffusivity 0.91 and 0.85 of the true one, as one logistic profile cut at the midline does (0.92 and 0.87,
#: exact 1D moments); at 1.5 x, films under 16 eps and drops of radius under 8 eps read a share of 1, films of
#: 16 eps or more, drops of 8 eps or more and a lattice of drops of 8-10 eps 16 eps apart read none (12 eps apart:
#: 0.27, where the variance reads 2.5 % below the same drops 20 eps apart)
FACING_REACH = 1.5

#: the share is read on at most this many elements, evenly spaced (our threshold: a share p read on n of them
#: scatters by sqrt(p (1 - p) / n), 0.68 % at p = 0.05 and n = 1024; 4096 took 0.12 s a step, a third of a later
#: step of 1M tetrahedra)
FACING_SAMPLE = 1024
#: at most this many points along each half of an element's normal line
_MAX_SAMPLES = 32
#: elements asked for near each point of a line
_NEAREST = 4
#: another element faces an element when their normals lie more than 135 degrees apart
_OPPOSITE = -np.cos(np.pi / 4)


def facing_interface_share(centroids: np.ndarray, normals: np.ndarray, sizes: np.ndarray, reach: float,
                           lateral: float) -> float:
    """The share of the interface (element sizes ``sizes`` at ``centroids``, unit ``normals`` towards
    higher c) with another element facing the other way within ``reach`` along its normal line.

    Each element's normal line is sampled on both sides at ``m`` points a step ``reach / m <= lateral``
    apart (``m`` at most :data:`_MAX_SAMPLES`; ``lateral`` about a cell, the contour's elements' size); an
    element facing the other way (normals more than 135 degrees apart) among the :data:`_NEAREST` whose
    centroids lie within ``hypot(lateral, step / 2)`` of a point, and within ``reach`` of the element,
    makes it count: an interface crossing the line at a distance t lies within half a step of one point,
    and its nearest centroid within about a cell of the crossing. Its own interface's elements share its
    normal and never count. Read on at most :data:`FACING_SAMPLE` elements, evenly spaced, weighted by their
    sizes. Domains that wrap are not wrapped here: a facing interface across a periodic plane is not seen.
    NaN without elements, reach or lateral.
    """
    from scipy.spatial import cKDTree

    sizes = np.asarray(sizes, dtype=float)
    if (sizes.size < 2 or not np.sum(sizes) > 0 or not np.isfinite(reach) or not reach > 0
            or not lateral > 0):
        return float("nan")
    at = np.asarray(centroids, dtype=float)
    unit = np.asarray(normals, dtype=float)
    unit = unit / np.maximum(np.linalg.norm(unit, axis=1), 1e-300)[:, None]
    tree = cKDTree(at, balanced_tree=False)  # (built fast: the sliding midpoint rule)
    picked = np.arange(0, sizes.size, -(-sizes.size // FACING_SAMPLE))
    m = int(min(_MAX_SAMPLES, max(1, np.ceil(reach / lateral))))
    step = reach / m
    radius = float(np.hypot(lateral, 0.5 * step))
    along = step * np.r_[np.arange(1, m + 1), -np.arange(1, m + 1)]
    k = min(_NEAREST, sizes.size)
    # every point of every picked element's line asked at once (rows element by element, points along the line)
    rows = np.repeat(picked, along.size)
    points = at[rows] + np.tile(along, picked.size)[:, None] * unit[rows]
    _, near = tree.query(points, k=k, distance_upper_bound=radius)
    near = near.reshape(rows.size, k)
    found = near < sizes.size
    near = np.where(found, near, rows[:, None])
    opposite = np.einsum("ikj,ij->ik", unit[near], unit[rows]) < _OPPOSITE
    offset = at[near] - at[rows][:, None, :]
    within = np.einsum("ikj,ikj->ik", offset, offset) <= reach * reach
    faced = (found & opposite & within).any(axis=1).reshape(picked.size, along.size).any(axis=1)
    weight = sizes[picked]
    return float(np.sum(weight[faced]) / np.sum(weight))
