"""Conservation: phase volume and mass per step, drift over a series, boundedness,
and what crosses open boundaries."""

from ._boundary_flux import open_boundary_flux
from ._phase_volume import boundedness, conservation_metrics, drift_columns, volume_drift

__all__ = ["boundedness", "conservation_metrics", "volume_drift", "drift_columns",
           "open_boundary_flux"]
