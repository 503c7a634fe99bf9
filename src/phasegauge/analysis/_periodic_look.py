"""Whether a field looks periodic along an axis not measured as periodic.

On points: a periodic solver that writes its points on both ends of a period stores the same
values there. Measured without periodic axes, such a run splits every droplet that crosses the
boundary in two; :func:`looks_periodic` lets the run say so.

On the cells of a regular grid no value is written twice: there a field looks periodic when its
last layer of cells joins the first as smoothly as neighbouring layers join inside
(:func:`cells_look_periodic`). The stencil of the free energy and the chemical potential takes
such an axis as a closed wall unless it is named periodic. The same rule serves the points of a
regular grid (:func:`points_look_periodic`), whichever of a periodic solver's two layouts they
have (:func:`plane_written_twice`): both ends of the period written, or the period one spacing
beyond the last plane, as a spectral (FFT) code writes its array. :class:`PeriodicLook` holds one
step's answer, worked out once for the droplets' warning and the free energy's.
"""

from __future__ import annotations

from functools import cached_property

import numpy as np

from ..model.axes import AXIS_NAMES
from ..model.corners import corner_extremes
from ..model.mesh import Mesh

__all__ = ["looks_periodic", "cells_look_periodic", "points_look_periodic", "plane_written_twice", "PeriodicLook",
           "ROUNDOFF"]

#: largest difference, relative to the field's spread on the boundary, counted as round-off
ROUNDOFF = 1e-9

#: the field must vary along the boundary by at least this much (in c) for a match to mean anything
MIN_VARIATION = 1e-3

#: where the contour cuts both boundary layers, the layers may join wrapped up to this many times
#: the walled reading (our threshold: a sharp drop crossing the boundary by more than a cell reads
#: 1.00 to 1.19 on 32 to 128 cells across, white noise about 1.73: sqrt 3, its least of 400 fields
#: 1.33 on 32^2, 1.44 on 128 x 64, 1.16 on 16^2)
WALLED_SHARE = 1.25

#: ... but only where the two boundary layers differ (root mean square) by at least this many times the
#: walled reading, or join wrapped within :data:`CLOSE_JOIN` of the roughest inner layer (our thresholds:
#: walled fields whose boundary layers are near images, a meniscus on each side wall or a drop on each of
#: two opposite walls differing by less than a cell, join wrapped about as walled and read up to 0.46, at
#: 0.37 of the inner layer or more; sharp drops crossing by more than a cell read below 0.5 only when
#: centred within about 0.7 cell of the boundary, near images as those are)
DISTINCT_LAYERS = 0.5
#: (our threshold: such a drop on 128 x 64 cells, 0.57 cell off the boundary, reads 0.28)
CLOSE_JOIN = 0.3

#: a clear join: wrapped at most this share of the roughest inner layer (our threshold: a sharp drop
#: centred within half a cell of the boundary reads 0.02 to 0.23, white noise 0.8; a drop on each of two
#: opposite walls, a fifth of a cell apart, reads 0.14 to 0.24 and 1.3 to 1.55 times the walled reading,
#: while the drops crossing read up to 1.14 times it above 0.1 of the inner layer)
CLEAR_JOIN = 0.1

#: ... which may then read up to this many times the walled reading (our threshold: such a drop
#: reads up to 1.69; two unlike drops on both walls read 7 and more, a film thinning steadily from
#: wall to wall, by however little, as many times as it has layers)
CLEAR_WALLED_SHARE = 2.0


def _boundary_point_pairs(mesh: Mesh, axis: int):
    """Points on the low and high boundary planes of ``axis`` paired by their other coordinates, or None."""
    used = mesh.used_points
    coordinate = mesh.points[used, axis]  # the axis's column only: no copy of every used point
    lo, hi = mesh.bounds[0, axis], mesh.bounds[1, axis]
    span = hi - lo
    if not span > 0:
        return None
    tol = 1e-9 * max(float(np.ptp(mesh.bounds, axis=0).max()), 1e-300)
    low = np.flatnonzero(np.abs(coordinate - lo) <= tol)
    high = np.flatnonzero(np.abs(coordinate - hi) <= tol)
    if len(low) < 2 or len(low) != len(high) or len(low) + len(high) == len(coordinate):
        return None  # no pairs, or no point between the planes (a mesh one cell thick along the axis)
    if mesh.cell_parents is not None and _every_cell_spans(mesh, used[low], used[high]):
        return None  # one cell thick with split cells: their added centres lie between the planes
    others = [a for a in range(3) if a != axis]

    def other_coordinates(at):
        return mesh.points[used[at]][:, others]

    key_lo = np.round(other_coordinates(low) / (1e3 * tol)).astype(np.int64)
    key_hi = np.round(other_coordinates(high) / (1e3 * tol)).astype(np.int64)
    order_lo = np.lexsort(key_lo.T[::-1])
    order_hi = np.lexsort(key_hi.T[::-1])
    if not np.array_equal(key_lo[order_lo], key_hi[order_hi]):
        return None
    # the next plane inside the low boundary (the lowest coordinate beyond the boundary's round-off),
    # paired the same way (None when the mesh has no such plane: an unstructured mesh)
    inner = None
    beyond = coordinate[coordinate > lo + tol]
    if beyond.size and beyond.min() < hi - tol:
        nxt = np.flatnonzero(np.abs(coordinate - beyond.min()) <= tol)
        if len(nxt) == len(low):
            key_in = np.round(other_coordinates(nxt) / (1e3 * tol)).astype(np.int64)
            order_in = np.lexsort(key_in.T[::-1])
            if np.array_equal(key_in[order_in], key_lo[order_lo]):
                inner = used[nxt[order_in]]
    return used[low[order_lo]], used[high[order_hi]], inner


def _every_cell_spans(mesh: Mesh, low: np.ndarray, high: np.ndarray) -> bool:
    """Whether every whole cell (:attr:`Mesh.cell_parents`) has a corner on both boundary planes.

    A few whole cells (the first, the middle and the last one's pieces) are looked at first: on a
    mesh more than one cell thick one of them does not span, and the pieces' corners of the whole
    mesh are not gathered.
    """
    on_low = np.zeros(mesh.n_points, dtype=bool)
    on_high = np.zeros(mesh.n_points, dtype=bool)
    on_low[low], on_high[high] = True, True
    parents = np.asarray(mesh.cell_parents, dtype=np.intp)
    for probe in {int(parents[0]), int(parents[parents.size // 2]), int(parents[-1])}:
        pieces = np.flatnonzero(parents == probe)
        if not all(corner_extremes(mesh, flags, pieces).high.any() for flags in (on_low, on_high)):
            return False
    touches = [np.concatenate([flags[block.connectivity].any(axis=1) for block in mesh.blocks])
               for flags in (on_low, on_high)]
    cells = np.bincount(parents) > 0
    return bool(np.all((np.bincount(parents, weights=touches[0]) > 0)[cells])
                and np.all((np.bincount(parents, weights=touches[1]) > 0)[cells]))


def looks_periodic(mesh: Mesh, c_point, *, periodic=(), level: float | None = None) -> list:
    """Axes along which the point values on opposite boundaries match to round-off.

    Parameters
    ----------
    mesh : Mesh
    c_point : ndarray of shape (n_points,)
        Point values of the indicator.
    periodic : sequence of str
        Axes already measured as periodic (not checked).
    level : float, optional
        The droplets' level: an axis counts only where the phase (``c > level``) reaches its boundary
        planes (no droplet crosses them otherwise; a drop centred in a closed box, its tail the same
        on both walls, is no sign).

    Returns
    -------
    list of str
        Axis names (``'x'``, ``'y'``, ``'z'``) whose two boundary planes hold the same points
        (paired by their other coordinates) with values equal within ``ROUNDOFF`` of their
        spread, the values varying by more than ``MIN_VARIATION`` along the plane (a uniform
        matrix on both sides proves nothing) and, where the mesh has a next plane of points
        inside, across the boundary too (a field layered along the boundary, or mirrored at a
        wall, matches on both sides without being periodic).

    Notes
    -----
    The axes checked are those the cells span (:attr:`Mesh.plane_axes`: x and z of a 2D mesh in
    the x-z plane). Coordinates within 1e-9 of the mesh's largest extent count as one plane, so
    boundary points scattered by round-off are still paired. An axis with no point between its
    two boundary planes (a mesh one cell thick along it) is not checked: its two faces hold the
    same values by construction.
    """
    c = np.asarray(c_point, dtype=np.float64)
    found = []
    for axis in mesh.plane_axes[:mesh.dimension]:  # the axes the cells span (x and z of an x-z plane)
        name = AXIS_NAMES[axis]
        if name in periodic:
            continue
        pairs = mesh.memo(("boundary_point_pairs", axis), lambda a=axis: _boundary_point_pairs(mesh, a))
        if pairs is None:
            continue
        a, b = c[pairs[0]], c[pairs[1]]
        if not (np.isfinite(a).all() and np.isfinite(b).all()):
            continue
        spread = float(max(np.ptp(a), np.ptp(b)))
        if not (spread > MIN_VARIATION and float(np.max(np.abs(a - b))) <= ROUNDOFF * spread):
            continue
        if level is not None and not np.any(a > level):
            continue  # no droplet reaches the boundary: nothing is counted twice
        if pairs[2] is not None and float(np.max(np.abs(c[pairs[2]] - a))) <= MIN_VARIATION:
            continue  # nothing changes across the boundary (a layered field, a mirror wall): no sign
        found.append(name)
    return found


def plane_written_twice(values: np.ndarray, axis: int) -> bool:
    """Whether the first and last planes of an array of point values along ``axis`` are one plane
    written twice: equal within ``ROUNDOFF`` of the whole array's spread.

    Parameters
    ----------
    values : ndarray
        Point values of a regular grid, one array axis per mesh axis, finite.
    axis : int
        The array axis.

    Returns
    -------
    bool
        True for a periodic solver that writes its points on both ends of the period (a finite
        element code: the two boundary planes are the same points); False for one whose period is
        one spacing beyond the last plane (a spectral code writing its N x N array on points
        0..N-1), or for a field that is not periodic. Equal planes read True whatever the writer:
        a field uniform along the axis cannot tell its layout (written as N points 0..N-1, it is
        then measured over N - 1 of its N spacings).
    """
    values = np.asarray(values)
    if values.shape[axis] < 2:
        return False
    first = np.take(values, 0, axis=axis)
    last = np.take(values, -1, axis=axis)
    return float(np.max(np.abs(first - last))) <= ROUNDOFF * float(np.ptp(values))


def _layer_rms(values: np.ndarray, axis: int) -> np.ndarray:
    """Root mean square of ``values`` over each layer along ``axis`` (one number a layer)."""
    others = tuple(a for a in range(values.ndim) if a != axis)
    return np.sqrt(np.mean(np.square(values), axis=others))


def _layers_look_periodic(field: np.ndarray, mesh_axes, periodic, level: float) -> list:
    """Axis names along which the layers of ``field`` (one array axis per mesh axis, the last
    layer the one before the first across the period) join across the boundary as inside
    (the rule of :func:`cells_look_periodic`)."""
    found = []
    for k, mesh_axis in enumerate(mesh_axes):
        name = AXIS_NAMES[mesh_axis]
        if name in periodic or field.shape[k] < 4:
            continue
        layers = np.moveaxis(field, k, 0)
        first, last = layers[0], layers[-1]
        spread = max(float(np.ptp(first)), float(np.ptp(last)))
        if not spread > MIN_VARIATION:
            continue
        jump = first - last  # the step from the last layer to the first, wrapped
        if float(np.max(np.abs(jump))) <= MIN_VARIATION * spread:
            continue  # mirror images: wrapped and walled read alike, no sign either way
        steps = np.diff(layers, axis=0)  # d_i = layer i+1 - layer i
        inner = float(_layer_rms(np.diff(steps, axis=0), 0).max())
        wrapped = np.sqrt(0.5 * (np.mean(np.square(steps[0] - jump)) + np.mean(np.square(jump - steps[-1]))))
        walled = np.sqrt(0.5 * (np.mean(np.square(steps[0])) + np.mean(np.square(steps[-1]))))
        if not wrapped <= inner:
            continue
        cut = all(np.any(layer > level) and np.any(layer < level) for layer in (first, last))
        share = 1.0
        if cut and wrapped <= CLEAR_JOIN * inner:
            share = CLEAR_WALLED_SHARE
        elif cut and (float(np.sqrt(np.mean(np.square(jump)))) >= DISTINCT_LAYERS * walled
                      or wrapped <= CLOSE_JOIN * inner):
            share = WALLED_SHARE  # near images (jump about 0) read wrapped about as walled: no allowance
        if wrapped < share * walled:
            found.append(name)
    return found


def cells_look_periodic(mesh: Mesh, c_cell, *, periodic=(), level: float = 0.5) -> list:
    """Axes of a regular grid along which the cell values look periodic.

    Parameters
    ----------
    mesh : Mesh
        A regular grid (any other mesh gives an empty list).
    c_cell : ndarray of shape (n_cells,)
        Cell values of the indicator, dimensionless (0 and 1 in the bulk phases).
    periodic : sequence of str
        Axes already measured as periodic (not checked).
    level : float
        The contour's level (dimensionless): where it cuts both boundary layers, an interface
        crosses the boundary and the join may read a little above the walled reading (below).

    Returns
    -------
    list of str
        Axis names (``'x'``, ``'y'``, ``'z'``, the mesh's own) along which

        - the first and last layers of cells vary along the boundary by more than
          ``MIN_VARIATION`` (a uniform phase on both walls proves nothing, as for points) and are
          not mirror images (equal within ``MIN_VARIATION`` of that variation: wrapped and walled then
          read alike, and a field mirrored at its walls cannot be told from a periodic one
          mirrored about its boundary, as a drop centred on it is),
        - the second differences across the boundary with the last layer wrapped onto the first
          are no larger (root mean square over the two boundary layers) than those of the roughest
          layer inside: the layers join across the boundary as neighbouring layers do, and
        - they are smaller than with closed walls (the boundary cell itself beyond the boundary,
          the no-flux stencil): a field with no gradient at its walls, and noise, join no better
          wrapped. Where the contour ``c = level`` cuts both boundary layers (an interface crosses
          the boundary) they may read up to ``WALLED_SHARE`` times the walled reading, or
          ``CLEAR_WALLED_SHARE`` times where they are at most ``CLEAR_JOIN`` of the roughest inner
          layer: a sharp (volume-of-fluid) drop across the boundary joins wrapped no better than
          walled by this measure, its fractions along an interface row bending where the interface
          leaves the row, while a drop on one wall, or two at different places on both, read many
          times more wrapped than walled. ``WALLED_SHARE`` is allowed only where the two boundary
          layers differ (root mean square) by at least ``DISTINCT_LAYERS`` times the walled reading,
          or join wrapped within ``CLOSE_JOIN`` of the roughest inner layer: layers that are near
          images (a meniscus on each side wall, drops on two opposite walls, sides differing by less
          than a cell) join wrapped about as walled, a tie and no sign.

    Notes
    -----
    The second differences are the Laplacian's stencil times h^2 (the discrete operator of
    :func:`phasegauge.analysis.thermo.equilibrium_metrics`). Our check: a periodic
    Cahn-Hilliard run (96^2, kappa = 2, from noise to late coarsening) reads 0.36 to 0.70 of the
    roughest inner layer wrapped and is smaller wrapped than walled at every resolved step; the
    same run with walls (cosine transform, no flux) reads 5.9 to 25 wrapped; its starting noise
    reads 0.85 wrapped and 0.48 walled (no sign). Sharp drops across the boundary of a 2 x 1 box
    (cell fractions of exact discs, 16 x 16 samples a cell, radius 0.05 to 0.3, seeded) that cross
    it by more than a cell, their fractions not mirror images: 196 of 198 named on 128 x 64 cells,
    149 of 174 on 64 x 32, 81 of 125 on 32 x 16; those centred within 0.7 cell of the boundary
    are near images and may go unnamed, as walled fields alike on both walls must. An axis with
    fewer than 4 layers is not checked.
    """
    grid = mesh.regular_grid
    values = np.asarray(c_cell, dtype=np.float64)
    if grid is None or values.shape != (mesh.n_cells,) or not np.isfinite(values).all():
        return []
    return _layers_look_periodic(grid.cells_to_array(values), grid.mesh_axes, periodic, float(level))


def points_look_periodic(mesh: Mesh, c_point, *, periodic=(), level: float = 0.5) -> list:
    """Axes of a regular grid along which the point values look periodic: the rule of
    :func:`cells_look_periodic` on the planes of points.

    Parameters
    ----------
    mesh : Mesh
        A regular grid (any other mesh gives an empty list).
    c_point : ndarray of shape (n_points,)
        Point values of the indicator, dimensionless (0 and 1 in the bulk phases).
    periodic : sequence of str
        Axes already measured as periodic (not checked).
    level : float
        The contour's level, as for :func:`cells_look_periodic`.

    Returns
    -------
    list of str
        Axis names along which the planes of points join across the boundary as neighbouring
        planes join inside, and better than with closed walls. Where the two boundary planes are
        one plane written twice (:func:`plane_written_twice`) the last but one plane is the one
        before the first; otherwise the last plane is (the period one spacing beyond it).
    """
    grid = mesh.regular_grid
    values = np.asarray(c_point, dtype=np.float64)
    if grid is None or values.shape != (mesh.n_points,) or not np.isfinite(values).all():
        return []
    field = grid.points_to_array(values)
    for k in range(field.ndim):
        if plane_written_twice(field, k):  # one period: the last plane left out
            field = field[tuple(slice(None, -1) if j == k else slice(None) for j in range(field.ndim))]
    return _layers_look_periodic(field, grid.mesh_axes, periodic, float(level))


class PeriodicLook:
    """Along which axes one step's indicator looks periodic, worked out once (when first asked) for
    the droplets' and the free energy's warnings, each of which words its own.

    Parameters
    ----------
    mesh : Mesh
    indicator : Indicator
        The step's indicator: its point values where the field is on points, else its cell values.
    periodic : sequence of str
        Axes measured as periodic (not checked).
    level : float
        The droplets' and the contour's level.
    """

    def __init__(self, mesh: Mesh, indicator, *, periodic=(), level: float = 0.5):
        self.mesh = mesh
        self.on_points = indicator.location == "point"
        self.values = indicator.point if self.on_points else indicator.cell
        self.periodic = tuple(periodic)
        self.level = float(level)

    @cached_property
    def axes(self) -> list:
        """The axes whose boundary layers (cells, or planes of points in either layout) join wrapped
        as neighbouring ones join: :func:`cells_look_periodic` or :func:`points_look_periodic`."""
        rule = points_look_periodic if self.on_points else cells_look_periodic
        return rule(self.mesh, self.values, periodic=self.periodic, level=self.level)

    @cached_property
    def droplet_axes(self) -> list:
        """The axes across which a droplet would be counted twice: those of :attr:`axes` where the
        phase (``c > level``) reaches both boundary layers, and on points those of
        :func:`looks_periodic` (both boundary planes written, on any mesh)."""
        found = set(self._reached(self.axes))
        if self.on_points:
            found.update(looks_periodic(self.mesh, self.values, periodic=self.periodic, level=self.level))
        return [name for name in AXIS_NAMES if name in found]

    def _reached(self, names) -> list:
        """Those of ``names`` along which the phase reaches the first and the last layer."""
        if not names:
            return []
        grid = self.mesh.regular_grid
        field = (grid.points_to_array if self.on_points else grid.cells_to_array)(self.values)
        reached = []
        for k, mesh_axis in enumerate(grid.mesh_axes):
            layers = np.moveaxis(field, k, 0)
            if AXIS_NAMES[mesh_axis] in names and np.any(layers[0] > self.level) and np.any(layers[-1] > self.level):
                reached.append(AXIS_NAMES[mesh_axis])
        return reached
