"""Findings of the phase volume over the steps: drift in a closed domain; in an open one, what the
boundary flow does not account for."""

from __future__ import annotations

import numpy as np

__all__ = ["drift_findings", "outflow_allowance", "outflow_allowance_parts"]


#: an interval's change of the outflow rate more than this many times a neighbouring interval's (per unit
#: time) is a jump, not a smooth variation (our threshold)
JUMP_RATIO = 3.0
#: the trapezoidal rule's error term dt^3 / 12 |r''| read from second differences is taken this many times:
#: the second difference at an interval's ends is not its largest curvature within (a rate decaying by e
#: every two outputs: 0.92 to 0.96 of the real error), our threshold
SMOOTH_MARGIN = 2.0


def outflow_allowance(steps) -> np.ndarray:
    """Per step, how far the trapezoidal outflow (``phase_volume_outflow``) may be from the true time
    integral of ``boundary_phase_outflow``, summed over the intervals so far: the sum of the parts
    :func:`outflow_allowance_parts` gives."""
    return sum(outflow_allowance_parts(steps).values(), np.zeros(len(steps)))


def outflow_allowance_parts(steps) -> dict:
    """The parts of :func:`outflow_allowance`, each per step and summed over the intervals so far.

    - ``jumps``: intervals where the rate jumps (its change per unit time more than ``JUMP_RATIO`` times
      a neighbouring interval's, or of the other sign than both: a rate that alternates is not resolved)
      or that lack a neighbour (the first and the last interval): half the change of the rate times the
      interval (an exact bound where the rate is monotone between outputs: the integral then lies between
      the left and the right rectangles, the trapezoid midway);
    - ``smooth``: the other intervals, where the outputs resolve the rate: the trapezoidal rule's error
      term, dt^3 / 12 |r''| (r'' the larger of the second differences of the rate at the interval's two
      ends, divided differences on uneven intervals) times :data:`SMOOTH_MARGIN`, never above the bound of
      ``jumps``;
    - ``unknown``: the trapezoid of ``boundary_phase_outflow_unknown`` (what the written fields do not
      give exactly on the open faces: c or the velocity not finite, c on cells taken at the face, the
      velocity on points 0 at a wall's corner: :func:`phasegauge.analysis.open_boundary_flux`).

    The rates are those :func:`known_rates` gives.
    """
    from ..analysis.conservation import known_rates

    zero = np.zeros(len(steps))
    parts = {"jumps": zero, "smooth": zero, "unknown": zero}
    if "boundary_phase_outflow" not in steps or "time" not in steps or len(steps) < 2:
        return parts
    rate = known_rates(steps)
    dt = np.abs(np.diff(steps["time"].to_numpy(dtype=float)))
    change = np.diff(rate)
    with np.errstate(invalid="ignore", divide="ignore"):
        slope = np.where(dt > 0, change / np.where(dt > 0, dt, 1.0), 0.0)
        curvature = np.zeros(rate.size)  # |r''| at the steps between two intervals
        span = dt[:-1] + dt[1:]
        curvature[1:-1] = np.where(span > 0, 2.0 * np.abs(np.diff(slope)) / np.where(span > 0, span, 1.0), 0.0)
    first_order = 0.5 * np.abs(change) * dt
    error_term = np.minimum(SMOOTH_MARGIN * dt ** 3 / 12.0 * np.maximum(curvature[:-1], curvature[1:]), first_order)
    size = np.abs(slope)
    before = np.concatenate([[np.nan], slope[:-1]])
    after = np.concatenate([slope[1:], [np.nan]])
    # the first and the last interval: the rate's curvature is seen at one end only (a rate decaying from the
    # first output, or the steep edge where a drop starts to cross, curves most where it is not seen)
    jump = np.isnan(before) | np.isnan(after)
    for side in (before, after):
        jump |= np.isfinite(side) & (size > JUMP_RATIO * np.abs(np.nan_to_num(side)))
    jump |= (slope * np.nan_to_num(before) < 0) & (slope * np.nan_to_num(after) < 0)
    parts["jumps"] = np.concatenate([[0.0], np.cumsum(np.where(jump, first_order, 0.0))])
    parts["smooth"] = np.concatenate([[0.0], np.cumsum(np.where(jump, 0.0, error_term))])
    if "boundary_phase_outflow_unknown" in steps:
        unknown = np.nan_to_num(steps["boundary_phase_outflow_unknown"].to_numpy(dtype=float))
        parts["unknown"] = np.concatenate([[0.0], np.cumsum(0.5 * (unknown[1:] + unknown[:-1]) * dt)])
    return parts


def _left_out_share(steps, first: float) -> tuple[np.ndarray, np.ndarray]:
    """Per step, what the cells left out for non-finite values could hold (c at most 1 in them) over
    the first step's phase volume: those of the step itself (a change down to minus this is no drift)
    and those of the first step (up to plus this); zeros at the first step and without such cells."""
    if "nonfinite_volume" not in steps or not len(steps) or first <= 0:
        return np.zeros(len(steps)), np.zeros(len(steps))
    left = np.nan_to_num(steps["nonfinite_volume"].to_numpy(dtype=float), nan=0.0) / first
    below, above = left.copy(), np.full(left.size, left[0])
    below[0] = above[0] = 0.0  # the first step against itself
    return below, above


def drift_findings(steps, options, open_domain: bool, floor_volume: float, *, on_points: bool = False,
                   numbered: bool = False) -> list:
    """The phase-volume findings, judged against ``options.drift_tolerance`` (relative) and never
    below ``floor_volume`` (round-off, in volume units).

    A closed domain: the drift from the first step (``phase_volume_drift``; what the cells left out
    for non-finite values could hold is not judged). An open one: the drift the boundary flow does
    not account for (``phase_volume_drift_closed``), beyond what integrating the outflow between
    outputs may miss (:func:`outflow_allowance`) and what cells left out could hold; a change the flow
    accounts for is a note. Either relative to the first step's phase volume, or, where that is 0 (a
    channel that starts empty, a drop that appears) or, in an open domain, smaller than a later step's,
    to the largest phase volume of the run. ``on_points``: the velocity was on
    points at some step (the open domain's warning says that walls can then read open). ``numbered``: the
    steps store no times (0, 1, 2 ...): an open domain's flow, a rate per unit time, cannot be integrated
    over them, so its drift is not judged (a note naming the listing that would give the times).
    """
    from .assemble import Finding

    if "phase_volume_drift" not in steps or not len(steps):
        return []
    if open_domain and numbered:
        return [Finding("phase_volume_not_judged", "note",
                        "phase volume through the open boundaries not judged: the steps store no times (numbered "
                        "0, 1, 2 ...), so the flow through the boundaries, a rate per unit time, cannot be "
                        "integrated between them; give a 'time,path' listing of the steps' times", {}),
                Finding("open_boundary", "note", _OPEN)]
    change = steps["phase_volume_drift"].to_numpy(dtype=float)  # relative to the first step's phase volume
    volume = steps["phase_volume"].to_numpy(dtype=float) if "phase_volume" in steps else None
    reference = abs(float(volume[0])) if volume is not None else 1.0
    against = "the first step's phase volume"
    largest = float(np.nanmax(np.abs(volume))) if volume is not None and np.isfinite(volume).any() else 0.0
    if open_domain and reference > 0 and largest > reference:
        # a channel that fills: its phase volume grows with the flow, and a flux error of a share of what
        # crossed read as hundreds of per cent of a first step that held a trace of phase
        reference = largest
        change = (volume - volume[0]) / reference
        against = f"the largest phase volume, {reference:.4g} (an open domain's grows with its inflow)"
    if not reference > 0:  # none at the first step: the change against the largest phase volume
        if not largest > 0:
            return []
        reference = largest
        change = (volume - volume[0]) / reference
        against = f"the largest phase volume, {reference:.4g}: the first step holds none"
    tolerance = max(float(options.drift_tolerance), floor_volume / reference if volume is not None else 0.0)
    if open_domain and "phase_volume_outflow" in steps:
        return _open_findings(steps, change, reference, tolerance, against, Finding, on_points)
    worst = float(np.nanmax(np.abs(change))) if np.isfinite(change).any() else 0.0
    if not worst > tolerance:
        return []
    # cells with NaN or Inf are left out of a step's phase volume: c at most 1 there, a step's
    # change with no drift lies between minus what its own cells left out could hold and plus
    # what the first step's could; only the drift beyond that is judged
    below, above = _left_out_share(steps, reference)
    changed = np.abs(np.nan_to_num(change)) > tolerance
    bound = np.where(change > 0, above, below)[changed] if changed.any() else np.zeros(1)
    beyond = np.maximum(np.maximum(change - above, -change - below), 0.0)
    beyond = float(np.nanmax(beyond)) if np.isfinite(beyond).any() else 0.0
    if beyond <= tolerance:
        return [Finding("phase_volume_left_out", "note",
                        f"phase volume changes by up to {100 * worst:.3g} %, no more than the cells left out "
                        f"(non-finite values) could account for (up to {100 * float(bound.max()):.3g} % of "
                        f"{against}): not judged as drift",
                        {"largest_drift": worst, "largest_left_out": float(bound.max()), "tolerance": tolerance})]
    signed = float(change[int(np.nanargmax(np.abs(change)))])
    text = (f"phase volume drifts by up to {100 * signed:+.3g} % ({'gained' if signed > 0 else 'lost'}; tolerance "
            f"{100 * tolerance:.3g} % of {against})")
    figures = {"largest_drift": worst, "signed_drift": signed, "tolerance": tolerance}
    if (below + above).any():
        text += f"; {100 * beyond:.3g} % beyond what the cells left out (non-finite values) could account for"
        figures["largest_drift_beyond_left_out"] = beyond
    return [Finding("phase_volume_drift", "warning", text, figures)]


def _open_findings(steps, change, reference, tolerance, against, Finding, on_points=False) -> list:
    """An open domain's findings: the drift left after adding back what crossed the boundaries."""
    outflow = np.nan_to_num(steps["phase_volume_outflow"].to_numpy(dtype=float))
    left = change + outflow / reference
    parts = {name: part / reference for name, part in outflow_allowance_parts(steps).items()}
    slack = sum(parts.values())
    # what the cells left out for non-finite values could hold is not judged, as in a closed domain
    below, above = _left_out_share(steps, reference)
    beyond = np.maximum(np.maximum(left - above, -left - below), 0.0) - slack
    worst_change = float(np.nanmax(np.abs(change))) if np.isfinite(change).any() else 0.0
    i = int(np.nanargmax(beyond)) if np.isfinite(beyond).any() else 0
    j = int(np.nanargmax(np.abs(left))) if np.isfinite(left).any() else 0
    figures = {"largest_drift": worst_change, "largest_drift_closed": float(np.nanmax(np.abs(left))),
               "integration_allowance": float(slack[j]), "tolerance": tolerance}
    if np.isfinite(beyond).any() and beyond[i] > tolerance:
        signed = float(left[i])
        figures.update(signed_drift_closed=signed, integration_allowance=float(slack[i]))
        text = (f"phase volume is not accounted for by the flow through the open boundaries: after adding back "
                f"what crossed them, {100 * signed:+.3g} % is {'gained' if signed > 0 else 'lost'} "
                f"(t = {float(steps['time'].iat[i]):g}; tolerance {100 * tolerance:.3g} % of {against}, and "
                f"{100 * float(slack[i]):.3g} % for what the boundary flow may miss); the flow is taken "
                "from the written velocity and field on the boundary faces at the outputs, not from the solver's "
                "own fluxes: phase that crosses the boundary wholly between two outputs (a drop leaving within "
                "one interval) is not seen and reads as lost or gained")
        if on_points:
            text += ("; the velocity is on points (no cell copy) at some steps or all: where its point values "
                     "were averaged from the cells, a wall beside the phase (near a corner or a stagnation point) "
                     "can read open and carry a false flux, and an open face that shares a corner with a wall "
                     "takes the wall's u = 0 there, so its flux is off by O(h), up to one half face per wall "
                     "corner (10 % of a plug inlet's inflow at 10 cells across; counted in the allowance): write "
                     "the velocity on cells to tell")
        return [Finding("phase_volume_drift", "warning", text, figures),
                Finding("open_boundary", "note", _OPEN)]
    text = _OPEN
    worst_left = figures["largest_drift_closed"]
    if worst_left > tolerance and np.nanmax(np.abs(left) - slack) > tolerance:  # the cells left out account for it
        bound = float(np.max(np.maximum(below, above)))
        return [Finding("phase_volume_left_out", "note",
                        f"after adding back what crossed the open boundaries, up to {100 * worst_left:.3g} % of the "
                        f"phase volume is left, no more than the cells left out (non-finite values) could account for "
                        f"(up to {100 * bound:.3g} % of {against}): not judged as drift",
                        {**figures, "largest_left_out": bound}), Finding("open_boundary", "note", _OPEN)]
    if worst_left > tolerance:  # within the allowance only: what the outputs cannot settle
        text = (f"phase volume through the open boundaries not judged: after adding back what crossed them up to "
                f"{100 * worst_left:.3g} % is left (tolerance {100 * tolerance:.3g} % of {against}), no more than "
                + _allowance_reason({name: float(part[j]) for name, part in parts.items()}, on_points))
        return [Finding("phase_volume_not_judged", "note", text, figures), Finding("open_boundary", "note", _OPEN)]
    if worst_change > tolerance:
        text = (f"phase volume changes by up to {100 * worst_change:.3g} % through the open boundaries: the flow "
                f"through them accounts for it (after adding it back, up to {100 * figures['largest_drift_closed']:.3g}"
                f" % is left; tolerance {100 * tolerance:.3g} % of {against})")
    return [Finding("open_boundary", "note", text, figures)]


def _allowance_reason(parts: dict, on_points: bool) -> str:
    """What the largest part of the outflow's allowance (:func:`outflow_allowance_parts`) is, and what
    would settle it."""
    largest = max(parts, key=parts.get)
    if largest == "unknown":
        return ("the part of the boundary flux the written fields give only approximately (boundary_phase_outflow_"
                "unknown: open faces whose c or velocity is not finite; with c on cells, the cell's value taken at "
                "the face" + ("; open faces sharing a corner with a wall, where the velocity on points is the wall's "
                              "0" if on_points else "")
                + "): finite values on the boundary, a finer mesh" + (" or the velocity written on cells" if on_points
                                                                      else "") + " would tell")
    if largest == "smooth":
        return ("the trapezoidal rule's own error in integrating the boundary flow between outputs, estimated from "
                "the rate's second differences (the outputs resolve it; the error falls with the square of the "
                "output interval): outputs twice as close in time would tell")
    return ("integrating the boundary flow between outputs may miss where the rate jumps from one output to the "
            f"next (a change more than {JUMP_RATIO:g} times the next interval's, or an alternating one): outputs "
            "closer in time would tell")


_OPEN = ("the domain has inflow or outflow boundaries: phase-volume drift includes what crossed them "
         "(phase_volume_drift_closed adds it back)")
