"""Reading one mesh file through meshio into the project's model.

meshio is the only reader. Two small additions are registered with it on first
use: VTK pixel (8) and voxel (11) cells, which VTK's own writers produce when an
image grid is saved as an unstructured grid; :mod:`phasegauge.mesh` turns them
into quads and hexahedra.
"""

from __future__ import annotations

import contextlib
import io
import os
import warnings
from dataclasses import dataclass, field

import numpy as np

from ..errors import (FieldShapeError, InputFileNotFound, UnreadableFileError,
                      UnsupportedMeshError)
from ..mesh import Mesh

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
    except Exception as exc:  # meshio raises many kinds; all mean the same to the user
        if fmt == "vtk" and _legacy_structured(path):
            return _read_with_vtk(path)
        raise UnreadableFileError(
            f"cannot be read as a mesh ({_short(exc)})", where=path,
            fix="check that the file is complete VTK (.vtu, .vtk) or XDMF and was fully written"
        ) from None


def _legacy_structured(path: str) -> bool:
    """True for a legacy VTK file holding a structured dataset (which meshio does not read)."""
    try:
        with open(path, "rb") as handle:
            head = handle.read(1024).upper()
    except OSError:
        return False
    return any(k in head for k in (b"STRUCTURED_POINTS", b"STRUCTURED_GRID", b"RECTILINEAR_GRID"))


def _read_with_vtk(path: str):
    """Read a structured VTK dataset with VTK's own reader and hand it over as a meshio mesh."""
    try:
        import pyvista

        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            data = pyvista.read(path)
            grid = data.cast_to_unstructured_grid()
            raw = pyvista.to_meshio(grid)
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


def mesh_and_fields(raw, path: str, previous: Mesh | None = None) -> tuple[Mesh, StepFields]:
    """Turn a meshio mesh into a :class:`Mesh` (reusing ``previous`` when equal) and fields."""
    try:
        candidate = Mesh(raw.points, raw.cells)
    except UnsupportedMeshError as err:
        raise err.with_where(path) from None
    mesh = candidate
    if previous is not None and previous.n_points == candidate.n_points and previous.same_topology(
            candidate.points, candidate.blocks):
        mesh = previous
    point_data = {k: np.asarray(v) for k, v in raw.point_data.items()}
    for name, values in point_data.items():
        if values.shape[0] != mesh.n_points:
            raise FieldShapeError(f"point field '{name}' has {values.shape[0]} values for "
                                  f"{mesh.n_points} points", where=path, fix="the file is damaged; rewrite it")
    cell_data = join_cell_data(mesh, raw.cell_data, where=path)
    field_data = {k: np.asarray(v) for k, v in (raw.field_data or {}).items()}
    return mesh, StepFields(point_data, cell_data, field_data)
