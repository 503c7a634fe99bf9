"""The output folder of a campaign: campaign.csv, the figures against the parameter, manifest.json."""

from __future__ import annotations

import os
import time
from types import MappingProxyType

import numpy as np

from ._canvas import new_figure, shared_time_origin, with_units
from ._files import atomic_save_figure, atomic_write_csv, atomic_write_json, mark_complete
from ._measure_report import manifest as run_manifest

__all__ = ["write_campaign_report", "plot_campaign", "mixing_length_statuses"]

_FIGURES = (("mixing_length", "mixing length"), ("mixing_index", "final mixing index"),
            ("phase_volume_drift", "final phase-volume drift"), ("interface_width", "final interface width"),
            ("droplet_count", "final droplet count"), ("D_num", "D_num"))

#: the y label of each panel where it is more than the title (with_units adds the unit where there is one)
_Y_LABELS = MappingProxyType({"phase_volume_drift": "final phase-volume drift (relative)",
                              "D_num": "numerical diffusivity D_num"})


def plot_campaign(table, *, parameter: str = "parameter", unit: str = "", sections: bool = False,
                  time_origins=()):
    """Each summary figure of the runs against the parameter, one panel per figure that has values.

    Every panel spans every run's parameter. The drift panel draws, for a run with open boundaries,
    the drift the boundary flow leaves unexplained (``phase_volume_drift_closed``), and its title says
    so. Each y label carries its column's unit where it has one (:func:`._canvas.with_units`: lengths in
    mesh units, ``D_num`` in mesh units²/run's time units, per step where the runs' ``time_origins``
    are all ``index``: they store no times). ``D_num`` carries its standard error as an
    error bar, hollow where the run's audit finds it not distinguishable from 0 (``D_num_significant``
    False). The mixing-length panel draws each run by its ``mixing_length_status``: a line through the
    lengths reached (broken at a run between them that did not reach the target); a length met at the first
    section (``upper_bound``) as a bound, a downward triangle at that section's distance, not joined to the
    line; and with ``sections`` (the runs measured
    cross-sections) a run that did not reach the target within the domain (``not_reached``) as a hollow
    upward triangle at the top of the panel, a length beyond it. A run whose mixing length is undefined
    (its inflow refused) is drawn at no value: the legend names it. A table without the status column
    (from an older run) takes a finite length for reached and NaN for not reached.

    Returns
    -------
    matplotlib.figure.Figure or None
        None when no figure has a finite value.
    """
    values = {c: _drift(table) if c == "phase_volume_drift" else _column(table, c) for c, _ in _FIGURES}
    shown = [(c, label) for c, label in _FIGURES
             if np.isfinite(values[c]).any() or (c == "mixing_length" and sections and c in table)]
    if not shown:
        return None
    columns = min(3, len(shown))
    rows = -(-len(shown) // columns)
    figure = new_figure(3.6 * columns, 3.0 * rows)
    axes = np.atleast_1d(figure.subplots(rows, columns, squeeze=False)).ravel()
    x = np.asarray(table["parameter"], dtype=float)
    xlabel = f"{parameter} ({unit})" if unit else parameter
    for ax, (column, label) in zip(axes, shown):
        y = values[column]
        if column == "D_num":
            _plot_significance(ax, table, x, y)
        elif column == "mixing_length":
            _plot_mixing_length(ax, table, x, y, sections)
        else:
            ax.plot(x, y, marker="o")
        ax.set_xlim(*_span(x))
        ax.set_xlabel(xlabel)
        ax.set_title(_drift_title(table) if column == "phase_volume_drift" else label)
        ax.set_ylabel(with_units(_Y_LABELS.get(column, label), column, shared_time_origin(time_origins)))
    for ax in axes[len(shown):]:
        ax.set_visible(False)
    return figure


def _column(table, column: str) -> np.ndarray:
    """A column of the table as floats (NaN where it is missing)."""
    if column not in table:
        return np.full(len(table), np.nan)
    return np.asarray(table[column], dtype=float)


def _flag(table, column: str) -> np.ndarray:
    """A True/False column of the table as booleans (False where it is empty or missing)."""
    if column not in table:
        return np.zeros(len(table), dtype=bool)
    return np.array([str(value) == "True" for value in table[column]], dtype=bool)


def _drift(table) -> np.ndarray:
    """Each run's final drift: the unexplained one (``phase_volume_drift_closed``) where the run has open
    boundaries, else ``phase_volume_drift``."""
    return np.where(_flag(table, "open_boundary"), _column(table, "phase_volume_drift_closed"),
                    _column(table, "phase_volume_drift"))


def _drift_title(table) -> str:
    opened = _flag(table, "open_boundary")
    if opened.all():
        return "final phase-volume drift,\nboundary flow added back"
    if opened.any():
        return "final phase-volume drift\n(open runs: boundary flow added back)"
    return "final phase-volume drift"


def _plot_significance(ax, table, x, y) -> None:
    """D_num with its standard error; filled where significant, hollow where not distinguishable from 0."""
    stderr = _column(table, "D_num_stderr")
    significant = _flag(table, "D_num_significant")
    line, = ax.plot(x, y, linestyle="-")
    color = line.get_color()
    ax.errorbar(x, y, yerr=np.where(np.isfinite(stderr), stderr, 0.0), fmt="none", ecolor=color, capsize=3)
    for chosen, face, name in ((significant, color, "significant"), (~significant, "none", "not significant")):
        if chosen.any():
            ax.plot(x[chosen], y[chosen], linestyle="none", marker="o", markerfacecolor=face,
                    markeredgecolor=color, label=name)
    ax.axhline(0.0, color="0.6", linewidth=0.8)
    if (~significant).any():
        ax.legend(fontsize="small")


def mixing_length_statuses(table) -> np.ndarray:
    """Each run's ``mixing_length_status`` (``reached``, ``upper_bound``, ``not_reached``, ``undefined``);
    where the table has none (a run measured before the column was written, or an empty cell), ``reached``
    for a finite length and ``not_reached`` for NaN."""
    length = _column(table, "mixing_length")
    guess = np.where(np.isfinite(length), "reached", "not_reached").astype(object)
    if "mixing_length_status" not in table:
        return guess
    given = [value if isinstance(value, str) and value else None for value in table["mixing_length_status"]]
    return np.array([g if g is not None else d for g, d in zip(given, guess)], dtype=object)


def _plot_mixing_length(ax, table, x, y, sections: bool) -> None:
    """The mixing length of each run by its status (see :func:`plot_campaign`); a legend where any run's
    length is not simply reached."""
    status = mixing_length_statuses(table)
    reached = (status == "reached") & np.isfinite(y)
    bound = (status == "upper_bound") & np.isfinite(y)
    missing = (status == "not_reached") if sections else np.zeros(len(y), dtype=bool)
    undefined = status == "undefined"
    # the lengths reached, joined only between runs next to each other in the parameter: a run between them
    # whose length is not reached breaks the line (a NaN); no legend entry where no run reached the target
    line_x, line_y = [], []
    for i in np.argsort(x, kind="stable"):
        if reached[i]:
            line_x.append(x[i])
            line_y.append(y[i])
        elif line_x and np.isfinite(line_x[-1]):
            line_x.append(np.nan)
            line_y.append(np.nan)
    while line_x and not np.isfinite(line_x[-1]):
        line_x.pop()
        line_y.pop()
    line, = ax.plot(line_x, line_y, marker="o", label="reached" if reached.any() else "_nolegend_")
    color = line.get_color()
    if bound.any():
        ax.plot(x[bound], y[bound], linestyle="none", marker="v", markersize=9, color=color,
                label="upper bound (mixed by the first section)")
    if missing.any():
        drawn = y[reached | bound]
        top = 1.1 * float(drawn.max()) if len(drawn) and drawn.max() > 0 else 1.0
        ax.plot(x[missing], np.full(int(missing.sum()), top), linestyle="none", marker="^", markersize=9,
                markerfacecolor="none", markeredgecolor=color, label="not reached")
        ax.set_ylim(top=1.15 * top)
    if undefined.any():  # no value to draw: the legend names the runs
        runs = [str(r) for r in np.asarray(table["run"])[undefined]] if "run" in table else \
            [f"{p:g}" for p in x[undefined]]
        ax.plot([], [], linestyle="none", label="undefined (inflow refused): " + ", ".join(runs))
    if bound.any() or missing.any() or undefined.any():
        ax.set_ylim(bottom=0.0)
        ax.legend(fontsize="small")


def _span(x: np.ndarray) -> tuple:
    """x-limits that show every parameter, with a margin."""
    finite = x[np.isfinite(x)]
    low, high = float(finite.min()), float(finite.max())
    pad = 0.05 * (high - low) if high > low else max(0.5 * abs(low), 0.5)
    return low - pad, high + pad


def write_campaign_report(out, table, *, parameter: str, unit: str, version: str, started: float,
                          warnings=(), sections: bool = False, time_origins=()) -> None:
    """Write campaign.csv, campaign.png and manifest.json into ``out`` (each file atomically).

    ``warnings`` are the campaign's own (one line each), kept in the manifest; ``sections`` and
    ``time_origins`` (each run's) as for :func:`plot_campaign`.
    """
    out = os.fspath(out)
    atomic_write_csv(os.path.join(out, "campaign.csv"), table)
    written = ["campaign.csv"]
    figure = plot_campaign(table, parameter=parameter, unit=unit, sections=sections, time_origins=time_origins)
    if figure is not None:
        atomic_save_figure(os.path.join(out, "campaign.png"), figure)
        written.append("campaign.png")
    runs = [{"run": r, "parameter": p, "path": s, "folder": f} for r, p, s, f in
            zip(table["run"], table["parameter"], table["path"], table["folder"])]
    manifest = run_manifest("campaign", version=version, inputs=[],
                            fields={"parameter": parameter, "unit": unit, "runs": runs, "warnings": list(warnings)},
                            outputs=written, timings={"total_seconds": round(time.time() - started, 3)})
    atomic_write_json(os.path.join(out, "manifest.json"), manifest)
    mark_complete(out)
