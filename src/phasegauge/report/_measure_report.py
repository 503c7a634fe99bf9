"""The output folder of a measure run: CSV tables, PNG plots, report.html, manifest.json."""

from __future__ import annotations

import os
import platform
import time
from types import MappingProxyType

import numpy as np

from . import _plots
from ._drawing import save_figure_makers
from ._files import atomic_write_csv, atomic_write_json, atomic_write_text, mark_complete
from ._html import Page

__all__ = ["write_measure_report", "measure_figures", "manifest", "verdict_lines"]

CAUTION = ("These figures describe the simulation, not the physical process. Design decisions rest on "
           "validated models, experiments and licensed engineering judgement under local codes.")


def manifest(command: str, *, version: str, inputs: list, fields: dict, outputs: list, timings: dict) -> dict:
    """The manifest of a run: tool, version, command, time, ``fields``, inputs, outputs, timings, machine."""
    return {"tool": "phasegauge", "version": version, "command": command,
            "created": time.strftime("%Y-%m-%dT%H:%M:%S%z"), **fields, "inputs": list(inputs),
            "outputs": outputs, "timings": timings,
            "machine": {"python": platform.python_version(), "platform": platform.platform()}}


#: what the report calls each standing check that was not made
CHECK_NAMES = MappingProxyType({"interface_widening": "interface widening",
                                "phase_volume_drift": "phase-volume conservation",
                                "indicator_bounds": "indicator bounds", "interface_resolution": "interface resolution",
                                "droplet_resolution": "droplet resolution"})


def verdict_lines(checks: list, flagged: bool) -> list:
    """What a run's findings say beside its flags: with no flag, the checks made and passed ("no flags:
    ..."); then, with flags or not, the checks not made, each with its reason ("not checked: ...").
    Empty for a run with flags and every check made."""
    made = [c for c in checks if c["made"]]
    lines = []
    if not flagged:
        words = [c["passed_as"] for c in made]
        if "interface resolved" in words and "droplets resolved" in words:  # one phrase for the two
            words.remove("droplets resolved")
            words[words.index("interface resolved")] = "interface and droplets resolved"
        lines.append("no flags: " + ", ".join(words) if words else
                     "no flags from the analyses run; none of the standing checks was made")
    reasons = {}
    for c in checks:
        if not c["made"]:
            reasons.setdefault(c["not_made_because"], []).append(CHECK_NAMES.get(c["check"], c["check"]))
    if reasons:
        lines.append("not checked: " + "; ".join(f"{', '.join(names)} ({why})" for why, names in reasons.items()))
    return lines


def measure_figures(result, snapshots: dict | None = None) -> list:
    """The report's plots as (file stem, caption, Figure); empty plots are left out."""
    return _plots.measure_figures(result, snapshots)


def write_measure_report(out, result, *, series: dict, inputs: list, snapshots: dict | None,
                         step_timings: dict, version: str, started: float,
                         execution: dict) -> None:
    """Write every output of a measure run into ``out`` (each file atomically).

    Parameters
    ----------
    out : str or os.PathLike
        The output folder (prepared by the run).
    result : MeasureResult
        The run's tables, options, findings and skipped steps.
    series : dict
        ``path``, ``kind``, ``steps``, ``time_origin`` of the series.
    inputs : list of dict
        The input files with ``path``, ``bytes`` and ``sha256``.
    snapshots : dict or None
        Interface arrays of chosen steps (``steps``, ``times``, ``bounds``, ``axis_names``).
    step_timings : dict
        ``step_seconds_sum`` and ``steps_reused``.
    version : str
        The phasegauge version that ran.
    started : float
        Start of the run (seconds since the epoch).
    execution : dict
        Workers, scheduler and resume of the run.

    The run builds every argument (:func:`phasegauge.run._report_data.measure_report_data`): this
    function reads no input and computes no metric.
    """
    out = os.fspath(out)
    t0 = time.time()
    written = []

    def table(name, frame):
        if frame is None:
            return
        atomic_write_csv(os.path.join(out, name), frame)
        written.append(name)

    table("steps.csv", result.steps)
    if "droplets" in result.options.analyses:
        table("droplets.csv", result.droplets)
        table("events.csv", result.events)
    if result.profiles is not None and len(result.profiles):
        table("profiles.csv", result.profiles)
    for name, frame in (("probes.csv", getattr(result, "probes", None)), ("lines.csv", getattr(result, "lines", None)),
                        ("validation.csv", getattr(result, "validation", None)),
                        ("validation_summary.csv", getattr(result, "validation_summary", None))):
        table(name, frame)
    if result.audit:
        atomic_write_json(os.path.join(out, "diffusion_audit.json"), result.audit)
        written.append("diffusion_audit.json")
    execution = dict(execution)
    plot_format = execution.pop("plot_format", "png")
    makers = _plots.measure_figure_makers(result, snapshots, time_origin=series.get("time_origin"))
    pngs = save_figure_makers(out, makers, written, plot_format)
    has_contours = os.path.isdir(os.path.join(out, "contours"))
    page = _page(result, series, pngs, execution, version, written=list(written), contours=has_contours)
    atomic_write_text(os.path.join(out, "report.html"), page.render())
    written.append("report.html")
    contours = sorted(os.listdir(os.path.join(out, "contours"))) if os.path.isdir(
        os.path.join(out, "contours")) else []
    execution = dict(execution)
    options = {**_options_dict(result.options), "contours": execution.pop("contours", True),
               "plot_format": plot_format, "keep_cache": execution.pop("keep_cache", False)}
    invocation = execution.pop("invocation", None)
    fields = {"invocation": invocation, "series": dict(series), "options": options, "execution": execution,
              "skipped_steps": result.skipped, "warnings": list(result.warnings), "flags": result.flags,
              "standing_checks": list(getattr(result, "standing_checks", None) or []),
              "interface_kind": (result.audit or {}).get("interface_kind")}
    timings = {"total_seconds": round(time.time() - started, 3), "report_seconds": round(time.time() - t0, 3),
               **step_timings}
    record = manifest("measure", version=version, inputs=inputs, fields=fields,
                      outputs=written + [f"contours/{c}" for c in contours], timings=timings)
    atomic_write_json(os.path.join(out, "manifest.json"), record)
    mark_complete(out)


def _ran(opts) -> list:
    """The settings of the analyses that ran (and of the step choice, when one was made)."""
    pairs = []
    if opts.steps is not None or opts.time_from is not None or opts.time_to is not None or opts.every != 1:
        pairs.append(("steps chosen", ", ".join(f"{k} {v}" for k, v in (
            ("steps", opts.steps), ("from time", opts.time_from), ("to time", opts.time_to),
            ("every", opts.every if opts.every != 1 else None)) if v is not None)))
    if "interface" in opts.analyses or "droplets" in opts.analyses:
        pairs.append(("interface level", opts.level))
    if opts.velocity:
        pairs.append(("velocity field", opts.velocity))
    if "droplets" in opts.analyses:
        pairs += [("droplet adjacency", opts.adjacency), ("periodic axes", ", ".join(opts.periodic) or "none")]
    if "mixing" in opts.analyses and opts.section_axis:
        pairs += [("cross sections along", opts.section_axis), ("mixing target", opts.mixing_target)]
    return pairs


def kind_words(audit: dict, declared) -> list:
    """What the report says beside a run's interface kind: 'as declared' where the user gave it, and
    the kind its thickness reads where that is another."""
    if not declared:
        return []
    measured = audit.get("interface_kind_measured")
    other = measured in ("diffuse", "sharp") and measured != audit.get("interface_kind")
    return ["as declared"] + ([f"the thickness reads {measured}"] if other else [])


def _options_dict(options) -> dict:
    import dataclasses

    return {k: (list(v) if isinstance(v, tuple) else v) for k, v in dataclasses.asdict(options).items()}


def _key_figures(result, time_origin: str | None = None) -> list:
    steps = result.steps
    pairs = [("steps analysed", len(steps))]

    def add(label, column, how):
        if column in steps and len(steps):
            values = steps[column].to_numpy(dtype=float)
            if np.isfinite(values).any():
                pairs.append((label, float(how(values))))

    numbered = time_origin == "index"  # the steps store no times: a step's time is its number
    add("step number, first" if numbered else "time, first", "time", lambda v: v[0])
    add("step number, last" if numbered else "time, last", "time", lambda v: v[-1])
    add("phase volume, first step", "phase_volume", lambda v: v[0])
    add("largest |phase-volume drift| (relative)", "phase_volume_drift", lambda v: np.nanmax(np.abs(v)))
    add("indicator minimum", "c_min", np.nanmin)
    add("indicator maximum", "c_max", np.nanmax)
    add("interface width (5-95 %), first step", "interface_width", lambda v: v[0])
    add("interface width (5-95 %), last step", "interface_width", lambda v: v[-1])
    add("interface width in cells, last step", "interface_width_cells", lambda v: v[-1])
    add("droplets, first step", "droplet_count", lambda v: v[0])
    add("droplets, last step", "droplet_count", lambda v: v[-1])
    add("mixing index, last step", "mixing_index", lambda v: v[-1])
    add("mixing length, first step", "mixing_length", lambda v: v[0])
    add("mixing length, last step", "mixing_length", lambda v: v[-1])
    status = steps["mixing_length_status"].iloc[-1] if "mixing_length_status" in steps and len(steps) else None
    if isinstance(status, str):  # reached, upper_bound (the length a bound), not_reached or undefined
        pairs.append(("mixing length status, last step", status))
    def last_finite(values):
        return values[np.isfinite(values)][-1]

    add("bulk composition, lean phase, last measured", "bulk_composition_lean", last_finite)
    add("bulk composition, rich phase, last measured", "bulk_composition_rich", last_finite)
    add("gap to the binodal, last separated step", "equilibrium_gap", last_finite)
    add("partition coefficient of the solute, last measured", "partition_coefficient", last_finite)
    add("level set's distance error near the interface, largest median", "distance_error_median", np.nanmax)
    audit = result.audit or {}
    if audit.get("interface_kind") in ("diffuse", "sharp"):
        cells = audit.get("cells_across")
        said = kind_words(audit, getattr(getattr(result, "options", None), "interface_kind", None))
        said += ([f"{float(cells):.2g} cells across 10-90 %, median over steps"] if np.isfinite(float(cells))
                 else ["its thickness not read"])
        pairs.append(("interface kind", f"{audit['interface_kind']} ({'; '.join(said)})"))
    if audit.get("verdict"):
        pairs.append(("diffusion audit", audit["verdict"]))
    r_squared = audit.get("r_squared")
    fits = r_squared is not None and np.isfinite(float(r_squared)) and float(r_squared) >= 0.5
    # a diffusivity not distinguishable from 0, or a line that explains little, is no key figure
    fitted = audit.get("fit_from_time")
    if audit.get("n_fit") and fitted is not None and np.isfinite(float(fitted)):
        pairs.append(("diffusion audit fitted", f"{audit['n_fit']} of {audit.get('n_steps')} steps, from "
                                                f"{'step' if numbered else 't ='} {float(fitted):.6g}"))
    unit = "length²/step" if audit.get("note") or "per step index" in str(audit.get("verdict")) else "length²/time"
    if audit.get("significant") and (audit.get("widening") or fits):
        for key, label in (("D_num", f"numerical diffusivity ({unit})"),
                           ("D_num_stderr", f"numerical diffusivity, standard error ({unit})"),
                           ("D_ratio", "numerical / physical diffusivity")):
            value = audit.get(key)
            if value is not None and np.isfinite(float(value)):
                pairs.append((label, value))
    return pairs


def _page(result, series, pngs, execution, version, *, written=(), contours=False) -> Page:
    opts = result.options
    page = Page("phasegauge measure report",
                f"{series['path']} · {series['steps']} steps · field '{opts.field}' "
                + (f"a level set ({opts.phase} side)" if getattr(opts, "level_set", False) else
                   f"mapped from [{opts.range[0]:g}, {opts.range[1]:g}] ({opts.phase} phase)") + " · "
                f"phasegauge {version}")
    page.heading("Findings")
    said = verdict_lines(getattr(result, "standing_checks", None) or [], bool(result.flags))
    if result.flags:
        page.items(result.flags, css="flag")
    elif said:
        page.items(said[:1], css="ok")
        said = said[1:]
    if said:  # what was not checked, and why
        page.items(said, css="note")
    page.heading("Key figures")
    page.key_values(_key_figures(result, series.get("time_origin")))
    if pngs:
        page.heading("Plots")
        page.figures(pngs)
    summary = getattr(result, "validation_summary", None)
    if summary is not None and len(summary):
        page.heading("Against measured values")
        page.table(summary)
    if "droplets" in opts.analyses:
        page.heading("Droplet events")
        page.table(result.events)
    page.heading("What was run")
    page.key_values([("series", series["path"]), ("series kind", series["kind"]),
                     ("time from", series["time_origin"]),
                     ("field read", series.get("field_read", f"'{opts.field}'")),
                     *([("blocks left out", ", ".join(series["blocks_left_out"])
                         + " (boundary patches: the volume blocks are read)")]
                       if series.get("blocks_left_out") else []),
                     *([("cells read as", series["cells_read_as"])] if series.get("cells_read_as") else []),
                     *([("step order", series["order"])] if "order" in series else []),
                     ("analyses", ", ".join(opts.analyses)), *_ran(opts),
                     ("workers", execution.get("workers")), ("scheduler", execution.get("scheduler") or "none")]
                    + ([("measured as", series["measured_as"])] if series.get("measured_as") else []))
    tables = [name for name in written if name.endswith((".csv", ".json"))]
    page.paragraph("Files: " + ", ".join(tables)
                   + ("; interface geometry per step in contours/ (listed with times in contours/interface.steps)"
                      if contours else "")
                   + "; inputs, options and timings in manifest.json.", "note")
    if result.skipped:
        page.heading("Skipped steps")
        page.items(result.skipped, css="flag")
    page.paragraph(CAUTION, "note")
    return page
