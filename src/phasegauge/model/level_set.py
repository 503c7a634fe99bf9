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

__all__ = ["level_set_indicator", "level_set_points"]


def level_set_points(mesh: Mesh, phi_cell: np.ndarray) -> np.ndarray:
    """Point values of a level set given on cells: the least-squares linear fit through the cells around
    each point without its limiter, and where that is ill-posed (a boundary point whose cells' centroids
    lie in a line, as along a wall of a structured mesh) the fit through the cells two rings out (the
    mean of the cells around it where even that is ill-posed). Both fits are exact for a linear phi, so
    phi's sign change in the row of cells at a wall is kept. NaN cells are left out.

    Where a reader split cells (:attr:`~phasegauge.model.mesh.Mesh.cell_parents`) the cells are the whole
    cells, each one sample at its centroid (:mod:`._whole_points`): a phi linear over the whole cells (the
    file's values) is reproduced at every point of the file. The centres a reader added keep a fit, unlike
    :meth:`~phasegauge.model.mesh.Mesh.cell_to_point`, which gives them their corners' mean
    (:func:`~phasegauge.model._conversions.with_centre_means`): a cell's own centre its cell's value, a step
    for a volume fraction but, for a smooth phi, its value at the cell's centre (to second order; exactly for
    phi linear), a face centre between two cells their mean weighted by inverse distance, where the corners' mean adds
    the corners' own error and the curvature's (a sphere's distance on prisms of 1/20: 2e-16 against 9e-3
    at the cell centres, 2.0e-3 against 7.1e-3 at the face centres, mean errors; 1.6e-2 by the fit two
    rings out; the points of the file 4.5e-3)."""
    from ._conversions import linear_point_values, weighted_point_means

    phi, target = np.asarray(phi_cell, dtype=np.float64), mesh
    if mesh.cell_parents is not None:  # the pieces of one whole cell are one sample
        from ._whole_points import whole_points, whole_values

        target = whole_points(mesh)
        phi = whole_values(target, phi[:, None])[:, 0]
    good = np.isfinite(phi)
    centres, at_centres = (None, None) if target is mesh else _added_centre_values(mesh, target, phi, good)

    def ill_posed(points):  # the fit through two rings, else the corners' mean
        values = np.full(points.size, np.nan)
        rest = np.ones(points.size, dtype=bool) if centres is None else ~np.isin(points, centres)
        values[rest] = _two_ring_values(target, phi, good, points[rest])
        missing = rest & ~np.isfinite(values)
        if missing.any():
            values[missing] = weighted_point_means(target, phi[:, None], good[:, None], points[missing])[:, 0]
        return values[:, None]

    values = linear_point_values(target, phi[:, None], good, ill_posed, limited=False)[:, 0]
    if centres is not None:
        values[centres] = at_centres
    return values


def _added_centre_values(mesh: Mesh, view, phi: np.ndarray, good: np.ndarray) -> tuple:
    """The centres a reader added to split cells that take a value of their own, and those values:
    ``(points, values)``, ``(None, None)`` where none. The centre inside a cell (a point every piece of one
    whole cell holds, and no other cell) takes that cell's phi, the fit through its one sample; a face centre
    between cells their mean weighted by the inverse distance to their centroids (the fit through their two
    samples, on the line between the centroids: :func:`_between_cells`), not the fit two rings out, whose
    wider stencil adds more curvature; a face centre on a wall (one cell) takes the fits of the points of the
    file."""
    from .polyhedra import SPLIT_CENTRES

    added = mesh.memo(SPLIT_CENTRES, lambda: None, keep=False)
    if added is None:
        return None, None
    own = np.isin(view.inner_points, added.points)
    inner, cells = view.inner_points[own], view.inner_cells[own]
    points = np.unique(added.points)
    between = np.setdiff1d(points[np.diff(view._point_cells.indptr)[points] > 1], inner)
    values = np.concatenate([phi[cells], _between_cells(view, phi, good, between)])
    return np.concatenate([inner, between]), values


def _between_cells(view, phi: np.ndarray, good: np.ndarray, points: np.ndarray) -> np.ndarray:
    """phi at ``points`` (face centres between whole cells) as the mean of their cells' phi weighted by the
    inverse distance from the point to each cell's centroid: exact for a linear phi where the point lies on the
    line between the two centroids (a face centre between cells of unequal size: their measure-weighted mean
    is not), as the fit through two samples gives it there; NaN where no cell around is finite."""
    from ._grouping import ranges

    ptr, idx = view._point_cells.indptr, view._point_cells.indices
    counts = np.diff(ptr)[points]
    owner = np.repeat(np.arange(points.size), counts)
    cells = idx[ranges(ptr, points)]
    distance = np.linalg.norm(view.coordinates[points[owner]] - view.cell_centroids[cells], axis=1)
    use = good[cells]
    weight = np.where(use, 1.0 / np.maximum(distance, np.finfo(float).tiny), 0.0)
    total = np.bincount(owner, weights=weight, minlength=points.size)
    value = np.bincount(owner, weights=weight * np.where(use, phi[cells], 0.0), minlength=points.size)
    with np.errstate(invalid="ignore", divide="ignore"):
        return np.where(total > 0, value / np.where(total > 0, total, 1.0), np.nan)


def _two_ring_values(mesh: Mesh, phi: np.ndarray, good: np.ndarray, points: np.ndarray) -> np.ndarray:
    """The linear least-squares fit through the good cells that share a point with a cell of each of
    ``points``, evaluated there (NaN where even that is ill-posed)."""
    a = mesh.incidence  # (cells, points)
    near = a[:, points].T.tocsr()  # the points' cells
    ring = ((near @ a) @ a.T).tocsr()  # cells sharing a point with them
    rows = np.repeat(np.arange(points.size), np.diff(ring.indptr))
    keep = good[ring.indices]
    rows, cells = rows[keep], ring.indices[keep]
    dim = mesh.dimension
    basis = np.c_[np.ones(cells.size), mesh.cell_centroids[cells] - mesh.coordinates[points][rows]]  # (pairs, dim + 1)
    normal = np.zeros((points.size, dim + 1, dim + 1))
    np.add.at(normal, rows, basis[:, :, None] * basis[:, None, :])
    right = np.zeros((points.size, dim + 1))
    np.add.at(right, rows, basis * phi[cells][:, None])
    out = np.full(points.size, np.nan)
    ok = np.linalg.cond(normal) < 1e12
    if ok.any():
        out[ok] = np.linalg.solve(normal[ok], right[ok][:, :, None])[:, 0, 0]
    return out


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
