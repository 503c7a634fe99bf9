"""Cells a writer decomposed about an added centre, read back as whole cells.

Some writers decompose each polyhedron before writing it: they add a point at its centre and
write one pyramid per quad face and one tetrahedron per triangle, each joined to that point,
every piece carrying the polyhedron's cell values, with an integer cell array that numbers each
piece's whole cell. Measured piece by piece such a cell is six small cells: sizes, the boundary
flux's whole-cell test and the widths in cells read the pieces.

:func:`mark_decomposed_cells` finds such a layout from the file alone (no array name is assumed):
an integer cell array with repeated values, every repeated value's cells pyramids and tetrahedra
that

* share exactly one point, which no other cell uses (a pyramid's apex),
* whose faces opposite that point close about it (each edge of them in exactly two pieces),
* number four or more.

An ordinary tetrahedral or hybrid mesh with a region or zone array does not match (a region's
cells share no one point, or that point's cells reach into other regions, or lie on the domain's
boundary). Where one array matches, its cells are marked as pieces of their whole cell
(``raw.cell_pieces``, as the reader's own polyhedron split marks them: :attr:`Mesh.cell_parents`)
and the shared points as the split's added centres (``raw.split_centres``), so whole-cell sizes,
the boundary flux's whole-cell test, the samples of ``cell_to_point`` and droplets take whole cells.
"""

from __future__ import annotations

import warnings

import numpy as np

from ..errors import ReadingNote
from ..model.cells import JoinedPieces

__all__ = ["mark_decomposed_cells"]

_SOLID = ("tetra", "pyramid", "hexahedron", "wedge", "voxel")
_PIECES = ("tetra", "pyramid")
#: the edges of a piece's face opposite its centre: a pyramid's base (the centre its apex, corner 4)
_BASE_EDGES = ((0, 1), (1, 2), (2, 3), (3, 0))


def mark_decomposed_cells(raw, where: str = ""):
    """Mark the pieces of cells a writer decomposed about an added centre (in place; ``raw`` returned).

    Nothing changes unless one integer cell array matches the layout (module docstring); then
    ``raw.cell_pieces`` and ``raw.split_centres`` are set, ``raw.convex_point_sets`` says how the
    cells were read, and a :class:`~phasegauge.errors.ReadingNote` names the array.
    """
    if getattr(raw, "cell_pieces", None) or getattr(raw, "split_centres", None) is not None:
        return raw  # cells a reader split itself
    types = [str(b.type) for b in raw.cells]
    solid = [i for i, t in enumerate(types) if t in _SOLID]
    if not solid or not any(types[i] in _PIECES for i in solid):
        return raw
    if any(t.startswith("polyhedron") or t not in _SOLID and _dimension(t) == 3 for t in types):
        return raw
    for name in sorted(raw.cell_data):
        found = _decomposed(raw, solid, name)
        if found is None:
            continue
        parents, centres = found
        sizes = [len(raw.cells[i].data) for i in solid]
        starts = np.concatenate([[0], np.cumsum(sizes)]).astype(np.int64)
        marks = [None] * len(raw.cells)
        for k, i in enumerate(solid):
            own = parents[starts[k]:starts[k + 1]]
            marks[i] = own if k == 0 else JoinedPieces(own)  # one numbering over every block
        raw.cell_pieces = marks
        raw.split_centres = centres
        n_whole, n_pieces = int(centres.points.size), int(np.count_nonzero(np.bincount(parents)[parents] > 1))
        words = (f"{n_pieces} pyramids and tetrahedra read as the {n_whole} whole cells that cell array "
                 f"'{name}' numbers (each written decomposed about an added centre)")
        earlier = getattr(raw, "convex_point_sets", None)
        raw.convex_point_sets = words if not earlier else f"{earlier}; {words}"
        warnings.warn(ReadingNote(words, where=where), stacklevel=3)
        return raw
    return raw


def _dimension(cell_type: str) -> int:
    from ..model.cells import CELL_DIMENSION, LINEAR_CORNERS

    linear = LINEAR_CORNERS.get(cell_type, (cell_type, None))[0]
    return CELL_DIMENSION.get(linear, 3)


def _decomposed(raw, solid: list, name: str):
    """``(parents, centres)`` when cell array ``name`` numbers decomposed cells (module docstring), else None:
    the whole cell of each solid cell (0 ..), and the :class:`SplitCentres` of the shared points."""
    arrays = raw.cell_data[name]
    if len(arrays) != len(raw.cells):
        return None
    parts = [np.asarray(arrays[i]) for i in solid]
    if any(p.dtype.kind not in "iu" or p.ndim != 1 and (p.ndim != 2 or p.shape[1] != 1) for p in parts):
        return None
    ids = np.concatenate([p.reshape(-1) for p in parts])
    if ids.size < 4:
        return None
    values, parents, counts = np.unique(ids, return_inverse=True, return_counts=True)
    parents = parents.reshape(-1).astype(np.int64)
    repeated = counts[parents] > 1
    if not repeated.any():
        return None
    types = np.concatenate([np.full(len(raw.cells[i].data), _PIECES.index(str(raw.cells[i].type))
                                    if str(raw.cells[i].type) in _PIECES else -1) for i in solid])
    if (types[repeated] < 0).any() or (counts[counts > 1] < 4).any():
        return None
    # the pieces' corners as (piece, corner) pairs
    starts = np.concatenate([[0], np.cumsum([len(raw.cells[i].data) for i in solid])]).astype(np.int64)
    rows, corners = [], []
    for k, i in enumerate(solid):
        if str(raw.cells[i].type) not in _PIECES:
            continue
        data = np.asarray(raw.cells[i].data, dtype=np.int64)
        pick = np.flatnonzero(repeated[starts[k]:starts[k + 1]])
        if pick.size:
            rows.append(np.repeat(pick + starts[k], data.shape[1]))
            corners.append(data[pick].reshape(-1))
    rows, corners = np.concatenate(rows), np.concatenate(corners)
    groups = parents[rows]
    # each group's points and in how many of its pieces each is
    pairs, in_pieces = np.unique(np.stack([groups, corners], axis=1), axis=0, return_counts=True)
    shared = in_pieces == counts[pairs[:, 0]]
    grouped = np.unique(parents[repeated])
    if np.bincount(pairs[shared, 0], minlength=values.size)[grouped].max(initial=0) != 1 \
            or np.count_nonzero(shared) != grouped.size:
        return None  # not exactly one point shared by all of a group's pieces
    centre_of = np.full(values.size, -1, dtype=np.int64)
    centre_of[pairs[shared, 0]] = pairs[shared, 1]
    if np.unique(centre_of[grouped]).size != grouped.size:
        return None
    # no other cell uses a centre (nor a cell of another kind: lines, faces)
    uses = np.zeros(len(raw.points), dtype=np.int64)
    for block in raw.cells:
        data = np.asarray(block.data)
        if data.dtype.kind in "iu" and data.size:
            np.add.at(uses, data.reshape(-1).astype(np.int64), 1)
    if not np.array_equal(uses[centre_of[grouped]], counts[grouped]):
        return None
    if not _closed_about_centres(raw, solid, starts, repeated, parents, centre_of):
        return None
    return parents, _centres(pairs[~shared], grouped, centre_of)


def _closed_about_centres(raw, solid, starts, repeated, parents, centre_of) -> bool:
    """Whether each group's faces opposite its centre close about it: every edge of them in exactly two
    of the group's pieces, the centre a pyramid's apex (corner 4)."""
    keys = []
    for k, i in enumerate(solid):
        kind = str(raw.cells[i].type)
        if kind not in _PIECES:
            continue
        pick = np.flatnonzero(repeated[starts[k]:starts[k + 1]])
        if not pick.size:
            continue
        data = np.asarray(raw.cells[i].data, dtype=np.int64)[pick]
        group = parents[pick + starts[k]]
        centre = centre_of[group]
        if kind == "pyramid":
            if not np.array_equal(data[:, 4], centre):
                return False
            opposite, edges = data[:, :4], _BASE_EDGES
        else:
            keep = data != centre[:, None]
            if not (keep.sum(axis=1) == 3).all():
                return False
            opposite, edges = data[keep].reshape(-1, 3), ((0, 1), (1, 2), (2, 0))
        for a, b in edges:
            lo, hi = np.minimum(opposite[:, a], opposite[:, b]), np.maximum(opposite[:, a], opposite[:, b])
            keys.append(np.stack([group, lo, hi], axis=1))
    _, times = np.unique(np.concatenate(keys), axis=0, return_counts=True)
    return bool((times == 2).all())


def _centres(pairs: np.ndarray, grouped: np.ndarray, centre_of: np.ndarray):
    """The :class:`SplitCentres` of the groups' centres: each the mean of its whole cell's other points
    (``pairs``: (group, point) rows, sorted, the centres left out)."""
    from ..model.polyhedra import SplitCentres

    sizes = np.bincount(pairs[:, 0], minlength=centre_of.size)[grouped]
    offsets = np.concatenate([[0], np.cumsum(sizes)]).astype(np.int64)
    return SplitCentres(centre_of[grouped], pairs[:, 1].astype(np.int64), offsets)
