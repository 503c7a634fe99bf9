"""The finding of an interface that comes within the widths' reach of the domain's boundary."""

from __future__ import annotations

import numpy as np

__all__ = ["boundary_reach_finding", "NEAR_BOUNDARY_SHARE"]

#: a larger share of the interface than this within the widths' reach of the boundary is warned of
#: (our threshold: a drop 15 cells from a wall, a seventh of its interface facing it in reach, read
#: its diffusivity 2 % low; 4 cells, a quarter of it, 9 % low)
NEAR_BOUNDARY_SHARE = 0.05


def boundary_reach_finding(steps, kind: str = ""):
    """A warning :class:`~phasegauge.run.assemble.Finding` when, at some step, more than
    :data:`NEAR_BOUNDARY_SHARE` of the interface lies within the second moment's reach of the
    domain's boundary (``interface_near_boundary_fraction``), else None."""
    from .assemble import Finding

    if "interface_near_boundary_fraction" not in steps or kind == "sharp":  # a sharp interface: one to two
        return None                                                             # cells, no profile to cut
    share = steps["interface_near_boundary_fraction"].to_numpy(dtype=float)
    if not np.isfinite(share).any() or np.nanmax(share) <= NEAR_BOUNDARY_SHARE:
        return None
    worst = float(np.nanmax(share))
    at = float(steps["time"].iat[int(np.nanargmax(share))]) if "time" in steps else float("nan")
    return Finding("interface_near_boundary", "warning",
                   f"up to {100 * worst:.3g} % of the interface (t = {at:g}) lies within the widths' reach of the "
                   "domain's boundary (ten eps, or four cells): there its profile is cut short, so "
                   "width_second_moment and the numerical diffusivity read low (a drop 4 cells from a wall read "
                   "its diffusivity 9 % low in our check)", {"fraction": worst, "time": at,
                                                             "threshold": NEAR_BOUNDARY_SHARE})
