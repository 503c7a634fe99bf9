"""Plots of droplet counts with event markers and of the droplet size distribution over time.

Both functions return a :class:`matplotlib.figure.Figure` built without pyplot's
global state (Agg canvas), so they are safe in worker processes; the caller saves it.
"""

from __future__ import annotations

from types import MappingProxyType

import numpy as np
import pandas as pd
from matplotlib.figure import Figure

from ..errors import OptionError
from ._canvas import legend_outside, new_figure, time_label, with_units

__all__ = ["plot_droplet_count", "plot_size_distribution"]

_EVENT_STYLE = MappingProxyType({
    "breakup": ("tab:red", "v"),
    "coalescence": ("tab:blue", "^"),
    "complex": ("tab:purple", "D"),
    "appearance": ("tab:green", "o"),
    "disappearance": ("tab:gray", "x"),
})


def _counts(table: pd.DataFrame) -> pd.DataFrame:
    """Count per step from a steps table (``droplet_count``) or a droplets table (rows per step)."""
    if "droplet_count" in table:
        out = table[["time", "droplet_count"]].rename(columns={"droplet_count": "count"})
        return out.sort_values("time")
    if {"step", "time"} <= set(table.columns):
        return (table.groupby("step", sort=True).agg(time=("time", "first"), count=("time", "size"))
                .reset_index(drop=True))
    raise OptionError("the table has neither a 'droplet_count' column nor 'step' and 'time' columns",
                      fix="pass steps.csv or droplets.csv as a DataFrame")


def plot_droplet_count(table: pd.DataFrame, events: pd.DataFrame | None = None, *,
                       time_origin: str | None = None) -> Figure:
    """Droplet count over time, with a marker at each event.

    Parameters
    ----------
    table : pandas.DataFrame
        A steps table with ``time, droplet_count``, or a droplets table with
        ``step, time`` (one row per droplet per step; steps without droplets
        are then missing and not drawn as zero).
    events : pandas.DataFrame, optional
        Events table with ``time, kind``; each kind gets its own marker.

    Returns
    -------
    matplotlib.figure.Figure
    """
    counts = _counts(table)
    fig = new_figure(7.0, 4.0)
    ax = fig.add_subplot()
    ax.step(counts["time"], counts["count"], where="post", color="black", lw=1.2, label="droplets")
    if events is not None and len(events):
        at = np.interp(events["time"].to_numpy(float), counts["time"].to_numpy(float),
                       counts["count"].to_numpy(float)) if len(counts) else np.zeros(len(events))
        for kind, (colour, marker) in _EVENT_STYLE.items():
            chosen = (events["kind"] == kind).to_numpy()
            if chosen.any():
                ax.scatter(events["time"].to_numpy(float)[chosen], at[chosen], color=colour, marker=marker,
                           zorder=3, label=f"{kind} ({int(chosen.sum())})")
    ax.set_xlabel(time_label(time_origin))
    ax.set_ylabel("droplet count")
    ax.yaxis.get_major_locator().set_params(integer=True)
    legend_outside(ax)
    ax.grid(alpha=0.3)
    return fig


def plot_size_distribution(droplets: pd.DataFrame, *, column: str = "equivalent_diameter",
                           time_origin: str | None = None) -> Figure:
    """Droplet sizes over time: every droplet as a point, with the median and the 10-90 % band.

    Parameters
    ----------
    droplets : pandas.DataFrame
        Droplets table with ``time`` and ``column``.
    column : str
        Size column to show, default ``equivalent_diameter`` (length units);
        ``volume`` also works.

    Returns
    -------
    matplotlib.figure.Figure
    """
    if column not in droplets or "time" not in droplets:
        raise OptionError(f"the droplets table needs columns 'time' and '{column}'",
                          fix="pass droplets.csv as a DataFrame")
    fig = new_figure(7.0, 4.0)
    ax = fig.add_subplot()
    size = droplets[column].to_numpy(float)
    time = droplets["time"].to_numpy(float)
    ok = np.isfinite(size) & (size > 0)
    ax.scatter(time[ok], size[ok], s=6, alpha=0.4, color="tab:blue", lw=0, label="droplet")
    if ok.any():
        stats = (pd.DataFrame({"time": time[ok], "size": size[ok]}).groupby("time")["size"]
                 .quantile([0.1, 0.5, 0.9]).unstack())
        ax.fill_between(stats.index, stats[0.1], stats[0.9], color="tab:orange", alpha=0.2, label="10-90 %")
        ax.plot(stats.index, stats[0.5], color="tab:orange", lw=1.5, label="median")
        if size[ok].max() > 20 * size[ok].min():
            ax.set_yscale("log")
    ax.set_xlabel(time_label(time_origin))
    ax.set_ylabel(with_units(column.replace("_", " "), column))
    legend_outside(ax)
    ax.grid(alpha=0.3)
    return fig
