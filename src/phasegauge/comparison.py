"""Comparing two runs on equal footing (the ``compare`` command and recipe).

Each run is measured with its own field, range and phase side (so a [-1, 1]
order parameter and a [0, 1] volume fraction meet as the same indicator), steps
are paired by time, every per-step metric is set side by side, the shapes are
compared on one regular grid at paired times, and a run can be checked against
the rising-bubble benchmark (Hysing et al. 2009) or a reference table.
"""

from __future__ import annotations

import dataclasses
import os
import time
from dataclasses import dataclass

import numpy as np

from .errors import OptionError

__all__ = ["RunSpec", "CompareResult", "compare_runs", "compare_arguments", "bubble_history"]


@dataclass(frozen=True)
class RunSpec:
    """One run of a comparison: where it is and how its field maps to the indicator."""

    path: str
    field: str
    value_range: tuple = (0.0, 1.0)
    phase: str = "upper"
    velocity: str | None = None
    label: str = ""


@dataclass
class CompareResult:
    """Tables of a comparison (pandas DataFrames)."""

    comparison: object
    pairs: object
    unpaired: dict
    droplet_statistics: object
    reference_checks: object
    first: object
    second: object
    labels: tuple


def bubble_history(result):
    """Per step, the largest droplet's time, circularity, centroid and velocity (benchmark quantities)."""
    import pandas as pd

    drops = result.droplets
    if drops is None or len(drops) == 0:
        return pd.DataFrame(columns=["time", "circularity", "centroid_y", "velocity_y"])
    idx = drops.groupby("step")["volume"].idxmax()
    rows = drops.loc[idx].sort_values("time")
    cols = [c for c in ("time", "circularity", "centroid_x", "centroid_y", "centroid_z", "velocity_x",
                        "velocity_y", "velocity_z", "volume") if c in rows]
    return rows[cols].reset_index(drop=True)


def compare_runs(first: RunSpec, second: RunSpec, *, out=None, overwrite: bool = False, level: float = 0.5,
                 time_tolerance: float | None = None, spacing: float | None = None,
                 reference_table: str | None = None, rising_bubble: bool = False, workers: int = 1,
                 progress=False, snapshots: int = 3) -> CompareResult:
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
        Steps pair when their times differ by at most this (default: half the
        smaller median output interval).
    spacing : float, optional
        Spacing of the common sampling grid (default: finer than both meshes).
    reference_table : str, optional
        CSV of reference values to check the first run against.
    rising_bubble : bool
        Check the first run against the rising-bubble benchmark, case 1.
    workers : int
        Local worker processes for measuring each run.
    """
    import pandas as pd

    from .analysis import compare as cmp
    from .analysis import references
    from .io import Series
    from .indicator import make_indicator
    from .pipeline import MeasureOptions, measure

    if not 0 < level < 1:
        raise OptionError(f"level must lie strictly between 0 and 1, found {level}", fix="usually 0.5")
    started = time.time()
    if out is not None:
        from .report._files import prepare_output_folder

        prepare_output_folder(out, overwrite=overwrite, run_key="")
    labels = (first.label or "first", second.label or "second")
    runs = []
    for spec in (first, second):
        options = MeasureOptions(field=spec.field, value_range=spec.value_range, phase=spec.phase, level=level,
                                 velocity=spec.velocity)
        runs.append(measure(spec.path, options=options, workers=workers, progress=progress, snapshots=0))
    res_a, res_b = runs
    pairs, unpaired_a, unpaired_b = cmp.pair_times(res_a.steps["time"].to_numpy(), res_b.steps["time"].to_numpy(),
                                                   tolerance=time_tolerance)
    metrics = cmp.compare_metrics(res_a.steps, res_b.steps, pairs=pairs)
    shapes = []
    series_a, series_b = Series(first.path), Series(second.path)
    step_a_index = res_a.steps["step"].to_numpy()
    step_b_index = res_b.steps["step"].to_numpy()
    overlays = []
    keep = set(np.linspace(0, len(pairs) - 1, min(snapshots, len(pairs))).round().astype(int)) if len(pairs) else set()
    for k, row in enumerate(pairs.itertuples(index=False)):
        # pair_times numbers steps by their position in the times given: map back to series steps
        sa = series_a.read(int(step_a_index[int(row.step_a)]))
        sb = series_b.read(int(step_b_index[int(row.step_b)]))
        ca = make_indicator(sa.mesh, sa.fields, first.field, value_range=first.value_range, phase=first.phase,
                            where=sa.info.where, warn=False)
        cb = make_indicator(sb.mesh, sb.fields, second.field, value_range=second.value_range,
                            phase=second.phase, where=sb.info.where, warn=False)
        shape = cmp.shape_comparison(sa.mesh, ca.point, sb.mesh, cb.point, level=level, spacing=spacing)
        shapes.append({"time": float(row.time_a), **{k2: v for k2, v in shape.items() if np.isscalar(v)}})
        if k in keep:
            overlays.append((float(row.time_a), sa.mesh, ca.point, sb.mesh, cb.point))
    series_a.close()
    series_b.close()
    shape_df = pd.DataFrame(shapes)
    if len(shape_df):
        comparison = shape_df.merge(metrics, on="time", how="right") if "time" in metrics else shape_df
    else:
        comparison = metrics
    drop_stats = cmp.compare_droplet_statistics(res_a.droplets, res_b.droplets, pairs)
    checks = []
    if rising_bubble:
        checks.append(references.check_rising_bubble(bubble_history(res_a)).assign(run=labels[0]))
    if reference_table:
        checks.append(references.check_against_table(_reference_quantities(res_a), reference_table)
                      .assign(run=labels[0]))
    reference_checks = pd.concat(checks, ignore_index=True) if checks else pd.DataFrame()
    result = CompareResult(comparison=comparison, pairs=pairs,
                           unpaired={labels[0]: list(unpaired_a), labels[1]: list(unpaired_b)},
                           droplet_statistics=drop_stats, reference_checks=reference_checks,
                           first=res_a, second=res_b, labels=labels)
    if out is not None:
        from .report._compare_report import write_compare_report

        write_compare_report(out, result, specs=(first, second), overlays=overlays, started=started,
                             level=level)
    return result


def _reference_quantities(result):
    """The steps table joined with the largest droplet's quantities (for a user's reference table)."""
    steps = result.steps.copy()
    bubble = bubble_history(result)
    if len(bubble):
        extra = bubble.drop(columns=[c for c in bubble.columns if c in steps.columns and c != "time"])
        steps = steps.merge(extra, on="time", how="left")
    return steps


def compare_arguments(recipe: dict) -> dict:
    """Keyword arguments of :func:`compare_runs` for a compare recipe."""
    from .indicator import parse_range

    def spec(table):
        t = recipe[table]
        return RunSpec(path=t["path"], field=t["field"], value_range=parse_range(t.get("range", (0, 1))),
                       phase=t.get("phase", "upper"), velocity=t.get("velocity"), label=t.get("label", table))

    c = recipe.get("compare", {})
    run = recipe.get("run", {})
    return dict(first=spec("first"), second=spec("second"), out=recipe["output"]["folder"],
                overwrite=recipe["output"].get("overwrite", False), level=c.get("level", 0.5),
                time_tolerance=c.get("time_tolerance"), spacing=c.get("spacing"),
                reference_table=c.get("reference_table"), rising_bubble=c.get("rising_bubble", False),
                workers=run.get("workers", 1))
