"""The bulk-plateaus note: c beyond [0, 1] accounted for by a diffuse interface's Gibbs-Thomson shift of both bulks.

:func:`bulk_plateaus_finding` is called by :func:`phasegauge.run.assemble.findings` where the overshoot volume
passes round-off; it gives the note (a :class:`~phasegauge.run.assemble.Finding`), or why the bulks off their
wells are no such shift (a phrase the overshoot warning carries), or None.
"""

from __future__ import annotations

import numpy as np

__all__ = ["SHIFT_FACTOR", "MAX_SHIFT", "bulk_plateaus_finding"]


#: a bulk shift is taken for the free energy's Gibbs-Thomson shift up to this many times it (the largest
#: drop's shift is the smallest; smaller drops shift the bulk more), and the two bulks' shifts for one
#: shift while within this ratio of each other: our threshold
SHIFT_FACTOR = 3.0

#: without a free energy, a shift of both bulks up to this share of the gap can be Gibbs-Thomson's (the
#: linearised shift (d - 1) w / (12 R) of c = (1 + tanh(x / w)) / 2 is 0.03 for a drop of radius 2.8 w in 2D,
#: 5.6 w in 3D); beyond it, a uniform loss of phase or a wrong --range reads the same: our threshold
MAX_SHIFT = 0.03


def bulk_plateaus_finding(steps, droplets=None, options=None, dimension=None, kind="unknown", tolerance=0.0):
    """A note on bulk plateaus off 0 and 1 that account for c leaving [0, 1]; else why bulks off their wells
    are not the Gibbs-Thomson shift (str, for the overshoot warning), or None.

    A diffuse-interface (Cahn-Hilliard) bulk sits off the wells by the Gibbs-Thomson shift of
    its curved interfaces; c beyond [0, 1] is then physics as long as it stays within the
    plateaus' range widened by the shift itself (twice the shift from the well, at least 1e-3).
    Values further out are overshoot (None or a str: the caller warns). So is a bulk off its well where the
    shift cannot be Gibbs-Thomson's: a sharp interface (volume-of-fluid fractions have none); one bulk
    on its well (or without a plateau, read as its well) while the other moved; the two bulks moved
    opposite ways or by amounts more than :data:`SHIFT_FACTOR` apart (the shift moves both alike);
    with a double-well free energy, a shift of the other sign than the model's or more than
    :data:`SHIFT_FACTOR` times it; without one, a shift beyond :data:`MAX_SHIFT` of the gap. Each step whose
    overshoot volume exceeds ``tolerance`` is judged on its own two bulks (a run that starts on the wells and
    relaxes to shifted bulks pairs no step's well with another step's plateau); the note gives their range.
    """
    columns = ("bulk_c_low", "bulk_c_high", "c_min", "c_max")
    if kind == "sharp" or any(c not in steps for c in columns) or not len(steps):
        return None
    judged = steps
    if "overshoot_volume" in steps:
        over = steps["overshoot_volume"].to_numpy(float) > tolerance
        judged = steps[over] if over.any() else steps
    expected = _expected_shift(droplets, options, dimension)
    table = judged[list(columns)].to_numpy(float)
    named = len(judged) > 1 and "step" in judged
    for k, (low, high, c_min, c_max) in enumerate(table):
        at = f"at step {judged['step'].iloc[k]} " if named else ""
        why = _not_shifted(low, high, c_min, c_max, expected, at)
        if why is not False:
            return why
    low, high = float(np.min(table[:, 0])), float(np.max(table[:, 1]))
    c_min, c_max = float(np.min(table[:, 2])), float(np.max(table[:, 3]))
    figures = {"bulk_c_low": low, "bulk_c_high": high, "c_min": c_min, "c_max": c_max,
               "shift_low": low, "shift_high": high - 1.0}
    if expected is None:
        figures["shift_tolerance"] = MAX_SHIFT
        words = f" (both within {MAX_SHIFT:g} of the gap)"
    else:
        figures["expected_shift"] = expected
        words = f" (the free energy's Gibbs-Thomson shift for the largest drop at the last step: {expected:+.2g})"
    from .assemble import Finding

    return Finding("bulk_plateaus", "note",
                   f"the bulk of the phases sits off 0 and 1 (c = {low:.4g} and {high:.4g}, shift {low:+.2g} and "
                   f"{high - 1:+.2g}){words}: a diffuse-interface model's bulk, moved by the Gibbs-Thomson shift of "
                   f"curved interfaces, is physics, not overshoot; c stays within {c_min:.4g} to {c_max:.4g}, "
                   "inside the plateaus' range", figures)


def _not_shifted(low: float, high: float, c_min: float, c_max: float, expected, at: str):
    """False where one step's bulks (``low``, ``high``) are a Gibbs-Thomson shift that holds its c range (see
    :func:`bulk_plateaus_finding`); else None (c beyond the plateaus' range, or no plateau read) or why not (str)."""
    if not np.all(np.isfinite([low, high, c_min, c_max])):
        return None
    floor, ceiling = min(0.0, low - max(-low, 1e-3)), max(1.0, high + max(high - 1.0, 1e-3))
    if c_min < floor or c_max > ceiling:
        return None
    shifts = (low, high - 1.0)
    largest, smallest = max(abs(s) for s in shifts), min(abs(s) for s in shifts)
    if largest == 0.0:
        return None
    bulk = f"{at}the bulk sits at c = {low:.4g} and {high:.4g}: not a Gibbs-Thomson shift, "
    if shifts[0] * shifts[1] == 0:
        return bulk + "which moves both bulks, and one sits on its well (or shows no plateau)"
    if shifts[0] * shifts[1] < 0:
        return bulk + "which moves both bulks one way, and they spread apart"
    if largest > SHIFT_FACTOR * smallest:
        return bulk + f"which moves both bulks alike, and one moved over {SHIFT_FACTOR:g} times the other"
    if expected is None and largest > MAX_SHIFT:
        return bulk + f"a shift beyond {MAX_SHIFT:g} of the gap (a loss of phase or a wrong --range reads so)"
    if expected is not None and not all(s * expected > 0 and abs(s) <= SHIFT_FACTOR * abs(expected) for s in shifts):
        return bulk + f"the free energy's is {expected:+.2g} for the largest drop at the last step"
    return False


def _expected_shift(droplets, options, dimension):
    """Gibbs-Thomson shift of the bulk in c for the largest drop of the last step, or None.

    For the double well h (c - lean)^2 (c - rich)^2 on the mapped composition, with gradient coefficient kappa:
    sigma = (rich - lean)^3 sqrt(2 kappa h) / 6, and a drop of radius R raises the chemical
    potential of both bulks by mu = (d - 1) sigma / (R (rich - lean)), which moves each bulk by
    mu / f'' with f'' = 2 h (rich - lean)^2 at the wells (Cahn & Hilliard 1958; linearised).
    ``d`` is the dimension the steps were measured in (a disc has one curvature, a sphere two).
    """
    model = getattr(options, "free_energy", None)
    if (getattr(model, "kind", None) != "double-well" or dimension not in (2, 3) or droplets is None
            or not len(droplets) or "equivalent_diameter" not in droplets):
        return None
    last = droplets[droplets["step"] == droplets["step"].max()]
    radius = 0.5 * float(np.nanmax(last["equivalent_diameter"]))
    if not radius > 0:
        return None
    dim = int(dimension)
    gap = model.rich - model.lean
    sigma = gap ** 3 * np.sqrt(2.0 * model.kappa * model.height) / 6.0
    mu = (dim - 1) * sigma / (radius * gap)
    return float(mu / (2.0 * model.height * gap ** 2))  # the well is on c itself (run/_phase_field.py)
