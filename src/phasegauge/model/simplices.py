"""Cells as triangles and tetrahedra: the one conforming split, and what is read from it.

Contours, width integrals, plane sections, box clipping and resampling all work on the
piecewise-linear interpolant of point values on one split of the cells into simplices
(:func:`split_cells`). The split conforms: a face shared by two cells is cut into the same
triangles from both sides, so the interpolant is continuous across cells and the split
leaves neither gaps nor overlaps.

How each cell is split (tables in :mod:`._split_tables`):

* triangles and tetrahedra stay whole; quads and polygons split along diagonals from
  corner 0 or, with ``quads='centre'``, about their corner mean (both conform in 2D,
  where edges are never split);
* hexahedra, wedges and pyramids take the few-simplex table (6, 3 and 2 tetrahedra)
  when each of their quad faces is flat and is cut along the same diagonal by the
  cell on its other side (or is on the boundary);
* a quad face that is bent, flat but cut by its table along a diagonal that runs outside
  it (a reflex corner), or whose two sides' tables cut it along different
  diagonals, is cut along its shorter diagonal (:mod:`._face_diagonals`: both sides
  compare the same two lengths of the same four points, so they agree); where the two
  diagonals tie, or where a triangle of that cut would make a tetrahedron turned against
  its cell's others, it gets a face centre and is split in four about it. A hexahedron or
  wedge with such a face is coned from its cell centre to all of its face triangles
  (12 tetrahedra for a hexahedron; its other quad faces cut along the diagonal both
  sides' tables use), a pyramid from its apex (2 tetrahedra).

A centre carries the mean of its corners, coordinates and values alike: the bilinear
/ trilinear value there, so a linear field is reproduced exactly. Which cells are coned
and how their faces are cut depends on the mesh only: worked out once per mesh
(:meth:`Mesh.memo`), so a series pays for it once. Every choice reads local corner
orders, flatness, coordinates and which points a diagonal joins, never the numbers a file
gives its points or cells: renumbering either leaves the split (and every result) unchanged.

References
----------
.. [1] Dompierre, J., Labbe, P., Vallet, M.-G. and Camarero, R. (1999), "How to
   subdivide pyramids, prisms and hexahedra into tetrahedra", 8th International
   Meshing Roundtable (splits of these cells, and when they conform across faces).
"""

from __future__ import annotations

from dataclasses import dataclass
from functools import cached_property

import numpy as np

from .corners import corner_mean
from ._face_diagonals import diagonal_triangles, shorter_diagonals, turned_faces
from ._grouping import group_columns, group_numbers, sort_small_rows
from ._split_tables import CONED_TYPES, TABLE, TABLE_DIAGONALS
from .cells import FACES
from ._threads import ordered_map
from ._simplex_geometry import clip_simplices, simplex_measures  # noqa: F401  (the split's public names)
from .mesh import Mesh

__all__ = ["SimplexSplit", "split_cells", "needs_centres", "grid_corner_steps", "simplex_measures", "clip_simplices"]

#: a quad face is flat when its corners' volume is below this share of its size cubed
_FLAT = 1e-10
#: rows per chunk of the mesh-only passes (the temporaries stay in cache: 1 << 15 was 27 % slower
#: in the split plan of 1M jittered hexahedra)
_CHUNK = 1 << 13


# --------------------------------------------------------------------------- the split plan

def _flat_faces(cell_type: str, X) -> np.ndarray:
    """True per quad face (in ``FACES`` order, quads only) whose four corners lie in a plane.

    ``X``: corner coordinates, an array (n, k, 3), or per corner the list of its three
    coordinate arrays (n,). Returns a bool array (n, number of quad faces).
    """
    P = [[X[:, j, i] for i in range(3)] for j in range(X.shape[1])] if isinstance(X, np.ndarray) else X
    quads = [face for face in FACES[cell_type] if len(face) == 4]
    flat = np.empty((P[0][0].shape[0], len(quads)), dtype=bool)
    for q, face in enumerate(quads):
        p0, p1, p2, p3 = (P[j] for j in face)
        e1 = [p1[i] - p0[i] for i in range(3)]
        e2 = [p2[i] - p0[i] for i in range(3)]
        e3 = [p3[i] - p0[i] for i in range(3)]
        # e1 . (e2 x e3), term by term as np.cross and a dot product form it
        volume = np.abs(e1[0] * (e2[1] * e3[2] - e2[2] * e3[1]) + e1[1] * (e2[2] * e3[0] - e2[0] * e3[2])
                        + e1[2] * (e2[0] * e3[1] - e2[1] * e3[0]))
        size = e2[0] * e2[0] + e2[1] * e2[1] + e2[2] * e2[2]
        size *= np.sqrt(size)  # |e2| cubed (as ** 1.5, without the power function)
        flat[:, q] = volume <= _FLAT * size
    return flat


def _quad_positions(cell_type: str) -> list:
    return [j for j, face in enumerate(FACES[cell_type]) if len(face) == 4]


def _diagonal_keys(cell_type: str, conn: np.ndarray, n_points: int) -> np.ndarray:
    """Per cell and quad face (n, number of quad faces), the diagonal its split cuts the face along,
    as ``low id * n_points + high id`` of the diagonal's ends."""
    conn = conn.astype(np.int64, copy=False)
    positions = _quad_positions(cell_type)
    keys = np.empty((conn.shape[0], len(positions)), dtype=np.int64)
    for q, j in enumerate(positions):
        i, k = TABLE_DIAGONALS[cell_type][j]
        a, c = conn[:, i], conn[:, k]
        key = keys[:, q]
        np.minimum(a, c, out=key)
        key *= n_points
        key += np.maximum(a, c)
    return keys


def grid_corner_steps(mesh: Mesh) -> np.ndarray | None:
    """Grid-index steps (8,) from a cell's lowest grid point to its VTK corners, or None (cached per mesh).

    Not None for a 3D regular grid (:attr:`Mesh.regular_grid`) whose hexahedra all
    list their corners in the VTK order from their lowest grid corner, and whose
    points lie exactly on the grid axes: every cell is then a translate of the others
    in index space with exactly flat faces, so the table cuts each shared face along
    the same diagonal from both sides (no face numbering needed to know it).
    """

    def compute():
        grid = mesh.regular_grid
        if mesh.dimension != 3 or grid is None or mesh.n_cells == 0:
            return None
        shape = grid.point_shape
        offsets = np.array([(0, 0, 0), (1, 0, 0), (1, 1, 0), (0, 1, 0),
                            (0, 0, 1), (1, 0, 1), (1, 1, 1), (0, 1, 1)])
        steps = offsets @ np.array([shape[1] * shape[2], shape[2], 1])
        start = 0
        for block in mesh.blocks:
            cells = grid.cell_index[start:start + len(block)]
            start += len(block)
            base = np.ravel_multi_index(np.unravel_index(cells, grid.cell_shape), shape)
            for corner, step in enumerate(steps):
                if not np.array_equal(grid.point_index[block.connectivity[:, corner]], base + step):
                    return None
        index = np.unravel_index(grid.point_index, shape)
        for d, axis_values in enumerate(grid.axes):
            if not np.array_equal(mesh.coordinates[:, d], axis_values[index[d]]):
                return None
        return steps

    return mesh.memo("grid_corner_steps", compute)


@dataclass(frozen=True)
class _ConedCells:
    """Of one block: which cells are coned, and per cell how each quad face is cut.

    A quad face of a coned cell is cut along its face corners 1-3 where ``along13`` is set,
    else along 0-2 (corners in ``FACES`` order), unless it gets a centre (``centred``).
    """

    coned: np.ndarray  # (n,) bool
    centred: np.ndarray  # (n, number of quad faces) bool
    along13: np.ndarray  # (n, number of quad faces) bool


def _table13(cell_type: str) -> np.ndarray:
    """Per quad face (``FACES`` order, quads only): whether the table cuts it along face corners 1-3."""
    return np.array([TABLE_DIAGONALS[cell_type][j] != (FACES[cell_type][j][0], FACES[cell_type][j][2])
                     for j in _quad_positions(cell_type)])


def _plan_cells(mesh: Mesh, *, threads: int = 1) -> dict | None:
    """What the split plan reads of each cell alone, before any face is numbered (None: no cell
    to plan, or a grid in table order).

    Per block of hexahedra, wedges or pyramids (by ``id(block)``), four (n, quad faces) bool
    arrays: a face cut as a bent one (bent, or flat with a table diagonal running outside it),
    its shorter diagonal (face corners 1-3?), a tie of the two, and a triangle of the shorter cut
    turning a tetrahedron. Needs no face numbers, so a new mesh makes it beside its faces
    (:func:`._threads.prepare_mesh`). ``threads``: chunks of cells side by side (each writes its
    own rows).
    """
    kinds = [block.cell_type for block in mesh.blocks]
    if mesh.dimension != 3 or not any(kind in CONED_TYPES for kind in kinds):
        return None
    if grid_corner_steps(mesh) is not None:  # a grid in table order: every face flat, cut alike
        return None
    columns = [np.ascontiguousarray(mesh.coordinates[:, i]) for i in range(3)]
    cells = {id(block): tuple(np.empty((len(block), len(_quad_positions(kind))), dtype=bool) for _ in range(4))
             for kind, block in zip(kinds, mesh.blocks) if kind in CONED_TYPES}
    chunks = [(kind, block, lo) for kind, block in zip(kinds, mesh.blocks)
              if kind in CONED_TYPES for lo in range(0, len(block), _CHUNK)]  # temporaries stay in cache

    def plan_chunk(chunk):
        kind, block, lo = chunk
        bent, along13, tie, turns = (a[lo:lo + _CHUNK] for a in cells[id(block)])
        part = block.connectivity[lo:lo + _CHUNK]
        corners = [[x[part[:, j]] for x in columns] for j in range(part.shape[1])]
        flat = _flat_faces(kind, corners)
        along13[:], tie[:] = shorter_diagonals(kind, corners)
        turns[:] = turned_faces(kind, corners, along13)
        # a flat face whose table diagonal runs outside it (a reflex corner, as strong jitter
        # makes on a boundary) would turn a tetrahedron: it is treated as bent
        np.logical_not(flat, out=bent)
        some = np.flatnonzero(flat.any(axis=1))  # (on a jittered mesh the boundary cells only)
        if some.size:
            picked = [[x[some] for x in corner] for corner in corners]
            table = np.broadcast_to(_table13(kind), (some.size, flat.shape[1]))
            bent[some] |= flat[some] & turned_faces(kind, picked, table)

    for _ in ordered_map(plan_chunk, chunks, threads=threads):
        pass
    return cells


def _split_plan(mesh: Mesh, *, threads: int = 1, cells: dict | None = None) -> list:
    """Per block, None (every cell takes the table) or its :class:`_ConedCells` (cached per mesh).

    A quad face that is bent (seen so from either side), flat but cut by the table along a
    diagonal that runs outside it (a tetrahedron would turn), or that the two cells sharing it
    cut along different diagonals, is cut along its shorter diagonal (a centre where the two
    tie or a triangle would turn a tetrahedron: :mod:`._face_diagonals`); a cell with such a
    face is coned. Blocks of other types: None. ``cells``: :func:`_plan_cells` of the mesh when
    made already (it is then consumed).
    ``threads``: threads that go through the cells when the plan is made (chunks of cells side
    by side; the plan is the same on any number: each chunk only marks faces and writes its own
    diagonals and its own cells' shorter diagonals, and whichever side's diagonal a shared face
    keeps, the other side's differs exactly when the two sides differ).
    """

    def compute():
        kinds = [block.cell_type for block in mesh.blocks]
        planned = _plan_cells(mesh, threads=threads) if cells is None else cells
        if planned is None:
            return [None] * len(kinds)
        numbers = mesh.face_numbers()
        n_faces = 1 + max(int(ids.max()) for ids, kind in zip(numbers, kinds)
                          if kind in CONED_TYPES and ids.size)
        centred = np.zeros(n_faces, dtype=bool)  # bent faces, then also those cut two ways
        turned = np.zeros(n_faces, dtype=bool)  # faces whose shorter diagonal's triangles turn a tetrahedron
        last = np.full(n_faces, -1, dtype=np.int64)
        n_points = np.int64(max(mesh.n_points, 1))
        chunks = [(kind, block, ids, lo) for kind, block, ids in zip(kinds, mesh.blocks, numbers)
                  if kind in CONED_TYPES for lo in range(0, len(block), _CHUNK)]  # temporaries stay in cache

        def bent_faces_and_diagonals(chunk):
            kind, block, ids, lo = chunk
            bent, _, _, turns = (a[lo:lo + _CHUNK] for a in planned[id(block)])
            keys = _diagonal_keys(kind, block.connectivity[lo:lo + _CHUNK], n_points)
            for q, j in enumerate(_quad_positions(kind)):
                face = ids[lo:lo + _CHUNK, j]
                centred[face[bent[:, q]]] = True
                turned[face[turns[:, q]]] = True
                last[face] = keys[:, q]

        def cut_two_ways(chunk):  # a face whose other side wrote another diagonal
            kind, block, ids, lo = chunk
            keys = _diagonal_keys(kind, block.connectivity[lo:lo + _CHUNK], n_points)
            for q, j in enumerate(_quad_positions(kind)):
                face = ids[lo:lo + _CHUNK, j]
                centred[face[last[face] != keys[:, q]]] = True

        for work in (bent_faces_and_diagonals, cut_two_ways):  # the second pass reads what the first wrote
            for _ in ordered_map(work, chunks, threads=threads):
                pass
        last = None  # (8 bytes a face, let go)
        out = []
        for kind, block, ids in zip(kinds, mesh.blocks, numbers):
            if kind not in CONED_TYPES:
                out.append(None)
                continue
            faces = centred[ids[:, _quad_positions(kind)]]  # bent or cut two ways: the shorter diagonal
            coned = faces.any(axis=1)
            if not coned.any():
                out.append(None)
                continue
            _, along13, tie, _ = planned[id(block)]
            np.copyto(along13, _table13(kind), where=~faces)  # the other faces: the diagonal both tables use
            out.append(_ConedCells(coned, faces & (tie | turned[ids[:, _quad_positions(kind)]]), along13))
        return out

    return mesh.memo("simplex_split_plan", compute)


# --------------------------------------------------------------------------- the split

@dataclass(frozen=True, eq=False)
class SimplexSplit:
    """Simplices covering a set of cells, with the piecewise-linear field on them.

    Attributes
    ----------
    points : ndarray of shape (n_points, dim)
        The mesh's analysis coordinates (:attr:`Mesh.coordinates`), the first vertices.
    simplices : ndarray of shape (n_simplices, dim + 1), int64
        Vertex ids of each triangle (2D) or tetrahedron (3D): below ``n_points``
        a mesh point, from there on an added centre.
    owner : ndarray of shape (n_simplices,), int64
        The mesh cell each simplex belongs to.
    centres : tuple of (ids, corners) pairs
        The added vertices: ``ids`` (n,) their vertex ids, consecutive from
        ``n_points`` on; ``corners`` (n, k) the mesh points whose mean they are
        (coordinates and values alike). Empty when the split added none.
    point_values : ndarray of shape (n_points,), optional
        Values at the mesh points (c), when the split was asked for them.
    """

    points: np.ndarray
    simplices: np.ndarray
    owner: np.ndarray
    centres: tuple = ()
    point_values: np.ndarray | None = None

    @property
    def n_points(self) -> int:
        return int(self.points.shape[0])

    @property
    def n_vertices(self) -> int:
        """Mesh points and added centres."""
        return self.n_points + sum(int(ids.size) for ids, _ in self.centres)

    @cached_property
    def coordinates(self) -> np.ndarray:
        """Coordinates of every vertex, shape (n_vertices, dim)."""
        return self.centre_means(self.points)

    @cached_property
    def values(self) -> np.ndarray | None:
        """``point_values`` at every vertex, shape (n_vertices,); None without them."""
        return None if self.point_values is None else self.centre_means(self.point_values)

    def centre_means(self, point_values: np.ndarray) -> np.ndarray:
        """Values at every vertex from values at the mesh points, centres as their corners' means.

        ``point_values`` has shape (n_points,) or (n_points, q); the result
        (n_vertices,) or (n_vertices, q). Without centres, ``point_values`` itself.
        """
        if not self.centres:
            return point_values
        return np.concatenate([point_values] + [corner_mean(point_values, corners) for _, corners in self.centres])

    def corner_values(self, point_values: np.ndarray) -> np.ndarray:
        """Values at the corners of every simplex, shape (n_simplices, dim + 1) + ``point_values.shape[1:]``.

        The centres' values are formed for the centres only (no copy of ``point_values``).
        """
        return self.at_vertices(point_values, self.simplices)

    def added_values(self, point_values: np.ndarray) -> np.ndarray:
        """Values at the added centres only, shape (n_vertices - n_points,) + ``point_values.shape[1:]``:
        their corners' means (the rows :meth:`centre_means` appends)."""
        return np.concatenate([corner_mean(point_values, corners) for _, corners in self.centres])

    def at_vertices(self, point_values: np.ndarray, ids: np.ndarray, added: np.ndarray | None = None) -> np.ndarray:
        """``centre_means(point_values)[ids]`` without the table of every vertex: the same numbers.

        ``ids`` (any shape) are vertex ids; ``added`` the centres' values if formed already
        (:meth:`added_values`). The result has shape ``ids.shape + point_values.shape[1:]``.
        """
        if not self.centres:
            return point_values[ids]
        if added is None:
            added = self.added_values(point_values)
        n = self.n_points
        extra = ids >= n
        out = point_values[np.where(extra, 0, ids)]
        out[extra] = added[ids[extra] - n]
        return out

    @property
    def measures(self) -> np.ndarray:
        """Unsigned simplex areas / volumes, shape (n_simplices,)."""
        return simplex_measures(self.corner_values(self.points))


def _block_rows(mesh: Mesh, cells) -> list:
    """Per block, the local rows of the wanted cells (None: all of them)."""
    offsets = mesh.block_offsets
    if cells is None:
        return [None] * len(mesh.blocks)
    chosen = np.asarray(cells)
    if chosen.dtype == bool:
        if chosen.shape != (mesh.n_cells,):
            raise ValueError(f"a cell mask needs shape ({mesh.n_cells},), found {chosen.shape}")
        out = []
        for start, stop in zip(offsets[:-1], offsets[1:]):
            keep = chosen[start:stop]
            out.append(None if keep.all() else np.flatnonzero(keep))
        return out
    chosen = chosen.astype(np.int64, copy=False)
    bounds = np.searchsorted(chosen, offsets)
    return [chosen[a:z] - start for a, z, start in zip(bounds[:-1], bounds[1:], offsets[:-1])]


class _Pieces:
    """The simplices, owners and added centres of a split, as they are built."""

    def __init__(self, n_points: int):
        self.n_points, self.n_added = n_points, 0
        self.simplices, self.owners, self.centres = [], [], []

    def add(self, nodes: np.ndarray, owner: np.ndarray) -> None:
        self.simplices.append(nodes)
        self.owners.append(owner)

    def add_centres(self, corners: np.ndarray) -> np.ndarray:
        ids = self.n_points + self.n_added + np.arange(corners.shape[0])
        self.n_added += corners.shape[0]
        self.centres.append((ids, corners))
        return ids


def split_cells(mesh: Mesh, cells=None, *, values=None, quads: str = "diagonal") -> SimplexSplit:
    """Split the cells (or some of them) into triangles or tetrahedra, conforming across faces.

    Parameters
    ----------
    mesh : Mesh
    cells : ndarray, optional
        The cells to split: a mask of shape (n_cells,), or cell indices in
        increasing order; default all.
    values : ndarray of shape (n_points,), optional
        Point values to carry (:attr:`SimplexSplit.values`, centres as their
        corners' means).
    quads : {'diagonal', 'centre'}
        2D cells: quads split along the diagonal 0-2 and polygons in a fan from
        corner 0, or both about their corner mean (quads in four triangles;
        no diagonal is preferred). 3D cells are split as the module notes say.

    Returns
    -------
    SimplexSplit
        Per block, the table's simplices first (simplex by simplex, each over
        the block's cells), then those of coned cells; the simplices about face
        centres (quad faces whose diagonals tie, or whose diagonal would turn a
        tetrahedron) last. Face centres are shared by the cells on both sides.

    Raises
    ------
    ValueError
        An unknown ``quads`` or a mask of the wrong shape.
    """
    if quads not in ("diagonal", "centre"):
        raise ValueError(f"quads must be 'diagonal' or 'centre', not {quads!r}")
    plan = _split_plan(mesh) if mesh.dimension == 3 else [None] * len(mesh.blocks)
    pieces = _Pieces(mesh.n_points)
    pending = []  # centred quad faces: (corners (n, 4), apex ids (n,), owners (n,), face numbers (n,))
    for b, (block, start, rows) in enumerate(zip(mesh.blocks, mesh.block_offsets[:-1], _block_rows(mesh, cells))):
        conn = block.connectivity if rows is None else block.connectivity[rows]
        ids = start + (np.arange(len(block)) if rows is None else rows)
        if len(ids) == 0:
            continue
        kind = block.cell_type
        if kind in ("triangle", "tetra"):
            pieces.add(conn, ids)
        elif kind in ("quad", "polygon"):
            k = conn.shape[1]
            if quads == "centre":
                centre = pieces.add_centres(conn)
                for i in range(k):
                    pieces.add(np.column_stack([conn[:, i], conn[:, (i + 1) % k], centre]), ids)
            else:
                for local in (TABLE["quad"] if kind == "quad" else [(0, i, i + 1) for i in range(1, k - 1)]):
                    pieces.add(conn[:, list(local)], ids)
        elif kind in CONED_TYPES:
            coned = None if plan[b] is None else (plan[b].coned if rows is None else plan[b].coned[rows])
            if coned is not None and not coned.any():
                coned = None
            if coned is None or not coned.all():
                conn_t, ids_t = (conn, ids) if coned is None else (conn[~coned], ids[~coned])
                for local in TABLE[kind]:
                    pieces.add(conn_t[:, list(local)], ids_t)
            if coned is not None:
                local = np.flatnonzero(coned) if rows is None else rows[coned]
                pending += _cone(mesh, b, local, conn[coned], ids[coned], plan[b], pieces)
        else:  # pragma: no cover - the mesh model accepts no other type
            raise ValueError(f"no simplex split for cell type '{kind}'")
    if pending:
        _split_centred_faces(pending, pieces)
    if pieces.simplices:
        simplices = np.concatenate(pieces.simplices).astype(np.int64, copy=False)
        owner = np.concatenate(pieces.owners).astype(np.int64, copy=False)
    else:
        simplices = np.zeros((0, mesh.dimension + 1), dtype=np.int64)
        owner = np.zeros(0, dtype=np.int64)
    point_values = None if values is None else np.asarray(values)
    return SimplexSplit(mesh.coordinates, simplices, owner, tuple(pieces.centres), point_values)


def _cone(mesh: Mesh, b: int, local: np.ndarray, conn: np.ndarray, ids: np.ndarray, plan: _ConedCells,
          pieces: _Pieces) -> list:
    """Cone coned cells of block ``b`` (rows ``local``): hexahedra and wedges from an added cell
    centre, pyramids from the apex, to two triangles per quad face (cut along the diagonal
    ``plan`` names). Returns the quad faces that get a centre for :func:`_split_centred_faces`."""
    kind = mesh.blocks[b].cell_type
    numbers = mesh.face_numbers()[b][local]
    along13 = plan.along13[local]
    if kind == "pyramid":  # coned only when its base is cut otherwise than by the table
        apex = conn[:, 4]
        centre = None
    else:
        centre = pieces.add_centres(conn)
    pending = []
    q = 0
    for j, face in enumerate(FACES[kind]):
        F = conn[:, list(face)]
        if len(face) == 3:
            if centre is not None:  # (a pyramid's triangles hold its apex)
                pieces.add(np.column_stack([F, centre]), ids)
            continue
        top = apex if centre is None else centre
        on = plan.centred[local, q]
        cut = along13[:, q]
        q += 1
        if on.any():
            pending.append((F[on], top[on], ids[on], numbers[on, j]))
            off = ~on
            F, top, own, cut = F[off], top[off], ids[off], cut[off]
        else:  # usually: no masked copies
            own = ids
        for triangle in diagonal_triangles(F, cut):
            pieces.add(np.column_stack([triangle, top]), own)
    return pending


def _split_centred_faces(pending: list, pieces: _Pieces) -> None:
    """Four tetrahedra per centred quad face and cell: a face triangle about the shared face
    centre, joined to the cell's apex (its centre, or a pyramid's top)."""
    faces = np.concatenate([p[0] for p in pending])
    apex = np.concatenate([p[1] for p in pending])
    own = np.concatenate([p[2] for p in pending])
    face_id = np.concatenate([p[3] for p in pending])
    # one centre per distinct face: the mesh's face numbering groups the two sides of a face;
    # the centre is the mean of its corners in sorted order (the same from either side)
    n_ids = int(face_id.max()) + 1
    if 8 * face_id.size < n_ids:  # a few of the mesh's faces: sort them rather than sweep all ids
        # np.unique's first indices and inverse, by one packed stable sort (4-7x faster)
        order, starts = group_columns([face_id])
        first = order[starts]
        slot = group_numbers(order, starts)
        centre = pieces.add_centres(sort_small_rows(faces[first]))[slot]
    else:
        first = np.zeros(n_ids, dtype=np.int64)
        seen = np.zeros(first.size, dtype=bool)
        seen[face_id] = True
        first[face_id[::-1]] = np.arange(face_id.size - 1, -1, -1)
        distinct = np.nonzero(seen)[0]
        compact = np.cumsum(seen) - 1
        centre = pieces.add_centres(sort_small_rows(faces[first[distinct]]))[compact[face_id]]
    for i in range(4):
        pieces.add(np.column_stack([faces[:, i], faces[:, (i + 1) % 4], centre, apex]), own)


def needs_centres(mesh: Mesh, cells: np.ndarray, *, quads: str = "diagonal") -> bool:
    """True when :func:`split_cells` of these ``cells`` (as there) does not cut every cell by its
    table alone: it adds centres (face centres, a coned cell's centre) or cones a pyramid from its
    apex."""
    plan = _split_plan(mesh) if mesh.dimension == 3 else [None] * len(mesh.blocks)
    for block, rows, coned in zip(mesh.blocks, _block_rows(mesh, cells), plan):
        if rows is not None and rows.size == 0:
            continue
        if quads == "centre" and block.cell_type in ("quad", "polygon"):
            return True
        if coned is not None and (coned.coned.any() if rows is None else coned.coned[rows].any()):
            return True
    return False
