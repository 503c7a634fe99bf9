"""The phase diagram of a mixture model: a CSV table and a PNG, written atomically into a new folder."""

from __future__ import annotations

import os

import numpy as np

from ..errors import OutputError
from ._canvas import new_figure
from ._files import (atomic_save_figure, atomic_write_csv, atomic_write_json,
                     mark_complete, output_transaction, prepare_output_folder)

__all__ = ["write_phase_diagram", "phase_diagram_figure"]


def phase_diagram_figure(columns: dict, record: dict):
    """Binodal (solid) and spinodal (dashed) against temperature, critical points marked, the ends of any
    other two-phase region as dots."""
    figure = new_figure(5.6, 4.2)
    ax = figure.add_subplot()
    t = columns["temperature"]
    for name, style in (("binodal", "-"), ("spinodal", "--")):
        for side in ("lean", "rich"):
            ax.plot(columns[f"{name}_{side}"], t, style, color="C0" if name == "binodal" else "C1",
                    label=name if side == "lean" else None)
    others = record.get("other_two_phase_regions", [])
    if others:  # a second region beside the widest at some temperatures: its ends as dots
        ax.plot([r["lean"] for r in others] + [r["rich"] for r in others], [r["temperature"] for r in others] * 2,
                ".", color="C0", markersize=3, label="binodal (another region)")
    for point in record.get("critical_points", []):
        ax.plot([point["composition"]], [point["temperature"]], "o", color="C3",
                label=f"{point['kind']} {point['temperature']:.1f} K")
    component = record.get("component") or "component"
    ax.set_xlabel(f"mole fraction of {component}")
    ax.set_ylabel("temperature (K)")
    ax.set_xlim(-0.02, 1.02)  # ends at 0.9999 stay in sight
    ax.set_ylim(float(np.min(t)), float(np.max(t)))
    ax.set_title(f"phase diagram ({record.get('kind_of_model', '')})")
    ax.legend(loc="best", fontsize="small")
    return figure


def write_phase_diagram(out, columns: dict, record: dict, *, overwrite: bool = False) -> list:
    """Write ``phase_diagram.csv``, ``phase_diagram.png`` and ``phase_diagram.json`` into ``out``.

    Parameters
    ----------
    out : str
        A new output folder (an existing one only with ``overwrite``, as ``measure``).
    columns : dict of ndarray
        ``temperature, binodal_lean, binodal_rich, spinodal_lean, spinodal_rich``.
    record : dict
        Plain values: model, range, critical points, findings.

    Returns
    -------
    list of str : the files written
    """
    import pandas as pd

    if os.path.isdir(out) and os.listdir(out) and not overwrite:
        raise OutputError("output folder exists", where=out, fix="give --overwrite to replace it, or another folder")
    with output_transaction(out):
        prepare_output_folder(out, overwrite=overwrite)
        files = [os.path.join(out, name) for name in ("phase_diagram.csv", "phase_diagram.png",
                                                       "phase_diagram.json")]
        atomic_write_csv(files[0], pd.DataFrame(columns))
        atomic_save_figure(files[1], phase_diagram_figure(columns, record))
        atomic_write_json(files[2], record)
        mark_complete(out)
    return files
