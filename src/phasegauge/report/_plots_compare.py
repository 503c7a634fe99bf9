"""Figures of a comparison between two runs (matplotlib, Agg canvas).

Every function returns a :class:`matplotlib.figure.Figure`; the caller saves
it. Nothing here computes: the run hands over tables and, for the overlays,
the arrays to draw (the mismatch region and both interfaces on one plane,
built by :func:`phasegauge.run._compare_steps.overlay_arrays`).
"""

from __future__ import annotations

import numpy as np

from ..errors import OptionError
from ._canvas import in_mesh_units, legend_outside, new_figure, time_label, with_units

__all__ = ["plot_interface_overlay", "plot_metric_curves", "plot_metric_differences",
           "plot_shape_history", "plot_reference_check"]


def plot_interface_overlay(mismatch, extent, segments_a, segments_b, *, labels=("A", "B"),
                           axis_names=("x", "y"), level: float = 0.5, title: str = ""):
    """Both runs' interfaces ``c = level`` overlaid, with the mismatch region shaded.

    Parameters
    ----------
    mismatch : ndarray of bool, shape (n_x, n_y)
        True on the samples of the plane where exactly one run has its phase.
    extent : tuple of float
        ``(x0, x1, y0, y1)``: the plane the samples cover.
    segments_a, segments_b : ndarray of shape (n, 2, 2)
        Each run's interface as line segments, in length units.
    labels : pair of str
    axis_names : pair of str
        Names of the plane's axes.
    level : float
        The drawn level (for the default title).
    title : str
        E.g. the time shown.

    Returns
    -------
    matplotlib.figure.Figure
    """
    shade = np.where(np.asarray(mismatch, dtype=bool), 1.0, np.nan)
    x0, x1, y0, y1 = extent
    fig = new_figure(6.0, 5.5)
    ax = fig.add_subplot(1, 1, 1)
    ax.imshow(shade.T, origin="lower", extent=(x0, x1, y0, y1), cmap="Greys", vmin=0, vmax=2.5,
              interpolation="nearest", aspect="equal")
    for seg, label, colour, style in ((segments_a, labels[0], "tab:blue", "-"),
                                      (segments_b, labels[1], "tab:red", "--")):
        seg = np.asarray(seg, dtype=float).reshape(-1, 2, 2)
        if len(seg):
            gap = np.full(len(seg), np.nan)
            xs = np.column_stack([seg[:, 0, 0], seg[:, 1, 0], gap]).ravel()
            ys = np.column_stack([seg[:, 0, 1], seg[:, 1, 1], gap]).ravel()
            ax.plot(xs, ys, style, color=colour, lw=1.4, label=label)
        else:
            ax.plot([], [], style, color=colour, label=f"{label} (no interface)")
    ax.set_xlim(x0, x1)
    ax.set_ylim(y0, y1)
    ax.set_xlabel(in_mesh_units(axis_names[0]))
    ax.set_ylabel(in_mesh_units(axis_names[1]))
    legend_outside(ax)
    heading = title or f"interfaces c = {level:g}"
    ax.set_title(heading + " (shaded: phases differ)", fontsize=10)
    return fig


def _metrics_of(comparison, metrics) -> list[str]:
    available = [c[:-2] for c in comparison.columns if c.endswith("_a") and f"{c[:-2]}_b" in comparison.columns
                 and c not in ("step_a", "time_a")]
    if metrics is None:
        return available
    missing = [m for m in metrics if m not in available]
    if missing:
        raise OptionError(f"metrics {missing} are not in the comparison table",
                          fix=f"choose from {', '.join(available)}")
    return list(metrics)


def _panels(n: int):
    """A figure of ``n`` panels, at most 3 a row, and its axes."""
    cols = min(3, max(n, 1))
    rows = int(np.ceil(max(n, 1) / cols))
    fig = new_figure(4.2 * cols, 3.0 * rows)
    return fig, [fig.add_subplot(rows, cols, i + 1) for i in range(n)]


def plot_metric_curves(comparison, *, metrics=None, labels=("A", "B"), time_origin: str | None = None):
    """Each metric of both runs over time (one panel per metric).

    Parameters
    ----------
    comparison : DataFrame
        From :func:`phasegauge.analysis.compare.compare_metrics`.
    metrics : list of str, optional
        Metric names (without suffix); default all.
    labels : pair of str

    Returns
    -------
    matplotlib.figure.Figure
    """
    names = _metrics_of(comparison, metrics)
    fig, panels = _panels(len(names))
    t = comparison["time"].to_numpy(dtype=float)
    for ax, name in zip(panels, names):
        ax.plot(t, comparison[f"{name}_a"], "-o", ms=2.5, color="tab:blue", label=labels[0])
        ax.plot(t, comparison[f"{name}_b"], "--s", ms=2.5, color="tab:red", label=labels[1])
        ax.set_title(_words(name), fontsize=9)
        ax.set_xlabel(time_label(time_origin))
        ax.set_ylabel(with_units(_words(name), name), fontsize=8)
        legend_outside(ax)
    return fig


def plot_metric_differences(comparison, *, metrics=None, relative: bool = True, time_origin: str | None = None):
    """Differences A - B of each metric over time (relative to |B| by default).

    Returns
    -------
    matplotlib.figure.Figure
    """
    names = _metrics_of(comparison, metrics)
    suffix = "_rel_diff" if relative else "_diff"
    fig, panels = _panels(len(names))
    t = comparison["time"].to_numpy(dtype=float)
    for ax, name in zip(panels, names):
        ax.axhline(0.0, color="0.6", lw=0.8)
        ax.plot(t, comparison[f"{name}{suffix}"], "-o", ms=2.5, color="tab:purple")
        ax.set_title(f"{_words(name)}: {'(A - B) / |B|' if relative else 'A - B'}", fontsize=9)
        ax.set_ylabel("relative difference" if relative else "difference", fontsize=8)
        ax.set_xlabel(time_label(time_origin))
    return fig


def plot_shape_history(shapes, *, columns=("mismatch_volume", "dice", "hausdorff", "mean_distance"),
                       time_origin: str | None = None):
    """Shape metrics over the paired times (one panel each).

    Parameters
    ----------
    shapes : DataFrame
        One row per paired time with ``time`` and the shape metric columns.

    Returns
    -------
    matplotlib.figure.Figure
    """
    cols = [c for c in columns if c in shapes.columns]
    if not cols:
        raise OptionError(f"none of {list(columns)} is in the shape table", fix="pass comparison.csv")
    fig, panels = _panels(len(cols))
    t = shapes["time"].to_numpy(dtype=float)
    for ax, name in zip(panels, cols):
        ax.plot(t, shapes[name], "-o", ms=2.5, color="tab:green")
        ax.set_title(_words(name), fontsize=9)
        ax.set_xlabel(time_label(time_origin))
        ax.set_ylabel(with_units(_words(name), name), fontsize=8)
    return fig


def plot_reference_check(run, checks, *, columns=None, time_origin: str | None = None):
    """A run's history with the reference bands of a check drawn on it.

    Parameters
    ----------
    run : DataFrame
        The checked run table (``time`` and the checked columns).
    checks : DataFrame
        From :func:`phasegauge.analysis.references.check_against_table`.
    columns : list of str, optional
        Columns to draw; default those the checks name.
    time_origin : str, optional
        The run's time origin: ``index`` where it stores no times (its times are step numbers), and the
        x axis says "step".

    Returns
    -------
    matplotlib.figure.Figure
    """
    named = [q.rpartition(":")[2] for q in checks["quantity"]]
    cols = list(dict.fromkeys(named)) if columns is None else list(columns)
    fig, panels = _panels(len(cols))
    for ax, col in zip(panels, cols):
        ax.plot(run["time"], run[col], "-", color="tab:blue", lw=1.2)
        for _, row in checks[[n == col for n in named]].iterrows():
            kind = row["quantity"].rpartition(":")[0]
            values = np.asarray(run["time" if kind.startswith("time_of_") else col], dtype=float)
            span = (np.nanmin(values), np.nanmax(values)) if np.isfinite(values).any() else (0.0, 0.0)
            colour = {"pass": "tab:green", "fail": "tab:red"}.get(row["verdict"], "tab:grey")  # grey: not applicable
            # a one-sided band (an infinite limit) is drawn to the run's extreme value
            low = row["reference_low"] if np.isfinite(row["reference_low"]) else min(span[0], row["reference"])
            high = row["reference_high"] if np.isfinite(row["reference_high"]) else max(span[1], row["reference"])
            if kind.startswith("time_of_"):
                ax.axvspan(low, high, color=colour, alpha=0.15)
            elif np.isfinite(row["time"]):
                ax.errorbar([row["time"]], [row["reference"]],
                            yerr=[[row["reference"] - low], [high - row["reference"]]],
                            fmt="o", color=colour, ms=4, capsize=3)
            else:
                ax.axhspan(low, high, color=colour, alpha=0.15)
        ax.set_title(_words(col), fontsize=9)
        ax.set_xlabel(time_label(time_origin))
        ax.set_ylabel(with_units(_words(col), col), fontsize=8)
    return fig


def _words(name: str) -> str:
    """A column name as words for a plot title (``mean_distance`` -> ``mean distance``)."""
    return str(name).replace(":", ": ").replace("_", " ")
