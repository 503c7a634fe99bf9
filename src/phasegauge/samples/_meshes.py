"""Unstructured triangle meshes of a rectangle for the sample series."""

from __future__ import annotations

import numpy as np

from ..model.mesh import Mesh

__all__ = ["box_triangles"]


def box_triangles(bounds, spacing: float, *, seed: int = 0, jitter: float = 0.25) -> Mesh:
    """Delaunay triangles of a rectangle from a jittered triangular lattice.

    Boundary points sit on the edges at ``spacing``; interior points are rows of
    a triangular lattice moved at random by up to ``jitter * spacing``, so the
    triangles are irregular but well shaped.

    Parameters
    ----------
    bounds : ((x0, x1), (y0, y1))
    spacing : float
        Target edge length, in length units.
    seed : int
    jitter : float
        Fraction of ``spacing``.

    Returns
    -------
    Mesh
        Positively oriented triangles.
    """
    from scipy.spatial import Delaunay

    (x0, x1), (y0, y1) = bounds
    rng = np.random.default_rng(seed)
    nx = max(2, int(round((x1 - x0) / spacing)))
    ny = max(2, int(round((y1 - y0) / (spacing * np.sqrt(3) / 2))))
    xs, ys = np.linspace(x0, x1, nx + 1), np.linspace(y0, y1, ny + 1)
    boundary = np.concatenate([
        np.stack([xs, np.full_like(xs, y0)], 1), np.stack([xs, np.full_like(xs, y1)], 1),
        np.stack([np.full(ny - 1, x0), ys[1:-1]], 1), np.stack([np.full(ny - 1, x1), ys[1:-1]], 1)])
    hx, hy = (x1 - x0) / nx, (y1 - y0) / ny
    j, i = np.meshgrid(np.arange(1, ny), np.arange(nx), indexing="ij")
    px = x0 + (i + 0.5 + 0.5 * (j % 2)) * hx
    py = y0 + j * hy
    inner = np.stack([px.ravel(), py.ravel()], 1)
    inner = inner[inner[:, 0] < x1 - 0.3 * hx]
    inner = inner + rng.uniform(-jitter, jitter, inner.shape) * np.array([hx, hy])
    points = np.vstack([boundary, inner])
    cells = Delaunay(points).simplices.astype(np.int64)
    e1 = points[cells[:, 1]] - points[cells[:, 0]]
    e2 = points[cells[:, 2]] - points[cells[:, 0]]
    area2 = e1[:, 0] * e2[:, 1] - e1[:, 1] * e2[:, 0]
    flip = area2 < 0
    cells[flip, 1], cells[flip, 2] = cells[flip, 2].copy(), cells[flip, 1].copy()
    cells = cells[np.abs(area2) > 1e-12 * (x1 - x0) * (y1 - y0)]
    points3 = np.column_stack([points, np.zeros(len(points))])
    return Mesh(points3, [("triangle", cells)])
