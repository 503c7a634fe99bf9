"""XDMF forms meshio's readers do not read, told apart in the XML before reading.

meshio reads a grid's points from one ``Geometry`` DataItem (``XY``, ``XYZ``) and its
cells from one ``Topology`` DataItem of corner numbers; the XDMF specification has
more forms (coordinates per axis, structured grids given by origin and spacing) and
a ``BaseOffset`` subtracted from the corner numbers (Fortran writers number from 1).
This module reads only XML elements: it names a form that is not read and says what
to write instead, and gives a topology's ``BaseOffset``. A step written as a spatial
collection of Uniform grids (one a process) is read piece by piece and joined
(:func:`._meshio_xdmf.read_pieces`); collections nested deeper are named here.

References
----------
XDMF Model and Format, https://www.xdmf.org/index.php/XDMF_Model_and_Format
(Grid, Topology, Geometry, Time).
"""

from __future__ import annotations

from ..errors import UnreadableFileError, UnsupportedMeshError

__all__ = ["form_problem", "base_offset", "version_problem", "spatial_problem", "is_collection"]

#: geometry forms meshio does not read, and what each holds
_GEOMETRY_NOT_READ = (
    ("X_Y_Z", "one DataItem per coordinate"),
    ("X_Y", "one DataItem per coordinate"),
    ("VXVYVZ", "the grid lines' coordinates, one DataItem per axis"),
    ("VXVY", "the grid lines' coordinates, one DataItem per axis"),
    ("ORIGIN_DXDYDZ", "an origin and a spacing"),
    ("ORIGIN_DXDY", "an origin and a spacing"),
)

#: topology forms meshio does not read (structured grids: no corner numbers are stored)
_TOPOLOGY_NOT_READ = ("2DSMesh", "3DSMesh", "2DRectMesh", "3DRectMesh", "2DCoRectMesh", "3DCoRectMesh")

_WRITE_POINTS = "write the points as one DataItem of n x 3 values (GeometryType XYZ) or n x 2 values (XY)"
_WRITE_CELLS = ("write the grid as points (GeometryType XYZ) and cells of corner numbers (TopologyType "
                "Quadrilateral, Hexahedron, ...), or each step as a VTK image file (.vti)")


def _kind(node, name: str) -> str:
    """The type of a Topology or Geometry: the XDMF 3 attribute, or the XDMF 2 ``Type``."""
    return (node.get(name) or node.get("Type") or "").strip()


def form_problem(grid, where: str):
    """The error naming a form of the grid's mesh that meshio does not read, or None.

    Parameters
    ----------
    grid : xml.etree.ElementTree.Element
        A ``Grid`` element (its ``Topology`` and ``Geometry`` children are looked at).
    where : str
        The file and step, for the message.

    Returns
    -------
    UnsupportedMeshError or None
    """
    for node in grid:
        if node.tag == "Topology":
            kind = _kind(node, "TopologyType")
            if kind.upper() in (t.upper() for t in _TOPOLOGY_NOT_READ):
                return UnsupportedMeshError(
                    f"the grid's Topology is {kind} (a structured grid with no corner numbers stored), "
                    "which is not read", where=where, fix=_WRITE_CELLS)
        elif node.tag == "Geometry":
            kind = _kind(node, "GeometryType")
            for name, holds in _GEOMETRY_NOT_READ:
                if kind.upper() == name:
                    return UnsupportedMeshError(f"the grid's GeometryType is {kind} ({holds}), which is not read",
                                                where=where, fix=_WRITE_POINTS)
    return None


def base_offset(grid, where: str) -> int:
    """The ``BaseOffset`` of the grid's Topology (0 when none): the number of its first point.

    Raises
    ------
    UnsupportedMeshError
        A BaseOffset that is not a whole number, or one on a ``Mixed`` topology (whose
        DataItem also holds cell type numbers, which the offset does not apply to).
    """
    for node in grid:
        if node.tag != "Topology" or node.get("BaseOffset") is None:
            continue
        text = node.get("BaseOffset").strip()
        try:
            offset = int(text)
        except ValueError:
            raise UnsupportedMeshError(f"the Topology's BaseOffset is {text!r}, not a whole number", where=where,
                                       fix='write BaseOffset="1" for corner numbers counted from 1, or leave it '
                                           "out for numbers from 0") from None
        if offset and _kind(node, "TopologyType").lower() == "mixed":
            raise UnsupportedMeshError(f"BaseOffset={offset} on a Mixed topology is not read (its DataItem "
                                       "holds cell type numbers beside the corner numbers)", where=where,
                                       fix="write the corner numbers from 0 and leave BaseOffset out")
        return offset
    return 0


def version_problem(root, path: str):
    """The error for an XDMF version whose time collections are not read, or None (versions 2 and 3).

    A version 2 file is read by meshio's version 3 reader, which takes the names of both
    versions (``TopologyType``/``Type``, ``DataType``/``NumberType``).
    """
    version = (root.get("Version") or "").strip()
    if version.split(".")[0] in ("2", "3"):
        return None
    found = f"version {version}" if version else "no Version"
    return UnreadableFileError(f"the XDMF file has {found}; time collections of versions 2 and 3 are read",
                               where=path, fix='write Version="3.0" on the <Xdmf> element (an XDMF 3 file), or '
                                               "give a 'time,path' listing of per-step files")


def is_collection(grid, kind: str) -> bool:
    """True for a ``Grid`` element that is a collection of ``kind`` (``'temporal'`` or ``'spatial'``, any case;
    a collection that names no ``CollectionType`` is spatial, the XDMF specification's default)."""
    if grid.tag != "Grid" or (grid.get("GridType") or "").strip().lower() != "collection":
        return False
    return ((grid.get("CollectionType") or "").strip().lower() or "spatial") == kind


def spatial_problem(root, where: str):
    """The error for collections nested in a way that is not read, or None.

    A step written as a spatial collection of Uniform grids (the pieces of a parallel run, one a
    process) is read, as a grid of a temporal collection or as a plain file's grid. Not read: a
    spatial collection holding collections (pieces nested deeper, or a time series a piece) or
    holding no grid, and a temporal collection holding temporal collections.
    """
    for grid in root.iter("Grid"):
        if is_collection(grid, "spatial"):
            inner = [child for child in grid if child.tag == "Grid"]
            nested = [child for child in inner if (child.get("GridType") or "").strip().lower() == "collection"]
            if nested:
                kind = (nested[0].get("CollectionType") or "Spatial").strip()
                return UnsupportedMeshError(f"a spatial collection holds a {kind} collection: pieces nested deeper "
                                            "than one spatial collection a step are not read", where=where,
                                            fix=_WRITE_PIECES)
            if not inner:
                return UnsupportedMeshError(f"the spatial collection '{grid.get('Name', '')}' holds no grid",
                                            where=where, fix=_WRITE_PIECES)
        elif is_collection(grid, "temporal") and any(is_collection(child, "temporal") for child in grid):
            return UnsupportedMeshError("a temporal collection holds a temporal collection, which is not read",
                                        where=where, fix="write one temporal collection whose grids are the steps "
                                                         "(each a Uniform grid, or a spatial collection of them)")
    return None


_WRITE_PIECES = ("write each step as one Uniform grid, or as one spatial collection of Uniform grids (a piece "
                 "each, with its own Topology and Geometry)")
