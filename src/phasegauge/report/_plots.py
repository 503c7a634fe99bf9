"""The plots of the measure report, built from the result tables.

Each analysis owns its plot functions (``_plots_interface``, ``_plots_droplets``,
``_plots_mixing``); this module picks the ones that have data for a run.
"""

from __future__ import annotations

import functools

import numpy as np

from ._canvas import time_words

__all__ = ["measure_figures", "measure_figure_makers", "import_drawing"]


def _has(frame, column) -> bool:
    return frame is not None and column in frame and np.isfinite(
        np.asarray(frame[column], dtype=float)).any()


def measure_figures(result, snapshots: dict | None = None, *, time_origin: str | None = None) -> list:
    """(file stem, caption, matplotlib Figure) for every plot that has data.

    ``result`` is the run's tables (a MeasureResult); ``snapshots`` the interface arrays of chosen
    steps (:func:`phasegauge.run._report_data.interface_snapshots`), or None.
    """
    return [(stem, caption, make()) for stem, caption, make in
            measure_figure_makers(result, snapshots, time_origin=time_origin)]


def measure_figure_makers(result, snapshots: dict | None = None, *, time_origin: str | None = None) -> list:
    """(file stem, caption, maker) for every plot that has data; ``maker()`` draws the Figure.

    Nothing is drawn (nor matplotlib imported) until a maker is called, so the figures can be made
    in any order and in any process that has the result. Arguments as :func:`measure_figures`;
    ``time_origin`` is the series' (``index``, a series that stores no times, plots against the step number).
    """
    steps = result.steps
    when = {"time_origin": time_origin}
    figures = []
    if _has(steps, "phase_volume_drift") and len(steps) > 1:
        figures.append(("phase_volume_drift", "Phase-volume drift relative to the first step",
                        _maker("_plots_mixing", "plot_phase_volume_drift", steps, **when)))
    if _has(steps, "interface_width") and len(steps) > 1:
        figures.append(("interface_width", "Interface width (5-95 %) in mesh units and in cells",
                        _maker("_plots_interface", "plot_interface_width", steps, **when)))
    if _has(steps, "coarsening_length") and len(steps) > 1:
        fit = next((f.figures for f in getattr(result, "findings", []) if f.kind == "coarsening"), None)
        axes = "against the step number (no times stored)" if time_origin == "index" else "over time, log-log"
        figures.append(("coarsening", f"Characteristic lengths (interface spacing, structure factor) {axes}",
                        _maker("_plots_interface", "plot_coarsening", steps, fit, **when)))
    if snapshots:
        figures.append(("interface_snapshots", "Interface (c = level) at chosen steps",
                        _maker("_plots_interface", "plot_interface_snapshots", snapshots["steps"],
                               bounds=snapshots["bounds"], axis_names=snapshots["axis_names"],
                               times=snapshots["times"], **when)))
    if "droplet_count" in steps and len(steps) > 1:
        figures.append(("droplet_count", "Droplet count over time with breakup and coalescence events",
                        _maker("_plots_droplets", "plot_droplet_count", steps, result.events, **when)))
    if result.droplets is not None and len(result.droplets) and len(steps) > 1:
        figures.append(("droplet_sizes", "Droplet equivalent diameters over time",
                        _maker("_plots_droplets", "plot_size_distribution", result.droplets, **when)))
    if _has(steps, "mixing_index") and len(steps) > 1:
        figures.append(("mixing_index", "Volume-weighted mixing index over time",
                        _maker("_plots_mixing", "plot_mixing_index", steps, **when)))
    profiles = result.profiles
    if profiles is not None and len(profiles):
        by_step = {time_words(t, time_origin): frame.drop(columns=["step", "time"])
                   for t, frame in profiles.groupby("time", sort=True)}
        if len(by_step) > 8:
            keys = list(by_step)
            pick = np.unique(np.linspace(0, len(keys) - 1, 8).round().astype(int))
            by_step = {keys[i]: by_step[keys[i]] for i in pick}
        weighting = "flow" if _has(profiles, "mixing_index_flow") else "area"
        figures.append(("mixing_profile", "Mixing index along the channel (cross sections)",
                        _maker("_plots_mixing", "plot_mixing_profile", by_step, weighting=weighting,
                               target=result.options.mixing_target,
                               axis_label=_position_label(result.options))))
    figures += _probe_figures(result, when)
    figures += _mixture_figures(result, when)
    return figures


def _position_label(options) -> str:
    """The x label of the mixing profile: the position along the section axis, in mesh units."""
    from ._canvas import in_mesh_units

    axis = getattr(options, "section_axis", None)
    return in_mesh_units(f"position along {axis}" if axis else "position along the axis")


#: the plot modules a measure report usually draws with (matplotlib and its Agg canvas come with them)
_USUAL_DRAWERS = ("_canvas", "_plots_interface", "_plots_surface", "_plots_droplets", "_plots_mixing")


def import_drawing() -> None:
    """Import matplotlib, its Agg canvas and the usual plot modules, without drawing anything.

    A run calls this on a background thread while its steps are measured, so the report does not
    wait for the import (about 0.4 s) after the last step.
    """
    from importlib import import_module

    import_module("matplotlib.backends.backend_agg")
    import_module("matplotlib.figure")
    for module in _USUAL_DRAWERS:
        import_module(f".{module}", __package__)


def _maker(module: str, function: str, *args, **kwargs):
    """A maker of one figure: calls ``function`` of the plot module ``module`` of this package with the
    arguments, importing the module (and matplotlib with it) only then: a run without plots never
    imports matplotlib."""
    return functools.partial(_make, module, function, args, kwargs)


def _make(module: str, function: str, args: tuple, kwargs: dict):
    from importlib import import_module

    return getattr(import_module(f".{module}", __package__), function)(*args, **kwargs)


def _mixture_figures(result, when: dict) -> list:
    """Bulk compositions over the phase diagram, the gap to the binodal and the solute, where the run has them."""
    steps, diagram = result.steps, getattr(result, "phase_diagram", None)
    figures = []
    if diagram is None or "mean_composition" not in steps:
        return figures
    figures.append(("phase_compositions", "Measured bulk compositions over the phase diagram, step by step",
                    _maker("_plots_mixture", "plot_compositions_on_diagram", steps, diagram, **when)))
    if _has(steps, "equilibrium_gap"):
        figures.append(("equilibrium_gap", "Gap between the bulk compositions and the binodal over time",
                        _maker("_plots_mixture", "plot_equilibrium_gap", steps,
                               tolerance=result.options.equilibrium_tolerance, **when)))
    if _has(steps, "extraction_progress"):
        figures.append(("solute_distribution", "Solute in each phase, partition coefficient and extraction progress",
                        _maker("_plots_mixture", "plot_solute", steps, **when)))
    return figures


def _probe_figures(result, when: dict) -> list:
    """Probe histories, line profiles and the measured overlay, where the run has them."""
    figures = []
    probes, lines = getattr(result, "probes", None), getattr(result, "lines", None)
    validation = getattr(result, "validation", None)
    if probes is not None and len(probes):
        figures.append(("probe_histories", "Field at each probe over time",
                        _maker("_plots_probes", "plot_probe_histories", probes, **when)))
    if lines is not None and len(lines):
        figures.append(("line_profiles", "Field along each line at chosen steps",
                        _maker("_plots_probes", "plot_line_profiles", lines, **when)))
    if validation is not None and len(validation):
        figures.append(("validation_overlay", "Simulated against measured values",
                        _maker("_plots_probes", "plot_validation_overlay", validation,
                               getattr(result, "validation_summary", None), **when)))
    return figures
