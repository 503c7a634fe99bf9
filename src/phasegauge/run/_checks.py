"""Which of the report's standing checks a run made, and why any was not made.

The clean verdict of a run ("no flags: interface not widening, phase volume within tolerance, indicator
bounded, interface and droplets resolved") holds only for the checks that ran: ``--analyses`` can leave
some out, a run too short leaves the diffusion audit without a fit, and a sharp interface or a level set
has no width to judge. :func:`standing_checks` says, for each check, whether it was made and, if not, why;
:func:`phasegauge.report._measure_report.verdict_lines` turns that and the flags into the lines the
report, stdout and compare give.
"""

from __future__ import annotations

import numpy as np

__all__ = ["standing_checks", "NOT_IN_ANALYSES"]

#: why a check was not made when its analysis was not chosen
NOT_IN_ANALYSES = "not in --analyses"


def _check(name: str, passed: str, reason: str = "") -> dict:
    return {"check": name, "made": not reason, "passed_as": passed, "not_made_because": reason}


def _drift_not_judged(steps, found) -> str:
    """Why the phase volume's drift was not judged though measured over two steps or more, or ''."""
    kinds = {getattr(f, "kind", None): getattr(f, "text", "") for f in (found or ())}
    if "phase_volume_not_judged" in kinds:
        if "store no times" in kinds["phase_volume_not_judged"]:
            return "an open domain over steps that store no times: its boundary flow cannot be integrated"
        return "an open domain whose outputs are too far apart to integrate its boundary flow"
    if "phase_volume_left_out" in kinds:
        return "its change lies within what the cells left out (non-finite values) could hold"
    volume = steps["phase_volume"].to_numpy(dtype=float) if "phase_volume" in steps else None
    if volume is not None and not (np.abs(np.nan_to_num(volume)) > 0).any():
        return "no phase: the phase volume is 0 at every step"
    return ""


def _finite_somewhere(steps, column: str) -> bool:
    return steps is not None and column in steps and bool(np.isfinite(steps[column].to_numpy(dtype=float)).any())


def standing_checks(steps, audit: dict, options, found=None) -> list:
    """The checks a clean run vouches for, each a dict: ``check`` (its name), ``made`` (bool),
    ``passed_as`` (the words that say it passed) and ``not_made_because`` (empty when made).

    Made only where the run judged what the check reads: the diffusion audit fitted a width history
    (``interface_widening``), the phase volume over two steps or more, not 0 at every step, and no finding
    (``found``: the run's findings) that says its drift was not judged (``phase_volume_drift``), the
    overshoot volume of an indicator that can leave [0, 1] (``indicator_bounds``: not a level set's; passed
    as "bulk off 0 and 1 (note)" where the bulk-plateau note stands in for the overshoot warning), the
    share of the interface under 4 cells across on a diffuse interface, finite at some step
    (``interface_resolution``), and one droplet or more
    (``droplet_resolution``).
    """
    analyses = set(getattr(options, "analyses", ()))
    level_set = bool(getattr(options, "level_set", False))
    kind = (audit or {}).get("interface_kind")
    checks = []
    # the diffusion audit: a fitted diffusivity, or nothing to judge
    audit = audit or {}
    fitted = np.isfinite(float(audit.get("D_num", np.nan)))
    verdict = str(audit.get("verdict") or "no width measured")
    why = ("" if "interface" in analyses and not level_set and fitted
           else NOT_IN_ANALYSES if "interface" not in analyses
           else "a level set has no width of its own" if level_set or kind == "level set"
           else verdict if verdict.startswith("too few")
           else "sharp interface: its width is the scheme's reconstruction" if kind == "sharp" else verdict)
    checks.append(_check("interface_widening", "interface not widening", why))
    n = len(steps) if steps is not None else 0
    measured = steps is not None and "phase_volume_drift" in steps
    why = ("" if "conservation" in analyses and measured and n > 1 else NOT_IN_ANALYSES
           if "conservation" not in analyses else "one step only: no change to judge" if measured
           else "no phase volume measured")
    why = why or _drift_not_judged(steps, found)
    checks.append(_check("phase_volume_drift", "phase volume within tolerance", why))
    why = ("a level set's indicator is its Heaviside, bounded by construction" if level_set
           else "" if steps is not None and "overshoot_volume" in steps else NOT_IN_ANALYSES
           if "conservation" not in analyses else "no overshoot volume measured")
    noted = any(getattr(f, "kind", None) == "bulk_plateaus" for f in (found or ()))
    checks.append(_check("indicator_bounds", "bulk off 0 and 1 (note)" if noted else "indicator bounded", why))
    why = ("" if "interface" in analyses and kind not in ("sharp", "level set") and not level_set
           and _finite_somewhere(steps, "under_resolved_interface_fraction")
           else NOT_IN_ANALYSES if "interface" not in analyses
           else "a level set has no width of its own" if level_set or kind == "level set"
           else "a sharp interface is one to two cells by design" if kind == "sharp"
           else "no interface found at any step" if steps is not None and "under_resolved_interface_fraction" in steps
           else "no interface thickness measured")
    checks.append(_check("interface_resolution", "interface resolved", why))
    counts = steps["droplet_count"].to_numpy(dtype=float) if steps is not None and "droplet_count" in steps else ()
    why = (NOT_IN_ANALYSES if "droplets" not in analyses
           else "" if (np.nan_to_num(counts) > 0).any() else "no droplets found")
    checks.append(_check("droplet_resolution", "droplets resolved", why))
    return checks
