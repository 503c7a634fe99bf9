"""Series-level work over the step results: droplet tracking, phase-volume drift, the diffusion audit, findings.

Droplet tracking links each step to the one before, so it runs in step order;
:class:`TrackingFeed` takes the results as they arrive (in any order, from any
process) and links each step as soon as all earlier ones are in. It needs a
step's labelled cells and its mesh's outline with cell centroids
(:class:`~phasegauge.model.outline.MeshOutline`), never the step itself, and
holds an outline only until the step is linked.

The findings of a run are records (:class:`Finding`: kind, severity, text,
figures): the report words and draws them; ``MeasureResult.flags`` keeps their
texts.
"""

from __future__ import annotations

import os
import warnings
from dataclasses import dataclass, field

import numpy as np

from ..errors import (AnalysisError, InputError, PhasegaugeError, SeriesError, SeriesWarning,
                      SkippedStepWarning, collapse_warnings)
from ._boundary_findings import boundary_reach_finding, facing_interface_finding, resolution_finding
from ._coarsening_finding import coarsening_finding
from ._bulk_findings import bulk_plateaus_finding
from ._drift_findings import drift_findings
from .options import STEP_COLUMNS

__all__ = ["Finding", "TrackingFeed", "assemble", "findings"]

@dataclass(frozen=True)
class Finding:
    """One finding of a run, for the report to put first.

    Attributes
    ----------
    kind : str
        ``interface_widening``, ``phase_volume_drift``, ``phase_volume_not_judged`` (an open domain's change
        within what the outflow integrated between outputs may miss: a note), ``phase_volume_left_out`` (a
        change no larger than what the cells left out for non-finite values could account for: a note),
        ``open_boundary``,
        ``indicator_overshoot``, ``bulk_plateaus`` (bulk off 0 and 1 read as physics), ``interface_under_resolved``,
        ``width_cell_data_bias``, ``interface_near_boundary``, ``interface_near_interface``, ``diffusivity_per_step``,
        ``bulk_noise_left_out_changes`` (the bulk noise left out of the widths at some fitted steps only: a note),
        ``free_energy_increase``, ``coarsening``,
        ``droplets_under_resolved``, ``steps_skipped``, the mixture findings
        (``separated_one_phase``, ``mixed_inside_spinodal``, ``bulk_not_measured``, ``level_outside_binodal``,
        ``binodal_gap``, ``binodal_gibbs_thomson``, ``binodal_reached``; see ``run/_mixture.py``),
        ``distance_error`` (a level set no longer a distance function: ``run/_level_set_run.py``),
        ``tracking_unreliable`` (``run/_tracking_findings.py``), or ``warning`` (a warning of the steps or the
        series, repeats collapsed).
    severity : {'warning', 'note'}
        ``warning``: the numbers need a closer look; ``note``: how to read them.
    text : str
        The finding in words (the line ``flags`` and the report show).
    figures : dict
        The numbers behind the text (JSON-ready).
    """

    kind: str
    severity: str
    text: str
    figures: dict = field(default_factory=dict)


# ------------------------------------------------------------------ tracking, in step order
def domain_refusal(before, after):
    """How analysed steps ``before`` and ``after`` (results, in order) cover different domains:
    a :class:`SeriesError` when their boxes lie side by side (:meth:`MeshOutline.side_by_side`), a
    warning record ``(category, what, where)`` when the domain changed otherwise
    (:meth:`MeshOutline.domain_change`: a moving wall or frame, a growing region), else None.

    The files of a parallel run's pieces (``processor1/out_0001.vtu``, ``out_0001_1.vtu``) are named
    like steps, and measured so each piece was a step: half the phase volume, droplets jumping
    between pieces, a drift; their meshes differ as a remeshed run's do, so that alone says nothing.
    """
    if before.outline is None or after.outline is None:
        return None
    change = before.outline.domain_change(after.outline)
    if change is None:
        return None
    where = f"{after.path}, step {after.index}"
    if before.outline.side_by_side(after.outline):
        return SeriesError(f"the domain changes between step {before.index} and step {after.index} ({change}; the "
                           "two lie side by side), so the files look like pieces of a parallel run (a domain "
                           "decomposition), not steps of one domain", where=where,
                           fix="give one file a step: join each step's pieces into one file or a .vtm multiblock "
                               "file (a domain that moves by more than half its size between outputs is not "
                               "measured as one series)")
    return (SeriesWarning, f"the domain changes between step {before.index} and step {after.index} ({change}): a "
                           "moving or deforming mesh, or pieces of a parallel run named like steps; phase-volume "
                           "drift across it includes the change", where)


#: the note of a tracking run with a velocity over steps that store no times
NUMBERED_VELOCITY = ("the steps store no times (numbered 0, 1, 2 ...), so the velocity cannot move the drops between "
                     "outputs (it would move them by velocity x 1): they are matched by overlap alone; give a "
                     "'time,path' listing of the steps' times to use it")


class TrackingFeed:
    """Droplet tracking fed with the step results in step order, while they arrive in any order.

    Parameters
    ----------
    options : MeasureOptions
    indices : iterable of int
        Every step of the run, in order.
    cache : StepCache, optional
        Where outlines of meshes no process holds now are kept (a resumed run).

    Notes
    -----
    A step is linked once every earlier step is in and its mesh outline (with
    centroids) is known: from the result itself, from :meth:`add_outline`, from
    an outline :meth:`pin`-ned for the whole run, or from the cache. Steps that
    were skipped, or whose mesh dimension differs from the first analysed
    step's, are not tracked (:func:`assemble` skips them too).
    """

    def __init__(self, options, indices, *, cache=None):
        from ..analysis.tracking import DropletTracker

        self.tracking = "droplets" in options.analyses
        self.velocity = options.velocity
        self.tracker = (DropletTracker(ignore_remerge_within=options.ignore_remerge_within,
                                       periodic=options.periodic) if self.tracking else None)
        self._order = list(indices)
        self._position = 0
        self._waiting: dict = {}  # index -> result that arrived before an earlier step
        self._outlines: dict = {}  # signature -> outline a waiting result needs
        self._pinned: dict = {}  # signature -> outline held for the whole run
        self._last = None  # outline of the step linked last (the next one usually shares it)
        self._dimension = None
        self._cache = cache
        self._previous = None  # the analysed step linked last, of the first analysed step's dimension
        self.domain_notes: list = []  # (category, what, where) of changes of the domain between steps

    def add(self, result, *, link: bool = True) -> None:
        """Take one step's result; with ``link``, link every step that is now next in order.

        (``link=False`` only registers the result, a quick call; :meth:`link` does the work.)
        """
        outline = result.outline
        if outline is not None and outline.has_centroids:
            if self.tracking and result.skipped is None:
                self._outlines.setdefault(outline.signature, outline)
            result.outline = outline.without_centroids()  # the result list keeps no mesh arrays
        self._waiting[result.index] = result
        if link:
            self.link()

    def add_outline(self, outline, *, link: bool = True) -> None:
        """Take the outline (with centroids) of a mesh that a waiting result needs."""
        if outline is not None:
            self._outlines.setdefault(outline.signature, outline)
            if link:
                self.link()

    def pin(self, outline) -> None:
        """Hold ``outline`` (with centroids) for the whole run: results of its mesh may come without one."""
        if outline is not None and outline.has_centroids:
            self._pinned[outline.signature] = outline

    @property
    def pinned(self) -> frozenset:
        """Signatures of the outlines held for the whole run."""
        return frozenset(self._pinned)

    def holds(self, signature: str) -> bool:
        """True when the outline of mesh ``signature`` is at hand (no process needs to send it).

        Ask after :meth:`add` of the result that needs it: the outline is then kept until
        that step is linked.
        """
        if signature in self._outlines or signature in self._pinned:
            return True
        if self._last is not None and self._last.signature == signature:
            self._outlines[signature] = self._last  # kept while a waiting result needs it
            return True
        return self._cache is not None and self._cache.has_outline(signature)

    @property
    def complete(self) -> bool:
        """True when every step has been taken and linked."""
        return self._position == len(self._order)

    def _outline(self, signature: str):
        if self._last is not None and self._last.signature == signature:
            return self._last
        outline = self._outlines.get(signature) or self._pinned.get(signature)
        if outline is None and self._cache is not None:
            outline = self._cache.load_outline(signature)
            if outline is not None:
                self._outlines[signature] = outline
        return outline

    def link(self) -> None:
        """Link every step that is next in order and has its outline (the tracking work)."""
        while self._position < len(self._order) and self._order[self._position] in self._waiting:
            result = self._waiting[self._order[self._position]]
            self._check_domain(result)
            if self.tracking and result.skipped is None:
                if self._dimension is None:
                    self._dimension = result.dimension
                if not (result.dimension and self._dimension and result.dimension != self._dimension):
                    outline = self._outline(result.outline.signature)
                    if outline is None:
                        return  # linked when the outline arrives
                    # steps numbered 0, 1, 2 ... (no times stored): the velocity would move the drops by
                    # velocity x 1 between outputs, so they are matched by overlap alone (and told)
                    numbered = getattr(result, "time_origin", "") == "index" and self.velocity is not None
                    if numbered:
                        self.domain_notes.append((SeriesWarning, NUMBERED_VELOCITY, ""))
                    self.tracker.add_cells(result.index, result.time, outline, result.droplets,
                                           result.label_cells, result.label_values, result.label_weights,
                                           whole_cells=result.label_whole, velocity_known=False if numbered else None,
                                           cell_velocity=getattr(result, "label_velocity", None))
                    self._last = outline
            # the labelled cells are read by the tracking only (which keeps the last step's): the
            # result list keeps no per-cell arrays, so a run's memory stays flat in its steps
            result.label_cells = result.label_values = result.label_weights = result.label_velocity = None
            del self._waiting[self._order[self._position]]
            self._position += 1
        needed = {r.outline.signature for r in self._waiting.values() if r.outline is not None}
        for signature in [s for s in self._outlines if s not in needed]:
            del self._outlines[signature]

    def _check_domain(self, result) -> None:
        """Refuse a step whose domain is not the previous analysed step's (:func:`domain_refusal`):
        as the steps are linked in order, so a run of pieces stops at the first."""
        if result.skipped is not None:
            return
        before = self._previous
        if before is not None and before.dimension != result.dimension:
            return  # skipped by the series level (a dimension of its own)
        if before is not None:
            found = domain_refusal(before, result)
            if isinstance(found, SeriesError):
                raise found
            if found is not None:
                self.domain_notes.append(found)
        self._previous = result

    def tables(self):
        """``(droplets, events)`` of the tracked steps.

        Raises
        ------
        AnalysisError
            A step is still waiting (for an earlier step, or for its mesh outline).
        """
        import pandas as pd

        from ..analysis.tracking import EVENT_COLUMNS

        self.link()
        if not self.complete:
            index = self._order[self._position]
            raise AnalysisError(f"droplet tracking stopped at step {index}: "
                                + ("its result" if index not in self._waiting else "its mesh outline")
                                + " never arrived", fix="rerun with --debug and report it")
        if not self.tracking:
            return pd.DataFrame(), pd.DataFrame(columns=list(EVENT_COLUMNS))
        return self.tracker.result()


# ------------------------------------------------------------------ the series level
def _no_step_error(results: list) -> PhasegaugeError:
    """The error of a run where no step could be analysed: the first step's, with the count."""
    errors = [r.error for r in results if r.error is not None]
    if not errors:
        return InputError("no step could be analysed", where=results[0].path if results else "",
                          fix="check the input with 'phasegauge inspect'")
    first = errors[0]
    if len(results) == 1:
        return first
    what = f"{first.what} (no step could be analysed: all {len(results)} failed; this is the first)"
    return type(first)(what, where=first.where, fix=first.fix)


def _mesh_change_records(series, done) -> list:
    """A series note when the mesh changes between analysed steps: its cells, not only their numbering (the same
    cells joined from pieces split otherwise are the same mesh)."""
    def cells(r):
        return r.cells_signature or r.mesh_signature

    changes = [b.index for a, b in zip(done[:-1], done[1:])
               if a.mesh_signature != b.mesh_signature and cells(a) != cells(b)]
    if not changes:
        return []
    count = len({cells(r) for r in done})
    at = ", ".join(str(i) for i in changes[:5]) + (" ..." if len(changes) > 5 else "")
    return [(SeriesWarning, f"the mesh changes between steps (at step {at}; {count} meshes): phase-volume drift "
                            "across a change includes any remapping of the solution", os.fspath(series.path))]


def assemble(series, results: list, options, *, notes=(), feed: TrackingFeed | None = None, mesh_pool=None):
    """Series-level work over the ordered step results: tables, tracking, drift, audit, findings.

    Steps whose mesh dimension differs from the first analysed step's are
    skipped (with ``strict``: refused). Warnings of the steps and of the series
    (``notes``: (category, what, where) records) are reported once per kind.
    ``feed`` is the run's :class:`TrackingFeed` (a new one takes ``results``
    otherwise); ``mesh_pool`` the pool the run kept its meshes in (the last
    step's mesh is handed on for drawing when it is there, else its outline).

    Returns
    -------
    MeasureResult
    """
    import pandas as pd

    from ..analysis import conservation
    from ..analysis.tracking import EVENT_COLUMNS
    from .measure import MeasureResult

    done = [r for r in results if r.skipped is None]
    if not done:
        raise _no_step_error(results)
    for r in done[1:]:
        if r.dimension and done[0].dimension and r.dimension != done[0].dimension:
            info = series.steps[r.index]
            err = SeriesError(f"the mesh is {r.dimension}D but at step {done[0].index} it is {done[0].dimension}D",
                              where=info.where, fix="a series keeps one dimension: give each case's steps apart")
            if options.strict:
                raise err
            r.skipped, r.error, r.warning_records = err.one_line(), err, []
    done = [r for r in results if r.skipped is None]
    skipped = [r.skipped for r in results if r.skipped is not None]
    if feed is None:
        feed = TrackingFeed(options, [r.index for r in results])
        for r in results:
            feed.add(r)
    records = list(notes) + _mesh_change_records(series, done) + feed.domain_notes
    records += [(SkippedStepWarning, f"step skipped: {r.error.what}; {r.error.fix}", r.error.where)
                if r.error is not None else (SkippedStepWarning, f"step skipped: {r.skipped}", "")
                for r in results if r.skipped is not None]
    records += [rec for r in done for rec in r.warning_records]
    from ._sampling import run_sample_tables

    # steps numbered 0, 1, 2 ... (no times stored, as read): no rate per unit time is integrated over them,
    # no measured time set against them, no diffusivity ratio taken
    numbered = any(getattr(r, "time_origin", "") == "index" for r in done)
    probes, lines, validation, validation_summary, sample_notes = run_sample_tables(results, options, numbered)
    records += sample_notes
    summary = collapse_warnings(records)
    for category, text in summary:
        warnings.warn(category(text), stacklevel=2)
    steps = pd.DataFrame([r.metrics for r in done])
    if "phase_volume" in steps:
        steps = conservation.drift_columns(steps)
        if numbered:
            steps = steps.drop(columns=["phase_volume_outflow", "phase_volume_drift_closed"], errors="ignore")
    first = [c for c in STEP_COLUMNS if c in steps]
    steps = steps[first + [c for c in steps.columns if c not in first]]
    droplets = pd.DataFrame()
    events = pd.DataFrame(columns=list(EVENT_COLUMNS))
    if "droplets" in options.analyses:
        droplets, events = feed.tables()
    profiles = pd.concat([r.profile for r in done if r.profile is not None], ignore_index=True) \
        if any(r.profile is not None for r in done) else pd.DataFrame()
    audit = {}
    if "interface" in options.analyses and "interface_variance" in steps:
        from ..analysis.interface import diffusion_audit

        cells = steps["interface_cells_across"].to_numpy() if "interface_cells_across" in steps else None
        left_out = steps["bulk_noise_left_out"].to_numpy() if "bulk_noise_left_out" in steps else None
        audit = diffusion_audit(steps["time"].to_numpy(), steps["interface_variance"].to_numpy(),
                                cells_across=cells, physical_diffusivity=options.diffusivity, noise_left_out=left_out,
                                declared_kind=options.interface_kind,
                                times_are_indices=numbered)
    from ._level_set_run import level_set_audit, level_set_findings
    from ._mixture import mixture_findings
    from ._tracking_findings import tracking_findings

    audit = level_set_audit(audit) if options.level_set and audit else audit
    # done is never empty here (no step analysed raised above; the first step is never skipped after)
    found = findings(steps, droplets, audit, options, skipped, dimension=done[0].dimension,
                     on_points=any(getattr(r, "velocity_location", None) == "point" for r in done), numbered=numbered)
    found += mixture_findings(steps, options) + level_set_findings(steps)
    found += tracking_findings(droplets, events, options, bounds=done[0].outline.bounds, steps=steps,
                               numbered=numbered) + [
        Finding("warning", "warning", text, {"category": category.__name__})
        for category, text in summary if not issubclass(category, SkippedStepWarning)]
    mesh = None
    if any(r.contour is not None for r in done):
        last = done[-1]
        mesh = (mesh_pool.find(last.mesh_signature) if mesh_pool is not None else None) or last.outline
    from ._checks import standing_checks
    from ._mixture import mixture_report_arrays

    return MeasureResult(steps=steps, droplets=droplets, events=events, profiles=profiles, audit=audit,
                         flags=[f.text for f in found], skipped=skipped, options=options, results=results,
                         mesh=mesh, warnings=[text for _, text in summary], findings=found, probes=probes,
                         lines=lines, validation=validation, validation_summary=validation_summary,
                         phase_diagram=mixture_report_arrays(steps, options),
                         standing_checks=standing_checks(steps, audit, options, found))


#: overshoot and drift below this share of the domain volume are round-off (c carried in float64
#: through a solver and a file keeps ~1e-16 per cell; 1e-9 leaves room for float32 output and sums)
ROUNDOFF_VOLUME = 1e-9

#: widths are compared within this (relative): the expected cell-data bias is flagged above it
WIDTH_TOLERANCE = 0.03


def _worst(steps, column, how=np.nanmax) -> float:
    values = np.abs(steps[column].to_numpy(dtype=float)) if column in steps and len(steps) else np.zeros(0)
    return float(how(values)) if np.isfinite(values).any() else 0.0


def findings(steps, droplets, audit: dict, options, skipped: list, *, dimension: int | None = None,
             on_points: bool = False, numbered: bool = False) -> list:
    """The findings of the tables (widening interface, drift, overshoot, resolution, skipped steps).

    ``dimension`` is the dimension the steps were measured in (2 or 3; a 2D mesh in 3D space and a
    mesh one cell thick measured per unit depth are 2): the Gibbs-Thomson shift of the bulk
    plateaus' note needs it (None: no expected shift). ``on_points``: a step's boundary flux took the
    velocity on points (an open domain's drift finding then says what that can do). ``numbered``: the
    steps store no times, so an open domain's drift is not judged (its flow is a rate per unit time)
    and no coarsening exponent is fitted.

    Tolerances: overshoot above ``ROUNDOFF_VOLUME`` (1e-9) x the domain volume; drift (in an open
    domain, what the boundary flow does not account for: :func:`._drift_findings.drift_findings`) above
    ``options.drift_tolerance`` relative to the first step's phase volume, never below the same
    round-off floor (1e-9 x domain volume / phase volume); the resolution rule (4 cells across
    0.1 < c < 0.9, on more than 10 % of the interface) only for a diffuse interface.
    """
    found = []
    kind = audit.get("interface_kind", "unknown")
    if audit.get("widening"):
        text = audit.get("verdict") or "interface keeps widening"
        ratio = audit.get("D_ratio")
        if _number(ratio) is not None:
            text += f"; {ratio:.3g} x the physical value"
        found.append(Finding("interface_widening", "warning", text,
                             {"numerical_diffusivity": _number(audit.get("D_num")),
                              "numerical_diffusivity_stderr": _number(audit.get("D_num_stderr")),
                              "diffusivity_ratio": _number(ratio), "width_growth": _number(audit.get("width_growth")),
                              "growth_threshold": 0.05}))
    if audit.get("note"):
        found.append(Finding("diffusivity_per_step", "warning", audit["note"], {}))
    if audit.get("noise_left_out_changes"):
        changes = int(audit["noise_left_out_changes"])
        found.append(Finding("bulk_noise_left_out_changes", "note",
                             f"the bulk noise is left out of the widths at some fitted steps and not at others "
                             f"({changes} change(s); bulk_noise_left_out in steps.csv): interface_width and "
                             "width_threshold_free change estimator there, the variance the diffusivity is fitted "
                             "to does not; compare those widths only between steps of one state",
                             {"changes": changes}))
    open_domain = "open_boundary" in steps and bool(steps["open_boundary"].astype(bool).any())
    domain = _worst(steps, "domain_volume")
    found += drift_findings(steps, options, open_domain, ROUNDOFF_VOLUME * domain, on_points=on_points,
                            numbered=numbered)
    if "overshoot_volume" in steps:
        worst = _worst(steps, "overshoot_volume")
        tolerance = ROUNDOFF_VOLUME * domain
        plateaus = (bulk_plateaus_finding(steps, droplets, options, dimension, kind, tolerance)
                    if worst > tolerance else None)
        if isinstance(plateaus, Finding):
            found.append(plateaus)
        elif worst > tolerance:
            c_min, c_max = float(np.nanmin(steps["c_min"])), float(np.nanmax(steps["c_max"]))
            found.append(Finding("indicator_overshoot", "warning",
                                 f"indicator leaves [0, 1]: overshoot volume up to {worst:.3g} "
                                 f"({worst / domain:.2g} of the domain; c from {c_min:.4g} to {c_max:.4g})"
                                 + (f"; {plateaus}" if plateaus else ""),
                                 {"overshoot_volume": worst, "c_min": c_min, "c_max": c_max,
                                  "tolerance": tolerance}))
    found += [f for f in (resolution_finding(steps, audit, kind), boundary_reach_finding(steps, kind),
                          facing_interface_finding(steps, kind)) if f is not None]
    if "width_cell_data_bias" in steps and kind != "sharp":  # a sharp interface is one to two cells by design
        # over the steps the audit fits, resolved ones (a sharp first step is outside the bias's calibration)
        fitted = np.ones(len(steps), dtype=bool)
        if np.isfinite(audit.get("fit_from_time", np.nan)) and "time" in steps:
            fitted &= steps["time"].to_numpy(dtype=float) >= float(audit["fit_from_time"])
        if "interface_cells_across" in steps:
            fitted &= ~(steps["interface_cells_across"].to_numpy(dtype=float) < 3.5)
        worst = _worst(steps[fitted], "width_cell_data_bias")
        if worst > WIDTH_TOLERANCE:
            found.append(Finding("width_cell_data_bias", "warning",
                                 f"widths on point values rebuilt from cell data read up to {100 * worst:.2g} % high "
                                 "(0.063 (h / eps)^2: too few cells across the interface); width_threshold_free "
                                 "integrates the cell values and carries about a fifth of it",
                                 {"bias": worst, "tolerance": WIDTH_TOLERANCE}))
    coarsening = coarsening_finding(steps, numbered)  # over steps that store no times: no exponent, a note
    if coarsening is not None:
        found.append(coarsening)
    if "free_energy" in steps and len(steps) > 1:
        energy = steps["free_energy"].to_numpy(dtype=float)
        rise = np.diff(energy)
        floor = ROUNDOFF_VOLUME * max(float(np.nanmax(np.abs(energy))), 1e-300)
        if np.nanmax(np.append(rise, -np.inf)) > floor:
            i = int(np.nanargmax(rise))
            found.append(Finding("free_energy_increase", "warning",
                                 f"the free energy increases between steps ({np.count_nonzero(rise > floor)} times, "
                                 f"most by {rise[i]:.3g} after step {int(steps['step'].iat[i])}): a relaxing "
                                 "phase-field run only lowers it", {"largest_increase": float(rise[i]),
                                                                     "tolerance": floor}))
    if len(droplets) and "under_resolved" in droplets:
        n = int(droplets["under_resolved"].sum())
        if n:
            found.append(Finding("droplets_under_resolved", "warning",
                                 f"{n} droplet observations are smaller than 2 cells in radius; their counts are "
                                 "unreliable (Hendrickson, Weymouth & Yue 2020)", {"observations": n}))
    if skipped:
        found.append(Finding("steps_skipped", "warning", f"{len(skipped)} step(s) skipped: " + "; ".join(skipped[:3]),
                             {"count": len(skipped)}))
    return found


def _number(value):
    """A float for the figures (None when missing or not finite)."""
    try:
        value = float(value)
    except (TypeError, ValueError):
        return None
    return value if np.isfinite(value) else None
