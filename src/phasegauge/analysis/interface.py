"""Interface analysis: contours, interface width and the numerical-diffusion audit.

Pure functions of a mesh and the phase indicator c:

* :func:`find_interface`: the contour c = level (polylines in 2D, triangles in
  3D) on any mesh, as a :class:`Contour`;
* :func:`interface_metrics`: interface size and width by four independent
  estimators (band volume, threshold-free, second moment, local profile fits),
  width in cells and the under-resolved share of the interface;
* :func:`interface_profile_table`: the local profile fits, one row per sample;
* :func:`prepare_widths`: the contour, bulk values and band integrals of the widths, formed
  first for a caller that reads the contour before the widths;
* :func:`diffusion_audit`: an effective (numerical) diffusivity from the
  history of the interface variance;
* :func:`interface_kind`: whether a run's interface is diffuse or sharp.
"""

from ..model.contour import Contour
from ..model.corners import CornerExtremes, cell_gradient
from ._contour import find_interface
from ._diffusion_audit import SHARP_CELLS_ACROSS, diffusion_audit, interface_kind
from ._interface_width import (METRIC_KEYS, PROFILE_COLUMNS, WIDTH_PER_EPS, PreparedWidths, bulk_plateaus,
                               interface_metrics, interface_profile_table, prepare_widths)

__all__ = ["Contour", "CornerExtremes", "find_interface", "interface_metrics",
           "interface_profile_table", "prepare_widths", "PreparedWidths", "cell_gradient", "diffusion_audit",
           "interface_kind", "SHARP_CELLS_ACROSS", "bulk_plateaus",
           "METRIC_KEYS", "PROFILE_COLUMNS", "WIDTH_PER_EPS"]
