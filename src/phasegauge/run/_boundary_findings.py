"""Findings of a diffuse interface's place and resolution: within the widths' reach of the domain's
boundary, and too few cells across."""

from __future__ import annotations

import numpy as np

__all__ = ["boundary_reach_finding", "facing_interface_finding", "resolution_finding", "NEAR_BOUNDARY_SHARE",
           "NEAR_INTERFACE_SHARE", "UNDER_RESOLVED_SHARE"]

#: a larger share of the interface than this with fewer than 4 cells across 0.1 < c < 0.9 is warned of
UNDER_RESOLVED_SHARE = 0.1

#: a larger share of the interface than this within the widths' reach of the boundary is warned of
#: (our threshold: a drop 15 cells from a wall, a seventh of its interface facing it in reach, read
#: its diffusivity 2 % low; 4 cells, a quarter of it, 9 % low)
NEAR_BOUNDARY_SHARE = 0.05

#: a larger share of the interface than this with another interface facing it within 1.5 x the widths' reach
#: (:data:`._facing_interface.FACING_REACH`) is warned of (our threshold, the boundary's: a slab under exact
#: diffusion from a sharp start, 2H = 0.08 on 128^2 cells, read its diffusivity 7 % low; 2H = 0.06, 22 % low; a
#: logistic film thinning from 17 to 14 eps over the run 5 % low, from 12.9 to 10.5 eps 15 % low)
NEAR_INTERFACE_SHARE = 0.05


def _worst_share(steps, column: str, threshold: float, kind: str):
    """``(largest share, its time)`` of the steps column ``column`` where it exceeds ``threshold`` at some step,
    else None (also without the column, and for a sharp interface: one to two cells, no profile to cut)."""
    if column not in steps or kind == "sharp":
        return None
    share = steps[column].to_numpy(dtype=float)
    if not np.isfinite(share).any() or np.nanmax(share) <= threshold:
        return None
    at = float(steps["time"].iat[int(np.nanargmax(share))]) if "time" in steps else float("nan")
    return float(np.nanmax(share)), at


def boundary_reach_finding(steps, kind: str = ""):
    """A warning :class:`~phasegauge.run.assemble.Finding` when, at some step, more than
    :data:`NEAR_BOUNDARY_SHARE` of the interface lies within the second moment's reach of the
    domain's boundary (``interface_near_boundary_fraction``), else None."""
    from .assemble import Finding

    found = _worst_share(steps, "interface_near_boundary_fraction", NEAR_BOUNDARY_SHARE, kind)
    if found is None:
        return None
    worst, at = found
    return Finding("interface_near_boundary", "warning",
                   f"up to {100 * worst:.3g} % of the interface (t = {at:g}) lies within the widths' reach of the "
                   "domain's boundary (ten eps, or four cells): there its profile is cut short, so "
                   "width_second_moment and the numerical diffusivity read low (a drop 4 cells from a wall read "
                   "its diffusivity 9 % low in our check)", {"fraction": worst, "time": at,
                                                             "threshold": NEAR_BOUNDARY_SHARE})


def facing_interface_finding(steps, kind: str = ""):
    """A warning :class:`~phasegauge.run.assemble.Finding` when, at some step, more than
    :data:`NEAR_INTERFACE_SHARE` of the interface has another interface facing it within 1.5 x the second
    moment's reach (``interface_near_interface_fraction``), else None."""
    from .assemble import Finding

    found = _worst_share(steps, "interface_near_interface_fraction", NEAR_INTERFACE_SHARE, kind)
    if found is None:
        return None
    worst, at = found
    return Finding("interface_near_interface", "warning",
                   f"up to {100 * worst:.3g} % of the interface (t = {at:g}) has another interface facing it within "
                   "1.5 x the widths' reach (15 eps, or six cells; a thin film, a ligament or a small drop): there "
                   "its profile is cut halfway to the other (on a small drop its curvature adds to it), so "
                   "width_second_moment and the numerical diffusivity read low (films whose two interfaces came that "
                   "close read their diffusivity 5-22 % low in our check)",
                   {"fraction": worst, "time": at, "threshold": NEAR_INTERFACE_SHARE})


def resolution_finding(steps, audit: dict, kind: str = ""):
    """A warning :class:`~phasegauge.run.assemble.Finding` when, at a step of a diffuse run from the
    first one resolved as a diffuse profile (``interface_cells_across`` of 3.5 or more) and fitted by
    the audit, more than :data:`UNDER_RESOLVED_SHARE` of the interface has fewer than 4 cells across
    0.1 < c < 0.9 (common practice), else None. A sharp step before it (a run that starts from a
    reconstructed step) is the start's, not the model's."""
    from ..analysis._diffusion_audit import SHARP_CELLS_ACROSS
    from .assemble import Finding, _number, _worst

    if "under_resolved_interface_fraction" not in steps or kind == "sharp":
        return None
    later = steps
    start = _number(audit.get("fit_from_time"))  # a diffuse run's steps once the profile is resolved
    if start is not None and "time" in steps:
        later = later[later["time"] >= start]
    if "interface_cells_across" in later:
        resolved = np.flatnonzero(later["interface_cells_across"].to_numpy(dtype=float) >= SHARP_CELLS_ACROSS)
        later = later.iloc[resolved[0]:] if resolved.size else later
    worst = _worst(later, "under_resolved_interface_fraction")
    if not worst > UNDER_RESOLVED_SHARE:
        return None
    return Finding("interface_under_resolved", "warning",
                   f"diffuse interface under-resolved: up to {100 * worst:.3g} % of it has fewer than 4 cells across "
                   "0.1 < c < 0.9 (common practice)", {"fraction": worst, "threshold": UNDER_RESOLVED_SHARE})
