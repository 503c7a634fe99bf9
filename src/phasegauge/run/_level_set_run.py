"""A measure run of a level-set field: its audit record and its finding (:mod:`phasegauge.model.level_set`)."""

from __future__ import annotations

import numpy as np

__all__ = ["level_set_audit", "level_set_findings", "DISTANCE_ERROR_LIMIT"]

#: a median | |grad phi| - 1 | near the interface above this is warned of (our threshold: a tenth off a
#: distance function; not a published one)
DISTANCE_ERROR_LIMIT = 0.1


def level_set_audit(audit: dict) -> dict:
    """The diffusion audit of a level-set run: its kind named, no diffusivity."""
    out = dict(audit)
    out.update(interface_kind="level set", widening=False, significant=False,
               verdict="level-set field: the interface is its zero contour, with no width of its own, so no "
                       "numerical diffusivity is inferred; distance_error_* says how far the field is from a "
                       "distance function near it")
    return out


def level_set_findings(steps) -> list:
    """A warning where the median | |grad phi| - 1 | near the interface exceeds :data:`DISTANCE_ERROR_LIMIT`
    at some step (the field is no longer a distance function there: reinitialisation is due)."""
    from .assemble import Finding

    if "distance_error_median" not in steps or not len(steps):
        return []
    error = steps["distance_error_median"].to_numpy(dtype=float)
    over = np.isfinite(error) & (error > DISTANCE_ERROR_LIMIT)
    if not over.any():
        return []
    worst = int(np.nanargmax(np.where(over, error, -np.inf)))
    time = float(steps["time"].iat[worst])
    last = bool(over[-1])
    return [Finding("distance_error", "warning",
                    f"the level-set field is no longer a distance function near the interface: | |grad phi| - 1 | "
                    f"has a median up to {error[worst]:.3g} (t = {time:g}; {int(over.sum())} step(s) above "
                    f"{DISTANCE_ERROR_LIMIT:g}, our threshold); its zero contour and the phase volumes hold, but what "
                    "rests on phi being a distance (curvature, a narrow band) is off: reinitialise it more often",
                    {"distance_error_median": float(error[worst]), "time": time, "steps": int(over.sum()),
                     "at_last_step": last, "limit": DISTANCE_ERROR_LIMIT})]
