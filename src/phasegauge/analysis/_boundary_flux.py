"""Flow and phase flux through the domain boundary, and which boundary faces are open."""

from __future__ import annotations

import numpy as np

from ..errors import OptionError
from ..model._centroids import cell_centroids_of
from ..model._faces import kept_neighbours
from ..model._whole_cells import whole_cells
from ..model.fields import field_location, vector_values
from ..model.mesh import Mesh
from ._boundary_reach import on_periodic_planes, periodic_columns
from ._sums import dot

__all__ = ["open_boundary_flux", "OPEN_TOLERANCE"]

#: a boundary face is open where |u.n| exceeds this times the largest speed of the step
OPEN_TOLERANCE = 1e-9

#: with cell velocities, a face is open only where |u.n| of its cell is at least this share of the
#: cell's tangential speed (beside a wall the flow runs along it)
WALL_RATIO = 0.1


def _face_vectors(mesh: Mesh) -> tuple:
    """The boundary as simplices (segments in 2D, triangles in 3D).

    Returns corner point indices (n, k), owner cells (n,), outward unit
    normals (n, dim), measures (n,) and the boundary face each piece belongs
    to (n,): a quad face gives two triangles of one face.
    """
    corners, owner = mesh.boundary_faces
    X = mesh.coordinates
    if mesh.dimension == 2:
        pieces, owners = corners, owner
        face = np.arange(len(corners))
        d = X[pieces[:, 1]] - X[pieces[:, 0]]
        normal = np.stack([d[:, 1], -d[:, 0]], axis=1)
    else:
        triangle = corners[:, 0] < 0
        tri = corners[triangle][:, 1:]
        quad = corners[~triangle]
        # sorted corners lose the cycle: rebuild it as the cycle around the face centre
        quad = _cycle_quads(X, quad)
        pieces = np.concatenate([tri, quad[:, [0, 1, 2]], quad[:, [0, 2, 3]]])
        owners = np.concatenate([owner[triangle], owner[~triangle], owner[~triangle]])
        number = np.arange(len(corners))
        face = np.concatenate([number[triangle], number[~triangle], number[~triangle]])
        P = X[pieces]
        normal = 0.5 * np.cross(P[:, 1] - P[:, 0], P[:, 2] - P[:, 0])
    measure = np.linalg.norm(normal, axis=1)
    centre = X[pieces].mean(axis=1)
    outward = np.einsum("nd,nd->n", normal, centre - cell_centroids_of(mesh, owners))
    normal = normal * np.where(outward < 0, -1.0, 1.0)[:, None]
    with np.errstate(invalid="ignore", divide="ignore"):
        unit = normal / np.where(measure > 0, measure, 1.0)[:, None]
    return pieces, owners, unit, measure, face


def _cycle_quads(X: np.ndarray, quad: np.ndarray) -> np.ndarray:
    """Order the four corners of each quad face around its centre."""
    if quad.size == 0:
        return quad
    P = X[quad]
    centre = P.mean(axis=1, keepdims=True)
    normal = np.cross(P[:, 1] - P[:, 0], P[:, 2] - P[:, 0])
    normal += np.cross(P[:, 2] - P[:, 0], P[:, 3] - P[:, 0])
    u = P[:, 0] - centre[:, 0]
    v = np.cross(normal, u)
    rel = P - centre
    angle = np.arctan2(np.einsum("nkd,nd->nk", rel, v), np.einsum("nkd,nd->nk", rel, u))
    return np.take_along_axis(quad, np.argsort(angle, axis=1), axis=1)


def _velocity_vectors(mesh: Mesh, velocity, location) -> tuple[np.ndarray, str]:
    """Velocity vectors in the analysis space: (n, dimension), on points or cells."""
    array, location = vector_values(mesh, velocity, "velocity", location)
    if array.shape[1] == 3 and mesh.dimension == 2:
        array = array[:, list(mesh.plane_axes)]
    return array, location


def _neighbour_slots(mesh: Mesh, owners: np.ndarray):
    """Face neighbours of each owner cell, one slot at a time: yields (has, neighbour) per slot.

    The neighbours of higher number first, then the lower, each increasing. Where the mesh keeps
    its face pairs as a neighbour table in that order (a reader's split, or the droplet labelling's
    table, :func:`phasegauge.model._faces.pairs_as_neighbours`), the owners' rows are read from it:
    :attr:`Mesh.face_pairs` would rebuild every pair from it on each read.
    """
    table = kept_neighbours(mesh)
    if table is not None:
        yield from _table_slots(table, owners)
        return
    pairs = mesh.face_pairs
    src = np.concatenate([pairs[:, 0], pairs[:, 1]])
    dst = np.concatenate([pairs[:, 1], pairs[:, 0]])
    order = np.argsort(src, kind="stable")
    src, dst = src[order], dst[order]
    start = np.searchsorted(src, owners, side="left")
    stop = np.searchsorted(src, owners, side="right")
    for k in range(int((stop - start).max(initial=0))):  # loop over neighbour slots (a few), not cells
        has = start + k < stop
        yield has, np.where(has, dst[np.minimum(start + k, max(len(dst) - 1, 0))], owners)


def _table_slots(table: np.ndarray, owners: np.ndarray):
    """:func:`_neighbour_slots` read from a neighbour table (rows -1 padded): yields (has, neighbour)."""
    rows = table[owners]
    for k in range(int(np.count_nonzero(rows >= 0, axis=1).max(initial=0))):
        has = rows[:, k] >= 0
        yield has, np.where(has, rows[:, k], owners)


def _whole_cell_stencil(mesh, u: np.ndarray, owners: np.ndarray) -> tuple:
    """The cells a least-squares gradient at the boundary reads: (centroids, the cell values ``u``, the
    owners' cells, neighbour slots).

    On a mesh whose cells a reader split (:attr:`Mesh.cell_parents`), the whole cells: a boundary
    piece's face neighbours are mostly pieces of its own cell, with the cell's value, and the
    fall of u.n to zero at a wall would never be seen (a closed box of polyhedra read open), nor
    how far a cell's c is from c at its faces (the bound would shrink).
    """
    if mesh.cell_parents is None:
        return mesh.cell_centroids, u, owners, _neighbour_slots(mesh, owners)
    whole = whole_cells(mesh)
    cells = np.asarray(mesh.cell_parents[owners], dtype=np.intp)
    return whole.cell_centroids, whole.mean_of(u), cells, _table_slots(whole.face_neighbours, cells)


def _open_cell_faces(mesh, u, owners, unit, centre, threshold) -> tuple[np.ndarray, np.ndarray]:
    """Normal velocity of each piece's cell and whether the piece is open (cell-centred velocity).

    u.n (with the piece's normal) is reconstructed linearly to the face centre from the cell and
    its face neighbours (least-squares gradient); at a wall it falls to zero, or past it, towards
    the face, through an inlet or outlet it keeps its value. On a split mesh the cell and its
    neighbours are whole cells (:func:`_whole_cell_stencil`); the u.n returned is the piece's own.
    """
    un_own = np.einsum("nd,nd->n", u[owners], unit)
    un_own = np.where(np.isfinite(un_own), un_own, 0.0)
    X, u, owners, slots = _whole_cell_stencil(mesh, u, owners)
    slots = list(slots)  # read twice: the gradient, then the deepest neighbour (boundary cells only)
    un = np.einsum("nd,nd->n", u[owners], unit)
    un = np.where(np.isfinite(un), un, 0.0)
    gradient = _stencil_gradient(X, owners, slots, un, lambda nb: np.einsum("nd,nd->n", u[nb], unit))
    own_depth = np.einsum("nd,nd->n", centre - X[owners], unit)  # distance of the centroid from the face
    deepest, deepest_depth, deepest_un = owners.copy(), own_depth.copy(), un.copy()
    for has, nb in slots:
        un_nb = np.einsum("nd,nd->n", u[nb], unit)
        depth = np.einsum("nd,nd->n", centre - X[nb], unit)
        deeper = has & np.isfinite(un_nb - un) & (depth > deepest_depth * (1 + 1e-9))
        deepest = np.where(deeper, nb, deepest)
        deepest_depth = np.where(deeper, depth, deepest_depth)
        deepest_un = np.where(deeper, un_nb, deepest_un)
    # two linear reconstructions of u.n at the face: from the least-squares gradient of the cell's
    # face neighbours (a cell with too few neighbours keeps its own value), and along the normal
    # from the neighbour deepest inside; a wall shows in either as a fall to zero or past it
    by_gradient = un + np.einsum("nd,nd->n", gradient, centre - X[owners])
    with np.errstate(invalid="ignore", divide="ignore"):
        slope = np.where(deepest != owners, (un - deepest_un) / (deepest_depth - own_depth), 0.0)
    along_normal = un + slope * own_depth
    keeps = (by_gradient * un >= 0.5 * un * un) & (along_normal * un >= 0.5 * un * un)
    # beside a wall the flow runs along it: a cell whose normal velocity is under a tenth of its
    # tangential speed is a wall cell (flow through an inlet or outlet is mostly across it)
    tangential = np.linalg.norm(u[owners] - un[:, None] * unit, axis=1)
    across = np.abs(un) >= WALL_RATIO * np.where(np.isfinite(tangential), tangential, 0.0)
    is_open = (np.abs(un) > threshold) & keeps & across
    return un_own, is_open


def open_boundary_flux(mesh: Mesh, velocity, c=None, *, tolerance: float = OPEN_TOLERANCE,
                       velocity_location: str | None = None, c_location: str | None = None,
                       periodic: tuple = ()) -> dict:
    """Flow and phase flux through the domain boundary.

    Parameters
    ----------
    mesh : Mesh
    velocity : ndarray of shape (n_points, 3 or dim) or (n_cells, 3 or dim)
        Velocity on points or cells, length units per time unit.
    c : Indicator or ndarray of shape (n_points,) or (n_cells,), optional
        Phase indicator; without it only the flow figures are returned.
    tolerance : float
        A boundary face is open only where |u.n| exceeds ``tolerance`` times
        the largest speed in the domain at this step (default 1e-9).
    velocity_location, c_location : {'point', 'cell'}, optional
        Where an array lives; needed only when the mesh has as many points
        as cells.
    periodic : tuple of {'x', 'y', 'z'}
        Axes along which the domain is periodic: the boundary faces on its
        lowest and highest planes along them are no boundary (what leaves
        through one comes back through the other) and are never open.

    Returns
    -------
    dict
        - ``open_boundary``: True when any boundary face is open;
        - ``open_boundary_area``: measure of the open faces (length in 2D);
        - ``boundary_outflow``: net int u.n dS over the open faces, volume
          leaving per unit time (negative: net inflow);
        - ``boundary_phase_outflow``: net int c u.n dS over the open faces,
          phase volume leaving per unit time (with ``c``); on an open face
          where c is not finite, c is taken as 0.5, and
        - ``boundary_phase_outflow_unknown`` (only where it is not 0): the
          most the phase flux may be off: half the flow through such faces;
          plus, for boundary faces whose velocity is not finite (read as
          closed), their area times the largest |u.n| of the open faces; with
          c on cells, |u.n| A |grad c . (x_face - x_cell)| over the open faces
          (the cell's value against the face's, the least-squares gradient of
          c over the cell's face neighbours); with the velocity on points, the
          flux open faces would gain with their corners on a closed boundary
          face (a wall's, u = 0 there) at the mean u.n of their other corners
          (a solver's fixed plug inflow on the face: one half face per wall
          corner, 10 % of the inflow at 10 cells across).

    Notes
    -----
    Boundary faces are the faces (edges in 2D) owned by one cell; quad faces
    are split in two triangles.

    *Velocity on cells* (a cell-centred solver's own values): each boundary
    face takes its cell's velocity and indicator, u.n with the face's
    outward normal, times the face area. A face is open where
    |u.n| > ``tolerance`` x the largest speed, where u.n reconstructed
    linearly to the face (from the least-squares gradient over the cell's
    face neighbours, and along the normal from the neighbour deepest inside)
    keeps at least half its value with the same sign, and where |u.n| is at
    least a tenth of the cell's tangential speed. At a wall the normal
    velocity falls to zero towards the face and the flow runs along it (a
    wall cell of a cell-centred solver carries a small u.n, of order h^2 at
    a no-slip wall, that is not a flux), so walls are closed and a closed
    box has no boundary flux at all; through an inlet or outlet u.n keeps
    its value. On a mesh whose cells a reader split (``mesh.cell_parents``)
    the test reads the whole cells: their centroids, volume-weighted
    velocities and face neighbours. Flow leaving at less than about 6 degrees to the boundary is
    not counted.

    *Velocity on points* (no cell values): a face is open where u.n at its
    centre (the mean of its corners) exceeds the tolerance and is at least a
    tenth of the tangential speed there (point values averaged from the cells
    beside a wall carry a small u.n that is not a flux; near a corner or a
    stagnation point, where the flow along the wall vanishes too, such a wall
    can still read open: the drift finding says so); the flux over
    the open faces integrates the linear point fields exactly on each piece
    (int f g = |S| (sum f_i g_i + sum f_i sum g_i) / (k (k + 1)) on a
    simplex with k corners); c on cells takes the owner cell's value. An
    open face that shares a corner with a wall takes the wall's point value
    there (0 at a no-slip wall): right for a profile that falls to zero at
    the wall, first order low for a solver whose face carries a plug inflow;
    the difference goes to ``boundary_phase_outflow_unknown``.

    The time integral of ``boundary_phase_outflow`` is what the phase-volume
    drift of an open domain contains besides numerical loss (see
    :func:`drift_columns`).
    """
    if not (np.isfinite(tolerance) and tolerance >= 0):
        raise OptionError(f"tolerance must be a number >= 0, found {tolerance!r}", fix="for example 1e-9")
    u, u_location = _velocity_vectors(mesh, velocity, velocity_location)
    if c is not None:
        c_values, c_location = field_location(mesh, c, "c", c_location)
    pieces, owners, unit, measure, face = _face_vectors(mesh)
    k = pieces.shape[1]
    speed = float(np.nanmax(np.linalg.norm(u, axis=-1), initial=0.0))
    threshold = tolerance * speed
    centre = mesh.coordinates[pieces].mean(axis=1)
    if u_location == "point":
        un = np.einsum("nkd,nd->nk", u[pieces], unit)
        un = np.where(np.isfinite(un), un, 0.0)
        # as for cells, flow along the face is a wall's: point values averaged from the cells beside a
        # wall carry a small u.n (of the order of h over the flow's length) that is not a flux
        normal = un.mean(axis=1)
        tangential = np.linalg.norm(np.nan_to_num(u[pieces].mean(axis=1)) - normal[:, None] * unit, axis=1)
        is_open = (np.abs(normal) > threshold) & (np.abs(normal) >= WALL_RATIO * tangential)
    else:
        un_cell, is_open = _open_cell_faces(mesh, u, owners, unit, centre, threshold)
        un = np.repeat(un_cell[:, None], k, axis=1)
    if speed <= 0:
        is_open[:] = False
    wrapped = on_periodic_planes(centre, periodic_columns(mesh, periodic))
    is_open &= ~wrapped
    # a boundary face whose velocity is not finite is read as closed; what may cross it is bounded below
    # (its area times the largest |u.n| of the open faces, c in [0, 1])
    blind = ~wrapped & (~np.isfinite(u[owners]).all(axis=1) if u_location == "cell"
                        else ~np.isfinite(u[pieces]).all(axis=(1, 2)))
    # a face is open as a whole: any of its pieces open opens the face
    face_open = np.zeros(int(face.max(initial=-1)) + 1, dtype=bool)
    np.logical_or.at(face_open, face, is_open)
    is_open = face_open[face]
    weight = np.where(is_open, measure, 0.0)
    out = {"open_boundary": bool(is_open.any()), "open_boundary_area": float(measure[is_open].sum()),
           "boundary_outflow": float(dot(weight, un.mean(axis=1)))}
    if c is not None:
        if c_location == "point":
            cv = c_values[pieces]
        else:
            cv = np.repeat(c_values[owners][:, None], k, axis=1)
        # an open face whose c is not finite carries an unknown phase flux: c in [0, 1] there, so it is
        # taken at 0.5 (never 0), and half its flow is the bound of what that may be off
        unknown = is_open & ~np.isfinite(cv).all(axis=1)
        cv = np.where(np.isfinite(cv), cv, 0.5)
        product = _product(cv, un)
        out["boundary_phase_outflow"] = float(dot(weight, product))
        bound = 0.5 * float(dot(measure[unknown], np.abs(un[unknown].mean(axis=1)))) if unknown.any() else 0.0
        # what the fields give on the faces only approximately; round-off (1e-12 of the open faces' flow
        # at the largest speed) is no bound
        approximate = 0.0
        if u_location == "point":
            product_walls = _product(cv, _wall_corners_open(un, pieces, face, is_open, ~is_open & ~wrapped))
            approximate += float(dot(weight, np.abs(product_walls - product)))
        if c_location == "cell":
            approximate += float(dot(weight, np.abs(un.mean(axis=1)) * _face_offset(mesh, c_values, owners, centre)))
        if approximate > 1e-12 * speed * out["open_boundary_area"]:
            bound += approximate
        if blind.any():
            normal = np.abs(un.mean(axis=1))[is_open]
            bound += float(measure[blind].sum()) * (float(normal.max()) if normal.size else speed)
        if bound > 0:
            out["boundary_phase_outflow_unknown"] = bound
    return out


def _product(cv: np.ndarray, un: np.ndarray) -> np.ndarray:
    """The mean of c u.n over each simplex of k corners, both linear: (sum c_i g_i + sum c_i sum g_i) / (k (k + 1))."""
    k = cv.shape[1]
    return (np.einsum("nk,nk->n", cv, un) + cv.sum(axis=1) * un.sum(axis=1)) / (k * (k + 1))


def _wall_corners_open(un, pieces, face, is_open, closed) -> np.ndarray:
    """u.n on the pieces with each open face's corners on a closed boundary face (a wall's point, u = 0
    there for a no-slip wall) given the mean u.n of that face's other corners: the flux a solver's face
    with a fixed inflow carries (a plug inlet), where the point values fall to zero over the last cell.
    A face with every corner on a wall takes the largest |u.n| of the open pieces, with its own sign."""
    wall = np.zeros(int(pieces.max(initial=-1)) + 1, dtype=bool)
    wall[pieces[closed].ravel()] = True
    at_wall = wall[pieces] & is_open[:, None]
    if not at_wall.any():
        return un
    faces = int(face.max(initial=-1)) + 1
    total, count = np.zeros(faces), np.zeros(faces)
    np.add.at(total, face, np.where(at_wall, 0.0, un).sum(axis=1))
    np.add.at(count, face, (~at_wall).sum(axis=1))
    largest = float(np.abs(un[is_open]).max(initial=0.0))
    with np.errstate(invalid="ignore", divide="ignore"):
        other = np.where(count > 0, total / np.where(count > 0, count, 1.0), 0.0)
    sign = np.where(un.mean(axis=1) < 0, -1.0, 1.0)
    other = np.where(count[face] > 0, other[face], sign * largest)
    return np.where(at_wall, other[:, None], un)


def _face_offset(mesh, c_values, owners, centre) -> np.ndarray:
    """|grad c . (x_face - x_cell)| per boundary piece: how far the owner cell's c, which the piece takes,
    may be from c at the face centre (linear reconstruction with the least-squares gradient of c over the
    cell's face neighbours, as the wall test builds it for u.n; whole cells on a split mesh); 0 where c or
    the gradient is not finite."""
    X, c_values, owners, slots = _whole_cell_stencil(mesh, c_values, owners)
    own = c_values[owners]
    gradient = _stencil_gradient(X, owners, slots, own, lambda nb: c_values[nb])
    offset = np.abs(np.einsum("nd,nd->n", gradient, centre - X[owners]))
    return np.where(np.isfinite(offset) & np.isfinite(own), offset, 0.0)


def _stencil_gradient(X, owners, slots, own, value_at) -> np.ndarray:
    """Per owner cell, the least-squares gradient of a value over its face neighbours (``slots``: pairs of
    whether the slot holds a neighbour and its number; ``value_at(nb)`` the value at those neighbours, ``own``
    the owners'), the neighbours whose difference is not finite left out; a cell with too few neighbours gets a
    gradient near 0 (the system regularised by 1e-12 of its trace)."""
    dim = X.shape[1]
    A = np.zeros((len(owners), dim, dim))
    b = np.zeros((len(owners), dim))
    for has, nb in slots:
        d = X[nb] - X[owners]
        dv = value_at(nb) - own
        w = (has & np.isfinite(dv)).astype(np.float64)
        A += w[:, None, None] * d[:, :, None] * d[:, None, :]
        b += (w * np.where(w > 0, dv, 0.0))[:, None] * d
    scale = np.einsum("nii->n", A)[:, None, None] * 1e-12 + 1e-300
    return np.linalg.solve(A + scale * np.eye(dim), b[..., None])[..., 0]
