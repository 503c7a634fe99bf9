"""A diffuse run against a sharp one (volume of fluid or level set): the volume its band adds.

A diffuse band is not symmetric about a curved contour: ``int c dV`` of a logistic drop exceeds the
sharp drop's volume at second order in the band's scale (:func:`phasegauge.analysis.compare.band_volume_excess`).
A sharp run (cell fractions, a level set's cut cells) has no such excess, so the two runs' phase volumes
differ by it while their shapes agree. This module states the expected excess at the last paired time
where it can be stated: every droplet of the diffuse run closed (no spanning droplet, none within
:data:`WALL_SCALES` band scales of a wall) and the band's scale measured.
"""

from __future__ import annotations

import numpy as np

__all__ = ["band_excess", "WALL_SCALES", "SHARP_KINDS"]

#: a droplet nearer a wall than this many band scales has its band cut (its tail there is
#: 1 / (1 + e^6) = 0.25 %; our threshold)
WALL_SCALES = 6.0
#: kinds whose phase volume has no band of its own
SHARP_KINDS = ("sharp", "level set")


def band_excess(res_a, res_b, pairs, labels, periodic=()) -> dict | None:
    """The diffuse run's expected band excess at the last paired time, beside the measured gap.

    Returns None unless one run is diffuse and the other sharp or a level set. Otherwise a dict:
    ``label``, ``other`` (the runs' labels), ``step``, ``time`` (the diffuse run's), ``scale`` (its
    ``interface_eps``), ``dimension``, ``drops``, ``expected`` (NaN where not stated), ``observed``
    (its phase volume minus the other's), ``why`` (why not stated, or "").
    """
    from ..analysis.compare import band_volume_excess

    kinds = [(run.audit or {}).get("interface_kind", "unknown") for run in (res_a, res_b)]
    if "diffuse" not in kinds or not any(k in SHARP_KINDS for k in kinds) or pairs is None or not len(pairs):
        return None
    k = kinds.index("diffuse")
    diffuse, other = (res_a, res_b) if k == 0 else (res_b, res_a)
    last = pairs.iloc[-1]
    steps = (int(last["step_a"]), int(last["step_b"]))
    step, other_step = (steps[0], steps[1]) if k == 0 else (steps[1], steps[0])
    row = _row(diffuse.steps, step)
    other_row = _row(other.steps, other_step)
    out = {"label": labels[k], "other": labels[1 - k], "step": step, "time": float(row.get("time", np.nan)),
           "scale": float(row.get("interface_eps", np.nan)), "dimension": 0, "drops": 0, "expected": np.nan,
           "observed": float(row.get("phase_volume", np.nan)) - float(other_row.get("phase_volume", np.nan)),
           "why": ""}
    result = next((r for r in diffuse.results if r.index == step and r.skipped is None), None)
    drops = diffuse.droplets[diffuse.droplets["step"] == step] if len(diffuse.droplets) else diffuse.droplets
    out["dimension"] = int(getattr(result, "dimension", 0) or 0)
    out["drops"] = int(len(drops))
    out["why"] = _not_stated(out, drops, getattr(result, "outline", None), periodic)
    if not out["why"]:
        out["expected"] = band_volume_excess(out["scale"], drops["equivalent_diameter"].to_numpy() / 2.0,
                                             out["dimension"])
    return out


def _row(steps, step: int) -> dict:
    if steps is None or "step" not in steps:
        return {}
    picked = steps[steps["step"] == step]
    return picked.iloc[0].to_dict() if len(picked) else {}


def _not_stated(out: dict, drops, outline, periodic) -> str:
    """Why the expected excess cannot be stated, or ""."""
    s = out["scale"]
    if out["dimension"] not in (2, 3):
        return "the step's dimension is not known"
    if not (np.isfinite(s) and s > 0):
        return "the band's scale (interface_eps) was not measured"
    if not len(drops):
        return "no droplet of the measured phase"
    if "spanning" in drops and drops["spanning"].astype(bool).any():
        return "a droplet wraps a whole periodic axis"
    if outline is None:
        return "the domain's extent is not known"
    lo, hi = (np.asarray(b, dtype=float) for b in outline.bounds)
    for a, name in enumerate("xyz"):
        if hi[a] - lo[a] <= 0 or name in periodic or f"bbox_min_{name}" not in drops:
            continue
        near = ((drops[f"bbox_min_{name}"] - lo[a] < WALL_SCALES * s)
                | (hi[a] - drops[f"bbox_max_{name}"] < WALL_SCALES * s))
        if near.any():
            return (f"a droplet of the measured phase reaches within {WALL_SCALES:g} band scales of a wall "
                    f"normal to {name}")
    return ""
