"""Reading series of mesh files into the model (through meshio) and writing geometry."""

from ._contour_writer import read_contour, write_contour
from ._meshio_adapter import MESH_SUFFIXES, StepFields, read_meshio
from ._series import (LISTING_SUFFIXES, Series, Step, StepInfo, natural_key, open_series,
                      read_listing)

__all__ = ["MESH_SUFFIXES", "LISTING_SUFFIXES", "Series", "Step", "StepInfo", "StepFields",
           "natural_key", "open_series", "read_listing", "read_meshio", "read_contour", "write_contour"]
