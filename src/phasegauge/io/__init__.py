"""Reading series of mesh files into the model and writing geometry.

A format registry (:mod:`._formats`) maps file suffixes to readers and time
peekers; each format module (:mod:`._vtk`, :mod:`._xdmf`) declares its formats
there, and meshio is used only through :mod:`._meshio_adapter`. A
:class:`Series` reads one step at a time and keeps the meshes it builds in a
:class:`MeshPool` (its own, or one it is given).
"""

from ._contour_writer import read_contour, write_contour
from ._formats import FileFormat, format_for, formats, mesh_suffixes, read_mesh_file, register_format
from ._inputs import file_sha256, input_files, step_data_files
from ._mesh_pool import MeshPool
from ._model_file import mixture_model_from_table, read_mixture_model
from ._point_files import read_line_file, read_measured_file, read_probe_file
from ._meshio_adapter import StepFields
from ._reference_table import read_reference_table
from ._series import (LISTING_SUFFIXES, Series, Step, StepInfo, natural_key, open_series,
                      read_listing)
from ._multiblock import multiblock_data_files
from ._xdmf import xdmf_data_files

#: the suffixes of every readable mesh format (from the format registry)
MESH_SUFFIXES = mesh_suffixes()

#: read one mesh file with its format's reader (the name of earlier versions)
read_meshio = read_mesh_file

__all__ = ["MESH_SUFFIXES", "LISTING_SUFFIXES", "Series", "Step", "StepInfo", "StepFields", "MeshPool",
           "natural_key", "open_series", "read_listing", "read_mesh_file", "read_meshio", "read_contour",
           "write_contour", "FileFormat", "register_format", "formats", "format_for", "xdmf_data_files",
           "multiblock_data_files", "step_data_files", "input_files", "file_sha256", "read_reference_table",
           "read_mixture_model", "mixture_model_from_table", "read_probe_file", "read_line_file",
           "read_measured_file"]
