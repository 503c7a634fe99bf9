"""Polyhedral cells (VTK type 42) as tetrahedra (or pyramids on their quad faces) about their cell centres.

A polyhedron is given by its faces, each a loop of corner points. It is split into tetrahedra
that conform with its neighbours:

* every face of four corners is cut along its shorter diagonal into two triangles, the rule of
  the coned cells of :func:`phasegauge.model.simplices.split_cells` (:mod:`._face_diagonals`):
  each distinct face (faces are matched by their sets of corners) decides once, on its own
  four corners' coordinates, so both cells on its sides cut it alike and renumbering points or
  cells changes nothing. Where the two diagonals tie (equal within 1e-9, relative), or where a
  triangle joined to the centre of a cell on either side would make a tetrahedron turned against
  that cell's volume, the face gets a face centre instead;
* every face of five or more corners gets a face centre, the mean of its corners, and is cut
  into one triangle per edge about that centre; the centre is shared by the two cells on the
  face's sides, so a shared face is cut alike from both sides whatever order either cell lists
  its corners in;
* triangular faces stay whole (the same triangle seen from both sides);
* every face triangle is joined to the cell centre, the mean of the cell's distinct corners,
  so a hexahedron-shaped polyhedron becomes 12 tetrahedra (24 with a centre on every face, as
  a cube's square faces keep), a wedge 8 and a pyramid 6.

With ``pyramids=True`` a face of four corners is left whole: joined to the cell centre it is a
pyramid (:attr:`PolyhedraSplit.pyramids`), whose volume is taken with its base bilinear, as the
mesh measures a pyramid. Its quad base then matches the quad face of an ordinary cell, or of
another polyhedron's pyramid, across it, and the mesh's own split plan cuts it once for both sides
(a reader keeps ordinary cells whole beside polyhedra of other shapes so). No face neighbours are
given then: the mesh groups the faces.

The tetrahedra's face neighbours (:mod:`._split_neighbours`) follow the cut: the two triangles of
a face cut along a diagonal are neighbours across the diagonal's facet in the cell, and each
meets the neighbour cell's tetrahedron on the same triangle. ``diagonals=False`` gives every quad
face a centre (as the convex point sets split beside polyhedra do).

Centres are vertex means, not area- or volume-weighted centroids: the same choice as the
coned cells of :func:`phasegauge.model.simplices.split_cells` (their centre is the trilinear
value at the cell middle), and a point value at a centre is the mean of its corners' values,
so a linear field is reproduced exactly. The tetrahedra fill the polyhedron exactly when its
faces are flat (planar faces, whatever their number of corners), and fill the polyhedron
bounded by the face triangles when they are not; the sum of their signed volumes is then the
volume the divergence theorem gives for those triangles (the same tetrahedra as
:func:`~phasegauge.model.simplices.split_cells` gives the same cells as hexahedra).

Every face list is checked before it is split: each edge of a cell must be used by exactly two
of its faces, in opposite directions (a closed surface, consistently oriented). Faces may all
point out or all point in: a cell whose tetrahedra add up to a negative volume is turned over.

References
----------
.. [1] Kitware, *The VTK User's Guide*, 11th ed. (2010), cell type VTK_POLYHEDRON (42), and the
   VTK wiki page "VTK/Polyhedron Support" (the face stream of a polyhedron).
.. [2] Dompierre, J., Labbe, P., Vallet, M.-G. and Camarero, R. (1999), "How to subdivide
   pyramids, prisms and hexahedra into tetrahedra", 8th International Meshing Roundtable
   (splits about face and cell centres, and why they conform).
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import NamedTuple

import numpy as np

from ..errors import UnsupportedMeshError
from ._face_diagonals import cell_turn_totals, polyhedra_quad_cuts
from ._geometry import cell_geometry
from ._grouping import _bits, group_columns, index_dtype
from ._places import corner_means, in_coordinate_order
from ._split_neighbours import edge_twins, ordered_rows, sorted_with_places, split_neighbours
from .cells import FACES

__all__ = ["PolyhedraSplit", "split_polyhedra", "cell_face_stream", "SPLIT_CENTRES", "SplitCentres",
           "joined_centres"]

#: ``Mesh.memo`` key of the added centres' corner lists, set by a reader that split the mesh's cells
#: (:class:`SplitCentres`; absent on other meshes)
SPLIT_CENTRES = "split_centres"

_FIX_FACES = ("write each polyhedron as a closed surface: every edge shared by exactly two of its faces, "
              "all faces listed with outward (or all with inward) normals")


@dataclass(frozen=True, eq=False)
class PolyhedraSplit:
    """Tetrahedra covering polyhedral cells, with the centres they add.

    Attributes
    ----------
    tetra : ndarray of shape (m, 4), int64
        Corner point ids of each tetrahedron, positively oriented (VTK order); ids from
        ``n_points`` on are added centres.
    source : ndarray of shape (m,), int32 (int64 beyond 2**31 - 1 cells)
        The input cell each tetrahedron belongs to (in increasing order).
    centre_points : ndarray of shape (q,), int32 (int64 beyond 2**31 - 1 points)
        The corners of every added centre, one centre after another.
    centre_offsets : ndarray of shape (n_centres + 1,), int64
        Where each centre's corners start in ``centre_points``.
    n_points : int
        Number of input points; centre ``j`` has point id ``n_points + j``.
    n_face_centres : int
        The first ``n_face_centres`` centres are face centres, the rest cell centres (one per cell).
    reversed_cells : int
        Cells whose faces were listed with inward normals (turned over).
    inverted_tetra : int
        Tetrahedra of negative volume after the turning (cells not star-shaped from their centre).
    inverted_pyramids : int
        Pyramids (``pyramids=True``) of negative volume after the turning.
    points : ndarray of shape (n_points + n_centres, 3), optional
        The input points followed by the centres (:meth:`centre_values` of the points), kept
        so that later steps on the same points and faces do not compute them again.
    neighbours : ndarray of shape (m, 4), int32 or int64, optional
        The tetrahedra's face neighbours found from the polyhedra's faces
        (:mod:`._split_neighbours`), each row the higher numbers first, then the lower, each
        increasing, -1 at the end (a face on the boundary); None when the faces did not allow it
        (and with ``pyramids``). The same adjacency as grouping the tetrahedra's faces.
    pyramids : ndarray of shape (p, 5), int64, optional
        With ``split_polyhedra(..., pyramids=True)``: each quad face joined to its cell's centre,
        a pyramid (base corners 0-3, apex the centre 4; positive measure, bilinear base).
    pyramid_source : ndarray of shape (p,), optional
        The input cell of each pyramid (in increasing order).
    """

    tetra: np.ndarray
    source: np.ndarray
    centre_points: np.ndarray
    centre_offsets: np.ndarray
    n_points: int
    n_face_centres: int
    reversed_cells: int = 0
    inverted_tetra: int = 0
    inverted_pyramids: int = 0
    points: np.ndarray | None = None
    neighbours: np.ndarray | None = None
    pyramids: np.ndarray | None = None
    pyramid_source: np.ndarray | None = None

    @property
    def n_centres(self) -> int:
        return int(self.centre_offsets.size - 1)

    def centre_values(self, values: np.ndarray) -> np.ndarray:
        """Values at the added centres: the mean of their corners' values.

        ``values`` has shape (n_points,) or (n_points, ...); the result (n_centres,) or
        (n_centres, ...), in float64.
        """
        return corner_means(values, self.centre_points, self.centre_offsets)


class SplitCentres(NamedTuple):
    """The corners of the centres a split added to a mesh's points (``Mesh.memo(SPLIT_CENTRES)``).

    Centre ``j`` is mesh point ``points[j]``, the mean of the mesh points
    ``corners[offsets[j]:offsets[j + 1]]``, none of them a centre. The centres are named one by one:
    on a mesh joined from blocks each block's centres sit among the joined points, not last.
    """

    points: np.ndarray
    corners: np.ndarray
    offsets: np.ndarray

    def centre_values(self, values: np.ndarray) -> np.ndarray:
        """Values at the centres from the mesh points' ``values`` (n_points, ...): the mean of their
        corners' values, the rule of :meth:`PolyhedraSplit.centre_values` (the reader's point data)."""
        return corner_means(values, self.corners, self.offsets)

    def merged(self, merge: np.ndarray | None, n_points: int) -> SplitCentres | None:
        """The centres as numbered among the ``n_points`` points of a mesh whose points were merged
        (``merge``: each point's number there; None: unmerged). A centre merged with a point that is no
        centre (one fell on a file point) is left out: that point keeps its own value. The copies of one
        centre (a face centre each of its cells or blocks added) are one point, with the first copy's
        corners. None when no centre is left."""
        if merge is None:
            return self if self.points.size else None
        merge, at, plain = np.asarray(merge, dtype=np.int64), merge[self.points], np.zeros(n_points, dtype=bool)
        plain[np.delete(merge, self.points)] = True
        _, pick = np.unique(at, return_index=True)  # the first copy of each centre
        pick = pick[~plain[at[pick]]]
        if not pick.size:
            return None
        sizes = np.diff(self.offsets)[pick]
        kept = np.concatenate([[0], np.cumsum(sizes)]).astype(np.int64)
        rows = np.repeat(self.offsets[pick] - kept[:-1], sizes) + np.arange(kept[-1])
        return SplitCentres(at[pick], merge[self.corners[rows]], kept)


def joined_centres(parts: list) -> SplitCentres | None:
    """The centres of blocks joined one after the other (``parts``: per block its point count and its
    :class:`SplitCentres` numbered in the block, or None), numbered in the join; None without any."""
    starts = np.concatenate([[0], np.cumsum([n for n, _ in parts])]).astype(np.int64)
    held = [(start, c) for start, (_, c) in zip(starts, parts) if c is not None]
    if not held:
        return None
    offsets = np.concatenate([[0], np.cumsum(np.concatenate([np.diff(c.offsets) for _, c in held]))])
    return SplitCentres(np.concatenate([c.points.astype(np.int64) + start for start, c in held]),
                        np.concatenate([c.corners.astype(np.int64) + start for start, c in held]),
                        offsets.astype(np.int64))


def cell_face_stream(cell_type: str, connectivity: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """The faces of ordinary 3D cells as a face stream (see :func:`split_polyhedra`).

    Returns ``(face_points, face_offsets, face_cell)``, the faces in the order of
    :data:`phasegauge.model.cells.FACES` for each cell (outward normals), cell after cell.
    """
    conn = np.asarray(connectivity, dtype=np.int64)
    faces = FACES[cell_type]
    n = conn.shape[0]
    sizes = np.array([len(f) for f in faces], dtype=np.int64)
    rows = np.concatenate([conn[:, list(f)] for f in faces], axis=1)  # cell-major
    offsets = np.concatenate([[0], np.cumsum(np.tile(sizes, n))]).astype(np.int64)
    return rows.ravel(), offsets, np.repeat(np.arange(n, dtype=np.int64), len(faces))


def _compact(ids, dtype, n: int) -> np.ndarray:
    """``ids`` as integers of ``dtype`` (no copy when they are already), refused later when out of 0..n-1."""
    ids = np.asarray(ids)
    if ids.dtype == dtype:
        return ids
    if ids.size and (ids.min() < 0 or ids.max() >= max(n, 1)):
        return ids.astype(np.int64)  # out of range: kept whole for the check's message
    return ids.astype(dtype)


def _refuse(what: str, where: str) -> UnsupportedMeshError:
    return UnsupportedMeshError(what, where=where, fix=_FIX_FACES)


def _check_faces(n_points: int, face_points, face_offsets, face_cell, n_cells: int, where: str, ids) -> np.ndarray:
    """Check the face stream; returns the face sizes."""
    sizes = np.diff(face_offsets)
    if face_offsets[0] != 0 or face_offsets[-1] != face_points.size or np.any(sizes < 0):
        raise _refuse(f"the polyhedron face offsets do not fit the {face_points.size} face corner numbers", where)
    small = np.flatnonzero(sizes < 3)
    if small.size:
        raise _refuse(f"{small.size} polyhedron faces have fewer than 3 corners "
                      f"(the first: cell {int(ids[face_cell[small[0]]])})", where)
    if face_points.size and (face_points.min() < 0 or face_points.max() >= n_points):
        raise _refuse(f"polyhedron faces refer to points outside 0..{n_points - 1}", where)
    per_cell = np.bincount(face_cell, minlength=n_cells)
    few = np.flatnonzero(per_cell < 4)
    if few.size:
        raise _refuse(f"{few.size} polyhedra have fewer than 4 faces (the first: cell {int(ids[few[0]])} "
                      f"with {int(per_cell[few[0]])})", where)
    return sizes


def _next_corners(face_offsets: np.ndarray, sizes: np.ndarray) -> np.ndarray:
    """For each position of the face stream, the position of the next corner around its face."""
    nxt = np.arange(1, int(face_offsets[-1]) + 1, dtype=index_dtype(int(face_offsets[-1]) + 1))
    nxt[face_offsets[1:] - 1] = face_offsets[:-1]
    return nxt


def _pack(high, low, bits: int) -> np.ndarray:
    """int64 keys ``high * 2**bits + low`` (``low`` below ``2**bits``)."""
    key = high.astype(np.int64)
    key <<= np.int64(bits)
    key |= low
    return key


def _closed_by_keys(face_points, nxt, edge_cell, bits: int) -> bool:
    """True when every edge of a cell is used by two of its faces in opposite directions (no edge
    from a corner to itself); False when any is not (then :func:`_check_closed` says which).

    The same condition as :func:`_check_closed` by two plain sorts: the directed edges
    (cell, a, b) are all different, and as a multiset equal to the reversed ones (cell, b, a).
    """
    b = face_points[nxt]
    if np.any(face_points == b):
        return False
    forward = _pack(_pack(edge_cell, face_points, bits), b, bits)
    forward.sort()
    if forward.size > 1 and np.any(forward[1:] == forward[:-1]):
        return False
    backward = _pack(_pack(edge_cell, b, bits), face_points, bits)
    del b
    backward.sort()
    return bool(np.array_equal(forward, backward))


def _check_closed(face_points, nxt, edge_cell, where: str, ids) -> None:
    """Every edge of a cell used by two of its faces, once in each direction."""
    a, b = face_points, face_points[nxt]
    lo, hi = np.minimum(a, b), np.maximum(a, b)
    forward = a < b
    del b
    order, starts = group_columns([edge_cell, lo, hi])
    del lo, hi
    counts = np.diff(starts, append=order.size)
    bad = counts != 2
    if bad.any():
        first = int(ids[edge_cell[order[starts[np.flatnonzero(bad)[0]]]]])
        n_bad = int(np.unique(edge_cell[order[starts[bad]]]).size)
        raise _refuse(f"{n_bad} polyhedra are not closed: an edge is used by {int(counts[bad][0])} of the cell's "
                      f"faces instead of 2 (the first: cell {first})", where)
    forward = forward[order]
    same = forward[starts] == forward[starts + 1]
    if same.any():
        cells = edge_cell[order[starts[same]]]
        raise _refuse(f"{int(np.unique(cells).size)} polyhedra list their faces with inconsistent orientations "
                      f"(an edge runs the same way in both of its faces; the first: cell {int(ids[cells[0]])})", where)


def split_polyhedra(points: np.ndarray, face_points, face_offsets, face_cell, n_cells: int, *,
                    where: str = "", cell_ids=None, diagonals: bool = True, pyramids: bool = False,
                    same_points=None) -> PolyhedraSplit:
    """Split polyhedral cells into tetrahedra about their cell centres (and the centres of faces of
    five or more corners, or of quads whose diagonals tie: see the module notes).

    Parameters
    ----------
    points : ndarray of shape (n_points, 3)
        Point coordinates, in mesh length units.
    face_points : ndarray of shape (q,), int
        The corners of every face of every cell, face after face, each face a loop.
    face_offsets : ndarray of shape (n_faces + 1,), int
        Where each face starts in ``face_points`` (the last entry is ``q``).
    face_cell : ndarray of shape (n_faces,), int
        The cell (0 to ``n_cells - 1``) each face belongs to. A face shared by two cells
        is listed once for each of them.
    n_cells : int
        Number of cells.
    where : str
        The file, for the error message.
    cell_ids : ndarray of shape (n_cells,), optional
        The cells' numbers in the file, for the error message (default 0 to ``n_cells - 1``).
    diagonals : bool
        Cut faces of four corners along their shorter diagonal (default); False gives every one a
        centre (for cells split beside others that centre all of their quad faces).
    pyramids : bool
        Leave faces of four corners whole: each, joined to its cell's centre, is a pyramid
        (:attr:`PolyhedraSplit.pyramids`), whose quad base matches the quad face of an ordinary
        cell (or of another polyhedron's pyramid) across it; ``diagonals`` is then not read, and
        no face neighbours are given.
    same_points : ndarray of shape (n_points,), int, optional
        The first point at each point's place (cells written with their own copies of their corners):
        faces at the same places are one face, so their quads are cut alike; each copy gets its own
        centre at the one place, with its own cell's values (merged with the points, they average).

    Returns
    -------
    PolyhedraSplit

    Raises
    ------
    UnsupportedMeshError
        A face with fewer than 3 corners, a corner outside the points, a cell with fewer
        than 4 faces, or a face list that is not a closed, consistently oriented surface.

    Notes
    -----
    Work is vectorised over faces of equal size; shared faces are matched by grouping
    their sorted corners (an exact radix sort, :func:`._grouping.group_columns`).
    """
    X = np.asarray(points, dtype=np.float64)
    face_offsets = np.asarray(face_offsets, dtype=np.int64)
    n_points = X.shape[0]
    # internal index arrays in int32 where every id fits (half the memory of the grouping work)
    small = index_dtype(max(n_points + np.asarray(face_offsets).size + n_cells, n_cells + 1))
    face_points = _compact(face_points, small, n_points)
    face_cell = _compact(face_cell, small, n_cells)
    # the corners that name a face (where the cells share their points, the corners themselves)
    key_points = face_points if same_points is None else _compact(np.asarray(same_points)[face_points], small, n_points)
    ids = np.arange(n_cells) if cell_ids is None else np.asarray(cell_ids)
    sizes = _check_faces(n_points, face_points, face_offsets, face_cell, n_cells, where, ids)
    nxt = _next_corners(face_offsets, sizes)
    edge_cell = np.repeat(face_cell, sizes)
    bits = max(_bits(n_points), 1)
    packed = max(_bits(n_cells), 1) + 2 * bits <= 63  # (cell, point) and (cell, point, point) keys fit in int64
    # each edge's twin in its cell (None: the surface is not closed, or the stream not in cell order)
    twin = edge_twins(face_points, nxt, edge_cell, n_points)
    if twin is None and not (packed and _closed_by_keys(face_points, nxt, edge_cell, bits)):
        _check_closed(face_points, nxt, edge_cell, where, ids)  # the grouping names what is wrong
    if pyramids or same_points is not None:
        twin = None  # the pieces' face neighbours: the mesh groups their faces (pyramids among them, or copies merged)

    # cell centres first: the mean of each cell's distinct corners (the quad faces' turn check reads them)
    if packed:  # the distinct (cell, corner) keys in increasing order, as the grouping orders them
        key = _pack(edge_cell, face_points, bits)
        key.sort()
        key = key[np.concatenate([[True], key[1:] != key[:-1]])]
        cell_corners = key & np.int64((1 << bits) - 1)
        key >>= np.int64(bits)
        cell_counts = np.bincount(key, minlength=n_cells)
        del key
    else:
        order, starts = group_columns([edge_cell, face_points])
        distinct = order[starts]
        del order, starts
        cell_corners = face_points[distinct]
        cell_counts = np.bincount(edge_cell[distinct], minlength=n_cells)
        del distinct
    cell_corners = cell_corners.astype(index_dtype(n_points), copy=False)
    cell_xyz = corner_means(X, cell_corners, np.concatenate([[0], np.cumsum(cell_counts)]).astype(np.int64))

    # face centres: one per distinct face of five or more corners, and per distinct quad face whose
    # diagonals tie or whose triangles would turn a tetrahedron (the others cut along their shorter diagonal)
    centre_parts, centre_counts, face_centre = [], [], np.full(sizes.size, -1, dtype=np.int64)
    n_face_centres = 0
    centred_groups = []  # per face size: what the tetrahedra's neighbours across the faces need
    diagonal_faces, diagonal_shift = np.zeros(0, dtype=np.int64), np.zeros(0, dtype=np.int64)
    smallest_centred = 5 if pyramids else 4
    for k in np.unique(sizes[sizes >= smallest_centred]):
        faces = np.flatnonzero(sizes == k)
        if faces.size * k == face_points.size:  # every face of this size: the stream itself, k a row
            rows = key_points.reshape(-1, k)
        else:
            rows = key_points[face_offsets[faces][:, None] + np.arange(k)]
        if twin is not None and k < 128:  # where each sorted corner sits in its face, for the neighbours
            rows, local = sorted_with_places(rows)
        else:
            rows, local = np.sort(rows, axis=1), None
        order, starts = group_columns(list(rows.T))
        if local is not None:
            centred_groups.append((faces, rows, local, (order, starts)))
        elif twin is not None:
            twin = None  # a face of 128 corners or more: the mesh groups the tetrahedra's faces
        group = np.empty(faces.size, dtype=np.int64)
        group[order] = np.repeat(np.arange(starts.size), np.diff(starts, append=order.size))
        keep = np.ones(starts.size, dtype=bool)  # the distinct faces that get a centre
        if k == 4 and diagonals:
            totals = cell_turn_totals(X, face_points, face_offsets, sizes, nxt, edge_cell, cell_xyz, n_cells)
            shift, keep = polyhedra_quad_cuts(X, key_points, face_offsets, faces, group, faces[order[starts]],
                                              face_cell, cell_xyz, totals)
            cut = ~keep[group]
            diagonal_faces, diagonal_shift = faces[cut], shift[cut]
            del totals, shift, cut
        with_centre = keep[group]
        if same_points is None:  # one centre a distinct face
            number = (np.cumsum(keep) - 1)[group[with_centre]]
            corners = rows[order[starts[keep]]]
        else:  # one a copy, all at the same place (its values its own cell's; the merged point averages them)
            number = np.arange(int(np.count_nonzero(with_centre)))
            corners = face_points[face_offsets[faces[with_centre]][:, None] + np.arange(k)]
        face_centre[faces[with_centre]] = n_points + n_face_centres + number
        centre_parts.append(in_coordinate_order(X, corners).ravel())
        centre_counts.append(np.full(corners.shape[0], k, dtype=np.int64))
        n_face_centres += corners.shape[0]
    centre_parts.append(cell_corners)
    centre_counts.append(cell_counts)
    centre_points = np.concatenate(centre_parts).astype(index_dtype(n_points), copy=False)  # kept with the split
    del centre_parts
    centre_offsets = np.concatenate([[0], np.cumsum(np.concatenate(centre_counts))]).astype(np.int64)
    cell_centre = n_points + n_face_centres + np.arange(n_cells, dtype=np.int64)

    # tetrahedra: each face triangle joined to the cell centre; a face listed with an outward
    # normal gives (b, a, c, centre) a positive volume
    triangles = np.flatnonzero(sizes == 3)
    centred = sizes >= smallest_centred
    centred[diagonal_faces] = False
    corner = np.flatnonzero(np.repeat(centred, sizes))  # stream positions of the centred faces' corners
    n_flat = triangles.size + 2 * diagonal_faces.size  # tetrahedra on whole face triangles
    tetra = np.empty((n_flat + corner.size, 4), dtype=np.int64)
    source = np.empty(tetra.shape[0], dtype=index_dtype(n_cells))  # int32 where it fits: 4 bytes a tetrahedron
    if triangles.size:
        p = face_offsets[triangles]
        part = tetra[:triangles.size]
        part[:, 0], part[:, 1], part[:, 2] = face_points[p + 1], face_points[p], face_points[p + 2]
        source[:triangles.size] = face_cell[triangles]
        part[:, 3] = cell_centre[source[:triangles.size]]
    diagonal = _diagonal_positions(face_offsets, diagonal_faces, diagonal_shift)
    if diagonal_faces.size:  # two triangles a face: (q0, q1, q2) and (q0, q2, q3), q0 on the diagonal
        q = [face_points[p] for p in diagonal]
        cells = face_cell[diagonal_faces]
        for half, (u, v, w) in enumerate(((1, 0, 2), (2, 0, 3))):
            part = tetra[triangles.size + half:n_flat:2]
            part[:, 0], part[:, 1], part[:, 2], part[:, 3] = q[u], q[v], q[w], cell_centre[cells]
            source[triangles.size + half:n_flat:2] = cells
        del q, cells
    if corner.size == face_points.size:  # every face centred: a tetrahedron for each stream position
        _fill_centred(tetra, source, face_points, nxt, np.repeat(face_centre, sizes), edge_cell,
                      n_points + n_face_centres)
    elif corner.size:
        face_of = np.repeat(np.arange(sizes.size, dtype=small)[centred], sizes[centred])
        part = tetra[n_flat:]
        part[:, 0], part[:, 1], part[:, 2] = face_points[nxt[corner]], face_points[corner], face_centre[face_of]
        source[n_flat:] = face_cell[face_of]
        del face_of
        part[:, 3] = cell_centre[source[n_flat:]]
    del edge_cell
    neighbours = None
    if twin is not None:
        neighbours = _tetra_neighbours(face_points, face_offsets, sizes, nxt, face_cell, twin, n_points,
                                       centred_groups, triangles, diagonal, corner, centred, tetra.shape[0])
    del corner, nxt, twin, centred_groups
    if source.size and np.any(source[1:] < source[:-1]):  # faces of several sizes: cell by cell again
        keep = np.argsort(source, kind="stable")
        tetra, source = tetra[keep], source[keep]
        if neighbours is not None:
            new = np.empty(keep.size, dtype=neighbours.dtype)
            new[keep] = np.arange(keep.size, dtype=neighbours.dtype)
            neighbours = neighbours[keep]
            neighbours = np.where(neighbours >= 0, new[neighbours], neighbours)
    if neighbours is not None:
        ordered_rows(neighbours)
    pyramid, pyramid_source = (_quad_pyramids(face_points, face_offsets, sizes, face_cell, cell_centre, source.dtype)
                               if pyramids else (None, None))

    face_xyz = corner_means(X, centre_points[:centre_offsets[n_face_centres]], centre_offsets[:n_face_centres + 1])
    Y = np.concatenate([X, face_xyz, cell_xyz])
    del face_xyz, cell_xyz
    volume = _signed_volumes(Y, tetra)
    total = np.bincount(source, weights=volume, minlength=n_cells)
    if pyramid is not None:
        pyramid_volume = cell_geometry("pyramid", Y, pyramid)[0]  # the mesh's own measure (bilinear base)
        total = total + np.bincount(pyramid_source, weights=pyramid_volume, minlength=n_cells)
    turn = total < 0
    if turn.any():
        flip = np.flatnonzero(turn[source])
        first = tetra[flip, 0]
        tetra[flip, 0] = tetra[flip, 1]
        tetra[flip, 1] = first
        del first
        volume[flip] = -volume[flip]
        if pyramid is not None:  # the base the other way round
            flip = np.flatnonzero(turn[pyramid_source])
            pyramid[flip, 1], pyramid[flip, 3] = pyramid[flip, 3], pyramid[flip, 1].copy()
            pyramid_volume[flip] = -pyramid_volume[flip]
    done = PolyhedraSplit(tetra, source, centre_points, centre_offsets, n_points, n_face_centres,
                          reversed_cells=int(np.count_nonzero(turn)), inverted_tetra=int(np.count_nonzero(volume < 0)),
                          inverted_pyramids=0 if pyramid is None else int(np.count_nonzero(pyramid_volume < 0)),
                          points=Y, neighbours=neighbours, pyramids=pyramid, pyramid_source=pyramid_source)
    return done


def _quad_pyramids(face_points, face_offsets, sizes, face_cell, cell_centre, dtype) -> tuple:
    """Each quad face joined to its cell's centre: pyramids (p, 5) and their cells (p,), cell by cell.

    A face listed with an outward normal, (a, b, c, d), gives the pyramid (a, d, c, b, centre): the
    base loop then turns about the direction to the apex, VTK's positive pyramid.
    """
    quads = np.flatnonzero(sizes == 4)
    start = face_offsets[quads]
    pyramid = np.empty((quads.size, 5), dtype=np.int64)
    for j, at in enumerate((0, 3, 2, 1)):
        pyramid[:, j] = face_points[start + at]
    owner = face_cell[quads].astype(dtype)
    pyramid[:, 4] = cell_centre[owner]
    if owner.size and np.any(owner[1:] < owner[:-1]):  # faces not listed cell by cell
        keep = np.argsort(owner, kind="stable")
        pyramid, owner = pyramid[keep], owner[keep]
    return pyramid, owner


def _fill_centred(tetra, source, face_points, nxt, centre_of_position, edge_cell, first_cell_centre: int) -> None:
    """Rows ``(b, a, face centre, cell centre)`` of every stream position's edge ``a -> b`` and
    their cells, in chunks of rows (each chunk's four columns written while it is in cache)."""
    chunk = 1 << 16
    for lo in range(0, tetra.shape[0], chunk):
        hi = lo + chunk
        part = tetra[lo:hi]
        part[:, 0] = face_points[nxt[lo:hi]]
        part[:, 1] = face_points[lo:hi]
        part[:, 2] = centre_of_position[lo:hi]
        cells = edge_cell[lo:hi]
        source[lo:hi] = cells
        np.add(cells, first_cell_centre, out=part[:, 3], dtype=np.int64)


def _diagonal_positions(face_offsets, faces, shift) -> list:
    """The stream positions of the corners ``q0..q3`` of quad faces cut along ``q0 - q2`` (``q0`` the
    face's corner ``shift``)."""
    start = face_offsets[faces]
    return [start + (shift + j) % 4 for j in range(4)]


def _tetra_neighbours(face_points, face_offsets, sizes, nxt, face_cell, twin, n_points, centred_groups, triangles,
                      diagonal, corner, centred, n_tetra):
    """The tetrahedra's face neighbours from the faces (:func:`._split_neighbours.split_neighbours`)."""
    dtype = index_dtype(n_tetra + 1)
    if corner.size == face_points.size:  # every face centred: the tetrahedra in stream order
        tet_of_position = np.arange(corner.size, dtype=dtype)
        return split_neighbours(face_points, face_offsets, sizes, nxt, face_cell, twin, n_points, centred_groups,
                                tet_of_position, n_tetra)
    tet_of_position = np.empty(face_points.size, dtype=dtype)
    n_flat = triangles.size + 2 * diagonal[0].size
    tet_of_position[corner] = np.arange(n_flat, n_flat + corner.size, dtype=dtype)
    for j in range(3):
        tet_of_position[face_offsets[triangles] + j] = np.arange(triangles.size, dtype=dtype)
    for j in range(4):  # the edges q0 -> q1, q1 -> q2 on the first triangle, q2 -> q3, q3 -> q0 on the second
        tet_of_position[diagonal[j]] = np.arange(triangles.size + j // 2, n_flat, 2, dtype=dtype)
    return split_neighbours(face_points, face_offsets, sizes, nxt, face_cell, twin, n_points, centred_groups,
                            tet_of_position, n_tetra, centred=centred, diagonal=diagonal)


def _signed_volumes(Y: np.ndarray, tetra: np.ndarray) -> np.ndarray:
    """Signed volumes of the tetrahedra, coordinate column by column (small temporaries)."""
    columns = [np.ascontiguousarray(Y[:, i]) for i in range(3)]
    out = np.empty(tetra.shape[0])
    chunk = 1 << 14
    for lo in range(0, tetra.shape[0], chunk):
        t = tetra[lo:lo + chunk]
        a = [x[t[:, 0]] for x in columns]
        e = [[x[t[:, j]] - a[i] for i, x in enumerate(columns)] for j in (1, 2, 3)]
        out[lo:lo + chunk] = (e[0][0] * (e[1][1] * e[2][2] - e[1][2] * e[2][1])
                              - e[0][1] * (e[1][0] * e[2][2] - e[1][2] * e[2][0])
                              + e[0][2] * (e[1][0] * e[2][1] - e[1][1] * e[2][0])) / 6.0
    return out
