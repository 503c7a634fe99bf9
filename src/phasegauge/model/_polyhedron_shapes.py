"""Polyhedra that are ordinary cells: tetrahedra, pyramids, wedges and hexahedra written as faces.

Some solvers and converters write every cell of a mesh as a polyhedron (VTK 42), hexahedra
included. Such a cell is recognised from its faces alone, with no tolerance:

* its faces are 4 triangles (a tetrahedron), 4 triangles and a quad (a pyramid), 2 triangles and
  3 quads (a wedge) or 6 quads (a hexahedron);
* a base face is taken (the first face; a wedge's first triangle, a pyramid's quad), and each of
  its corners ``p_i`` is joined to the one corner ``q_i`` it shares an edge with outside the base
  (of the three edges leaving ``p_i`` in the faces' own direction, two run to the base's corners
  beside it): the cell's corners are the base and then the ``q_i`` (hexahedra, wedges) or the
  one ``q`` (pyramids, tetrahedra), in the mesh's corner order (VTK's; a wedge's meshio's, whose
  first triangle runs the other way round);
* the cell so made must have distinct corners and exactly the polyhedron's faces, loop for loop
  (each face the same cycle of corners, all in the listed direction or all reversed), so a face
  list that is not a closed, consistently oriented surface is never taken as an ordinary cell;
* the corners are put in the order of positive measure, the mesh's own
  (:attr:`phasegauge.model.mesh.Mesh.signed_measures`, quad faces bilinear).

A cell so read has the polyhedron's corners and faces. Where its quad faces are flat it is the
same solid; where they are bent, its volume is the trilinear cell's, which differs from the
polyhedron's split (its faces cut along their shorter diagonals) by O(bend) a cell, as a
hexahedron's does: the numbers of a file read so are those of the same cells written as
hexahedra, wedges, pyramids and tetrahedra. Where a split is needed (contours, sections) both
rules cut a bent quad face along its shorter diagonal.
"""

from __future__ import annotations

from dataclasses import dataclass
from types import MappingProxyType

import numpy as np

from ._geometry import cell_geometry
from .cells import FACES

__all__ = ["ShapeBlock", "ordinary_shapes", "LOOPS"]

#: (triangles, quads) of each ordinary cell's faces -> VTK type name, base face size, corners from ``q``
_SHAPES = MappingProxyType({(4, 0): ("tetra", 3, 1), (4, 1): ("pyramid", 4, 1), (2, 3): ("wedge", 3, 3),
                           (0, 6): ("hexahedron", 4, 4)})

#: each cell type's faces as loops that run one way round the surface (every edge once each way):
#: :data:`.cells.FACES`, whose tetrahedron lists corner sets only, with the tetrahedron's loops turned
LOOPS = MappingProxyType({**FACES, "tetra": ((0, 2, 1), (0, 1, 3), (1, 2, 3), (0, 3, 2))})

#: cells recognised at a time (temporaries of a few MB)
_CHUNK = 1 << 15

#: corner orders that turn each cell over (the reverse orientation)
_TURNED = MappingProxyType({"tetra": (0, 2, 1, 3), "pyramid": (0, 3, 2, 1, 4), "wedge": (3, 4, 5, 0, 1, 2),
                           "hexahedron": (4, 5, 6, 7, 0, 1, 2, 3)})


@dataclass(frozen=True)
class ShapeBlock:
    """Polyhedra read as ordinary cells of one type.

    Attributes
    ----------
    cell_type : str
        ``"tetra"``, ``"pyramid"``, ``"wedge"`` or ``"hexahedron"``.
    connectivity : ndarray of shape (k, corners), int64
        Corner point ids in the mesh's order (VTK's; a wedge's meshio's), positive measure.
    cells : ndarray of shape (k,), int64
        Which polyhedra (0 to ``n_cells - 1`` of the face stream) they are, increasing.
    """

    cell_type: str
    connectivity: np.ndarray
    cells: np.ndarray


def ordinary_shapes(points, face_points, face_offsets, face_cell, n_cells: int, *,
                    every: bool = True) -> list[ShapeBlock] | None:
    """The polyhedra of a face stream as ordinary cells, or None when any one is not one.

    Parameters
    ----------
    points : array_like of shape (n, 3)
        Point coordinates.
    face_points, face_offsets, face_cell : array_like
        The face stream of :func:`phasegauge.model.polyhedra.split_polyhedra`: corners of all
        faces, their offsets (``n_faces + 1``), the cell of each face; faces listed cell after cell.
    n_cells : int
        Number of polyhedra.
    every : bool
        True: all or nothing (None when one polyhedron is not an ordinary cell). False: the
        polyhedra that are, leaving the others out (an empty list when none is).

    Returns
    -------
    list of ShapeBlock or None
        One block per cell type found, covering every polyhedron (``every``) or those that are
        ordinary cells; None when some polyhedron is not a tetrahedron, pyramid, wedge or
        hexahedron by the rule of the module notes (with ``every``), or the faces are not listed
        cell by cell.
    """
    face_points = np.asarray(face_points)
    face_offsets = np.asarray(face_offsets, dtype=np.int64)
    face_cell = np.asarray(face_cell, dtype=np.int64)
    if n_cells == 0 or face_cell.size == 0 or np.any(np.diff(face_cell) < 0):
        return None
    sizes = np.diff(face_offsets)
    other = (sizes != 3) & (sizes != 4)
    if every and np.any(other):
        return None
    n_tri = np.bincount(face_cell, weights=sizes == 3, minlength=n_cells).astype(np.int64)
    n_quad = np.bincount(face_cell, weights=sizes == 4, minlength=n_cells).astype(np.int64)
    n_other = np.bincount(face_cell, weights=other, minlength=n_cells).astype(np.int64) if other.any() else 0
    shape = np.full(n_cells, -1)  # each cell's entry of _SHAPES by its faces' sizes
    for k, (tri, quad) in enumerate(_SHAPES):
        shape[(n_tri == tri) & (n_quad == quad) & (n_other == 0)] = k
    if every and np.any(shape < 0):  # a polyhedron of another shape: no work on the others
        return None
    first_face = np.concatenate([[0], np.cumsum(n_tri + n_quad + n_other)])
    X = np.asarray(points, dtype=np.float64)
    blocks = []
    for k, ((tri, quad), (name, base_size, from_q)) in enumerate(_SHAPES.items()):
        cells = np.flatnonzero(shape == k)
        if cells.size == 0:
            continue
        conn = np.empty((cells.size, base_size + from_q), dtype=np.int64)
        found = np.ones(cells.size, dtype=bool)
        for a in range(0, cells.size, _CHUNK):  # a chunk's temporaries stay small beside the mesh
            part, ok = _shape_cells(face_points, face_offsets, first_face[cells[a:a + _CHUNK]], tri + quad,
                                    base_size, from_q, name)
            if every and not ok.all():
                return None
            conn[a:a + _CHUNK] = part
            found[a:a + _CHUNK] = ok
        if not found.all():
            conn, cells = conn[found], cells[found]
        if cells.size:
            # in the order of positive measure: measured for the whole block at once (the measure reads
            # the coordinates as contiguous columns, made once a call)
            turned = _signed_volumes(X, conn, name) < 0
            conn[turned] = conn[turned][:, list(_TURNED[name])]
            blocks.append(ShapeBlock(name, conn, cells))
    return blocks


def _shape_cells(face_points, face_offsets, first, n_faces: int, base_size: int, from_q: int, name: str):
    """Corner lists of cells of one face signature (either orientation), and whether each is the
    cell ``name`` (the lists of the others mean nothing)."""
    k = first.size
    faces = first[:, None] + np.arange(n_faces)  # (k, F) face numbers
    starts = face_offsets[faces]
    fsize = face_offsets[faces + 1] - starts
    slot = np.arange(4)
    if name == "hexahedron":  # every face of 4 corners, a cell's corners one run of the stream
        loops = face_points[starts[:, :1] + np.arange(4 * n_faces)].reshape(k, n_faces, 4)
        ends = np.roll(loops, -1, axis=2)
    else:  # (k, F, 4), triangles' fourth corner -1
        valid = slot < fsize[..., None]
        loops = np.where(valid, face_points[starts[..., None] + np.minimum(slot, fsize[..., None] - 1)], -1)
        ends = np.where(slot + 1 < fsize[..., None], np.roll(loops, -1, axis=2), loops[..., :1])  # the next corners
    base = np.argmax(fsize == base_size, axis=1)
    p = loops[np.arange(k), base, :base_size]
    starts_flat, ends_flat = loops.reshape(k, -1), ends.reshape(k, -1)
    q = np.empty((k, base_size), dtype=loops.dtype)
    for i in range(base_size):  # (a cell with no such edge, or two, fails the check of its faces below)
        leaving = ((starts_flat == p[:, i, None]) & (ends_flat != p[:, (i + 1) % base_size, None])
                   & (ends_flat != p[:, i - 1, None]))
        q[:, i] = ends_flat[np.arange(k), np.argmax(leaving, axis=1)]
    conn = np.concatenate([p, q[:, :from_q]], axis=1)
    ordered = np.sort(conn, axis=1)
    ok = ~np.any(ordered[:, 1:] == ordered[:, :-1], axis=1) & _same_faces(loops, fsize, conn, name)
    return conn, ok


def _same_faces(loops, fsize, conn, name: str) -> np.ndarray:
    """Whether each cell's faces are the faces of ``conn`` as cell ``name``, loop for loop, all in
    their direction or all reversed (k,).

    Each face corner is put as its place in ``conn`` (0-7), and each loop as one number: its size
    and the places read from the smallest one round (the same loop whatever corner it starts at).
    A cell's sorted loop numbers must equal the cell type's own (:data:`LOOPS`), or those of
    its faces reversed.
    """
    place = np.zeros(loops.shape, dtype=np.int16)
    hits = np.zeros(loops.shape, dtype=np.int8)
    for j in range(conn.shape[1]):
        equal = loops == conn[:, j, None, None]
        place += np.int16(j) * equal
        hits += equal
    # a corner that is not one of the cell's
    alien = np.any((hits != 1) & (np.arange(4) < fsize[..., None]), axis=(1, 2))
    codes = np.zeros(fsize.shape, dtype=np.int32)
    for size in (3, 4):
        code = np.minimum.reduce([_loop_number(place[..., [(r + t) % size for t in range(size)]])
                                  for r in range(size)])
        codes = np.where(fsize == size, code + size * 4096, codes)
    codes.sort(axis=1)
    faces = LOOPS[name]
    forward = np.sort([_own_number(f) for f in faces])
    backward = np.sort([_own_number(f[::-1]) for f in faces])
    return ~alien & (np.all(codes == forward, axis=1) | np.all(codes == backward, axis=1))


def _loop_number(places: np.ndarray) -> np.ndarray:
    """The places along the last axis as digits of base 8, the first the highest."""
    number = np.zeros(places.shape[:-1], dtype=np.int32)
    for t in range(places.shape[-1]):
        number = number * 8 + places[..., t]
    return number


def _own_number(face) -> int:
    """The loop number of a face of the cell type's own table (see :func:`_same_faces`)."""
    size = len(face)
    turns = [[face[(r + t) % size] for t in range(size)] for r in range(size)]
    return min(int(_loop_number(np.array(turn))) for turn in turns) + size * 4096


def _signed_volumes(X, conn, name: str) -> np.ndarray:
    """Six times each cell's signed measure, as the mesh counts it (:func:`._geometry.cell_geometry`,
    which :attr:`phasegauge.model.mesh.Mesh.signed_measures` reads): quad faces bilinear, so a strongly
    warped cell is not turned over by a fan from one corner (found by review), and a wedge in meshio's
    corner order is positive."""
    return 6.0 * cell_geometry(name, X, conn)[0]
