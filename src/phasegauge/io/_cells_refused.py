"""Cells meshio's readers name but cannot hold, or leave out: refused, never read in part.

meshio's VTK readers know some cell types by name that its meshes cannot hold (a quadratic wedge,
'wedge15', raises a KeyError), and leave out cells of types they do not know with a printed
warning on the standard error ("File contains cells that meshio cannot handle (type 37)"): the mesh read would then miss
those cells, and every volume, droplet and flux measured on it would be wrong with no error. Both
are refused in one line naming the cell type (found by review).
"""

from __future__ import annotations

import re

from ..errors import UnsupportedMeshError

__all__ = ["cell_type_refused", "check_cells_left_out"]

_LEFT_OUT = re.compile(r"cells that meshio cannot handle \(types? \[?([\d ,]+)\]?\)")
_FIX = "write the mesh with linear cells"


def cell_type_refused(exc: BaseException, path: str) -> UnsupportedMeshError | None:
    """The error for a KeyError of one of meshio's own cell type names (such as 'wedge15'), else None."""
    from meshio._vtk_common import vtk_to_meshio_type

    named = isinstance(exc, KeyError) and exc.args and isinstance(exc.args[0], str)
    if not (named and exc.args[0] in vtk_to_meshio_type.values()):
        return None
    return UnsupportedMeshError(f"holds cells of type {exc.args[0]}, which meshio's reader names but cannot hold",
                                where=path, fix=_FIX)


def check_cells_left_out(printed: str, path: str) -> None:
    """Refuse a file of which meshio's reader left cells out, as it printed (``printed``: its output)."""
    left_out = sorted({int(t) for found in _LEFT_OUT.findall(printed) for t in re.findall(r"\d+", found)})
    if left_out:
        types = ", ".join(str(t) for t in left_out)
        raise UnsupportedMeshError(f"holds cells of VTK type {types}, which meshio cannot read (they would be "
                                   "left out of the mesh)", where=path, fix=_FIX)
