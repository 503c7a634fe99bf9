"""phasegauge: interface, droplet, mixing and conservation metrics for two-phase simulation output.

The public API: read a series (:class:`Series`), build the mesh model
(:class:`Mesh`), map a field to the phase indicator (:func:`make_indicator`) and
run the analyses on it.
"""

__version__ = "0.1.0"

import importlib
from types import MappingProxyType


from .errors import (AnalysisError, FieldNotFoundError, FieldShapeError, InputError,
                     InputFileNotFound, OptionError, OutputError, PhasegaugeError,
                     PhasegaugeWarning, RangeWarning, NonFiniteWarning, SeriesError,
                     SkippedStepWarning, UnreadableFileError, UnsupportedMeshError,
                     ResolutionWarning, SeriesWarning, MeshWarning, OldNameWarning)
# The rest of the API is imported on first use (PEP 562), so ``phasegauge --help`` and
# ``import phasegauge.errors`` do not pay for numpy, scipy and meshio.
_LAZY = MappingProxyType({
    **dict.fromkeys(("CellBlock", "Mesh", "RegularGrid"), ".model.mesh"),
    **dict.fromkeys(("Indicator", "make_indicator", "map_to_indicator", "parse_range"), ".model.indicator"),
    **dict.fromkeys(("Series", "Step", "StepInfo", "open_series"), ".io"),
    "describe_series": ".io.describe",
    **dict.fromkeys(("MeasureOptions", "MeasureResult", "measure"), ".run.measure"),
})


def __getattr__(name: str):
    module = _LAZY.get(name)
    if module is None:
        raise AttributeError(f"module 'phasegauge' has no attribute {name!r}")
    return getattr(importlib.import_module(module, __name__), name)


def __dir__():
    return sorted(set(globals()) | set(_LAZY))


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
