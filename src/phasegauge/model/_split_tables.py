"""Tables of the simplex split (:mod:`phasegauge.model.simplices`), local corners in VTK order.

Two ways to split a cell, and the split of each quadrilateral face they imply:

* without added points (``TABLE``): triangles and tetrahedra stay whole, quads split in two
  along the diagonal 0-2, hexahedra in six tetrahedra about the diagonal 0-6, wedges in three
  tetrahedra, pyramids in two along the base diagonal 0-2. The tables read local corners
  only, so the split does not depend on how a file numbers its points;
* coned: from an added cell centre (hexahedra, wedges; quads and polygons in 2D) or from
  the apex (pyramids) to every face triangle, each quad face split in two along the
  diagonal its neighbour uses too (the tables' where both agree and the face is flat, else
  the shorter one: ``_face_diagonals``), or in four about an added face centre where the two
  diagonals tie or a triangle of the cut would turn a tetrahedron against its cell.

``TABLE_DIAGONALS`` names, per quad face of ``cells.FACES``, the diagonal the table cuts it
along: the two sides of a shared face split it alike when these are the same two points.
"""

from __future__ import annotations

from types import MappingProxyType

from .cells import FACES

__all__ = ["TABLE", "TABLE_DIAGONALS", "CONED_TYPES"]

#: simplices of each cell type without added points
TABLE = MappingProxyType({
    "triangle": ((0, 1, 2),),
    "quad": ((0, 1, 2), (0, 2, 3)),
    "tetra": ((0, 1, 2, 3),),
    "hexahedron": ((0, 1, 2, 6), (0, 2, 3, 6), (0, 3, 7, 6), (0, 7, 4, 6), (0, 4, 5, 6), (0, 5, 1, 6)),
    "wedge": ((0, 1, 2, 5), (0, 1, 4, 5), (0, 3, 4, 5)),
    "pyramid": ((0, 1, 2, 4), (0, 2, 3, 4)),
})

#: 3D cell types with quad faces: split by the table where every quad face allows it, else coned
CONED_TYPES = ("hexahedron", "wedge", "pyramid")


def _table_diagonals(cell_type: str) -> dict:
    """Per quad face (position in ``FACES``), the local diagonal the table cuts it along."""
    out = {}
    for j, face in enumerate(FACES[cell_type]):
        if len(face) == 4:
            along_02 = any(face[0] in t and face[2] in t for t in TABLE[cell_type])
            out[j] = (face[0], face[2]) if along_02 else (face[1], face[3])
    return out


#: {cell type: {face position: (corner, corner)}} of the tables' quad-face diagonals
TABLE_DIAGONALS = MappingProxyType({kind: _table_diagonals(kind) for kind in CONED_TYPES})
