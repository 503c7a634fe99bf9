"""Contour geometry as VTK files, written atomically.

A contour (:class:`phasegauge.model.contour.Contour`) becomes a VTK
unstructured grid of line (2D) or triangle (3D) cells through meshio: ``.vtu``
(XML) or ``.vtk`` (legacy). Each element carries two cell arrays: ``cell``, the
mesh cell it lies in, numbered as the input file numbers its cells (blocks of lines or vertices the
mesh leaves out counted too; the whole cell of a piece, where a reader split cells), and ``size``,
its length or area. Both formats also carry the step's time and number as one-value field-data
arrays ``TimeValue`` and ``step``
(the names VTK's own writers and readers use for a file's time; in a legacy file a
dataset-level ``FIELD FieldData`` block, as VTK writes it), so a folder of them reads
back as a series. The file appears in
one step (written beside its final place, then renamed), so a reader never sees
half a file.
"""

from __future__ import annotations

import os
import secrets
from pathlib import Path
from types import MappingProxyType

import numpy as np

from ..errors import InputFileNotFound, OptionError, OutputError, UnreadableFileError

__all__ = ["write_contour", "read_contour", "CONTOUR_SUFFIXES"]

#: file suffixes and the meshio format each is written in
CONTOUR_SUFFIXES = MappingProxyType({".vtu": "vtu", ".vtk": "vtk"})


_EMPTY = MappingProxyType({
    "vtu": ('<?xml version="1.0"?>\n'
            '<VTKFile type="UnstructuredGrid" version="0.1" byte_order="LittleEndian">\n'
            '<UnstructuredGrid>\n<Piece NumberOfPoints="0" NumberOfCells="0">\n'
            '<Points>\n<DataArray type="Float64" NumberOfComponents="3" format="ascii">'
            '</DataArray>\n</Points>\n<Cells>\n'
            '<DataArray type="Int64" Name="connectivity" format="ascii"></DataArray>\n'
            '<DataArray type="Int64" Name="offsets" format="ascii"></DataArray>\n'
            '<DataArray type="UInt8" Name="types" format="ascii"></DataArray>\n'
            '</Cells>\n</Piece>\n</UnstructuredGrid>\n</VTKFile>\n'),
    "vtk": ("# vtk DataFile Version 4.2\nempty contour\nASCII\nDATASET UNSTRUCTURED_GRID\n"
            "POINTS 0 double\nCELLS 0 0\nCELL_TYPES 0\n"),
})
_EMPTY_MARKS = ('NumberOfPoints="0"', "POINTS 0 ")


def _is_empty_file(path: Path) -> bool:
    head = path.read_bytes()[:2000].decode("ascii", errors="replace")
    return any(mark in head for mark in _EMPTY_MARKS)


def _format_of(path: Path) -> str:
    suffix = path.suffix.lower()
    if suffix not in CONTOUR_SUFFIXES:
        raise OptionError(f"contour files must end in .vtu or .vtk, found '{path.name}'",
                          fix="name the file with one of those suffixes")
    return CONTOUR_SUFFIXES[suffix]


def write_contour(contour, path, *, time: float | None = None, step: int | None = None,
                  file_cells=None) -> Path:
    """Write a contour as a VTK file, atomically.

    Parameters
    ----------
    contour : Contour
        Segments (2D) or triangles (3D).
    path : str or os.PathLike
        Target file, ``.vtu`` or ``.vtk``; replaced if it exists.
    time : float, optional
        Time of the step, kept as the one-value field-data array ``TimeValue``.
    step : int, optional
        Number of the step, kept as the one-value field-data array ``step``.
    file_cells : ndarray of shape (n_cells,), int, optional
        The file's number of each cell of the mesh the contour was found on (:attr:`Mesh.file_cells`, else
        :attr:`Mesh.cell_parents`), where they differ from the mesh's: blocks left out before or among the
        kept ones, cells a reader split (polyhedra, mixed meshes) or reordered. The ``cell`` array is
        written as ``file_cells[contour.cells]``. None: ``contour.cells`` are the file's cells.

    Returns
    -------
    pathlib.Path
        The path written.

    Raises
    ------
    OptionError
        A suffix other than ``.vtu`` / ``.vtk``.
    OutputError
        The folder does not exist or cannot be written.

    Notes
    -----
    An empty contour is written as a file with no points and no cells, so a
    series has one file per step.
    """
    import meshio

    path = Path(path)
    file_format = _format_of(path)
    folder = path.parent if str(path.parent) else Path(".")
    if not folder.is_dir():
        raise OutputError(f"folder '{folder}' does not exist", where=str(path),
                          fix="create the folder first")
    cell_type = "line" if contour.dimension == 2 else "triangle"
    elements = np.asarray(contour.elements, dtype=np.int64)
    cells = np.asarray(contour.cells, dtype=np.int64)
    if file_cells is not None:  # the cells as the file numbers them
        cells = np.asarray(file_cells, dtype=np.int64)[cells]
    mesh = meshio.Mesh(
        np.asarray(contour.points, dtype=np.float64),
        [(cell_type, elements)],
        cell_data={"cell": [cells],
                   "size": [np.asarray(contour.element_sizes, dtype=np.float64)]},
    )
    # meshio creates the file, so it gets mode 0666 less the umask like any new file
    tmp = str(folder / f".{path.stem}.{secrets.token_hex(6)}{path.suffix}")
    try:
        if len(elements) == 0:
            # meshio cannot read back a mesh with no points: write the empty grid by hand
            Path(tmp).write_text(_EMPTY[file_format], encoding="ascii")
        else:
            meshio.write(tmp, mesh, file_format=file_format)
        if file_format == "vtu" and (time is not None or step is not None):
            _add_field_data(Path(tmp), time, step)
        elif file_format == "vtk" and (time is not None or step is not None):
            _add_legacy_field_data(Path(tmp), time, step)
        os.replace(tmp, path)
    except OSError as err:
        raise OutputError(f"cannot write the contour: {err}", where=str(path),
                          fix="check the folder's permissions and free space") from None
    finally:
        if os.path.exists(tmp):
            os.remove(tmp)
    return path


def _add_field_data(path: Path, time, step) -> None:
    """Put ``TimeValue`` and ``step`` as one-value FieldData arrays into a VTU file (meshio writes none)."""
    arrays = []
    if time is not None and np.isfinite(time):
        arrays.append(f'<DataArray type="Float64" Name="TimeValue" NumberOfTuples="1" format="ascii">'
                      f'{float(time)!r}</DataArray>')
    if step is not None:
        arrays.append(f'<DataArray type="Int64" Name="step" NumberOfTuples="1" format="ascii">{int(step)}'
                      '</DataArray>')
    text = path.read_text(encoding="ascii")
    block = "<FieldData>\n" + "\n".join(arrays) + "\n</FieldData>\n"
    path.write_text(text.replace("<UnstructuredGrid>\n", "<UnstructuredGrid>\n" + block, 1), encoding="ascii")


def _add_legacy_field_data(path: Path, time, step) -> None:
    """Put ``TimeValue`` and ``step`` into a legacy VTK file as a dataset-level ``FIELD FieldData`` block.

    The block goes right after the ``DATASET`` line, where VTK's legacy writer puts a dataset's field
    data; its values are ASCII or big-endian binary, as the file's third line says.
    """
    arrays = []
    if time is not None and np.isfinite(time):
        arrays.append(("TimeValue", "double", np.array([time], dtype=">f8")))
    if step is not None:
        arrays.append(("step", "vtktypeint64", np.array([step], dtype=">i8")))
    if not arrays:
        return
    data = path.read_bytes()
    lines = data.split(b"\n", 4)
    binary = lines[2].strip().upper() == b"BINARY"
    block = f"FIELD FieldData {len(arrays)}\n".encode("ascii")
    for name, kind, value in arrays:
        block += f"{name} 1 1 {kind}\n".encode("ascii")
        block += (value.tobytes() if binary else repr(value.item()).encode("ascii")) + b"\n"
    head = b"\n".join(lines[:4]) + b"\n"  # version, title, ASCII/BINARY, DATASET line
    if not lines[3].startswith(b"DATASET"):
        raise OutputError("unexpected legacy VTK header from the writer", where=str(path),
                          fix="report this with the meshio version")
    path.write_bytes(head + block + lines[4])


def read_contour(path, *, plane_axes=None, dimension: int = 3):
    """Read a contour written by :func:`write_contour`.

    Parameters
    ----------
    path : str or os.PathLike
    plane_axes : tuple of int, optional
        Axes a 2D contour's mesh spans; default: the two axes with the
        largest extent, in order.
    dimension : {2, 3}
        Dimension given to an empty contour (its file cannot tell).

    Returns
    -------
    Contour

    Raises
    ------
    InputFileNotFound
        No such file.
    UnreadableFileError
        The file holds neither line nor triangle cells.
    """
    import meshio

    from ..model.contour import Contour

    path = Path(path)
    _format_of(path)
    if not path.is_file():
        raise InputFileNotFound(f"no contour file '{path}'", where=str(path), fix="check the path")
    if _is_empty_file(path):
        k = 3 if dimension == 3 else 2
        axes = (0, 1, 2) if dimension == 3 else tuple(plane_axes or (0, 1))
        return Contour(np.zeros((0, 3)), np.zeros((0, k), dtype=np.int64), np.zeros(0, dtype=np.int64),
                       dimension, axes)
    data = meshio.read(path)
    for index, block in enumerate(data.cells):
        if block.type in ("line", "triangle"):
            dimension = 2 if block.type == "line" else 3
            elements = np.asarray(block.data, dtype=np.int64)
            cells = np.asarray(data.cell_data["cell"][index], dtype=np.int64).ravel() \
                if "cell" in data.cell_data else np.full(len(elements), -1, dtype=np.int64)
            break
    else:
        raise UnreadableFileError("the file holds no line or triangle cells", where=str(path),
                                  fix="read files written by write_contour")
    points = np.zeros((data.points.shape[0], 3))
    points[:, : data.points.shape[1]] = data.points
    if dimension == 3:
        axes = (0, 1, 2)
    elif plane_axes is not None:
        axes = tuple(plane_axes)
    else:
        extent = np.ptp(points, axis=0) if len(points) else np.array([1.0, 1.0, 0.0])
        axes = tuple(sorted(np.argsort(-extent, kind="stable")[:2].tolist()))
    return Contour(points, elements, cells, dimension, axes)
