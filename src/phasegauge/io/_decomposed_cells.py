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
from types import MappingProxyType

import numpy as np

from ..errors import ReadingNote
from ..model.cells import JoinedPieces

__all__ = ["mark_decomposed_cells"]

_SOLID = ("tetra", "pyramid", "hexahedron", "wedge", "voxel")
_PIECES = ("tetra", "pyramid")
#: most pieces one cell's value may have (our threshold: a polyhedron of 10 000 faces; a region of more cells
#: is no decomposed cell)
MOST_PIECES = 10_000
_NAMES = MappingProxyType({"pyramid": "pyramids", "tetra": "tetrahedra"})


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
        parents, centres, listed, starts = found
        marks = [None] * len(raw.cells)
        for k, i in enumerate(solid):
            own = parents[starts[k]:starts[k + 1]]
            marks[i] = own if k == 0 else JoinedPieces(own)  # one numbering over every block
        raw.cell_pieces = marks
        raw.split_centres = centres
        words = (f"{listed} read as the {centres.points.size} whole cells that cell array "
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
    """``(parents, centres, listed, starts)`` when cell array ``name`` numbers decomposed cells (module docstring),
    else None: the whole cell of each solid cell (0 ..), the :class:`SplitCentres` of the shared points, the
    pieces in words, and where each solid block starts in ``parents``."""
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
    if not repeated.any() or (counts[counts > 1] < 4).any():  # (a cell decomposed in fewer than 4 pieces: none)
        return None
    sizes = [len(raw.cells[i].data) for i in solid]
    starts = np.concatenate([[0], np.cumsum(sizes)]).astype(np.int64)
    if not _first_group_shares_one_point(raw, solid, starts, parents, int(parents[np.argmax(repeated)])):
        return None  # (a region, zone or rank array fails here, before the work on every group)
    pieces = []  # (kind, corners, group) of the repeated values' cells, block by block
    for k, i in enumerate(solid):
        pick = np.flatnonzero(repeated[starts[k]:starts[k + 1]])
        if not pick.size:
            continue
        kind = str(raw.cells[i].type)
        if kind not in _PIECES:
            return None  # a repeated value's cell neither a pyramid nor a tetrahedron
        pieces.append((kind, np.asarray(raw.cells[i].data, dtype=np.int64)[pick], parents[pick + starts[k]]))
    # four tetrahedra about a point are a tetrahedron refined about its centre, never a cell written decomposed
    # (a four-faced cell is written whole): a refined tetrahedral mesh whose array numbers the coarse cells
    with_pyramid = np.zeros(values.size, dtype=bool)
    for kind, _, group in pieces:
        with_pyramid[group] |= kind == "pyramid"
    if ((counts == 4) & ~with_pyramid).any():
        return None
    uses = np.bincount(np.concatenate([np.asarray(b.data, dtype=np.int64).reshape(-1) for b in raw.cells
                                       if np.asarray(b.data).dtype.kind in "iu"]), minlength=len(raw.points))
    # each group's centre: a pyramid's apex, else a tetrahedron's corner used as often as the group has pieces
    # (the last such: writers add the centres after the cells' points); then checked on every piece
    centre_of = np.full(values.size, -1, dtype=np.int64)
    for kind, data, group in sorted(pieces, key=lambda piece: piece[0] == "pyramid"):
        if kind == "pyramid":
            centre_of[group] = data[:, 4]
        else:
            fits = uses[data] == counts[group][:, None]
            if not fits.any(axis=1).all():
                return None
            centre_of[group] = data[np.arange(len(data)), data.shape[1] - 1 - np.argmax(fits[:, ::-1], axis=1)]
    for kind, data, group in pieces:
        centre = centre_of[group]
        if kind == "pyramid" and not np.array_equal(data[:, 4], centre):
            return None  # (a pyramid's centre its apex)
        if not ((data == centre[:, None]).sum(axis=1) == 1).all():
            return None
    grouped = np.flatnonzero(counts > 1)
    if not np.array_equal(uses[centre_of[grouped]], counts[grouped]):
        return None  # a centre used by a cell of another value, or of no value (a face, a line)
    if not _closed_about_centres(pieces, centre_of):
        return None
    made = {kind: sum(len(data) for k, data, _ in pieces if k == kind) for kind in ("pyramid", "tetra")}
    listed = " and ".join(f"{n} {_NAMES[kind]}" for kind, n in made.items() if n)
    return parents, _centres(pieces, grouped, centre_of), listed, starts


def _first_group_shares_one_point(raw, solid: list, starts: np.ndarray, parents: np.ndarray, group: int) -> bool:
    """Whether the cells of ``group`` share exactly one point (a quick look at one group; a group of more than
    :data:`MOST_PIECES` cells is taken for a region: our threshold, far above a polyhedron's faces)."""
    corners, n = [], 0
    for k, i in enumerate(solid):
        rows = np.flatnonzero(parents[starts[k]:starts[k + 1]] == group)
        n += rows.size
        if n > MOST_PIECES:
            return False
        corners.append(np.asarray(raw.cells[i].data)[rows].reshape(-1))
    _, times = np.unique(np.concatenate(corners), return_counts=True)
    return int(np.count_nonzero(times == n)) == 1


def _closed_about_centres(pieces: list, centre_of: np.ndarray) -> bool:
    """Whether each group's faces opposite its centre close about it: every edge of them in exactly two of the
    group's pieces (so exactly one point, the centre, is shared by all of them)."""
    groups, edges = [], []
    for kind, data, group in pieces:
        keep = data != centre_of[group][:, None]
        opposite = data[keep].reshape(len(data), -1)  # a pyramid's base, a tetrahedron's face opposite the centre
        n = opposite.shape[1]
        for a in range(n):
            b = (a + 1) % n
            edges.append(np.sort(np.stack([opposite[:, a], opposite[:, b]], axis=1), axis=1))
            groups.append(group)
    groups, edges = np.concatenate(groups), np.concatenate(edges)
    n = int(edges.max()) + 1
    if (int(groups.max()) + 1) * n * n < 2 ** 62:  # one key a (group, edge): a sort, not a sort of rows
        keys = np.sort(groups * (n * n) + edges[:, 0] * n + edges[:, 1])
        new = np.concatenate([[True], keys[1:] != keys[:-1], [True]])
    else:
        order = np.lexsort((edges[:, 1], edges[:, 0], groups))
        groups, edges = groups[order], edges[order]
        new = np.concatenate([[True], (groups[1:] != groups[:-1]) | (edges[1:] != edges[:-1]).any(axis=1), [True]])
    return bool((np.diff(np.flatnonzero(new)) == 2).all())


def _centres(pieces: list, grouped: np.ndarray, centre_of: np.ndarray):
    """The :class:`SplitCentres` of the groups' centres: each the mean of its whole cell's other points."""
    from ..model.polyhedra import SplitCentres

    groups = np.concatenate([np.repeat(group, data.shape[1]) for _, data, group in pieces])
    points = np.concatenate([data.reshape(-1) for _, data, _ in pieces])
    own = points != centre_of[groups]
    groups, points = groups[own], points[own]
    n = int(points.max()) + 1
    keys = np.sort(groups * n + points)
    keys = keys[np.concatenate([[True], keys[1:] != keys[:-1]])]  # (a group's points, once each, in order)
    groups, points = keys // n, keys % n
    sizes = np.bincount(groups, minlength=centre_of.size)[grouped]
    offsets = np.concatenate([[0], np.cumsum(sizes)]).astype(np.int64)
    return SplitCentres(centre_of[grouped], points, offsets)
