"""Plane sections of a mesh as fixed operators: mesh-only, built once and cached on the mesh.

A plane normal to one axis cuts every simplex of the cells it crosses (the conforming
split of :func:`phasegauge.model.simplices.split_cells`) in a triangle or a
quadrilateral (3D) or a segment (2D). The pieces depend on the mesh and the planes only:
they are built once (:class:`_Sections`: the pieces, their cells, and for every corner
the cut edge and where along it) and cached on the mesh, so a step of a series only
interpolates its fields along the cut edges (:mod:`._cross_sections` sums the moments).
"""

from __future__ import annotations

import queue
from dataclasses import dataclass, replace
from types import MappingProxyType

import numpy as np
import pandas as pd

from ..model._grouping import index_dtype
from ..model.corners import cell_extent, corner_mean
from ..model.mesh import Mesh
from ..model.simplices import _split_plan, needs_centres, split_cells
from ..model._threads import ordered_map


#: section operators kept per mesh: the latest ones built (a series uses one, for all its steps)
_KEEP = 4

#: cut edges interpolated at a time (:meth:`_Sections.cut_values`)
_CUT_CHUNK = 1 << 16


@dataclass(frozen=True)
class _Sections:
    """Plane sections of a mesh as fixed maps from field values to section pieces.

    Mesh-only: built once per mesh, axis and plane positions, then reused for
    every step. The pieces (triangles in 3D, segments in 2D) and cut edges are kept
    plane by plane, as they were built (joining them would hold every array twice while
    it is copied: the first step's memory peak). A piece corner lies on a cut edge of the
    cell split, between a node below the plane (``start``) and one above
    (``end``), at ``weight`` t along it: a point field is ``x[start] + t
    (x[end] - x[start])`` there, exactly as the split interpolates it. Cut
    edges are shared by the pieces of a plane, so each is stored once.
    Only what the fields' ``locations`` need is kept: the cut edges for point
    fields, the pieces' cells for cell fields (None otherwise), and the added
    centres that cut edges end at (none on simplices and flat-faced cells).
    """

    locations: frozenset  # of 'point', 'cell': the fields this operator serves
    areas: np.ndarray  # (n_planes,) section area (3D) or length (2D)
    measures: tuple  # per plane (n_pieces,): piece areas or lengths
    corners: tuple | None  # per plane (n_pieces, dimension): cut edge of each piece corner (numbered over all planes)
    parent: tuple | None  # per plane (n_pieces,): cell of each piece
    start: tuple | None  # per plane (n_cuts,): node below the plane, a mesh point or an added centre
    end: tuple | None  # per plane (n_cuts,): node above
    weight: tuple | None  # per plane (n_cuts,): t, in [0, 1]
    centres: tuple  # corner point ids (n, k) of the added centres that are nodes, in node order

    def cut_values(self, mesh: Mesh, values: np.ndarray) -> np.ndarray:
        """A point field (n_points,) at every cut edge (n_cuts,), linear along the edge."""
        if self.centres:  # the split's added centres are nodes: one table of point, then centre values
            table = np.concatenate([values] + [corner_mean(values, corners.astype(np.intp))
                                               for corners in self.centres], dtype=values.dtype)
        else:
            table = values
        out = np.empty(sum(part.size for part in self.start), dtype=table.dtype)
        at = 0
        for starts, ends, weights in zip(self.start, self.end, self.weight):  # plane by plane, in chunks:
            for lo in range(0, starts.size, _CUT_CHUNK):  # the index copies and gathers stay small
                part = slice(lo, lo + _CUT_CHUNK)
                # numpy gathers much faster with intp indices than with the stored int32 ones
                low = table[starts[part].astype(np.intp, copy=False)]
                high = table[ends[part].astype(np.intp, copy=False)]
                with np.errstate(invalid="ignore"):  # non-finite values: the pieces are left out later
                    high -= low
                    high *= weights[part]
                    high += low  # low + t (high - low), as the split interpolates
                out[at:at + high.size] = high
                at += high.size
        return out


class _NodeColumns:
    """Coordinate columns at the nodes of a plane's split: the mesh points' values, then the
    added centres' means (the numbers of ``split.centre_means``). Kept in one contiguous buffer
    per axis across the planes of an operator: the points' part (most of it) is written once,
    not copied for every plane and axis, and gathers from it are several times faster than from
    the strided coordinate column (10x for the centres' corners on 1M hexahedra)."""

    def __init__(self, mesh: Mesh):
        self.coordinates, self.n_points, self.buffers = mesh.coordinates, mesh.n_points, {}

    def at(self, split, axis: int) -> np.ndarray:
        """Coordinate ``axis`` at every node of ``split`` (n_vertices,)."""
        n = self.n_points
        buffer = self.buffers.get(axis)
        if buffer is None:
            buffer = np.empty(n + n // 8, dtype=self.coordinates.dtype)  # room for the centres
            buffer[:n] = self.coordinates[:, axis]
        added = [corner_mean(buffer[:n], corners) for _, corners in split.centres]
        size = n + sum(values.size for values in added)
        if buffer.size < size:
            grown = np.empty(size + size // 8, dtype=buffer.dtype)
            grown[:n] = buffer[:n]
            buffer = grown
        self.buffers[axis] = buffer
        at = n
        for values in added:
            buffer[at:at + values.size] = values
            at += values.size
        return buffer[:size]


def _plane_pieces(mesh: Mesh, axis: int, position: float, lower_end: bool, cells: np.ndarray,
                  columns: _NodeColumns) -> tuple:
    """The section of ``cells`` by one plane: pieces and their corners on the cut edges.

    Returns the piece measures (n,), parents (n,), per cut edge its start and end nodes and
    weight t (m,), the corners of the split's added centres (a list of (m, k) arrays, in node
    order) and the plane's cut edges (:func:`_cut_edges`: each piece corner's cut edge (n *
    dimension,) and each cut edge's first corner). The nodes are numbered as the split of
    ``cells`` numbers them (added centres from ``mesh.n_points`` on); the caller renumbers
    the centres of the distinct cut edges (:func:`_renumbered`). ``columns``: the node
    coordinates' buffers of the operator being built.
    """
    dim = mesh.dimension
    split = split_cells(mesh, cells)
    nodes, parent, centres = split.simplices, split.owner, [corners for _, corners in split.centres]
    # the offsets from the plane first (one coordinate), the in-plane corners of the crossed
    # simplices only: the same numbers as gathering all corners (centres are corner means)
    # corner by corner (contiguous columns: the comparisons below run several times faster)
    k = dim + 1
    table = columns.at(split, axis)
    s = [table[nodes[:, j]] - position for j in range(k)]
    below = _count_below(s, lower_end)
    crossed = (below > 0) & (below < dim + 1)
    others = [a for a in range(dim) if a != axis]
    rows = np.flatnonzero(crossed)
    del crossed
    parent, below = parent[rows], below[rows]
    # each crossed simplex's nodes in increasing s, as a stable argsort orders them (written to
    # their places by rank: no argsort, no gathers), then every piece corner's two nodes read
    # from its simplex's row, in the order the cases list them; the offsets again per cut edge
    rank = _corner_ranks([column[rows] for column in s])
    del s
    # int32 node ids where they fit: half the bytes for the piece tables and their key
    narrow = index_dtype(table.size)
    ordered = _placed(rank, [nodes[rows, j].astype(narrow, copy=False) for j in range(k)])
    del nodes, rows, rank
    start, end, parent = _piece_nodes(ordered, below, parent, dim)
    shape = start.shape
    del ordered, below
    # the simplices go; the split's centres are still read below
    split = replace(split, simplices=np.empty((0, k), dtype=np.int64), owner=np.empty(0, dtype=np.int64))
    edges = _cut_edges(start, end)
    cut, first = edges
    # t and a piece corner's place depend on its cut edge only (its two nodes): formed once per cut
    # edge (a sixth of the corners), then read by the corners; the same numbers bit for bit as
    # forming them at every corner from the sorted offsets (each is the node's offset again)
    start, end = start.ravel()[first], end.ravel()[first]
    low = table[start] - position
    t = low / (low - (table[end] - position))
    del low
    cut = cut.astype(np.intp)  # numpy gathers several times faster with intp indices
    X = []  # per in-plane axis, (n, dim): the corners, as the split interpolates them
    for a in others:
        column = columns.at(split, a)
        Xi = column[start]
        Xi += t * (column[end] - Xi)
        X.append(Xi[cut].reshape(shape))
    del cut
    if dim == 2:
        measures = np.abs(X[0][:, 1] - X[0][:, 0])
    else:
        d1 = [x[:, 1] - x[:, 0] for x in X]
        d2 = [x[:, 2] - x[:, 0] for x in X]
        measures = 0.5 * np.abs(d1[0] * d2[1] - d1[1] * d2[0])
    return measures, parent, start, end, t, centres, edges


def _renumbered(nodes: np.ndarray, n_points: int, first_added: int) -> np.ndarray:
    """Split node ids with the added centres (from ``n_points`` on) numbered from ``first_added``."""
    if first_added == n_points:
        return nodes
    return np.where(nodes >= n_points, nodes + (first_added - n_points), nodes)


def _count_below(s: list, lower_end: bool) -> np.ndarray:
    """Per simplex, how many corners lie below the plane (s <= 0 with ``lower_end``, else s < 0);
    ``s``: the offsets of each corner, one array (n,) per corner."""
    below = np.zeros(s[0].shape[0], dtype=np.int8)
    for column in s:
        below += column <= 0 if lower_end else column < 0
    return below


#: per number of corners below the plane, the pieces a simplex is cut into: each piece's corners
#: as edges (i, j) between its corners sorted by the offset from the plane (i below, j above)
_CASES = MappingProxyType({
    2: ((1, (((0, 1), (0, 2)),)), (2, (((0, 2), (1, 2)),))),
    3: ((1, (((0, 1), (0, 2), (0, 3)),)), (3, (((0, 3), (1, 3), (2, 3)),)),
        (2, (((0, 2), (0, 3), (1, 3)), ((0, 2), (1, 3), (1, 2))))),
})


def _piece_nodes(ordered: np.ndarray, below: np.ndarray, parent: np.ndarray, dim: int) -> tuple:
    """Start and end nodes (n, dim) and cell (n,) of every piece, from each crossed simplex's nodes
    in increasing offset (``ordered``, (m, dim + 1)) and corners below the plane (``below``).

    Pieces are listed case by case (a triangle for one corner below, for three, then the two
    triangles of a quadrilateral for two, each over all its simplices in turn), every case
    over its simplices in order.
    """
    chosen = [np.flatnonzero(below == count) for count, _ in _CASES[dim]]
    n = sum(rows.size * len(pieces) for rows, (_, pieces) in zip(chosen, _CASES[dim]))
    # written column by column into C-ordered tables (a row-gather of columns comes out in
    # Fortran order, and every later ravel would copy it)
    start = np.empty((n, dim), dtype=ordered.dtype)
    end = np.empty((n, dim), dtype=ordered.dtype)
    owner = np.empty(n, dtype=parent.dtype)
    at = 0
    for rows, (_, pieces) in zip(chosen, _CASES[dim]):
        part = ordered[rows]
        for piece in pieces:
            span = slice(at, at + rows.size)
            for corner, (i, j) in enumerate(piece):
                start[span, corner] = part[:, i]
                end[span, corner] = part[:, j]
            owner[span] = parent[rows]
            at += rows.size
    return start, end, owner


def _corner_ranks(columns: list) -> list:
    """Per corner, its place (n,) int8 among the simplex's corners in increasing offset, ties in
    corner order: the number of corners before it (lower offset, or equal and earlier), from
    one comparison per pair of columns. ``columns``: the offsets, one array (n,) per corner."""
    n, k = columns[0].shape[0], len(columns)
    rank = [np.zeros(n, dtype=np.int8) for _ in range(k)]  # at most k - 1
    for a in range(k):
        for b in range(a + 1, k):
            before = columns[b] < columns[a]  # b first only when strictly lower: ties stay in order
            rank[a] += before
            rank[b] += ~before
    return rank


def _placed(rank: list, columns: list) -> np.ndarray:
    """The table (n, k) whose row i holds ``columns[j][i]`` at place ``rank[j][i]``."""
    n, k = columns[0].shape[0], len(columns)
    out = np.empty((n, k), dtype=columns[0].dtype)
    flat = out.reshape(-1)
    base = np.arange(0, n * k, k)
    for j in range(k):
        flat[base + rank[j]] = columns[j]
    return out


def _layer_pieces(mesh: Mesh, axis: int, position: float, lower_end: bool, cells: np.ndarray,
                  columns: _NodeColumns) -> tuple | None:
    """:func:`_plane_pieces` for a layer of cells that all meet the plane alike, else None.

    When every crossed cell is of one block, is split without added centres, and has the
    same offsets ``s`` from the plane at its local corners (a layer of a structured grid),
    the split, the sort by ``s``, the cut simplices and the weights are the same in every
    cell: they are taken from the first cell (by :func:`_plane_pieces` itself) and repeated
    for the others, each with its own corner coordinates. The arrays are the ones
    :func:`_plane_pieces` returns for all the cells, value for value and in its order (the
    first cell's pieces one by one, each over all the cells), its cut edges found from the
    piece corners (:func:`_cut_edges`): the same floating-point operations on the same numbers.
    ``columns`` as for :func:`_plane_pieces`.
    """
    if cells.size < 2:
        return None
    dim = mesh.dimension
    offsets = mesh.block_offsets
    b = int(np.searchsorted(offsets, cells[0], side="right")) - 1
    if cells[-1] >= offsets[b + 1]:
        return None  # more than one block
    block = mesh.blocks[b]
    local = cells - offsets[b]
    if needs_centres(mesh, cells):
        return None  # some are split about added centres
    conn = block.connectivity[local]
    X = mesh.coordinates
    along = X[:, axis]
    s = along[conn] - position
    if not (s == s[0]).all():
        return None
    template = _plane_pieces(mesh, axis, position, lower_end, cells[:1], columns)
    measures, parents, start, end, t, centres, (cut, _) = template
    if centres or measures.size == 0:
        return None
    start, end = start[cut].reshape(-1, dim), end[cut].reshape(-1, dim)  # per piece corner
    row = conn[0]
    if np.unique(row).size != row.size:
        return None  # a corner repeated: the first cell's points do not name its corners
    slot = {int(point): j for j, point in enumerate(row)}
    j_start = np.vectorize(slot.__getitem__, otypes=[np.intp])(start)  # (k, dim) local corners
    j_end = np.vectorize(slot.__getitem__, otypes=[np.intp])(end)
    others = [a for a in range(dim) if a != axis]
    # (k pieces, n cells, dim corners): piece-major, as _plane_pieces orders its rows
    S, E = conn[:, j_start].transpose(1, 0, 2), conn[:, j_end].transpose(1, 0, 2)
    si, sj = along[S] - position, along[E] - position
    weight = si / (si - sj)
    P = []  # per in-plane axis, (k, n, dim): the corners, as _plane_pieces' edges place them
    for a in others:
        column = X[:, a]
        Xi = column[S]
        P.append(Xi + weight * (column[E] - Xi))
    if dim == 2:
        pieces = np.abs(P[0][:, :, 1] - P[0][:, :, 0])
    else:
        d1 = [q[:, :, 1] - q[:, :, 0] for q in P]
        d2 = [q[:, :, 2] - q[:, :, 0] for q in P]
        pieces = 0.5 * np.abs(d1[0] * d2[1] - d1[1] * d2[0])
    k, n = S.shape[0], cells.size
    start, end = S.reshape(k * n, dim).astype(start.dtype), E.reshape(k * n, dim).astype(end.dtype)
    cut, first = _cut_edges(start, end)
    return (pieces.reshape(-1), np.tile(cells.astype(parents.dtype), k), start.ravel()[first], end.ravel()[first],
            weight.reshape(k * n, dim).ravel()[first], [], (cut, first))


def _build_sections(mesh: Mesh, axis: int, positions: np.ndarray, lower_ends: np.ndarray,
                    locations: frozenset, *, threads: int = 1) -> _Sections:
    """The section operator of ``positions`` along analysis axis ``axis`` (see :class:`_Sections`).

    The planes are cut on up to ``threads`` threads, each with its own coordinate buffers, and
    joined in plane order: the same arrays bit for bit on any number of threads.
    """
    lo, hi = cell_extent(mesh, axis, keep=False)  # the operator itself is kept
    dim = mesh.dimension
    n_cuts, n_added = 0, 0
    measures, parents, corners, starts, ends, weights, centres = [], [], [], [], [], [], []
    points, cell_fields = "point" in locations, "cell" in locations
    idle = queue.SimpleQueue()  # node coordinates' buffers (:class:`_NodeColumns`) no plane is using

    def cut(plane):
        position, lower_end = plane
        crossed = (lo <= position) & (hi > position) if lower_end else (lo < position) & (hi >= position)
        cells = np.nonzero(crossed)[0]
        del crossed
        try:
            columns = idle.get_nowait()
        except queue.Empty:  # one set of buffers per thread at work
            columns = _NodeColumns(mesh)
        pieces = (_layer_pieces(mesh, axis, float(position), bool(lower_end), cells, columns)
                  or _plane_pieces(mesh, axis, float(position), bool(lower_end), cells, columns))
        idle.put(columns)
        if not cell_fields:  # the pieces' cells serve cell fields only
            return pieces[:1] + (None,) + pieces[2:]
        return pieces[:1] + (pieces[1].astype(index_dtype(mesh.n_cells), copy=False),) + pieces[2:]

    # what the mesh caches for every plane (the split plan, and the face numbers it reads) is made
    # here, before the threads: they only read it
    if dim == 3:
        _split_plan(mesh)
    for m, parent, start, end, t, plane_centres, edges in ordered_map(cut, list(zip(positions, lower_ends)),
                                                                      threads=threads):
        cut_edges, first = edges
        del edges
        # the centres numbered after those of earlier planes: a strictly increasing map of the
        # node ids, so the edge keys above sort and match alike before and after it
        start = _renumbered(start, mesh.n_points, mesh.n_points + n_added)
        end = _renumbered(end, mesh.n_points, mesh.n_points + n_added)
        n_added += sum(c.shape[0] for c in plane_centres)
        measures.append(m)
        if cell_fields:
            parents.append(parent)
        del parent
        # kept per plane (never joined: a join holds them twice), each in the narrowest type
        # its values need so far; the corners stored corner by corner, (dim, n), seen as
        # (n, dim): the sums read them a corner at a time
        nodes = index_dtype(mesh.n_points + n_added)
        part = np.empty((dim, m.size), dtype=index_dtype(n_cuts + first.size))
        for a in range(dim):
            np.add(cut_edges[a::dim], part.dtype.type(n_cuts), out=part[a], casting="unsafe")
        corners.append(part.T)
        del cut_edges
        starts.append(start.astype(nodes, copy=False))
        ends.append(end.astype(nodes, copy=False))
        weights.append(t)
        del start, end, t  # the plane's full-size arrays go before the next plane's are read
        centres += plane_centres
        n_cuts += first.size
    kept = ()
    if points and centres:
        starts, ends, kept = _used_centres(mesh.n_points, starts, ends, centres)
    return _Sections(
        locations=locations,
        areas=np.array([m.sum() for m in measures]),
        measures=tuple(measures),
        corners=tuple(corners) if points else None,
        parent=tuple(parents) if cell_fields else None,
        start=tuple(starts) if points else None,
        end=tuple(ends) if points else None,
        weight=tuple(weights) if points else None,
        centres=kept)


def _cut_edges(start: np.ndarray, end: np.ndarray) -> tuple:
    """Each cut edge of a plane once: the pieces of a plane share them.

    ``start`` and ``end`` are the piece corners' nodes (n, dimension). Returns every piece
    corner's cut edge (flat, numbered in the order the pieces first use them, so the pieces
    read their corner values nearly in order) and, per cut edge, the flat position of the
    corner that uses it first.

    By pandas' hash table (``pd.factorize`` numbers the distinct keys in the order they first
    appear): the same two arrays as a stable sort of the edge keys would give, about 3x faster
    on the planes of 1M hexahedra (30 -> 10 ms a plane, measured).
    """
    start, end = start.ravel(), end.ravel()
    span = max(int(start.max(initial=0)), int(end.max(initial=0))) + 1
    codes, distinct = pd.factorize(start.astype(np.int64) * np.int64(span) + end)
    n = codes.size
    index = index_dtype(n)  # int32 below 2^31 corners: half the bytes to write and read
    # each cut edge's first corner: where a number exceeds every number before it (the numbers
    # are given in order of first appearance, so the first uses come out in edge order)
    seen = np.maximum.accumulate(codes)
    new_edge = np.empty(n, dtype=bool)
    new_edge[:1] = True
    np.greater(codes[1:], seen[:-1], out=new_edge[1:])
    del seen
    first = np.flatnonzero(new_edge).astype(index)
    return codes.astype(index), first


def _used_centres(n_points: int, start: list, end: list, centres: list) -> tuple:
    """The added centres that cut edges end at, numbered anew from ``n_points`` in node order.

    ``start`` and ``end`` are the planes' cut edge nodes. Returns them so renumbered (new
    lists), and the kept centres' corners (narrowest integer type): a plane cuts only some of
    its cells' centres.
    """
    used = np.zeros(sum(c.shape[0] for c in centres), dtype=bool)
    for nodes in start + end:
        used[nodes[nodes >= n_points].astype(np.intp) - n_points] = True
    number = np.cumsum(used) + (n_points - 1)  # the new id of each kept centre
    renumbered = ([], [])
    for parts, out in zip((start, end), renumbered):
        for nodes in parts:
            nodes = nodes.copy()
            extra = nodes >= n_points
            nodes[extra] = number[nodes[extra].astype(np.intp) - n_points]
            out.append(nodes)
    kept, at = [], 0
    dtype = index_dtype(n_points)
    for corners in centres:
        chosen = used[at:at + corners.shape[0]]
        at += corners.shape[0]
        if chosen.any():
            kept.append(corners[chosen].astype(dtype))
    return renumbered[0], renumbered[1], tuple(kept)


def _sections(mesh: Mesh, axis: int, positions: np.ndarray, lower_ends: np.ndarray,
              locations: frozenset, *, threads: int = 1) -> _Sections:
    """The section operator, from the mesh's cache when the same planes were cut before.

    ``locations``: where the fields live ('point', 'cell'); an operator kept
    for other locations is built again for all of them. ``threads``: as :func:`_build_sections`.
    """
    store = mesh.memo("cross_sections", dict)
    key = (int(axis), positions.tobytes())
    kept = store.pop(key, None)  # put back last: the newest
    if kept is None or not locations <= kept.locations:
        locations = locations | (kept.locations if kept is not None else frozenset())
        while len(store) >= _KEEP:
            store.pop(next(iter(store)))  # the oldest
        kept = _build_sections(mesh, axis, positions, lower_ends, locations, threads=threads)
    store[key] = kept
    return kept
