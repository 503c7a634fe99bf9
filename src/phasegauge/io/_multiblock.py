"""VTK XML multiblock files (``.vtm``): the volume blocks of one step, read as one mesh.

A multiblock file is an XML index of other VTK XML files: ``<DataSet file=...>``
elements, nested in ``<Block>`` elements, with paths relative to the index.
Converters of finite-volume solvers write one per step, naming the internal
(volume) mesh and the boundary patches. The volume blocks (unstructured grids,
image, rectilinear and structured grids: ``.vtu``, ``.vti``, ``.vtr``, ``.vts``)
are read with their own format's reader and joined into one mesh; polygon-data
blocks (``.vtp``: boundary patches, surfaces) are left out and named by
:func:`multiblock_blocks`; so are volume-format blocks whose cells are all of a lower dimension than
another block's (patches written as unstructured grids of faces), named in a warning when read. The
step's time is the one the multiblock file stores in its own ``<FieldData>`` (where VTK's multiblock writer
puts it); when it stores none, the one stored in the first volume block's field data. Where both store a
time and they differ, the multiblock file's is used and a warning names both.
"""

from __future__ import annotations

import os
import xml.etree.ElementTree as ET
from dataclasses import dataclass

import numpy as np

from ..errors import InputFileNotFound, UnreadableFileError
from ._formats import register_format

__all__ = ["FORMATS", "MultiblockBlocks", "multiblock_blocks", "multiblock_data_files", "read_multiblock",
           "peek_multiblock_time", "is_index_file", "without_indexed_files", "INDEX_SUFFIXES"]

#: suffixes of the blocks read as volume pieces
VOLUME_SUFFIXES = (".vtu", ".vti", ".vtr", ".vts")

#: VTK XML files that index other files of one step: a multiblock file, and the parallel files
#: naming a decomposed step's pieces (``<Piece Source=...>``), read alike
INDEX_SUFFIXES = (".vtm", ".pvtu", ".pvti", ".pvtr", ".pvts")

#: the parallel files' root types
_PARALLEL_TYPES = ("PUnstructuredGrid", "PImageData", "PRectilinearGrid", "PStructuredGrid")

#: VTK's ghost-cell mark of a cell another piece owns (``vtkDataSetAttributes::DUPLICATECELL``)
_DUPLICATE_CELL = 1

#: points of two blocks on their boxes' faces closer than this share of the joined domain's longest
#: side are one point of a seam (:func:`seams_made_equal`): far above the rounding of coordinates
#: that each rank computes its own way (a few units in the last place), far below any cell
SEAM_TOLERANCE = 1e-9


@dataclass(frozen=True)
class MultiblockBlocks:
    """The blocks a multiblock file names.

    Attributes
    ----------
    volume : tuple of (str, str)
        ``(block name, file path)`` of the blocks read as the step's mesh.
    left_out : tuple of (str, str)
        ``(block name, file path)`` of the blocks left out (boundary patches and
        other polygon data, or files of another kind).
    """

    volume: tuple
    left_out: tuple

    def left_out_names(self) -> list:
        """The names of the blocks left out (their file's stem when unnamed)."""
        return [name or os.path.splitext(os.path.basename(path))[0] for name, path in self.left_out]


def multiblock_blocks(path: str) -> MultiblockBlocks:
    """The volume and left-out blocks of a multiblock file, in the file's order.

    Raises
    ------
    UnreadableFileError
        Not a VTK XML multiblock file, or one that names no volume block.
    """
    path = os.fspath(path)
    return _blocks_of(_index_root(path), path)


def _index_root(path: str):
    """The parsed XML root of an index file (a multiblock or parallel file)."""
    try:
        return ET.parse(path).getroot()
    except (ET.ParseError, OSError) as exc:
        raise UnreadableFileError(f"cannot be read as a VTK multiblock file ({exc})", where=path,
                                  fix="check that the file is complete XML (it may be truncated)") from None


def _blocks_of(root, path: str) -> MultiblockBlocks:
    """:func:`multiblock_blocks` of the file's parsed root."""
    kinds = ("vtkMultiBlockDataSet", "vtkMultiPieceDataSet") + _PARALLEL_TYPES
    if root.tag != "VTKFile" or root.get("type") not in kinds:
        raise UnreadableFileError(f"is not a VTK XML multiblock or parallel file (its root is <{root.tag} "
                                  f"type={root.get('type')!r}>)", where=path,
                                  fix="give a .vtm or .pvtu file written by a VTK writer")
    folder = os.path.dirname(os.path.abspath(path))
    volume, left_out = [], []
    parallel = root.get("type") in _PARALLEL_TYPES
    for node in root.iter("Piece" if parallel else "DataSet"):
        name = node.get("Source" if parallel else "file")
        if not name:
            continue  # an empty block
        target = name if os.path.isabs(name) else os.path.join(folder, name)
        entry = (node.get("name", ""), target)
        (volume if target.lower().endswith(VOLUME_SUFFIXES) else left_out).append(entry)
    if not volume:
        names = ", ".join(n or os.path.basename(p) for n, p in left_out) or "none"
        raise UnreadableFileError(f"the multiblock file names no volume block (.vtu, .vti, .vtr, .vts); "
                                  f"blocks there: {names}", where=path,
                                  fix="give the file of the volume mesh itself")
    return MultiblockBlocks(tuple(volume), tuple(left_out))


def multiblock_data_files(path) -> list:
    """The volume block files a multiblock file names (the data a step reads), as paths; [] when unreadable.

    The resume cache stamps them and the manifest lists them with their hashes: rewriting a
    step's internal mesh leaves its ``.vtm`` file unchanged.
    """
    try:
        return [file for _, file in multiblock_blocks(os.fspath(path)).volume]
    except UnreadableFileError:
        return []


def _volume_file(path: str, block: str) -> str:
    if not os.path.exists(block):
        kind = "block" if path.lower().endswith(".vtm") else "piece"
        raise InputFileNotFound(f"the {kind} file '{os.path.relpath(block, os.path.dirname(os.path.abspath(path)))}' "
                                "it names is missing", where=path,
                                fix=f"restore the step's {'folder' if kind == 'block' else 'piece files'} next to "
                                    f"the {os.path.splitext(path)[1].lower()} file")
    return block


def read_multiblock(path: str):
    """Read the volume blocks of a multiblock file as one meshio-style mesh.

    Several volume blocks are joined (points numbered on); a field is kept when
    every block holds it with the same components. The field data is the first
    block's, its time replaced by the one the multiblock file itself stores
    (:func:`own_time`). Cells a block's reader split (convex point sets)
    stay marked as pieces of their cell (``cell_pieces``). Unstructured pieces of 0 points and 0 cells
    (written by a process that owns no cells) are left out, from the fields' check too.
    """
    from ._formats import read_mesh_file
    from ._vtk import xml_holds_no_cells

    path = os.fspath(path)
    root = _index_root(path)  # parsed once: the blocks and the file's own time
    blocks = _blocks_of(root, path)
    own = _own_time_of(root)
    volume = [(name, _volume_file(path, file)) for name, file in blocks.volume]
    volume = [(name, file) for name, file in volume if not xml_holds_no_cells(file)]  # a process owning no cells
    if not volume:
        raise UnreadableFileError("every piece it names holds no cells (0 points and 0 cells)", where=path,
                                  fix="give a step whose pieces hold the mesh's cells")
    pieces = [read_mesh_file(file) for _, file in volume]
    pieces = without_patches(pieces, volume, path)
    named = [block for block, piece in zip(volume, pieces) if piece is not None]
    pieces = [piece for piece in pieces if piece is not None]
    if len(pieces) == 1:
        return _with_own_time(pieces[0], path, named[0][0], own)
    return _with_own_time(join_pieces(pieces, named, path, own=own), path, named[0][0], own)


def join_pieces(pieces: list, named: list, path: str, *, own: dict | None = None, part: str = "block",
                whole: str = "the multiblock file", holding_fix: str | None = None):
    """The volume pieces of one step (meshio meshes, two or more) joined as one meshio-style mesh.

    Points are numbered on piece by piece and the points of a seam made equal (:func:`seams_made_equal`);
    cells VTK marks as another piece's are left out (:func:`_owned_cells`); a field is kept when every piece
    holds it with the same components, else named in ``fields_left_out`` (:func:`fields_left_out`, its
    words ``part`` and ``whole``, and ``holding_fix`` in place of the fix naming a multiblock's blocks).
    The field data is the first piece's. ``named``: ``(name, file)`` of each piece, for the messages;
    ``own``: the multiblock file's own time (:func:`own_time`), for the fix of a field left out.
    """
    from ..model.polyhedra import joined_centres
    from ._meshio_adapter import file_rows, new_mesh

    # each block's file numbers counted on by all the cells of the block files before it, ghost cells
    # included (taken before they go): a cell's number less its block's offset is its row in its file
    sizes = [max((int(r.max()) + 1 for r in file_rows(piece) if len(r)), default=0) for piece in pieces]
    offsets = np.concatenate([[0], np.cumsum(sizes)[:-1]]).astype(np.int64)
    pieces = [_owned_cells(piece) for piece in pieces]
    points, cells, offset, rows = [], [], 0, []
    single = any(np.asarray(p.points).dtype == np.float32 for p in pieces)
    for piece, counted in zip(pieces, offsets):
        points.append(np.asarray(piece.points, dtype=np.float64))
        cells.extend((b.type, np.asarray(b.data) + offset) for b in piece.cells)
        offset += len(piece.points)
        rows.extend(r + counted for r in file_rows(piece))
    block_sizes = [len(p) for p in points]
    points = seams_made_equal(points, single_precision=single)
    point_data = {name: np.concatenate([np.asarray(p.point_data[name]) for p in pieces])
                  for name in pieces[0].point_data if _shared(pieces, "point_data", name)}
    cell_data = {name: [np.asarray(a) for p in pieces for a in p.cell_data[name]]
                 for name in pieces[0].cell_data if _shared(pieces, "cell_data", name)}
    joined = new_mesh(points, cells, point_data=point_data, cell_data=cell_data,
                      field_data=dict(pieces[0].field_data or {}))
    joined.fields_left_out, joined.cell_copies_left_out = fields_left_out(
        pieces, named, path, point_data, cell_data, own=own, part=part, whole=whole, holding_fix=holding_fix)
    joined.block_sizes = block_sizes  # points merged across blocks are the join, not duplicates
    joined.cell_rows = rows
    joined.single_precision_points = single
    # the centres readers added to split cells (each block's after its own points), numbered in the join
    joined.split_centres = joined_centres([(len(p.points), getattr(p, "split_centres", None)) for p in pieces])
    if any(getattr(p, "cell_pieces", None) for p in pieces):  # cells a reader split stay marked per block
        joined.cell_pieces = [mark for p in pieces
                              for mark in (getattr(p, "cell_pieces", None) or [None] * len(p.cells))]
    return joined


def _top_dimension(piece) -> int:
    """The largest dimension among a block's cells (3 for a type the model does not name: never a patch)."""
    from ..model.cells import CELL_DIMENSION, LINEAR_CORNERS

    return max((CELL_DIMENSION.get(LINEAR_CORNERS.get(b.type, (b.type,))[0], 3) for b in piece.cells), default=3)


def without_patches(pieces: list, named: tuple, path: str, *, what: str = "multiblock blocks") -> list:
    """The blocks, None for those whose cells are all of a lower dimension than another block's: boundary
    patches written as unstructured grids of faces (as ``.vtp`` patches, left out). Joined, their points
    would merge with the wall points and average the patch's values (a boundary condition's) into the
    volume's. Named in one :class:`~phasegauge.errors.BlocksLeftOutNote` (a run's info line, not a finding),
    ``what`` saying what they are."""
    dims = [_top_dimension(p) for p in pieces]
    top = max(dims)
    if all(d == top for d in dims):
        return pieces
    import warnings

    from ..errors import BlocksLeftOutNote

    names = [name or os.path.splitext(os.path.basename(file))[0] for (name, file), d in zip(named, dims) if d < top]
    warnings.warn(BlocksLeftOutNote(f"{what} left out: {', '.join(names)} (boundary patches written as "
                                    f"cells of lower dimension than the volume's; the volume {what.split()[-1]} "
                                    "are read)",
                                    where=path, names=names), stacklevel=3)
    return [p if d == top else None for p, d in zip(pieces, dims)]


def _owned_cells(piece):
    """A block without the cells VTK marks as another block's (``vtkGhostType`` with
    :data:`_DUPLICATE_CELL`: a solver's ghost layer, written again by the block that owns it), and
    without the mark arrays; a block of cells a reader split (``cell_pieces``) is kept whole."""
    import meshio

    from ._meshio_adapter import file_rows

    marks = piece.cell_data.get("vtkGhostType")
    piece.point_data.pop("vtkGhostType", None)
    if marks is None or getattr(piece, "cell_pieces", None):
        return piece
    keep = [(np.asarray(m).ravel().astype(np.int64) & _DUPLICATE_CELL) == 0 for m in marks]
    if all(k.all() for k in keep):
        del piece.cell_data["vtkGhostType"]
        return piece
    kept = [np.asarray(b.data)[k] for b, k in zip(piece.cells, keep)]
    # the points only ghost cells used go too: the block's box is then its own cells' (its seams on
    # the box's faces, where :func:`seams_made_equal` looks for them)
    used = np.unique(np.concatenate([c.ravel() for c in kept])) if kept else np.empty(0, dtype=np.int64)
    number = np.full(len(piece.points), -1, dtype=np.int64)
    number[used] = np.arange(used.size)
    cells = [(b.type, number[c]) for b, c in zip(piece.cells, kept)]
    cell_data = {name: [np.asarray(a)[k] for a, k in zip(arrays, keep)]
                 for name, arrays in piece.cell_data.items() if name != "vtkGhostType"}
    point_data = {name: np.asarray(values)[used] for name, values in piece.point_data.items()}
    owned = meshio.Mesh(np.asarray(piece.points)[used], cells, point_data=point_data, cell_data=cell_data,
                        field_data=dict(piece.field_data or {}))
    owned.cell_rows = [r[k] for r, k in zip(file_rows(piece), keep)]  # the block file's numbers of the cells kept
    return owned


def seams_made_equal(points: list, *, single_precision: bool = False) -> np.ndarray:
    """The blocks' points joined, the points of a seam between blocks made exactly equal.

    A domain decomposition writes the points of a seam once in each block; where each rank
    computes its coordinates its own way (``i h`` on one, ``x0 + j h`` on the next) they differ
    in the last place, and merged only when equal the seam would stay open: a droplet across it
    counted twice, the seam taken for an open boundary. Points of a block that lie on its box's
    faces (where the seams of a box-wise decomposition lie; a graph partition's ranks write the
    global mesh's own coordinates, equal already) are searched for others within
    :data:`SEAM_TOLERANCE` of the domain's size (scipy's tree); each group so linked takes the
    coordinates of its first point. The mesh then merges the equal copies as it merges any. Points
    a block stored in single precision (``single_precision``) are rounded far more coarsely: the
    tolerance is then at least two of single precision's spacings at the largest coordinate.
    """
    joined = np.concatenate(points)
    if len(points) < 2 or joined.shape[0] < 2:
        return joined
    extent = joined.max(axis=0) - joined.min(axis=0)
    tolerance = SEAM_TOLERANCE * float(extent.max())
    if single_precision:
        tolerance = max(tolerance, 2.0 * float(np.spacing(np.float32(np.abs(joined).max()))))
    if not tolerance > 0:
        return joined
    on_faces, start = [], 0
    for block in points:
        if block.shape[0]:
            lo, hi = block.min(axis=0), block.max(axis=0)
            near = np.zeros(block.shape[0], dtype=bool)
            for axis in np.flatnonzero(hi - lo > tolerance):  # a flat axis (2D) has no faces to seam
                near |= (block[:, axis] - lo[axis] <= tolerance) | (hi[axis] - block[:, axis] <= tolerance)
            on_faces.append(start + np.flatnonzero(near))
        start += block.shape[0]
    found = np.concatenate(on_faces)
    if found.size < 2:
        return joined
    from scipy.sparse import coo_matrix
    from scipy.sparse.csgraph import connected_components
    from scipy.spatial import cKDTree

    pairs = cKDTree(joined[found]).query_pairs(tolerance, output_type="ndarray")
    if pairs.size == 0:
        return joined
    links = coo_matrix((np.ones(pairs.shape[0]), (pairs[:, 0], pairs[:, 1])), shape=(found.size,) * 2)
    count, group = connected_components(links, directed=False)
    first = np.full(count, found.size)
    np.minimum.at(first, group, np.arange(found.size))  # each group's first point (the earliest block's)
    joined[found] = joined[found[first[group]]]
    return joined


def fields_left_out(pieces: list, named: list, path: str, point_data: dict, cell_data: dict, *,
                    own: dict | None = None, part: str = "block", whole: str = "the multiblock file",
                    holding_fix: str | None = None) -> tuple:
    """The fields some blocks hold and the joined mesh does not (not held by every block, or with other
    components), each with why and the fix: ``{name: (why, fix)}``, which the message of a field not
    found gives; and the fields whose copy on cells is left out while their copy on points is kept,
    ``{name: why}``: :func:`phasegauge.model.fields.named_field` warns when it reads that point copy in
    place of the cell copy it prefers (a point copy left out is not said: the cell copy is read anyway).
    ``own``: the multiblock file's own time (:func:`own_time`) where the caller has it already; ``part`` and
    ``whole``: the words for a piece and what names the pieces; ``holding_fix``: the fix of a field not every
    piece holds, in place of measuring a multiblock's blocks alone."""
    names = [(name or os.path.splitext(os.path.basename(file))[0]) for name, file in named]
    if len(set(names)) < len(names):  # datasets named alike in several regions: named by their files
        names = [os.path.relpath(file, os.path.dirname(os.path.abspath(path))) for _, file in named]
    on = {"cells": [set(p.cell_data) for p in pieces], "points": [set(p.point_data) for p in pieces]}
    joined = {"cells": cell_data, "points": point_data}

    def held(block: int) -> str:
        where = {f: " and ".join(w for w in ("cells", "points") if f in on[w][block])
                 for f in on["cells"][block] | on["points"][block]}
        return f"{names[block]}: " + (", ".join(f"{f} on {w}" for f, w in sorted(where.items())) or "no fields")

    shown = None  # every block's fields, said only where a field is lost
    out, swapped = {}, {}
    for field in sorted(set().union(*on["cells"], *on["points"])):
        lost = [w for w in ("cells", "points") if any(field in h for h in on[w]) and field not in joined[w]]
        if not lost:
            continue
        where = lost[0]
        having = [k for k, h in enumerate(on[where]) if field in h]
        shown = shown or "; ".join(held(k) for k in range(len(pieces)))
        if len(having) == len(pieces):
            why = f"the {part}s hold it on {where} with different components ({shown})"
            fix = "write it with the same components in every block"
        else:
            lacking = [names[k] for k in range(len(pieces)) if k not in having]
            why = (f"{part}{'s' if len(lacking) > 1 else ''} {', '.join(lacking)} of {whole} "
                   f"hold{'' if len(lacking) > 1 else 's'} no '{field}' on {where} ({shown})")
            fix = holding_fix or _holding_blocks_fix(path, [named[k][1] for k in having],
                                                     [names[k] for k in having], own)
        kept = "points" if where == "cells" else "cells"
        if field in joined[kept]:
            if where == "cells":
                swapped[field] = why
            continue
        out[field] = (why, fix)
    return out, swapped


def _holding_blocks_fix(path: str, files: list, names: list, own: dict | None = None) -> str:
    """How to measure only the blocks of a multiblock step that hold a field: a glob of one block's files
    would make each other block a step, and would lose the time the ``.vtm`` files store (``own``, the
    file's :func:`own_time`, read here when not given)."""
    from ._formats import time_from_field_data

    copies = f"copies of the .vtm files naming only block{'s' if len(names) > 1 else ''} {', '.join(names)}"
    if len(files) > 1:
        return f"measure the blocks holding it alone: give {copies} (each keeps its step's time)"
    time = time_from_field_data(own_time(path) if own is None else own, path)
    if time is None:  # the block files' own times (or none) are the steps'
        return (f"measure the block holding it alone: give its files as a quoted glob (such as "
                f"'{os.path.relpath(files[0])}' with a * for the step), or {copies}")
    # the time as the CSV tables write it: the shortest text that reads back as the same number
    line = f"{float(time)!r},{os.path.relpath(files[0], os.path.dirname(os.path.abspath(path)))}"
    return (f"measure the block holding it alone: give a 'time,path' listing of its files with the .vtm files' "
            f"times, beside them (one line a step, as '{line}'), or {copies}")


def _shared(pieces, kind: str, name: str) -> bool:
    """True when every piece holds the field with one shape of component."""
    shapes = set()
    for p in pieces:
        data = getattr(p, kind)
        if name not in data:
            return False
        arrays = data[name] if kind == "cell_data" else [data[name]]
        shapes.update(np.asarray(a).shape[1:] for a in arrays)
    return len(shapes) == 1


def own_time(path: str, *, decode: bool = True):
    """The time a multiblock file stores in its own ``<FieldData>`` (VTK's multiblock writer puts the
    step's ``TimeValue`` there, not in the blocks), as a one-value field-data dict ``{name: array}``; {} when
    it stores none, and :data:`~phasegauge.io._formats.TIME_NEEDS_FULL_READ` when the value is stored in binary
    and ``decode`` is False. Binary values are decoded by VTK's own multiblock reader, given the file without
    its blocks (so that no block is read). Parallel files (``.pvtu``) store no time of their own here."""
    try:
        root = ET.parse(path).getroot()
    except (ET.ParseError, OSError):
        return {}
    return _own_time_of(root, decode=decode)


def _own_time_of(root, *, decode: bool = True):
    """:func:`own_time` of the file's parsed root (left unchanged)."""
    from ._formats import TIME_ARRAY_NAMES, TIME_NEEDS_FULL_READ

    if root.get("type") not in ("vtkMultiBlockDataSet", "vtkMultiPieceDataSet"):
        return {}
    arrays = {a.get("Name"): a for field in root.findall("FieldData") for a in field.findall("DataArray")}
    name = next((n for n in TIME_ARRAY_NAMES if n in arrays), None)
    if name is None:
        return {}
    array = arrays[name]
    if array.get("format", "ascii") == "ascii":  # no format: text, as some writers leave it (VTK reads none)
        dtype = np.float32 if array.get("type") == "Float32" else np.float64
        words = (array.text or "").split()[:1]
        try:
            return {name: np.array(words, dtype=dtype)} if words else {}
        except ValueError:  # not a number: said by the time's own check
            return {name: np.array([(array.text or "").strip()], dtype=object)}
    if not decode:
        return TIME_NEEDS_FULL_READ
    decoded = _decoded_field_data(root, name)
    return decoded if any(np.size(v) for v in decoded.values()) else {}  # an empty decode is no time


def _decoded_field_data(root, name: str) -> dict:
    """The field-data array ``name`` of a multiblock file's own ``<FieldData>``, decoded by VTK's multiblock
    reader from a copy of the file without its blocks (``root`` left unchanged); {} when VTK cannot read it."""
    import tempfile

    from vtkmodules.util.numpy_support import vtk_to_numpy
    from vtkmodules.vtkIOXML import vtkXMLMultiBlockDataReader

    bare = ET.Element(root.tag, root.attrib)
    for node in root:
        kept = ET.SubElement(bare, node.tag, node.attrib)
        kept.text, kept.tail = node.text, node.tail
        if node.tag == "FieldData":
            kept.extend(node)  # (the arrays themselves are shared, not changed)
    with tempfile.TemporaryDirectory() as folder:
        copy = os.path.join(folder, "time.vtm")
        ET.ElementTree(bare).write(copy)
        reader = vtkXMLMultiBlockDataReader()
        reader.SetFileName(copy)
        reader.Update()
    output = reader.GetOutput()
    array = output.GetFieldData().GetAbstractArray(name) if output is not None else None
    return {name: np.asarray(vtk_to_numpy(array)).ravel()} if array is not None else {}


def _with_own_time(mesh, path: str, block: str, own: dict):
    """``mesh`` (the step's volume blocks read) with the time the multiblock file stores itself (``own``, its
    :func:`own_time`), when it stores one, in place of the blocks'; where the two differ,
    ``mesh.time_disagreement`` says so (the series warns of it where the step's time is the file's)."""
    from ._formats import TIME_ARRAY_NAMES, time_from_field_data

    if not own:
        return mesh
    field_data = dict(mesh.field_data or {})
    time = time_from_field_data(own, path)
    if time is None:
        return mesh
    theirs = time_from_field_data(field_data, path)
    if theirs is not None and abs(theirs - time) > max(time.resolution, theirs.resolution):
        # said by the series where the files' times are used (a listing's times make it moot)
        mesh.time_disagreement = (f"the multiblock file stores time {float(time)!r} and its block "
                                  f"{block or 'first'} stores {float(theirs)!r}: the multiblock file's time is used")
    for name in TIME_ARRAY_NAMES:
        field_data.pop(name, None)
    field_data.update(own)
    mesh.field_data = field_data
    return mesh


def peek_multiblock_time(path: str):
    """The time the multiblock file stores itself (binary decoded here: the step's blocks are not read for
    it), else the one stored in its first volume block (see :func:`phasegauge.io._formats.peek_time` and
    :func:`own_time`)."""
    from ._formats import peek_time, time_from_field_data

    own = own_time(path)  # decoded when binary: a few bytes, no block read
    if own:
        return time_from_field_data(own, path)
    try:
        blocks = multiblock_blocks(path)
    except UnreadableFileError:
        return None
    first = blocks.volume[0][1]
    return peek_time(first) if os.path.exists(first) else None


def without_indexed_files(files: list) -> list:
    """``files`` without those an index file among them names: the pieces of a parallel step written
    beside its ``.pvtu`` (or a multiblock's blocks beside it) are read through their index only."""
    named = set()
    for f in files:
        if is_index_file(f):
            named.update(os.path.abspath(block) for block in multiblock_data_files(f))
    return [f for f in files if os.path.abspath(f) not in named] if named else files


def is_index_file(path) -> bool:
    """True for a VTK XML file that indexes the files of one step (:data:`INDEX_SUFFIXES`)."""
    return os.fspath(path).lower().endswith(INDEX_SUFFIXES)


FORMATS = (register_format("vtm", INDEX_SUFFIXES, read=read_multiblock, peek_time=peek_multiblock_time),)
