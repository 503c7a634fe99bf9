"""meshio's XDMF time-series reader behind the project's model: an XDMF temporal collection, grid by grid.

meshio's ``TimeSeriesReader`` reads the numbers (the HDF5 or inline DataItems); the
XML around them is looked at here first. Four things are told to it:

* the grids of the collection are its steps: other children of the collection (a
  collection-level ``<Time TimeType="List">``) are left out of its list, so step k
  reads grid k;
* forms it does not read (:func:`._xdmf_forms.form_problem`) are refused by name before it
  reads, and a Topology's ``BaseOffset`` (which it does not read) is subtracted from the
  corner numbers it gives;
* a grid's Topology and Geometry taken from another grid (an ``xi:include`` in a piece, a
  ``Reference`` path on them or on their DataItems, a reference to a reference) are put in a
  copy of the grid before it reads (:func:`_mesh_resolved`); grids taking one mesh share it; a
  field's Attribute taken so (by a ``Reference`` on it or on its DataItem) is put in a copy of the
  step's grid the same way (:func:`_fields_resolved`);
* a version 2 file is handed to it too: its constructor refuses any version but 3, but
  nothing else of it depends on the version (it takes the names of both, ``TopologyType``
  / ``Type`` and ``DataType`` / ``NumberType``), so the constructor's finding of the
  collection and the mesh grid is done here for a version 2 file.

A step written as a spatial collection of Uniform grids (the pieces of a parallel run) is
read piece by piece by the same reader (its mesh grid and step set to each piece in turn)
and the pieces joined as the pieces of a ``.pvtu`` step are (:func:`read_pieces`).
"""

from __future__ import annotations

import copy
import pathlib
import warnings
import xml.etree.ElementTree as ET

import numpy as np

from ..errors import (FieldShapeError, InputFileNotFound, PhasegaugeError, UnreadableFileError, UnsupportedMeshError,
                      short_text)
from ..model.mesh import Mesh
from ._meshio_adapter import (_WRITE_AGAIN, StepFields, ensure_vtk_extras, hdf5_problem, mesh_and_fields,
                              repeat_mesh_notes, step_fields)
from ._xdmf_forms import base_offset, form_problem, is_collection, spatial_problem, version_problem

__all__ = ["XdmfTimeSeries", "offset_cells", "read_timed_grid", "read_pieces", "read_spatial_file"]

_CHECK_FILES = "check the XDMF file and the HDF5 files it names"


def _time_series_reader(path: str):
    """meshio's ``TimeSeriesReader`` of ``path`` (version 2 or 3), its collection holding only the grids."""
    import meshio

    try:
        root = ET.parse(path).getroot()
    except (ET.ParseError, OSError) as exc:
        raise UnreadableFileError(f"not a readable XDMF file ({short_text(exc)})", where=path,
                                  fix="check that the file is complete XML") from None
    problem = version_problem(root, path) or spatial_problem(root, path)
    if problem is not None:
        raise problem
    try:
        pieces = any(is_collection(grid, "spatial") for grid in root.iter("Grid"))
        if root.get("Version").strip().split(".")[0] == "3" and not pieces:
            reader = meshio.xdmf.TimeSeriesReader(path)
        else:
            reader = _version2_reader(path, root)
    except Exception as exc:
        raise UnreadableFileError(f"cannot be read as an XDMF time series ({short_text(exc)})", where=path,
                                  fix=_CHECK_FILES) from None
    for item in reader.domain.iter("DataItem"):  # the XDMF specification's default Format, which meshio needs
        if item.get("Format") is None:
            item.set("Format", "XML")
    reader.collection = [node for node in reader.collection if node.tag == "Grid"]
    reader.num_steps = len(reader.collection)
    return reader


def _version2_reader(path: str, root):
    """meshio's reader made without its constructor (which refuses version 2, and a collection whose steps are
    all spatial collections), set as the constructor sets it: the one Domain, its temporal collection, and the
    mesh grid (a Uniform grid of the Domain, else the first Uniform grid of the collection, else the first piece
    of a step written as a spatial collection: each such step sets its pieces itself)."""
    from meshio.xdmf.time_series import TimeSeriesReader

    domains = [node for node in root if node.tag == "Domain"]
    if len(domains) != 1:
        raise ValueError(f"{len(domains)} Domain elements, not one")
    grids = [node for node in domains[0] if node.tag == "Grid"]
    collections = [g for g in grids if g.get("GridType") == "Collection" and g.get("CollectionType") == "Temporal"]
    if not collections:
        raise ValueError("no temporal collection in the Domain")
    uniform = [g for g in grids if g.get("GridType") == "Uniform"]
    uniform += [g for g in collections[-1] if g.tag == "Grid" and g.get("GridType", "Uniform") == "Uniform"]
    uniform += [piece for g in collections[-1] if is_collection(g, "spatial") for piece in g if piece.tag == "Grid"]
    if not uniform:
        raise ValueError("no Uniform grid holds the mesh")
    reader = TimeSeriesReader.__new__(TimeSeriesReader)
    reader.filename = pathlib.Path(path)
    reader.domain = domains[0]
    reader.collection = list(collections[-1])
    reader.num_steps = len(reader.collection)
    reader.cells = None
    reader.hdf5_files = {}
    reader.mesh_grid = uniform[0]
    return reader


def read_timed_grid(path: str, grid):
    """A plain XDMF file's one grid that holds a ``<Time>`` (one step a file), read by meshio's time-series
    reader as a collection of that grid alone: meshio's plain-file reader refuses a grid's ``Time``.
    Returns a meshio mesh (the time is read by :func:`._xdmf.peek_xdmf_time`)."""
    import meshio

    reader = _bare_reader(path)
    grid = next(g for g in reader.domain.iter("Grid") if g.get("Name", "") == grid.get("Name", "")
                and g.find("Time") is not None)
    reader.collection, reader.num_steps, reader.cells, reader.hdf5_files = [grid], 1, None, {}
    reader.mesh_grid = grid
    try:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            points, cells = reader.read_points_cells()
            _, point_data, cell_data = reader.read_data(0)
    finally:
        for handle in reader.hdf5_files.values():
            handle.close()
    return meshio.Mesh(points, cells, point_data=point_data, cell_data=cell_data)


def _bare_reader(path: str):
    """meshio's ``TimeSeriesReader`` of a plain XDMF file, made without its constructor (which wants a temporal
    collection): its Domain, no collection, no mesh grid yet."""
    from meshio.xdmf.time_series import TimeSeriesReader

    reader = TimeSeriesReader.__new__(TimeSeriesReader)  # set as its constructor sets it
    reader.filename = pathlib.Path(path)
    reader.domain = ET.parse(path).getroot().find("Domain")
    for item in reader.domain.iter("DataItem"):  # the XDMF specification's default Format, which meshio needs
        if item.get("Format") is None:
            item.set("Format", "XML")
    reader.collection, reader.num_steps, reader.cells, reader.hdf5_files, reader.mesh_grid = [], 0, None, {}, None
    return reader


def read_spatial_file(path: str, where: str):
    """A plain XDMF file whose grid is a spatial collection of pieces, read as one mesh (:func:`read_pieces`)."""
    reader = _bare_reader(path)
    collection = next(g for g in reader.domain if is_collection(g, "spatial"))
    try:
        return read_pieces(reader, collection, path, where)
    finally:
        for handle in reader.hdf5_files.values():
            handle.close()


def _piece_labels(pieces: list) -> list:
    """A name for each piece in messages: its ``Name`` where the pieces' names differ, else its number and
    ``Name`` (``1 (p)``: writers often name every piece alike)."""
    names = [(g.get("Name") or "").strip() for g in pieces]
    if all(names) and len(set(names)) == len(names):
        return names
    return [f"{k}" + (f" ({n})" if n else "") for k, n in enumerate(names)]


def _holds_nothing(piece) -> bool:
    """True for a piece of 0 points or 0 cells as its DataItems' ``Dimensions`` say (a process that owns no
    cells), or one without a Topology or Geometry (after :func:`_mesh_resolved`)."""
    parts = [node for node in piece if node.tag in ("Topology", "Geometry")]
    if len(parts) < 2:
        return True
    for node in parts:
        dims = [d for item in node if item.tag == "DataItem" for d in (item.get("Dimensions") or "").split()]
        if dims and dims[0] == "0":
            return True
    return False


_XINCLUDE = "{http://www.w3.org/2001/XInclude}include"
_MESH_PARTS = ("Topology", "Geometry")
_REUSE_FIX = ("write the Topology and Geometry in the grid, or take them from another grid of this file by an "
              "xi:include xpointer or a Reference path that finds them")
_FIELD_FIX = ("write the field's DataItem in the grid, or take it from another grid of this file by a Reference "
              "path that finds its Attribute or DataItem")
#: references followed from one element before the chain is refused (our threshold: writers chain one or two)
_MOST_REFERENCES = 16


def _found(domain, path: str, at: str, what: str, fix: str = _REUSE_FIX) -> list:
    """The elements an XPath of the XDMF file finds (``//Grid[@Name='a']/Grid[1]``, ``/Xdmf/Domain/Grid/...``),
    searched from the Domain as ElementTree's paths read them."""
    written = path = path.strip()  # messages show the path as the file writes it
    if path.startswith("/Xdmf/Domain/"):
        path = "./" + path[len("/Xdmf/Domain/"):]
    elif path.startswith("//"):
        path = "." + path
    try:
        found = domain.findall(path) if path else []
    except (SyntaxError, KeyError, TypeError) as exc:
        raise UnsupportedMeshError(f"{what} {written!r} is not a path that is read ({short_text(exc)})", where=at,
                                   fix=fix) from None
    if not found:
        raise UnsupportedMeshError(f"{what} {written!r} finds nothing in the file", where=at, fix=fix)
    return found


def _included(node, domain, at: str) -> list:
    """The elements an ``xi:include`` of the piece's mesh stands for (the form meshio's series writer uses,
    ``xpointer(//Grid[...]/*[self::Topology or self::Geometry])``)."""
    import re

    if node.get("href"):
        raise UnsupportedMeshError(f"the piece includes its mesh from another file ({node.get('href')})", where=at,
                                   fix=_REUSE_FIX)
    pointer = (node.get("xpointer") or "").strip()
    inner = re.fullmatch(r"xpointer\((.*)\)", pointer, flags=re.S)
    expression = inner.group(1) if inner else pointer
    head, _, last = expression.rpartition("/")
    if last.startswith("*"):
        tags = re.findall(r"self::(\w+)", last)
        grids = _found(domain, head, at, "the xi:include xpointer")
        return [child for grid in grids for child in grid if child.tag != "Time" and (not tags or child.tag in tags)]
    return _found(domain, expression, at, "the xi:include xpointer")


def _reference_path(node):
    """The XPath of an element's ``Reference`` (XDMF Model and Format): its text for ``Reference="XML"``, else
    the attribute's value; None without one."""
    reference = (node.get("Reference") or "").strip()
    if not reference:
        return None
    return (node.text or "") if reference.upper() == "XML" else reference


def _dereferenced(node, domain, at: str, fix: str = _REUSE_FIX):
    """The element ``node`` stands for: itself without a ``Reference``, else the element of the same tag its
    path finds, followed until one holds no ``Reference`` (a chain that comes back to an element, or longer
    than :data:`_MOST_REFERENCES`, refused by name)."""
    seen = []
    while True:
        path = _reference_path(node)
        if path is None:
            return node
        if any(node is other for other in seen) or len(seen) >= _MOST_REFERENCES:
            raise UnsupportedMeshError(f"the {node.tag} Reference {path.strip()!r} "
                                       + ("leads back to an element it started from (a cycle)"
                                          if any(node is other for other in seen)
                                          else f"starts a chain of more than {_MOST_REFERENCES} references"),
                                       where=at, fix="make the references end at a DataItem, Topology, "
                                                     "Geometry or Attribute that holds the numbers")
        seen.append(node)
        found = _found(domain, path, at, f"the {node.tag} Reference", fix)[0]
        if found.tag != node.tag:
            raise UnsupportedMeshError(f"the {node.tag} Reference {path.strip()!r} finds a {found.tag}, not a "
                                       f"{node.tag}", where=at, fix=fix)
        node = found


def _references(node) -> bool:
    """Whether a Topology, Geometry or Attribute, or one of its DataItems, stands for another element by a
    Reference."""
    return _reference_path(node) is not None or any(item.tag == "DataItem" and _reference_path(item) is not None
                                                    for item in node)


def _part_resolved(part, domain, at: str, fix: str = _REUSE_FIX):
    """A Topology, Geometry or Attribute with its own and its DataItems' references followed (a copy where a
    DataItem is replaced; the element found where only the part itself refers)."""
    found = _dereferenced(part, domain, at, fix)
    items = [_dereferenced(item, domain, at, fix) if item.tag == "DataItem" else item for item in found]
    if all(a is b for a, b in zip(items, found)):
        return found
    resolved = copy.copy(found)  # the file's own XML unchanged
    resolved[:] = items
    return resolved


def _mesh_resolved(piece, domain, at: str):
    """The grid with the Topology and Geometry it takes from another grid written in (a copy; the grid itself
    where it takes none): an ``xi:include`` of them, a Topology or Geometry whose ``Reference`` holds the
    path of one (in the attribute, or as its text with ``Reference="XML"``), or their DataItems given so; a
    reference to a reference is followed (:func:`_dereferenced`). A static mesh's later steps take the first
    step's so."""
    if not any(n.tag == _XINCLUDE or n.tag in _MESH_PARTS and _references(n) for n in piece):
        return piece
    resolved = copy.copy(piece)  # the file's own XML unchanged
    children = []
    for node in piece:
        parts = _included(node, domain, at) if node.tag == _XINCLUDE else [node]
        children.extend(_part_resolved(part, domain, at) if part.tag in _MESH_PARTS else part for part in parts)
    resolved[:] = children
    return resolved


def _fields_resolved(grid, domain, at: str):
    """The grid with the fields it takes from another grid written in (a copy; the grid itself where it takes
    none): an Attribute whose ``Reference`` holds the path of one, or whose DataItem is given so (a static
    field, a material number, written in the first step only), followed as the mesh's are
    (:func:`_dereferenced`: chains, a cycle or a path that finds nothing refused by name)."""
    if not any(node.tag == "Attribute" and _references(node) for node in grid):
        return grid
    resolved = copy.copy(grid)  # the file's own XML unchanged
    resolved[:] = [_part_resolved(node, domain, at, _FIELD_FIX) if node.tag == "Attribute" else node for node in grid]
    return resolved


def _mesh_key(grid) -> tuple:
    """What a grid's mesh is read from, for telling grids that share one: its Topology's and Geometry's tags,
    attributes and DataItems (elements of the file, kept while it is open)."""
    return tuple((part.tag, tuple(sorted(part.attrib.items())), tuple(id(item) for item in part))
                 for part in grid if part.tag in _MESH_PARTS)


def read_pieces(reader, collection, path: str, where: str):
    """One step written as a spatial collection of Uniform grids, read as one meshio mesh.

    Each piece's points, cells and fields are read by meshio's ``TimeSeriesReader`` (its mesh grid and
    its step set to the piece), its ``BaseOffset`` applied; a Topology and Geometry taken from another grid
    (``xi:include``, a ``Reference`` path on them or on their DataItems: a static mesh written once) are read
    from there (:func:`_mesh_resolved`), and so are fields' Attributes taken by ``Reference``
    (:func:`_fields_resolved`); pieces holding nothing (a process that owns
    no cells) are left out, and so are pieces whose cells are all of a lower dimension than another's
    (boundary patches, named in a note). The pieces are joined as the pieces of a ``.pvtu`` step are
    (:func:`._multiblock.join_pieces`: the points of a seam made equal, a field kept when every piece holds
    it, else named with the pieces lacking it).

    Raises
    ------
    UnreadableFileError
        Every piece holds nothing, or meshio cannot read a piece (named).
    UnsupportedMeshError
        A piece's form is not read (:func:`._xdmf_forms.form_problem`), or the mesh it takes from
        another grid is not found.
    """
    import meshio

    from ._multiblock import join_pieces, without_patches

    grids = [g for g in collection if g.tag == "Grid"]
    labels = _piece_labels(grids)
    grids = [_fields_resolved(_mesh_resolved(g, reader.domain, f"{where}, piece {label}"), reader.domain,
                              f"{where}, piece {label}") for label, g in zip(labels, grids)]
    kept = [(label, g) for label, g in zip(labels, grids) if not _holds_nothing(g)]
    if not kept:
        raise UnreadableFileError(f"every piece of the spatial collection holds no cells ({len(grids)} pieces)",
                                  where=where, fix="give a step whose pieces hold the mesh's cells")
    pieces, saved = [], reader.collection
    try:
        for label, grid in kept:
            at = f"{where}, piece {label}"
            problem = form_problem(grid, at)
            if problem is not None:
                raise problem
            offset = base_offset(grid, at)
            timed = copy.copy(grid)  # meshio needs a time in the grid it reads; the piece's own XML unchanged
            if timed.find("Time") is None:
                ET.SubElement(timed, "Time", Value="0")
            reader.mesh_grid, reader.collection = grid, [timed]
            try:
                with warnings.catch_warnings():
                    warnings.simplefilter("ignore")
                    points, cells = reader.read_points_cells()
                    if offset:
                        reader.cells = cells = offset_cells(cells, offset, at)
                    _, point_data, cell_data = reader.read_data(0)
            except PhasegaugeError:
                raise
            except Exception as exc:  # a missing or damaged HDF5 file is named by the caller; other failures here
                if isinstance(exc, FileNotFoundError) or hdf5_problem(exc, path) is not None:
                    raise
                raise UnreadableFileError(f"cannot read piece {label} of the step's spatial collection "
                                          f"({short_text(exc)})", where=where,
                                          fix="check the piece's DataItems and that the HDF5 files they name are "
                                              "complete") from None
            _check_field_lengths(len(points), cells, point_data, cell_data, at)
            pieces.append(meshio.Mesh(points, cells, point_data=point_data, cell_data=cell_data))
    finally:
        reader.collection = saved
    named = [(label, path) for label, _ in kept]
    pieces = without_patches(pieces, named, where, what="spatial collection pieces")
    named = [n for n, piece in zip(named, pieces) if piece is not None]
    pieces = [piece for piece in pieces if piece is not None]
    if len(pieces) == 1:
        return pieces[0]
    return join_pieces(pieces, named, path, part="piece", whole="the step's spatial collection",
                       holding_fix="write the field in every piece of the step")


class XdmfTimeSeries:
    """An XDMF temporal collection, read one grid at a time with meshio's ``TimeSeriesReader``.

    The points and cells are read once per mesh (the collection's shared mesh,
    or a grid's own) and the model :class:`Mesh` is built once per mesh; HDF5
    files stay open until :meth:`close`.

    Raises
    ------
    UnreadableFileError
        meshio cannot open the collection, or its XDMF version is neither 2 nor 3.
    """

    def __init__(self, path: str):
        ensure_vtk_extras()
        self.path = path
        self._reader = _time_series_reader(path)
        self._shared_grid = self._reader.mesh_grid  # the grid whose mesh grids without their own use
        self._points_key = None  # whose points and cells the reader holds now
        self._built = None  # (key, Mesh) of the last mesh built

    def read(self, grid: int, where: str):
        """``(key, raw)``: which mesh grid ``grid`` uses (its index or ``'shared'``) and a meshio mesh of it."""
        import meshio

        reader = self._reader
        node = reader.collection[grid]
        if is_collection(node, "spatial"):
            self._points_key = None  # the reader's points and cells are the last piece's
            return grid, self._guarded(lambda: read_pieces(reader, node, self.path, where), where)
        own_mesh = any(child.tag in _MESH_PARTS for child in node)
        key = grid if own_mesh else "shared"
        mesh_grid = node if own_mesh else self._shared_grid
        resolved = self._guarded(lambda: _mesh_resolved(mesh_grid, reader.domain, where), where)
        if resolved is not mesh_grid:  # taken from another grid by reference: grids taking one mesh share it
            key, mesh_grid = ("taken", _mesh_key(resolved)), resolved
        problem = form_problem(mesh_grid, where)
        if problem is not None:
            raise problem
        offset = base_offset(mesh_grid, where)

        def fields():
            with warnings.catch_warnings():
                warnings.simplefilter("ignore")
                if self._points_key != key:
                    reader.mesh_grid = mesh_grid
                    reader._points, _ = reader.read_points_cells()
                    if offset:
                        reader.cells = offset_cells(reader.cells, offset, where)
                    self._points_key = key
                if node.find("Time") is None:  # meshio needs a time in every grid
                    ET.SubElement(node, "Time", Value=str(float(grid)))
                reader.collection[grid] = _fields_resolved(node, reader.domain, where)
                try:
                    return reader.read_data(grid)[1:]
                finally:
                    reader.collection[grid] = node

        point_data, cell_data = self._guarded(fields, where)
        _check_field_lengths(len(reader._points), reader.cells, point_data, cell_data, where)
        return key, meshio.Mesh(reader._points, reader.cells, point_data=point_data, cell_data=cell_data)

    def _guarded(self, read, where: str):
        """``read()``, meshio's failures named as the project's errors (a missing or damaged HDF5 file)."""
        try:
            return read()
        except PhasegaugeError:
            raise
        except Exception as exc:
            problem = hdf5_problem(exc, self.path)
            if problem is not None:
                raise problem.at(where) from None
            if isinstance(exc, FileNotFoundError):
                raise InputFileNotFound(f"a data file the XDMF names is missing ({short_text(exc)})",
                                        where=where, fix="restore the HDF5 file next to the XDMF file") from None
            raise UnreadableFileError(f"cannot read the step's data ({short_text(exc)})", where=where,
                                      fix="check the DataItems of the XDMF file and that the HDF5 files they name are "
                                          "complete (not truncated)") from None

    def step(self, grid: int, where: str, pool=None) -> tuple[Mesh, StepFields]:
        """Mesh and fields of grid ``grid`` (the mesh built once while the grids share it)."""
        key, raw = self.read(grid, where)
        if self._built is not None and self._built[0] == key:
            mesh = self._built[1]
            repeat_mesh_notes(mesh, where)
            return mesh, step_fields(mesh, raw, where, field_data=False)
        mesh, fields = mesh_and_fields(raw, where, pool)
        self._built = (key, mesh)
        return mesh, fields

    def close(self) -> None:
        """Close the HDF5 files the reader opened."""
        for handle in self._reader.hdf5_files.values():
            try:
                handle.close()
            except Exception:
                pass


def offset_cells(cells, offset: int, where: str) -> list:
    """meshio's cell blocks with the Topology's ``BaseOffset`` subtracted from their corner numbers.

    Raises
    ------
    UnsupportedMeshError
        A corner number below the offset (the numbers do not start where BaseOffset says).
    """
    from meshio import CellBlock

    out = []
    for block in cells:
        data = np.asarray(block.data)
        if data.size and data.min() < offset:
            raise UnsupportedMeshError(f"the Topology's BaseOffset is {offset} but a corner number is {data.min()}",
                                       where=where, fix="write the BaseOffset the corner numbers start from "
                                                        "(1 for numbers from 1; 0 or none for numbers from 0)")
        out.append(CellBlock(block.type, data - data.dtype.type(offset)))
    return out


def _check_field_lengths(n_points: int, cells, point_data: dict, cell_data: dict, where: str) -> None:
    """Refuse fields whose length does not match the points or the cell blocks (a step written short or long)."""
    for name, values in point_data.items():
        if len(values) != n_points:
            raise FieldShapeError(f"point field '{name}' has {len(values)} values for {n_points} points",
                                  where=where, fix=_WRITE_AGAIN)
    sizes = [len(block.data) for block in cells]
    for name, blocks in cell_data.items():
        found = [len(b) for b in blocks]
        if found != sizes:
            raise FieldShapeError(f"cell field '{name}' has {sum(found)} values for {sum(sizes)} cells "
                                  f"({sum(found) - sum(sizes):+d})", where=where, fix=_WRITE_AGAIN)
