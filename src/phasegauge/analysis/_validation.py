"""Simulation against measured values: differences per point, error figures per time and overall."""

from __future__ import annotations

import numpy as np

from ..errors import OptionError
from ._grid_convergence import covered_span, span_reach

__all__ = ["validation_table", "validation_summary", "VALIDATION_COLUMNS", "SUMMARY_COLUMNS"]

#: columns of validation.csv (one row per measured value and compared time; ``step`` empty
#: where the time lies between steps)
VALIDATION_COLUMNS = ("step", "time", "x", "y", "z", "measured", "simulated", "difference", "uncertainty",
                      "within_uncertainty", "every_step")
#: columns of validation_summary.csv (one row per time, then one overall row with an empty step and time:
#: each measured value once, a value without a time at the last step); ``not_compared`` counts the values
#: whose simulated value is empty there
SUMMARY_COLUMNS = ("step", "time", "scope", "points", "not_compared", "rms_error", "bias", "largest_error",
                   "within_uncertainty")


#: a measured time within this share of the shorter interval beside a step is that step's time (times written
#: with 6 or 7 significant digits: a solver's 0.333333 against a measured 0.3333333): our threshold
ON_STEP = 1e-6


def _nearest_step(times, t):
    """Per time in ``t``, the nearest step and whether ``t`` is that step's time: to round-off, or within
    :data:`ON_STEP` of the shorter output interval beside it."""
    i = np.clip(np.searchsorted(times, t), 0, len(times) - 1)
    below = np.clip(i - 1, 0, len(times) - 1)
    at = np.where(np.abs(times[below] - t) < np.abs(times[i] - t), below, i)
    reach = np.full(len(times), 0.0)
    if len(times) > 1:
        interval = np.diff(times)
        reach = ON_STEP * np.minimum(np.concatenate([[np.inf], interval]), np.concatenate([interval, [np.inf]]))
    on_step = np.isclose(times[at], t, rtol=1e-12, atol=1e-12 * max(1.0, float(np.abs(times).max())))
    on_step |= np.abs(times[at] - t) <= reach[at]
    return at, on_step


def validation_table(measured, times, simulated, *, steps=None, gaps=None):
    """The simulation beside each measured value.

    Parameters
    ----------
    measured : sequence of (x, y, z, value, time, uncertainty)
        Measured values; a NaN time stands for every step, a NaN uncertainty for none given.
    times : ndarray of shape (n_steps,)
        Times of the steps, increasing.
    simulated : ndarray of shape (n_steps, n_measured)
        The simulated field at each measured position at every step.
    steps : ndarray of int, shape (n_steps,), optional
        Step numbers of the steps (default 0, 1, ...), for the ``step`` column.
    gaps : ndarray of bool, shape (n_steps - 1,), optional
        True where the interval between step ``i`` and ``i + 1`` spans a step that was not read (a
        damaged file): a time strictly inside it is not compared (the run's value there is unknown).

    Returns
    -------
    DataFrame
        :data:`VALIDATION_COLUMNS`: a value with a time is compared with the
        simulation interpolated linearly in time there (NaN outside the steps'
        time span; ``step`` is the step at that time, empty between steps);
        a value without a time is compared at every step. A time on a step (to round-off) takes
        that step's value alone, and an interpolation weight of 0 never reads the other step, so
        an empty value at a neighbouring step does not empty it; a time between two steps one of
        which is empty there, or inside a ``gaps`` interval, is empty (not compared).
        ``difference`` is simulated minus measured; ``within_uncertainty`` is
        |difference| <= uncertainty (empty without an uncertainty), with a round-off allowance of
        1e-12 of the larger value (an uncertainty of 0 claims the value exactly); ``every_step``
        is True for a value without a time (compared at every step).
    """
    import pandas as pd

    rows = np.asarray(measured, dtype=float).reshape(-1, 6)
    times = np.asarray(times, dtype=float)
    simulated = np.asarray(simulated, dtype=float).reshape(len(times), len(rows))
    steps = np.arange(len(times)) if steps is None else np.asarray(steps, dtype=np.int64).reshape(len(times))
    if len(times) > 1 and np.any(np.diff(times) <= 0):
        raise OptionError("step times must increase", fix="hand the steps in time order")
    timed = np.isfinite(rows[:, 4])
    parts = []
    if timed.any():
        k = np.flatnonzero(timed)
        t = rows[k, 4]
        at, on_step = _nearest_step(times, t)
        if len(times) == 1:
            sim = np.where(np.isclose(t, times[0]), simulated[0, k], np.nan)
        else:
            j = np.clip(np.searchsorted(times, t, side="right") - 1, 0, len(times) - 2)
            w = np.clip((t - times[j]) / (times[j + 1] - times[j]), 0.0, 1.0)  # the run's ends clamp
            a, b = simulated[j, k], simulated[j + 1, k]
            with np.errstate(invalid="ignore"):  # 0 * NaN: the step of weight 0 is not read
                sim = np.where(w == 0, a, np.where(w == 1, b, (1 - w) * a + w * b))
            sim = np.where(on_step, simulated[at, k], sim)
            if gaps is not None:
                gaps = np.asarray(gaps, dtype=bool).reshape(len(times) - 1)
                sim = np.where(gaps[j] & ~on_step & (w > 0) & (w < 1), np.nan, sim)
            first, last = covered_span(times, span_reach(times))  # (as the convergence and reference checks)
            span = (t >= first) & (t <= last)
            sim = np.where(span, sim, np.nan)
        parts.append((t, rows[k], sim, np.where(on_step, steps[at], -1), np.zeros(k.size, dtype=bool)))
    if (~timed).any():
        k = np.flatnonzero(~timed)
        parts.append((np.repeat(times, len(k)), np.tile(rows[k], (len(times), 1)), simulated[:, k].ravel(),
                      np.repeat(steps, len(k)), np.ones(len(times) * k.size, dtype=bool)))
    if not parts:
        return pd.DataFrame(columns=list(VALIDATION_COLUMNS))
    t = np.concatenate([p[0] for p in parts])
    r = np.concatenate([p[1] for p in parts])
    sim = np.concatenate([p[2] for p in parts])
    step = pd.array(np.concatenate([p[3] for p in parts]), dtype="Int64")
    step[step < 0] = pd.NA
    diff = sim - r[:, 3]
    unc = r[:, 5]
    roundoff = 1e-12 * np.maximum(np.abs(r[:, 3]), np.abs(np.nan_to_num(sim)))  # equal values read equal
    within = pd.array(np.abs(diff) <= unc + roundoff, dtype="boolean")
    within[~(np.isfinite(unc) & np.isfinite(diff))] = pd.NA
    table = pd.DataFrame({"step": step, "time": t, "x": r[:, 0], "y": r[:, 1], "z": r[:, 2], "measured": r[:, 3],
                          "simulated": sim, "difference": diff, "uncertainty": unc, "within_uncertainty": within,
                          "every_step": np.concatenate([p[4] for p in parts])})
    return table.sort_values("time", kind="stable", ignore_index=True)


def _figures(diff, within):
    ok = np.isfinite(diff)
    d = diff[ok]
    w = within[ok]
    w = w[~w.isna()] if hasattr(w, "isna") else w
    return {"points": int(d.size), "not_compared": int(np.count_nonzero(~ok)),
            "rms_error": float(np.sqrt(np.mean(d * d))) if d.size else np.nan,
            "bias": float(np.mean(d)) if d.size else np.nan,
            "largest_error": float(np.max(np.abs(d))) if d.size else np.nan,
            "within_uncertainty": float(np.mean(np.asarray(w, dtype=float))) if len(w) else np.nan}


def validation_summary(table):
    """RMS error, bias, largest error and share within the uncertainty, per time and overall.

    Parameters
    ----------
    table : DataFrame
        From :func:`validation_table`.

    Returns
    -------
    DataFrame
        :data:`SUMMARY_COLUMNS`; ``scope`` is ``'time'`` for the rows of one
        time (``step`` empty between steps) and ``'overall'`` for the last row
        (its step and time empty): each measured value counts once there, a
        value without a time at the last step (the state the run reaches; at
        every step it would weigh as many times as there are steps, the
        initial state included; one empty there is counted not compared, not
        taken at an earlier step: the state the run reaches there is unknown).
        Points whose simulated value is empty (outside the mesh or the time
        span, in a cell with no finite value, between steps across a skipped
        one) are left out of the figures and counted in ``not_compared``;
        ``within_uncertainty`` counts only points with an uncertainty.
    """
    import pandas as pd

    rows = []
    diff = table["difference"].to_numpy(dtype=float)
    within = table["within_uncertainty"]
    step = table["step"] if "step" in table else pd.Series(pd.NA, index=table.index, dtype="Int64")
    for t, idx in table.groupby("time", sort=True).indices.items():
        rows.append({"step": step.iloc[idx[0]], "time": t, "scope": "time", **_figures(diff[idx], within.iloc[idx])})
    once = np.ones(len(table), dtype=bool)
    if "every_step" in table and len(table):
        every = table["every_step"].to_numpy(dtype=bool)
        last = table["time"].to_numpy(dtype=float)[every].max(initial=-np.inf)
        once = ~every | (table["time"].to_numpy(dtype=float) == last)
    rows.append({"step": pd.NA, "time": np.nan, "scope": "overall",
                 **_figures(diff[once], within[once])})
    frame = pd.DataFrame(rows, columns=list(SUMMARY_COLUMNS))
    frame["step"] = frame["step"].astype("Int64")
    return frame
