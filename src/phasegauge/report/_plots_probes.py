"""Plots of probes, lines and measured values: histories, profiles and the overlay of both.

Every function returns a matplotlib Figure drawn with the Agg canvas; the caller saves it.
"""

from __future__ import annotations

import numpy as np

from ._canvas import in_mesh_units, legend_outside, new_figure, time_label, time_words

__all__ = ["plot_probe_histories", "plot_line_profiles", "plot_validation_overlay"]


def plot_probe_histories(probes, *, limit: int = 12, time_origin: str | None = None):
    """The field at each probe over time (at most ``limit`` probes drawn, in file order).

    Parameters
    ----------
    probes : DataFrame
        The table of probes.csv (``time``, ``probe``, ``value``).
    """
    figure = new_figure()
    ax = figure.add_subplot()
    names = list(dict.fromkeys(probes["probe"]))
    for name in names[:limit]:
        rows = probes[probes["probe"] == name]
        ax.plot(rows["time"].to_numpy(dtype=float), rows["value"].to_numpy(dtype=float), marker="o", ms=3,
                label=str(name))
    ax.set_xlabel(time_label(time_origin))
    ax.set_ylabel("field value")
    title = "Probe histories" + (f" (first {limit} of {len(names)})" if len(names) > limit else "")
    ax.set_title(title)
    if names:
        legend_outside(ax, ncol=2 if len(names[:limit]) > 6 else 1)
    return figure


def plot_line_profiles(lines, *, steps=None, max_lines: int = 4, max_steps: int = 6, time_origin: str | None = None):
    """The field along each line at chosen steps, one panel per line.

    Parameters
    ----------
    lines : DataFrame
        The table of lines.csv (``step``, ``time``, ``line``, ``distance``, ``value``).
    steps : sequence of int, optional
        Steps to draw (default: up to ``max_steps`` evenly chosen).
    """
    names = list(dict.fromkeys(lines["line"]))[:max_lines]
    all_steps = np.unique(lines["step"].to_numpy())
    if steps is None:
        pick = np.unique(np.linspace(0, len(all_steps) - 1, min(max_steps, len(all_steps))).round().astype(int))
        steps = all_steps[pick] if len(all_steps) else []
    figure = new_figure(4.2 * len(names) if names else 6.4, 3.6)
    axes = figure.subplots(1, max(1, len(names)), squeeze=False)[0]
    for ax, name in zip(axes, names):
        rows = lines[lines["line"] == name]
        for step in steps:
            one = rows[rows["step"] == step]
            if not len(one):
                continue
            ax.plot(one["distance"].to_numpy(dtype=float), one["value"].to_numpy(dtype=float),
                    label=time_words(float(one['time'].iloc[0]), time_origin))
        ax.set_xlabel(in_mesh_units("distance along the line"))
        ax.set_ylabel("field value")
        ax.set_title(f"line {name}")
    if names:
        legend_outside(axes[0])
    return figure


def plot_validation_overlay(table, summary=None, *, time_origin: str | None = None):
    """Simulated against measured values, with the stated uncertainty as error bars.

    Parameters
    ----------
    table : DataFrame
        The table of validation.csv (``measured``, ``simulated``, ``uncertainty``, ``time``).
    summary : DataFrame, optional
        validation_summary.csv; its overall row is written in the title.
    """
    figure = new_figure(5.2, 4.6)
    ax = figure.add_subplot()
    measured = table["measured"].to_numpy(dtype=float)
    simulated = table["simulated"].to_numpy(dtype=float)
    unc = table["uncertainty"].to_numpy(dtype=float)
    times = table["time"].to_numpy(dtype=float)
    ok = np.isfinite(simulated)
    err = np.where(np.isfinite(unc), unc, 0.0)
    if ok.any():
        points = ax.scatter(measured[ok], simulated[ok], c=times[ok], s=16, cmap="viridis", zorder=3)
        if np.isfinite(unc[ok]).any():
            ax.errorbar(measured[ok], simulated[ok], xerr=err[ok], fmt="none", ecolor="0.6", lw=0.8, zorder=2)
        if len(np.unique(times[ok])) > 1:
            figure.colorbar(points, ax=ax, label=time_label(time_origin))
        lo = float(min(measured[ok].min(), simulated[ok].min()))
        hi = float(max(measured[ok].max(), simulated[ok].max()))
        ax.plot([lo, hi], [lo, hi], color="k", lw=0.8, ls="--", label="simulated = measured")
        legend_outside(ax)
    ax.set_xlabel("measured")
    ax.set_ylabel("simulated")
    title = "Simulation against measurement"
    if summary is not None and len(summary):
        overall = summary.iloc[-1]
        title += f"\nRMS error {overall['rms_error']:.3g}, bias {overall['bias']:.3g}"
        missing = int(overall.get("not_compared", 0) or 0)
        if missing:  # values the run gives no simulated value for: not in the figures
            title += f"; {missing} of {missing + int(overall['points'])} values not compared"
    ax.set_title(title)
    return figure
