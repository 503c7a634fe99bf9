"""Comparing two runs on equal footing (the ``compare`` command and recipe).

Each run is measured with its own field, range and phase side (so a [-1, 1]
order parameter and a [0, 1] volume fraction meet as the same indicator), steps
are paired by time, every per-step metric is set side by side, the shapes are
compared on one regular grid at paired times, and a run can be checked against
the rising-bubble benchmark (Hysing et al. 2009) or a reference table.

Every step is read once, by its measure run's workers, which also sample the
indicator of each step that will be paired on the common grid
(:mod:`._compare_steps`); the report is handed tables, records and the overlay
arrays it draws.
"""

from __future__ import annotations

import os
import time
import warnings
from dataclasses import dataclass, field
from typing import TYPE_CHECKING

import numpy as np

from ..errors import OptionError, PhasegaugeError, PhasegaugeWarning
from .options import MeasureOptions, accept_old_names

if TYPE_CHECKING:  # pandas is imported where the tables are built
    import pandas as pd

__all__ = ["RunSpec", "CompareResult", "compare_runs", "compare_arguments"]


@accept_old_names
@dataclass(frozen=True)
class RunSpec:
    """One run of a comparison: where it is and how its field maps to the indicator.

    The options have the names of :class:`~phasegauge.run.options.MeasureOptions` (``range``; the
    old keyword ``value_range`` still works, with an :class:`~phasegauge.errors.OldNameWarning`).
    """

    path: str
    field: str
    range: tuple = (0.0, 1.0)
    phase: str = "upper"
    velocity: str | None = None
    label: str = ""
    field_location: str = "auto"  # which copy of a field written on cells and on points (auto: cells)
    sort_by_time: bool = False  # order the steps by the times in their files
    level_set: bool = False  # the field is a level set (MeasureOptions.level_set)
    interface_kind: str | None = None  # 'sharp' or 'diffuse' as the user knows it (MeasureOptions.interface_kind)
    steps: str | None = None  # the steps compared, START:STOP:STRIDE (MeasureOptions.steps: one run of a restart)

    value_range = MeasureOptions.value_range  # the old name of range (warns), as on the options

    def __post_init__(self):  # refused before any run is measured, as the options would refuse it
        checked = MeasureOptions(field=self.field, range=self.range, phase=self.phase, level_set=self.level_set,
                                 interface_kind=self.interface_kind, steps=self.steps, velocity=self.velocity)
        object.__setattr__(self, "velocity", checked.velocity)  # a vector, or its components as 'u.x,u.y'


@dataclass
class CompareResult:
    """Tables of a comparison (pandas DataFrames); ``paired_by`` is ``'time'``, or ``'step number'`` when
    neither run stores times, and ``warnings`` the comparison's own warnings (as given)."""

    comparison: object
    pairs: object
    unpaired: dict
    droplet_statistics: object
    reference_checks: object
    first: object
    second: object
    labels: tuple
    paired_by: str = "time"
    warnings: list = field(default_factory=list)
    band_excess: dict | None = None  # a diffuse run against a sharp one: its band's volume (run._compare_kinds)
    notes: list = field(default_factory=list)  # the comparison's notes: start times, paired times apart


def compare_runs(first: RunSpec, second: RunSpec, *, out=None, overwrite: bool = False, level: float = 0.5,
                 time_tolerance: float | None = None, spacing: float | None = None,
                 reference_table: str | None = None, rising_bubble: bool = False, workers: int = 1,
                 threads: int | None = None, progress=False, snapshots: int = 3, periodic=()) -> CompareResult:
    """Compare two runs.

    Parameters
    ----------
    first, second : RunSpec
    out : str, optional
        Output folder (comparison.csv, droplet statistics, reference checks,
        plots, report.html, manifest.json).
    level : float
        Indicator level of the interfaces.
    time_tolerance : float, optional
        Steps pair when their times differ by at most this (default: a quarter of the
        smaller of the two runs' output intervals around the pair's times).
    spacing : float, optional
        Spacing of the common sampling grid (default: finer than both meshes).
    reference_table : str, optional
        CSV of reference values to check the first run against.
    rising_bubble : bool
        Check the first run against the rising-bubble benchmark, case 1.
    workers : int
        Local worker processes for measuring each run.
    threads : int, optional
        Threads of each process (as for ``measure``).
    periodic : sequence of {'x', 'y', 'z'}
        Periodic axes of both runs (``measure``'s ``periodic``): droplets join across their boundary
        planes, and the interface distances wrap there. Both runs must span the same box along them.

    Notes
    -----
    Each step is read once, by the worker that measures it; a step that will
    be paired (predicted from the series' times) also has its indicator
    sampled there on the common grid, and the sampled arrays (8 bytes per
    grid sample, at most 2,000,000 samples per step by default) are kept
    until both runs are measured. The common grid is built before measuring,
    from the meshes of the first predicted pair (one extra mesh read per
    run). A pair the prediction missed, or whose meshes are not the ones the
    grid was built for, is read again; the tables are the same either way.
    """
    from ..report._files import output_transaction

    with output_transaction(out):
        return _compare_runs(first, second, out=out, overwrite=overwrite, level=level,
                             time_tolerance=time_tolerance, spacing=spacing, reference_table=reference_table,
                             rising_bubble=rising_bubble, workers=workers, threads=threads, progress=progress,
                             snapshots=snapshots, periodic=periodic)


def _compare_runs(first, second, *, out, overwrite, level, time_tolerance, spacing, reference_table,
                  rising_bubble, workers, threads, progress, snapshots, periodic):
    import pandas as pd

    from ..analysis import compare as cmp
    from ..analysis import references
    from ..io import Series
    from ._compare_kinds import band_excess
    from ._compare_periodic import check_one_period, normalize_periodic
    from ._compare_references import bubble_cells, rise_axis, skipped_times
    from ._compare_steps import paired_shapes, plan_sampling
    from .measure import measure

    if not 0 < level < 1:
        raise OptionError(f"level must lie strictly between 0 and 1, found {level}", fix="usually 0.5")
    for spec, flag in ((first, "a"), (second, "b")):
        if spec.level_set and level != 0.5:
            raise OptionError(f"--level {level:g} was given with --level-set-{flag} (recipe: level_set in "
                              f"[{'first' if flag == 'a' else 'second'}])",
                              fix="leave --level out: it is both runs' level, and a level set's interface is where "
                                  "the field is 0")
    periodic = normalize_periodic(periodic)
    if threads is not None:
        from ..model._threads import check_threads

        check_threads(threads)
    started = time.time()
    labels = _distinct_labels(first, second)
    if rising_bubble and first.velocity is None:
        warnings.warn(PhasegaugeWarning("the rising-bubble check reads the bubble's rise velocity from the first "
                                        "run's velocity field, which was not given, so its velocity checks read "
                                        "not_applicable: give --velocity-a (recipe: velocity in [first])"),
                      stacklevel=3)

    def open_both():
        with warnings.catch_warnings():  # each measure run reports its series' warnings
            warnings.simplefilter("ignore", PhasegaugeWarning)
            return (Series(first.path, sort_by_time=first.sort_by_time),
                    Series(second.path, sort_by_time=second.sort_by_time))

    both = open_both()  # discovered once for the output check and the sampling plan
    try:  # each run's step choice and its times checked before either is measured
        chosen = tuple(_chosen(spec, series, flag) for spec, series, flag in zip((first, second), both, "ab"))
        _one_time_axis(both, chosen)
        check_one_period(both, chosen, periodic)
        predicted = _some_pair(both, chosen, time_tolerance)
        table = _checked_reference_table(reference_table) if reference_table else None  # a bad table before measuring
    except BaseException:
        for series in both:
            series.close()
        raise
    if out is not None:
        from ..report._files import prepare_output_folder
        from .measure import check_output_place

        try:
            for series in both:
                check_output_place(series, out)
        except BaseException:
            for series in both:
                series.close()
            raise
        prepare_output_folder(out, overwrite=overwrite, run_key="")
    plan = plan_sampling(*both, spacing=spacing, time_tolerance=time_tolerance, chosen=chosen,
                         predicted=predicted)  # (closes them)
    runs = []
    for k, spec in enumerate((first, second)):
        options = MeasureOptions(field=spec.field, range=spec.range, phase=spec.phase, level=level,
                                 velocity=spec.velocity, field_location=spec.field_location,
                                 sort_by_time=spec.sort_by_time, level_set=spec.level_set,
                                 interface_kind=spec.interface_kind, steps=spec.steps, periodic=periodic)
        res = measure(spec.path, options=plan.options(options, k), workers=workers, threads=threads, progress=progress,
                      snapshots=0,
                      progress_label=f"steps of {labels[k]}")
        res.options = options
        runs.append(res)
    res_a, res_b = runs
    series = open_both()  # for pairs read again and the list of input files
    try:
        from ._report_data import measured_time_origin

        origins = {label: measured_time_origin(s, res.results) for label, s, res in zip(labels, series, runs)}
        told = _numbered_pairing(origins, runs, labels, [len(s.steps) for s in series])
        times_a = pd.Series(res_a.steps["time"].to_numpy(), index=res_a.steps["step"].to_numpy())
        times_b = pd.Series(res_b.steps["time"].to_numpy(), index=res_b.steps["step"].to_numpy())
        pairs, unpaired_a, unpaired_b = cmp.pair_times(times_a, times_b, tolerance=time_tolerance)
        if time_tolerance is None:
            _near_misses(times_a, times_b, unpaired_a, unpaired_b)
        metrics = cmp.compare_metrics(res_a.steps, res_b.steps, pairs=pairs)
        n_pairs = len(pairs)
        keep = set(np.linspace(0, n_pairs - 1, min(snapshots, n_pairs)).round().astype(int)) if n_pairs else set()
        cells = bubble_cells(res_a, series[0]) if rising_bubble else {}  # the first run's mesh, for its bias
        shapes, overlays = paired_shapes(pairs, res_a.results, res_b.results, plan, series=series,
                                         options=(res_a.options, res_b.options), level=level, spacing=spacing,
                                         overlay_pairs=keep, periodic=periodic)
    finally:
        for s in series:
            s.close()
    for r in res_a.results + res_b.results:
        r.extra = None  # the sampled fields are used up
    comparison = comparison_table(metrics, pd.DataFrame(shapes) if shapes else None, labels)
    found, notes = _comparison_checks(told, times_a, times_b, pairs, comparison, labels, time_tolerance)
    drop_stats = cmp.compare_droplet_statistics(res_a.droplets, res_b.droplets, pairs)
    checks = []
    lost = skipped_times(res_a)
    if rising_bubble:
        bubble = references.bubble_history(res_a.droplets, rise_axis=rise_axis(res_a))
        checks.append(references.check_rising_bubble(bubble, skipped_times=lost, **cells)
                      .assign(run=labels[0]))
    if reference_table:
        try:
            checks.append(references.check_against_table(_reference_quantities(res_a), table, skipped_times=lost)
                          .assign(run=labels[0]))
        except OptionError as err:  # named by the file
            raise OptionError(err.what, where=os.fspath(reference_table), fix=err.fix) from None
    reference_checks = pd.concat(checks, ignore_index=True) if checks else pd.DataFrame()
    if told and len(reference_checks):
        reference_checks = _checks_without_times(reference_checks)
    result = CompareResult(comparison=comparison, pairs=pairs,
                           unpaired={labels[0]: list(unpaired_a), labels[1]: list(unpaired_b)},
                           droplet_statistics=drop_stats, reference_checks=reference_checks,
                           first=res_a, second=res_b, labels=labels, paired_by="step number" if told else "time",
                           warnings=told + found, band_excess=band_excess(res_a, res_b, pairs, labels, periodic),
                           notes=notes)
    if out is not None:
        from ..report._compare_report import write_compare_report
        from ._report_data import package_version, series_input_files

        inputs = [f for s, res in zip(series, runs) for f in series_input_files(s, res.results)]
        write_compare_report(out, result, specs=(first, second), overlays=overlays, inputs=inputs,
                             version=package_version(), started=started, level=level, time_origins=origins)
    return result


def comparison_table(metrics: pd.DataFrame, shapes, labels) -> pd.DataFrame:
    """comparison.csv: ``step, time`` (the first run's), the paired steps and times, the runs' labels,
    the shape measures, then each metric of both runs.

    A shape measure taken on the common grid under a name the steps tables also have (the
    interface size of each run) is kept as ``grid_<name>``, so no column is doubled by the join.
    """
    if shapes is not None and len(shapes):
        keys = ["step_a", "step_b"]
        shapes = shapes.rename(columns={c: f"grid_{c}" for c in shapes.columns
                                        if c in metrics.columns and c not in keys})
        comparison = metrics.merge(shapes, on=keys, how="left")
    else:
        comparison = metrics.copy()
    comparison.insert(0, "step", comparison["step_a"])
    comparison["label_a"], comparison["label_b"] = labels[0], labels[1]
    lead = ["step", "time", "step_a", "step_b", "time_a", "time_b", "label_a", "label_b"]
    from ..analysis.compare import SHAPE_COLUMNS

    lead += [c for c in SHAPE_COLUMNS if c in comparison]
    lead = [c for c in dict.fromkeys(lead) if c in comparison]
    return comparison[lead + [c for c in comparison.columns if c not in lead]]


def _reference_quantities(result):
    """The steps table joined, step by step, with every droplets.csv column of the largest droplet (for a
    user's reference table; a steps.csv column keeps its name, a droplet column a run without droplets
    lacks is NaN)."""
    from ..analysis.droplets import TABLE_COLUMNS
    from ..analysis.references import largest_droplet

    steps = result.steps.copy()
    if len(result.droplets):
        largest = largest_droplet(result.droplets)
        steps = steps.merge(largest.drop(columns=[c for c in largest.columns if c in steps.columns and c != "step"]),
                            on="step", how="left")
    for column in ("track",) + TABLE_COLUMNS:
        if column not in steps.columns:
            steps[column] = np.nan
    return steps


def _checked_reference_table(path):
    """A reference table read and checked before either run is measured: its rows, and the columns it
    names, each a steps.csv column or a droplets.csv one (of the largest droplet)."""
    from ..analysis.droplets import TABLE_COLUMNS
    from ..analysis.references import check_reference_table, reference_columns
    from ..io import read_reference_table
    from ..analysis._equilibrium import EQUILIBRIUM_KEYS
    from ..analysis._interface_width import METRIC_KEYS
    from ..analysis._level_set import LEVEL_SET_COLUMNS
    from ._mixture import MIXTURE_COLUMNS, SOLUTE_COLUMNS
    from .options import MORE_STEP_COLUMNS, STEP_COLUMNS

    table = check_reference_table(read_reference_table(path))
    # (the analyses' own column constants too: a column added there is known here without a copy)
    known = set(STEP_COLUMNS + MORE_STEP_COLUMNS + METRIC_KEYS + EQUILIBRIUM_KEYS + LEVEL_SET_COLUMNS
                + MIXTURE_COLUMNS + SOLUTE_COLUMNS + TABLE_COLUMNS + ("track",))
    words = [c for c in reference_columns(table) if c == "mixing_length_status"]
    if words:  # a column of words: no value to check against a band
        raise OptionError(f"the reference table names {words[0]!r}, a steps.csv column of words (reached, "
                          "upper_bound, not_reached, undefined), not of numbers", where=os.fspath(path),
                          fix="name a column of numbers, such as mixing_length")
    unknown = [c for c in reference_columns(table) if c not in known]
    if unknown:
        raise OptionError(f"the reference table names {', '.join(map(repr, unknown))}, neither a steps.csv column "
                          "nor a droplets.csv one", where=os.fspath(path),
                          fix="name a column of steps.csv or of droplets.csv (the largest droplet's; see the README)")
    return table


def _distinct_labels(first: RunSpec, second: RunSpec) -> tuple:
    """The two runs' labels ('first' and 'second' where not given); labels that are equal, or that name
    the same steps table, are refused: one run's table and its entries in the manifest and report,
    which are keyed by label, would overwrite the other's."""
    from ..report._compare_report import steps_file_name

    labels = (first.label or "first", second.label or "second")
    if steps_file_name(labels[0]) == steps_file_name(labels[1]):
        same = "are the same" if labels[0] == labels[1] else f"both name {steps_file_name(labels[0])}"
        raise OptionError(f"the runs' labels {labels[0]!r} and {labels[1]!r} {same}: one run's steps table and its "
                          "entries in the manifest and report would overwrite the other's",
                          fix="give the runs distinct labels (--label-a, --label-b; recipe: label in [first] and "
                              "[second]) that differ in a letter, digit, '_', '.' or '-'")
    return labels


def _chosen(spec: RunSpec, series, flag: str) -> list:
    """The steps of one run a comparison measures (its ``steps``), their times checked as measure
    checks them; an empty choice named by the run's own option."""
    from ._selection import chosen_steps

    try:
        picked = chosen_steps(series.times, steps=spec.steps, where=series.path)
    except OptionError as err:
        table = "first" if flag == "a" else "second"
        raise OptionError(err.what, where=err.where, fix=f"widen --steps-{flag} (recipe: steps in [{table}]); see "
                                                         "'phasegauge inspect'") from None
    problem = series.time_problem(picked)
    if problem is not None:
        raise problem
    return picked


def _near_misses(times_a, times_b, unpaired_a, unpaired_b) -> None:
    """Warn where unpaired steps of the two runs lie within 0.4 of an output interval of each other:
    outputs meant for the same times, written by a solver step longer than the default tolerance."""
    from ..analysis.compare import PAIR_SHARE, _median_interval

    if not len(unpaired_a) or not len(unpaired_b):
        return
    a, b = times_a[list(unpaired_a)].to_numpy(), np.sort(times_b[list(unpaired_b)].to_numpy())
    intervals = [_median_interval(t.to_numpy()) for t in (times_a, times_b)]  # as the pairing takes them
    if not all(np.isfinite(intervals)):
        return
    interval = min(intervals)
    if abs(intervals[0] - intervals[1]) > 0.05 * interval:
        return  # other output intervals: their times differ by design, not by a solver step
    at = np.clip(np.searchsorted(b, a), 1, max(b.size - 1, 1))
    gap = np.minimum(np.abs(a - b[at - 1]), np.abs(b[np.minimum(at, b.size - 1)] - a))
    near = gap[gap < 0.4 * interval]  # outputs half an interval apart (0.1 against 0.15) are other times
    if near.size:
        warnings.warn(PhasegaugeWarning(
            f"{near.size} unpaired step(s) of the first run lie within 0.4 of an output interval of an unpaired step "
            f"of the second (up to {near.max():.3g} apart; the default tolerance is a quarter of the interval, "
            f"{PAIR_SHARE * interval:.3g}): if they were written for the same times by a long solver step, "
            f"pair them with --time-tolerance {1.01 * near.max():.3g}"), stacklevel=4)


def _comparison_checks(told, times_a, times_b, pairs, comparison, labels, time_tolerance) -> tuple:
    """(findings, notes) on the pairing's times (not where the steps are paired by number: their times are
    numbers) and on the shape measures (:mod:`._compare_checks`); each finding warned of."""
    from ._compare_checks import shape_checks, time_checks

    found, notes = ([], []) if told else time_checks(times_a.to_numpy(), times_b.to_numpy(), pairs, labels,
                                                     time_tolerance)
    found = found + shape_checks(comparison, labels)
    for said in found:
        warnings.warn(PhasegaugeWarning(said), stacklevel=4)
    return found, notes


def _numbered_pairing(origins: dict, runs, labels, totals) -> list:
    """Where neither run stores times (both measured steps' times are their numbers 0, 1, 2 ...): the
    warning, given here and returned (for the report and manifest), that the steps are paired by number;
    else an empty list, as for one step of each (two snapshots: nothing to pair in time). Two series of
    other step counts (``totals``, the whole series', whatever steps were chosen) are named with them:
    over one span they were written at other intervals, so their pairs compare other moments."""
    if not all(origin == "index" for origin in origins.values()) or all(len(res.steps) <= 1 for res in runs):
        return []
    said = ("neither run stores times: steps paired by number, which compares the same moments only if both runs "
            "wrote at the same interval from the same start")
    if totals[0] != totals[1]:
        said += (f" ({labels[0]}'s series has {totals[0]} steps, {labels[1]}'s {totals[1]}: over one span, other "
                 "intervals)")
    said += "; give `time,path` listings with the output times"
    warnings.warn(PhasegaugeWarning(said), stacklevel=4)
    return [said]


def _checks_without_times(checks):
    """Reference checks of a first run that stores no times: a check at a time, and the time of an extreme,
    read step numbers as times, so they read not_applicable (an extreme's value, ``min:``/``max:``, stands)."""
    checks = checks.copy()
    timed = ~checks["quantity"].astype(str).str.startswith(("min:", "max:"))
    checks.loc[timed, "value"] = np.nan
    checks.loc[timed, "verdict"] = "not_applicable"
    checks.loc[timed, "note"] = ("the run stores no times (its steps are numbered 0, 1, 2 ...), so a time is a step "
                                 "number: give a 'time,path' listing with the output times")
    return checks


def _one_time_axis(both, chosen) -> None:
    """Refuse two runs of which one numbers its steps (no times stored: 0, 1, 2 ...) and the other
    stores its times: paired by time they would compare unrelated moments. A run's first chosen file is
    read whole first (not an XDMF file's): a time it stores beyond its head is found when it is read."""
    from ..errors import SeriesError
    from ._selection import numbered_steps

    numbered = [all(s.steps[i].time_origin == "index" for i in c) for s, c in zip(both, chosen)]
    if numbered[0] == numbered[1]:
        return
    k = numbered.index(True)
    if not numbered_steps(both[k], chosen[k]):
        return  # a time beyond the head, or a file named when its step is measured
    which, flag = ("first", "a") if k == 0 else ("second", "b")
    raise SeriesError(f"the {which} run's files store no times, so its steps are numbered 0, 1, 2 ..., while the "
                      "other run's times are stored: paired by time they would compare unrelated moments",
                      where=both[k].path, fix=f"give a 'time,path' listing of the {which} run's steps as its path "
                      f"(PATH_{flag.upper()}; recipe: path in [{which}])")


def _some_pair(both, chosen, time_tolerance):
    """The predicted pairs of the chosen steps (``_compare_steps._predicted_pairs``; None where
    pairing fails, as on a bad tolerance: the pairing after the runs says so, as it did); two runs
    whose chosen steps, all of known time, share no time within the tolerance are refused."""
    from ._compare_steps import _predicted_pairs

    try:
        predicted = _predicted_pairs(*both, time_tolerance, chosen)
    except PhasegaugeError:
        return None
    if predicted[1] is None:
        spans = [f"{min(s.times[i] for i in c):g} to {max(s.times[i] for i in c):g}" for s, c in zip(both, chosen)]
        raise OptionError(f"the two runs' steps share no time (the first's t = {spans[0]}, the second's "
                          f"{spans[1]}), so nothing would be compared",
                          fix="choose steps whose times overlap (--steps-a, --steps-b; recipe: steps in [first], "
                              "[second]), or give --time-tolerance")
    return predicted


def compare_arguments(recipe: dict) -> dict:
    """Keyword arguments of :func:`compare_runs` for a compare recipe."""
    from ..model.indicator import parse_range

    def spec(table):
        t = recipe[table]
        return RunSpec(path=t["path"], field=t["field"], range=parse_range(t.get("range", (0, 1))),
                       phase=t.get("phase", "upper"), velocity=t.get("velocity"), label=t.get("label", table),
                       field_location=t.get("field_location", "auto"), sort_by_time=t.get("sort_by_time", False),
                       level_set=t.get("level_set", False), interface_kind=t.get("interface_kind"),
                       steps=t.get("steps"))

    c = recipe.get("compare", {})
    run = recipe.get("run", {})
    return dict(first=spec("first"), second=spec("second"), out=recipe["output"]["folder"],
                overwrite=recipe["output"].get("overwrite", False), level=c.get("level", 0.5),
                time_tolerance=c.get("time_tolerance"), spacing=c.get("spacing"),
                reference_table=c.get("reference_table"), rising_bubble=c.get("rising_bubble", False),
                workers=run.get("workers", 1), threads=run.get("threads"), periodic=tuple(c.get("periodic", ())))
