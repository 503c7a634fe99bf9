"""The output folder of a campaign: campaign.csv, the figures against the parameter, manifest.json."""

from __future__ import annotations

import os
import time

import numpy as np

from ._canvas import new_figure
from ._files import atomic_save_figure, atomic_write_csv, atomic_write_json, mark_complete
from ._measure_report import manifest as run_manifest

__all__ = ["write_campaign_report", "plot_campaign"]

_FIGURES = (("mixing_length", "mixing length"), ("mixing_index", "final mixing index"),
            ("phase_volume_drift", "final phase-volume drift"), ("interface_width", "final interface width"),
            ("droplet_count", "final droplet count"), ("D_num", "D_num"))


def plot_campaign(table, *, parameter: str = "parameter", unit: str = ""):
    """Each summary figure of the runs against the parameter, one panel per figure that has values.

    Returns
    -------
    matplotlib.figure.Figure or None
        None when no figure has a finite value.
    """
    shown = [(c, label) for c, label in _FIGURES
             if c in table and np.isfinite(np.asarray(table[c], dtype=float)).any()]
    if not shown:
        return None
    columns = min(3, len(shown))
    rows = -(-len(shown) // columns)
    figure = new_figure(3.6 * columns, 3.0 * rows)
    axes = np.atleast_1d(figure.subplots(rows, columns, squeeze=False)).ravel()
    x = np.asarray(table["parameter"], dtype=float)
    xlabel = f"{parameter} ({unit})" if unit else parameter
    for ax, (column, label) in zip(axes, shown):
        ax.plot(x, np.asarray(table[column], dtype=float), marker="o")
        ax.set_xlabel(xlabel)
        ax.set_title(label)
        ax.set_ylabel(label)
    for ax in axes[len(shown):]:
        ax.set_visible(False)
    return figure


def write_campaign_report(out, table, *, parameter: str, unit: str, version: str, started: float) -> None:
    """Write campaign.csv, campaign.png and manifest.json into ``out`` (each file atomically)."""
    out = os.fspath(out)
    atomic_write_csv(os.path.join(out, "campaign.csv"), table)
    written = ["campaign.csv"]
    figure = plot_campaign(table, parameter=parameter, unit=unit)
    if figure is not None:
        atomic_save_figure(os.path.join(out, "campaign.png"), figure)
        written.append("campaign.png")
    runs = [{"run": r, "parameter": p, "path": s, "folder": f} for r, p, s, f in
            zip(table["run"], table["parameter"], table["path"], table["folder"])]
    manifest = run_manifest("campaign", version=version, inputs=[],
                            fields={"parameter": parameter, "unit": unit, "runs": runs},
                            outputs=written, timings={"total_seconds": round(time.time() - started, 3)})
    atomic_write_json(os.path.join(out, "manifest.json"), manifest)
    mark_complete(out)
