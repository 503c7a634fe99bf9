"""The free energy of a measure run (``--free-energy``): one step's figures and their warnings.

The model is read on the composition mapped through ``--range`` (c: 0 at the range's low end,
1 at its high end), as ``--model`` reads it: a double well's ``lean`` and ``rich`` are values of
c, an activity model's variable is the mole fraction c. The analysis is
:func:`phasegauge.analysis.thermo.equilibrium_metrics`; this module wires it into the run and
says when its inputs look wrong: a field that reaches well beyond the double well's wells (its
range not given, or given wrong), and a field that looks periodic along an axis the stencil
takes as a closed wall.
"""

from __future__ import annotations

import warnings

import numpy as np

from ..errors import MeshWarning, RangeWarning

__all__ = ["equilibrium_step", "WELL_REACH"]

#: the mapped field may reach beyond a double well's wells by this share of their gap before a
#: warning (our threshold: a Gibbs-Thomson shift or an overshoot is a few hundredths of it; a field in
#: [-1, 1] measured without --range reaches a whole gap beyond the wells 0 and 1)
WELL_REACH = 0.25


def equilibrium_step(step, mesh, ind, options, interface_size, look) -> dict:
    """Chemical potential spread, free energy and tension of one step (``EQUILIBRIUM_KEYS``).

    The model is evaluated on c, the field mapped through the range; on any mesh but a uniform
    regular grid the figures are NaN and a warning says so. ``look`` is the step's
    :class:`~phasegauge.analysis.droplets.PeriodicLook` (the axes along which the field looks
    periodic, worked out once for this warning and the droplets').
    """
    from ..analysis.thermo import equilibrium_metrics

    where = step.info.where
    grid = mesh.regular_grid
    uniform = grid is not None and grid.uniform
    if not uniform:  # the Laplacian's stencil needs one spacing per axis
        warnings.warn(MeshWarning("the free energy, tension and chemical potential (--free-energy) need a uniform "
                                  "regular grid, which this mesh is not: their columns are left empty; sample the "
                                  "field onto such a grid", where=where), stacklevel=2)
    model = options.free_energy
    values = ind.point if ind.location == "point" else ind.cell  # point data on the point lattice itself
    c = values if ind.phase == "upper" else 1.0 - values  # the field mapped through the range: lo -> 0, hi -> 1
    temperature = None
    if model.kind == "double-well":
        _warn_beyond_the_wells(c, model, options.range, where)
    else:  # an activity model: the mole fraction of its component, at the step's temperature
        from ._mixture import step_temperature

        temperature = step_temperature(step, mesh, options)
    if uniform:  # whatever --analyses holds
        _warn_looks_periodic(look.axes, ind.location, options.periodic, where)
    return equilibrium_metrics(mesh, c, model, kappa=model.kappa, periodic=tuple(options.periodic),
                               interface_size=interface_size, temperature=temperature)


def _warn_beyond_the_wells(c, model, value_range, where: str) -> None:
    """One warning (collapsed over steps) when the mapped field reaches beyond a double well's wells
    by more than :data:`WELL_REACH` of their gap: the model and the field's range disagree."""
    finite = np.asarray(c)[np.isfinite(c)]
    if not finite.size:
        return
    low, high = float(finite.min()), float(finite.max())
    reach = WELL_REACH * (model.rich - model.lean)
    if model.lean - reach <= low and high <= model.rich + reach:
        return
    lo, hi = value_range
    warnings.warn(RangeWarning(
        f"--range {lo:g},{hi:g} maps the field to c = {low:.3g} to {high:.3g}, beyond the --free-energy double "
        f"well's wells c = {model.lean:g} and {model.rich:g} by more than a quarter of their gap, so its free energy "
        "and chemical potential are off; give the field's own range with --range (the model's lean and rich are "
        "values of c, 0 at the range's low end and 1 at its high end, as --model reads them)", where=where),
        stacklevel=3)


def _warn_looks_periodic(axes, location: str, periodic, where: str) -> None:
    """One warning (collapsed over steps) when the field looks periodic along ``axes``, which the stencil
    closes (:attr:`phasegauge.analysis.droplets.PeriodicLook.axes`: the rule of
    :func:`~phasegauge.analysis.droplets.cells_look_periodic`, or on point data of
    :func:`~phasegauge.analysis.droplets.points_look_periodic`, in either layout of a periodic run's points);
    the rule reads the indicator, c or 1 - c, alike."""
    on_points = location == "point"
    if axes:
        names = ",".join(axes)
        layers = "plane of points" if on_points else "layer of cells"
        warnings.warn(MeshWarning(
            f"the field looks periodic along {names} (its last {layers} joins the first as smoothly as "
            "neighbouring ones join), but the free energy and chemical potential take closed walls there, "
            f"which raises the chemical potential's spread at the boundary; give --periodic "
            f"{','.join(sorted(set(periodic) | set(axes)))} if the run is periodic", where=where), stacklevel=3)
