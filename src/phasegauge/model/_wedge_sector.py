"""Axisymmetric wedge sectors: a 3D mesh one cell thick in angle about an axis.

Finite-volume solvers run axisymmetric cases on a wedge a few degrees wide and one cell thick about
an axis (wedge patches front and back, collapsed cells on the axis). Measured as 3D, its volumes,
droplet sizes and shapes are the sector's, and a cell's size (the cube root of its volume) is thin
across the sector, so the interface reads wider in cells than in the plane of the run.
:func:`wedge_sector` recognises such a mesh: every point lies on one of two half-planes through a
common line along x, y or z.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

__all__ = ["WedgeSector", "wedge_sector", "WEDGE_TOLERANCE"]

#: points lie on a half-plane when within this fraction of the mesh's largest extent of it (points
#: written in single precision are placed to about 1e-7 of it)
WEDGE_TOLERANCE = 1e-5
#: widest and narrowest sectors recognised, degrees (a solver's axisymmetric wedge is a few degrees; a
#: slab whose faces are a millionth of its extent out of parallel is no wedge)
_WIDEST = 30.0
_NARROWEST = 0.05
#: points the two half-planes are first fitted to (spread over the point order by a multiplier
#: prime to any count, Knuth's multiplicative hash); all are checked after
_SAMPLE = 2000
_SPREAD = 2654435761


@dataclass(frozen=True)
class WedgeSector:
    """A mesh one cell thick in angle about an axis.

    Attributes
    ----------
    axis : int
        The axis the line of revolution runs along (0, 1, 2 for x, y, z).
    through : tuple of float
        The line's two other coordinates (in the order of the axes).
    angle : float
        The sector's angle, degrees.
    """

    axis: int
    through: tuple
    angle: float

    def record(self) -> dict:
        """A plain record for ``inspect --json`` and the manifest."""
        others = [a for a in "xyz" if a != "xyz"[self.axis]]
        return {"axis": "xyz"[self.axis], "through": dict(zip(others, map(float, self.through))),
                "angle_degrees": float(self.angle)}

    def words(self) -> str:
        at = ", ".join(f"{a} = {v:.6g}" for a, v in self.record()["through"].items())
        return f"a {self.angle:.3g}-degree wedge about a line along {'xyz'[self.axis]} ({at}), one cell thick"


def wedge_sector(mesh) -> WedgeSector | None:
    """The wedge sector ``mesh`` is (see the module's notes), or None (cached per mesh)."""
    def compute():
        if mesh.dimension != 3 or mesh.n_points < 6 or mesh.regular_grid is not None:
            return None
        used = mesh.used_points  # (points no cell uses lie anywhere)
        points = mesh.points if used.size == mesh.n_points else mesh.points[used]
        lo, hi = mesh.bounds
        extent = float(np.max(hi - lo))
        if not np.isfinite(extent) or extent <= 0:
            return None
        tol = WEDGE_TOLERANCE * extent
        n = points.shape[0]
        sample = points[np.arange(min(n, _SAMPLE), dtype=np.int64) * _SPREAD % n]  # spread over the point order
        for axis in range(3):
            across = [a for a in range(3) if a != axis]
            fit = _two_rays(sample[:, across], tol)
            if fit is not None and _on_rays(points[:, across], fit, tol):
                apex, directions = fit
                angle = np.degrees(np.arccos(np.clip(directions[0] @ directions[1], -1.0, 1.0)))
                through = tuple(0.0 if abs(v) <= tol else float(v) for v in apex)  # rounding off a line at 0
                return WedgeSector(axis, through, float(angle))
        return None

    return mesh.memo("wedge_sector", compute)


def _two_rays(q: np.ndarray, tol: float):
    """``(apex, directions)`` where the 2D points ``q`` lie on two rays from ``apex`` (each a unit
    direction, away from the apex) meeting at an angle of at most :data:`_WIDEST`; None where they do
    not. The points either side of their principal line are fitted a line each (total least squares)."""
    centre = q.mean(axis=0)
    r = q - centre
    along = np.linalg.eigh(r.T @ r)[1][:, 1]
    t = r @ np.array([-along[1], along[0]])
    lines = []
    for side in (t > 0, t < 0):
        if np.count_nonzero(side) < 2:
            return None
        part = q[side]
        middle = part.mean(axis=0)
        lines.append((middle, np.linalg.eigh((part - middle).T @ (part - middle))[1][:, 1]))
    (c1, d1), (c2, d2) = lines
    turn = d1[0] * d2[1] - d1[1] * d2[0]
    if abs(turn) < 1e-9:  # parallel: a slab, not a wedge
        return None
    gap = c2 - c1
    apex = c1 + (gap[0] * d2[1] - gap[1] * d2[0]) / turn * d1
    directions = [d if (middle - apex) @ d >= 0 else -d for middle, d in ((c1, d1), (c2, d2))]
    angle = np.degrees(np.arccos(np.clip(directions[0] @ directions[1], -1.0, 1.0)))
    if not _NARROWEST <= angle <= _WIDEST:
        return None
    fit = (apex, directions)
    return fit if _on_rays(q, fit, tol) else None


def _on_rays(q: np.ndarray, fit: tuple, tol: float) -> bool:
    """Whether every point of ``q`` lies on one of the fitted rays (to ``tol``)."""
    apex, directions = fit
    r = q - apex
    off = np.minimum(*(np.abs(r[:, 0] * d[1] - r[:, 1] * d[0]) for d in directions))
    ahead = r @ (directions[0] + directions[1])
    return bool(np.all(off <= tol) and np.all(ahead >= -tol))
