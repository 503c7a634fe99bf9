"""A level-set field (a signed distance to the interface, zero on it) as the phase indicator.

A level-set solver carries phi, negative on one side of the interface and positive on the other; its
interface is phi = 0 and each phase's volume is where phi has that sign. The indicator the analyses
read is built so that both hold exactly for phi linear on the mesh's simplex split:

* on cells, the volume fraction of each cell where the phase's sign holds (the split's simplices
  clipped at phi = 0: a cut-cell fraction, as a volume-of-fluid field carries);
* on points, a ramp 0.5 + phi / (2 w), clipped to [0, 1], with w the largest |phi| at a corner of a
  cut cell: linear in phi on every cut cell, so the contour at 0.5 is the zero contour of phi itself.
"""

from __future__ import annotations

import numpy as np

from .corners import corner_extremes
from .mesh import Mesh
from .simplices import clip_simplices, simplex_measures, split_cells

__all__ = ["level_set_indicator"]


def level_set_indicator(mesh: Mesh, phi_point: np.ndarray, phase: str = "upper") -> tuple[np.ndarray, np.ndarray]:
    """The indicator of a level-set field: ``(cell, point)``.

    Parameters
    ----------
    mesh : Mesh
    phi_point : ndarray of shape (n_points,)
        The level-set values at the points (NaN where not finite).
    phase : {'upper', 'lower'}
        The phase measured: where phi > 0 (``'upper'``) or phi < 0.

    Returns
    -------
    cell : ndarray of shape (n_cells,)
        The volume fraction of each cell in the phase (NaN where a corner is NaN).
    point : ndarray of shape (n_points,)
        A ramp in phi whose 0.5 contour is phi = 0 (see the module notes).
    """
    s = np.asarray(phi_point, dtype=np.float64)
    s = s if phase == "upper" else -s
    ext = corner_extremes(mesh, s)
    cell = np.where(ext.low >= 0.0, 1.0, 0.0)
    cell[np.isnan(ext.low) | np.isnan(ext.high)] = np.nan
    cut = np.flatnonzero((ext.low < 0.0) & (ext.high > 0.0))
    reach = 1.0
    if cut.size:
        split = split_cells(mesh, cut)
        corners = split.corner_values(mesh.coordinates)
        values = split.corner_values(s)
        whole = np.bincount(split.owner, weights=simplex_measures(corners), minlength=mesh.n_cells)[cut]
        pieces, owner = clip_simplices(corners, split.owner, -values)  # the parts where s >= 0
        inside = np.bincount(owner, weights=simplex_measures(pieces), minlength=mesh.n_cells)[cut]
        cell[cut] = np.clip(inside / np.where(whole > 0, whole, 1.0), 0.0, 1.0)
        reach = float(max(-ext.low[cut].min(), ext.high[cut].max()))
    point = np.clip(0.5 + s / (2.0 * reach), 0.0, 1.0)
    return cell, point
