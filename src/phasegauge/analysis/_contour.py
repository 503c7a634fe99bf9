"""Level contours of the phase indicator on any mesh.

Two paths give the contour ``c = level`` of the point values of c:

* regular grids of quads or hexahedra (:attr:`Mesh.regular_grid`) without NaN:
  marching squares / marching cubes from scikit-image, run in index space and
  mapped back to the grid's physical coordinates and to mesh cell ids;
* every other mesh (and grids with NaN): marching triangles (2D) or marching
  tetrahedra (3D) on a simplex split of every cell (:func:`split_cells`),
  fully vectorised per cell type.

Orientation of the elements (simplex path): in 2D the measured phase
(c > level) lies on the left of each segment, so a droplet's boundary runs
counter-clockwise in the plane's axes; in 3D triangle normals (right-hand rule)
point out of the measured phase, towards lower c.
"""

from __future__ import annotations

import weakref
from dataclasses import dataclass

import numpy as np

from ..errors import OptionError
from ..model._grouping import sort_small_rows
from ..model.mesh import Mesh
from ._sums import dot

__all__ = ["Contour", "find_interface", "split_cells"]


@dataclass(frozen=True)
class Contour:
    """A level contour: polylines in 2D, a triangulated surface in 3D.

    Attributes
    ----------
    points : ndarray of shape (m, 3), float
        Vertices in the mesh's 3D coordinates (a 2D mesh's constant
        coordinate is kept).
    elements : ndarray of shape (k, 2) or (k, 3), int
        Line segments (2D) or triangles (3D), as indices into ``points``.
    cells : ndarray of shape (k,), int
        The mesh cell each element lies in.
    dimension : {2, 3}
        Dimension of the mesh the contour was found on.
    plane_axes : tuple of int
        The coordinate axes the mesh spans (``(0, 1)`` for a 2D mesh in the
        x-y plane, ``(0, 1, 2)`` in 3D).
    """

    points: np.ndarray
    elements: np.ndarray
    cells: np.ndarray
    dimension: int
    plane_axes: tuple = (0, 1, 2)

    @property
    def n_elements(self) -> int:
        """Number of segments (2D) or triangles (3D)."""
        return int(self.elements.shape[0])

    @property
    def element_sizes(self) -> np.ndarray:
        """Segment lengths (2D) or triangle areas (3D), shape (k,), in length units (squared)."""
        if self.n_elements == 0:
            return np.zeros(0)
        p = self.points[self.elements]
        if self.dimension == 2:
            return np.linalg.norm(p[:, 1] - p[:, 0], axis=1)
        return 0.5 * np.linalg.norm(np.cross(p[:, 1] - p[:, 0], p[:, 2] - p[:, 0]), axis=1)

    @property
    def size(self) -> float:
        """Total length (2D) or area (3D), in length units (squared)."""
        return float(self.element_sizes.sum())

    @property
    def centroids(self) -> np.ndarray:
        """Element midpoints / centroids, shape (k, 3)."""
        if self.n_elements == 0:
            return np.zeros((0, 3))
        return self.points[self.elements].mean(axis=1)

    @property
    def normals(self) -> np.ndarray:
        """Unit normals of the elements in 3D coordinates, shape (k, 3).

        They point out of the measured phase (towards lower c) when the
        elements carry the orientation of this module's paths.
        """
        if self.n_elements == 0:
            return np.zeros((0, 3))
        p = self.points[self.elements]
        if self.dimension == 2:
            a, b = self.plane_axes[0], self.plane_axes[1]
            t = p[:, 1] - p[:, 0]
            n = np.zeros_like(t)
            n[:, a] = t[:, b]   # right-hand normal of the segment: the lower-c side
            n[:, b] = -t[:, a]
        else:
            n = np.cross(p[:, 1] - p[:, 0], p[:, 2] - p[:, 0])
        length = np.linalg.norm(n, axis=1, keepdims=True)
        return np.divide(n, length, out=np.zeros_like(n), where=length > 0)

    def __repr__(self) -> str:
        kind = "segments" if self.dimension == 2 else "triangles"
        return f"Contour({self.n_elements} {kind}, size {self.size:.6g})"


def _empty(mesh: Mesh) -> Contour:
    k = 2 if mesh.dimension == 2 else 3
    return Contour(np.zeros((0, 3)), np.zeros((0, k), dtype=np.int64), np.zeros(0, dtype=np.int64),
                   mesh.dimension, tuple(mesh.plane_axes))


def _check_level(level) -> float:
    try:
        value = float(level)
    except (TypeError, ValueError):
        raise OptionError(f"level must be a number, found {level!r}", fix="for example level=0.5") from None
    if not np.isfinite(value):
        raise OptionError(f"level must be finite, found {value}", fix="for example level=0.5")
    return value


def _check_point_values(mesh: Mesh, values) -> np.ndarray:
    c = np.asarray(values, dtype=np.float64)
    if c.shape != (mesh.n_points,):
        raise OptionError(f"point values must have shape ({mesh.n_points},), found {c.shape}",
                          fix="pass the indicator's point values (Indicator.point)")
    return c


# --------------------------------------------------------------------------- simplex split

_HEX_FACES = [(0, 3, 2, 1), (4, 5, 6, 7), (0, 1, 5, 4), (1, 2, 6, 5), (2, 3, 7, 6), (3, 0, 4, 7)]
_WEDGE_QUADS = [(0, 1, 4, 3), (1, 2, 5, 4), (2, 0, 3, 5)]
_WEDGE_TRIS = [(0, 2, 1), (3, 4, 5)]


@dataclass(frozen=True)
class SimplexSplit:
    """Simplices covering a set of cells, with the values of the piecewise-linear field.

    Attributes
    ----------
    coordinates : ndarray of shape (n_vertices, dim)
        Mesh points first (all of them), then added face and cell centres.
    values : ndarray of shape (n_vertices,)
        c at those vertices; a centre carries the mean of its corners.
    simplices : ndarray of shape (n_simplices, dim + 1)
        Vertex ids of each triangle (2D) or tetrahedron (3D).
    owner : ndarray of shape (n_simplices,)
        The mesh cell each simplex belongs to.
    centres : tuple of (ids, corners) pairs
        The added vertices: ``ids`` (n,) their vertex ids, ``corners`` (n, k)
        the mesh points whose mean they are (coordinates and values alike).
        Empty when the split added none.
    """

    coordinates: np.ndarray
    values: np.ndarray
    simplices: np.ndarray
    owner: np.ndarray
    centres: tuple = ()

    def centre_means(self, point_values: np.ndarray) -> np.ndarray:
        """Values at every vertex from values at the mesh points, centres as their corners' means.

        ``point_values`` has shape (n_points,) (the mesh points come first among
        the vertices); the result has shape (n_vertices,).
        """
        n = point_values.shape[0]
        out = np.empty(self.coordinates.shape[0], dtype=np.result_type(point_values, np.float64))
        out[:n] = point_values
        for ids, corners in self.centres:
            total = point_values[corners[:, 0]].astype(np.float64)
            for j in range(1, corners.shape[1]):
                total += point_values[corners[:, j]]
            out[ids] = total / corners.shape[1]
        return out

    @property
    def measures(self) -> np.ndarray:
        """Unsigned simplex areas / volumes, shape (n_simplices,)."""
        X = self.coordinates[self.simplices]
        E = X[:, 1:] - X[:, :1]
        if X.shape[2] == 2:
            return 0.5 * np.abs(E[:, 0, 0] * E[:, 1, 1] - E[:, 0, 1] * E[:, 1, 0])
        return np.abs(np.einsum("ij,ij->i", E[:, 0], np.cross(E[:, 1], E[:, 2]))) / 6.0


def split_cells(mesh: Mesh, values: np.ndarray, active: np.ndarray | None = None) -> SimplexSplit:
    """Split (a subset of) the cells into triangles or tetrahedra.

    Parameters
    ----------
    mesh : Mesh
    values : ndarray of shape (n_points,)
        Point values of c.
    active : ndarray of shape (n_cells,) of bool, optional
        Cells to split (default all).

    Returns
    -------
    SimplexSplit

    Notes
    -----
    Triangles and tetrahedra are kept. A quad or polygon is split into
    triangles about its centre; every quadrilateral face of a hexahedron,
    wedge or pyramid is split into four triangles about the face centre, and
    the cell is coned from its centre (hexahedron: 24 tetrahedra, wedge: 14)
    or, for a pyramid, from its apex (4). A centre takes the mean of the
    corner coordinates and values, so a face is split the same way from both
    sides and the piecewise-linear field (and its contour) is conforming on
    any conforming mesh. Hexahedra and wedges whose quad faces are flat, and
    whose shared quad faces are cut along the same diagonal from both sides by
    the 6-tetrahedra table of :mod:`._simplices` (hexahedra) or through their
    lowest point id (wedges, 3 tetrahedra; Dompierre et al. 1999), are split
    so, without centres, when that holds for all of them in the mesh; the
    split stays conforming (:func:`_few_simplex_cells`).
    """
    X = mesh.coordinates
    dim = mesh.dimension
    n_points = mesh.n_points
    extra_x, extra_v, centres = [], [], []
    n_extra = 0
    simplices, owners = [], []

    def corner_mean(array, corners):
        # the corners summed in order, then divided: as array[corners].mean(axis=1), without
        # the (n, k, ...) temporary
        total = array[corners[:, 0]].copy()
        for j in range(1, corners.shape[1]):
            total += array[corners[:, j]]
        return total / corners.shape[1]

    def add_centres(corners: np.ndarray) -> np.ndarray:
        nonlocal n_extra
        extra_x.append(corner_mean(X, corners))
        extra_v.append(corner_mean(values, corners))
        ids = n_points + n_extra + np.arange(corners.shape[0])
        n_extra += corners.shape[0]
        centres.append((ids, corners))
        return ids

    pending = []  # 3D: (face corners (n,4), apex ids (n,), owner (n,), face ids (n,)) split after dedupe
    for b, (block, start) in enumerate(zip(mesh.blocks, mesh.block_offsets[:-1])):
        conn = block.connectivity
        ids = np.arange(start, start + len(block))
        local_ids = None
        if active is not None:
            keep = active[ids]
            conn, ids = conn[keep], ids[keep]
            local_ids = np.nonzero(keep)[0]
        if len(ids) == 0:
            continue
        kind = block.cell_type
        if kind in ("hexahedron", "wedge", "pyramid"):
            block_faces = _quad_face_ids(mesh)[b]
            if local_ids is not None:
                block_faces = block_faces[local_ids]
        if kind in ("hexahedron", "wedge"):
            few = _few_simplex_cells(mesh)[b]
            few = few if local_ids is None else few[local_ids]
            if few.any():
                from ._simplices import _SPLIT

                pieces = (_SPLIT[kind] if kind == "hexahedron" else None)
                if pieces is None:
                    for tets in _wedge_min_vertex_split(conn[few]):
                        simplices.append(tets)
                        owners.append(ids[few])
                else:
                    for local in pieces:
                        simplices.append(conn[few][:, list(local)])
                        owners.append(ids[few])
                conn, ids, block_faces = conn[~few], ids[~few], block_faces[~few]
                if len(ids) == 0:
                    continue
        if kind in ("triangle", "tetra"):
            simplices.append(conn)
            owners.append(ids)
        elif kind in ("quad", "polygon"):
            centre = add_centres(conn)
            k = conn.shape[1]
            for i in range(k):
                simplices.append(np.column_stack([conn[:, i], conn[:, (i + 1) % k], centre]))
                owners.append(ids)
        elif kind == "pyramid":
            pending.append((conn[:, [0, 3, 2, 1]], conn[:, 4], ids, block_faces[:, 0]))
        elif kind in ("hexahedron", "wedge"):
            centre = add_centres(conn)
            faces = _HEX_FACES if kind == "hexahedron" else _WEDGE_QUADS
            for j, f in enumerate(faces):
                pending.append((conn[:, list(f)], centre, ids, block_faces[:, j]))
            if kind == "wedge":
                for f in _WEDGE_TRIS:
                    simplices.append(np.column_stack([conn[:, list(f)], centre]))
                    owners.append(ids)
        else:  # pragma: no cover - the mesh model accepts no other type
            raise OptionError(f"no simplex split for cell type '{kind}'")
    if pending:
        faces = np.concatenate([p[0] for p in pending])
        apex = np.concatenate([p[1] for p in pending])
        own = np.concatenate([p[2] for p in pending])
        face_id = np.concatenate([p[3] for p in pending])
        # one centre per distinct face: the mesh's face numbering (cached per mesh) groups the
        # two sides of a face; the centre is the mean of its corners in sorted order
        first = np.zeros(int(face_id.max()) + 1, dtype=np.int64)
        seen = np.zeros(first.size, dtype=bool)
        seen[face_id] = True
        first[face_id[::-1]] = np.arange(face_id.size - 1, -1, -1)
        distinct = np.nonzero(seen)[0]
        compact = np.cumsum(seen) - 1
        corners = sort_small_rows(faces[first[distinct]])
        centre = add_centres(corners)[compact[face_id]]
        for i in range(4):
            simplices.append(np.column_stack([faces[:, i], faces[:, (i + 1) % 4], centre, apex]))
            owners.append(own)
    coordinates = np.concatenate([X] + extra_x) if extra_x else X
    vals = np.concatenate([values] + extra_v) if extra_v else values
    if simplices:
        simp = np.concatenate(simplices).astype(np.int64, copy=False)
        owner = np.concatenate(owners).astype(np.int64, copy=False)
    else:
        simp = np.zeros((0, dim + 1), dtype=np.int64)
        owner = np.zeros(0, dtype=np.int64)
    return SimplexSplit(coordinates, vals, simp, owner, tuple(centres))


def _table_diagonals(kind: str) -> list:
    """Per quad face of ``kind`` (``_HEX_FACES`` / ``_WEDGE_QUADS`` order), the local diagonal
    that the few-simplex table of :mod:`._simplices` cuts it along."""
    from ._simplices import _SPLIT

    faces = _HEX_FACES if kind == "hexahedron" else _WEDGE_QUADS
    out = []
    for f in faces:
        on = any(f[0] in t and f[2] in t for t in _SPLIT[kind])
        out.append((f[0], f[2]) if on else (f[1], f[3]))
    return out


#: wedge corner orders that bring local corner i to position 0 (rotations, then top and bottom swapped)
_WEDGE_TURNS = np.array([(0, 1, 2, 3, 4, 5), (1, 2, 0, 4, 5, 3), (2, 0, 1, 5, 3, 4),
                         (3, 4, 5, 0, 1, 2), (4, 5, 3, 1, 2, 0), (5, 3, 4, 2, 0, 1)])


def _wedge_min_vertex_split(conn: np.ndarray) -> list:
    """Three tetrahedra per wedge, each quad face cut along the diagonal through its lowest point id.

    The rule depends on global ids only, so two wedges sharing a face cut it
    alike. Returns three (n, 4) arrays of point ids.

    References
    ----------
    .. [1] Dompierre, J., Labbe, P., Vallet, M.-G. and Camarero, R. (1999), "How
       to subdivide pyramids, prisms and hexahedra into tetrahedra", 8th
       International Meshing Roundtable.
    """
    rows = np.arange(conn.shape[0])
    q = conn[rows[:, None], _WEDGE_TURNS[np.argmin(conn, axis=1)]]  # lowest id at corner 0
    via15 = np.minimum(q[:, 1], q[:, 5]) < np.minimum(q[:, 2], q[:, 4])
    first = np.where(via15[:, None], q[:, [0, 1, 2, 5]], q[:, [0, 1, 2, 4]])
    second = np.where(via15[:, None], q[:, [0, 1, 5, 4]], q[:, [0, 4, 2, 5]])
    return [first, second, q[:, [0, 4, 5, 3]]]


def _few_simplex_cells(mesh: Mesh) -> list:
    """Per block, True for hexahedra / wedges split by the fixed few-simplex table (cached per mesh).

    All hexahedra and wedges qualify when their quad faces are flat and every
    quad face shared is shared between two of them that cut it along the same
    diagonal (by global point ids), so the split stays conforming without face
    centres; otherwise none does (all keep the centred split). None for blocks
    of other types.
    """

    def compute():
        from ._simplices import _flat_cells

        kinds = [block.cell_type for block in mesh.blocks]
        if not any(kind in ("hexahedron", "wedge") for kind in kinds):
            return [None] * len(kinds)
        flat = _flat_cells(mesh)
        candidate = np.zeros(mesh.n_cells, dtype=bool)
        for b, (kind, start) in enumerate(zip(kinds, mesh.block_offsets[:-1])):
            if kind in ("hexahedron", "wedge"):
                candidate[start:start + len(mesh.blocks[b])] = flat[b]
        if candidate.any():
            candidate &= _diagonals_agree(mesh, candidate)
        return [candidate[start:start + len(block)].copy() if block.cell_type in ("hexahedron", "wedge") else None
                for block, start in zip(mesh.blocks, mesh.block_offsets[:-1])]

    return mesh.memo("few_simplex_cells", compute)


def _diagonals_agree(mesh: Mesh, candidate: np.ndarray) -> bool:
    """True when every quad face of a ``candidate`` cell is a boundary face or is shared by two
    candidates that cut it along the same diagonal (:func:`_few_simplex_cells`)."""
    face_ids = _quad_face_ids(mesh)
    n_faces = 1 + max(int(ids.max()) for ids in face_ids if ids is not None and ids.size)
    sides = np.zeros(n_faces, dtype=np.int64)  # cells around each quad face
    every = True  # every cell with a quad face is a candidate
    for ids, block, start in zip(face_ids, mesh.blocks, mesh.block_offsets[:-1]):
        if ids is not None:
            sides += np.bincount(ids.ravel(), minlength=n_faces)
            every = every and bool(candidate[start:start + len(block)].all())
    n_cand = sides if every else np.zeros(n_faces, dtype=np.int64)
    first = np.full(n_faces, -1, dtype=np.int64)
    occurrences = []  # (face ids, diagonal keys) of the quad faces of candidate cells
    n_pts = np.int64(max(mesh.n_points, 1))
    for b, (block, start) in enumerate(zip(mesh.blocks, mesh.block_offsets[:-1])):
        if block.cell_type not in ("hexahedron", "wedge"):
            continue
        chosen = candidate[start:start + len(block)]
        if not chosen.any():
            continue
        conn, ids = block.connectivity, face_ids[b]
        if not chosen.all():
            conn, ids = conn[chosen], ids[chosen]
        diagonals = _table_diagonals(block.cell_type)
        if block.cell_type == "hexahedron":  # the table's diagonals, in chunks (rows stay in cache)
            keys = np.empty((len(diagonals), conn.shape[0]), dtype=np.int64)
            for lo in range(0, conn.shape[0], 1 << 15):
                part = conn[lo:lo + (1 << 15)].astype(np.int64, copy=False)
                for j, (i, k) in enumerate(diagonals):
                    key = keys[j, lo:lo + (1 << 15)]
                    np.minimum(part[:, i], part[:, k], out=key)
                    key *= n_pts
                    key += np.maximum(part[:, i], part[:, k])
        for j, (i, k) in enumerate(diagonals):
            if block.cell_type == "wedge":  # the diagonal through the face's lowest point id
                corners = conn[:, list(_WEDGE_QUADS[j])].astype(np.int64)
                low = np.argmin(corners, axis=1)
                rows = np.arange(corners.shape[0])
                a, c = corners[rows, low], corners[rows, (low + 2) % 4]
                key = np.minimum(a, c) * n_pts + np.maximum(a, c)
            else:
                key = keys[j]
            face = np.ascontiguousarray(ids[:, j])
            if not every:
                n_cand += np.bincount(face, minlength=n_faces)
            first[face] = key
            occurrences.append((face, key))
    mismatch = np.zeros(n_faces, dtype=bool)
    for face, key in occurrences:
        mismatch[face[first[face] != key]] = True
    good = (sides == 1) | ((n_cand == 2) & ~mismatch)
    # a cell that cannot take the table would force its neighbours off it, and theirs,
    # layer by layer: all or nothing keeps this one pass
    return bool(np.all(good[n_cand > 0]))


def _quad_face_ids(mesh: Mesh) -> list:
    """Per block, the mesh face number of each quad face the split cones (cached per mesh).

    Hexahedra: the six faces of ``_HEX_FACES``; wedges: the three of ``_WEDGE_QUADS``;
    pyramids: the base; other types: None. Faces shared by two cells get one number
    (:meth:`Mesh.face_numbers`; int32 where it fits).
    """
    quads = {"hexahedron": slice(0, 6), "wedge": slice(2, 5), "pyramid": slice(0, 1)}

    def compute():
        if not any(block.cell_type in quads for block in mesh.blocks):
            return [None] * len(mesh.blocks)
        out = []
        for block, ids in zip(mesh.blocks, mesh.face_numbers()):
            if block.cell_type == "hexahedron":
                out.append(ids)  # all six faces: the mesh's own array
            elif block.cell_type in quads:
                out.append(np.ascontiguousarray(ids[:, quads[block.cell_type]]))
            else:
                out.append(None)
        return out

    return mesh.memo("quad_face_ids", compute)


def _corner_extremes(mesh: Mesh, values: np.ndarray):
    """Per-cell min and max of the corner values (NaN when any corner is NaN)."""
    lo = np.empty(mesh.n_cells)
    hi = np.empty(mesh.n_cells)
    size = 1 << 15
    for block, start in zip(mesh.blocks, mesh.block_offsets[:-1]):
        conn = block.connectivity
        for first in range(0, len(block), size):
            # rows in chunks, then column by column: faster than a reduction over axis 1
            v = values[conn[first:first + size]]
            rows = slice(int(start) + first, int(start) + first + v.shape[0])
            low, high = lo[rows], hi[rows]
            np.minimum(v[:, 0], v[:, 1], out=low)
            np.maximum(v[:, 0], v[:, 1], out=high)
            for j in range(2, v.shape[1]):
                np.minimum(low, v[:, j], out=low)
                np.maximum(high, v[:, j], out=high)
    return lo, hi


#: corner extremes of the values last contoured on the simplex path, kept for the width
#: integrals of the same step (one entry; taken by :func:`_recall_extremes`)
_RECENT: list = [None]


def _checksum(values: np.ndarray) -> tuple:
    """The plain sum and a position-weighted sum: an in-place change (a swap, a shift that keeps
    the total) that leaves both unchanged by accident is not a practical risk."""
    flat = values.reshape(-1)
    with np.errstate(invalid="ignore", over="ignore"):
        return (float(np.add.reduce(flat)), dot(flat, np.arange(1.0, flat.size + 1.0)))


def _remember_extremes(mesh: Mesh, values: np.ndarray, lo: np.ndarray, hi: np.ndarray) -> None:
    """Keep ``_corner_extremes(mesh, values)`` for a later :func:`_recall_extremes` of the same array."""
    _RECENT[0] = (weakref.ref(mesh), weakref.ref(values), values.shape, _checksum(values), lo, hi)


def _recall_extremes(mesh: Mesh, values: np.ndarray):
    """(lo, hi) remembered for this very mesh and array of unchanged values, else None; forgets them."""
    entry, _RECENT[0] = _RECENT[0], None
    if entry is None:
        return None
    mesh_ref, values_ref, shape, checksum, lo, hi = entry
    if mesh_ref() is not mesh or values_ref() is not values or values.shape != shape:
        return None
    now = _checksum(values)
    if not all(a == b or (np.isnan(a) and np.isnan(b)) for a, b in zip(now, checksum)):
        return None
    return lo, hi


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


def _march_simplices(split: SimplexSplit, level: float, dim: int):
    """Contour elements of the linear field on each simplex.

    Returns edge endpoints (e, 2) of every element vertex, element vertex
    slots (k, dim) into those edges, and the owner cell of each element.
    """
    S = split.simplices
    v = split.values[S]
    above = v > level
    count = above.sum(axis=1)
    cut = (count > 0) & (count < dim + 1)
    S, above, count, owner = S[cut], above[cut], count[cut], split.owner[cut]
    X = split.coordinates
    edges_list, elem_owner = [], []
    if dim == 2:
        lone = np.where((count == 1)[:, None], above, ~above)
        perm = np.argsort(~lone, axis=1, kind="stable")
        P = np.take_along_axis(S, perm, axis=1)  # lone vertex first
        e = np.stack([P[:, [0, 1]], P[:, [0, 2]]], axis=1)  # (k, 2 vertices, 2 ends)
        lone_up = (count == 1)
        up = X[P[:, 0]] - 0.5 * (X[P[:, 1]] + X[P[:, 2]])
        up[~lone_up] *= -1
        edges_list.append((e, up))
        elem_owner.append(owner)
    else:
        single = count != 2
        lone = np.where((count == 1)[:, None], above, ~above)
        Ss, lone_s = S[single], lone[single]
        perm = np.argsort(~lone_s, axis=1, kind="stable")
        P = np.take_along_axis(Ss, perm, axis=1)
        e = np.stack([P[:, [0, 1]], P[:, [0, 2]], P[:, [0, 3]]], axis=1)
        up = X[P[:, 0]] - X[P[:, 1:]].mean(axis=1)
        up[count[single] == 3] *= -1
        edges_list.append((e, up))
        elem_owner.append(owner[single])
        Sd, above_d = S[~single], above[~single]
        perm = np.argsort(~above_d, axis=1, kind="stable")
        P = np.take_along_axis(Sd, perm, axis=1)  # a, b above; c, d below
        a, b, c, d = P[:, 0], P[:, 1], P[:, 2], P[:, 3]
        ac, ad, bd, bc = (np.stack(p, axis=1) for p in ((a, c), (a, d), (b, d), (b, c)))
        up = 0.5 * (X[a] + X[b]) - 0.5 * (X[c] + X[d])
        od = owner[~single]
        edges_list.append((np.stack([ac, ad, bd], axis=1), up))
        edges_list.append((np.stack([ac, bd, bc], axis=1), up))
        elem_owner.extend([od, od])
    E = np.concatenate([e for e, _ in edges_list])       # (k, dim, 2)
    UP = np.concatenate([u for _, u in edges_list])      # (k, dim)
    owner = np.concatenate(elem_owner)
    return E, UP, owner


def _find_on_simplices(mesh: Mesh, c: np.ndarray, level: float) -> Contour:
    lo, hi = _corner_extremes(mesh, c)
    _remember_extremes(mesh, c, lo, hi)
    active = np.isfinite(lo) & np.isfinite(hi) & (hi > level) & (lo <= level)
    if not active.any():
        return _empty(mesh)
    split = split_cells(mesh, c, active)
    dim = mesh.dimension
    E, UP, owner = _march_simplices(split, level, dim)
    if E.shape[0] == 0:
        return _empty(mesh)
    ends = E.reshape(-1, 2)
    n_vertices = np.int64(split.coordinates.shape[0])
    key = np.minimum(ends[:, 0], ends[:, 1]) * n_vertices + np.maximum(ends[:, 0], ends[:, 1])
    unique, inverse = np.unique(key, return_inverse=True)  # same order as sorting the edge rows
    inverse = inverse.ravel()
    X, v = split.coordinates, split.values
    p, q = unique // n_vertices, unique % n_vertices
    t = (level - v[p]) / (v[q] - v[p])
    pts = X[p] + t[:, None] * (X[q] - X[p])
    elements = inverse.reshape(E.shape[0], dim)
    # orientation: 2D phase on the left; 3D normals towards lower c
    P = pts[elements]
    if dim == 2:
        tvec = P[:, 1] - P[:, 0]
        flip = (tvec[:, 0] * UP[:, 1] - tvec[:, 1] * UP[:, 0]) < 0
        elements[flip] = elements[flip][:, ::-1]
    else:
        n = np.cross(P[:, 1] - P[:, 0], P[:, 2] - P[:, 0])
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
    from ._interface_width import cell_gradient

    g = cell_gradient(mesh, c, cells=contour.cells)
    g3 = np.zeros((g.shape[0], 3))
    g3[:, list(mesh.plane_axes)] = g
    flip = np.einsum("ij,ij->i", contour.normals, g3) > 0
    if not flip.any():
        return contour
    elements = contour.elements.copy()
    elements[flip] = elements[flip][:, ::-1] if contour.dimension == 2 else elements[flip][:, [0, 2, 1]]
    return Contour(contour.points, elements, contour.cells, contour.dimension, contour.plane_axes)


# --------------------------------------------------------------------------- public entry

def find_interface(mesh: Mesh, c_point, *, level: float = 0.5, method: str = "auto") -> Contour:
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

    Returns
    -------
    Contour
        Segments (2D) or triangles (3D); empty when c does not cross the level.

    Raises
    ------
    OptionError
        Wrong shape of ``c_point``, a non-finite level, an unknown method, or
        ``grid`` on a mesh that is not a regular grid.

    Notes
    -----
    Point values are interpolated linearly along cell edges (both paths) and
    inside the simplices of :func:`split_cells` (cells path), so the contour
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
    use_grid = method == "grid" or (method == "auto" and mesh.regular_grid is not None
                                     and bool(np.all(np.isfinite(c))))
    if use_grid:
        return _find_on_grid(mesh, c, level)
    return _find_on_simplices(mesh, c, level)
