"""VTK files: XML unstructured (``.vtu``), legacy (``.vtk``) and XML structured (``.vti``, ``.vtr``, ``.vts``).

Unstructured and legacy files are read through meshio (:mod:`._meshio_adapter`), those
holding polyhedra through VTK's reader (:mod:`._polyhedra`);
structured datasets, which meshio does not read, through VTK's own readers
(pyvista), handed over as a meshio mesh. A legacy file holding a structured
dataset that meshio refuses goes the same way. Times stored in the field data
(``TimeValue``, as VTK's writers store them) are peeked from the file's head.
"""

from __future__ import annotations

import contextlib
import io
import re
import warnings

import numpy as np

from ..errors import UnreadableFileError, short_text
from ._claims import check_legacy_claims, check_xml_claims
from ._formats import TIME_NEEDS_FULL_READ, register_format, stored_time
from ._meshio_adapter import read_with_meshio
from ._polyhedra import legacy_holds_polyhedra, read_polyhedral, xml_holds_polyhedra

__all__ = ["FORMATS", "read_structured", "xml_holds_no_cells"]

#: how many bytes of a file's head the time peekers look at
PEEK_BYTES = 1 << 16

_STOPPED = "the solver may have stopped while writing it: write the step again or remove it from the series"


def peek_legacy_time(path: str):
    """The ``TimeValue`` (or ``TIME``) field-data value in a legacy VTK file's head, or None."""
    with open(path, "rb") as handle:
        head = handle.read(PEEK_BYTES)
    match = re.search(rb"\n(?:TimeValue|TIME)\s+1\s+1\s+(double|float)\s*\n", head)
    if not match:
        return None
    binary = b"\nBINARY" in head[:1024].upper()
    rest = head[match.end():]
    source = f"stored in the file's field data ({match.group(0).split()[0].decode()})"
    if binary:
        size = 8 if match.group(1) == b"double" else 4
        return stored_time(np.frombuffer(rest[:size], dtype=">f8" if size == 8 else ">f4")[0],
                           where=path, source=source)
    words = rest.split()
    if match.group(1) == b"float" and words:
        return stored_time(np.float32(stored_time(words[0], where=path, source=source)), where=path, source=source)
    return stored_time(words[0] if words else "", where=path, source=source)


def peek_xml_time(path: str):
    """The time in a VTK XML file's ``FieldData`` (VTK's writers put it before the first piece;
    other writers after it, found when it lies in the file's head): a float, None, or
    :data:`TIME_NEEDS_FULL_READ` when it is stored in binary or the head is no VTK XML file's."""
    with open(path, "rb") as handle:
        head = handle.read(PEEK_BYTES)
    if not (re.search(rb"<VTKFile[^<>]*>", head) and re.search(rb"<(Piece|FieldData|Block)\b", head)):
        return TIME_NEEDS_FULL_READ  # the head of no VTK XML file (damaged): reading it says what it is
    start = head.find(b"<FieldData")
    if start < 0:
        return None
    match = re.search(rb'<DataArray[^>]*Name="(TimeValue|TIME|time|Time)"[^>]*>', head[start:])
    if not match:
        return None
    tag = match.group(0)
    if b'format="ascii"' in tag:
        body = head[start + match.end():].split(b"<", 1)[0].split()
        source = f"stored in the file's field data ({match.group(1).decode()})"
        value = stored_time(body[0] if body else "", where=path, source=source)
        if b'type="Float32"' in tag:
            value = stored_time(np.float32(value), where=path, source=source)
        return value
    return TIME_NEEDS_FULL_READ


def legacy_structured(path: str) -> bool:
    """True for a legacy VTK file holding a structured dataset."""
    try:
        with open(path, "rb") as handle:
            head = handle.read(1024).upper()
    except OSError:
        return False
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
                                  f"({what}), so it is truncated", where=path, fix=_STOPPED)


def read_structured(path: str):
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
                                      where=path, fix=_STOPPED)
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            _check_structured_sizes(data, path)
            grid = data.cast_to_unstructured_grid()
            raw = pyvista.to_meshio(grid)
    except UnreadableFileError:
        raise
    except Exception as exc:
        raise UnreadableFileError(
            f"cannot be read as a structured VTK dataset ({short_text(exc)})", where=path,
            fix="check that the file is complete and was fully written") from None
    if grid.n_cells == 0:
        raise UnreadableFileError("holds no cells", where=path,
                                  fix="the file may be truncated; write it again")
    raw.field_data = {k: np.asarray(data.field_data[k]) for k in data.field_data.keys()}
    return raw


def _structured_fallback(path: str):
    """A legacy file meshio refused: read it with VTK when it holds a structured dataset (else None)."""
    return read_structured(path) if legacy_structured(path) else None


def xml_holds_no_cells(path: str) -> bool:
    """True for a VTK XML unstructured grid whose every ``<Piece>`` holds 0 points and 0 cells, as a parallel
    writer leaves the piece of a process that owns no cells (its whole structure lies in the file's head)."""
    try:
        with open(path, "rb") as handle:
            head = handle.read(PEEK_BYTES)
    except OSError:
        return False
    head = head.split(b"<AppendedData", 1)[0]
    if not re.search(rb'<VTKFile[^<>]*type="UnstructuredGrid"', head) or b"</UnstructuredGrid>" not in head:
        return False
    pieces = re.findall(rb"<Piece\b[^<>]*>", head)
    counts = [re.findall(rb'NumberOf(?:Points|Cells)="\s*(\d+)\s*"', piece) for piece in pieces]
    return bool(pieces) and all(len(c) == 2 and not any(int(n) for n in c) for c in counts)


def read_xml_unstructured(path: str):
    check_xml_claims(path)
    if xml_holds_no_cells(path):  # the file is whole: meshio's reader fails on its empty arrays
        raise UnreadableFileError("holds no cells (0 points and 0 cells: a piece of a process that owns none)",
                                  where=path, fix="leave the file out, or give the parallel file (.pvtu) or "
                                                  "multiblock file (.vtm) that names it with the pieces holding "
                                                  "the cells")
    if xml_holds_polyhedra(path):  # meshio reads them only alone and not in format 2.3
        return read_polyhedral(path)
    return read_with_meshio(path, "vtu")


def read_legacy(path: str):
    check_legacy_claims(path)
    if legacy_holds_polyhedra(path):  # meshio's legacy reader does not read them
        return read_polyhedral(path)
    return read_with_meshio(path, "vtk", fallback=_structured_fallback)


FORMATS = (
    register_format("vtu", (".vtu",), read=read_xml_unstructured, peek_time=peek_xml_time),
    register_format("vtk", (".vtk",), read=read_legacy, peek_time=peek_legacy_time),
    register_format("vti", (".vti",), read=read_structured, peek_time=peek_xml_time),
    register_format("vtr", (".vtr",), read=read_structured, peek_time=peek_xml_time),
    register_format("vts", (".vts",), read=read_structured, peek_time=peek_xml_time),
)
