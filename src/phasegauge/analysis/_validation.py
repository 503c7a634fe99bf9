"""Simulation against measured values: differences per point, error figures per time and overall."""

from __future__ import annotations

import numpy as np

from ..errors import OptionError

__all__ = ["validation_table", "validation_summary", "VALIDATION_COLUMNS", "SUMMARY_COLUMNS"]

#: columns of validation.csv (one row per measured value and compared time)
VALIDATION_COLUMNS = ("time", "x", "y", "z", "measured", "simulated", "difference", "uncertainty",
                      "within_uncertainty")
#: columns of validation_summary.csv (one row per time, then one overall row with an empty time)
SUMMARY_COLUMNS = ("scope", "time", "points", "rms_error", "bias", "largest_error", "within_uncertainty")


def validation_table(measured, times, simulated):
    """The simulation beside each measured value.

    Parameters
    ----------
    measured : sequence of (x, y, z, value, time, uncertainty)
        Measured values; a NaN time stands for every step, a NaN uncertainty for none given.
    times : ndarray of shape (n_steps,)
        Times of the steps, increasing.
    simulated : ndarray of shape (n_steps, n_measured)
        The simulated field at each measured position at every step.

    Returns
    -------
    DataFrame
        :data:`VALIDATION_COLUMNS`: a value with a time is compared with the
        simulation interpolated linearly in time there (NaN outside the steps'
        time span); a value without a time is compared at every step.
        ``difference`` is simulated minus measured; ``within_uncertainty`` is
        |difference| <= uncertainty (empty without an uncertainty).
    """
    import pandas as pd

    rows = np.asarray(measured, dtype=float).reshape(-1, 6)
    times = np.asarray(times, dtype=float)
    simulated = np.asarray(simulated, dtype=float).reshape(len(times), len(rows))
    if len(times) > 1 and np.any(np.diff(times) <= 0):
        raise OptionError("step times must increase", fix="hand the steps in time order")
    timed = np.isfinite(rows[:, 4])
    parts = []
    if timed.any():
        k = np.flatnonzero(timed)
        t = rows[k, 4]
        if len(times) == 1:
            sim = np.where(np.isclose(t, times[0]), simulated[0, k], np.nan)
        else:
            j = np.clip(np.searchsorted(times, t, side="right") - 1, 0, len(times) - 2)
            w = (t - times[j]) / (times[j + 1] - times[j])
            sim = (1 - w) * simulated[j, k] + w * simulated[j + 1, k]
            span = (t >= times[0] - 1e-12 * max(1.0, abs(times[0]))) & (t <= times[-1] + 1e-12 * max(1.0, abs(times[-1])))
            sim = np.where(span, sim, np.nan)
        parts.append((t, rows[k], sim))
    if (~timed).any():
        k = np.flatnonzero(~timed)
        parts.append((np.repeat(times, len(k)), np.tile(rows[k], (len(times), 1)), simulated[:, k].ravel()))
    if not parts:
        return pd.DataFrame(columns=list(VALIDATION_COLUMNS))
    t = np.concatenate([p[0] for p in parts])
    r = np.concatenate([p[1] for p in parts])
    sim = np.concatenate([p[2] for p in parts])
    diff = sim - r[:, 3]
    unc = r[:, 5]
    within = pd.array(np.abs(diff) <= unc, dtype="boolean")
    within[~(np.isfinite(unc) & np.isfinite(diff))] = pd.NA
    table = pd.DataFrame({"time": t, "x": r[:, 0], "y": r[:, 1], "z": r[:, 2], "measured": r[:, 3],
                          "simulated": sim, "difference": diff, "uncertainty": unc, "within_uncertainty": within})
    return table.sort_values("time", kind="stable", ignore_index=True)


def _figures(diff, within):
    ok = np.isfinite(diff)
    d = diff[ok]
    w = within[ok]
    w = w[~w.isna()] if hasattr(w, "isna") else w
    return {"points": int(d.size),
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
        time and ``'overall'`` for the last row (its time empty). Points whose
        simulated value is empty (outside the mesh or the time span) are left
        out; ``within_uncertainty`` counts only points with an uncertainty.
    """
    import pandas as pd

    rows = []
    diff = table["difference"].to_numpy(dtype=float)
    within = table["within_uncertainty"]
    for t, idx in table.groupby("time", sort=True).indices.items():
        rows.append({"scope": "time", "time": t, **_figures(diff[idx], within.iloc[idx])})
    rows.append({"scope": "overall", "time": np.nan, **_figures(diff, within)})
    return pd.DataFrame(rows, columns=list(SUMMARY_COLUMNS))
