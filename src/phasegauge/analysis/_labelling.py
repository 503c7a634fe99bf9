"""Droplet labelling: connected regions of c > level, periodic joins, band sharing, per-droplet table.

The algorithm, in vectorised steps. Everything after the first pass over c runs on the
*near* cells only (c above the band floor: the droplet cores and their diffuse band, a
small part of a large mesh), numbered locally in mesh order, with their face neighbours
taken from a per-mesh table (``_droplet_graph.neighbour_table``: index arithmetic on a regular
grid, ``mesh.face_pairs`` elsewhere). Steps 1 and 2 live in ``_droplet_graph``, step 3 in
``_band_sharing``, step 4 in ``_droplet_measures``; this module checks the arguments and runs them:

1. *Pieces.* Cells with ``c > level`` are grouped into connected pieces by
   ``scipy.sparse.csgraph.connected_components`` on the face graph restricted
   to those cells (on a regular grid numbered in the raster order of
   ``scipy.ndimage.label``), or for point adjacency on the cell-point graph
   (``scipy.ndimage.label`` with the full structure on a regular grid).
   With data on points (``point_values``) face adjacency is the graph of the
   cells and their corners with c > level: two cells join where they share a
   point above the level, as the region the contour of the points bounds does.
2. *Periodic joins.* Boundary faces on the low and high side of each periodic
   axis are matched by their centre coordinates in the other axes (a KD-tree),
   giving cell pairs across the boundary. Pieces linked by such pairs form one
   droplet. A spanning tree of the piece graph gives each piece the period
   shift that unwraps it next to its neighbours (pointer jumping along the
   tree); a link whose shifts do not close (a cycle with a net shift) marks a
   droplet that wraps the whole period: ``spanning``.
3. *Band sharing.* Cells with ``band_floor < c <= level`` (the diffuse band
   below the level) go to the droplet nearest to them along the face graph
   (plus periodic pairs): rings of cells grown breadth first from the
   droplet cores, each new cell taking the droplet of its neighbour in the
   ring before with the highest c (one pass over the neighbour table for
   all rings, then down these parent links ring by ring; a wide plateau
   is finished by a multi-source Dijkstra search along centroid distances).
   Band cells whose band region touches no droplet (a dissolving remnant
   below the level) stay unassigned.
4. *Table.* Integrals with weights ``c dV`` over each droplet's cells,
   threshold cells and band share, by ``numpy.bincount``; boxes from the
   corners of the core cells.

On a mesh whose cells a reader split into pieces (:attr:`Mesh.cell_parents`: polyhedra into
tetrahedra) every step runs on the *whole* cells, as on any other mesh a droplet is a set of the
solver's cells: c, the velocity and the contour's cells are taken per whole cell first (the
volume-weighted mean of the pieces, so ``c dV`` per whole cell is the sum of its pieces'), and the
graph, centroids, sizes and corner boxes are those of the whole cells
(:class:`~phasegauge.model._whole_cells.WholeCells`, built once per mesh).
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from ..errors import OptionError
from ..model.axes import AXIS_INDEX, AXIS_NAMES
from ..model.corners import corner_extremes
from ..model.fields import cell_values, vector_values
from ..model.mesh import Mesh
from ..model._centroids import cell_centroids_of
from ..model._grouping import index_dtype
from ..model._whole_cells import WholeCells, whole_cells
from ._band_sharing import finish_far_band, share_band
from ._droplet_graph import join_periodic, neighbour_table, pairs_through_points, periodic_pairs, pieces
from ._droplet_measures import (TABLE_COLUMNS, _at_cells, contour_owners, droplet_boxes, droplet_table,
                                mean_velocity, shape_factors, volume_integrals)

__all__ = ["DropletLabels", "label_droplets", "TABLE_COLUMNS"]

#: near cells whose neighbour rows are renumbered at a time
_ROW_CHUNK = 1 << 16


@dataclass(frozen=True)
class DropletLabels:
    """Result of :func:`label_droplets`.

    Attributes
    ----------
    labels : ndarray of shape (n_cells,), int32
        Droplet number of each cell with ``c > level``; -1 elsewhere. On a split mesh
        (``whole_cells``) one entry per whole cell, numbered by :attr:`Mesh.cell_parents`
        (shape ``(cell_parents.max() + 1,)``), c being the whole cell's mean.
    shared_labels : ndarray, int32, shaped and numbered as ``labels``
        As ``labels``, plus the diffuse-band cells shared out to droplets
        (the cells each droplet's ``volume`` integrates over).
    table : pandas.DataFrame
        One row per droplet, columns :data:`TABLE_COLUMNS`.
    weights : ndarray of float64, shaped and numbered as ``labels``
        ``c dV`` of every cell (0 where c is not finite), in volume units; of every whole cell
        on a split mesh (the sum of its pieces' ``c dV``).
    level : float
    periodic : tuple of str
        The periodic axes used, e.g. ``('x',)``.
    whole_cells : bool
        True when the arrays are numbered per whole cell of a split mesh.
    """

    labels: np.ndarray
    shared_labels: np.ndarray
    table: pd.DataFrame
    weights: np.ndarray
    level: float
    periodic: tuple = field(default=())
    whole_cells: bool = False

    @property
    def count(self) -> int:
        """Number of droplets."""
        return int(len(self.table))


# --------------------------------------------------------------------------- arguments
def _normalize_periodic(mesh: Mesh, periodic) -> tuple:
    """Periodic axis names -> (names, indices into ``mesh.coordinates`` columns)."""
    if periodic is None:
        return (), ()
    if isinstance(periodic, str):
        periodic = (periodic,)
    names, index = [], []
    plane = list(mesh.plane_axes[: mesh.dimension])
    for name in periodic:
        key = str(name).lower()
        if key not in AXIS_NAMES:
            raise OptionError(f"periodic axes must be among 'x', 'y', 'z', found {name!r}",
                              fix="name the periodic axes, e.g. periodic=('x',)")
        axis = AXIS_INDEX[key]
        if axis not in plane:
            raise OptionError(
                f"periodic axis '{key}' is not an axis of this {mesh.dimension}D mesh "
                f"(it spans {', '.join(AXIS_NAMES[a] for a in plane)})",
                fix="name only axes the mesh spans")
        if key not in names:
            names.append(key)
            index.append(plane.index(axis))
    return tuple(names), tuple(index)


# --------------------------------------------------------------------------- the steps
def _check_options(level, connectivity: str, band_floor, interface_cells, interface_sizes) -> tuple:
    """The scalar options checked: (level, band_floor) as floats."""
    if connectivity not in ("face", "point"):
        raise OptionError(f"connectivity must be 'face' or 'point', found {connectivity!r}",
                          fix="use connectivity='face' (default) or 'point'")
    level = float(level)
    if not np.isfinite(level):
        raise OptionError(f"level must be a finite number, found {level}", fix="use e.g. level=0.5")
    band_floor = float(band_floor)
    if not (np.isfinite(band_floor) and band_floor < level):
        raise OptionError(f"band_floor must be below level ({level}), found {band_floor}",
                          fix="use a small value such as 1e-3")
    if (interface_cells is None) != (interface_sizes is None):
        raise OptionError("interface_cells and interface_sizes must be given together",
                          fix="give both contour arrays or neither")
    return level, band_floor


def _contour_arrays(mesh: Mesh, interface_cells, interface_sizes, interface_centres, interface_normals) -> tuple:
    """The contour elements' cells, sizes and places (their centres moved half a cell into the
    measured phase along their normals, in the plane's axes; None without centres) checked, or
    (None, None, None) without them."""
    for name, given, needs in (("interface_centres", interface_centres, (interface_cells,)),
                               ("interface_normals", interface_normals, (interface_cells, interface_centres))):
        if given is not None and any(n is None for n in needs):
            wanted = "interface_cells, interface_sizes" + (" and interface_centres" if len(needs) > 1 else "")
            raise OptionError(f"{name} needs {wanted}", fix=f"give them with {name}, or leave {name} out")
    if interface_cells is None:
        return None, None, None
    icells = np.asarray(interface_cells)
    isizes = np.asarray(interface_sizes, dtype=np.float64)
    if icells.ndim != 1 or isizes.shape != icells.shape:
        raise OptionError(f"interface_cells and interface_sizes must be 1D of one length, found "
                          f"{icells.shape} and {isizes.shape}", fix="give one cell and one size per element")
    if icells.size and (not np.issubdtype(icells.dtype, np.integer) or icells.min() < 0
                        or icells.max() >= mesh.n_cells):
        raise OptionError(f"interface_cells must be cell indices in [0, {mesh.n_cells}), found "
                          f"{icells.dtype} in [{icells.min()}, {icells.max()}]",
                          fix="pass the index of the cell holding each contour element")
    if interface_centres is None:
        return icells, isizes, None
    places = _per_element(mesh, interface_centres, "interface_centres", icells.size)
    if interface_normals is not None:
        normals = _per_element(mesh, interface_normals, "interface_normals", icells.size)
        places = places - 0.5 * mesh.cell_sizes_of(icells)[:, None] * normals  # the normals point out
    return icells, isizes, places


def _per_element(mesh: Mesh, values, name: str, k: int) -> np.ndarray:
    """A (k, dim) or (k, 3) array of element vectors checked, in the plane's axes."""
    out = np.asarray(values, dtype=np.float64)
    if out.ndim != 2 or out.shape[0] != k or out.shape[1] not in (mesh.dimension, 3):
        raise OptionError(f"{name} must have shape ({k}, {mesh.dimension}) or ({k}, 3), found {out.shape}",
                          fix="give one row per contour element")
    if out.shape[1] == 3 and mesh.dimension == 2:
        out = out[:, list(mesh.plane_axes[:2])]
    return out


@dataclass(frozen=True)
class _NearCells:
    """The cells with c above the band floor (cores and band), numbered locally in mesh order.

    ``neighbours`` are the face neighbours in local numbers, ``k`` standing for "no cell".
    """

    cells: np.ndarray
    c: np.ndarray
    core: np.ndarray
    core_local: np.ndarray
    neighbours: np.ndarray

    @property
    def k(self) -> int:
        return int(self.cells.size)


def _near_cells(mesh: Mesh, c0: np.ndarray, *, level: float, band_floor: float) -> tuple:
    """The near cells, and the local number of every mesh cell (and of -1, its last entry; ``k``: none).

    The mesh-wide local numbers are returned apart, so the caller lets them go once used.
    """
    cells = np.flatnonzero(c0 > band_floor)
    k = cells.size
    # entry n_cells (index -1): "no cell"; int32 where it fits (the local neighbour rows take its type)
    local = np.full(mesh.n_cells + 1, k, dtype=index_dtype(k))
    local[cells] = np.arange(k)
    c_near = c0[cells]
    core = c_near > level
    table = neighbour_table(mesh)
    neighbours = np.empty((k, table.shape[1]), dtype=local.dtype)
    for lo in range(0, k, _ROW_CHUNK):  # per chunk of rows: no second (k, m) array of mesh numbers
        np.take(local, np.take(table, cells[lo:lo + _ROW_CHUNK], axis=0), out=neighbours[lo:lo + _ROW_CHUNK])
    return _NearCells(cells=cells, c=c_near, core=core, core_local=np.flatnonzero(core),
                      neighbours=neighbours), local


def _number_droplets(near: _NearCells, piece: np.ndarray, droplet_of_piece: np.ndarray, n_drop: int,
                     spanning: np.ndarray) -> tuple:
    """Droplets numbered in the order of their first cell, whatever path labelled them: (label, spanning)."""
    k, core_local = near.k, near.core_local
    raw = droplet_of_piece[piece[core_local]]
    first = np.full(n_drop, k, dtype=np.int64)
    found, where = np.unique(raw, return_index=True)
    first[found] = core_local[where]
    rank = np.empty(n_drop, dtype=np.int64)
    rank[np.argsort(first, kind="stable")] = np.arange(n_drop)
    label = np.full(k, -1, dtype=np.int64)
    label[core_local] = rank[raw]
    renumbered = np.zeros(n_drop, dtype=bool)
    renumbered[rank] = spanning
    return label, renumbered


def _share(mesh: Mesh, near: _NearCells, label: np.ndarray, links, local_links) -> tuple:
    """Band cells shared out by rings, a wide plateau finished by distance: (shared, root), local."""
    extra = np.concatenate([p for p, _, _ in local_links]) if links else np.empty((0, 2), np.int64)
    extra = extra[(extra < near.k).all(axis=1)]
    shared, root, far = share_band(label, near.c, near.neighbours, extra)
    if far:  # a wide plateau: the rest by distance along the centroids
        shared, root = finish_far_band(mesh, near.cells, shared, root, links, near.neighbours)
    return shared, root


def _unwrap(mesh: Mesh, near: _NearCells, member: np.ndarray, root: np.ndarray, piece: np.ndarray,
            offset: np.ndarray, axes, links) -> tuple:
    """Unwrapped centroids of the member cells and corner boxes of the core cells: (X, box_lo, box_hi).

    Core cells move by their piece's shift, band cells next to their root cell.
    """
    cells, core_local = near.cells, near.core_local
    X = cell_centroids_of(mesh, cells[member])  # made from the corners on a split mesh (it keeps none)
    box_lo, box_hi = _corner_boxes(mesh, cells[core_local])
    if not axes:
        return X, box_lo, box_hi
    shift = np.zeros((near.k, mesh.dimension))
    for j, ax in enumerate(axes):
        shift[core_local, ax] = offset[piece[core_local], j]
    in_band = ~near.core[member]
    band_member = member[in_band]
    source = root[band_member]
    at_source, at_band = cell_centroids_of(mesh, cells[source]), X[in_band]
    for ax, (_, _, period) in zip(axes, links):
        ref = at_source[:, ax] + shift[source, ax]
        shift[band_member, ax] = period * np.round((ref - at_band[:, ax]) / period)
    return X + shift[member], box_lo + shift[core_local], box_hi + shift[core_local]


def _corner_boxes(mesh, cells: np.ndarray) -> tuple:
    """Extremes of the corner coordinates of ``cells`` (sorted): (low, high), each (k, dim)."""
    if isinstance(mesh, WholeCells):  # from the pieces of each whole cell
        return mesh.corner_boxes(cells)
    return corner_extremes(mesh, mesh.coordinates, cells)


def _on_mesh(mesh: Mesh, cells: np.ndarray, local_values: np.ndarray) -> np.ndarray:
    """Local droplet numbers as an int32 array over all mesh cells, -1 off the near ``cells``."""
    out = np.full(mesh.n_cells, -1, dtype=np.int32)
    out[cells] = local_values
    return out


# --------------------------------------------------------------------------- public
def label_droplets(mesh: Mesh, c_cell, *, level: float = 0.5, connectivity: str = "face",
                   periodic=(), velocity=None, interface_cells=None, interface_sizes=None,
                   interface_centres=None, interface_normals=None, band_floor: float = 1e-3,
                   resolution_cells: float = 2.0, bulk=None, point_values=None) -> DropletLabels:
    """Label the droplets (connected regions of ``c > level``) and measure each one.

    Parameters
    ----------
    mesh : Mesh
        On a mesh of split cells (:attr:`Mesh.cell_parents`) the droplets are sets of whole cells
        (see Notes), and the returned arrays are numbered per whole cell.
    c_cell : ndarray of shape (n_cells,), dimensionless, nominally in [0, 1], or an Indicator
        Phase indicator per cell. NaN cells belong to no droplet and are kept
        out of every integral; values are used as given (not clipped). An
        :class:`~phasegauge.model.indicator.Indicator` of data on points also
        gives ``point_values`` (its ``point``).
    level : float
        Cells with ``c > level`` form the droplets' cores.
    connectivity : {'face', 'point'}
        Cells are connected through a shared edge (2D) or face (3D), or
        through any shared point. Point adjacency joins droplets that touch
        only at a corner. With ``point_values``, face adjacency joins two
        cells where they share a point with c > level (see Notes).
    periodic : sequence of {'x', 'y', 'z'}
        Periodic axes: regions crossing the boundary are joined, their
        centroids unwrapped, and a region wrapping the whole period is marked
        ``spanning``. The mesh's opposite boundary faces must match (their
        centres are paired within half a cell).
    velocity : ndarray of shape (n_cells, dim) or (n_cells, 3), optional
        Cell velocities, in length units per time unit.
    interface_cells : ndarray of shape (k,), int, optional
        Cell holding each element (segment in 2D, triangle in 3D) of the
        ``c = level`` contour computed elsewhere.
    interface_sizes : ndarray of shape (k,), optional
        Length (2D) or area (3D) of each contour element.
    interface_centres : ndarray of shape (k, dim) or (k, 3), optional
        Centre of each contour element (:attr:`Contour.centroids`), in length units: an element
        around which the cores of two droplets meet goes to the droplet of the core cell nearest
        to it (see Notes); without them, nearest to the element's cell's centroid.
    interface_normals : ndarray of shape (k, dim) or (k, 3), optional
        Unit normal of each element pointing out of the measured phase (:attr:`Contour.normals`):
        the nearest core cell is then taken from half a cell inside the element.
    band_floor : float
        Band cells with ``band_floor < c <= level`` are shared out to droplets.
    resolution_cells : float
        ``under_resolved`` when the equivalent radius is below this many local
        cell sizes (2 after Hendrickson, Weymouth & Yue 2020).
    bulk : (float, float), optional
        The measured bulk values of the two phases (``bulk_plateaus`` of the
        interface analysis). Every droplet is then measured on c rescaled
        between them, (c - low) / (high - low), with ``level`` and
        ``band_floor`` read on the same scale: a matrix whose bulk sits off 0
        (a Cahn-Hilliard run) adds nothing to a droplet's volume, and a
        droplet's inside counts fully though its bulk sits off 1.
    point_values : ndarray of shape (n_points,), optional
        The indicator on the points when the data is on points (``c_cell``
        then being the means of the corners): the cores join through the
        points above the level (see Notes). Read on the scale of ``c_cell``,
        before ``bulk`` rescales both.

    Returns
    -------
    DropletLabels
        ``labels``, ``shared_labels``, ``weights`` and ``table``, one row per
        droplet with columns:

        * ``droplet``: number, 0.. in the order of each droplet's first cell;
        * ``volume``: int c dV over the droplet's cells and its band share
          (area in 2D), threshold-free;
        * ``threshold_volume``: measure of its cells with ``c > level``;
        * ``centroid_x, centroid_y, centroid_z``: int c x dV / volume,
          unwrapped across periodic boundaries and then put back in the domain;
          the coordinate normal to a 2D mesh's plane is that plane's value;
        * ``equivalent_diameter``: of the circle (2D) or sphere (3D) of
          ``volume``;
        * ``circularity`` (2D; NaN in 3D): pi d / P (Hysing et al. 2009) and
          ``sphericity`` (3D; NaN in 2D): pi^(1/3) (6 V)^(2/3) / A (Wadell
          1935), P and A summed over the droplet's contour elements (see
          Notes; NaN without contour elements);
        * ``bbox_min_x .. bbox_max_z``: box of the corners of its ``c > level``
          cells, in the unwrapped frame (it can reach past a periodic boundary);
        * ``velocity_x, velocity_y, velocity_z``: int c u dV / volume (NaN
          without a velocity);
        * ``under_resolved``: equivalent radius < ``resolution_cells`` mean
          cell sizes of the droplet;
        * ``spanning``: the droplet wraps a whole periodic axis.

    Raises
    ------
    OptionError
        An argument of the wrong shape or value.

    Notes
    -----
    Band sharing: every cell with ``band_floor < c <= level`` goes to the
    droplet nearest to it along the cell graph (face pairs and periodic
    pairs), counted in rings of cells grown breadth first from all droplet
    cores at once; a cell reached from two droplets in the same ring takes
    the droplet of its neighbour with the higher c (clipped to [0, 1]; on
    equal c, the neighbour with the lower cell number). Between two droplets
    the band is thus split at the middle. After 32 rings (a wide plateau of
    band values) the remaining cells go to the nearest assigned cell along
    centroid distances (multi-source Dijkstra). Band cells in a band
    region that touches no droplet are left out of every droplet. Point
    connectivity applies to the cores; the band is always shared through
    faces.

    Data on points: a cell's c is the mean of its corners, so the cells on
    both sides of a film one row of points thick whose points lie below the
    level can lie above it, and joined through their shared face they would
    make one droplet of two drops that the contour c = level of the points
    still shows apart. With ``point_values`` two core cells join only where
    they share a point above the level, whose neighbourhood the region above
    the level holds: on simplices the droplets are then the pieces of that
    region (of its piecewise-linear interpolant) that hold core cells, as
    ``skimage.measure.label`` on a lattice of points (connectivity 1) gives
    them. A neck above the level on points whose cells all average below it
    (one row of points) joins nothing: its two sides are two droplets while
    the contour is one piece.

    Every contour element bounds a droplet and counts in its perimeter or
    surface. An element in a core cell (c above the level) bounds that
    cell's droplet. The others lie where the contour's corners above the
    level take their values from core cells sharing those corners (the
    ``c = level`` contour of point values rebuilt from cell data crosses
    empty cells beside full ones): such an element goes to the droplet whose
    core cells share a corner with its cell, and where the cores of several
    droplets do (drops a cell apart), to the one whose core cell's centroid
    lies nearest the element's centre moved half a cell into the measured
    phase (along ``interface_normals``; without them, the centre itself;
    without centres, the centroid of its cell); on equal distance the one of higher
    c, then of lower centroid coordinates, so no cell numbers decide. An
    element with no core cell around its cell counts for the droplet its
    cell was shared to, if any.

    On a split mesh (polyhedra read as tetrahedra about their face and cell
    centres) each whole cell takes ``c = sum(V_piece c_piece) / V_whole``
    (its exact cell integral over its measure: ``c dV`` and so every volume
    integral of the pieces is unchanged), the velocity likewise, and a
    contour element the whole cell of its piece; the cells, faces, centroids
    and corner boxes above are then the whole cells'. A mesh of unsplit cells
    is labelled cell by cell as before.

    Circularity and sphericity take the threshold-free ``volume``, which for a
    diffuse profile exceeds the volume inside the ``c = level`` contour by a
    term of order (width / radius)^2 (logistic profile: a factor
    1 + pi^2 eps^2 / (3 R^2) in 2D, 1 + pi^2 eps^2 / R^2 in 3D), so a circle
    or sphere reads slightly above 1.

    References
    ----------
    Hendrickson, K., Weymouth, G. D., Yue, D. K.-P. (2020). Informed component
    label algorithm for robust identification of connected components with
    volume of fluid method. Computers & Fluids.

    Hysing, S. et al. (2009). Quantitative benchmark computations of
    two-dimensional bubble dynamics. Int. J. Numer. Meth. Fluids 60:1259.

    Wadell, H. (1935). Volume, shape, and roundness of quartz particles.
    Journal of Geology 43:250.

    Examples
    --------
    >>> import numpy as np
    >>> from phasegauge.meshgen import grid_mesh
    >>> mesh = grid_mesh((20, 20))
    >>> x, y = mesh.cell_centroids.T
    >>> c = ((x - 0.3) ** 2 + (y - 0.5) ** 2 < 0.1 ** 2) | ((x - 0.7) ** 2 + (y - 0.5) ** 2 < 0.1 ** 2)
    >>> label_droplets(mesh, c.astype(float)).count
    2
    """
    level, band_floor = _check_options(level, connectivity, band_floor, interface_cells, interface_sizes)
    names, axes = _normalize_periodic(mesh, periodic)
    above = _points_above(mesh, c_cell, point_values, level)
    c = cell_values(mesh, c_cell, "c_cell")
    vel = None if velocity is None else vector_values(mesh, velocity, "velocity", "cell")[0]
    icells, isizes, places = _contour_arrays(mesh, interface_cells, interface_sizes, interface_centres,
                                             interface_normals)
    source, split = mesh, mesh.cell_parents is not None
    if split:  # per whole cell from here on (c dV summed over each whole cell's pieces)
        mesh = whole_cells(source)
        c = mesh.mean_of(c)
        vel = None if vel is None else mesh.mean_of(vel)
        icells = None if icells is None else source.cell_parents[icells]
    given_level = level
    if bulk is not None:
        c, level = _between_plateaus(c, level, bulk)

    c0 = np.where(np.isfinite(c), c, 0.0)
    del c  # a mesh-wide array (rescaled between the plateaus): c0 from here on
    dV = mesh.cell_measures
    # all further work on the near cells (c above the band floor: cores and band)
    near, local = _near_cells(mesh, c0, level=level, band_floor=band_floor)
    weights = c0  # c dV, in place: c0 is this call's own array and not read again
    weights *= dV
    del c0
    cells, core_local = near.cells, near.core_local

    n_pieces, piece = pieces(mesh, cells, near.core, near.neighbours, connectivity, above)
    links = [periodic_pairs(source, ax, whole=split) for ax in axes]  # (pairs, low end, period) per axis
    local_links = [(local[pairs], lo, period) for pairs, lo, period in links]
    del local  # mesh-wide (4 bytes a cell): the near cells' own numbers from here on
    joins = local_links  # the band is shared through every pair; the cores join through points above the level
    if above is not None and connectivity == "face" and axes:
        joins = [(pairs_through_points(mesh, source.coordinates, cells, near.core, pairs, above, ax, lo, period),
                  lo, period) for ax, (pairs, lo, period) in zip(axes, local_links)]
    del above
    n_drop, droplet_of_piece, offset, spanning = join_periodic(n_pieces, piece, joins)
    del joins
    label, spanning = _number_droplets(near, piece, droplet_of_piece, n_drop, spanning)
    shared, root = _share(mesh, near, label, links, local_links)

    member = np.flatnonzero(shared >= 0)
    g = shared[member]
    member_cells = cells[member]
    X, box_lo, box_hi = _unwrap(mesh, near, member, root, piece, offset, axes, links)
    del root, piece
    w = weights[member_cells]
    periods = [(ax, lo, period) for ax, (_, lo, period) in zip(axes, links)]
    volume, centroid, h_local, back = volume_integrals(mesh, g, w, member_cells, X, n_drop, periods)
    del X
    threshold_volume = np.bincount(label[core_local], weights=dV[cells[core_local]], minlength=n_drop)
    vol_pos = np.where(volume > 0, volume, np.nan)
    diameter = 2.0 * np.sqrt(vol_pos / np.pi) if mesh.dimension == 2 else np.cbrt(6.0 * vol_pos / np.pi)
    bmin, bmax = droplet_boxes(label[core_local], box_lo, box_hi, n_drop, back)
    del box_lo, box_hi
    owner = None
    if icells is not None:
        owner = contour_owners(mesh, cells, label, near.c, _at_cells(cells, shared, icells), icells, places)
    circularity, sphericity = shape_factors(mesh.dimension, vol_pos, diameter, owner, isizes, n_drop)

    columns = {"droplet": np.arange(n_drop, dtype=np.int64), "volume": volume,
               "threshold_volume": threshold_volume, "equivalent_diameter": diameter,
               "circularity": circularity, "sphericity": sphericity,
               "under_resolved": np.asarray(0.5 * np.nan_to_num(diameter) < resolution_cells * h_local, dtype=bool),
               "spanning": spanning.astype(bool)}
    table = droplet_table(mesh, columns, centroid=centroid, bmin=bmin, bmax=bmax,
                          velocity_mean=mean_velocity(mesh, vel, g, w, member_cells, n_drop))
    del near, g, w, member, member_cells  # the mesh-wide label arrays made last, without them
    labels_out = _on_mesh(mesh, cells, label)
    del label
    return DropletLabels(labels=labels_out, shared_labels=_on_mesh(mesh, cells, shared),
                         table=table, weights=weights, level=given_level, periodic=names, whole_cells=split)


def _points_above(mesh: Mesh, c_cell, point_values, level: float):
    """True at the points with c > level when the data is on points (``point_values``, or an
    Indicator of data on points), else None."""
    if point_values is None and getattr(c_cell, "location", None) == "point" and hasattr(c_cell, "point"):
        point_values = c_cell.point
    if point_values is None:
        return None
    values = np.asarray(point_values, dtype=np.float64)
    if values.shape != (mesh.n_points,):
        raise OptionError(f"point_values must have shape ({mesh.n_points},): one value per point, "
                          f"found shape {values.shape}", fix="give the indicator on the points (an Indicator's .point)")
    return values > level  # NaN: not above


def _between_plateaus(c, level, bulk):
    """c and the level rescaled between the bulk values ``(low, high)`` (unchanged for 0 and 1)."""
    try:
        low, high = (float(v) for v in bulk)
    except (TypeError, ValueError):
        raise OptionError(f"bulk must be two numbers (low, high), found {bulk!r}",
                          fix="pass the bulk values of the two phases, e.g. (0.0, 1.0)") from None
    if not (np.isfinite(low) and np.isfinite(high) and low < level < high):
        raise OptionError(f"bulk values must be finite with low < level < high, found ({low}, {high}) "
                          f"and level {level}", fix="pass the measured bulk values of the two phases")
    if low == 0.0 and high == 1.0:
        return c, level
    span = high - low
    return (c - low) / span, (level - low) / span
