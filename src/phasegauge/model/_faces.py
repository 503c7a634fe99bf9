"""Faces and edges of a mesh's cells: face rows, their grouping into shared and boundary faces, numbers.

What :class:`~phasegauge.model.mesh.Mesh` reads its face topology from (``face_pairs``,
``boundary_faces``, ``face_numbers``, ``edges``): every face of every cell as sorted corner
columns, grouped by packed sorts (``_grouping``); on a regular grid of hexahedra the faces are
numbered by their grid position instead. Functions of the mesh; the mesh caches their results.
"""

from __future__ import annotations

from typing import TYPE_CHECKING

import numpy as np

from ._grouping import CHUNK, grid_face_ids, group_columns, index_dtype, sort_columns, sort_small_rows, unique_ints
from .cells import EDGES, FACES

if TYPE_CHECKING:
    from .mesh import CellBlock, Mesh

__all__ = ["local_faces", "face_rows", "row_owners", "face_topology", "face_pairs", "split_face_topology",
           "SPLIT_FACES", "grid_face_numbers", "grouped_faces", "unique_edges", "cell_adjacency"]


def local_faces(block: CellBlock) -> list:
    """Local corner lists of the faces (3D) or edges (2D) of a block's cells."""
    if block.cell_type == "polygon":
        k = block.connectivity.shape[1]
        return [(i, (i + 1) % k) for i in range(k)]
    return FACES[block.cell_type]


def face_rows(mesh: Mesh):
    """Every face of every cell as sorted corner columns, block after block, face after face.

    Returns ``(columns, row_starts)``: ``columns`` w equal-length arrays (w = 4 in 3D,
    triangles with -1 in the first; 2 in 2D; the first is left out when every face is a
    triangle), the corners of each row in increasing order; ``row_starts`` the first row of
    each block. Row ``row_starts[b] + j * n_b + i`` is local face j of cell i of block b.
    """
    sizes = [len(f) for b in mesh.blocks for f in local_faces(b)]
    width = 2 if mesh.dimension == 2 else (3 if max(sizes) == 3 else 4)
    counts = [len(b) * len(local_faces(b)) for b in mesh.blocks]
    row_starts = np.concatenate([[0], np.cumsum(counts)]).astype(np.int64)
    dtype = index_dtype(mesh.n_points + 1)
    shape = (width, int(row_starts[-1]))
    # -1 pads the triangles of a table with quads; a table of one face size is filled whole
    columns = np.full(shape, -1, dtype=dtype) if min(sizes, default=width) < width else np.empty(shape, dtype)
    for block, start in zip(mesh.blocks, row_starts[:-1]):
        n = len(block)
        for lo in range(0, n, _ROW_CHUNK):  # cells in chunks: the sorting network's temporaries stay in cache
            corners = np.ascontiguousarray(block.connectivity[lo:lo + _ROW_CHUNK].T, dtype=dtype)
            for j, face in enumerate(local_faces(block)):
                at = int(start) + j * n + lo
                rows = slice(at, at + corners.shape[1])
                for t, col in enumerate(sort_columns([corners[i] for i in face])):
                    columns[width - len(face) + t, rows] = col
    return columns, row_starts


#: cells per chunk of :func:`face_rows` (whole blocks at once took 1.7x the time on 1M hexahedra)
_ROW_CHUNK = 1 << 13


def row_owners(mesh: Mesh, rows: np.ndarray, row_starts: np.ndarray) -> np.ndarray:
    """The cell that owns each face row of :func:`face_rows` (int64)."""
    return _owners_and_places(mesh, rows, row_starts)[0].astype(np.int64, copy=False)


def _owners_and_places(mesh: Mesh, rows: np.ndarray, row_starts: np.ndarray) -> tuple:
    """The cell that owns each face row of :func:`face_rows`, and the row's local face number there
    (row ``row_starts[b] + j * n_b + i`` is local face j of cell i of block b); one block's in the
    rows' own dtype, several blocks' in int64."""
    if len(mesh.blocks) == 1:
        local, owner = np.divmod(rows, rows.dtype.type(len(mesh.blocks[0])))
        return owner, local
    rows = rows.astype(np.int64)
    block = np.searchsorted(row_starts, rows, side="right") - 1
    n = np.array([len(b) for b in mesh.blocks], dtype=np.int64)
    local, owner = np.divmod(rows - row_starts[block], n[block])
    owner += mesh.block_offsets[block]
    return owner, local


def _shift_later_columns(columns: np.ndarray, sign: int) -> None:
    """Add ``sign`` times the first column to the others, in place, chunk by chunk."""
    for lo in range(0, columns.shape[1], CHUNK):
        part = columns[:, lo:lo + CHUNK]
        if sign < 0:
            part[1:] -= part[0]
        else:
            part[1:] += part[0]


def face_topology(mesh: Mesh, *, threads: int = 1) -> dict:
    """Face grouping, done once: what :attr:`face_pairs`, :attr:`boundary_faces` and the
    face numbers of :meth:`face_numbers` are read from (the grouping itself is not kept).
    Its sorts on up to ``threads`` threads (the same grouping on any number).

    Faces are numbered in the lexicographic order of their sorted corners. A mesh whose cells a
    reader split into tetrahedra it already knows the face neighbours of (``mesh.memo`` entry
    ``"split_faces"``: see :func:`split_face_topology`) is not grouped again.
    """
    given = mesh.memo(SPLIT_FACES, lambda: None, keep=False)
    if given is not None:
        return split_face_topology(mesh, given)
    columns, row_starts = face_rows(mesh)
    # grouped with the later corners as offsets from the first: within rows of equal first corner
    # they order as the corners themselves, so the order and the groups are the same, and where
    # the numbering keeps a face's corners near each other (as grids and renumbered meshes do)
    # the offsets take fewer bits: fewer sorting passes (4M hexahedra: two instead of four)
    _shift_later_columns(columns, -1)
    order, starts = group_columns(list(columns), threads=threads)
    _shift_later_columns(columns, 1)
    m = order.size
    sizes = np.diff(starts, append=m).astype(index_dtype(m + 1))
    # faces owned by one cell only
    lone = order[starts[sizes == 1]]
    width = 2 if mesh.dimension == 2 else 4
    corners = np.full((lone.size, width), -1, dtype=np.int64)
    corners[:, width - columns.shape[0]:] = columns[:, lone].T
    boundary = (corners, row_owners(mesh, lone, row_starts))
    del columns, lone
    # cells sharing a face: the two rows of every face seen twice
    shared = starts[sizes == 2]
    pairs, shared_faces = _cell_pairs(mesh, order[shared], order[shared + 1], row_starts, threads=threads)
    del shared
    boundary, pairs, hanging = _joined_at_hanging_faces(mesh, boundary, pairs)
    # face numbers of the cells that have quad faces (split by the contouring); others None
    numbers = [None] * len(mesh.blocks)
    quads = [b for b, block in enumerate(mesh.blocks) if block.cell_type in ("hexahedron", "wedge", "pyramid")]
    if quads and mesh.dimension == 3 and mesh.regular_grid is not None and mesh._grid_face_numbers is not None:
        quads = []  # :meth:`face_numbers` numbers a grid's faces by their grid positions
    if quads:
        dtype = index_dtype(starts.size)
        group = np.empty(m, dtype=dtype)
        group[order] = np.repeat(np.arange(starts.size, dtype=dtype), sizes)
        for b in quads:
            n, local = len(mesh.blocks[b]), len(local_faces(mesh.blocks[b]))
            ids = group[row_starts[b]:row_starts[b] + local * n].reshape(local, n)
            numbers[b] = np.ascontiguousarray(ids.T)
    return {"pairs": pairs, "pair_count": int(pairs.shape[0]), "boundary": boundary, "numbers": numbers,
            "count": int(starts.size), "crowded": int(np.count_nonzero(sizes > 2)),
            "shared_faces": shared_faces + hanging, "hanging_faces": hanging}


def _joined_at_hanging_faces(mesh: Mesh, boundary: tuple, pairs: np.ndarray) -> tuple:
    """The boundary faces without those of refinement seams, the pairs with the cells joined across
    them (:func:`._hanging_faces.hanging_face_links`), and how many smaller faces were joined (0: all unchanged)."""
    from ._hanging_faces import hanging_face_links

    corners, owners = boundary
    links = hanging_face_links(mesh, corners, owners)
    if links is None:
        return boundary, pairs, 0
    small, large, covered = links
    a, b = owners[small], owners[large]
    n = np.int64(mesh.n_cells)
    keys = np.concatenate([pairs[:, 0].astype(np.int64) * n + pairs[:, 1],
                           np.minimum(a, b).astype(np.int64) * n + np.maximum(a, b)])
    keys = unique_ints(keys)
    joined = np.empty((keys.size, 2), dtype=pairs.dtype)
    joined[:, 0], joined[:, 1] = np.divmod(keys, n)
    return (corners[~covered], owners[~covered]), joined, int(small.size)


def _cell_pairs(mesh: Mesh, first: np.ndarray, second: np.ndarray, row_starts: np.ndarray, *,
                threads: int = 1) -> tuple:
    """The distinct pairs of different cells that share a face, and how many faces they share.

    ``first`` and ``second``: the two face rows (of :func:`face_rows`) of each face seen twice.
    Returns ``pairs`` (n, 2), lower cell first, in increasing order (as ``np.unique`` of the
    pairs orders them), and the number of faces of two different cells (cells that share two
    faces count both). Each face's higher cell is written into the lower cell's row of a table
    (cells, faces per cell) at the face's place; the rows are sorted (a few entries each, not one
    sort of every pair) and read row after row; past :data:`_TABLE_WIDTH` faces a cell, one sort of
    every pair's key, on up to ``threads`` threads.
    """
    dtype = np.int32 if mesh.n_cells < 2 ** 24 else np.int64
    width = max(len(local_faces(block)) for block in mesh.blocks)
    if width > _TABLE_WIDTH:  # a polygon of many sides would widen every cell's row: one sort of the pairs
        return _sorted_pairs(mesh, first, second, row_starts, dtype, threads)
    flat = index_dtype(mesh.n_cells * width)  # a place in the table below
    cell, place = [], []  # per side: each face row's cell and its local face number there
    for rows in (first, second):
        owner, local = _owners_and_places(mesh, rows, row_starts)
        cell.append(owner.astype(flat, copy=False))
        place.append(local.astype(flat, copy=False))
        del local, owner
    lower = cell[0] < cell[1]
    low = np.where(lower, cell[0], cell[1])
    high = np.where(lower, cell[1], cell[0])
    at = np.where(lower, place[0], place[1])
    del cell, place, lower
    apart = low != high
    if not apart.all():  # a face both rows of which one cell owns: no pair
        low, high, at = low[apart], high[apart], at[apart]
    del apart
    # int32 where cell ids times a small count (faces per cell) still fit: users build
    # table offsets as cell * width in the pairs' own dtype
    table = np.full((mesh.n_cells, width), mesh.n_cells, dtype=dtype)  # n_cells: no pair
    shared_faces = int(low.size)
    low *= flat(width)
    at += low
    del low
    table.ravel()[at] = high
    del at, high
    table.sort(axis=1)
    keep = table < mesh.n_cells
    keep[:, 1:] &= table[:, 1:] != table[:, :-1]  # cells that share two faces: one pair
    kept = np.flatnonzero(keep)
    del keep
    pairs = np.empty((kept.size, 2), dtype=dtype)
    pairs[:, 0] = kept // width
    pairs[:, 1] = table.ravel()[kept]
    return pairs, shared_faces


#: most faces per cell for which :func:`_cell_pairs` reads the pairs from a table of cells by faces
_TABLE_WIDTH = 8


def _sorted_pairs(mesh: Mesh, first: np.ndarray, second: np.ndarray, row_starts: np.ndarray, dtype,
                  threads: int) -> tuple:
    """:func:`_cell_pairs` by one sort of every pair's key (for cells of many faces)."""
    one, two = row_owners(mesh, first, row_starts), row_owners(mesh, second, row_starts)
    low, high = np.minimum(one, two), np.maximum(one, two)
    apart = low != high
    key = low[apart] * np.int64(mesh.n_cells) + high[apart]
    shared_faces = int(key.size)
    key = unique_ints(key, threads=threads)
    pairs = np.empty((key.size, 2), dtype=dtype)
    np.divmod(key, np.int64(mesh.n_cells), out=(pairs[:, 0], pairs[:, 1]), casting="unsafe")
    return pairs, shared_faces


#: ``mesh.memo`` key of the face neighbours a reader gives with the tetrahedra it split cells into
SPLIT_FACES = "split_faces"


def cell_adjacency(mesh: Mesh, kind: str):
    """:meth:`Mesh.adjacency`: sparse symmetric cell adjacency through faces or points."""
    from scipy import sparse

    if kind == "face":
        p = mesh.face_pairs
        data = np.ones(2 * len(p))
        i = np.concatenate([p[:, 0], p[:, 1]])
        j = np.concatenate([p[:, 1], p[:, 0]])
        return sparse.csr_matrix((data, (i, j)), shape=(mesh.n_cells, mesh.n_cells))
    if kind == "point":
        a = mesh.incidence
        m = (a @ a.T).tocsr()
        m.setdiag(0)
        m.eliminate_zeros()
        m.data[:] = 1.0
        return m
    raise ValueError(f"adjacency kind must be 'face' or 'point', not {kind!r}")


def split_face_topology(mesh: Mesh, neighbours: np.ndarray) -> dict:
    """:func:`face_topology` of a mesh of one block of tetrahedra from their known face neighbours.

    ``neighbours`` (n_cells, 4): each row the neighbours across the tetrahedron's faces, higher
    numbers first, then lower, each increasing, -1 at the end for a face on the boundary; a
    boundary face is always the face opposite the tetrahedron's last corner (a split's cell
    centre). The same pairs, boundary faces and counts as grouping the faces.
    """
    n_pairs = int(np.count_nonzero(neighbours >= 0)) // 2
    lone = np.flatnonzero(neighbours[:, -1] < 0).astype(np.int64)
    tetra = mesh.blocks[0].connectivity
    corners = np.full((lone.size, 4), -1, dtype=np.int64)
    corners[:, 1:] = sort_small_rows(tetra[lone, :3])
    order, _ = group_columns([corners[:, j] for j in range(1, 4)])
    boundary = (corners[order], lone[order])
    # the pairs are not kept (8 bytes a pair): :func:`face_pairs` reads them from the neighbours
    return {"pairs": None, "pair_count": n_pairs, "boundary": boundary, "numbers": [None],
            "count": n_pairs + int(lone.size), "crowded": 0, "shared_faces": n_pairs, "hanging_faces": 0}


#: ``mesh.memo`` key of a face neighbour table built from the face pairs (:func:`pairs_as_neighbours`)
FACE_NEIGHBOURS = "face_neighbours"


def pairs_as_neighbours(mesh: Mesh, neighbours: np.ndarray) -> None:
    """Let the face topology drop its pairs once ``neighbours`` holds them (a table built from them).

    ``neighbours`` (n_cells, m): each row the cell's neighbours of higher number first, then
    the lower, each increasing, -1 padded at the end, from :attr:`Mesh.face_pairs` (every pair
    once in each of its rows). :func:`face_pairs` reads the same sorted pairs back from it, so
    a mesh keeps one of the two (the pairs are read once, to build the table).
    """
    topology = mesh._face_topology
    if topology["pairs"] is not None and mesh.memo(SPLIT_FACES, lambda: None, keep=False) is None:
        mesh.memo(FACE_NEIGHBOURS, lambda: neighbours)
        topology["pairs"] = None


def kept_neighbours(mesh: Mesh):
    """The face-neighbour table the mesh keeps (a reader's split's, else one built from the face
    pairs, :func:`pairs_as_neighbours`), or None."""
    table = mesh.memo(SPLIT_FACES, lambda: None, keep=False)
    return mesh.memo(FACE_NEIGHBOURS, lambda: None, keep=False) if table is None else table


def face_pairs(mesh: Mesh) -> np.ndarray:
    """:attr:`Mesh.face_pairs`: the face topology's pairs, or read from a split's face neighbours (or
    from a neighbour table built from the pairs, :func:`pairs_as_neighbours`)."""
    pairs = mesh._face_topology["pairs"]
    if pairs is not None:
        return pairs
    neighbours = kept_neighbours(mesh)
    n = mesh.n_cells
    higher = neighbours > np.arange(n, dtype=neighbours.dtype)[:, None]
    first = np.repeat(np.arange(n, dtype=np.int32 if n < 2 ** 24 else np.int64), higher.sum(axis=1))
    pairs = np.empty((first.size, 2), dtype=first.dtype)
    pairs[:, 0] = first
    pairs[:, 1] = neighbours[higher]  # row after row, increasing in each row: sorted pairs
    return pairs


def grid_face_numbers(mesh: Mesh) -> list | None:
    """Face numbers of a regular grid of hexahedra from the grid positions of the corners.

    Face ``(axis a, plane p, lower cell indices along the other two axes)`` gets
    ``offset[a] + ravel(...)``. The same faces as the general grouping (faces with the
    same corner points): every face must lie in one grid plane with its four corners on
    the four corners of one grid square, else None (the general grouping is used).
    """
    grid = mesh.regular_grid
    cells = grid.cell_shape
    small = np.int16 if max(grid.point_shape) < 2 ** 15 else np.int64
    position = [i.astype(small) for i in np.unravel_index(grid.point_index, grid.point_shape)]
    shapes = [tuple(n + (a == axis) for a, n in enumerate(cells)) for axis in range(3)]
    offsets = np.cumsum([0] + [int(np.prod(s)) for s in shapes])
    dtype = index_dtype(int(offsets[-1]))
    out = []
    for block in mesh.blocks:
        conn = block.connectivity
        faces = FACES[block.cell_type]
        numbers = np.empty((len(block), len(faces)), dtype=dtype)
        for start in range(0, len(block), CHUNK):
            corners = np.ascontiguousarray(conn[start:start + CHUNK].T)
            for j, face in enumerate(faces):
                ids = grid_face_ids([[i[corners[c]] for c in face] for i in position], shapes, offsets)
                if ids is None:
                    return None
                numbers[start:start + CHUNK, j] = ids
        out.append(numbers)
    return out


def grouped_faces(mesh: Mesh):
    """All cell faces (3D) or edges (2D) as sorted corners, their owner cell, grouped.

    Returns ``(faces, owners, order, starts)``: faces (m, w) with sorted corners (triangles
    padded with -1 in front), owners (m,), ``order`` a permutation that groups equal
    faces together and ``starts`` the first position of each group in that order.
    Built on every call (not cached: the mesh keeps only what is read from it).
    """
    columns, row_starts = face_rows(mesh)
    order, starts = group_columns(list(columns))
    width = 2 if mesh.dimension == 2 else 4
    faces = np.full((columns.shape[1], width), -1, dtype=np.int64)
    faces[:, width - columns.shape[0]:] = columns.T
    owners = row_owners(mesh, np.arange(columns.shape[1]), row_starts)
    return faces, owners, order, starts


def unique_edges(mesh: Mesh) -> np.ndarray:
    """Unique edges of all cells as point pairs (lower index first), shape (n_edges, 2)."""
    rows = []
    for block in mesh.blocks:
        conn = block.connectivity
        if block.cell_type == "polygon":
            k = conn.shape[1]
            local = [(i, (i + 1) % k) for i in range(k)]
        else:
            local = EDGES[block.cell_type]
        for a, b in local:
            rows.append(np.stack([conn[:, a], conn[:, b]], axis=1))
    e = sort_small_rows(np.concatenate(rows))
    e = e[e[:, 0] != e[:, 1]]
    key = unique_ints(e[:, 0] * np.int64(mesh.n_points) + e[:, 1])
    return np.stack([key // mesh.n_points, key % mesh.n_points], axis=1)
