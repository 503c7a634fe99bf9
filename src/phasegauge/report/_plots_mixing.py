"""Plots of mixing and conservation: profiles along the channel, drift and mixing over time.

Every function returns a matplotlib Figure drawn with the Agg canvas (no
display needed); the caller saves it and closes it.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
from matplotlib.figure import Figure

from ..errors import OptionError
from ._canvas import in_mesh_units, legend_outside, new_figure, time_label

__all__ = ["plot_mixing_profile", "plot_phase_volume_drift", "plot_mixing_index"]


def _require(table: pd.DataFrame, columns, what: str) -> None:
    missing = [c for c in columns if c not in table]
    if missing:
        raise OptionError(f"the {what} table has no column {', '.join(repr(c) for c in missing)}",
                          fix="pass the table phasegauge wrote for it")


def plot_mixing_profile(profiles: dict, *, weighting: str = "flow", target: float | None = 0.9,
                        axis_label: str = in_mesh_units("position along the axis")) -> Figure:
    """Mixing index against position along the channel, one curve per step or run.

    Parameters
    ----------
    profiles : dict of str -> DataFrame
        Label (a step's time, a run's name) to a table from ``cross_sections``.
    weighting : {'flow', 'area'}
        Plot ``mixing_index_flow`` or ``mixing_index``; a profile without flow
        values falls back to the area-weighted index (its label says so). A
        profile with ``mixing_index_inflow`` also gets that curve (dotted, same
        colour): the index against the inflow mean.
    target : float or None
        Draws the target mixing index as a dashed line.
    axis_label : str
        Label of the horizontal axis, e.g. ``"x"``.

    Returns
    -------
    matplotlib.figure.Figure
    """
    if weighting not in ("flow", "area"):
        raise OptionError(f"weighting must be 'flow' or 'area', found {weighting!r}",
                          fix="'flow' weighs by u.n, 'area' by the section area")
    figure = new_figure()
    ax = figure.add_subplot()
    keys, inflow = [], None  # the legend: one entry per profile, the dotted style once
    for label, table in profiles.items():
        _require(table, ["position", "mixing_index"], "profile")
        column, suffix = "mixing_index", ""
        if weighting == "flow":
            if "mixing_index_flow" in table and table["mixing_index_flow"].notna().any():
                column = "mixing_index_flow"
            else:
                suffix = " (area-weighted)"
        ordered = table.sort_values("position")
        (line,) = ax.plot(ordered["position"], ordered[column], marker="o", markersize=3, label=f"{label}{suffix}")
        keys.append(line)
        if "mixing_index_inflow" in ordered and ordered["mixing_index_inflow"].notna().any():
            ax.plot(ordered["position"], ordered["mixing_index_inflow"], linestyle=":", marker="x", markersize=3,
                    color=line.get_color(), label=f"{label}, against the inflow mean")
            inflow = "dotted: against the inflow mean"
    if inflow:
        from matplotlib.lines import Line2D

        keys.append(Line2D([], [], color="0.3", linestyle=":", marker="x", markersize=3, label=inflow))
    if target is not None:
        keys.append(ax.axhline(target, color="0.4", linestyle="--", linewidth=1, label=f"target {target:g}"))
    ax.set_xlabel(axis_label)
    ax.set_ylabel("mixing index 1 - sqrt(I)" + (" (flow-weighted)" if weighting == "flow" else ""))
    ax.set_ylim(min(0.0, ax.get_ylim()[0]), max(1.05, ax.get_ylim()[1]))
    ax.grid(True, alpha=0.3)
    if profiles:
        legend_outside(ax, handles=keys)
    return figure


def _time_axis(steps_df: pd.DataFrame, time_origin: str | None = None):
    if "time" in steps_df:
        return steps_df["time"].to_numpy(dtype=np.float64), time_label(time_origin)
    return np.arange(len(steps_df)), "step"


def plot_phase_volume_drift(steps_df: pd.DataFrame, *, time_origin: str | None = None) -> Figure:
    """Relative phase-volume drift over time (and the part not explained by boundary flux).

    Parameters
    ----------
    steps_df : DataFrame
        The steps table with ``phase_volume_drift`` (and optionally ``time``,
        ``phase_volume_drift_closed``).

    Returns
    -------
    matplotlib.figure.Figure
    """
    _require(steps_df, ["phase_volume_drift"], "steps")
    figure = new_figure()
    ax = figure.add_subplot()
    t, label = _time_axis(steps_df, time_origin)
    ax.plot(t, steps_df["phase_volume_drift"], marker="o", markersize=3, label="(V - V0) / V0")
    if "phase_volume_drift_closed" in steps_df:
        ax.plot(t, steps_df["phase_volume_drift_closed"], marker="s", markersize=3,
                label="with boundary outflow added back")
        legend_outside(ax)
    ax.axhline(0.0, color="0.4", linewidth=0.8)
    ax.set_xlabel(label)
    ax.set_ylabel("phase volume drift (relative)")
    ax.grid(True, alpha=0.3)
    return figure


def plot_mixing_index(steps_df: pd.DataFrame, *, time_origin: str | None = None) -> Figure:
    """Volume-weighted mixing index over time, with the mixed volume fraction when present.

    Parameters
    ----------
    steps_df : DataFrame
        The steps table with ``mixing_index`` (and optionally ``time``,
        ``mixed_volume_fraction``).

    Returns
    -------
    matplotlib.figure.Figure
    """
    _require(steps_df, ["mixing_index"], "steps")
    figure = new_figure()
    ax = figure.add_subplot()
    t, label = _time_axis(steps_df, time_origin)
    ax.plot(t, steps_df["mixing_index"], marker="o", markersize=3, label="mixing index 1 - sqrt(I)")
    if "mixed_volume_fraction" in steps_df:
        ax.plot(t, steps_df["mixed_volume_fraction"], marker="s", markersize=3,
                label="mixed volume fraction (0.05 < c < 0.95)")
    ax.set_xlabel(label)
    ax.set_ylabel("mixing index, mixed fraction (dimensionless)")
    ax.set_ylim(-0.02, 1.02)
    ax.grid(True, alpha=0.3)
    legend_outside(ax)
    return figure
