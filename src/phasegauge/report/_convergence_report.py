"""The output folder of a grid convergence study: convergence.csv, convergence.png, manifest.json."""

from __future__ import annotations

import os
import time

import numpy as np

from ._canvas import new_figure, time_label
from ._files import atomic_save_figure, atomic_write_csv, atomic_write_json, mark_complete
from ._measure_report import manifest as run_manifest

__all__ = ["write_convergence_report", "plot_convergence"]

#: quantities drawn first when the table has them
_DRAWN_FIRST = ("phase_volume", "interface_size", "interface_width", "mixing_index", "segregation_intensity",
                "total_droplet_volume")


def plot_convergence(table, *, quantities=None, limit: int = 5, time_origin: str | None = None):
    """Fine-grid GCI and apparent order over time, one curve per quantity.

    Parameters
    ----------
    table : DataFrame
        The convergence table (``quantity``, ``time``, ``gci_fine``, ``apparent_order``,
        ``oscillatory``, ``divergent``).
    quantities : sequence of str, optional
        Quantities to draw (default: the main ones the table holds, at most ``limit``).
    limit : int
    time_origin : str, optional
        The runs' time origin (:func:`._canvas.shared_time_origin`): ``index`` where they store no times,
        so the times are step numbers and the x axis says "step".

    Returns
    -------
    matplotlib.figure.Figure
    """
    present = list(dict.fromkeys(table["quantity"])) if len(table) else []
    if quantities is None:
        finite = [q for q in present if np.isfinite(table.loc[table["quantity"] == q, "gci_fine"]).any()]
        quantities = [q for q in _DRAWN_FIRST if q in finite] + [q for q in finite if q not in _DRAWN_FIRST]
        quantities = quantities[:limit]
    figure = new_figure(9.6, 3.8)
    left, right = figure.subplots(1, 2)
    for q in quantities:
        rows = table[table["quantity"] == q].sort_values("time")
        t = rows["time"].to_numpy(dtype=float)
        gci = 100 * rows["gci_fine"].to_numpy(dtype=float)
        line, = left.plot(t, gci, marker="o", ms=3, label=q)
        right.plot(t, rows["apparent_order"].to_numpy(dtype=float), marker="o", ms=3, color=line.get_color(),
                   label=q)
        osc = rows["oscillatory"].to_numpy(dtype=bool)
        if osc.any():
            left.plot(t[osc], gci[osc], ls="none", marker="x", ms=7, color=line.get_color())
    left.set_xlabel(time_label(time_origin))
    left.set_ylabel("fine-grid GCI (%)")
    if any(np.nanmin(100 * table.loc[table["quantity"] == q, "gci_fine"]) > 0 for q in quantities):
        left.set_yscale("log")
    left.set_title("Grid Convergence Index (x: oscillatory)")
    if "divergent" in table and table["divergent"].astype(bool).any():
        apart = list(dict.fromkeys(table.loc[table["divergent"].astype(bool), "quantity"]))
        figure.supxlabel(f"divergent (no order or GCI) at some times: {', '.join(apart[:4])}"
                         + (f" and {len(apart) - 4} more" if len(apart) > 4 else ""), fontsize="small")
    right.set_xlabel(time_label(time_origin))
    right.set_ylabel("apparent order p")
    right.set_title("Apparent order")
    if quantities:
        left.legend(fontsize="small")
    return figure


def write_convergence_report(out, table, *, sources: list, safety_factor: float, options, version: str,
                             started: float, notes: list = (), time_origin: str | None = None,
                             formal_order: float | None = None) -> None:
    """Write the outputs of a grid convergence study into ``out`` (each file atomically).

    Parameters
    ----------
    out : str or os.PathLike
        The output folder (prepared by the run).
    table : DataFrame
        The convergence table.
    sources : list of dict
        The three runs as records (mesh, path, kind, cells, cell size...).
    safety_factor : float
    options : dict or None
        The measure options of the runs measured here.
    version : str
    started : float
        Start of the study (seconds since the epoch).
    notes : list of str
        The study's warnings (divergent quantities, times left out of the pairing), kept in the
        manifest under ``warnings``.
    time_origin : str, optional
        As for :func:`plot_convergence`.
    formal_order : float, optional
        The scheme's order of accuracy the asymptotic ratio was taken with (None: not given).
    """
    out = os.fspath(out)
    atomic_write_csv(os.path.join(out, "convergence.csv"), table)
    written = ["convergence.csv"]
    if len(table):
        figure = plot_convergence(table, time_origin=time_origin)
        atomic_save_figure(os.path.join(out, "convergence.png"), figure)
        written.append("convergence.png")
    manifest = run_manifest("convergence", version=version, inputs=[],
                            fields={"meshes": list(sources), "safety_factor": safety_factor,
                                    "formal_order": formal_order, "options": options,
                                    "warnings": list(notes)},
                            outputs=written, timings={"total_seconds": round(time.time() - started, 3)})
    atomic_write_json(os.path.join(out, "manifest.json"), manifest)
    mark_complete(out)
