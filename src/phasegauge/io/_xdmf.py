"""XDMF files: the XML layout (temporal collections, times, the HDF5 files it names).

The numbers of an XDMF file live in HDF5 files it names; reading them goes
through meshio (:mod:`._meshio_adapter`). This module reads only the XML:
which grids a temporal collection holds, their times, and the data files.
"""

from __future__ import annotations

import os
import re
import warnings
import xml.etree.ElementTree as ET

import numpy as np

from ..errors import InputFileNotFound, MeshWarning, PhasegaugeError, SeriesError, UnreadableFileError, short_text
from ._formats import register_format, stored_time
from ._meshio_adapter import read_with_meshio
from ._meshio_xdmf import offset_cells, read_spatial_file, read_timed_grid
from ._xdmf_forms import base_offset, form_problem, is_collection, spatial_problem

__all__ = ["FORMATS", "temporal_grids", "collection_times", "collections_among", "lone_collection", "grid_time",
           "xdmf_data_files", "data_file_names", "included_files", "peek_xdmf_time"]

#: an HDF5 reference in a DataItem: ``file.h5:/path``
_HDF5_REFERENCE = re.compile(r">\s*([^<>:\s]+\.(?:h5|hdf5|hdf))\s*:", re.IGNORECASE)


def temporal_grids(path: str):
    """The grids of the file's temporal collection (XML elements), or None for a plain XDMF file.

    Each grid is a step; other children of the collection (a ``Time`` list) are left out.

    Raises
    ------
    UnreadableFileError
        The XML does not parse.
    """
    try:
        root = ET.parse(path).getroot()
    except (ET.ParseError, OSError) as exc:
        raise UnreadableFileError(f"not a readable XDMF file ({exc})", where=path,
                                  fix="check that the file is complete XML") from None
    return _grids_of(root, path)


def _grids_of(root, path: str):
    """The grids of the temporal collection under ``root`` (the XML of file ``path``), or None.

    Raises
    ------
    UnsupportedMeshError
        Collections nested in a way that is not read (:func:`._xdmf_forms.spatial_problem`).
    """
    problem = spatial_problem(root, path)
    if problem is not None:
        raise problem
    collections = [grid for grid in root.iter("Grid")
                   if grid.get("GridType") == "Collection" and grid.get("CollectionType") == "Temporal"]
    if len(collections) > 1:  # one a field, as some writers do: which grid a step's field is in is not clear
        raise SeriesError(f"the file holds {len(collections)} time collections, which is not read (meshio reads one)",
                          where=path, fix="write one time collection whose grids hold every field, or one file "
                                          "a collection, and give that file")
    return None if not collections else [g for g in collections[0] if g.tag == "Grid"]


def _temporal_collection(root):
    """The first temporal collection (a ``Grid`` element) under ``root``, or None."""
    for grid in root.iter("Grid"):
        if grid.get("GridType") == "Collection" and grid.get("CollectionType") == "Temporal":
            return grid
    return None


def collections_among(files: list) -> dict:
    """The XDMF files among ``files`` that hold a temporal collection, each read once:
    ``{file: (grids, included step files or None)}``. A file that does not parse is left out (reading
    it as a step says what is wrong with it).

    Raises
    ------
    SeriesError
        A file of two collections, or a collection's includes that are not read (:func:`included_files`).
    UnsupportedMeshError
        Collections nested in a way that is not read (:func:`._xdmf_forms.spatial_problem`).
    """
    found = {}
    for f in files:
        if f.lower().endswith((".xdmf", ".xmf")):
            try:
                root = ET.parse(f).getroot()
            except (ET.ParseError, OSError):
                continue
            grids = _grids_of(root, f)
            if grids is not None:
                found[f] = (grids, None if grids else _includes_of(root, f))
    return found


def lone_collection(files: list, where: str, collections: dict | None = None):
    """The file of an XDMF temporal collection when it is the only mesh file of a folder or a glob's
    files, else None; refused beside other mesh files (several collections, or a collection and step
    files), whose steps would not be clear. ``collections``: :func:`collections_among` of ``files``
    when read already."""
    found = collections_among(files) if collections is None else collections
    collections = [(f, len(grids) or len(included or ())) for f, (grids, included) in found.items() if f in files]
    if not collections:
        return None
    if len(files) == 1:
        return collections[0][0]
    named = ", ".join(f"{os.path.basename(f)} ({n} steps)" for f, n in collections[:3])
    more = f" and {len(collections) - 3} more" if len(collections) > 3 else ""
    others = len(files) - len(collections)
    beside = f" beside {others} other mesh file{'s' if others != 1 else ''}" if others else ""
    raise SeriesError(f"the files hold {len(collections)} XDMF time collection{'s' if len(collections) > 1 else ''} "
                      f"({named}{more}){beside}, so the steps are not clear", where=where,
                      fix=f"give one collection's file, such as {collections[0][0]}")


#: the xpointers of an included file's first grid, the one a step file is read by
_FIRST_GRID = ("xpointer(//Xdmf/Domain/Grid[1])", "xpointer(/Xdmf/Domain/Grid[1])", "element(/1/1/1)")

#: an XInclude element (``<xi:include href=...>``)
_XINCLUDE = "{http://www.w3.org/2001/XInclude}include"


def included_files(path: str):
    """The step files a temporal collection names by XInclude, in order, or None.

    Some writers keep each step in a file of its own and a collection of ``<xi:include href=...>``
    children (XInclude, a W3C standard) naming them; each named file is then a step, read as a
    plain XDMF file (its first grid). None for a collection of grids, or a file with no temporal
    collection.

    Raises
    ------
    SeriesError
        An include's ``xpointer`` names another grid than a file's first, or a file is included twice.
    """
    try:
        root = ET.parse(path).getroot()
    except (ET.ParseError, OSError):
        return None
    return _includes_of(root, path)


def _includes_of(root, path: str):
    """:func:`included_files` of the XML ``root`` of file ``path``."""
    collection = _temporal_collection(root)
    if collection is None or any(child.tag == "Grid" for child in collection):
        return None
    folder = os.path.dirname(os.path.abspath(path))
    includes = [child for child in collection if child.tag == _XINCLUDE and child.get("href")]
    hrefs = [child.get("href") for child in includes]
    for child in includes:  # a step file is read as a plain file: its first grid, the only xpointer taken
        pointer = (child.get("xpointer") or "").replace(" ", "")
        if pointer and pointer not in _FIRST_GRID:
            raise SeriesError(f"the collection includes {child.get('href')} at '{child.get('xpointer')}', but a step "
                              "file is read by its first grid (xpointer(//Xdmf/Domain/Grid[1]))", where=path,
                              fix="write one grid a step file (the fluid's first), or give a 'time,path' listing")
    twice = sorted({h for h in hrefs if hrefs.count(h) > 1})
    if twice:
        raise SeriesError(f"the collection includes {twice[0]} more than once (its grids as steps), but a step file "
                          "is read by its first grid", where=path,
                          fix="write one grid a step file, or give a 'time,path' listing")
    return [href if os.path.isabs(href) else os.path.join(folder, href) for href in hrefs] or None


def peek_xdmf_time(path: str):
    """The ``<Time Value=...>`` of a plain XDMF file's grid (one step a file), or None."""
    try:
        root = ET.parse(path).getroot()
    except (ET.ParseError, OSError):
        return None  # reading the step says what is wrong with it
    if _temporal_collection(root) is not None:
        return None
    domain = root.find("Domain")
    top = None if domain is None else domain.find("Grid")
    if top is not None and is_collection(top, "spatial"):
        return grid_time(top, where=path)
    for grid in root.iter("Grid"):
        if grid.find("Time") is not None:
            return grid_time(grid, where=path)
    return None


def grid_time(grid, where: str = "") -> float | None:
    """The ``Time`` value of one grid of a collection, or None.

    A step written as a spatial collection of pieces takes the collection's ``Time``, else its first
    piece's; pieces that store other times than the one taken are named in a :class:`MeshWarning`.

    Raises
    ------
    SeriesError
        A ``Time`` value that is text, empty, NaN or infinite.
    """
    time = _own_time(grid, where)
    if not is_collection(grid, "spatial"):
        return time
    pieces = [(piece.get("Name") or str(k), _own_time(piece, where))
              for k, piece in enumerate(g for g in grid if g.tag == "Grid")]
    timed = [(name, t) for name, t in pieces if t is not None]
    taken, whose = (time, "the spatial collection's") if time is not None else \
        ((timed[0][1], f"its first piece's ({timed[0][0]})") if timed else (None, ""))
    other = [(name, t) for name, t in timed if abs(t - taken) > max(t.resolution, taken.resolution)]
    if other:
        named = ", ".join(f"{name} {float(t)!r}" for name, t in other[:3]) + (" ..." if len(other) > 3 else "")
        warnings.warn(MeshWarning(f"the pieces of the step's spatial collection store other times ({named}) than "
                                  f"{whose}, {float(taken)!r}, which is used; write one time, in the spatial "
                                  "collection's <Time Value=...>", where=where), stacklevel=2)
    return taken


def _own_time(grid, where: str):
    """The ``<Time Value=...>`` child of one grid element, or None."""
    node = grid.find("Time")
    if node is not None and node.get("Value") is not None:
        time = stored_time(node.get("Value"), where=where, source="in the XDMF <Time Value=...>",
                           fix="write a finite number in the grid's <Time Value=...>")
        time.resolution = _rounded_text(node.get("Value"))
        return time
    return None


def _rounded_text(text: str) -> float:
    """The place of the last digit of a time written with six significant digits or more (C's ``%g``
    writes six: 10.0003 may be any time within 5e-5 of it), else 0 (fewer digits: the time as written)."""
    mantissa, _, exponent = text.strip().lower().partition("e")
    digits = mantissa.lstrip("+-").replace(".", "").lstrip("0")
    if len(digits) < 6:
        return 0.0
    decimals = len(mantissa.partition(".")[2])
    try:
        return 10.0 ** (int(exponent or 0) - decimals)
    except ValueError:
        return 0.0


def collection_times(path: str, n_grids: int):
    """The times a temporal collection gives its grids in one ``<Time>`` child of the collection, or None.

    A ``TimeType="List"`` holds one time per grid; a ``"HyperSlab"`` holds the start, the
    stride and the count of the times. Its DataItem holds the values inline (``Format="XML"``)
    or names them in an HDF5 file (``Format="HDF"``: ``file.h5:/path``, relative to the XDMF
    file's folder), read with h5py.

    Parameters
    ----------
    path : str
        The XDMF file.
    n_grids : int
        How many grids the collection holds (the steps).

    Returns
    -------
    list of float or None
        One time per grid; None when the collection has no time list.

    Raises
    ------
    SeriesError
        A list whose length differs from the grids' count, a ``"Range"`` (the span of the
        collection, not each grid's time), a value that is no finite number, or an HDF5
        reference to no dataset.
    InputFileNotFound
        The HDF5 file the list names does not exist.
    """
    collection = _temporal_collection(ET.parse(path).getroot())
    nodes = [] if collection is None else [n for n in collection if n.tag == "Time"]
    if not nodes:
        return None
    node = nodes[0]
    kind = (node.get("TimeType") or node.get("Type") or "Single").strip()
    if kind.lower() == "single":
        return None
    where = f"{path}, the collection's <Time TimeType=\"{kind}\">"
    if kind.lower() == "range":
        raise SeriesError("a Range gives the first and the last time of the collection, not each grid's time",
                          where=where, fix=_TIMES_FIX)
    if kind.lower() not in ("list", "hyperslab"):
        raise SeriesError(f"the TimeType {kind!r} is none of Single, List, HyperSlab, Range", where=where,
                          fix=_TIMES_FIX)
    values = [stored_time(v, where=where, source="in the time list", fix=_TIMES_FIX)
              for v in _time_item_values(node, path, where)]
    if kind.lower() == "hyperslab":
        if len(values) != 3 or values[2] != int(values[2]):
            raise SeriesError(f"a HyperSlab holds 3 values (start, stride, count), not {values[:6]}", where=where,
                              fix=_TIMES_FIX)
        start, stride, count = values[0], values[1], int(values[2])
        if count != n_grids:
            raise SeriesError(f"the HyperSlab counts {count} times for {n_grids} grids", where=where,
                              fix=_TIMES_FIX)
        return [start + stride * k for k in range(count)]
    if len(values) != n_grids:
        raise SeriesError(f"the list holds {len(values)} times for {n_grids} grids", where=where, fix=_TIMES_FIX)
    return values


_TIMES_FIX = ("write one time per grid: a <Time TimeType=\"List\"> of as many values as the collection has grids, "
              "or a <Time Value=...> in each grid")


def _time_item_values(node, path: str, where: str) -> list:
    """The values of the one DataItem of a ``Time`` element: inline text, or an HDF5 dataset (h5py)."""
    items = [n for n in node if n.tag == "DataItem"]
    if len(items) != 1:
        raise SeriesError(f"it holds {len(items)} DataItems, not one", where=where, fix=_TIMES_FIX)
    item = items[0]
    text = (item.text or "").strip()
    fmt = (item.get("Format") or "XML").strip().upper()
    if fmt == "XML":
        return text.split()
    if fmt != "HDF":
        raise SeriesError(f"its DataItem's Format is {fmt}; times are read inline (XML) or from HDF5 (HDF)",
                          where=where, fix=_TIMES_FIX)
    import h5py

    name, _, inside = text.rpartition(":")
    full = name if os.path.isabs(name) else os.path.join(os.path.dirname(os.path.abspath(path)), name)
    if not os.path.isfile(full):
        raise InputFileNotFound(f"the HDF5 file '{name}' holding the times is missing", where=where,
                                fix=f"put {name} back next to {os.path.basename(path)}")
    with h5py.File(full, "r") as handle:
        data = handle.get(inside)
        if not isinstance(data, h5py.Dataset):
            raise SeriesError(f"the HDF5 file '{name}' has no dataset '{inside}'", where=where,
                              fix="write the times there, or correct the reference (file.h5:/path)")
        return list(np.asarray(data[()]).ravel())


def data_file_names(path: str) -> list:
    """The HDF5 file names an XDMF file's data items refer to, as written, sorted ([] when unreadable).

    Read from the XML: the text of every ``DataItem`` whose ``Format`` is ``HDF`` (any case), up to the
    ``:`` before its dataset's path (``out 0000.h5:/data0``: a name may hold spaces, and its suffix any case
    or none). Text that does not parse as XML is searched for ``NAME.h5:`` references instead.
    """
    try:
        with open(path, encoding="utf-8", errors="replace") as handle:
            text = handle.read()
    except OSError:
        return []
    try:
        root = ET.fromstring(text)
    except ET.ParseError:
        return sorted(set(_HDF5_REFERENCE.findall(text)))
    names = set()
    for item in root.iter():
        if _local_name(item.tag) != "DataItem" or (item.get("Format") or "").strip().upper() != "HDF":
            continue
        reference = (item.text or "").strip()
        name = reference.split(":/", 1)[0] if ":/" in reference else reference.rpartition(":")[0]
        if name.strip():
            names.add(name.strip())
    return sorted(names)


def _local_name(tag) -> str:
    """An XML tag without its namespace (``{uri}DataItem`` -> ``DataItem``)."""
    return tag.rpartition("}")[2] if isinstance(tag, str) else ""


def xdmf_data_files(path) -> list:
    """The HDF5 files an XDMF file names, as paths (relative names are taken from its folder).

    Parameters
    ----------
    path : str or os.PathLike
        An ``.xdmf`` / ``.xmf`` file.

    Returns
    -------
    list of str
        Sorted by the names as written; files that do not exist are listed too.
    """
    path = os.fspath(path)
    folder = os.path.dirname(os.path.abspath(path))
    return [n if os.path.isabs(n) else os.path.join(folder, n) for n in data_file_names(path)]


def read_xdmf(path: str):
    """Read an XDMF file through meshio (its HDF5 claims are checked by ``read_mesh_file`` first).

    Forms meshio does not read are refused by name first, and a Topology's ``BaseOffset``
    (which meshio does not read) is subtracted from the corner numbers it gives.
    """
    try:
        root = ET.parse(path).getroot()
    except (ET.ParseError, OSError):  # meshio's failure on it says what is wrong
        root = None
    problem = None if root is None else spatial_problem(root, path)
    if problem is not None:
        raise problem
    domain = None if root is None else root.find("Domain")
    top = None if domain is None else domain.find("Grid")
    if top is not None and is_collection(top, "spatial"):  # one step written as pieces
        try:
            return read_spatial_file(path, path)
        except PhasegaugeError:
            raise
        except Exception as exc:  # meshio's own failure, named as for any file it cannot read
            raise UnreadableFileError(f"cannot be read as an XDMF file ({short_text(exc)})", where=path,
                                      fix="check the DataItems of the XDMF file and that the HDF5 files they "
                                          "name are complete") from None
    grid = None if root is None else next((g for g in root.iter("Grid") if g.find("Topology") is not None), None)
    offset = 0
    if grid is not None:
        problem = form_problem(grid, path)
        if problem is not None:
            raise problem
        offset = base_offset(grid, path)
    if grid is not None and grid.find("Time") is not None:  # one step a file, its time in its grid
        try:
            raw = read_timed_grid(path, grid)
        except Exception as exc:  # meshio's own failure, named as for any file it cannot read
            raise UnreadableFileError(f"cannot be read as an XDMF file ({short_text(exc)})", where=path,
                                      fix="check the DataItems of the XDMF file and that the HDF5 files they "
                                          "name are complete") from None
    else:
        raw = read_with_meshio(path, "xdmf")
    if offset:
        raw.cells = offset_cells(raw.cells, offset, path)
    return raw


FORMATS = (register_format("xdmf", (".xdmf", ".xmf"), read=read_xdmf, peek_time=peek_xdmf_time,
                           hdf5_files=xdmf_data_files),)
