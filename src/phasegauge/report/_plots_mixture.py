"""Plots of a partially miscible mixture: measured bulk compositions over the phase diagram, the gap
to the binodal over time, and a solute's distribution over time.

The run hands the steps table and the phase-diagram arrays; nothing is computed here.
"""

from __future__ import annotations

import numpy as np

from ._canvas import new_figure, time_label

__all__ = ["plot_compositions_on_diagram", "plot_equilibrium_gap", "plot_solute"]


def plot_compositions_on_diagram(steps, diagram: dict, *, time_origin: str | None = None):
    """Binodal (solid) and spinodal (dashed) against temperature, with each step's measured bulk
    compositions (filled: lean and rich) and mean composition (open), coloured by time.

    Parameters
    ----------
    steps : DataFrame
        ``time, temperature, mean_composition, bulk_composition_lean, bulk_composition_rich``.
    diagram : dict
        ``temperature, binodal_lean, binodal_rich, spinodal_lean, spinodal_rich`` arrays and
        ``component``.
    """
    figure = new_figure(6.0, 4.4)
    ax = figure.add_subplot()
    t = np.asarray(diagram["temperature"], dtype=float)
    for name, style, colour in (("binodal", "-", "0.2"), ("spinodal", "--", "0.55")):
        for side in ("lean", "rich"):
            ax.plot(diagram[f"{name}_{side}"], t, style, color=colour, label=name if side == "lean" else None)
    time = steps["time"].to_numpy(dtype=float)
    temperature = steps["temperature"].to_numpy(dtype=float)
    span = (float(np.nanmin(time)), float(np.nanmax(time))) if len(time) else (0.0, 1.0)
    norm = dict(vmin=span[0], vmax=span[1] if span[1] > span[0] else span[0] + 1.0, cmap="viridis")
    for column in ("bulk_composition_lean", "bulk_composition_rich"):
        shown = ax.scatter(steps[column].to_numpy(dtype=float), temperature, c=time, marker="o", s=26,
                           edgecolors="0.2", linewidths=0.5,
                           label="bulk compositions" if column.endswith("lean") else None, **norm)
    ax.scatter(steps["mean_composition"].to_numpy(dtype=float), temperature, c=time, marker="x", s=26,
               label="mean composition", **norm)
    if len(time):
        figure.colorbar(shown, ax=ax, label=time_label(time_origin))
    ax.set_xlim(0.0, 1.0)
    ax.set_ylim(float(np.min(t)), float(np.max(t)))
    ax.set_xlabel(f"mole fraction of {diagram.get('component', 'the component')}")
    ax.set_ylabel("temperature (K)")
    ax.legend(loc="best", fontsize="small")
    return figure


def plot_equilibrium_gap(steps, *, tolerance: float, time_origin: str | None = None):
    """The larger distance of the bulk compositions from the binodal over time, with the tolerance
    and, where known, the Gibbs-Thomson shift expected for the drops."""
    figure = new_figure(6.0, 3.6)
    ax = figure.add_subplot()
    time = steps["time"].to_numpy(dtype=float)
    ax.plot(time, steps["equilibrium_gap"].to_numpy(dtype=float), "o-", label="equilibrium gap")
    if "gibbs_thomson_shift" in steps and np.isfinite(steps["gibbs_thomson_shift"].to_numpy(dtype=float)).any():
        ax.plot(time, steps["gibbs_thomson_shift"].to_numpy(dtype=float), "s--", label="Gibbs-Thomson shift")
    ax.axhline(tolerance, color="0.4", linestyle=":", label=f"tolerance {tolerance:g}")
    ax.set_yscale("log")
    ax.set_xlabel(time_label(time_origin))
    ax.set_ylabel("gap to the binodal (mole fraction)")
    ax.legend(loc="best", fontsize="small")
    return figure


def plot_solute(steps, *, time_origin: str | None = None):
    """The solute's bulk composition in each phase, the partition coefficient and the extraction
    progress over time."""
    figure = new_figure(6.4, 5.0)
    top, bottom = figure.subplots(2, 1, sharex=True)
    time = steps["time"].to_numpy(dtype=float)
    top.plot(time, steps["solute_lean"].to_numpy(dtype=float), "o-", label="lean phase bulk")
    top.plot(time, steps["solute_rich"].to_numpy(dtype=float), "s-", label="rich phase bulk")
    top.set_ylabel("solute mole fraction")
    top.legend(loc="best", fontsize="small")
    bottom.plot(time, steps["extraction_progress"].to_numpy(dtype=float), "o-", color="C2",
                label="extraction progress")
    bottom.set_ylabel("share in receiving phase")
    right = bottom.twinx()
    right.plot(time, steps["partition_coefficient"].to_numpy(dtype=float), "s--", color="C3",
               label="partition coefficient")
    right.set_ylabel("partition coefficient K")
    bottom.set_xlabel(time_label(time_origin))
    lines = bottom.get_lines() + right.get_lines()
    bottom.legend(lines, [line.get_label() for line in lines], loc="best", fontsize="small")
    return figure
