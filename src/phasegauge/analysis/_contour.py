"""Level contours of the phase indicator on any mesh.

Two paths give the contour ``c = level`` of the point values of c:

* regular grids of quads or hexahedra (:attr:`Mesh.regular_grid`) without NaN:
  marching squares / marching cubes from scikit-image, run in index space and
  mapped back to the grid's physical coordinates and to mesh cell ids;
* every other mesh (and grids with NaN): marching triangles (2D) or marching
  tetrahedra (3D) on the conforming simplex split of the cells the level
  crosses (:func:`phasegauge.model.simplices.split_cells`, quads about their
  centre), fully vectorised per cell type.

Orientation of the elements (simplex path): in 2D the measured phase
(c > level) lies on the left of each segment, so a droplet's boundary runs
counter-clockwise in the plane's axes; in 3D triangle normals (right-hand rule)
point out of the measured phase, towards lower c.
"""

from __future__ import annotations

import numpy as np

from ..errors import OptionError
from ..model._grouping import _bits, _sort_order
from ..model._numbers import finite_number
from ..model.contour import Contour
from ..model.corners import CornerExtremes, cell_gradient, corner_extremes
from ..model.mesh import Mesh
from ..model.simplices import SimplexSplit, split_cells

__all__ = ["find_interface"]


def _empty(mesh: Mesh) -> Contour:
    k = 2 if mesh.dimension == 2 else 3
    return Contour(np.zeros((0, 3)), np.zeros((0, k), dtype=np.int64), np.zeros(0, dtype=np.int64),
                   mesh.dimension, tuple(mesh.plane_axes))


def _check_level(level) -> float:
    return finite_number("level", level, fix="for example level=0.5")


def _check_point_values(mesh: Mesh, values) -> np.ndarray:
    c = np.asarray(values, dtype=np.float64)
    if c.shape != (mesh.n_points,):
        raise OptionError(f"point values must have shape ({mesh.n_points},), found {c.shape}",
                          fix="pass the indicator's point values (Indicator.point)")
    return c


# --------------------------------------------------------------------------- marching simplices

def _to_3d(mesh: Mesh, coords: np.ndarray) -> np.ndarray:
    if mesh.dimension == 3:
        return coords
    out = np.empty((coords.shape[0], 3))
    axes = list(mesh.plane_axes)
    normal = [a for a in range(3) if a not in axes][0]
    out[:, axes] = coords
    out[:, normal] = mesh.points[mesh.used_points[0], normal] if mesh.n_points else 0.0
    return out


def _lone_first(k: int) -> np.ndarray:
    """Per pattern m of corners above the level (bit j: corner j), the corners ordered as a stable
    argsort of ``not above`` orders them: those above first, each group in corner order."""
    above = (np.arange(1 << k)[:, None] >> np.arange(k)) & 1
    return np.argsort(1 - above, axis=1, kind="stable")


def _march_simplices(split: SimplexSplit, level: float, dim: int):
    """Contour elements of the linear field on each simplex.

    Returns edge endpoints (e, 2) of every element vertex, element vertex
    slots (k, dim) into those edges, and the owner cell of each element.
    """
    S = split.simplices
    k = dim + 1
    v = split.corner_values(split.point_values)  # no table of every vertex: the cut simplices' alone
    pattern = np.zeros(S.shape[0], dtype=np.int8)  # bit j: corner j above the level
    count = np.zeros(S.shape[0], dtype=np.int8)
    for j in range(k):  # column by column: no (n, k) temporaries of counts
        above = v[:, j] > level
        pattern |= above.astype(np.int8) << j
        count += above
    rows = np.flatnonzero((count > 0) & (count < k))
    pattern, count, owner = pattern[rows], count[rows], split.owner[rows]
    # each cut simplex's corners with its lone corner first (the one above, or below, the others),
    # or with the two above first: a stable argsort of the lone / above marks, by one table look-up
    lone_below = count == (2 if dim == 2 else 3)
    order = _lone_first(k)[np.where(lone_below, (1 << k) - 1 - pattern, pattern)]
    P = S.ravel()[(rows * k)[:, None] + order]
    X = split.at_vertices(split.points, P)  # (m, k, dim): the cut simplices' corners, in P's order
    edges_list, elem_owner = [], []
    if dim == 2:
        e = np.stack([P[:, [0, 1]], P[:, [0, 2]]], axis=1)  # (k, 2 vertices, 2 ends)
        up = X[:, 0] - 0.5 * (X[:, 1] + X[:, 2])
        up[lone_below] *= -1
        edges_list.append((e, up))
        elem_owner.append(owner)
    else:
        single = count != 2
        Ps, Xs = P[single], X[single]
        e = np.stack([Ps[:, [0, 1]], Ps[:, [0, 2]], Ps[:, [0, 3]]], axis=1)
        up = Xs[:, 0] - ((Xs[:, 1] + Xs[:, 2]) + Xs[:, 3]) / 3.0  # the mean of the other three
        up[lone_below[single]] *= -1
        edges_list.append((e, up))
        elem_owner.append(owner[single])
        Pd, Xd = P[~single], X[~single]  # a, b above; c, d below
        a, b, c, d = Pd[:, 0], Pd[:, 1], Pd[:, 2], Pd[:, 3]
        ac, ad, bd, bc = (np.stack(p, axis=1) for p in ((a, c), (a, d), (b, d), (b, c)))
        up = 0.5 * (Xd[:, 0] + Xd[:, 1]) - 0.5 * (Xd[:, 2] + Xd[:, 3])
        od = owner[~single]
        edges_list.append((np.stack([ac, ad, bd], axis=1), up))
        edges_list.append((np.stack([ac, bd, bc], axis=1), up))
        elem_owner.extend([od, od])
    E = np.concatenate([e for e, _ in edges_list])       # (k, dim, 2)
    UP = np.concatenate([u for _, u in edges_list])      # (k, dim)
    owner = np.concatenate(elem_owner)
    return E, UP, owner


def _find_on_simplices(mesh: Mesh, c: np.ndarray, level: float, extremes: CornerExtremes) -> Contour:
    lo, hi = extremes
    active = np.isfinite(lo) & np.isfinite(hi) & (hi > level) & (lo <= level)
    if not active.any():
        return _empty(mesh)
    split = split_cells(mesh, active, values=c, quads="centre")
    dim = mesh.dimension
    E, UP, owner = _march_simplices(split, level, dim)
    if E.shape[0] == 0:
        return _empty(mesh)
    ends = E.reshape(-1, 2)
    n_vertices = np.int64(split.n_vertices)
    key = np.minimum(ends[:, 0], ends[:, 1]) * n_vertices + np.maximum(ends[:, 0], ends[:, 1])
    # the distinct edges in increasing key (as sorting the edge rows), each element vertex's edge:
    # np.unique(key, return_inverse=True), by one packed sort
    order, key = _sort_order(key, _bits(int(n_vertices) * int(n_vertices)))
    distinct = np.ones(key.size, dtype=bool)
    distinct[1:] = key[1:] != key[:-1]
    unique = key[distinct]
    inverse = np.empty(key.size, dtype=np.int64)
    inverse[order] = np.cumsum(distinct) - 1
    p, q = unique // n_vertices, unique % n_vertices
    # the edge ends' coordinates and values, the added centres' formed for the centres only
    x_added = split.added_values(split.points) if split.centres else None
    v_added = split.added_values(split.point_values) if split.centres else None
    vp, vq = split.at_vertices(split.point_values, p, v_added), split.at_vertices(split.point_values, q, v_added)
    Xp = split.at_vertices(split.points, p, x_added)
    t = (level - vp) / (vq - vp)
    pts = Xp + t[:, None] * (split.at_vertices(split.points, q, x_added) - Xp)
    elements = inverse.reshape(E.shape[0], dim)
    # orientation: 2D phase on the left; 3D normals towards lower c
    P = pts[elements]
    if dim == 2:
        tvec = P[:, 1] - P[:, 0]
        flip = (tvec[:, 0] * UP[:, 1] - tvec[:, 1] * UP[:, 0]) < 0
        elements[flip] = elements[flip][:, ::-1]
    else:
        a, b = P[:, 1] - P[:, 0], P[:, 2] - P[:, 0]
        # the cross product a x b dotted with UP, component by component as np.cross forms it
        ax, ay, az = a[:, 0], a[:, 1], a[:, 2]
        bx, by, bz = b[:, 0], b[:, 1], b[:, 2]
        n = np.empty_like(a)
        np.subtract(ay * bz, az * by, out=n[:, 0])
        np.subtract(az * bx, ax * bz, out=n[:, 1])
        np.subtract(ax * by, ay * bx, out=n[:, 2])
        flip = np.einsum("ij,ij->i", n, UP) > 0
        elements[flip] = elements[flip][:, [0, 2, 1]]
    contour = Contour(_to_3d(mesh, pts), elements, owner, dim, tuple(mesh.plane_axes))
    return _drop_degenerate(contour)


def _drop_degenerate(contour: Contour) -> Contour:
    keep = contour.element_sizes > 0
    if keep.all():
        return contour
    return Contour(contour.points, contour.elements[keep], contour.cells[keep], contour.dimension,
                   contour.plane_axes)


# --------------------------------------------------------------------------- grid fast path

def _index_to_physical(grid, index_coords: np.ndarray) -> np.ndarray:
    out = np.empty_like(index_coords)
    for d, axis in enumerate(grid.axes):
        out[:, d] = np.interp(index_coords[:, d], np.arange(len(axis)), axis)
    return out


def _cells_of(grid, lookup, index_centroids: np.ndarray) -> np.ndarray:
    shape = grid.cell_shape
    ijk = np.floor(index_centroids).astype(np.int64)
    for d, n in enumerate(shape):
        np.clip(ijk[:, d], 0, n - 1, out=ijk[:, d])
    return lookup[np.ravel_multi_index(tuple(ijk.T), shape)].astype(np.int64)


def _find_on_grid(mesh: Mesh, c: np.ndarray, level: float) -> Contour:
    from skimage import measure

    grid = mesh.regular_grid
    array = grid.points_to_array(c)
    if not (np.nanmax(array) > level and np.nanmin(array) < level):
        return _empty(mesh)
    lookup = grid.cell_order
    if mesh.dimension == 2:
        # find_contours keeps values above the level on the left when
        # positive_orientation='high'; with index axes (i, j) = (x, y) that is the
        # counter-clockwise convention of the simplex path
        lines = measure.find_contours(array, level, positive_orientation="high")
        lines = [line for line in lines if len(line) > 1]
        if not lines:
            return _empty(mesh)
        counts = np.array([len(line) for line in lines])
        pts_idx = np.concatenate(lines)
        starts = np.concatenate([[0], np.cumsum(counts)[:-1]])
        first = np.concatenate([np.arange(s, s + n - 1) for s, n in zip(starts, counts)])
        elements = np.stack([first, first + 1], axis=1)
        mids = 0.5 * (pts_idx[elements[:, 0]] + pts_idx[elements[:, 1]])
    else:
        verts, faces, _, _ = measure.marching_cubes(array, level, allow_degenerate=False,
                                                    gradient_direction="descent")
        pts_idx = verts
        elements = faces.astype(np.int64)
        mids = pts_idx[elements].mean(axis=1)
    cells = _cells_of(grid, lookup, mids)
    coords = _index_to_physical(grid, pts_idx)
    pts = np.zeros((coords.shape[0], mesh.dimension))
    plane = list(mesh.plane_axes)
    for d, ax in enumerate(grid.mesh_axes):
        pts[:, plane.index(ax)] = coords[:, d]
    contour = Contour(_to_3d(mesh, pts), elements, cells, mesh.dimension, tuple(mesh.plane_axes))
    return _orient_like_cells(_drop_degenerate(contour), mesh, c)


def _orient_like_cells(contour: Contour, mesh: Mesh, c: np.ndarray) -> Contour:
    """Flip elements whose normal points towards higher c (cell-gradient test)."""
    if contour.n_elements == 0:
        return contour
    g = cell_gradient(mesh, c, cells=contour.cells)
    g3 = np.zeros((g.shape[0], 3))
    g3[:, list(mesh.plane_axes)] = g
    flip = np.einsum("ij,ij->i", contour.normals, g3) > 0
    if not flip.any():
        return contour
    elements = contour.elements.copy()
    elements[flip] = elements[flip][:, ::-1] if contour.dimension == 2 else elements[flip][:, [0, 2, 1]]
    return Contour(contour.points, elements, contour.cells, contour.dimension, contour.plane_axes)


def _check_extremes(mesh: Mesh, extremes) -> CornerExtremes | None:
    """``extremes`` as CornerExtremes of the mesh's cells, or None."""
    if extremes is None:
        return None
    try:
        low, high = (np.asarray(a, dtype=np.float64) for a in extremes)
    except (TypeError, ValueError):
        low = high = None
    if low is None or low.shape != (mesh.n_cells,) or high.shape != (mesh.n_cells,):
        raise OptionError(f"extremes must be the per-cell corner minima and maxima of the {mesh.n_cells} "
                          f"cells, found {type(extremes).__name__}",
                          fix="pass what find_interface(..., return_extremes=True) gave for these values, or None")
    return CornerExtremes(low, high)


# --------------------------------------------------------------------------- public entry

def find_interface(mesh: Mesh, c_point, *, level: float = 0.5, method: str = "auto",
                   return_extremes: bool = False, extremes: CornerExtremes | None = None):
    """The contour ``c = level`` of the point values of the indicator.

    Parameters
    ----------
    mesh : Mesh
    c_point : ndarray of shape (n_points,), dimensionless
        Indicator at the mesh points (``Indicator.point``; for cell data the
        indicator's measure-weighted point average). Cells with a NaN corner
        are skipped.
    level : float
        Contour level in c, default 0.5.
    method : {'auto', 'grid', 'cells'}
        ``grid``: scikit-image marching squares / cubes (regular grids only);
        ``cells``: marching triangles / tetrahedra on the simplex split of
        every cell (any mesh); ``auto``: ``grid`` on a regular grid without
        NaN, else ``cells``.

    return_extremes : bool
        Also return the per-cell corner extremes of ``c_point`` that the
        cells path computed (None from the grid path), for
        :func:`interface_metrics` of the same values (it then skips that pass).
    extremes : CornerExtremes, optional
        The per-cell corner extremes of ``c_point``, already computed
        (:func:`phasegauge.model.corners.corner_extremes`): the cells path
        then skips that pass; None: computed there.

    Returns
    -------
    Contour
        Segments (2D) or triangles (3D); empty when c does not cross the level.
    CornerExtremes or None
        Only with ``return_extremes``.

    Raises
    ------
    OptionError
        Wrong shape of ``c_point``, a non-finite level, an unknown method,
        ``grid`` on a mesh that is not a regular grid, or ``extremes`` that do
        not fit the mesh.

    Notes
    -----
    Point values are interpolated linearly along cell edges (both paths) and
    inside the simplices of the conforming split (cells path), so the contour
    length / area converges at second order to that of a smooth level set.
    A vertex exactly at the level counts as below it.

    References
    ----------
    .. [1] Lorensen, W. E. and Cline, H. E. (1987), "Marching cubes: a high
       resolution 3D surface construction algorithm", SIGGRAPH 87.
    .. [2] Doi, A. and Koide, A. (1991), "An efficient method of triangulating
       equi-valued surfaces by using tetrahedral cells", IEICE Trans. E74.
    .. [3] scikit-image ``measure.find_contours`` and ``measure.marching_cubes``
       (Lewiner et al. 2003).

    Examples
    --------
    >>> from phasegauge.meshgen import grid_mesh
    >>> m = grid_mesh((32, 32), kind="triangle")
    >>> x, y = m.coordinates.T
    >>> c = 0.5 + 4 * (0.09 - (x - 0.5) ** 2 - (y - 0.5) ** 2)
    >>> round(find_interface(m, c).size, 2)  # 2 pi 0.3
    1.88
    """
    level = _check_level(level)
    if method not in ("auto", "grid", "cells"):
        raise OptionError(f"method must be 'auto', 'grid' or 'cells', found {method!r}",
                          fix="use 'auto' unless comparing the two paths")
    c = _check_point_values(mesh, c_point)
    if method == "grid" and mesh.regular_grid is None:
        raise OptionError("method 'grid' needs a regular grid of quads or hexahedra",
                          fix="use method='cells' (or 'auto') on this mesh")
    if method == "grid" and not np.all(np.isfinite(c)):
        raise OptionError("method 'grid' cannot skip NaN point values",
                          fix="use method='cells' (or 'auto'), which skips cells with a NaN corner")
    extremes = _check_extremes(mesh, extremes)
    use_grid = method == "grid" or (method == "auto" and mesh.regular_grid is not None
                                     and bool(np.all(np.isfinite(c))))
    if use_grid:
        contour, extremes = _find_on_grid(mesh, c, level), None
    else:
        if extremes is None:
            extremes = corner_extremes(mesh, c)
        contour = _find_on_simplices(mesh, c, level, extremes)
    return (contour, extremes) if return_extremes else contour
