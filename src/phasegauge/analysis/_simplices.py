"""Cells as simplices: the shared geometry of plane sections and box clipping.

Every cell is split into triangles (2D) or tetrahedra (3D) by a fixed table per
cell type. On each simplex a point field is interpolated linearly, so a plane
cuts it in a flat polygon whose corner values lie on its edges, and clipping a
simplex by a half-space leaves simplices again. The split need not conform
between neighbouring cells: sections and clipped volumes are integrated cell by
cell.

Only the cells that a plane or a box face actually crosses are split, so the
cost follows the size of the section, not of the mesh.
"""

from __future__ import annotations

import numpy as np

from ..model.cells import FACES
from ..model.mesh import Mesh

# local corner indices of the simplices of each cell type when its faces are flat
_SPLIT = {
    "triangle": [(0, 1, 2)],
    "quad": [(0, 1, 2), (0, 2, 3)],
    "tetra": [(0, 1, 2, 3)],
    "hexahedron": [(0, 1, 2, 6), (0, 2, 3, 6), (0, 3, 7, 6), (0, 7, 4, 6), (0, 4, 5, 6), (0, 5, 1, 6)],
    "wedge": [(0, 1, 2, 5), (0, 1, 4, 5), (0, 3, 4, 5)],
    "pyramid": [(0, 1, 2, 4), (0, 2, 3, 4)],
}

#: a quad face is flat when its corners' volume is below this share of its size cubed
_FLAT = 1e-10


def cell_extent(mesh: Mesh, axis: int, keep: bool = True) -> tuple[np.ndarray, np.ndarray]:
    """Lowest and highest corner coordinate of every cell along analysis axis ``axis``.

    Mesh-only: with ``keep``, computed once per mesh and axis, then reused (do not modify
    the arrays); without it, reused if kept before, else computed and not kept (for work
    that is itself cached, such as the section planes: 16 bytes a cell saved).
    """
    from ._contour import _corner_extremes

    return mesh.memo(("cell_extent", int(axis)),
                     lambda: _corner_extremes(mesh, np.ascontiguousarray(mesh.coordinates[:, axis])), keep=keep)


def _flat_cells(mesh: Mesh) -> list:
    """Per block, True for cells whose quad faces are all flat (cached per mesh); None for simplices."""

    def compute():
        out = []
        columns = None
        for block in mesh.blocks:
            if block.cell_type not in ("hexahedron", "wedge", "pyramid"):
                out.append(None)
                continue
            if columns is None:
                columns = [np.ascontiguousarray(mesh.coordinates[:, i]) for i in range(3)]
            conn = block.connectivity
            flat = np.empty(len(block), dtype=bool)
            for lo in range(0, len(block), _CHUNK):  # in chunks: the temporaries stay in cache
                part = conn[lo:lo + _CHUNK]
                corners = [[x[part[:, j]] for x in columns] for j in range(part.shape[1])]
                flat[lo:lo + _CHUNK] = _flat_faces(block.cell_type, corners)
            out.append(flat)
        return out

    return mesh.memo("flat_cells", compute)


_CHUNK = 1 << 15


def _flat_faces(cell_type: str, X) -> np.ndarray:
    """True for cells whose quad faces are all flat.

    ``X``: corner coordinates, an array (n, k, 3), or per corner the list of its three
    coordinate arrays (n,).
    """
    P = [[X[:, j, i] for i in range(3)] for j in range(X.shape[1])] if isinstance(X, np.ndarray) else X
    flat = np.ones(P[0][0].shape[0], dtype=bool)
    for face in FACES[cell_type]:
        if len(face) == 4:
            p0, p1, p2, p3 = (P[j] for j in face)
            e1 = [p1[i] - p0[i] for i in range(3)]
            e2 = [p2[i] - p0[i] for i in range(3)]
            e3 = [p3[i] - p0[i] for i in range(3)]
            # e1 . (e2 x e3), term by term as np.cross and a dot product form it
            volume = np.abs(e1[0] * (e2[1] * e3[2] - e2[2] * e3[1]) + e1[1] * (e2[2] * e3[0] - e2[0] * e3[2])
                            + e1[2] * (e2[0] * e3[1] - e2[1] * e3[0]))
            size = e2[0] * e2[0] + e2[1] * e2[1] + e2[2] * e2[2]
            size *= np.sqrt(size)  # |e2| cubed (as ** 1.5, without the power function)
            flat &= volume <= _FLAT * size
    return flat


def _block_simplex_nodes(cell_type: str, conn: np.ndarray, flat: np.ndarray | None,
                         first: int) -> tuple[list, np.ndarray | None]:
    """Simplices of cells with corners ``conn`` (n, k), as (node ids, cell rows) pairs.

    Node ids below ``first`` are mesh points; cells split about added centres
    (``flat`` False) number them from ``first``: their n cell centres, then per
    quad face of the type their n face centres. Returns the pairs and the rows
    of those cells (None when there are none).
    """
    rows = np.arange(conn.shape[0])
    if cell_type == "polygon":
        return [(conn[:, [0, i, i + 1]], rows) for i in range(1, conn.shape[1] - 1)], None
    if cell_type in ("triangle", "tetra"):
        return [(conn, rows)], None  # already simplices: no copy
    if cell_type == "quad":
        return [(conn[:, list(local)], rows) for local in _SPLIT[cell_type]], None
    # hexahedra, wedges, pyramids: with flat faces the few simplices of the table; otherwise a
    # tetrahedron from the cell centre to every face triangle, quad faces split in four about
    # their centre, so the split conforms between neighbours even where a face is not flat
    out = [(conn[flat][:, list(local)], rows[flat]) for local in _SPLIT[cell_type]]
    bent = np.nonzero(~flat)[0]
    if bent.size == 0:
        return out, None
    B = conn[bent]
    n = bent.size
    centre = first + np.arange(n)
    added = 1
    for face in FACES[cell_type]:
        F = B[:, list(face)]
        if len(face) == 3:
            out.append((np.column_stack([F, centre]), bent))
            continue
        middle = first + added * n + np.arange(n)
        added += 1
        for i in range(4):
            out.append((np.column_stack([F[:, i], F[:, (i + 1) % 4], middle, centre]), bent))
    return out, bent


def split_cell_nodes(mesh: Mesh, cells: np.ndarray) -> tuple[np.ndarray, np.ndarray, list]:
    """Simplices of the given cells as node ids: mesh points and added face and cell centres.

    Parameters
    ----------
    mesh : Mesh
    cells : ndarray of int
        Cell indices, in increasing order.

    Returns
    -------
    nodes : ndarray of shape (n_simplices, dimension + 1), int64
        Below ``mesh.n_points`` a mesh point; from there on the added centres,
        numbered in the order of ``centred`` (see :func:`centre_states`).
    parent : ndarray of shape (n_simplices,), int64
        The cell each simplex belongs to.
    centred : list of (block index, rows in the block) pairs
        The cells split about added centres (hexahedra, wedges and pyramids
        with a bent quad face).

    Notes
    -----
    Triangles and tetrahedra stay whole, quads split in two, polygons in a
    fan; hexahedra, wedges and pyramids with flat faces into 6, 3 and 2
    tetrahedra; those with a bent quad face into 24, 14 and 8 tetrahedra
    from their corner mean to each face triangle, quad faces split in four
    about their corner mean (so the split conforms across bent faces).
    """
    pieces, parents, centred = [], [], []
    first = mesh.n_points
    flat_cells = _flat_cells(mesh)
    for b, (block, start, stop, flat) in enumerate(zip(mesh.blocks, mesh.block_offsets[:-1],
                                                       mesh.block_offsets[1:], flat_cells)):
        a, z = np.searchsorted(cells, [start, stop])
        if a == z:
            continue
        chosen = cells[a:z]
        local = chosen - start
        block_flat = None if flat is None else flat[local]
        out, bent = _block_simplex_nodes(block.cell_type, block.connectivity[local], block_flat, first)
        for nodes, rows in out:
            pieces.append(nodes)
            parents.append(chosen[rows])
        if bent is not None:
            centred.append((b, local[bent]))
            first += bent.size * (1 + _quad_faces(block.cell_type))
    if not pieces:
        return np.empty((0, mesh.dimension + 1), dtype=np.int64), np.empty(0, dtype=np.int64), []
    nodes = np.concatenate(pieces).astype(np.int64, copy=False)
    return nodes, np.concatenate(parents).astype(np.int64, copy=False), centred


def _quad_faces(cell_type: str) -> int:
    return sum(len(face) == 4 for face in FACES[cell_type])


def centre_states(mesh: Mesh, centred: list, point_state: np.ndarray) -> np.ndarray:
    """States at the centres added by :func:`split_cell_nodes`, in their node order.

    A centre takes the mean of its cell's (or face's) corners, which is the
    bilinear / trilinear value there. Shape (n_added,) + ``point_state.shape[1:]``.
    """
    def corner_mean(corners):
        # the corners added in order, then divided (as a mean over the corner axis of the
        # (n, k, q) states would), without that temporary
        total = point_state[corners[:, 0]] + point_state[corners[:, 1]]
        for j in range(2, corners.shape[1]):
            total += point_state[corners[:, j]]
        return total / corners.shape[1]

    out = []
    for b, rows in centred:
        block = mesh.blocks[b]
        B = block.connectivity[rows]
        out.append(corner_mean(B))
        for face in FACES[block.cell_type]:
            if len(face) == 4:
                out.append(corner_mean(B[:, list(face)]))
    if not out:
        return np.empty((0,) + point_state.shape[1:], dtype=np.float64)
    return np.concatenate(out)


def node_states(point_state: np.ndarray, added: np.ndarray, nodes: np.ndarray) -> np.ndarray:
    """``point_state`` at node ids, reading ids from ``len(point_state)`` on from ``added``."""
    n = point_state.shape[0]
    if added.shape[0] == 0:
        return point_state[nodes]
    extra = nodes >= n
    out = point_state[np.where(extra, 0, nodes)]
    out[extra] = added[nodes[extra] - n]
    return out


def split_cells(mesh: Mesh, cells: np.ndarray, point_state: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Simplices of the given cells, carrying a state (coordinates, fields) at their corners.

    Parameters
    ----------
    mesh : Mesh
    cells : ndarray of int
        Cell indices, in increasing order.
    point_state : ndarray of shape (n_points, q)
        What every corner carries (coordinates first, then point fields);
        added corners (face and cell centres) get the mean of the cell's or
        face's corners, which is the bilinear / trilinear value there.

    Returns
    -------
    simplices : ndarray of shape (n_simplices, dimension + 1, q)
    parent : ndarray of shape (n_simplices,), int
        The cell each simplex belongs to.

    Notes
    -----
    The split of :func:`split_cell_nodes`.
    """
    nodes, parent, centred = split_cell_nodes(mesh, cells)
    return node_states(point_state, centre_states(mesh, centred, point_state), nodes), parent


def simplex_measures(X: np.ndarray) -> np.ndarray:
    """Unsigned areas (triangles) or volumes (tetrahedra) of X, shape (n, d + 1, d)."""
    E = X[:, 1:, :] - X[:, :1, :]
    if X.shape[2] == 2:
        return 0.5 * np.abs(E[:, 0, 0] * E[:, 1, 1] - E[:, 0, 1] * E[:, 1, 0])
    return np.abs(np.einsum("ni,ni->n", E[:, 0], np.cross(E[:, 1], E[:, 2]))) / 6.0


def _edge_point(X: np.ndarray, s: np.ndarray, i: int, j: int) -> np.ndarray:
    """Where the edge i-j (s_i <= 0 < s_j) meets s = 0."""
    t = s[:, i] / (s[:, i] - s[:, j])
    return X[:, i] + t[:, None] * (X[:, j] - X[:, i])


def _prism(a0, a1, a2, b0, b1, b2) -> list:
    """Three tetrahedra filling the prism with end triangles a and b (a_k joined to b_k)."""
    return [np.stack(t, axis=1) for t in ((a0, a1, a2, b2), (a0, a1, b1, b2), (a0, b0, b1, b2))]


def clip_simplices(X: np.ndarray, parent: np.ndarray, s: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """The parts of simplices where the linear function s <= 0.

    Parameters
    ----------
    X : ndarray of shape (n, d + 1, d)
        Corner coordinates of triangles (d = 2) or tetrahedra (d = 3).
    parent : ndarray of shape (n,)
        A label carried over to the pieces.
    s : ndarray of shape (n, d + 1)
        Signed distance (or any affine function) at the corners.

    Returns
    -------
    X, parent
        Simplices covering exactly the kept part.
    """
    order = np.argsort(s, axis=1, kind="stable")
    X = np.take_along_axis(X, order[:, :, None], axis=1)
    s = np.take_along_axis(s, order, axis=1)
    inside = np.count_nonzero(s <= 0, axis=1)
    k = X.shape[1]
    pieces, labels = [X[inside == k]], [parent[inside == k]]
    if k == 3:
        one = inside == 1
        Xa, sa = X[one], s[one]
        pieces.append(np.stack([Xa[:, 0], _edge_point(Xa, sa, 0, 1), _edge_point(Xa, sa, 0, 2)], axis=1))
        labels.append(parent[one])
        two = inside == 2
        Xb, sb = X[two], s[two]
        p12, p02 = _edge_point(Xb, sb, 1, 2), _edge_point(Xb, sb, 0, 2)
        pieces += [np.stack([Xb[:, 0], Xb[:, 1], p12], axis=1), np.stack([Xb[:, 0], p12, p02], axis=1)]
        labels += [parent[two]] * 2
    else:
        one = inside == 1
        Xa, sa = X[one], s[one]
        pieces.append(np.stack([Xa[:, 0]] + [_edge_point(Xa, sa, 0, j) for j in (1, 2, 3)], axis=1))
        labels.append(parent[one])
        two = inside == 2
        Xb, sb = X[two], s[two]
        p02, p03 = _edge_point(Xb, sb, 0, 2), _edge_point(Xb, sb, 0, 3)
        p12, p13 = _edge_point(Xb, sb, 1, 2), _edge_point(Xb, sb, 1, 3)
        pieces += _prism(Xb[:, 0], p02, p03, Xb[:, 1], p12, p13)
        labels += [parent[two]] * 3
        three = inside == 3
        Xc, sc = X[three], s[three]
        tops = [_edge_point(Xc, sc, j, 3) for j in (0, 1, 2)]
        pieces += _prism(Xc[:, 0], Xc[:, 1], Xc[:, 2], *tops)
        labels += [parent[three]] * 3
    return np.concatenate(pieces), np.concatenate(labels)


def box_fractions(mesh: Mesh, box: np.ndarray) -> np.ndarray:
    """Fraction of each cell's measure inside an axis-aligned box, exactly for simplex splits.

    Parameters
    ----------
    mesh : Mesh
    box : ndarray of shape (dimension, 2)
        Lower and upper bound per analysis axis.

    Returns
    -------
    ndarray of shape (n_cells,), in [0, 1]
    """
    dim = mesh.dimension
    inside = np.ones(mesh.n_cells, dtype=bool)
    outside = np.zeros(mesh.n_cells, dtype=bool)
    for axis in range(dim):
        lo, hi = cell_extent(mesh, axis)
        inside &= (lo >= box[axis, 0]) & (hi <= box[axis, 1])
        outside |= (hi <= box[axis, 0]) | (lo >= box[axis, 1])
    fraction = inside.astype(np.float64)
    cut = np.nonzero(~inside & ~outside)[0]
    if cut.size == 0:
        return fraction
    X, parent = split_cells(mesh, cut, mesh.coordinates)
    whole = np.bincount(parent, simplex_measures(X), minlength=mesh.n_cells)[cut]
    for axis in range(dim):
        for value, sign in ((box[axis, 0], -1.0), (box[axis, 1], 1.0)):
            X, parent = clip_simplices(X, parent, sign * (X[:, :, axis] - value))
    kept = np.bincount(parent, simplex_measures(X), minlength=mesh.n_cells)[cut]
    with np.errstate(invalid="ignore", divide="ignore"):
        fraction[cut] = np.where(whole > 0, np.clip(kept / whole, 0.0, 1.0), 0.0)
    return fraction
