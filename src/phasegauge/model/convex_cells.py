"""Convex point set cells (VTK type 41): corners in any order, turned into ordinary cells.

A convex point set cell lists its corners without an order; the cell is their convex hull.
General finite-volume packages write their uniform 2D grids and 3D grids this way. Most such
cells are quadrilaterals or hexahedra, so they are recognised by their corners and given the
corner order of the ordinary cell:

* corners in one plane: a triangle, or a quad or polygon with its corners ordered by angle
  about their centre in that plane (the hull of a convex set of coplanar points);
* four corners off one plane: a tetrahedron with positive volume;
* eight corners off one plane: a hexahedron when each corner falls in its own octant of the
  cell's frame (the coordinate axes, else the principal axes of the corners, else the edges from
  one corner to its three nearest), so that parallelepipeds and mildly distorted hexahedra are
  recognised, axis-aligned or not;
* anything else (five, six or more than eight corners, a hexahedron none of the frames
  orders): split about its centre into tetrahedra over the faces of its convex hull
  (scipy's Qhull), a face of more than three corners coned from its own centre, shared with
  the split cell on its other side, so neighbours cut a shared face alike; every piece keeps
  the cell's values, so integrals stay exact, and is marked as a piece of its cell.

The hexahedra, wedges and pyramids that quad faces join to such a face centre (directly or
through other such cells) are split the same way (:func:`split_beside`), so the mesh conforms
where ordinary cells meet split ones; a mesh without split cells is not touched.

Only the unrecognised cells are handled one at a time (Qhull per cell); the common cases are
vectorised.

References
----------
Kitware, *The VTK User's Guide*, 11th ed. (2010), cell type VTK_CONVEX_POINT_SET (41).
C. B. Barber, D. P. Dobkin, H. Huhdanpaa (1996), "The Quickhull algorithm for convex hulls",
ACM Trans. Math. Software 22:469 (scipy.spatial.ConvexHull).
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from ._grouping import sort_small_rows, unique_rows
from ._places import in_coordinate_order
from .cells import FACES, LINEAR_CORNERS

__all__ = ["ConvexCells", "convert_convex_point_sets", "split_beside"]

#: relative size of the smallest singular value below which corners count as one plane
PLANAR_TOLERANCE = 1e-9

#: VTK hexahedron corner index of each octant (bit 0: axis 1 high, bit 1: axis 2 high, bit 2: axis 3 high)
_OCTANT_TO_CORNER = np.array([0, 1, 3, 2, 4, 5, 7, 6])
_OCTANT_TO_CORNER.flags.writeable = False


@dataclass
class ConvexCells:
    """Convex point set cells turned into ordinary cells.

    Attributes
    ----------
    blocks : list of (str, ndarray of shape (m, k))
        The new cell blocks (type, connectivity).
    source : list of ndarray of shape (m,)
        For each new block, the row of the input cell each new cell comes from (for the cell data).
    counts : dict of str to int
        How the input cells were read: ``'triangle', 'quad', 'polygon', 'tetra', 'hexahedron'``
        (recognised by their corners) and ``'split'`` (split about their centre), with
        ``'split_pieces'`` the number of tetrahedra these became; ``'beside'`` and ``'beside_pieces'``
        the ordinary cells split with them (:func:`split_beside`) and their tetrahedra.
    centre_corners : list of ndarray of shape (j, k)
        The corners of the split cells, in the order their centres are numbered after the
        input points (a centre's point values are its corners' mean).
    split : list of bool
        For each new block, whether its cells are pieces of split cells (``source`` then says
        which cell each piece belongs to: ``Mesh(pieces=...)``).
    face_centres : dict
        Point number of the centre of each hull face of more than three corners, keyed by its
        sorted corner numbers (:meth:`face_key`): one point for every split cell that shares the face.
    same_points : ndarray of shape (n_points,), int, optional
        The first point at each point's place (cells written with their own copies of their corners):
        faces are keyed by these, so two cells' copies of a face are one face; each copy gets its own
        centre at the one place, the mean of its own corners (so its own cell's point values: the
        mesh merges the centres with the points and averages them).
    """

    blocks: list = field(default_factory=list)
    source: list = field(default_factory=list)
    counts: dict = field(default_factory=dict)
    centre_corners: list = field(default_factory=list)
    split: list = field(default_factory=list)
    face_centres: dict = field(default_factory=dict)
    same_points: np.ndarray | None = None

    def places(self, corners: np.ndarray) -> np.ndarray:
        """Point numbers of ``corners`` by place: the first point at each (the numbers themselves when no
        two points share a place)."""
        return corners if self.same_points is None else self.same_points[corners]

    def face_key(self, corners) -> tuple:
        """The key of a face in :attr:`face_centres`: its corners' places, sorted (``corners``: each once)."""
        if self.same_points is None:
            return tuple(sorted(corners))
        return tuple(sorted(self.same_points[np.asarray(corners, dtype=np.int64)].tolist()))

    @property
    def n_centres(self) -> int:
        return sum(len(c) for c in self.centre_corners)

    def add(self, cell_type: str, cells: np.ndarray, rows: np.ndarray, *, count: str | None = None) -> None:
        if len(rows) == 0:
            return
        self.blocks.append((cell_type, np.ascontiguousarray(cells, dtype=np.int64)))
        self.source.append(np.asarray(rows, dtype=np.int64))
        self.split.append(count is not None)
        key = count or cell_type
        self.counts[key] = self.counts.get(key, 0) + (len(np.unique(rows)) if count else len(rows))

    def words(self) -> str:
        """How the cells were read, in one phrase."""
        names = {"triangle": "triangles", "quad": "quads", "polygon": "polygons", "tetra": "tetrahedra",
                 "hexahedron": "hexahedra"}
        parts = [f"{self.counts[k]} as {names[k]}" for k in names if self.counts.get(k)]
        if self.counts.get("split"):
            parts.append(f"{self.counts['split']} split about their centre into "
                         f"{self.counts['split_pieces']} tetrahedra")
        if self.counts.get("beside"):
            parts.append(f"the {self.counts['beside']} hexahedra, wedges and pyramids joined to them by quad faces "
                         f"split the same way into {self.counts['beside_pieces']} tetrahedra")
        return ", ".join(parts)


def convert_convex_point_sets(points: np.ndarray, cells: np.ndarray, out: ConvexCells | None = None) -> ConvexCells:
    """Turn convex point set cells with ``k`` corners each into ordinary cells.

    Parameters
    ----------
    points : ndarray of shape (n_points, 3)
    cells : ndarray of shape (m, k), int
        Corner indices of each cell, in any order.
    out : ConvexCells, optional
        Collects the result of several blocks (one per corner count).

    Returns
    -------
    ConvexCells
    """
    out = ConvexCells() if out is None else out
    cells = np.asarray(cells, dtype=np.int64)
    rows = np.arange(len(cells))
    if len(cells) == 0:
        return out
    k = cells.shape[1]
    xyz = np.asarray(points, dtype=np.float64)[cells]  # (m, k, 3)
    centre = xyz.mean(axis=1, keepdims=True)
    local = xyz - centre
    _, sing, frames = np.linalg.svd(local, full_matrices=False)
    extent = np.maximum(sing[:, 0], np.finfo(float).tiny)
    planar = sing[:, 2] <= PLANAR_TOLERANCE * extent if k >= 3 else np.ones(len(cells), bool)
    if planar.any():
        _planar_cells(local[planar], frames[planar], cells[planar], rows[planar], out)
    solid = ~planar
    if not solid.any():
        return out
    if k == 4:
        tets = cells[solid].copy()
        flip = _six_volumes(xyz[solid]) < 0
        tets[flip, 1], tets[flip, 2] = cells[solid][flip, 2], cells[solid][flip, 1]
        out.add("tetra", tets, rows[solid])
        return out
    rest = np.flatnonzero(solid)
    if k == 8:
        hexes, ok = _hexahedra(local[rest], frames[rest], cells[rest])
        out.add("hexahedron", hexes[ok], rows[rest][ok])
        rest = rest[~ok]
    if len(rest):
        _split_about_centre(np.asarray(points, dtype=np.float64), cells[rest], rows[rest], out)
    return out


def _six_volumes(p: np.ndarray) -> np.ndarray:
    """Six times the signed volume of each tetrahedron, corners ``p`` of shape (m, 4, 3)."""
    return np.einsum("ij,ij->i", np.cross(p[:, 1] - p[:, 0], p[:, 2] - p[:, 0]), p[:, 3] - p[:, 0])


def _planar_cells(local, frames, cells, rows, out: ConvexCells) -> None:
    """Order coplanar corners by angle about their centre (counter-clockwise seen from +normal)."""
    k = cells.shape[1]
    if k < 3:
        return
    axis_u, axis_v = frames[:, 0], frames[:, 1]
    normal = np.cross(axis_u, axis_v)
    # seen from +z where the plane is the xy plane (the usual 2D mesh): flip frames facing down
    down = normal[:, 2] < 0
    axis_v = np.where(down[:, None], -axis_v, axis_v)
    u = np.einsum("mkj,mj->mk", local, axis_u)
    v = np.einsum("mkj,mj->mk", local, axis_v)
    order = np.argsort(np.arctan2(v, u), axis=1, kind="stable")
    ordered = np.take_along_axis(cells, order, axis=1)
    name = {3: "triangle", 4: "quad"}.get(k, "polygon")
    out.add(name, ordered, rows)


def _hexahedra(local, frames, cells):
    """Hexahedron corner order from the octant of each corner; ``ok`` where that is a permutation.

    The octants are read in three frames in turn, each for the cells the earlier ones left: the
    coordinate axes (axis-aligned cells), the principal axes of the corners (any parallelepiped
    with distinct sides) and the edges from the first corner to its three nearest corners, in
    oblique coordinates (cubes and near-cubes in any orientation).
    """
    m = len(cells)
    result = np.zeros_like(cells)
    ok = np.zeros(m, dtype=bool)
    for frame in ("axes", "principal", "edges"):
        todo = np.flatnonzero(~ok)
        if not len(todo):
            break
        if frame == "axes":
            to_frame = np.broadcast_to(np.eye(3), (len(todo), 3, 3)).copy()
        elif frame == "principal":
            to_frame = np.transpose(frames[todo], (0, 2, 1))
        else:
            rel = local[todo] - local[todo, :1]
            near = np.argsort(np.einsum("mkj,mkj->mk", rel, rel), axis=1)[:, 1:4]
            edges = np.take_along_axis(rel, near[..., None], axis=1)  # (m, 3, 3): rows are edges
            det = np.linalg.det(edges)
            usable = np.abs(det) > 1e-9 * np.einsum("mkj,mkj->m", edges, edges) ** 1.5
            todo, edges = todo[usable], edges[usable]
            to_frame = np.linalg.inv(edges)
        left = np.linalg.det(to_frame) < 0
        to_frame[left, :, 2] *= -1  # a right-handed frame gives positive volumes
        proj = np.einsum("mkj,mja->mka", local[todo], to_frame)  # (m, 8, 3)
        scale = np.abs(proj).max(axis=1, keepdims=True)
        high = proj > 0
        clear = np.all(np.abs(proj) > 1e-6 * scale, axis=(1, 2))
        octant = high[..., 0] * 1 + high[..., 1] * 2 + high[..., 2] * 4
        slot = _OCTANT_TO_CORNER[octant]
        good = clear & np.all(np.sort(slot, axis=1) == np.arange(8), axis=1)
        idx = todo[good]
        order = np.argsort(slot[good], axis=1)
        result[idx] = np.take_along_axis(cells[idx], order, axis=1)
        ok[idx] = True
    return result, ok


def _split_about_centre(points, cells, rows, out: ConvexCells) -> None:
    """Tetrahedra from the centre of each cell over its convex hull (Qhull per cell), conforming.

    A hull face of three corners is one tetrahedron's base; a face of more corners (a quad or
    polygon: several coplanar hull triangles) is coned from its own centre, one tetrahedron per
    face edge. The face centre is one point for every cell that shares the face (keyed by its
    sorted corner numbers), so neighbouring cells cut a shared face alike, as the polyhedra are;
    cells written with their own copies of their corners each make their own centre of it, at the
    same place to the bit (corners summed in the order of their coordinates).
    """
    from scipy.spatial import ConvexHull

    base = len(points) + out.n_centres  # the cell centres' first point number
    face_numbers: dict = {}  # sorted corners -> face centre number among this call's faces
    tets, owner = [], []
    for i, corners in enumerate(cells):  # only cells no table recognises
        hull = ConvexHull(points[corners])
        for group in _coplanar_groups(hull):
            if len(group) == 1:
                tri = corners[hull.simplices[group[0]]]
                tets.append([[*tri, base + i]])
            else:
                local = hull.simplices[group]
                own = tuple(sorted(set(corners[local.ravel()].tolist())))
                # a face of a cell split before, or numbered below (each copy of a face its own centre)
                face = out.face_centres.get(own) if out.same_points is None else None
                if face is None:
                    face = -1 - face_numbers.setdefault(own, len(face_numbers))
                edges = _outline_edges(local)
                tets.append(np.column_stack([corners[edges], np.full(len(edges), face),
                                             np.full(len(edges), base + i)]))
            owner.append(np.full(len(tets[-1]), i))
    tets = np.concatenate([np.asarray(t, dtype=np.int64) for t in tets])
    owner = np.concatenate(owner)
    # face centres after the cell centres, grouped by their corner count (one centre array per count)
    keys = sorted(face_numbers, key=len)
    number = np.empty(len(keys), dtype=np.int64)
    for j, key in enumerate(keys):
        number[face_numbers[key]] = out.face_centres[out.face_key(key)] = base + len(cells) + j
    faces = tets[:, 2] < 0
    tets[faces, 2] = number[-1 - tets[faces, 2]]
    centres = points[cells].mean(axis=1)
    face_corners = [in_coordinate_order(points, np.array([k for k in keys if len(k) == n], dtype=np.int64))
                    for n in sorted({len(k) for k in keys})]
    earlier = np.zeros((out.n_centres, 3))  # centres of earlier blocks: only their shared face centres matter
    for key, at in out.face_centres.items():
        if len(points) <= at < base:  # (centres among the points, as a polyhedra split's, are there)
            earlier[at - len(points)] = points[list(key)].mean(axis=0)
    coords = np.vstack([points, earlier, centres] + [points[f].mean(axis=1) for f in face_corners])
    flip = _six_volumes(coords[tets]) < 0
    tets[flip, 0], tets[flip, 1] = tets[flip, 1].copy(), tets[flip, 0].copy()
    out.centre_corners.append(cells)
    out.centre_corners.extend(face_corners)
    out.add("tetra", tets, rows[owner], count="split")
    out.counts["split_pieces"] = out.counts.get("split_pieces", 0) + len(tets)


def _coplanar_groups(hull) -> list:
    """The hull's triangles grouped by the face they lie in (equal plane equations to round-off)."""
    eq = hull.equations  # (m, 4): unit normal and offset
    scale = max(float(np.ptp(hull.points, axis=0).max()), np.finfo(float).tiny)
    same = (eq[:, :3] @ eq[:, :3].T > 1 - 1e-9) & (np.abs(eq[:, 3][:, None] - eq[:, 3][None, :]) <= 1e-9 * scale)
    groups, seen = [], np.zeros(len(eq), dtype=bool)
    for t in range(len(eq)):
        if not seen[t]:
            members = np.flatnonzero(same[t] & ~seen)
            seen[members] = True
            groups.append(members)
    return groups


def _outline_edges(triangles: np.ndarray) -> np.ndarray:
    """The edges of a fan of triangles (k, 3) that lie on its outline (used by one triangle), (j, 2)."""
    edges = np.concatenate([triangles[:, [0, 1]], triangles[:, [1, 2]], triangles[:, [2, 0]]])
    _, index, counts = np.unique(np.sort(edges, axis=1), axis=0, return_index=True, return_counts=True)
    return edges[index[counts == 1]]


def split_beside(points: np.ndarray, blocks: list, pieces: list, data: dict, out: ConvexCells) -> tuple:
    """Split the hexahedra, wedges and pyramids that meet split convex cells, so that faces conform.

    A convex point set split about its centre cuts each hull face of four or more corners about
    a face centre (:attr:`ConvexCells.face_centres`). An ordinary cell on the other side of such
    a face (a hexahedron, wedge or pyramid of the file, or a convex point set recognised as a
    hexahedron) would keep the face whole, and the two sides would not meet; splitting only that
    neighbour would leave its own quad faces unmatched in turn. So every such cell joined to a
    centred face through a chain of shared quad faces is split the same way: tetrahedra from its
    centre (its corners' mean) over its faces, a triangular face whole, a quad face coned from its
    face centre, one point for every cell that shares the face (keyed by its sorted corners, as
    the convex cells' faces). Cells no such chain reaches stay whole (their faces meet whole
    cells or triangles only); a mesh without face centres is returned as it is.

    Parameters
    ----------
    points : ndarray of shape (n_points, 3)
        The input points (without centres).
    blocks : list of (str, ndarray of shape (m, k))
        The mesh's blocks (meshio cell type names; higher-order cells by their corners).
    pieces : list of (ndarray of shape (m,) or None)
        Per block, the whole cell of each cell (None: each cell is whole).
    data : dict of str to list of ndarray
        Cell data, one array per block.
    out : ConvexCells
        The convex cells' split (its face centres are shared; the new centres are added after
        those there, in :attr:`ConvexCells.centre_corners`).

    Returns
    -------
    (blocks, pieces, data)
        The same lists with each split block's cells replaced by the cells kept whole (if any)
        and a block of tetrahedra marked as pieces of their cells.
    """
    chosen = _cells_to_split(blocks, out)
    if chosen is None:
        return blocks, pieces, data
    new_blocks, new_pieces, new_data = [], [], {name: [] for name in data}
    for b, (name, cells) in enumerate(blocks):
        rows = chosen.get(b)
        if rows is None:
            new_blocks.append((name, cells))
            new_pieces.append(pieces[b])
            for key in data:
                new_data[key].append(data[key][b])
            continue
        kind, corners = LINEAR_CORNERS.get(str(name), (str(name), None))
        conn = np.asarray(cells, dtype=np.int64)
        tets, owner = _cone_from_centres(points, kind, conn[rows] if corners is None else conn[rows][:, corners], out)
        whole = np.ones(len(conn), dtype=bool)
        whole[rows] = False
        parts = ([(name, conn[whole], np.flatnonzero(whole))] if whole.any() else []) + [("tetra", tets, rows[owner])]
        for cell_type, cells_kept, source in parts:
            new_blocks.append((cell_type, cells_kept))
            marked = pieces[b] is not None or cell_type == "tetra"
            new_pieces.append((source if pieces[b] is None else pieces[b][source]) if marked else None)
            for key in data:
                new_data[key].append(np.asarray(data[key][b])[source])
    return new_blocks, new_pieces, new_data


def _cells_to_split(blocks: list, out: ConvexCells) -> dict | None:
    """Per block, the rows of its hexahedra, wedges and pyramids joined to a centred face by shared
    quad faces (connected components of the cell - quad face graph); None when there are none."""
    from scipy.sparse import coo_matrix
    from scipy.sparse.csgraph import connected_components

    if not any(len(key) == 4 for key in out.face_centres):
        return None
    keys, cell, spans, n = [], [], {}, 0
    for b, (name, cells) in enumerate(blocks):
        kind, corners = LINEAR_CORNERS.get(str(name), (str(name), None))
        if kind not in ("hexahedron", "wedge", "pyramid") or len(cells) == 0:
            continue
        conn = np.asarray(cells, dtype=np.int64)
        conn = conn if corners is None else conn[:, corners]
        for face in FACES[kind]:
            if len(face) == 4:
                keys.append(sort_small_rows(out.places(conn[:, list(face)])))
                cell.append(n + np.arange(len(conn)))
        spans[b] = (n, n + len(conn))
        n += len(conn)
    if not keys:
        return None
    faces, face_of = unique_rows(np.concatenate(keys))
    centred = _centre_numbers(faces, out.face_centres) >= 0
    if not centred.any():
        return None
    cell = np.concatenate(cell)
    graph = coo_matrix((np.ones(cell.size, dtype=np.int8), (cell, n + face_of.ravel())),
                       shape=(n + len(faces),) * 2)
    _, label = connected_components(graph, directed=False)
    split = np.isin(label[:n], label[n + np.flatnonzero(centred)])
    chosen = {b: np.flatnonzero(split[lo:hi]) for b, (lo, hi) in spans.items()}
    return {b: rows for b, rows in chosen.items() if rows.size} or None

def _cone_from_centres(points: np.ndarray, kind: str, conn: np.ndarray, out: ConvexCells):
    """Tetrahedra of one block of hexahedra, wedges or pyramids about cell and shared face centres."""
    n = len(conn)
    base = len(points) + out.n_centres  # the cell centres' first point number
    cells = np.arange(n, dtype=np.int64)
    quads = [face for face in FACES[kind] if len(face) == 4]
    F = np.concatenate([conn[:, list(face)] for face in quads])  # (q * n, 4), face after face
    keys, inverse = unique_rows(sort_small_rows(F))
    if out.same_points is None:  # the centres of faces shared with cells split before
        number = _centre_numbers(keys, out.face_centres)
    else:  # each cell's copy of a face its own centre (at the place of the others': merged with them)
        number = np.full(len(keys), -1, dtype=np.int64)
    new = number < 0
    number[new] = base + n + np.arange(int(new.sum()))
    out.face_centres.update(zip(map(out.face_key, keys[new].tolist()), number[new].tolist()))
    centre = number[inverse]
    owner_q = np.tile(cells, len(quads))
    tets = [np.column_stack([F[:, i], F[:, (i + 1) % 4], centre, base + owner_q]) for i in range(4)]
    owner = [owner_q] * 4
    for face in FACES[kind]:
        if len(face) == 3:
            tets.append(np.column_stack([conn[:, list(face)], base + cells]))
            owner.append(cells)
    tets, owner = np.concatenate(tets), np.concatenate(owner)
    # orientation from coordinates (positive volumes), as the convex cells' split
    X = points[tets[:, :2]]  # (m, 2, 3): the edge on the face
    face_xyz = np.empty((len(tets), 3))
    on_face = np.concatenate([np.ones(4 * len(F), bool), np.zeros(len(tets) - 4 * len(F), bool)])
    face_xyz[on_face] = np.tile(points[F].mean(axis=1), (4, 1))
    face_xyz[~on_face] = points[tets[~on_face, 2]]
    cell_xyz = points[conn].mean(axis=1)[owner]
    p = np.concatenate([X, face_xyz[:, None], cell_xyz[:, None]], axis=1)
    flip = _six_volumes(p) < 0
    tets[flip, 0], tets[flip, 1] = tets[flip, 1].copy(), tets[flip, 0].copy()
    out.centre_corners.append(conn)
    if new.any():
        out.centre_corners.append(in_coordinate_order(points, keys[new]))
    out.counts["beside"] = out.counts.get("beside", 0) + n
    out.counts["beside_pieces"] = out.counts.get("beside_pieces", 0) + len(tets)
    return tets, owner


def _centre_numbers(keys: np.ndarray, face_centres: dict) -> np.ndarray:
    """The point number of the face centre of each sorted quad ``keys`` row (n, 4), -1 where none."""
    known = [key for key in face_centres if len(key) == 4]
    number = np.full(len(keys), -1, dtype=np.int64)
    if not known or len(keys) == 0:
        return number
    table = np.array(known, dtype=np.int64)
    _, where = unique_rows(np.vstack([table, keys]))
    slot = np.full(int(where.max()) + 1, -1, dtype=np.int64)
    slot[where[:len(table)]] = [face_centres[key] for key in known]
    return slot[where[len(table):]]
