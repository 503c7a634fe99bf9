"""The output folder of a comparison: comparison.csv, statistics, checks, plots, report.html, manifest."""

from __future__ import annotations

import dataclasses
import os
import re
import time

import numpy as np

from ._files import atomic_write_csv, atomic_write_json, atomic_write_text, mark_complete
from ._canvas import time_words
from ._html import Page
from ._drawing import save_figures
from ._measure_report import CAUTION, kind_words, manifest, verdict_lines

__all__ = ["write_compare_report", "compare_figures", "steps_file_name", "partial_pairs"]


def steps_file_name(label: str) -> str:
    """The steps table of the run labelled ``label``: ``steps_<label>.csv``, every run of other characters
    than letters, digits, ``_``, ``.`` and ``-`` in the label made one ``_`` (a label of any text: one file)."""
    return "steps_{}.csv".format(re.sub(r"[^A-Za-z0-9_.-]+", "_", label))


def compare_figures(result, *, overlays, level: float, time_origin: str | None = None) -> list:
    """(file stem, caption, Figure) of a comparison: overlays, metric curves, differences, shapes.

    ``overlays`` are the run's overlay records (``time``, ``mismatch``, ``extent``, ``segments_a``,
    ``segments_b``, ``axis_names``; see :func:`phasegauge.run._compare_steps.overlay_arrays`).
    ``time_origin`` is the first run's, whose times the pairs carry (``index``: plotted against the
    step number).
    """
    from . import _plots_compare as plots

    labels = result.labels
    figures = []
    for k, o in enumerate(overlays):
        when = time_words(o["time"], time_origin)
        if o.get("time_b") is not None and o["time_b"] != o["time"]:  # the second run's own time of the pair
            when += f" ({labels[1]}: {time_words(o['time_b'], time_origin)})"
        figures.append((f"overlay_{k}", f"Both interfaces at {when}",
                        plots.plot_interface_overlay(o["mismatch"], o["extent"], o["segments_a"], o["segments_b"],
                                                     labels=labels, axis_names=o["axis_names"], level=level,
                                                     title=when)))
    comparison = result.comparison
    if comparison is not None and len(comparison) > 1:
        wanted = [m for m in ("phase_volume", "interface_size", "interface_width", "droplet_count",
                              "mixing_index") if f"{m}_a" in comparison]
        if wanted:
            figures.append(("metric_curves", "Metrics of both runs over time",
                            plots.plot_metric_curves(comparison, metrics=wanted, labels=labels,
                                                     time_origin=time_origin)))
            figures.append(("metric_differences", "Relative differences of the metrics over time",
                            plots.plot_metric_differences(comparison, metrics=wanted, time_origin=time_origin)))
        if "mismatch_volume" in comparison:
            figures.append(("shape_history", "Shape comparison over time",
                            plots.plot_shape_history(comparison, time_origin=time_origin)))
    return figures


def write_compare_report(out, result, *, specs, overlays, inputs: list, version: str, started: float,
                         level: float, time_origins: dict | None = None) -> None:
    """Write the tables, plots, report.html and manifest.json of a comparison, each file atomically.

    Parameters
    ----------
    out : str or os.PathLike
        The output folder, which the run prepared.
    result : CompareResult
        The comparison's tables and both runs' tables.
    specs : pair of RunSpec
        Path, field, range, phase and label of each run.
    overlays : list of dict
        What the overlay plots draw (see :func:`compare_figures`).
    inputs : list of dict
        Both runs' input files with ``path``, ``bytes`` and ``sha256``.
    version : str
        The phasegauge version that ran.
    started : float
        Start of the comparison (seconds since the epoch).
    level : float
        The interface level.
    time_origins : dict, optional
        Per run label, where its measured steps' times come from ('file', 'xdmf', 'listing',
        'folder_name', 'index', joined by '+').
    """
    out = os.fspath(out)
    written = []
    pairs = result.pairs
    if pairs is not None and {"step_a", "time_a"} <= set(pairs.columns) and "step" not in pairs.columns:
        # pairs.csv starts step, time (the first run's) as every per-step table does
        pairs = pairs.assign(step=pairs["step_a"], time=pairs["time_a"])
        pairs = pairs[["step", "time", *[c for c in pairs.columns if c not in ("step", "time")]]]
    for name, frame in (("comparison.csv", result.comparison), ("pairs.csv", pairs),
                        ("droplet_statistics.csv", result.droplet_statistics),
                        ("reference_checks.csv", result.reference_checks)):
        if frame is not None and len(frame):
            atomic_write_csv(os.path.join(out, name), frame)
            written.append(name)
    for label, res in zip(result.labels, (result.first, result.second)):
        name = steps_file_name(label)
        atomic_write_csv(os.path.join(out, name), res.steps)
        written.append(name)
    first_origin = (time_origins or {}).get(result.labels[0])
    pngs = save_figures(out, compare_figures(result, overlays=overlays, level=level, time_origin=first_origin),
                        written)
    a, b = result.labels
    page = Page("phasegauge comparison report",
                f"{a}: {os.path.abspath(specs[0].path)} ('{specs[0].field}')  ·  "
                f"{b}: {os.path.abspath(specs[1].path)} ('{specs[1].field}')  ·  phasegauge {version}")
    page.heading("Findings")
    findings = _compare_findings(result)
    page.items(findings or ["no flags in either run and no failed reference check"],
               css="flag" if findings else "ok")
    if getattr(result, "notes", None):  # the comparison's notes: start times, paired times apart
        page.items(list(result.notes), css="note")
    unchecked = [f"{label}: {line}" for label, run in zip(result.labels, (result.first, result.second))
                 for line in verdict_lines(getattr(run, "standing_checks", None) or [], True)]
    if unchecked:  # each run's standing checks not made, and why
        page.items(unchecked, css="note")
    page.heading("Key figures")
    page.key_values(_compare_key_figures(result))
    page.heading("Paired steps")
    unpaired = "; ".join(f"{k}: {len(v)} unpaired" + (f" (steps {', '.join(str(int(i)) for i in v[:8])}"
                                                         f"{' ...' if len(v) > 8 else ''})" if len(v) else "")
                         for k, v in result.unpaired.items())
    origins = {k: v for k, v in (time_origins or {}).items() if v}
    said = ("; times from " + ", ".join(f"{k}: {v}" for k, v in origins.items())) if origins else ""
    numbered = getattr(result, "paired_by", "") == "step number"
    by = " (paired by step number: neither run stores times)" if numbered else ""
    page.paragraph(f"{len(result.pairs)} paired times{by}; {unpaired}{said}.")
    if len(result.reference_checks):
        page.heading("Published and reference values")
        checks = result.reference_checks
        page.table(checks.drop(columns=["note"], errors="ignore"))
        notes = [f"{row.quantity} not applicable: {row.note}" for row in checks.itertuples(index=False)
                 if isinstance(getattr(row, "note", ""), str) and row.note]
        if notes:  # why a check is not applicable: the run does not cover its quantity
            page.items(notes)
    page.heading("Shape and metric comparison")
    page.table(_shape_table(result.comparison))
    if pngs:
        page.heading("Plots")
        page.figures(pngs)
    if result.droplet_statistics is not None and len(result.droplet_statistics):
        page.heading("Droplet statistics")
        stats = result.droplet_statistics
        # short headers and the size-test note below the table, so the table fits the page
        short = {"step": "step", "time": "time", "droplet_count_a": "count_a", "droplet_count_b": "count_b",
                 "mean_equivalent_diameter_a": "mean_diameter_a", "mean_equivalent_diameter_b": "mean_diameter_b",
                 "size_ks_pvalue": "size_ks_pvalue"}
        page.table(stats[[c for c in short if c in stats]].rename(columns=short))
        notes = [n.rstrip(".") for n in dict.fromkeys(stats.get("size_ks_note", [])) if isinstance(n, str) and n]
        page.paragraph("_a is " + a + ", _b is " + b + "; count is droplet_count, mean_diameter is "
                       "mean_equivalent_diameter; every column is in droplet_statistics.csv."
                       + (" Size test: " + "; ".join(notes) + "." if notes else ""), "note")
    page.paragraph("All columns are in comparison.csv; each run's own steps table is in steps_<label>.csv.", "note")
    page.paragraph(CAUTION, "note")
    atomic_write_text(os.path.join(out, "report.html"), page.render())
    written.append("report.html")
    record = manifest("compare", version=version, inputs=inputs,
                      fields={"runs": [dataclasses.asdict(s) for s in specs], "level": level,
                              "options": {label: _plain(dataclasses.asdict(run.options)) for label, run in
                                          zip(result.labels, (result.first, result.second))},
                              "unpaired_steps": {label: [int(i) for i in steps]
                                                 for label, steps in result.unpaired.items()},
                              "skipped_steps": {label: list(run.skipped) for label, run in
                                                zip(result.labels, (result.first, result.second))},
                              "warnings": {label: list(run.flags) for label, run in
                                           zip(result.labels, (result.first, result.second))},
                              "standing_checks": {label: list(getattr(run, "standing_checks", None) or [])
                                                  for label, run in zip(result.labels, (result.first, result.second))},
                              "interface_kind": {label: _kind(run)[0] for label, run in
                                                 zip(result.labels, (result.first, result.second))},
                              "time_origin": dict(time_origins or {}),
                              "paired_by": getattr(result, "paired_by", "time"),
                              "comparison_warnings": list(getattr(result, "warnings", [])),
                              "comparison_notes": list(getattr(result, "notes", None) or [])},
                      outputs=written, timings={"total_seconds": round(time.time() - started, 3)})
    atomic_write_json(os.path.join(out, "manifest.json"), record)
    mark_complete(out)


#: a pair compared over a volume this share below the largest pair's is partial (our threshold)
PARTIAL_SHARE = 0.01


def partial_pairs(comparison) -> np.ndarray:
    """A mask of comparison.csv's rows compared over a volume more than :data:`PARTIAL_SHARE` below the
    largest pair's (``compared_volume``: the samples finite in both runs)."""
    if comparison is None or "compared_volume" not in comparison or not len(comparison):
        return np.zeros(0 if comparison is None else len(comparison), dtype=bool)
    volume = comparison["compared_volume"].to_numpy(dtype=float)
    largest = np.nanmax(volume) if np.isfinite(volume).any() else np.nan
    return np.isfinite(volume) & (volume < (1.0 - PARTIAL_SHARE) * largest)


def _shape_table(comparison):
    """The report's shape table: the first run's time and the second's (``time_b``), the shape measures,
    and ``compared`` marking a pair compared over part of the domain ('partial: N % left out')."""
    cols = [c for c in ("time", "time_b", "mismatch_volume", "dice", "hausdorff", "hausdorff_95", "mean_distance",
                        "field_difference") if c in comparison]
    table = comparison[cols] if cols else comparison
    partial = partial_pairs(comparison)
    if partial.any():
        volume = comparison["compared_volume"].to_numpy(dtype=float)
        share = 100 * (1 - volume / np.nanmax(volume))
        table = table.assign(compared=[f"partial: {s:.3g} % left out" if p else "whole"
                                       for p, s in zip(partial, share)])
    return table


def _plain(options: dict) -> dict:
    return {k: (list(v) if isinstance(v, tuple) else v) for k, v in options.items()}


#: the columns that measure a run's interface as its method draws it (a diffuse band, a one-to-two-cell
#: step): between a diffuse and a sharp run their differences compare the methods, not the flow
METHOD_COLUMNS = ("interface_width", "interface_width_cells", "width_threshold_free", "interface_eps",
                  "width_second_moment", "interface_variance", "width_profile_median", "width_profile_p90",
                  "under_resolved_interface_fraction", "interface_cells_across", "width_cell_data_bias",
                  "mixed_volume_fraction", "mixing_index", "segregation_intensity")


def _kind(run) -> tuple:
    """A run's interface kind and its cells across (``diffusion_audit``), or ('unknown', NaN)."""
    audit = run.audit or {}
    return audit.get("interface_kind", "unknown"), float(audit.get("cells_across", float("nan")))


def _kind_said(run) -> str:
    """A run's interface kind with 'as declared' (and what its thickness reads) where the user gave it."""
    said = kind_words(run.audit or {}, getattr(run.options, "interface_kind", None))
    return _kind(run)[0] + (f" ({'; '.join(said)})" if said else "")


#: domains whose volumes differ by more than this share are not the same case's (our threshold)
_DOMAIN_SHARE = 0.01
#: lengths that differ by this factor or more suggest different length units (metres against millimetres)
_UNITS_FACTOR = 5.0


def _domain_findings(result) -> list:
    """A finding where the two runs' domains differ in volume (first measured steps), and where their
    lengths differ so much that the runs may be in different length units."""
    volumes, dims = [], []
    for run in (result.first, result.second):
        steps = run.steps
        if steps is None or "domain_volume" not in steps or not len(steps):
            return []
        volumes.append(float(steps["domain_volume"].iloc[0]))
        dims.append(max(int(getattr(r, "dimension", 0) or 0) for r in run.results) if run.results else 0)
    a, b = volumes
    if not (a > 0 and b > 0) or abs(a - b) <= _DOMAIN_SHARE * max(a, b):
        return _offset_findings(result)
    ratio = a / b
    length = ratio ** (1.0 / max(dims[0], 1)) if dims[0] == dims[1] and dims[0] else float("nan")
    said = (f"the domains differ: {result.labels[0]}'s volume {a:.4g}, {result.labels[1]}'s {b:.4g} "
            f"(ratio {ratio:.3g})")
    if length >= _UNITS_FACTOR or length <= 1.0 / _UNITS_FACTOR:
        return [f"{said}: their lengths differ by a factor of about {length:.3g}, so the runs may be in different "
                "length units (metres against millimetres): every shape measure on the common grid and every "
                "volume compares the units, not the runs; convert one run's mesh to the other's units"]
    return [f"{said}: figures over the whole domain (mean_indicator, the mixing columns, domain and phase "
            "volumes) compare the domains, not the runs"]


def _offset_findings(result) -> list:
    """A finding where domains of the same volume lie apart: their boxes differ by more than
    :data:`_DOMAIN_SHARE` of the larger extent along some axis (another origin)."""
    boxes = [next((r.outline.bounds for r in run.results if getattr(r, "outline", None) is not None), None)
             for run in (result.first, result.second)]  # each run's first measured step's mesh
    if any(box is None for box in boxes):
        return []
    (lo_a, hi_a), (lo_b, hi_b) = (np.asarray(box, dtype=float) for box in boxes)
    extent = np.maximum(hi_a - lo_a, hi_b - lo_b)
    # along axes both runs span (a 2D run's or a flattened slab's normal coordinate does not count)
    spanned = np.minimum(hi_a - lo_a, hi_b - lo_b) > 0
    moved = spanned & (np.abs(lo_a - lo_b) > _DOMAIN_SHARE * np.where(spanned, extent, 1.0))
    if not moved.any():
        return []
    axes = ", ".join(f"{'xyz'[k]} from {lo_a[k]:.4g} against {lo_b[k]:.4g}" for k in np.flatnonzero(moved))
    return [f"the domains lie apart ({result.labels[0]} and {result.labels[1]} start at {axes}): the shape "
            "measures compare the runs where their domains overlap, on another origin's coordinates; move one "
            "run's mesh so the two coincide"]


def _compare_findings(result) -> list:
    """Each run's flags (named by its label), a note when the interfaces are of different kinds, and
    every reference check that failed."""
    found = list(getattr(result, "warnings", []))  # the comparison's own (steps paired by number)
    found += _domain_findings(result)
    found += [f"{label}: {flag}" for label, run in zip(result.labels, (result.first, result.second))
              for flag in run.flags]
    found += _kinds_note(result)
    checks = result.reference_checks
    if checks is not None and len(checks) and "verdict" in checks:
        for row in checks[checks["verdict"] == "fail"].itertuples(index=False):
            found.append(f"reference check fail: {row.quantity} = {row.value:.4g}, expected "
                         f"{row.reference_low:.4g} to {row.reference_high:.4g} ({row.source})")
    return found


def _kinds_note(result) -> list:
    """The note on a diffuse run against a sharp one (volume of fluid) or a level set: which columns
    measure each method's interface, and the volume the diffuse band adds (``result.band_excess``)."""
    runs = (result.first, result.second)
    kinds = [_kind(run) for run in runs]
    names = {kinds[0][0], kinds[1][0]}
    if "diffuse" not in names or not names & {"sharp", "level set"}:
        return []
    shown = "; ".join(f"{label} {_kind_said(run)}" + (f", {cells:.2g} cells across" if np.isfinite(cells) else "")
                      for label, run, (_, cells) in zip(result.labels, runs, kinds))
    table = result.comparison
    k = [kind for kind, _ in kinds].index("diffuse")
    own, other = ("_a", "_b") if k == 0 else ("_b", "_a")
    present = [c for c in METHOD_COLUMNS if f"{c}_a" in table and table[f"{c}{own}"].notna().any()]
    band_only = [c for c in present if not table[f"{c}{other}"].notna().any()]
    both = [c for c in present if c not in band_only]
    parts = [f"{', '.join(both)} measure each method's interface, so their differences compare the methods, not "
             "the flow"] if both else []
    if band_only:
        parts.append(f"{', '.join(band_only)} measure the diffuse run's band, which the {kinds[1 - k][0]} run does "
                     "not have" + (" (its distance_error_* columns measure its own method)"
                                   if kinds[1 - k][0] == "level set" else ""))
    what = "; ".join(parts) or "the widths measure each method's interface, not the flow"
    note = (f"the interfaces are of different kinds ({shown}): {what}; where the interface is curved the phase "
            "volumes differ too, at second order in the diffuse band's width (the band is not symmetric about a "
            "curved contour), and with them the diffuse run's droplet diameters and circularity (a circle reads "
            "about 1 + pi^2 eps^2 / (6 R^2) instead of 1: the rising-bubble check's circularity band is narrower "
            "than that on a coarse band)")
    excess = getattr(result, "band_excess", None)
    if excess:
        rule = ("a logistic band of scale s (interface_eps) adds pi^3 s^2 / 3 to each closed drop in 2D, whatever "
                "its shape, and 4 pi^3 s^2 R / 3 to a sphere of radius R in 3D (a bubble of the other phase loses "
                "as much)")
        when = f"at t = {excess['time']:.6g}" if np.isfinite(excess["time"]) else f"at step {excess['step']}"
        gap = f"{excess['label']}'s phase volume minus {excess['other']}'s is {excess['observed']:.4g} {when}"
        if np.isfinite(excess["expected"]):
            shape = "" if excess["dimension"] == 2 else " taken as spheres of their equivalent diameters"
            note += (f"; {gap}, and {rule}: {excess['expected']:.4g} for its {excess['drops']} droplet(s)"
                     f"{shape}, s = {excess['scale']:.4g}")
        else:
            note += f"; {gap}; {rule} (not stated here: {excess['why']})"
    return [note]


def _compare_key_figures(result) -> list:
    table = result.comparison
    pairs = [("paired times", len(result.pairs))]
    for label, run in zip(result.labels, (result.first, result.second)):
        cells = _kind(run)[1]
        pairs.append((f"interface of {label}", _kind_said(run) + (f", {cells:.2g} cells across"
                                                                   if np.isfinite(cells) else "")))
    for label, column, how in (("Dice coefficient, lowest", "dice", "min"),
                               ("Hausdorff distance, largest", "hausdorff", "max"),
                               ("mean interface distance, largest", "mean_distance", "max")):
        if column in table and table[column].notna().any():
            pairs.append((label, getattr(table[column], how)()))
    for column, label in (("phase_volume_a", result.labels[0]), ("phase_volume_b", result.labels[1])):
        if column in table and len(table):
            pairs.append((f"phase volume of {label}, last paired time", table[column].iloc[-1]))
    return pairs
