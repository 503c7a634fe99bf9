"""XDMF files: the XML layout (temporal collections, times, the HDF5 files it names).

The numbers of an XDMF file live in HDF5 files it names; reading them goes
through meshio (:mod:`._meshio_adapter`). This module reads only the XML:
which grids a temporal collection holds, their times, and the data files.
"""

from __future__ import annotations

import os
import re
import xml.etree.ElementTree as ET

from ..errors import SeriesError, UnreadableFileError
from ._formats import register_format, stored_time
from ._meshio_adapter import read_with_meshio

__all__ = ["FORMATS", "temporal_grids", "lone_collection", "grid_time", "xdmf_data_files", "data_file_names"]

#: an HDF5 reference in a DataItem: ``file.h5:/path``
_HDF5_REFERENCE = re.compile(r">\s*([^<>:\s]+\.(?:h5|hdf5|hdf))\s*:")


def temporal_grids(path: str):
    """The grids of the file's temporal collection (XML elements), or None for a plain XDMF file.

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
    for grid in root.iter("Grid"):
        if grid.get("GridType") == "Collection" and grid.get("CollectionType") == "Temporal":
            return [g for g in grid if g.tag == "Grid"]
    return None


def lone_collection(files: list, where: str):
    """The file of an XDMF temporal collection when it is the only mesh file of a folder or a glob's
    files, else None; refused beside other mesh files (several collections, or a collection and step
    files), whose steps would not be clear. A file that does not parse is no collection here: reading
    it as a step says what is wrong with it."""
    collections = []
    for f in files:
        if f.lower().endswith((".xdmf", ".xmf")):
            try:
                grids = temporal_grids(f)
            except UnreadableFileError:
                continue
            if grids is not None:
                collections.append((f, len(grids)))
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


def grid_time(grid, where: str = "") -> float | None:
    """The ``Time`` value of one grid of a collection, or None.

    Raises
    ------
    SeriesError
        A ``Time`` value that is text, empty, NaN or infinite.
    """
    node = grid.find("Time")
    if node is not None and node.get("Value") is not None:
        return stored_time(node.get("Value"), where=where, source="in the XDMF <Time Value=...>",
                           fix="write a finite number in the grid's <Time Value=...>")
    return None


def data_file_names(path: str) -> list:
    """The HDF5 file names an XDMF file's data items refer to, as written, sorted ([] when unreadable)."""
    try:
        with open(path, encoding="utf-8", errors="replace") as handle:
            text = handle.read()
    except OSError:
        return []
    return sorted(set(_HDF5_REFERENCE.findall(text)))


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
    """Read an XDMF file through meshio (its HDF5 claims are checked by ``read_mesh_file`` first)."""
    return read_with_meshio(path, "xdmf")


FORMATS = (register_format("xdmf", (".xdmf", ".xmf"), read=read_xdmf, hdf5_files=xdmf_data_files),)
