"""meshio behind the project's model: every use of meshio's readers, public or private, is here
(and in :mod:`._meshio_xdmf`, its XDMF time-series reader).

* :func:`read_with_meshio` reads one file with meshio's reader of a format (the
  format modules :mod:`._vtk` and :mod:`._xdmf` register it), and says in the
  user's terms what is wrong with a file meshio fails on;
* :func:`mesh_and_fields` turns what meshio read into a :class:`Mesh` (a kept one
  of a :class:`MeshPool` when the points and cells are the same) and fields.

Two small additions are made to meshio's tables before it reads: VTK pixel (8)
and voxel (11) cells, which VTK's own writers produce when an image grid is saved
as an unstructured grid; :mod:`phasegauge.model.mesh` turns them into quads and
hexahedra.
"""

from __future__ import annotations

import contextlib
import io
import os
import warnings
from dataclasses import dataclass, field

import numpy as np

from ..errors import (FieldShapeError, InputFileNotFound, MeshWarning, PhasegaugeWarning, UnreadableFileError,
                      UnsupportedMeshError, short_text)
from ..model._places import coincident_points, corner_means, first_copies
from ..model.mesh import Mesh
from ._cells_refused import cell_type_refused, check_cells_left_out
from ._decomposed_cells import mark_decomposed_cells

__all__ = ["StepFields", "read_with_meshio", "new_mesh", "mesh_and_fields", "step_fields",
           "diagnose_read_failure", "hdf5_problem"]


def ensure_vtk_extras() -> None:
    """Teach meshio VTK's pixel (8) and voxel (11) cells (idempotent: it only adds missing entries).

    VTK's own writers produce them when an image grid is saved as an unstructured grid;
    :class:`phasegauge.model.mesh.Mesh` turns them into quads and hexahedra.
    """
    import meshio._common as common
    import meshio._mesh as mesh_module
    import meshio._vtk_common as vtk_common

    _check_vtu_cell_data_lengths()
    vtk_common.vtk_to_meshio_type.setdefault(8, "pixel")
    vtk_common.vtk_to_meshio_type.setdefault(11, "voxel")
    # convex point sets come through meshio's reading of cells of any size, marked as theirs
    vtk_common.vtk_to_meshio_type.setdefault(41, CONVEX_POINT_SET)
    for name, nodes, dim in (("pixel", 4, 2), ("voxel", 8, 3)):
        common.num_nodes_per_cell.setdefault(name, nodes)
        mesh_module.topological_dimension.setdefault(name, dim)


def _check_vtu_cell_data_lengths() -> None:
    """Make meshio's VTU reader refuse cell data longer or shorter than the cells (idempotent).

    The reader slices each cell array by the cells of each type and drops what is left over, so
    a cell field of the wrong length would read without a word; the check wraps the one function
    that does the slicing.
    """
    import meshio.vtu._vtu as vtu

    if getattr(vtu.vtk_cells_from_data, "checks_cell_data_lengths", False):
        return
    original = vtu.vtk_cells_from_data

    def vtk_cells_from_data(connectivity, offsets, types, cell_data_raw):
        for name, values in cell_data_raw.items():
            if len(values) != len(types):
                raise ValueError(f"cell field '{name}' has {len(values)} values for {len(types)} cells "
                                 f"({len(values) - len(types):+d})")
        return original(connectivity, offsets, types, cell_data_raw)

    vtk_cells_from_data.checks_cell_data_lengths = True
    vtu.vtk_cells_from_data = vtk_cells_from_data


@dataclass
class StepFields:
    """Fields of one step, joined over the analysed cell blocks.

    Attributes
    ----------
    point_data : dict of str to ndarray of shape (n_points,) or (n_points, k)
    cell_data : dict of str to ndarray of shape (n_cells,) or (n_cells, k)
    field_data : dict of str to ndarray
        Whole-dataset values (such as a stored time value).
    fields_left_out : dict of str to (str, str)
        Fields the file holds that were not read, with why and the fix (a multiblock file's field
        that not every block holds): the message of a field not found gives them.
    cell_copies_left_out : dict of str to str
        Fields whose copy on cells was not read (not every block holds it) while their copy on points
        was, with why: reading the point copy in its place is warned of.
    """

    point_data: dict = field(default_factory=dict)
    cell_data: dict = field(default_factory=dict)
    field_data: dict = field(default_factory=dict)
    fields_left_out: dict = field(default_factory=dict)
    cell_copies_left_out: dict = field(default_factory=dict)

    def names(self) -> list:
        return sorted(set(self.point_data) | set(self.cell_data))


class _ConvexPointSetName(str):
    """meshio's name of VTK convex point set cells (41): equal to ``'polygon'``, so meshio reads
    them as cells of any size (without a warning per step), and told apart by its class."""

    __slots__ = ()

    def __reduce__(self):
        return (_ConvexPointSetName, (str(self),))


CONVEX_POINT_SET = _ConvexPointSetName("polygon")


def convex_point_sets(raw):
    """Replace the convex point set blocks of a meshio mesh by ordinary cells (in place).

    Recognised cells keep their row of cell data; cells split about their centre repeat it on
    every piece, are marked as pieces of their cell (``raw.cell_pieces``, which the mesh keeps as
    :attr:`Mesh.cell_parents`: cell sizes and counts are the whole cells'), and their centres are
    added as points (point data: the corners' mean); ``raw.face_centres``, when set, names face
    centres among the points already (a polyhedra split's), shared the same way. The hexahedra,
    wedges and pyramids that meet split cells are split too (:func:`split_beside`). How the
    cells were read is kept as ``raw.convex_point_sets`` (a phrase), else None.
    """
    from meshio import CellBlock

    from ..model.convex_cells import ConvexCells, convert_convex_point_sets, split_beside
    from ..model.polyhedra import SplitCentres, joined_centres

    raw.convex_point_sets = None
    marked = [isinstance(b.type, _ConvexPointSetName) for b in raw.cells]
    if not any(marked):
        return raw
    new_blocks, new_data, pieces = [], {name: [] for name in raw.cell_data}, []
    earlier = getattr(raw, "cell_pieces", None) or [None] * len(raw.cells)
    # the file's number of each cell goes with the cells as a cell array does (under a name no file uses)
    new_data[_FILE_ROWS] = []
    rows_in = {**raw.cell_data, _FILE_ROWS: file_rows(raw)}
    points = np.asarray(raw.points, dtype=np.float64)
    if points.shape[1] < 3:
        points = np.hstack([points, np.zeros((len(points), 3 - points.shape[1]))])
    # faces named by the places of their corners (cells written with their own copies of them share faces)
    out = ConvexCells(same_points=first_copies(points))
    out.face_centres = {out.face_key(key): at for key, at in (getattr(raw, "face_centres", None) or {}).items()}
    for i, block in enumerate(raw.cells):
        if not marked[i]:
            new_blocks.append((str(block.type), block.data))
            pieces.append(earlier[i])
            for name, arrays in rows_in.items():
                new_data[name].append(arrays[i])
            continue
        start = len(out.blocks)
        convert_convex_point_sets(points, np.asarray(block.data), out)
        for (cell_type, cells), rows, split in zip(out.blocks[start:], out.source[start:], out.split[start:]):
            new_blocks.append((cell_type, cells))
            pieces.append(rows if split else None)  # the row of its input cell in this block
        for name, arrays in rows_in.items():
            values = np.asarray(arrays[i])
            new_data[name].extend(values[rows] for rows in out.source[start:])
    # the hexahedra, wedges and pyramids meeting split cells are split alike, so shared faces conform
    new_blocks, pieces, new_data = split_beside(points, new_blocks, pieces, new_data, out)
    if out.centre_corners:
        corners = out.centre_corners
        rows = np.concatenate([c.ravel() for c in corners])  # (the polyhedra's centres are made alike)
        offsets = np.concatenate([[0], np.cumsum(np.concatenate([np.full(len(c), c.shape[1]) for c in corners]))])
        raw.points = np.vstack([points, corner_means(points, rows, offsets)])
        added = SplitCentres(np.arange(len(points), len(raw.points), dtype=np.int64), rows, offsets)
        raw.split_centres = joined_centres([(0, getattr(raw, "split_centres", None)), (0, added)])
        for name, values in list(raw.point_data.items()):
            values = np.asarray(values)
            if np.issubdtype(values.dtype, np.number):
                raw.point_data[name] = np.concatenate([values, corner_means(values, rows, offsets)])
    raw.cells = [CellBlock(t, c) for t, c in new_blocks]
    raw.cell_rows = new_data.pop(_FILE_ROWS)
    raw.cell_data = new_data
    if any(p is not None for p in pieces):
        raw.cell_pieces = pieces
    raw.convex_point_sets = f"convex point set cells (VTK 41) read {out.words()}"
    return raw


_FILE_ROWS = "\0file rows"  # the cell array that carries the file's cell numbers through a split


def file_rows(raw) -> list:
    """The file's number of each cell of ``raw``, an array per block: ``raw.cell_rows`` where a reader set it (cells
    it split or reordered), else the blocks' cells counted on in order as the file lists them (blocks of lines or
    vertices too, though the mesh leaves them out)."""
    rows = getattr(raw, "cell_rows", None)
    if rows is not None:
        return rows
    sizes = [len(b.data) for b in raw.cells]
    starts = np.concatenate([[0], np.cumsum(sizes)]).astype(np.int64)
    return [np.arange(a, a + n, dtype=np.int64) for a, n in zip(starts, sizes)]


def file_cells(raw, mesh: Mesh):
    """The file's number of each cell of ``mesh`` read from ``raw`` (:attr:`Mesh.file_cells`), or None where the
    mesh's own numbers (of its whole cells, :attr:`Mesh.cell_parents`) are the file's: no block before or among
    the kept ones was left out, and no reader split or reordered cells."""
    kept = mesh.kept_blocks
    sizes = [len(b.data) for b in raw.cells]
    if getattr(raw, "cell_rows", None) is None and mesh.cell_parents is None \
            and all(i in kept or sizes[i] == 0 for i in range(max(kept) + 1)):
        return None
    rows = file_rows(raw)
    numbers = np.concatenate([np.asarray(rows[i], dtype=np.int64) for i in kept])
    own = mesh.cell_parents if mesh.cell_parents is not None else np.arange(mesh.n_cells)
    return None if np.array_equal(numbers, own) else numbers


def read_with_meshio(path: str, fmt: str, *, fallback=None):
    """Read ``path`` with meshio's reader for ``fmt``, turning any failure into an :class:`UnreadableFileError`.

    ``fallback(path)``, when given, is tried after meshio failed: a mesh, or None to report
    meshio's failure.
    """
    ensure_vtk_extras()
    try:
        # the reader is called directly: meshio.read() ends the process on a read error
        printed = io.StringIO()
        with warnings.catch_warnings(), contextlib.redirect_stdout(printed), contextlib.redirect_stderr(printed):
            warnings.simplefilter("ignore")
            raw = meshio_reader(fmt)(path)
    except MemoryError as exc:  # a size the header checks did not catch
        raise UnreadableFileError(f"reading it needs more memory than this machine can give ({short_text(exc)})",
                                  where=path, fix="the header may be damaged: write the step again; a real mesh "
                                                  "this large needs a machine with more memory") from None
    except Exception as exc:  # meshio raises many kinds: say what is wrong with the file
        if fallback is not None:
            raw = fallback(path)
            if raw is not None:
                return raw
        raise diagnose_read_failure(path, fmt, exc) from None
    check_cells_left_out(printed.getvalue(), path)
    return mark_decomposed_cells(convex_point_sets(raw), path)


def new_mesh(points, cells, *, point_data=None, cell_data=None, field_data=None):
    """A meshio mesh built from arrays, for readers that join pieces (``cells``: ``(type, data)`` pairs)."""
    import meshio

    return meshio.Mesh(points, cells, point_data=point_data or {}, cell_data=cell_data or {},
                       field_data=field_data or {})


def meshio_reader(fmt: str):
    """meshio's reader function of format ``fmt`` (``'vtu'``, ``'vtk'``, ``'xdmf'``)."""
    import meshio

    return meshio._helpers.reader_map[fmt]


_STOPPED = "the solver may have stopped while writing it: write the step again or remove it from the series"
_SURFACE_FILE = "holds a surface ({kind}, such as a boundary patch), not a volume mesh"
_SURFACE_FIX = ("give the step's volume (internal) mesh: solver converters write it beside the boundary "
                "patches, which hold only the surface cells")


def diagnose_read_failure(path: str, fmt: str, exc: BaseException):
    """The error to raise when meshio failed on ``path``: what is wrong, in the user's terms.

    Looks at the file only after the reader failed: HDF5 files an XDMF file
    names (missing, truncated), XML that ends early (a truncated ``.vtu`` or
    ``.xdmf``), a legacy VTK header, or content that is no mesh at all.
    """
    hdf5 = hdf5_problem(exc, path)
    if hdf5 is not None:
        return hdf5
    refused = cell_type_refused(exc, path)
    if refused is not None:
        return refused
    with open(path, "rb") as handle:
        head = handle.read(512)
    start = _printable_start(head)
    if fmt in ("vtu", "xdmf"):
        if not head.lstrip(b"\xef\xbb\xbf \t\r\n").startswith(b"<"):
            fix = ("rename it to .vtk" if head.startswith(b"# vtk DataFile") else
                   "give a file written by a VTK or XDMF writer")
            kind = "a VTK XML file (.vtu)" if fmt == "vtu" else "an XDMF file"
            return UnreadableFileError(f"cannot be read as a mesh: not {kind}, it starts with {start!r}", where=path,
                                       fix=fix)
        problem = _xml_problem(path)
        if problem is not None:
            return UnreadableFileError(f"cannot be read as a mesh: {problem}", where=path, fix=_STOPPED)
        return UnreadableFileError("cannot be read as a mesh: the XML is complete but its data is not "
                                   f"({short_text(exc)})", where=path,
                                   fix="write the file again with a VTK or XDMF writer")
    if fmt == "vtk":
        if head.startswith(b"# vtk DataFile") and b"\nDATASET POLYDATA" in head.upper():
            return UnreadableFileError(_SURFACE_FILE.format(kind="a legacy VTK POLYDATA file"), where=path,
                                       fix=_SURFACE_FIX)
        if not head.startswith(b"# vtk DataFile"):
            fix = ("rename it to .vtu" if head.lstrip().startswith(b"<") else
                   "give a file written by a VTK writer")
            return UnreadableFileError(f"cannot be read as a mesh: not a legacy VTK file, it starts with {start!r}",
                                       where=path, fix=fix)
        return UnreadableFileError("cannot be read as a mesh: the VTK data ends early or is damaged "
                                   f"({short_text(exc)})", where=path, fix=_STOPPED)
    return UnreadableFileError(f"cannot be read as a mesh ({short_text(exc)})", where=path,
                               fix="check that the file is complete VTK (.vtu, .vtk) or XDMF")


def _printable_start(head: bytes, size: int = 32) -> str:
    text = head[:size].decode("utf-8", errors="replace")
    text = "".join(ch if ch.isprintable() else " " for ch in text)
    return " ".join(text.split())


def _xml_problem(path: str) -> str | None:
    """Why the XML of ``path`` does not parse (None when it parses)."""
    import xml.etree.ElementTree as ET

    size = os.path.getsize(path)
    try:
        for _ in ET.iterparse(path, events=("end",)):
            pass
    except ET.ParseError as exc:
        line, column = exc.position
        text = str(exc).split(":")[0]
        if text in ("no element found", "unclosed token") or "unclosed" in text:
            return f"the file ends before its XML is complete (line {line}, {size} bytes), so it is truncated"
        return f"the XML is damaged at line {line}, column {column} ({text})"
    return None


def hdf5_problem(exc: BaseException, xdmf_path: str):
    """An error naming the HDF5 file behind ``exc`` (missing or truncated), or None."""
    text = " ".join(str(exc).split())
    if "unable to open file" not in text.lower() and "truncated file" not in text.lower():
        return None
    import re

    xdmf = os.path.basename(xdmf_path)
    match = re.search(r"name = '([^']+)'", text)
    if match:
        name = os.path.basename(match.group(1))
    else:
        from ._xdmf import data_file_names

        names = data_file_names(xdmf_path)
        name = names[0] if len(names) == 1 else "an HDF5 file it names"
    if isinstance(exc, FileNotFoundError) or "No such file" in text:
        return InputFileNotFound(f"the HDF5 file '{name}' that {xdmf} names is missing", where=xdmf_path,
                                 fix=f"put {name} back next to {xdmf} (the XDMF file holds only the layout; "
                                     "the numbers are in the HDF5 file)")
    sizes = re.search(r"eof = (\d+).*stored_eof = (\d+)", text)
    detail = f" ({sizes.group(1)} of {sizes.group(2)} bytes)" if sizes else ""
    if "truncated" in text.lower():
        return UnreadableFileError(f"the HDF5 file '{name}' is truncated{detail}", where=xdmf_path, fix=_STOPPED)
    return UnreadableFileError(f"the HDF5 file '{name}' cannot be opened ({short_text(exc)})", where=xdmf_path,
                               fix=f"check {name}: it may be damaged or still being written")


_WRITE_AGAIN = "the step was written short or damaged: write it again or remove it from the series"


def join_cell_data(mesh: Mesh, cell_data: dict, where: str = "") -> dict:
    """Join meshio's per-block cell data over the analysed blocks of ``mesh``."""
    out = {}
    for name, arrays in cell_data.items():
        if len(arrays) != mesh.n_input_blocks:
            continue
        parts = [np.asarray(arrays[i]) for i in mesh.kept_blocks]
        try:
            out[name] = np.concatenate(parts) if len(parts) > 1 else parts[0]
        except ValueError:
            raise FieldShapeError(f"cell field '{name}' has blocks of different shapes",
                                  where=where, fix="write the field with one shape in every block") from None
        if out[name].shape[0] != mesh.n_cells:
            found = out[name].shape[0]
            raise FieldShapeError(f"cell field '{name}' has {found} values for {mesh.n_cells} cells "
                                  f"({found - mesh.n_cells:+d})", where=where, fix=_WRITE_AGAIN)
    return out


def mesh_and_fields(raw, where: str, pool=None) -> tuple[Mesh, StepFields]:
    """Turn a meshio mesh into a :class:`Mesh` (a kept one of ``pool`` when equal) and fields.

    A new mesh is checked once: point coordinates must be finite, and points
    that coincide exactly (files that store the corners of every cell apart)
    are merged, with their point data averaged, so that neighbouring cells
    share their corners (:class:`MeshWarning`). The caller keeps the mesh in
    its pool.
    """
    if hasattr(raw, "use_pool"):  # polyhedra (io/_polyhedra.py): split once per mesh of the pool
        raw.use_pool(pool)
    _check_raw_cells(raw, where)
    try:
        candidate = Mesh(raw.points, raw.cells, pieces=getattr(raw, "cell_pieces", None))
    except UnsupportedMeshError as err:
        raise err.with_where(where) from None
    candidate.file_cells = file_cells(raw, candidate)
    mesh = None if pool is None else pool.match(candidate)
    if mesh is None:
        with warnings.catch_warnings(record=True) as caught:
            warnings.simplefilter("always")
            mesh = _checked_mesh(candidate, raw, where)
        mesh.file_cells = candidate.file_cells
        if mesh is not candidate and pool is not None:
            mesh = pool.match(mesh) or mesh
        notes = [w.message for w in caught if isinstance(w.message, PhasegaugeWarning)]
        mesh.memo(_MESH_NOTES, lambda: notes)
        for w in caught:  # (other libraries' warnings once, as they came)
            if not isinstance(w.message, PhasegaugeWarning):
                warnings.warn_explicit(w.message, w.category, w.filename, w.lineno)
    repeat_mesh_notes(mesh, where)
    note = getattr(raw, "convex_point_sets", None)
    if note:
        mesh.memo("convex_point_sets", lambda: note)
    if hasattr(raw, "keep_split"):
        raw.keep_split(mesh)
    _keep_centres(mesh, getattr(raw, "split_centres", None))
    return mesh, step_fields(mesh, raw, where)


#: ``Mesh.memo`` key of the warnings the check of a new mesh gave (:func:`repeat_mesh_notes`)
_MESH_NOTES = "mesh_read_warnings"


def repeat_mesh_notes(mesh: Mesh, where: str) -> None:
    """Give the warnings the check of ``mesh`` gave when it was read first (single-precision points,
    duplicate points merged) again, for the step at ``where``: each step of the mesh says so, as
    ``check_mesh`` does, so the run's count of steps is the same however many processes read the mesh
    and whichever step a resumed run reads first."""
    for note in mesh.memo(_MESH_NOTES, lambda: (), keep=False):
        warnings.warn(type(note)(note.what, where=where), stacklevel=3)


def _keep_centres(mesh: Mesh, centres) -> None:
    """Give ``mesh`` the corner lists of the centres a reader added to split cells (``raw.split_centres``), as
    numbered among its points after their merge (``Mesh.memo(SPLIT_CENTRES)``; see ``with_centre_means``)."""
    from ..model.polyhedra import SPLIT_CENTRES

    if centres is not None:  # (once per mesh: a pooled mesh has them from its first step)
        mesh.memo(SPLIT_CENTRES, lambda: centres.merged(mesh.point_merge, mesh.n_points))


_SOLID = ("tetra", "hexahedron", "wedge", "pyramid", "voxel", "tetra10", "hexahedron20", "hexahedron27",
          "wedge15", "pyramid13", "polyhedron")


def _check_raw_cells(raw, where: str) -> None:
    """Refuse cells a file stores in a form that reads without error but means something else.

    Corner numbers stored as floating-point numbers are taken only when every one is a whole
    number (:class:`MeshWarning` says so, with the count); points with two coordinates cannot
    carry 3D cells.
    """
    points = np.asarray(raw.points)
    solid = sorted({b.type for b in raw.cells if b.type in _SOLID or b.type.startswith("polyhedron")})
    if points.ndim == 2 and points.shape[1] == 2 and solid:
        raise UnsupportedMeshError(f"the points have 2 coordinates but the cells are 3D ({', '.join(solid)})",
                                   where=where, fix="write the points with x, y and z (XDMF GeometryType XYZ)")
    for block in raw.cells:
        data = np.asarray(block.data) if not isinstance(block.data, list) else None
        if data is None or data.dtype.kind != "f":
            continue
        whole = np.isfinite(data) & (data == np.round(data))
        if not whole.all():
            bad = int(np.count_nonzero(~whole.all(axis=-1))) if data.ndim == 2 else int(np.count_nonzero(~whole))
            raise UnsupportedMeshError(f"{bad} {block.type} cells have corner point numbers that are not whole "
                                       "numbers (the cells are stored as floating-point numbers)", where=where,
                                       fix="write the cells as integers (XDMF Topology DataType=\"Int\")")
        warnings.warn(MeshWarning(f"the {len(data)} {block.type} cells are stored as floating-point numbers; "
                                  "read as the whole numbers they hold", where=where), stacklevel=4)


def step_fields(mesh: Mesh, raw, where: str, *, field_data: bool = True) -> StepFields:
    """The fields of a meshio mesh on the points and analysed cells of ``mesh``."""
    point_data = point_fields(mesh, raw.point_data, where=where)
    cell_data = join_cell_data(mesh, raw.cell_data, where=where)
    fields = {k: np.asarray(v) for k, v in (raw.field_data or {}).items()} if field_data else {}
    return StepFields(point_data, cell_data, fields, dict(getattr(raw, "fields_left_out", None) or {}),
                      dict(getattr(raw, "cell_copies_left_out", None) or {}))


def point_fields(mesh: Mesh, point_data: dict, where: str = "") -> dict:
    """Point data of a step on the points of ``mesh`` (averaged over merged duplicate points)."""
    merge = mesh.point_merge
    n_source = mesh.n_points if merge is None else merge.size
    out = {}
    for name, values in point_data.items():
        values = np.asarray(values)
        if values.shape[0] != n_source:
            raise FieldShapeError(f"point field '{name}' has {values.shape[0]} values for "
                                  f"{n_source} points", where=where, fix="the file is damaged; write it again")
        if merge is not None and np.issubdtype(values.dtype, np.number):
            values = _average_merged(values, merge, mesh.n_points)
        out[name] = values
    return out


def _average_merged(values: np.ndarray, merge: np.ndarray, n: int) -> np.ndarray:
    flat = values.reshape(values.shape[0], -1).astype(np.float64)
    counts = np.bincount(merge, minlength=n).astype(np.float64)
    sums = np.stack([np.bincount(merge, weights=flat[:, k], minlength=n) for k in range(flat.shape[1])], axis=1)
    mean = sums / counts[:, None]
    return mean.reshape((n,) + values.shape[1:])


#: points stored in single precision placed no closer than this share of the median cell size are
#: warned of (our threshold: the cells' sizes, volumes and the widths then err by about that share)
SINGLE_POINTS_SHARE = 0.01


def _warn_single_precision_points(mesh: Mesh, raw, where: str) -> None:
    """Warn (:class:`MeshWarning`) when single-precision points far from the origin against the cell size
    (coordinates near 1e3 with cells of 1e-3) are placed only to a share of a cell."""
    if np.asarray(raw.points).dtype != np.float32 and not getattr(raw, "single_precision_points", False):
        return
    axes = list(mesh.plane_axes) if mesh.dimension == 2 else [0, 1, 2]  # a flat axis holds no cell size
    used = mesh.points[mesh.used_points][:, axes]
    if used.size == 0:
        return
    far = float(np.abs(used).max())
    spacing = float(np.spacing(np.float32(far)))
    size = float(np.median(mesh.cell_sizes))
    if size > 0 and spacing > SINGLE_POINTS_SHARE * size:
        warnings.warn(MeshWarning(f"the points are stored in single precision: near |x| = {far:.4g} they are "
                                  f"placed only to {spacing:.2g}, {spacing / size:.1%} of the median cell size "
                                  f"({size:.2g}), so cell sizes, volumes and widths err by about that share; write "
                                  "the points in double precision (or nearer the origin)", where=where), stacklevel=4)


def _checked_mesh(mesh: Mesh, raw, where: str) -> Mesh:
    """Check a newly built mesh; merge coincident points."""
    finite = np.isfinite(mesh.points).all(axis=1)
    bad = 0 if finite.all() else int(np.count_nonzero(~finite[mesh.used_points]))
    if bad:  # (before the plane check: a NaN point fails every comparison there)
        raise UnsupportedMeshError(f"{bad} points of the cells have NaN or Inf coordinates", where=where,
                                   fix="the file is damaged or the mesh motion diverged; write the step again")
    if mesh.dimension == 2:
        try:
            mesh.plane_axes  # a curved surface in 3D (a boundary patch) is no 2D domain
        except UnsupportedMeshError as err:
            raise err.with_where(where) from None
    _warn_single_precision_points(mesh, raw, where)
    inverse, n_unique = coincident_points(mesh.points)
    if n_unique == mesh.n_points:
        return mesh
    blocks = [(b.type, inverse[np.asarray(b.data, dtype=np.int64)]) for b in raw.cells]
    points = np.zeros((n_unique, 3))
    points[inverse] = mesh.points
    merged = Mesh(points, blocks, point_merge=inverse, pieces=getattr(raw, "cell_pieces", None))
    # the file's own points only: centres a reader added to split cells fall on each other (a face's centre
    # added by both its cells) or on a file point by design, no duplicate of the file
    own = np.ones(mesh.n_points, dtype=bool)
    centres = getattr(raw, "split_centres", None)
    if centres is not None:
        own[centres.points] = False
    classes = inverse[own].astype(np.int64)
    sizes = getattr(raw, "block_sizes", None)
    if sizes is not None:  # a multiblock's blocks share their seams' points: merged across blocks, the join
        classes = classes * len(sizes) + np.repeat(np.arange(len(sizes)), sizes)[own]
    duplicates = int(np.count_nonzero(own)) - np.unique(classes).size
    if duplicates == 0:
        return merged
    from ._corner_copies import corner_copies_note

    note = corner_copies_note(raw, inverse, own, duplicates, where)  # a layout, not a finding: an info line
    warnings.warn(note or MeshWarning(f"{duplicates} duplicate points merged (cells share their corners "
                                      "now); point fields are averaged over the copies", where=where), stacklevel=3)
    return merged


