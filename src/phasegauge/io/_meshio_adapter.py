"""Reading one mesh file through meshio into the project's model.

meshio is the only reader. Two small additions are registered with it on first
use: VTK pixel (8) and voxel (11) cells, which VTK's own writers produce when an
image grid is saved as an unstructured grid; :mod:`phasegauge.model.mesh` turns them
into quads and hexahedra.
"""

from __future__ import annotations

import contextlib
import io
import os
import warnings
from dataclasses import dataclass, field

import numpy as np

from ..errors import (FieldShapeError, InputFileNotFound, MeshWarning, UnreadableFileError,
                      UnsupportedMeshError)
from ..model.mesh import Mesh

MESH_SUFFIXES = (".vtu", ".vtk", ".xdmf", ".xmf", ".vti", ".vtr", ".vts")
#: VTK XML structured formats meshio does not read: read with VTK's own readers (through pyvista)
STRUCTURED_SUFFIXES = (".vti", ".vtr", ".vts")
_FORMATS = {".vtu": "vtu", ".vtk": "vtk", ".xdmf": "xdmf", ".xmf": "xdmf"}

_registered = False


def _register_vtk_extras() -> None:
    global _registered
    if _registered:
        return
    import meshio._common as common
    import meshio._mesh as mesh_module
    import meshio._vtk_common as vtk_common

    vtk_common.vtk_to_meshio_type.setdefault(8, "pixel")
    vtk_common.vtk_to_meshio_type.setdefault(11, "voxel")
    for name, nodes, dim in (("pixel", 4, 2), ("voxel", 8, 3)):
        common.num_nodes_per_cell.setdefault(name, nodes)
        mesh_module.topological_dimension.setdefault(name, dim)
    _registered = True


@dataclass
class StepFields:
    """Fields of one step, joined over the analysed cell blocks.

    Attributes
    ----------
    point_data : dict of str to ndarray of shape (n_points,) or (n_points, k)
    cell_data : dict of str to ndarray of shape (n_cells,) or (n_cells, k)
    field_data : dict of str to ndarray
        Whole-dataset values (such as a stored time value).
    """

    point_data: dict = field(default_factory=dict)
    cell_data: dict = field(default_factory=dict)
    field_data: dict = field(default_factory=dict)

    def names(self) -> list:
        return sorted(set(self.point_data) | set(self.cell_data))


def read_meshio(path: str):
    """Read a file with meshio, turning any failure into an :class:`UnreadableFileError`."""
    import meshio

    _register_vtk_extras()
    if not os.path.exists(path):
        raise InputFileNotFound("file not found", where=path,
                                fix="check the path (quote globs so the shell does not expand them)")
    if os.path.isdir(path):
        raise UnreadableFileError("is a folder, not a mesh file", where=path,
                                  fix="give the folder itself as the series path")
    if os.path.getsize(path) == 0:
        raise UnreadableFileError("the file is empty", where=path,
                                  fix="the solver may have been stopped while writing; rewrite or remove the step")
    suffix = os.path.splitext(path)[1].lower()
    if suffix in STRUCTURED_SUFFIXES:
        return _read_with_vtk(path)
    fmt = _FORMATS.get(suffix)
    if fmt is None:
        raise UnreadableFileError("is not a .vtu, .vtk, .xdmf or .xmf file", where=path,
                                  fix="convert the file to VTK or XDMF")
    try:
        # the reader is called directly: meshio.read() ends the process on a read error
        with warnings.catch_warnings(), contextlib.redirect_stdout(io.StringIO()):
            warnings.simplefilter("ignore")
            return meshio._helpers.reader_map[fmt](path)
    except MemoryError:
        raise
    except Exception as exc:  # meshio raises many kinds: say what is wrong with the file
        if fmt == "vtk" and _legacy_structured(path):
            return _read_with_vtk(path)
        raise diagnose_read_failure(path, fmt, exc) from None


def _legacy_structured(path: str) -> bool:
    """True for a legacy VTK file holding a structured dataset (which meshio does not read)."""
    try:
        with open(path, "rb") as handle:
            head = handle.read(1024).upper()
    except OSError:
        return False
    import re

    return re.search(rb"\nDATASET\s+(STRUCTURED_POINTS|STRUCTURED_GRID|RECTILINEAR_GRID)\b", head) is not None


def _check_structured_sizes(data, path: str) -> None:
    """Refuse a structured dataset whose arrays do not fit its dimensions (a truncated file).

    VTK's readers hand a truncated file over with short arrays, and building cells from them can
    crash the process, so the sizes are checked before anything else touches the data.
    """
    dims = getattr(data, "dimensions", None)
    expected = int(np.prod(dims)) if dims is not None else data.n_points
    sizes = {"points": data.n_points}
    if hasattr(data, "points") and type(data).__name__ == "StructuredGrid":
        sizes["points"] = len(data.points)
    for name in data.point_data.keys():
        sizes[f"point field '{name}'"] = len(data.point_data[name])
    bad = {k: v for k, v in sizes.items() if v != expected}
    cells = int(np.prod([max(d - 1, 1) for d in dims])) if dims is not None else data.n_cells
    bad.update({f"cell field '{n}'": len(data.cell_data[n]) for n in data.cell_data.keys()
                if len(data.cell_data[n]) != cells})
    if bad or expected == 0:
        what = ", ".join(f"{k} has {v}" for k, v in bad.items()) or "no points"
        raise UnreadableFileError(f"the structured dataset does not fit its dimensions {tuple(dims or ())} "
                                  f"({what}), so it is truncated", where=path,
                                  fix="the solver may have stopped while writing it: write the step again or "
                                      "remove it from the series")


def _read_with_vtk(path: str):
    """Read a structured VTK dataset with VTK's own reader and hand it over as a meshio mesh."""
    try:
        import pyvista

        catcher = pyvista.VtkErrorCatcher(raise_errors=False)
        with warnings.catch_warnings(), catcher, contextlib.redirect_stderr(io.StringIO()):
            warnings.simplefilter("ignore")
            data = pyvista.read(path)
        if catcher.events:  # VTK reports a damaged or short file and hands over what it got
            first = catcher.events[0].alert.splitlines()[-1].strip()
            raise UnreadableFileError(f"VTK's reader reports the data is damaged or ends early ({first})",
                                      where=path, fix="the solver may have stopped while writing it: write the "
                                                      "step again or remove it from the series")
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            _check_structured_sizes(data, path)
            grid = data.cast_to_unstructured_grid()
            raw = pyvista.to_meshio(grid)
    except UnreadableFileError:
        raise
    except Exception as exc:
        raise UnreadableFileError(
            f"cannot be read as a structured VTK dataset ({_short(exc)})", where=path,
            fix="check that the file is complete and was fully written") from None
    if grid.n_cells == 0:
        raise UnreadableFileError("holds no cells", where=path,
                                  fix="the file may be truncated; write it again")
    raw.field_data = {k: np.asarray(data.field_data[k]) for k in data.field_data.keys()}
    return raw


def _short(exc: BaseException) -> str:
    text = " ".join(str(exc).split()) or type(exc).__name__
    return text if len(text) <= 120 else text[:117] + "..."


_STOPPED = "the solver may have stopped while writing it: write the step again or remove it from the series"


def diagnose_read_failure(path: str, fmt: str, exc: BaseException):
    """The error to raise when meshio failed on ``path``: what is wrong, in the user's terms.

    Looks at the file only after the reader failed: HDF5 files an XDMF file
    names (missing, truncated), XML that ends early (a truncated ``.vtu`` or
    ``.xdmf``), a legacy VTK header, or content that is no mesh at all.
    """
    hdf5 = hdf5_problem(exc, path)
    if hdf5 is not None:
        return hdf5
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
        return UnreadableFileError(f"cannot be read as a mesh: the XML is complete but its data is not ({_short(exc)})",
                                   where=path, fix="write the file again with a VTK or XDMF writer")
    if fmt == "vtk":
        if not head.startswith(b"# vtk DataFile"):
            fix = ("rename it to .vtu" if head.lstrip().startswith(b"<") else
                   "give a file written by a VTK writer")
            return UnreadableFileError(f"cannot be read as a mesh: not a legacy VTK file, it starts with {start!r}",
                                       where=path, fix=fix)
        return UnreadableFileError(f"cannot be read as a mesh: the VTK data ends early or is damaged ({_short(exc)})",
                                   where=path, fix=_STOPPED)
    return UnreadableFileError(f"cannot be read as a mesh ({_short(exc)})", where=path,
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
        names = _hdf5_names(xdmf_path)
        name = names[0] if len(names) == 1 else "an HDF5 file it names"
    if isinstance(exc, FileNotFoundError) or "No such file" in text:
        return InputFileNotFound(f"the HDF5 file '{name}' that {xdmf} names is missing", where=xdmf_path,
                                 fix=f"put {name} back next to {xdmf} (the XDMF file holds only the layout; "
                                     "the numbers are in the HDF5 file)")
    sizes = re.search(r"eof = (\d+).*stored_eof = (\d+)", text)
    detail = f" ({sizes.group(1)} of {sizes.group(2)} bytes)" if sizes else ""
    if "truncated" in text.lower():
        return UnreadableFileError(f"the HDF5 file '{name}' is truncated{detail}", where=xdmf_path, fix=_STOPPED)
    return UnreadableFileError(f"the HDF5 file '{name}' cannot be opened ({_short(exc)})", where=xdmf_path,
                               fix=f"check {name}: it may be damaged or still being written")


def _hdf5_names(xdmf_path: str) -> list:
    import re

    try:
        with open(xdmf_path, encoding="utf-8", errors="replace") as handle:
            text = handle.read(1 << 20)
    except OSError:
        return []
    return sorted(set(re.findall(r">\s*([^<>:\s]+\.(?:h5|hdf5|hdf))\s*:", text)))


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
    return out


#: meshes a process has built and keeps for later readers: a worker forked for a later run in the
#: same process finds the mesh here, with its cached measures and topology, instead of rebuilding them
_MESH_POOL: list = []


def remember_mesh(mesh: Mesh | None) -> None:
    """Keep ``mesh`` (the last two) for readers opened later in this process or its forks."""
    if mesh is not None and all(m is not mesh and m.signature != mesh.signature for m in _MESH_POOL):
        _MESH_POOL.append(mesh)
        del _MESH_POOL[:-2]


def _same_mesh(known: list, candidate: Mesh) -> Mesh | None:
    for mesh in known:
        if mesh.n_points == candidate.n_points and mesh.same_topology(candidate.points, candidate.blocks):
            return mesh
    return None


def mesh_and_fields(raw, path: str, previous: Mesh | None = None) -> tuple[Mesh, StepFields]:
    """Turn a meshio mesh into a :class:`Mesh` (reusing ``previous`` when equal) and fields.

    A new mesh is checked once: point coordinates must be finite, and points
    that coincide exactly (files that store the corners of every cell apart)
    are merged, with their point data averaged, so that neighbouring cells
    share their corners (:class:`MeshWarning`).
    """
    try:
        candidate = Mesh(raw.points, raw.cells)
    except UnsupportedMeshError as err:
        raise err.with_where(path) from None
    known = [m for m in [previous] + _MESH_POOL if m is not None]
    mesh = _same_mesh(known, candidate)
    if mesh is None:
        mesh = _checked_mesh(candidate, raw, path)
        if mesh is not candidate:
            mesh = _same_mesh(known, mesh) or mesh
    point_data = point_fields(mesh, raw.point_data, where=path)
    cell_data = join_cell_data(mesh, raw.cell_data, where=path)
    field_data = {k: np.asarray(v) for k, v in (raw.field_data or {}).items()}
    return mesh, StepFields(point_data, cell_data, field_data)


def point_fields(mesh: Mesh, point_data: dict, where: str = "") -> dict:
    """Point data of a step on the points of ``mesh`` (averaged over merged duplicate points)."""
    merge = getattr(mesh, "_point_merge", None)
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


def _checked_mesh(mesh: Mesh, raw, where: str) -> Mesh:
    """Check a newly built mesh; merge coincident points."""
    finite = np.isfinite(mesh.points).all(axis=1)
    bad = 0 if finite.all() else int(np.count_nonzero(~finite[mesh.used_points]))
    if bad:
        raise UnsupportedMeshError(f"{bad} points of the cells have NaN or Inf coordinates", where=where,
                                   fix="the file is damaged or the mesh motion diverged; write the step again")
    inverse, n_unique = _coincident_points(mesh.points)
    if n_unique == mesh.n_points:
        return mesh
    blocks = [(b.type, inverse[np.asarray(b.data, dtype=np.int64)]) for b in raw.cells]
    points = np.zeros((n_unique, 3))
    points[inverse] = mesh.points
    merged = Mesh(points, blocks)
    merged._point_merge = inverse
    warnings.warn(MeshWarning(f"{mesh.n_points - n_unique} duplicate points merged (cells share their corners "
                              "now); point fields are averaged over the copies", where=where), stacklevel=3)
    return merged


def _coincident_points(points: np.ndarray) -> tuple[np.ndarray, int]:
    """Index of each point among the distinct ones (exactly equal coordinates), and their number.

    Distinct points are numbered in order of first appearance. The coordinates' bits are
    mixed into one 64-bit key and sorted; only points whose key is not unique are compared
    exactly (a key shared by different points falls back to an exact sort of the rows).
    """
    points = np.asarray(points, dtype=np.float64)
    n = points.shape[0]
    if n < 2:
        return np.arange(n, dtype=np.int64), n
    with np.errstate(over="ignore"):
        key = np.zeros(n, dtype=np.uint64)
        for j in range(points.shape[1]):  # column by column: one column's copy at a time
            bits = (points[:, j] + 0.0).view(np.uint64)  # -0.0 -> 0.0
            bits += np.uint64(j + 1)
            key ^= bits
            key *= _MIX[j % len(_MIX)]
            key ^= key >> np.uint64(31)
        del bits
    ks = np.sort(key)
    if not np.any(ks[1:] == ks[:-1]):  # all keys differ, so do all points
        return np.arange(n, dtype=np.int64), n
    order = np.argsort(key)
    ks = key[order]
    repeated = ks[1:] == ks[:-1]
    # positions (in key order) of the runs of equal keys
    in_run = np.zeros(n, dtype=bool)
    in_run[1:] |= repeated
    in_run[:-1] |= repeated
    cand = order[in_run]  # the candidates, grouped by key
    ck = ks[in_run]
    new_run = np.concatenate([[True], ck[1:] != ck[:-1]])
    rows = points[cand] + 0.0
    same = np.all(rows[1:] == rows[:-1], axis=1)
    if np.any(~new_run[1:] & ~same):  # one key for different points: sort the candidates exactly
        _, inverse = np.unique(rows, axis=0, return_inverse=True)
        inverse = inverse.ravel()
        group_order = np.argsort(inverse, kind="stable")
        cand = cand[group_order]
        ordered = inverse[group_order]
        new_run = np.concatenate([[True], ordered[1:] != ordered[:-1]])
    # every point's representative: the first point of its group (others stand for themselves)
    starts = np.flatnonzero(new_run)
    first = np.minimum.reduceat(cand, starts)
    rep = np.arange(n, dtype=np.int64)
    rep[cand] = np.repeat(first, np.diff(np.append(starts, cand.size)))
    is_first = rep == np.arange(n)
    rank = np.cumsum(is_first) - 1
    return rank[rep].astype(np.int64), int(np.count_nonzero(is_first))


_MIX = np.array([0x9E3779B97F4A7C15, 0xC2B2AE3D27D4EB4F, 0x165667B19E3779F9], dtype=np.uint64)
