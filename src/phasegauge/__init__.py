"""phasegauge: interface, droplet, mixing and conservation metrics for two-phase simulation output.

The public API: read a series (:class:`Series`), build the mesh model
(:class:`Mesh`), map a field to the phase indicator (:func:`make_indicator`) and
run the analyses on it.
"""

__version__ = "0.1.0"

from .errors import (AnalysisError, FieldNotFoundError, FieldShapeError, InputError,
                     InputFileNotFound, OptionError, OutputError, PhasegaugeError,
                     PhasegaugeWarning, RangeWarning, NonFiniteWarning, SeriesError,
                     SkippedStepWarning, UnreadableFileError, UnsupportedMeshError,
                     ResolutionWarning, SeriesWarning, MeshWarning, OldNameWarning)
from .model.mesh import CellBlock, Mesh, RegularGrid
from .model.indicator import Indicator, make_indicator, map_to_indicator, parse_range
from .io import Series, Step, StepInfo, open_series
from .io.describe import describe_series
from .run.measure import MeasureOptions, MeasureResult, measure

__all__ = [
    "__version__",
    "AnalysisError", "FieldNotFoundError", "FieldShapeError", "InputError", "InputFileNotFound",
    "OptionError", "OutputError", "PhasegaugeError", "PhasegaugeWarning", "RangeWarning",
    "NonFiniteWarning", "SeriesError", "SkippedStepWarning", "UnreadableFileError",
    "UnsupportedMeshError", "ResolutionWarning", "SeriesWarning", "MeshWarning",
    "OldNameWarning",
    "CellBlock", "Mesh", "RegularGrid",
    "Indicator", "make_indicator", "map_to_indicator", "parse_range",
    "Series", "Step", "StepInfo", "open_series",
    "describe_series",
    "MeasureOptions", "MeasureResult", "measure",
]
