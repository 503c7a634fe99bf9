"""The coarsening note of a run: the growth exponent of L ~ t^n, fitted to the interface spacing."""

from __future__ import annotations

import numpy as np

__all__ = ["coarsening_finding", "NUMBERED_COARSENING"]

#: the note of a coarsening run whose steps store no times
NUMBERED_COARSENING = ("no coarsening exponent: the steps store no times (numbered 0, 1, 2 ...), and step numbers "
                       "are no times (log-spaced outputs would read n far from the truth); give a 'time,path' "
                       "listing of the output times")


def coarsening_finding(steps, numbered: bool = False):
    """The ``coarsening`` note of the steps table (a :class:`~phasegauge.run.assemble.Finding`), or None.

    The exponent is fitted to ``interface_spacing`` (domain volume / interface size), in which no
    interface width enters; the structure-factor length ``coarsening_length`` reads lower as a
    pattern outgrows a fixed interface width (:func:`phasegauge.analysis.mixing.coarsening_length`),
    so its exponent is given beside it, not as the answer. A table without the spacing (or with it
    at fewer than two steps) is fitted on ``coarsening_length``, and the note names the length.
    With ``numbered`` (the steps store no times) no exponent is fitted: the note says so.

    Figures: ``exponent``, ``exponent_stderr``, ``prefactor``, ``points`` (as
    :func:`~phasegauge.analysis.mixing.coarsening_exponent`), ``length`` (the column fitted) and
    ``structure_factor_exponent``, ``structure_factor_exponent_stderr``.
    """
    from ..analysis.mixing import coarsening_exponent
    from .assemble import Finding

    if "coarsening_length" not in steps or len(steps) <= 2:
        return None
    if numbered:
        return Finding("coarsening", "note", NUMBERED_COARSENING, {"length": None})
    structure = coarsening_exponent(steps["time"], steps["coarsening_length"])
    fit, length = structure, "coarsening_length"
    if "interface_spacing" in steps:
        spacing = coarsening_exponent(steps["time"], steps["interface_spacing"])
        if np.isfinite(spacing["exponent"]):
            fit, length = spacing, "interface_spacing"
    if not np.isfinite(fit["exponent"]):
        return None
    err = fit["exponent_stderr"]
    text = (f"the pattern coarsens as L ~ t^n with n = {fit['exponent']:.3g}"
            + (f" ± {err:.2g}" if np.isfinite(err) else "")
            + f" over {fit['points']} steps" + (f" of {len(steps)}" if fit["points"] < len(steps) else ""))
    if length == "interface_spacing":
        text += ", L = domain volume / interface size (interface_spacing)"
        if np.isfinite(structure["exponent"]):
            text += (f"; the structure-factor length gives n = {structure['exponent']:.3g} (it reads low as the "
                     "pattern outgrows a fixed interface width)")
    else:
        text += (", L from the structure factor (coarsening_length; it reads low as the pattern outgrows a fixed "
                 "interface width)")
    text += "; diffusive coarsening gives n = 1/3 (Lifshitz & Slyozov 1961)"
    figures = dict(fit, length=length, structure_factor_exponent=structure["exponent"],
                   structure_factor_exponent_stderr=structure["exponent_stderr"])
    return Finding("coarsening", "note", text, figures)
