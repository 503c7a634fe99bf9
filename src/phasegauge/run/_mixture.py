"""Partially miscible mixtures in a measure run: the options, the per-step values, the findings.

With a thermodynamic model (``MeasureOptions.model``) and a temperature, every step gets the
bulk composition of each phase (cells farther than ``bulk_widths`` measured interface widths
from the contour, median per phase), the binodal at the step's temperature, the gap between
them, the state the model predicts for the mean composition, the drop radius with the
Gibbs-Thomson shift it implies, and with a solute field how the solute is distributed.
The analysis is :mod:`phasegauge.analysis.thermo`; this module only wires it into the run.
"""

from __future__ import annotations

import math
import os
import warnings

import numpy as np

from ..analysis._phase_compositions import between_class_share
from ..errors import OptionError, PhasegaugeWarning
from ..model._numbers import finite_number

__all__ = ["normalize_mixture", "mixture_step", "mixture_findings", "mixture_report_arrays",
           "MIXTURE_COLUMNS", "SOLUTE_COLUMNS"]

#: steps.csv columns of a run with a model
MIXTURE_COLUMNS = ("temperature", "mean_composition", "bulk_composition_lean", "bulk_composition_rich",
                   "bulk_spread_lean", "bulk_spread_rich", "binodal_lean", "binodal_rich", "equilibrium_gap",
                   "mixture_state", "separated", "drop_radius", "gibbs_thomson_shift")
#: steps.csv columns of a run with a solute
SOLUTE_COLUMNS = ("solute_lean", "solute_rich", "partition_coefficient", "extraction_progress",
                  "lever_rule_residual")
#: bulks apart by more than this share of the binodal's gap and :data:`SEPARATION_SPREADS` times the sum
#: of their spreads are separated; bulks closer than it are mixed (see :func:`_separated` and
#: :func:`mixture_findings`; our rule, not a published one)
SEPARATION_SHARE = 0.25
#: bulks of no flat plateau apart by no more than this many times the sum of their spreads (half
#: interquartile ranges) are a mixed field's noise, whatever the binodal (our threshold: noise and quench
#: noise read 1.7 to 12, 27.5 with 1 and 2 cells a side; white noise and Cahn-Hilliard runs above the
#: critical temperature 2.4 to 6.2; a tanh profile's bulks 134 or more)
SEPARATION_SPREADS = 40.0
#: bulks on flat plateaus (:func:`_flat_sides`) apart by more than this many times the sum of their
#: spreads are separated whatever the binodal's gap (our threshold: a tanh profile's tail beyond one
#: width is 0.35 % of the jump, so its plateaus read 140 or more, and 134 to 818 in Cahn-Hilliard runs;
#: the peaks of Gaussian-smoothed noise read 1.7 to 12 with 3 cells or more a side, 27.5 with 1 and 2)
PLATEAU_SPREADS = 50.0
#: a field whose measure-weighted histogram splits with at least this share of its variance between the two
#: classes (Otsu's criterion at its best threshold) is two phases, though each bulk carries cell noise that
#: its spreads read (our threshold: a drop at the binodal with noise of 0.5-3 % of the jump reads 0.96-0.97,
#: Cahn-Hilliard runs once separated 0.84-0.96; white noise and quench noise before interfaces form 0.61-0.75,
#: a Gaussian's 2/pi = 0.64)
BIMODAL_SHARE = 0.8
#: the fewest bulk cells on a side, and cells judged for its flatness, that make a plateau (our
#: threshold: the median and quartiles of a handful of cells say nothing of a plateau)
PLATEAU_CELLS = 10
#: a Gibbs-Thomson shift over this share of the binodal's gap excuses no gap: the leading-order shift
#: (linear in l / R) does not hold there (our threshold; near a critical point it grows as 1/gap^3)
GIBBS_THOMSON_SHARE = 0.25
#: a plateau's flatness is judged on its cells up to this many times the bulk's start from the contour
PLATEAU_DEPTH = 2.0
#: a plateau's composition changes with the distance by less than this share of the bulks' distance
#: apart per interface width (our threshold: a tanh tail 0.016 at the bulk's start and less beyond, drops
#: of 1.2-3 widths on plateaus 0.002-0.005 measured; the crests of a seeded cosine 0.045-0.07)
PLATEAU_SLOPE = 0.02


def _positive(value, name, fix):
    """``value`` as a finite float > 0 (the shared :func:`finite_number` check, then the sign)."""
    number = finite_number(name, value, fix=fix)
    if not number > 0:
        raise OptionError(f"{name} must be a number > 0, found {value!r}", fix=fix)
    return number


def _one_temperature(options, needs: str) -> dict:
    """The checked temperature entry of ``options`` (empty with a temperature field): ``needs``
    one temperature, a value or a field."""
    if (options.temperature is None) == (options.temperature_field is None):
        raise OptionError(f"{needs} needs one temperature: a value or a field, not "
                          + ("both" if options.temperature is not None else "neither"),
                          fix="give --temperature 298.15 or --temperature-field NAME")
    if options.temperature is None:
        return {}
    return {"temperature": _positive(options.temperature, "temperature", "give it in K, for example 298.15")}


def normalize_mixture(options) -> dict:
    """The mixture options of ``options`` checked and normalised (a dict of the values to set).

    A model given as a path is read here (:func:`phasegauge.io.read_mixture_model`), so the
    options' key digests its parameters, not its file name.
    """
    out = {}
    model = options.model
    given = [name for name in ("temperature", "temperature_field", "solute", "capillary_length")
             if getattr(options, name) is not None]
    activity_energy = getattr(options.free_energy, "kind", "double-well") != "double-well"
    if model is None:
        if activity_energy:  # the free energy of an activity model needs the run's temperature
            out.update(_one_temperature(options, "the free energy of an activity model"))
            given = [name for name in given if name not in ("temperature", "temperature_field")]
        if given:
            raise OptionError(f"{given[0].replace('_', ' ')} is given without a mixture model",
                              fix="give the model file with --model MODEL.toml")
        return out
    if isinstance(model, (str, os.PathLike)):
        from ..io import read_mixture_model

        model = read_mixture_model(model)
    if not hasattr(model, "mixing_gibbs"):
        raise OptionError(f"model must be a mixture model or a model file, found {type(model).__name__}",
                          fix="give --model MODEL.toml (see sample_fields/solvent_pair.toml)")
    from .options import check_mapped_wells

    check_mapped_wells(model, options.range, "--model")  # the measured compositions are on the mapped scale
    out["model"] = model
    out.update(_one_temperature(options, "a mixture model"))
    for name in ("temperature_field", "solute"):
        value = getattr(options, name)
        if value is not None and (not isinstance(value, str) or not value):
            raise OptionError(f"{name.replace('_', ' ')} must be a field name, found {value!r}",
                              fix="see the fields with 'phasegauge inspect'")
    out["bulk_widths"] = _positive(options.bulk_widths, "bulk widths",
                                   "1 width (5-95 %) from the contour is the default")
    out["equilibrium_tolerance"] = _positive(options.equilibrium_tolerance, "equilibrium tolerance",
                                             "for example 0.01 (mole fraction)")
    if options.capillary_length is not None:
        out["capillary_length"] = _positive(options.capillary_length, "capillary length",
                                            "sigma v_m / (R T) in mesh length units")
    if options.solute_receiving not in ("rich", "lean"):
        raise OptionError(f"solute receiving phase must be 'rich' or 'lean', found {options.solute_receiving!r}",
                          fix="name the phase the solute moves into")
    if "interface" not in options.analyses:
        raise OptionError("bulk compositions need the interface analysis (the contour and its width)",
                          fix="keep 'interface' among the analyses")
    return out


def _cell_field(step, mesh, name, what):
    from ..model.fields import named_field

    values, location = named_field(step.fields, name, where=step.info.where, role=what,
                                   fix=f"name the {what} as 'phasegauge inspect' lists it", order=("cell", "point"))
    values = np.asarray(values, dtype=float)
    if values.ndim != 1:
        from ..errors import FieldShapeError

        raise FieldShapeError(f"the {what} '{name}' has {values.shape[1]} components; one is needed",
                              where=step.info.where, fix=f"give a scalar {what}")
    return values if location == "cell" else mesh.point_to_cell(values)


def step_temperature(step, mesh, options) -> float:
    """The step's temperature in K: the given value, or the volume-weighted median of the field."""
    if options.temperature is not None:
        return float(options.temperature)
    values = _cell_field(step, mesh, options.temperature_field, "temperature field")
    from ..model._statistics import weighted_quantile

    finite = np.isfinite(values)
    return float(weighted_quantile(values[finite], mesh.cell_measures[finite], 0.5)) if finite.any() else math.nan


def mixture_step(step, mesh, ind, contour, metrics: dict, options, droplets=None, measured=None) -> dict:
    """The mixture columns of one step (see :data:`MIXTURE_COLUMNS`, :data:`SOLUTE_COLUMNS`).

    The composition is the field mapped through the range (``ind.cell``, or ``1 - ind.cell``
    when the measured phase is the lower one): the mole fraction of the model's component.
    ``measured`` is what the width estimators measured of the distances to the contour
    (``interface_metrics(..., return_distances=True)``): the bulk cells are then found
    searching only where those leave it open.
    """
    from ..analysis import thermo
    from ..analysis._binodal import region_of
    from ..analysis._sums import dot

    model = options.model
    x = ind.cell if options.phase == "upper" else 1.0 - ind.cell
    weights = mesh.cell_measures
    finite = np.isfinite(x)
    t = step_temperature(step, mesh, options)
    if not finite.all():
        x_finite, weights = x[finite], weights[finite]
    else:  # the same sums without copies
        x_finite = x
    # (not ``weights @ x``: a threaded BLAS keeps its idle threads spinning after the call, about
    # 50 ms of CPU a step on 1M cells, and its last bit depends on the number of threads)
    out = {"temperature": t, "mean_composition": dot(weights, x_finite) / float(weights.sum())}
    eq = thermo.equilibrium_at(model, t) if np.isfinite(t) else None
    # the region the mean composition separates into (a model may have two at one temperature)
    out["binodal_lean"], out["binodal_rich"] = (region_of(model, t, out["mean_composition"], equilibrium=eq)
                                                if eq is not None else (math.nan, math.nan))
    out["mixture_state"] = (str(thermo.mixture_state(model, t, out["mean_composition"], equilibrium=eq))
                            if eq is not None else "")
    width = metrics.get("interface_width", math.nan)
    if not (np.isfinite(width) and width > 0):
        width = metrics.get("width_second_moment", math.nan)
    bulk = {"bulk_composition_lean": math.nan, "bulk_composition_rich": math.nan,
            "bulk_spread_lean": math.nan, "bulk_spread_rich": math.nan}
    flat_sides = (False, False)
    distance = None
    if contour is not None and contour.n_elements and np.isfinite(width) and width > 0:
        # searched out to twice the bulk's start: a plateau's flatness is judged over measured distances
        reach = PLATEAU_DEPTH * options.bulk_widths * width
        distance = thermo.interface_distance(mesh, ind.cell, contour, level=options.level, reach=reach,
                                             measured=measured, periodic=tuple(options.periodic))
        if options.phase != "upper":  # signed by the composition: positive on its rich side
            np.negative(distance, out=distance)
        found = thermo.bulk_compositions(mesh, x, distance, width=width, multiple=options.bulk_widths)
        bulk = {k: found[k] for k in bulk}
        flat_sides = _flat_sides(mesh, x, distance, width, found, options)
    out.update(bulk)
    lean, rich = bulk["bulk_composition_lean"], bulk["bulk_composition_rich"]
    out["separated"] = separated = _separated(bulk, flat_sides, out["binodal_lean"], out["binodal_rich"], options,
                                              lambda: between_class_share(x_finite, weights))
    out["equilibrium_gap"] = (thermo.equilibrium_gap(lean, rich, out["binodal_lean"], out["binodal_rich"])
                              if separated else math.nan)
    table, drop = _drop_phase(mesh, ind, droplets, options)
    radius = out["drop_radius"] = _drop_radius(table, mesh.dimension)
    shift = math.nan
    if options.capillary_length is not None and np.isfinite(radius) and radius > 0 and eq is not None:
        shifts = thermo.gibbs_thomson_shift(model, t, radius, capillary_length=options.capillary_length,
                                            dimension=mesh.dimension, drop=drop)
        shift = float(np.nanmax(np.abs(shifts))) if np.isfinite(shifts).any() else math.nan
    out["gibbs_thomson_shift"] = shift
    if options.solute is not None:
        out.update(_solute_step(step, mesh, x, distance, width, options))
    return out


def _flat_sides(mesh, x, distance, width, found: dict, options) -> tuple:
    """Whether the lean and the rich side's bulk is a plateau: :data:`PLATEAU_CELLS` bulk cells or more,
    and the composition of its cells between the bulk's start and :data:`PLATEAU_DEPTH` times it (where
    the distances are measured, not capped) does not change with the distance, its
    volume-weighted least-squares slope times the interface width under :data:`PLATEAU_SLOPE` of the
    two bulks' distance apart. A tanh profile's tail is flat there (its slope at the bulk's start is
    about 0.016 of the jump a width), the crests of a long wave (a spinodal quench's first stage) are
    not (0.045 to 0.07 for a seeded cosine), and a drop's plateau needs no depth beyond its radius."""
    apart = found["bulk_composition_rich"] - found["bulk_composition_lean"]
    start, stop = options.bulk_widths * width, PLATEAU_DEPTH * options.bulk_widths * width
    out = []
    for side, sign in (("lean", -1.0), ("rich", 1.0)):
        cells = int(found[f"bulk_cells_{side}"])
        d = sign * distance
        near = np.isfinite(d) & np.isfinite(x) & (d > start) & (d < stop)
        flat = False
        if cells >= PLATEAU_CELLS and np.count_nonzero(near) >= PLATEAU_CELLS and apart > 0:
            w = mesh.cell_measures[near]
            dd, xx = d[near], x[near]
            dm, xm = np.average(dd, weights=w), np.average(xx, weights=w)
            spread = np.average((dd - dm) ** 2, weights=w)
            # (cells all at one distance say nothing of a slope: not judged flat)
            flat = spread > 0 and abs(np.average((dd - dm) * (xx - xm), weights=w) / spread) * width <= (
                PLATEAU_SLOPE * apart)
        out.append(bool(flat))
    return tuple(out)


def _separated(bulk: dict, flat_sides, binodal_lean: float, binodal_rich: float, options,
               bimodal=lambda: math.nan) -> bool:
    """Whether both bulks were measured and lie apart: by more than the tolerance, and either by
    :data:`SEPARATION_SPREADS` times the sum of their spreads and, where the model has a binodal, a
    quarter of its gap, or as flat plateaus (``flat_sides``: whether the lean and the rich side are,
    :func:`_flat_sides`) by :data:`PLATEAU_SPREADS` times the sum of their spreads whatever
    the gap. A quench's noise sets bulks
    a few hundredths apart on the two sides of its contour, each about as wide as that, near a critical
    point or above it as far apart as half the binodal's gap or more than the tolerance (noise is no
    separation, whatever the gap); the peaks of an
    early spinodal pattern are narrow but lie a few hundredths apart too (neither is a separation); two
    flat plateaus at 0.3 and 0.7 are apart by far more than their spreads (a separation whose bulks have
    not reached the binodal) though under half its gap, and so are the plateaus of a mixture separated at
    one temperature and quenched deeper (their distance a small part of the new binodal's gap)."""
    lean, rich = bulk["bulk_composition_lean"], bulk["bulk_composition_rich"]
    if not (np.isfinite(lean) and np.isfinite(rich) and rich - lean > options.equilibrium_tolerance):
        return False
    apart = rich - lean
    spreads = bulk["bulk_spread_lean"] + bulk["bulk_spread_rich"]
    flat = all(flat_sides) and apart > PLATEAU_SPREADS * spreads
    # a mixed field's noise, unless the field is two phases whose bulks carry cell noise (``bimodal``: the
    # field's :func:`between_class_share`, asked for only here)
    if not (flat or apart > SEPARATION_SPREADS * spreads or bimodal() >= BIMODAL_SHARE):
        return False
    if not (np.isfinite(binodal_lean) and np.isfinite(binodal_rich)):
        return True
    return bool(flat or apart > SEPARATION_SHARE * (binodal_rich - binodal_lean))


def _drop_phase(mesh, ind, droplets, options):
    """The drops of the phase that forms them and its name: ``(table, 'rich' or 'lean')``, the table
    None without the droplets analysis. The drops are the phase of more regions (those not wrapping a
    periodic axis), the phase of smaller volume where both have as many: the indicator's (``droplets``,
    the regions with c above the level) or the other one, labelled here (the regions with c below it).
    Drops packed to more than half the box are still the drops; a lean drop in a rich matrix is the
    lean phase's. The indicator's phase is the rich one unless ``--phase lower``."""
    if droplets is None:
        return None, "rich" if options.phase == "upper" else "lean"
    from ..analysis.droplets import label_droplets

    c = np.asarray(ind.cell, dtype=float)
    other = label_droplets(mesh, 1.0 - c, level=1.0 - options.level, connectivity=options.adjacency,
                           periodic=tuple(options.periodic),
                           point_values=1.0 - ind.point if ind.location == "point" else None).table
    bounds = mesh.bounds  # (the boxes are in space: x, y, z)
    counts = [_bounded_regions(droplets, bounds), _bounded_regions(other, bounds)]
    if counts[0] != counts[1]:
        indicator = counts[0] > counts[1]
    else:
        weights = np.asarray(mesh.cell_measures, dtype=float)
        finite = np.isfinite(c)
        inside = float(weights[finite & (c > options.level)].sum())
        indicator = inside <= float(weights[finite].sum()) - inside
    table = droplets if indicator else other
    if len(table):  # the bounded regions only: a layer between walls or wrapping a period is no drop
        table = table[_bounded(table, bounds)]
    return table, "rich" if indicator == (options.phase == "upper") else "lean"


def _bounded(table, bounds) -> np.ndarray:
    """Per region of a droplet table, whether it is bounded: it neither wraps a periodic axis nor reaches
    from one side of the domain to the other along an axis (a layer between walls is no drop; the
    tracking check's rule for a drop confined between walls, :func:`.._droplet_measures.box_contacts`);
    ``bounds`` the domain's :attr:`Mesh.bounds`."""
    from ..analysis._droplet_measures import box_contacts

    keep = np.ones(len(table), dtype=bool)
    if "spanning" in table:
        keep &= ~np.asarray(table["spanning"], dtype=bool)
    for low, high in box_contacts(table, bounds).values():
        keep &= ~(low & high)
    return keep


def _bounded_regions(table, bounds) -> int:
    """Regions of a droplet table that are bounded (:func:`_bounded`)."""
    return 0 if table is None or not len(table) else int(_bounded(table, bounds).sum())


def _drop_radius(droplets, dimension) -> float:
    """Median equivalent radius of the drops from their volume beyond the level (the bounded regions
    :func:`_drop_phase` keeps); NaN without drops."""
    if droplets is None or not len(droplets) or "threshold_volume" not in droplets:
        return math.nan
    volume = np.asarray(droplets["threshold_volume"], dtype=float)
    volume = volume[volume > 0]
    if not volume.size:
        return math.nan
    radius = np.sqrt(volume / np.pi) if dimension == 2 else np.cbrt(3 * volume / (4 * np.pi))
    return float(np.median(radius))


def _solute_step(step, mesh, x, distance, width, options) -> dict:
    from ..analysis import thermo

    out = dict.fromkeys(SOLUTE_COLUMNS, math.nan)
    solute = _cell_field(step, mesh, options.solute, "solute field")
    if distance is None:
        return out
    # (the distance is signed by the composition: positive on the rich side, whatever --phase)
    receiving = "positive" if options.solute_receiving == "rich" else "negative"
    found = thermo.solute_distribution(mesh, solute, distance, width=width, multiple=options.bulk_widths,
                                       receiving=receiving, composition=x)
    take, other = (("solute_rich", "solute_lean") if options.solute_receiving == "rich"
                   else ("solute_lean", "solute_rich"))
    out[take], out[other] = found["solute_receiving"], found["solute_other"]
    for key in ("partition_coefficient", "extraction_progress", "lever_rule_residual"):
        out[key] = found.get(key, math.nan)
    return out


def _afterwards(separated, mask) -> str:
    """What a finding of the steps ``mask`` says of the steps after its last one: separated there, or only
    that the last step is not in its state (one stable phase, or not judged)."""
    after = np.asarray(separated, dtype=bool)[int(np.flatnonzero(mask)[-1]) + 1:]
    return "; separated later" if after.any() else "; not so at the last step"


def _times(steps, mask) -> list:
    return [float(t) for t in steps["time"].to_numpy()[np.asarray(mask, dtype=bool)]]


def mixture_findings(steps, options) -> list:
    """The findings of the mixture columns, as :class:`~phasegauge.run.assemble.Finding` records.

    - separated where the model predicts one stable phase (a warning while the last step is
      still separated, a note when it is not so at the last step); one stable phase at the temperature, or
      for the mean composition (outside every two-phase region);
    - still mixed inside the spinodal (likewise);
    - the contour level outside the binodal pair (a warning naming the level to give);
    - bulk compositions off the binodal by more than ``equilibrium_tolerance`` at the last
      separated step (a note instead when the gap lies within the Gibbs-Thomson shift expected
      for the measured drop radius), and the time the gap fell below the tolerance for good;
      the text says so when the last steps were not separated.
    """
    from .assemble import Finding

    if options.model is None or "mixture_state" not in steps or not len(steps):
        return []
    found = []
    tol = float(options.equilibrium_tolerance)
    separated = steps["separated"].to_numpy(dtype=bool)
    one_phase = ~np.isfinite(steps["binodal_lean"].to_numpy(dtype=float))
    state = steps["mixture_state"].astype(str).to_numpy()
    last = len(steps) - 1
    # one stable phase at the temperature, or for the mean composition (outside every two-phase region:
    # drops that should dissolve)
    wrong = separated & (one_phase | (state == "stable"))
    if wrong.any():
        times = _times(steps, wrong)
        still = bool(wrong[last])
        first = int(np.flatnonzero(wrong)[0])
        where = ("" if one_phase[first] else
                 f" for the mean composition {steps['mean_composition'].iat[first]:.4g} (outside the two-phase "
                 f"region {steps['binodal_lean'].iat[first]:.4g} to {steps['binodal_rich'].iat[first]:.4g})")
        text = (f"separated although the model predicts one stable phase{where} at "
                f"{_temperature_text(steps, wrong)} ({int(wrong.sum())} step(s), t = {times[0]:g} to {times[-1]:g})"
                + ("" if still else "; not so at the last step"))
        found.append(Finding("separated_one_phase", "warning" if still else "note", text,
                             {"steps": int(wrong.sum()), "first_time": times[0], "last_time": times[-1],
                              "at_last_step": still}))
    # "still mixed" needs evidence: both bulks measured (and not apart), or the composition's whole range
    # under half the binodal's gap (a quench's noise), or no interface found and the range not known;
    # an interface with no bulk beyond it on a side and a range spanning the gap (a bulk without a
    # plateau, a pattern still forming) says neither, nor does a field that spans the gap but never
    # crosses the level (the level outside the binodal pair: the finding below)
    lean = steps["bulk_composition_lean"].to_numpy(dtype=float)
    rich = steps["bulk_composition_rich"].to_numpy(dtype=float)
    size = steps["interface_size"].to_numpy(dtype=float) if "interface_size" in steps else np.full(len(steps), np.nan)
    # (c is the composition's own scale: a field in [-1, 1] or in percent maps onto it)
    span = (steps["c_max"].to_numpy(dtype=float) - steps["c_min"].to_numpy(dtype=float)
            if "c_max" in steps and "c_min" in steps else np.full(len(steps), np.nan))
    gap = steps["binodal_rich"].to_numpy(dtype=float) - steps["binodal_lean"].to_numpy(dtype=float)
    outside = _level_outside(steps, options)
    if outside.any():
        found.append(_level_finding(steps, options, outside))
    lost = outside & ~(size > 0)  # no contour, the level outside the binodal pair: that finding says why
    # both bulks measured count as mixing where they agree (within a quarter of the gap, or apart by no more
    # than noise: SEPARATION_SPREADS times their spreads), not where they lie apart without counting as
    # separated (plateaus too small to judge)
    spreads = (steps["bulk_spread_lean"].to_numpy(dtype=float) + steps["bulk_spread_rich"].to_numpy(dtype=float))
    both = np.isfinite(lean) & np.isfinite(rich)
    mixed_seen = ((both & ((rich - lean <= SEPARATION_SHARE * gap) | (rich - lean <= SEPARATION_SPREADS * spreads)))
                  | (span < 0.5 * gap) | (~(size > 0) & np.isnan(span) & ~lost))
    # an interface with a bulk missing on a side is not judged where the mean composition is not one stable
    # phase and the model has a binodal (drops too small to hold a bulk at a metastable one are no less
    # separated; a drop dissolving into a stable mixture is what the model says)
    unknown = (((state == "unstable") | ((size > 0) & ~both & np.isfinite(gap) & (state != "stable")))
               & ~separated & ~mixed_seen & ~lost)
    if unknown.any():
        times = _times(steps, unknown)
        still = bool(unknown[last])
        # (the span is not known without the conservation analysis, the gap without a binodal)
        spanning = (", with compositions spanning half the binodal's gap or more"
                    if np.isfinite(span[unknown] + gap[unknown]).all() else "")
        inside = " inside the spinodal" if (state[unknown] == "unstable").all() else ""
        what = ("bulk compositions apart by more than a quarter of the binodal's gap but neither on flat plateaus "
                "nor far apart against their spreads" if both[unknown].all() else
                f"no bulk beyond {options.bulk_widths:g} interface width{'s' if options.bulk_widths != 1 else ''} "
                "on one side or both")
        text = (f"{what}{inside} ({int(unknown.sum())} step(s), t = {times[0]:g} to "
                f"{times[-1]:g}){spanning}, so whether the phases separated is not judged there: a bulk that has "
                "not reached a plateau widens the measured interface (see interface_width) until no bulk is left "
                "(a smaller --bulk-widths measures the bulk of drops a few widths across)"
                + ("" if still else _afterwards(separated, unknown)))
        found.append(Finding("bulk_not_measured", "warning" if still else "note", text,
                             {"steps": int(unknown.sum()), "first_time": times[0], "last_time": times[-1],
                              "at_last_step": still}))
    unstable = (state == "unstable") & ~separated & mixed_seen
    if unstable.any():
        times = _times(steps, unstable)
        still = bool(unstable[last])
        text = (f"still mixed inside the spinodal ({int(unstable.sum())} step(s), t = {times[0]:g} to {times[-1]:g})"
                + ("" if still else _afterwards(separated, unstable)))
        found.append(Finding("mixed_inside_spinodal", "warning" if still else "note", text,
                             {"steps": int(unstable.sum()), "first_time": times[0], "last_time": times[-1],
                              "at_last_step": still}))
    gap = steps["equilibrium_gap"].to_numpy(dtype=float)
    measured = np.flatnonzero(np.isfinite(gap))
    if measured.size:
        end = measured[-1]
        final_gap = float(gap[end])
        # judged at the last step when it is separated, else said to be of an earlier one
        later = "" if end == last else (f"; not separated at the last {last - end} step(s), from "
                                         f"t = {float(steps['time'].iat[end + 1]):g}")
        shift = float(steps["gibbs_thomson_shift"].iat[end]) if "gibbs_thomson_shift" in steps else math.nan
        radius = float(steps["drop_radius"].iat[end]) if "drop_radius" in steps else math.nan
        binodal_gap = float(steps["binodal_rich"].iat[end] - steps["binodal_lean"].iat[end])
        figures = {"equilibrium_gap": final_gap, "tolerance": tol, "time": float(steps["time"].iat[end]),
                   "drop_radius": _finite(radius), "gibbs_thomson_shift": _finite(shift),
                   "at_last_step": bool(end == last)}
        below = gap[measured] <= tol
        if below[-1]:
            first = measured[np.flatnonzero(~below)[-1] + 1] if (~below).any() else measured[0]
            reached = float(steps["time"].iat[first])
            figures["equilibrium_time"] = reached
            found.append(Finding("binodal_reached", "note",
                                 f"bulk compositions on the binodal within {tol:g} from t = {reached:g} "
                                 f"(gap {final_gap:.3g} at t = {figures['time']:g}){later}", figures))
        elif np.isfinite(shift) and final_gap <= tol + shift and shift <= GIBBS_THOMSON_SHARE * binodal_gap:
            found.append(Finding("binodal_gibbs_thomson", "note",
                                 f"bulk compositions off the planar binodal by {final_gap:.3g} at "
                                 f"t = {figures['time']:g}, within the Gibbs-Thomson shift {shift:.3g} expected "
                                 f"for drops of radius {radius:.3g} (tolerance {tol:g}){later}", figures))
        else:
            text = (f"bulk compositions off the binodal by {final_gap:.3g} at t = {figures['time']:g}, the last "
                    f"separated step (tolerance {tol:g})")
            if np.isfinite(radius):
                text += f"; drop radius {radius:.3g}"
                if np.isfinite(shift):
                    text += f", Gibbs-Thomson shift {shift:.3g}"
                    if shift > GIBBS_THOMSON_SHARE * binodal_gap:  # (the leading order fails there)
                        text += (f" (over {GIBBS_THOMSON_SHARE:g} of the binodal's gap {binodal_gap:.3g}: the "
                                 "leading-order shift does not hold, drops this small near the critical point "
                                 "may dissolve)")
            text += later
            found.append(Finding("binodal_gap", "warning", text, figures))
    return found


def _level_outside(steps, options):
    """Per step, whether the contour level lies outside the binodal pair (on the composition's scale:
    the level of the indicator, or 1 minus it with ``--phase lower``); False where one phase is stable."""
    level = float(options.level) if options.phase == "upper" else 1.0 - float(options.level)
    lean = steps["binodal_lean"].to_numpy(dtype=float)
    rich = steps["binodal_rich"].to_numpy(dtype=float)
    return np.isfinite(lean) & np.isfinite(rich) & ~((lean < level) & (level < rich))


def _level_finding(steps, options, outside):
    """The warning that the contour level lies outside the binodal pair, with the level to give: the
    middle of the pair at the last such step, on the indicator's scale."""
    from .assemble import Finding

    times = _times(steps, outside)
    at = int(np.flatnonzero(outside)[-1])
    lean, rich = float(steps["binodal_lean"].iat[at]), float(steps["binodal_rich"].iat[at])
    middle = 0.5 * (lean + rich)
    fix = middle if options.phase == "upper" else 1.0 - middle
    text = (f"the contour level {float(options.level):g} lies outside the binodal pair {lean:.4g} to {rich:.4g} "
            f"at {_temperature_text(steps, outside)} ({int(outside.sum())} step(s), t = {times[0]:g} to "
            f"{times[-1]:g}): the contour may miss the interface between the two phases, and their bulk "
            f"compositions go unmeasured or wrong there; give --level {fix:.4g} (the middle of the binodal pair "
            f"at t = {times[-1]:g})")
    return Finding("level_outside_binodal", "warning", text,
                   {"steps": int(outside.sum()), "first_time": times[0], "last_time": times[-1],
                    "level": float(options.level), "suggested_level": fix})


def _finite(value):
    return value if np.isfinite(value) else None


def _temperature_text(steps, mask) -> str:
    t = steps["temperature"].to_numpy(dtype=float)[mask]
    lo, hi = float(np.nanmin(t)), float(np.nanmax(t))
    return f"{lo:.6g} K" if hi - lo < 1e-9 * max(abs(hi), 1.0) else f"{lo:.6g} to {hi:.6g} K"


def mixture_report_arrays(steps, options, *, count: int = 120) -> dict | None:
    """The phase diagram around the run's temperatures, for the report to draw the steps over.

    Returns
    -------
    dict or None
        ``temperature, binodal_lean, binodal_rich, spinodal_lean, spinodal_rich`` (arrays) and
        ``component`` (str); None without a model or a finite temperature.
    """
    if options.model is None or "temperature" not in steps:
        return None
    t = steps["temperature"].to_numpy(dtype=float)
    t = t[np.isfinite(t)]
    if not t.size:
        return None
    from ..analysis.thermo import phase_diagram

    lo, hi = 0.85 * float(t.min()), 1.15 * float(t.max())
    # the report's backdrop around the run's temperatures: a temperature of it that does not solve is
    # left empty in the drawing without a warning (the steps' own temperatures are judged in the steps)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", PhasegaugeWarning)
        table = phase_diagram(options.model, np.linspace(lo, hi, count))
    arrays = {name: np.asarray(table[name], dtype=float) for name in
              ("temperature", "binodal_lean", "binodal_rich", "spinodal_lean", "spinodal_rich")}
    arrays["component"] = getattr(options.model, "component", "") or "the component"
    return arrays
