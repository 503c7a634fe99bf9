"""Comparing two runs: time alignment, metrics side by side, droplet statistics, shapes.

Two runs of the same case (say a diffuse-interface run A and a sharp-interface
run B) rarely share meshes, indicator conventions or output times. Each run is
first mapped to its own indicator c in [0, 1] (:func:`phasegauge.make_indicator`
with its own field, range and phase side); this module then

* pairs output times (:func:`pair_times`) or interpolates one run's metrics to
  the other's times (:func:`interpolate_metrics`);
* puts every metric of the two steps tables side by side with differences
  (:func:`compare_metrics`) and compares droplet statistics
  (:func:`compare_droplet_statistics`);
* compares shapes on a common grid (:func:`shape_comparison`).

Run B is the reference: differences are ``A - B`` and relative differences
``(A - B) / |B|``.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from ..errors import OptionError
from ._resample import SamplingGrid, common_grid, resample_to_grid
from ._shape_compare import (interface_distances, interface_elements, interface_points,
                             shape_comparison, shape_comparison_on_grid)

__all__ = [
    "pair_times", "interpolate_metrics", "compare_metrics", "compare_droplet_statistics",
    "SamplingGrid", "common_grid", "resample_to_grid",
    "shape_comparison", "shape_comparison_on_grid", "interface_points", "interface_elements",
    "interface_distances", "band_volume_excess", "PAIR_COLUMNS", "SHAPE_COLUMNS",
]

#: columns of the pairs table
PAIR_COLUMNS = ("step_a", "step_b", "time_a", "time_b")
#: shape metrics written to comparison.csv, in order
SHAPE_COLUMNS = ("mismatch_volume", "dice", "hausdorff", "hausdorff_ab", "hausdorff_ba",
                 "hausdorff_95", "mean_distance", "field_difference")
#: columns of a steps table that identify a row rather than measure something
_KEY_COLUMNS = ("step", "time", "step_a", "step_b", "time_a", "time_b", "track")


def _as_times(times, label: str) -> tuple[np.ndarray, np.ndarray]:
    """Times as float array and step labels (a Series' index, else positions)."""
    if isinstance(times, pd.Series):
        steps = np.asarray(times.index)
        values = times.to_numpy(dtype=np.float64)
    else:
        values = np.asarray(times, dtype=np.float64).ravel()
        steps = np.arange(values.size)
    if values.size and not np.all(np.isfinite(values)):
        raise OptionError(f"times of run {label} must be finite numbers",
                          fix="drop steps without a time before pairing")
    return values, steps


def _median_interval(t: np.ndarray) -> float:
    d = np.diff(np.unique(t))
    return float(np.median(d)) if d.size else np.nan


def _local_intervals(t: np.ndarray) -> np.ndarray:
    """The output interval around each time of ``t``: the median of the (up to) four intervals between the
    run's distinct times nearest it, two on each side; NaN where the run has fewer than two distinct times.
    For outputs at a steady interval it is that interval; for geometric times (t0 2^k) it grows with t."""
    t = np.asarray(t, dtype=np.float64)
    distinct = np.unique(t)
    if distinct.size < 2:
        return np.full(t.shape, np.nan)
    gaps = np.diff(distinct)  # gaps[j] lies between distinct[j] and distinct[j + 1]
    around = np.searchsorted(distinct, t)[:, None] + np.arange(-2, 2)[None, :]
    inside = (around >= 0) & (around < gaps.size)
    return np.nanmedian(np.where(inside, gaps[np.clip(around, 0, gaps.size - 1)], np.nan), axis=1)


#: the default time tolerance of :func:`pair_times`, as a share of the smaller of the two runs' output
#: intervals around the paired times (our threshold)
PAIR_SHARE = 0.25


def pair_times(times_a, times_b, *, tolerance: float | None = None):
    """Pair the output steps of two runs whose times agree.

    Parameters
    ----------
    times_a, times_b : array_like of shape (n_a,), (n_b,) or pandas Series
        Output times of each run. A Series' index gives the step labels,
        otherwise steps are numbered 0, 1, ...
    tolerance : float, optional, in time units
        Largest accepted time difference; default, for each candidate pair, a quarter
        of the smaller of the two runs' output intervals around its times (the median
        of the four intervals nearest each time, two on each side; exact matches only
        when neither run has two distinct times): outputs written at the first solver
        step past each output time pair while the solver step is under a quarter of the
        interval; outputs at other times do not (half an interval paired t = 0.1 with
        0.15, and the shapes' difference was the flow's motion). Local, so that outputs
        at geometric times (t0 2^k) pair alike early and late: one tolerance from the
        median interval paired t = 0.01 with 0.015 and left 1000 and 1024 unpaired.

    Returns
    -------
    pairs : DataFrame with columns ``step_a, step_b, time_a, time_b``
        One row per pair, in increasing ``time_a``; every step is in at most
        one pair (mutual nearest times).
    unpaired_a, unpaired_b : list
        Steps of each run left without a partner.

    Raises
    ------
    OptionError
        Non-finite times or a negative tolerance.

    Examples
    --------
    >>> pairs, ua, ub = pair_times([0.0, 0.1, 0.2, 0.3], [0.0, 0.17, 0.201])
    >>> pairs[["step_a", "step_b"]].values.tolist(), ua, ub
    ([[0, 0], [2, 2]], [1, 3], [1])
    """
    ta, sa = _as_times(times_a, "A")
    tb, sb = _as_times(times_b, "B")
    if tolerance is not None and not (np.isfinite(tolerance) and tolerance >= 0):
        raise OptionError(f"time tolerance must be a non-negative number, found {tolerance!r}",
                          fix="give it in the runs' time units")
    scale = max(float(np.abs(np.concatenate([ta, tb, [1.0]])).max()), 1.0)
    round_off = 1e-12 * scale  # round-off in written times
    empty = pd.DataFrame({"step_a": sa[:0], "step_b": sb[:0], "time_a": ta[:0], "time_b": tb[:0]})
    if ta.size == 0 or tb.size == 0:
        return empty, sa.tolist(), sb.tolist()
    order_b = np.argsort(tb, kind="stable")
    sorted_b = tb[order_b]

    def nearest(sorted_t, t):
        i = np.clip(np.searchsorted(sorted_t, t), 1, max(sorted_t.size - 1, 1))
        if sorted_t.size == 1:
            return np.zeros(t.size, dtype=np.int64)
        left = sorted_t[i - 1]
        right = sorted_t[np.minimum(i, sorted_t.size - 1)]
        return np.where(np.abs(t - left) <= np.abs(right - t), i - 1, i)

    order_a = np.argsort(ta, kind="stable")
    sorted_a = ta[order_a]
    b_of_a = order_b[nearest(sorted_b, ta)]  # nearest B step of every A step
    a_of_b = order_a[nearest(sorted_a, tb)]
    ia = np.arange(ta.size)
    mutual = a_of_b[b_of_a] == ia
    if tolerance is None:  # a quarter of the smaller of the two runs' intervals around the pair's times
        local = np.fmin(_local_intervals(ta), _local_intervals(tb)[b_of_a])
        tol = PAIR_SHARE * np.where(np.isfinite(local), local, 0.0) + round_off
    else:
        tol = float(tolerance) + round_off
    close = np.abs(ta - tb[b_of_a]) <= tol
    keep = mutual & close
    ia, ib = ia[keep], b_of_a[keep]
    order = np.argsort(ta[ia], kind="stable")
    ia, ib = ia[order], ib[order]
    pairs = pd.DataFrame({"step_a": sa[ia], "step_b": sb[ib], "time_a": ta[ia], "time_b": tb[ib]})
    unpaired_a = np.delete(sa, ia).tolist()
    unpaired_b = np.delete(sb, ib).tolist()
    return pairs.reset_index(drop=True), unpaired_a, unpaired_b


def _metric_columns(*tables: pd.DataFrame) -> list[str]:
    shared = [c for c in tables[0].columns
              if all(c in t.columns for t in tables) and c not in _KEY_COLUMNS]
    return [c for c in shared
            if all(pd.api.types.is_numeric_dtype(t[c]) and not pd.api.types.is_bool_dtype(t[c])
                   for t in tables)]


def _check_steps_table(table, label: str) -> pd.DataFrame:
    if not isinstance(table, pd.DataFrame):
        raise OptionError(f"steps table of run {label} must be a pandas DataFrame, "
                          f"found {type(table).__name__}", fix="read steps.csv with pandas.read_csv")
    if "time" not in table.columns:
        raise OptionError(f"steps table of run {label} has no 'time' column; columns: "
                          f"{', '.join(map(str, table.columns))}", fix="pass a steps.csv table")
    return table


def interpolate_metrics(steps_df: pd.DataFrame, times, *, columns=None) -> pd.DataFrame:
    """Linear interpolation of one run's per-step metrics onto other times.

    Parameters
    ----------
    steps_df : DataFrame
        A steps table (steps.csv) with a ``time`` column.
    times : array_like of shape (n,)
        Times to interpolate at.
    columns : list of str, optional
        Metric columns; default every numeric column except ``step`` and ``time``.

    Returns
    -------
    DataFrame with columns ``time`` and the metric columns, one row per time
        Values outside the run's time span are NaN (no extrapolation), as are
        values between two steps when either of them is NaN.

    Raises
    ------
    OptionError
        No ``time`` column or an unknown metric column.
    """
    table = _check_steps_table(steps_df, "A")
    t = np.asarray(times, dtype=np.float64).ravel()
    cols = _metric_columns(table) if columns is None else list(columns)
    missing = [c for c in cols if c not in table.columns]
    if missing:
        raise OptionError(f"columns {missing} are not in the steps table",
                          fix=f"choose from {', '.join(_metric_columns(table))}")
    ordered = table.sort_values("time", kind="stable")
    xp = ordered["time"].to_numpy(dtype=np.float64)
    out = {"time": t}
    for c in cols:
        fp = ordered[c].to_numpy(dtype=np.float64)
        if xp.size == 0:
            out[c] = np.full(t.size, np.nan)
            continue
        with np.errstate(invalid="ignore"):
            values = np.interp(t, xp, fp, left=np.nan, right=np.nan)
        # a NaN neighbour makes the value NaN (np.interp would pass it through only partly)
        j = np.clip(np.searchsorted(xp, t, side="right"), 1, xp.size) - 1
        k = np.minimum(j + 1, xp.size - 1)
        on_node = np.isclose(t, xp[j], rtol=0, atol=0)
        bad = ~np.isfinite(fp[j]) | (~on_node & ~np.isfinite(fp[k]))
        values[bad] = np.nan
        values[on_node] = fp[j][on_node]
        out[c] = values
    return pd.DataFrame(out)


def compare_metrics(steps_a: pd.DataFrame, steps_b: pd.DataFrame, *, pairs=None, columns=None,
                    method: str = "pair", tolerance: float | None = None) -> pd.DataFrame:
    """Every metric of two runs' steps tables side by side, with differences.

    Parameters
    ----------
    steps_a, steps_b : DataFrame
        Steps tables (steps.csv) of run A and run B (B is the reference).
    pairs : DataFrame, optional
        From :func:`pair_times`; default pairs of the two ``time`` columns
        (steps are the tables' ``step`` column, else their row positions).
    columns : list of str, optional
        Metrics to compare; default every numeric column both tables have
        (except ``step``, ``time``).
    method : {'pair', 'interpolate'}
        ``pair``: one row per paired step; ``interpolate``: one row per step
        of A, with B's metrics interpolated linearly to A's times (NaN outside
        B's time span).
    tolerance : float, optional
        Passed to :func:`pair_times` when ``pairs`` is not given.

    Returns
    -------
    DataFrame
        ``time`` (A's time), ``step_a``, ``step_b``, ``time_a``, ``time_b``
        (``step_b`` and ``time_b`` NaN with ``interpolate``), then for each
        metric ``<metric>_a``, ``<metric>_b``, ``<metric>_diff`` (A - B) and
        ``<metric>_rel_diff`` ((A - B) / |B|, NaN where B is 0).
        ``attrs['skipped_columns']`` lists numeric columns only one table has.

    Raises
    ------
    OptionError
        Tables without ``time``, an unknown column or method.
    """
    a = _check_steps_table(steps_a, "A")
    b = _check_steps_table(steps_b, "B")
    if method not in ("pair", "interpolate"):
        raise OptionError(f"method must be 'pair' or 'interpolate', found {method!r}",
                          fix="'pair' matches output times, 'interpolate' interpolates run B")
    shared = _metric_columns(a, b)
    if columns is None:
        cols = shared
    else:
        cols = list(columns)
        missing = [c for c in cols if c not in shared]
        if missing:
            raise OptionError(f"columns {missing} are not numeric columns of both steps tables",
                              fix=f"choose from {', '.join(shared)}")
    only_one = sorted(set(_metric_columns(a)) ^ set(_metric_columns(b)))
    steps_of = lambda t: t["step"].to_numpy() if "step" in t.columns else np.arange(len(t))  # noqa: E731
    if method == "interpolate":
        values_b = interpolate_metrics(b, a["time"].to_numpy(dtype=np.float64), columns=cols)
        out = pd.DataFrame({"time": a["time"].to_numpy(dtype=np.float64), "step_a": steps_of(a),
                            "step_b": np.nan, "time_a": a["time"].to_numpy(dtype=np.float64),
                            "time_b": np.nan})
        rows_a = np.arange(len(a))
        col_b = {c: values_b[c].to_numpy() for c in cols}
    else:
        if pairs is None:
            pairs, _, _ = pair_times(pd.Series(a["time"].to_numpy(dtype=np.float64), index=steps_of(a)),
                                     pd.Series(b["time"].to_numpy(dtype=np.float64), index=steps_of(b)),
                                     tolerance=tolerance)
        missing_pairs = [c for c in PAIR_COLUMNS if c not in pairs.columns]
        if missing_pairs:
            raise OptionError(f"pairs table lacks columns {missing_pairs}", fix="build it with pair_times")
        rows_a = _rows_of(steps_of(a), pairs["step_a"].to_numpy(), "A")
        rows_b = _rows_of(steps_of(b), pairs["step_b"].to_numpy(), "B")
        out = pd.DataFrame({"time": pairs["time_a"].to_numpy(dtype=np.float64),
                            "step_a": pairs["step_a"].to_numpy(), "step_b": pairs["step_b"].to_numpy(),
                            "time_a": pairs["time_a"].to_numpy(dtype=np.float64),
                            "time_b": pairs["time_b"].to_numpy(dtype=np.float64)})
        col_b = {c: b[c].to_numpy(dtype=np.float64)[rows_b] for c in cols}
    block = {}
    for c in cols:
        va = a[c].to_numpy(dtype=np.float64)[rows_a]
        vb = col_b[c]
        diff = va - vb
        with np.errstate(divide="ignore", invalid="ignore"):
            rel = np.where(vb != 0, diff / np.abs(vb), np.nan)
        block.update({f"{c}_a": va, f"{c}_b": vb, f"{c}_diff": diff, f"{c}_rel_diff": rel})
    out = pd.concat([out.reset_index(drop=True), pd.DataFrame(block)], axis=1)
    out.attrs["skipped_columns"] = only_one
    return out


def _rows_of(steps: np.ndarray, wanted: np.ndarray, label: str) -> np.ndarray:
    lookup = pd.Index(steps)
    if not lookup.is_unique:
        raise OptionError(f"steps table of run {label} repeats step numbers",
                          fix="pass a table with one row per step")
    rows = lookup.get_indexer(wanted)
    if np.any(rows < 0):
        raise OptionError(f"paired steps {wanted[rows < 0].tolist()} are not in the steps table of run {label}",
                          fix="pair the times of these tables")
    return rows


#: droplet statistics compared per paired time (suffixes _a, _b, _diff added)
DROPLET_STATISTICS = ("droplet_count", "mean_equivalent_diameter", "median_equivalent_diameter",
                      "total_droplet_volume")


def compare_droplet_statistics(droplets_a: pd.DataFrame, droplets_b: pd.DataFrame, pairs, *,
                               resolved_only: bool = False) -> pd.DataFrame:
    """Droplet counts and size distributions of two runs at paired times.

    Parameters
    ----------
    droplets_a, droplets_b : DataFrame
        Droplet tables (droplets.csv): one row per droplet per step with at
        least ``step``, ``volume`` and ``equivalent_diameter``.
    pairs : DataFrame
        From :func:`pair_times` (columns ``step_a, step_b, time_a, time_b``).
    resolved_only : bool
        Leave out droplets flagged ``under_resolved`` (when that column exists).

    Returns
    -------
    DataFrame, one row per pair
        ``step``, ``time`` (run A's), ``step_a``, ``step_b``, then ``droplet_count``,
        ``mean_equivalent_diameter``, ``median_equivalent_diameter``,
        ``total_droplet_volume`` each with ``_a``, ``_b`` and ``_diff`` (A - B),
        and ``size_ks_statistic``, ``size_ks_pvalue``: the two-sample
        Kolmogorov-Smirnov test of the equivalent diameters, and
        ``size_ks_note``: why the test is NaN (a run with fewer than 2
        droplets at that time, where the test says nothing: one droplet
        against one gives a statistic and a p-value of 1 whatever the sizes).

    References
    ----------
    Kolmogorov-Smirnov two-sample test: ``scipy.stats.ks_2samp``
    (Hodges 1958, "The significance probability of the Smirnov two-sample test").
    """
    from scipy.stats import ks_2samp

    tables = []
    for table, label in ((droplets_a, "A"), (droplets_b, "B")):
        if not isinstance(table, pd.DataFrame):
            raise OptionError(f"droplet table of run {label} must be a DataFrame, found {type(table).__name__}",
                              fix="read droplets.csv with pandas.read_csv")
        need = [c for c in ("step", "volume", "equivalent_diameter") if c not in table.columns]
        if need:
            raise OptionError(f"droplet table of run {label} lacks columns {need}",
                              fix="pass a droplets.csv table")
        if resolved_only and "under_resolved" in table.columns:
            table = table[~table["under_resolved"].astype(bool)]
        tables.append(table)
    groups = [dict(tuple(t.groupby("step"))) for t in tables]
    rows = []
    for step_a, step_b, time_a in zip(pairs["step_a"], pairs["step_b"], pairs["time_a"]):
        ga = groups[0].get(step_a, tables[0].iloc[:0])
        gb = groups[1].get(step_b, tables[1].iloc[:0])
        row = {"step": step_a, "time": float(time_a), "step_a": step_a, "step_b": step_b}
        for g, suffix in ((ga, "a"), (gb, "b")):
            d = g["equivalent_diameter"].to_numpy(dtype=np.float64)
            row[f"droplet_count_{suffix}"] = len(g)
            row[f"mean_equivalent_diameter_{suffix}"] = float(d.mean()) if d.size else np.nan
            row[f"median_equivalent_diameter_{suffix}"] = float(np.median(d)) if d.size else np.nan
            row[f"total_droplet_volume_{suffix}"] = float(g["volume"].sum())
        for name in DROPLET_STATISTICS:
            row[f"{name}_diff"] = row[f"{name}_a"] - row[f"{name}_b"]
        da = ga["equivalent_diameter"].to_numpy(dtype=np.float64)
        db = gb["equivalent_diameter"].to_numpy(dtype=np.float64)
        row["size_ks_note"] = ""
        if da.size >= 2 and db.size >= 2:
            ks = ks_2samp(da, db)
            row["size_ks_statistic"], row["size_ks_pvalue"] = float(ks.statistic), float(ks.pvalue)
        else:
            row["size_ks_statistic"] = row["size_ks_pvalue"] = np.nan
            few = [name for name, d in (("A", da), ("B", db)) if d.size < 2]
            row["size_ks_note"] = f"fewer than 2 droplets in run {' and '.join(few)}: no size test"
        rows.append(row)
    columns = ["step", "time", "step_a", "step_b"] + [f"{n}_{s}" for n in DROPLET_STATISTICS
                                                       for s in ("a", "b", "diff")] + \
        ["size_ks_statistic", "size_ks_pvalue", "size_ks_note"]
    return pd.DataFrame(rows, columns=columns)


def band_volume_excess(scale: float, radii, dimension: int) -> float:
    """Volume a logistic band adds to closed drops, beyond the sharp drops of the same contours.

    Parameters
    ----------
    scale : float, in length units
        The band's logistic scale s, c = 1 / (1 + exp((r - R) / s)) (``interface_eps``).
    radii : array_like of float, in length units
        The drops' radii (only their number counts in 2D).
    dimension : {2, 3}

    Returns
    -------
    float
        ``int c dV`` minus the sharp volume: pi^3 s^2 / 3 per drop in 2D, whatever its shape (pi^2 s^2 / 6
        times the curvature integral 2 pi of a closed curve), 4 pi^3 s^2 R / 3 per sphere of radius R in 3D
        (exact up to terms of order exp(-R / s)); a bubble of the other phase takes as much away.

    References
    ----------
    The Sommerfeld expansion of the Fermi-Dirac integral, int_0^inf r^n / (1 + exp((r - R) / s)) dr =
    R^(n+1) / (n+1) + pi^2 s^2 n R^(n-1) / 6 + O(s^4 R^(n-3)) (Ashcroft & Mermin 1976, Solid State
    Physics, eq. 2.70), with n = 1 (2D) and n = 2 (3D).
    """
    if dimension not in (2, 3):
        raise OptionError(f"dimension must be 2 or 3, found {dimension!r}", fix="give the mesh's dimension")
    r = np.asarray(radii, dtype=np.float64).ravel()
    s2 = float(scale) ** 2
    if dimension == 2:
        return float(np.pi ** 3 * s2 / 3.0 * r.size)
    return float(4.0 * np.pi ** 3 * s2 / 3.0 * r.sum())
