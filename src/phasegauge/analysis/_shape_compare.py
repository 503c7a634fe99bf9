"""Shape comparison of two runs on one sampling grid.

Both indicators are resampled onto a common regular grid
(:func:`resample_to_grid`); only samples where both are finite count. On the
grid:

* the phase of each run is ``c > level``; ``mismatch_volume`` is the volume of
  their symmetric difference, ``dice`` the Sorensen-Dice overlap
  ``2 |A n B| / (|A| + |B|)``;
* ``field_difference`` is ``int |c_A - c_B| dV`` (midpoint rule on the grid);
* the interfaces ``c = level`` are extracted with marching squares (2D,
  ``skimage.measure.find_contours``) or marching cubes (3D,
  ``skimage.measure.marching_cubes``), scaled to coordinates and densified to
  points a fraction of the grid spacing apart; distances between the two
  point sets come from ``scipy.spatial.cKDTree``.
"""

from __future__ import annotations

from types import MappingProxyType

import numpy as np

from ..errors import OptionError
from ..model._statistics import weighted_quantile
from ..model.axes import AXIS_NAMES
from ..model.mesh import Mesh
from ._resample import SamplingGrid, check_same_space, common_grid, resample_to_grid

__all__ = ["shape_comparison", "shape_comparison_on_grid", "interface_points", "interface_elements",
           "interface_distances"]

#: densified interface points are at most this fraction of the finest grid spacing apart (2D, 3D)
_DENSIFY = MappingProxyType({2: 0.125, 3: 0.25})
#: spacing (in grid spacings) of the target points of the first, cheap distance pass
_COARSE = 0.5
#: distances below this many grid spacings are refined against the finely densified target
_NEAR = 2.0
#: spacing (in grid spacings) of the query points on a 3D interface
_QUERY_3D = 1.0


def interface_elements(values: np.ndarray, grid: SamplingGrid, level: float = 0.5, *,
                       valid: np.ndarray | None = None) -> np.ndarray:
    """The interface ``values = level`` of a sampled field as segments (2D) or triangles (3D).

    Parameters
    ----------
    values : ndarray of shape ``grid.shape``
        Sampled field; NaN samples are left out.
    grid : SamplingGrid
    level : float
    valid : ndarray of bool, shape ``grid.shape``, optional
        Samples to use (default: the finite ones).

    Returns
    -------
    ndarray of shape (n, 2, 2) in 2D (segment end points) or (n, 3, 3) in 3D
    (triangle corners), in length units.

    References
    ----------
    Lorensen & Cline (1987), "Marching cubes: a high resolution 3D surface
    construction algorithm", SIGGRAPH; scikit-image ``measure.find_contours``
    (marching squares) and ``measure.marching_cubes``.
    """
    v = np.asarray(values, dtype=np.float64)
    if v.shape != grid.shape:
        raise OptionError(f"sampled values have shape {v.shape}, the grid {grid.shape}",
                          fix="resample the field on this grid first")
    mask = np.isfinite(v) if valid is None else (np.asarray(valid, dtype=bool) & np.isfinite(v))
    dim = grid.dimension
    empty = np.empty((0, dim, dim))
    if not np.any(mask):
        return empty
    inside = v[mask]
    if not (inside.min() < level < inside.max()):
        return empty
    if dim == 2:
        from skimage.measure import find_contours

        contours = [c for c in find_contours(np.where(mask, v, np.nan), level) if len(c) > 1]
        if not contours:
            return empty
        segments = np.concatenate([np.stack([c[:-1], c[1:]], axis=1) for c in contours])
        return grid.to_physical(segments.reshape(-1, 2)).reshape(-1, 2, 2)
    from skimage.measure import marching_cubes

    # a cube is used only when all eight corners are valid; scikit-image reads a cube's mask at its far
    # corner (i+1, j+1, k+1; our check on scikit-image 0.26: an invalid sample drops only the cube it ends),
    # so the all-valid cubes, keyed by their first corner, are handed over one sample on
    cube = mask.copy()
    for shift in ((1, 0, 0), (0, 1, 0), (0, 0, 1), (1, 1, 0), (1, 0, 1), (0, 1, 1), (1, 1, 1)):
        shifted = np.zeros_like(mask)
        shifted[: mask.shape[0] - shift[0], : mask.shape[1] - shift[1], : mask.shape[2] - shift[2]] = \
            mask[shift[0]:, shift[1]:, shift[2]:]
        cube &= shifted
    if not np.any(cube):
        return empty
    try:
        keyed = np.zeros_like(cube)
        keyed[1:, 1:, 1:] = cube[:-1, :-1, :-1]
        verts, faces, _, _ = marching_cubes(np.where(mask, v, level), level, mask=keyed)
    except (ValueError, RuntimeError):  # no crossing inside the valid cubes
        return empty
    if len(faces) == 0:
        return empty
    return grid.to_physical(verts)[faces]


def interface_points(values: np.ndarray, grid: SamplingGrid, level: float = 0.5, *,
                     valid: np.ndarray | None = None, densify: float | None = None):
    """Points on the interface ``values = level`` of a sampled field, with their length or area.

    Parameters
    ----------
    values, grid, level, valid
        As for :func:`interface_elements`.
    densify : float, optional
        Largest distance between neighbouring points, as a fraction of the
        smallest grid spacing; default 1/8 in 2D, 1/4 in 3D.

    Returns
    -------
    points : ndarray of shape (n, dimension), in length units
    weights : ndarray of shape (n,)
        Interface length (2D) or area (3D) each point stands for; they sum to
        the length or area of the extracted interface.
    """
    densify = _normalize_densify(densify, grid.dimension)
    elements = interface_elements(values, grid, level, valid=valid)
    return _densify(elements, float(densify * grid.spacing.min()))


def _normalize_densify(densify, dim: int) -> float:
    if densify is None:
        return _DENSIFY[dim]
    try:
        value = float(densify)
    except (TypeError, ValueError):
        value = np.nan
    if not (np.isfinite(value) and value > 0):
        raise OptionError(f"densify must be a positive fraction of the grid spacing, found {densify!r}",
                          fix="for example 0.125")
    return value


def _densify(elements: np.ndarray, target: float):
    if len(elements) == 0:
        dim = elements.shape[-1]
        return np.empty((0, dim)), np.empty(0)
    if elements.shape[1] == 2:
        return _densify_segments(elements, target)
    return _densify_triangles(elements, target)


def _densify_segments(seg: np.ndarray, target: float):
    """Points at equal steps along segments (n, 2, dim), both ends included."""
    length = np.linalg.norm(seg[:, 1] - seg[:, 0], axis=1)
    keep = length > 0
    seg, length = seg[keep], length[keep]
    parts = np.maximum(1, np.ceil(length / target)).astype(np.int64)
    counts = parts + 1
    owner = np.repeat(np.arange(len(seg)), counts)
    k = np.arange(owner.size) - np.repeat(np.cumsum(counts) - counts, counts)
    t = (k / parts[owner])[:, None]
    points = seg[owner, 0] * (1 - t) + seg[owner, 1] * t
    weights = (length / counts)[owner]
    return points, weights


def _densify_triangles(tri: np.ndarray, target: float):
    """Points on a barycentric lattice of each triangle (n, 3, 3), corners included."""
    edges = np.stack([tri[:, 1] - tri[:, 0], tri[:, 2] - tri[:, 1], tri[:, 0] - tri[:, 2]], axis=1)
    longest = np.linalg.norm(edges, axis=2).max(axis=1)
    area = 0.5 * np.linalg.norm(np.cross(tri[:, 1] - tri[:, 0], tri[:, 2] - tri[:, 0]), axis=1)
    keep = area > 0
    tri, longest, area = tri[keep], longest[keep], area[keep]
    parts = np.maximum(1, np.ceil(longest / target)).astype(np.int64)
    points, weights = [], []
    for n in np.unique(parts):  # a handful of subdivision levels
        sel = parts == n
        i, j = np.meshgrid(np.arange(n + 1), np.arange(n + 1), indexing="ij")
        ok = (i + j) <= n
        lam = np.stack([i[ok], j[ok], n - i[ok] - j[ok]], axis=1) / n  # (m, 3)
        p = np.einsum("mk,tkd->tmd", lam, tri[sel]).reshape(-1, 3)
        points.append(p)
        weights.append(np.repeat(area[sel] / lam.shape[0], lam.shape[0]))
    return np.concatenate(points), np.concatenate(weights)


def shape_comparison_on_grid(values_a: np.ndarray, values_b: np.ndarray, grid: SamplingGrid, *,
                             level: float = 0.5, densify: float | None = None, periodic=(),
                             axis_names=("x", "y", "z")) -> dict:
    """Shape metrics of two fields already sampled on ``grid`` (see :func:`shape_comparison`).

    ``periodic`` names the grid's periodic axes among ``axis_names`` (the names of the grid's axes,
    as :func:`phasegauge.run._compare_steps.overlay_arrays` takes them): the interface distances
    wrap there, the period being the grid's extent along the axis.
    """
    a = np.asarray(values_a, dtype=np.float64)
    b = np.asarray(values_b, dtype=np.float64)
    if a.shape != grid.shape or b.shape != grid.shape:
        raise OptionError(f"sampled fields have shapes {a.shape} and {b.shape}, the grid {grid.shape}",
                          fix="resample both fields on this grid")
    valid = np.isfinite(a) & np.isfinite(b)
    dv = grid.cell_volume
    in_a = valid & (a > level)
    in_b = valid & (b > level)
    volume_a = float(np.count_nonzero(in_a)) * dv
    volume_b = float(np.count_nonzero(in_b)) * dv
    overlap = float(np.count_nonzero(in_a & in_b)) * dv
    result = {
        "mismatch_volume": float(np.count_nonzero(in_a ^ in_b)) * dv,
        "dice": 2.0 * overlap / (volume_a + volume_b) if volume_a + volume_b > 0 else np.nan,
        "field_difference": float(np.abs(a[valid] - b[valid]).sum()) * dv,
        "volume_a": volume_a,
        "volume_b": volume_b,
        "overlap_volume": overlap,
        "compared_volume": float(np.count_nonzero(valid)) * dv,
        "grid_spacing": float(grid.spacing.max()),
        "grid_samples": int(grid.n_samples),
    }
    result.update(interface_distances(a, b, grid, level=level, valid=valid, densify=densify, periodic=periodic,
                                      axis_names=axis_names))
    return result


def _periodic_box(grid: SamplingGrid, periodic, axis_names):
    """(origin, sizes, wraps) of a toroidal ``cKDTree`` for the grid: the periods of the periodic axes,
    and three extents along the others (points shifted one extent in, so no distance wraps there), and
    which axes wrap; None with no periodic axis."""
    names = tuple(str(n).lower() for n in axis_names)[: grid.dimension]
    wanted = tuple(str(a).lower() for a in (periodic or ()))
    unknown = [a for a in wanted if a not in names]
    if unknown:
        raise OptionError(f"periodic axes {unknown} are not axes of the sampling grid ({', '.join(names)})",
                          fix="name only axes both runs span")
    if not wanted:
        return None
    extent = np.array([hi - lo for lo, hi in grid.bounds])
    wraps = np.array([n in wanted for n in names])
    origin = grid.lower - np.where(wraps, 0.0, extent)
    return origin, np.where(wraps, extent, 3.0 * extent), wraps


def _wrapped(a, b, valid, grid: SamplingGrid, wraps):
    """The sampled fields with their first layer repeated after the last along each wrapped axis, and
    the grid one spacing longer there (its points beyond the period wrap in the distance queries)."""
    bounds, shape = [list(p) for p in grid.bounds], list(grid.shape)
    for k in np.flatnonzero(wraps):
        a, b = (np.concatenate([f, np.take(f, [0], axis=k)], axis=k) for f in (a, b))
        if valid is not None:
            valid = np.concatenate([valid, np.take(valid, [0], axis=k)], axis=k)
        bounds[k][1] += grid.spacing[k]
        shape[k] += 1
    return a, b, valid, SamplingGrid(tuple(map(tuple, bounds)), tuple(shape))


def interface_distances(a: np.ndarray, b: np.ndarray, grid: SamplingGrid, *, level: float = 0.5,
                        valid: np.ndarray | None = None, densify: float | None = None, periodic=(),
                        axis_names=("x", "y", "z")) -> dict:
    """Distances between the interfaces ``a = level`` and ``b = level`` sampled on ``grid``.

    Along the ``periodic`` axes (names among ``axis_names``, the grid's axes) a distance is the
    nearest image's, the period being the grid's extent there: a drop that crosses a periodic
    boundary in one run and not in the other is measured through the boundary, not across the box;
    the interfaces are joined across the periodic planes (their sizes include the piece there).

    Returns
    -------
    dict
        ``hausdorff``, ``hausdorff_ab`` (largest distance from a point of A's
        interface to B's), ``hausdorff_ba``, ``hausdorff_95`` (95th percentile
        of both directions' distances, weighted by interface measure),
        ``mean_distance`` (mean of both directions' distances, weighted the
        same way), ``interface_size_a``, ``interface_size_b``; all NaN
        distances when either interface is missing.
    """
    densify = _normalize_densify(densify, grid.dimension)
    box = _periodic_box(grid, periodic, axis_names)
    h = float(grid.spacing.min())
    if box is not None:  # the contours joined across the periodic planes: the first layer again after the last
        a, b, valid, grid = _wrapped(a, b, valid, grid, box[2])
    ea = interface_elements(a, grid, level, valid=valid)
    eb = interface_elements(b, grid, level, valid=valid)
    out = {"hausdorff": np.nan, "hausdorff_ab": np.nan, "hausdorff_ba": np.nan,
           "hausdorff_95": np.nan, "mean_distance": np.nan,
           "interface_size_a": _measure(ea), "interface_size_b": _measure(eb)}
    if len(ea) == 0 or len(eb) == 0:
        return out
    d_ab, w_a = _distances_to(ea, eb, h, densify, box)
    d_ba, w_b = _distances_to(eb, ea, h, densify, box)
    d = np.concatenate([d_ab, d_ba])
    w = np.concatenate([w_a, w_b])
    out.update(hausdorff_ab=float(d_ab.max()), hausdorff_ba=float(d_ba.max()),
               hausdorff=float(max(d_ab.max(), d_ba.max())),
               hausdorff_95=weighted_quantile(d, w, 0.95, method="inverted_cdf"),
               mean_distance=float(np.sum(d * w) / np.sum(w)))
    return out


def _measure(elements: np.ndarray) -> float:
    if len(elements) == 0:
        return 0.0
    if elements.shape[1] == 2:
        return float(np.linalg.norm(elements[:, 1] - elements[:, 0], axis=1).sum())
    e1 = elements[:, 1] - elements[:, 0]
    e2 = elements[:, 2] - elements[:, 0]
    return float(0.5 * np.linalg.norm(np.cross(e1, e2), axis=1).sum())


def _distances_to(source: np.ndarray, target: np.ndarray, h: float, densify: float, box=None):
    """Distance from points densified on ``source`` to the nearest point densified on ``target``.

    ``box``: (origin, sizes, wraps) of a toroidal tree (:func:`_periodic_box`), or None for plain distances.

    Two passes keep the nearest-neighbour queries cheap: every query against
    the target densified at ``_COARSE`` grid spacings, then the queries closer
    than ``_NEAR`` spacings again against the target densified at ``densify``
    spacings. A point at distance d from a target densified at spacing s is
    off by at most sqrt(d^2 + s^2 / 2) - d, which is below h / 60 for
    d >= 2 h and s = h / 2 (so the coarse pass needs no refinement there).
    """
    from scipy.spatial import cKDTree

    # queries: in 3D at one grid spacing (their number grows as 1 / spacing^2); the largest
    # distance over the source is then off by at most half a spacing, in practice far less
    query_spacing = densify if source.shape[1] == 2 else max(densify, _QUERY_3D)
    if box is None:
        def tree(points):
            return cKDTree(points)

        def placed(points):
            return points
    else:  # scipy's toroidal tree: coordinates wrapped into [0, size) along each axis
        origin, sizes = box[:2]

        def tree(points):
            return cKDTree(placed(points), boxsize=sizes)

        def placed(points):
            return np.mod(points - origin, sizes)
    query, weights = _densify(source, query_spacing * h)
    coarse = np.unique(_densify(target, max(_COARSE, densify) * h)[0], axis=0)
    d, _ = tree(coarse).query(placed(query))
    close = d < _NEAR * h
    if densify < _COARSE and np.any(close):
        fine = np.unique(_densify(target, densify * h)[0], axis=0)
        d_fine, _ = tree(fine).query(placed(query[close]))
        d[close] = np.minimum(d[close], d_fine)
    return d, weights


def shape_comparison(mesh_a: Mesh, c_point_a, mesh_b: Mesh, c_point_b, *, level: float = 0.5,
                     grid: SamplingGrid | None = None, densify: float | None = None, periodic=()) -> dict:
    """Compare the phase shapes of two runs on one regular grid.

    Parameters
    ----------
    mesh_a, mesh_b : Mesh
        The runs' meshes (same dimension and plane; any cell types).
    c_point_a, c_point_b : array_like of shape (n_points of each mesh,), dimensionless
        Each run's indicator on points, c in [0, 1] (:attr:`Indicator.point`).
    level : float
        The phase is ``c > level``; the interface is ``c = level``.
    grid : SamplingGrid, optional
        Default :func:`common_grid` (half the smaller median cell size over
        the region both meshes cover, capped in size).
    densify : float, optional
        Spacing of interface points as a fraction of the grid spacing;
        default 1/8 in 2D, 1/4 in 3D.
    periodic : sequence of {'x', 'y', 'z'}
        Periodic axes (as ``measure``'s ``periodic``): interface distances wrap there, the period
        being the grid's extent (both runs' box along the axis).

    Returns
    -------
    dict
        ``mismatch_volume`` (area in 2D, volume in 3D, of the symmetric
        difference of the two phases), ``dice`` (in [0, 1]), ``hausdorff``,
        ``hausdorff_ab``, ``hausdorff_ba``, ``hausdorff_95``, ``mean_distance``
        (length units), ``field_difference`` (``int |c_A - c_B| dV``),
        ``volume_a``, ``volume_b``, ``overlap_volume``, ``compared_volume``,
        ``interface_size_a``, ``interface_size_b``, ``grid_spacing``,
        ``grid_samples``.

    Raises
    ------
    OptionError
        Wrong array lengths, a level outside (0, 1) or a grid of another dimension.
    InputError
        Meshes of different dimension or plane, or domains that do not overlap.

    Notes
    -----
    Volumes are midpoint-rule counts of samples, so they carry an error of
    order (interface size) x (grid spacing) that mostly cancels; interface
    distances are accurate to about ``densify`` grid spacings plus the
    marching-squares/cubes placement error (second order in the spacing for
    smooth fields). Only the region where both runs have finite values is
    compared.

    References
    ----------
    Dice (1945), "Measures of the amount of ecologic association between
    species", Ecology 26; Huttenlocher, Klanderman & Rucklidge (1993),
    "Comparing images using the Hausdorff distance", IEEE PAMI 15;
    Lorensen & Cline (1987), marching cubes.
    """
    level = float(level)
    if not (0.0 < level < 1.0):
        raise OptionError(f"level must lie strictly between 0 and 1, found {level}",
                          fix="use 0.5 for the middle of the interface")
    check_same_space(mesh_a, mesh_b)
    if grid is None:
        grid = common_grid(mesh_a, mesh_b)
    a = resample_to_grid(mesh_a, c_point_a, grid)
    b = resample_to_grid(mesh_b, c_point_b, grid)
    names = tuple(AXIS_NAMES[i] for i in mesh_a.plane_axes[:2]) if mesh_a.dimension == 2 else AXIS_NAMES
    return shape_comparison_on_grid(a, b, grid, level=level, densify=densify, periodic=periodic, axis_names=names)
