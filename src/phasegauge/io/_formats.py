"""The file formats a step can be read from: suffix -> reader and time peeker, in one table.

Each format module declares its formats with :func:`register_format` in a
module-level tuple ``FORMATS``; :data:`FORMAT_MODULES` names those modules.
Adding a format is writing such a module (its reader turns a file into a
meshio-style mesh: ``points``, ``cells``, ``point_data``, ``cell_data``,
``field_data``) and naming it here; series discovery, the error messages and
:data:`phasegauge.io.MESH_SUFFIXES` follow from the table.
"""

from __future__ import annotations

import errno
import importlib
import os
from dataclasses import dataclass
from types import MappingProxyType
from typing import Callable

import numpy as np

from ..errors import InputFileNotFound, PhasegaugeError, SeriesError, UnreadableFileError, short_text
from ._claims import CheckedFiles, check_hdf5_claims

__all__ = ["FileFormat", "register_format", "formats", "format_for", "mesh_suffixes", "read_mesh_file",
           "peek_time", "TIME_NEEDS_FULL_READ", "time_from_field_data", "stores_time", "TIME_ARRAY_NAMES",
           "check_readable", "stored_time", "StoredTime", "surface_file_problem", "SURFACE_SUFFIXES"]

#: the modules that declare formats, in the order their suffixes are listed
FORMAT_MODULES = ("_vtk", "_multiblock", "_xdmf")


class _NeedsFullRead:
    """A peeker's answer: the file stores a time, but only a full read can give it."""

    def __repr__(self) -> str:
        return "TIME_NEEDS_FULL_READ"

    def __reduce__(self):
        return "TIME_NEEDS_FULL_READ"


TIME_NEEDS_FULL_READ = _NeedsFullRead()


@dataclass(frozen=True)
class FileFormat:
    """One readable file format.

    Attributes
    ----------
    name : str
    suffixes : tuple of str
        Lower-case file suffixes with the dot (``'.vtu'``).
    read : callable
        ``read(path)`` -> a meshio-style mesh; raises a :class:`phasegauge.errors.PhasegaugeError`
        that says what is wrong with the file.
    peek_time : callable or None
        ``peek_time(path)`` -> the time stored in the file's field data read from its head,
        None when there is none, or :data:`TIME_NEEDS_FULL_READ`; may raise OSError or ValueError
        (taken as no time).
    hdf5_files : callable or None
        ``hdf5_files(path)`` -> the HDF5 files a file's numbers live in (an XDMF file's), whose
        claimed sizes :func:`read_mesh_file` checks before ``read``.
    """

    name: str
    suffixes: tuple
    read: Callable
    peek_time: Callable | None = None
    hdf5_files: Callable | None = None


def register_format(name: str, suffixes, *, read: Callable, peek_time: Callable | None = None,
                    hdf5_files: Callable | None = None) -> FileFormat:
    """Declare a format (for a format module's ``FORMATS`` tuple)."""
    suffixes = tuple(str(s).lower() for s in suffixes)
    if not suffixes or not all(s.startswith(".") and len(s) > 1 for s in suffixes):
        raise ValueError(f"format {name!r}: suffixes must start with a dot, found {suffixes}")
    return FileFormat(name, suffixes, read, peek_time, hdf5_files)


def formats() -> tuple:
    """Every registered :class:`FileFormat`, in the order of :data:`FORMAT_MODULES`."""
    return tuple(fmt for module in FORMAT_MODULES
                 for fmt in importlib.import_module(f"{__package__}.{module}").FORMATS)


def mesh_suffixes() -> tuple:
    """The suffixes of every registered format."""
    return tuple(s for fmt in formats() for s in fmt.suffixes)


def format_for(path) -> FileFormat | None:
    """The format of ``path`` by its suffix (any case), or None."""
    suffix = os.path.splitext(os.fspath(path))[1].lower()
    for fmt in formats():
        if suffix in fmt.suffixes:
            return fmt
    return None


def suffix_list() -> str:
    """The suffixes as the messages list them: ``.vtu, .vtk, ...``."""
    return ", ".join(mesh_suffixes())


def read_mesh_file(path: str, *, checked: CheckedFiles | None = None):
    """Read one mesh file with its format's reader (a meshio-style mesh).

    The HDF5 files the file's numbers live in (an XDMF file's) have their claimed sizes checked
    first (:func:`._claims.check_hdf5_claims`), once per file for a series that passes its
    ``checked`` record.

    Raises
    ------
    InputFileNotFound
        No such file.
    UnreadableFileError
        A folder, an empty file, a suffix no format reads, or content the reader refuses.
    """
    path = os.fspath(path)
    check_readable(path)
    if os.path.getsize(path) == 0:
        raise UnreadableFileError("the file is empty", where=path,
                                  fix="the solver may have been stopped while writing; rewrite or remove the step")
    fmt = format_for(path)
    if fmt is None:
        surface = surface_file_problem(path)
        if surface is not None:
            raise surface
        raise UnreadableFileError(f"is not a mesh file ({suffix_list()})", where=path,
                                  fix="convert the file to VTK or XDMF")
    try:
        if fmt.hdf5_files is not None:
            check_hdf5_claims(path, fmt.hdf5_files(path), checked=checked)
        return fmt.read(path)
    except PhasegaugeError:
        raise
    except OSError as exc:  # permission or file-system trouble met while reading
        raise UnreadableFileError(f"cannot be read ({short_text(exc)})", where=path,
                                  fix="check the file's permissions and the file system it is on") from None


#: suffixes of files that hold surfaces only (boundary patches), never a volume mesh
SURFACE_SUFFIXES = MappingProxyType({".vtp": "VTK polydata", ".stl": "STL", ".obj": "OBJ",
                                     ".ply": "PLY"})


def surface_file_problem(path: str, where: str = ""):
    """The error for a file whose suffix says it holds a surface (a boundary patch), or None."""
    kind = SURFACE_SUFFIXES.get(os.path.splitext(os.fspath(path))[1].lower())
    if kind is None:
        return None
    return UnreadableFileError(f"is a {kind} file: a surface (such as a boundary patch), not a volume mesh",
                               where=where or path,
                               fix="give the step's volume (internal) mesh (.vtu, .vtk, .xdmf): solver "
                                   "converters write it beside the boundary patches")


def check_readable(path: str, where: str = "") -> None:
    """Refuse a path that is no readable file: missing, a symbolic link that loops or leads nowhere,
    a folder, or a file the user may not read (by its permission bits: root reads any file).

    Raises
    ------
    InputFileNotFound
        No such file (nor a link of that name).
    UnreadableFileError
        A link loop, a dangling link, a folder, or no read permission.
    """
    where = where or path
    longest = max((len(part) for part in path.split(os.sep)), default=0)
    if len(path) >= 4096 or longest > 255:
        raise InputFileNotFound(f"the path is {len(path):,} characters long (its longest part {longest:,}): longer "
                                "than file systems allow, so no such file exists", where=where,
                                fix="check how the path was built (a variable expanded many times?)")
    if not os.path.exists(path):
        if os.path.islink(path):
            try:
                os.stat(path)
            except OSError as exc:
                if exc.errno == errno.ELOOP:
                    raise UnreadableFileError("is a symbolic link that loops (it leads back to itself)",
                                              where=where, fix="point the link at the step's file") from None
            raise UnreadableFileError(f"is a symbolic link to '{os.readlink(path)}', which does not exist",
                                      where=where, fix="point the link at the step's file or restore that file")
        raise InputFileNotFound("file not found", where=where,
                                fix="check the path (quote globs so the shell does not expand them)")
    if os.path.isdir(path):
        raise UnreadableFileError("is a folder, not a mesh file", where=where,
                                  fix="give the folder itself as the series path, or remove the folder from the series")
    if not os.access(path, os.R_OK):
        raise UnreadableFileError("cannot be read: no read permission for this user", where=where,
                                  fix=f"grant read permission (chmod u+r {os.path.basename(path)}) or run as its owner")


class StoredTime(float):
    """A step time as a float, with ``resolution``: the gap to the next value its storage holds
    (single precision's spacing at the time; 0 for double precision and for text, whose digits
    are taken as written, except an XDMF grid's time of six significant digits or more: the place
    of its last digit, as C's ``%g`` rounds)."""

    resolution: float = 0.0


def stored_time(value, *, where: str, source: str, fix: str = "") -> float:
    """A step time as stored (text or a number) as a float; single precision rounded to its own digits.

    A time stored in single precision reads back as 0.150000006 for 0.15: it is taken with the
    shortest decimal that single precision gives back (0.15).

    Raises
    ------
    SeriesError
        The value is text that is not a number, empty, NaN or infinite.
    """
    shown = value
    try:
        if isinstance(value, (bytes, bytearray)):
            shown = value = value.decode("utf-8", errors="replace")
        if isinstance(value, str):
            shown = value.strip()
            time = float(shown)
        elif getattr(value, "dtype", None) is not None and value.dtype.kind == "f" and value.dtype.itemsize < 8:
            time = float(str(value))  # numpy prints the shortest decimal of its own precision
        else:
            time = float(value)
    except (TypeError, ValueError):
        time = None
    if time is None or time != time or time in (float("inf"), float("-inf")):
        text = repr(shown[:40]) if isinstance(shown, str) else str(shown)
        found = "is empty" if isinstance(shown, str) and not shown else f"is {text}, not a finite number"
        raise SeriesError(f"the time {source} {found}", where=where,
                          fix=fix or "write the step's time as a number, or give a 'time,path' listing "
                                     "whose times are used instead")
    out = StoredTime(time)
    if getattr(value, "dtype", None) is not None and value.dtype.kind == "f" and value.dtype.itemsize < 8:
        out.resolution = float(np.spacing(abs(value)))
    return out


def peek_time(path: str):
    """The time stored in a file, read cheaply: a float, None, or :data:`TIME_NEEDS_FULL_READ`."""
    fmt = format_for(path)
    if fmt is None or fmt.peek_time is None:
        return None
    try:
        return fmt.peek_time(path)
    except PhasegaugeError:
        raise
    except (OSError, ValueError):
        return None


#: field-data arrays a file may store its time in (one value)
TIME_ARRAY_NAMES = ("TimeValue", "TIME", "time", "Time")


def time_from_field_data(field_data: dict, where: str = "") -> float | None:
    """The time a file stores in its field data (single precision rounded to its digits), or None.

    Raises
    ------
    SeriesError
        The stored time is not a finite number.
    """
    for name in TIME_ARRAY_NAMES:
        if name in field_data:
            value = np.asarray(field_data[name]).ravel()
            if value.size >= 1:
                return stored_time(value[0], where=where, source=f"stored in the file's field data ({name})")
    return None


def stores_time(path: str, checked: CheckedFiles | None = None) -> bool | None:
    """Whether the file, read whole, stores its time in its field data (a large file may store it beyond
    the head :func:`peek_time` reads); None when it cannot be read (its own error comes when its step is
    read). ``checked``: as for :func:`read_mesh_file`."""
    try:
        return time_from_field_data(read_mesh_file(path, checked=checked).field_data) is not None
    except PhasegaugeError:
        return None
