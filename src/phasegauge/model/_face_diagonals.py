"""The diagonal a coned cell's quad face is cut along: the shorter one (:mod:`.simplices`).

A quad face that is bent, or that the tables of its two cells cut along different diagonals,
is cut along its shorter diagonal. The two lengths are compared on the face's own four corner
coordinates: both cells sharing the face see the same four points, and a diagonal's squared
length is the same number from either side (``(a - b)**2 == (b - a)**2`` in floating point,
summed over the same axes in the same order), so both choose the same diagonal and the split
conforms. The choice reads coordinates only, never point or cell numbers: renumbering a mesh
leaves it unchanged. Where the two lengths are equal within a relative ``_TIE`` no choice is
free of the numbering, and the face keeps a centre (split in four about its corners' mean).

A face bent so far that one of its two triangles, joined to the centre of a cell beside it
(a pyramid's apex), makes a tetrahedron turned against that cell's others also keeps a centre
(:func:`turned_faces`; either side's finding marks the face for both, so they agree; it too reads
coordinates only): the split would overlap itself there. On 20^3 jittered hexahedra (corners
moved up to 0.25, 0.3, 0.35 of a cell) the shorter diagonals alone turned tetrahedra in 3, 32 and
180 cells; with the fallback in 0, 0 and 3 (a centre on every bent face: 0, 0 and 4), and none
at all once a flat face whose table diagonal runs outside it is cut as a bent one (found by review;
seeds 0, 1 and 11 at 0.35, ``tests/model/test_simplices.py``).

The four-corner faces of polyhedra (:mod:`.polyhedra`) follow the same rule, on face streams
rather than cell types (:func:`loop_diagonals`, :func:`polyhedra_quad_cuts`): one decision per
distinct face, taken on its own corners, so the hexahedra written as polyhedra split into the
same tetrahedra as :func:`.simplices.split_cells` gives them (flat faces aside, which its tables
cut; a flat face's two cuts hold the same volume).
"""

from __future__ import annotations

import numpy as np

from ._geometry import _corner_mean, _triple
from .cells import FACES

__all__ = ["shorter_diagonals", "loop_diagonals", "diagonal_triangles", "turned_faces"]

#: two diagonals this close (relative to the longer) are a tie: the face gets a centre
_TIE = 1e-9

#: faces (or face corners) worked on at a time: temporaries of a few MB
_CHUNK = 1 << 16


def shorter_diagonals(cell_type: str, P: list) -> tuple[np.ndarray, np.ndarray]:
    """Per cell and quad face (``FACES`` order, quads only): whether its face corners 1-3 are the
    shorter diagonal, and whether the two diagonals tie.

    ``P``: per corner the list of its three coordinate arrays (n,). Returns two bool arrays
    (n, number of quad faces): ``along13`` and ``tie``.
    """
    quads = [face for face in FACES[cell_type] if len(face) == 4]
    n = P[0][0].shape[0]
    along13 = np.empty((n, len(quads)), dtype=bool)
    tie = np.empty((n, len(quads)), dtype=bool)
    for q, face in enumerate(quads):
        along13[:, q], tie[:, q] = loop_diagonals([P[j] for j in face])
    return along13, tie


def loop_diagonals(P: list) -> tuple[np.ndarray, np.ndarray]:
    """Of quads given by their four corners in loop order (``P``: per corner the list of its three
    coordinate arrays (n,)): whether the diagonal from corner 1 to 3 is the shorter, and whether
    the two diagonals tie (within a relative ``_TIE``). The rule of :func:`shorter_diagonals`,
    for faces that are not a cell type's (the quad faces of polyhedra, :mod:`.polyhedra`)."""
    lengths = []
    for a, b in ((0, 2), (1, 3)):
        total = None
        for i in range(3):
            d = P[a][i] - P[b][i]
            d *= d
            total = d if total is None else total + d
        lengths.append(np.sqrt(total))
    d02, d13 = lengths
    return d13 < d02, np.abs(d02 - d13) <= _TIE * np.maximum(d02, d13)


def diagonal_triangles(F: np.ndarray, along13: np.ndarray) -> tuple:
    """The two triangles (n, 3) of quads ``F`` (n, 4, corners in face order), cut along the face
    corners 1-3 where ``along13`` (n,) is set, else along 0-2."""
    first = np.where(along13[:, None], F[:, [1, 2, 3]], F[:, [0, 1, 2]])
    second = np.where(along13[:, None], F[:, [1, 3, 0]], F[:, [0, 2, 3]])
    return first, second


def turned_faces(cell_type: str, P: list, along13: np.ndarray) -> np.ndarray:
    """Per cell and quad face (n, number of quad faces): whether a triangle of the face, cut as
    ``along13`` says (:func:`shorter_diagonals`), joined to the cell's centre (the corners' mean; a
    pyramid's apex) gives a tetrahedron of the opposite orientation to the cell's (the sum of all
    its face triangles' tetrahedra, ``FACES`` being all outward). ``P`` as for
    :func:`shorter_diagonals`."""
    k = len(P)
    m = P[4] if cell_type == "pyramid" else _corner_mean(P)
    R = [[P[j][i] - m[i] for i in range(3)] for j in range(k)]  # corners from the centre
    total = 0.0
    quads = []
    for face in FACES[cell_type]:
        if len(face) == 3:
            if cell_type != "pyramid":  # (a pyramid's triangles hold its apex)
                total = total + _triple(*(R[j] for j in face))
            continue
        cut = along13[:, len(quads)]
        # the face's corners from corner 0 (cut along 0-2) or from corner 1 (along 1-3): the
        # triangles are then (g0, g1, g2) and (g0, g2, g3)
        if cut.all() or not cut.any():  # (one way for all: no picking)
            shift = int(cut.all())
            g = [R[face[(i + shift) % 4]] for i in range(4)]
        else:
            g = [[np.where(cut, R[face[(i + 1) % 4]][d], R[face[i]][d]) for d in range(3)] for i in range(4)]
        first, second = _triple(g[0], g[1], g[2]), _triple(g[0], g[2], g[3])
        quads.append((first, second))
        total = total + first + second
    out = np.empty(along13.shape, dtype=bool)
    for q, (first, second) in enumerate(quads):
        out[:, q] = (first * total < 0) | (second * total < 0)
    return out


def polyhedra_quad_cuts(X: np.ndarray, face_points, face_offsets, faces, group, first, face_cell,
                        cell_centres: np.ndarray, cell_totals: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """The cut of the four-corner faces of a polyhedra split (:mod:`.polyhedra`): per face, from
    which of its corners its diagonal runs (0: corners 0-2, 1: corners 1-3), and per distinct face
    whether it keeps a centre instead.

    Each distinct face (``group`` numbers the faces ``faces`` by their corner sets, ``first`` is a
    face of each group) decides once, on its own four corners' coordinates: the shorter diagonal
    (:func:`loop_diagonals`), a tie keeping the centre. Every face of the group then takes the same
    two corners, wherever they sit in its own loop. A face whose two triangles, joined to its cell's
    centre (``cell_centres``, (n_cells, 3)), give a tetrahedron of the sign opposite to the cell's
    ``cell_totals`` (:func:`cell_turn_totals`), or of a volume under 1e-12 of the cell's (three
    corners in a line), keeps its centre, for both of its cells.
    """
    offsets = np.asarray(face_offsets)
    ends = np.empty(first.size, dtype=face_points.dtype)  # one end of each distinct face's diagonal
    other = np.empty(first.size, dtype=face_points.dtype)
    centred = np.empty(first.size, dtype=bool)
    for lo in range(0, first.size, _CHUNK):  # chunk by chunk: a few MB of coordinates at a time
        start = offsets[first[lo:lo + _CHUNK]]
        corners = [face_points[start + j] for j in range(4)]
        along13, centred[lo:lo + _CHUNK] = loop_diagonals([[X[c, i] for i in range(3)] for c in corners])
        ends[lo:lo + _CHUNK] = np.where(along13, corners[1], corners[0])
        other[lo:lo + _CHUNK] = np.where(along13, corners[3], corners[2])
    shift = np.empty(faces.size, dtype=np.int64)
    turned = np.empty(faces.size, dtype=bool)
    for lo in range(0, faces.size, _CHUNK):
        start = offsets[faces[lo:lo + _CHUNK]]
        own, g = face_points[start], group[lo:lo + _CHUNK]
        part = ((own != ends[g]) & (own != other[g])).astype(np.int64)  # corner 0 not on it: 1-3
        shift[lo:lo + _CHUNK] = part
        cell = face_cell[faces[lo:lo + _CHUNK]]
        total = cell_totals[cell]
        R = []
        for j in range(4):
            point = face_points[start + (part + j) % 4]
            R.append([X[point, i] - cell_centres[cell, i] for i in range(3)])
        # a triangle whose tetrahedron is turned, or flat (three corners in a line, as a hanging
        # node on an edge makes: found by review), keeps the face's centre
        least = 1e-12 * total * total
        turned[lo:lo + _CHUNK] = ((_triple(R[0], R[1], R[2]) * total <= least)
                                  | (_triple(R[0], R[2], R[3]) * total <= least))
    centred |= np.bincount(group[turned], minlength=first.size) > 0
    return shift, centred


def cell_turn_totals(X: np.ndarray, face_points, face_offsets, sizes, nxt, edge_cell, cell_centres: np.ndarray,
                     n_cells: int) -> np.ndarray:
    """Six times each cell's volume from its centre, every face cut as a fan from its corner 0 (the
    orientation :func:`polyhedra_quad_cuts` compares a face's triangles with), chunk by chunk."""
    fan = np.repeat(face_points[np.asarray(face_offsets)[:-1]], sizes)
    total = np.zeros(n_cells)
    for lo in range(0, face_points.size, _CHUNK):
        hi = lo + _CHUNK
        cell = edge_cell[lo:hi]
        m = [cell_centres[cell, i] for i in range(3)]
        R = [[X[p, i] - m[i] for i in range(3)] for p in (fan[lo:hi], face_points[lo:hi], face_points[nxt[lo:hi]])]
        total += np.bincount(cell, weights=_triple(*R), minlength=n_cells)
    return total
