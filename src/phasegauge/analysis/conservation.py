"""Conservation: phase volume and mass per step, drift over a series, boundedness,
and what crosses open boundaries."""

from ._boundary_flux import open_boundary_flux
from ._phase_volume import boundedness, conservation_metrics, drift_columns, known_rates, volume_drift

__all__ = ["boundedness", "conservation_metrics", "volume_drift", "drift_columns", "known_rates",
           "open_boundary_flux"]
