"""Campaigns: one case measured over a sweep of a parameter (a recipe with ``[[runs]]``).

Every run is measured with the recipe's options into its own folder under the
output folder (``run_<label>``); ``campaign.csv`` holds one row per run with its
summary figures, and the report draws each against the parameter. With several
workers the runs are measured side by side in forked processes. A resumed
campaign reuses the runs that finished and resumes the ones that were interrupted.
"""

from __future__ import annotations

import hashlib
import json
import os
import re
import time
import warnings
from dataclasses import dataclass, field

import numpy as np

from ..errors import OptionError, PhasegaugeWarning, SeriesWarning

__all__ = ["CampaignResult", "run_campaign", "campaign_summary", "campaign_warning", "SUMMARY_FIGURES", "run_label"]

#: campaign.csv figures taken from each run: (column, steps.csv column or audit key, how): "last" the value at
#: the run's last measured step (whose time is ``time``), "any" whether any step has it, "audit" the run's
#: diffusion audit
SUMMARY_FIGURES = (("time", "time", "last"),
                   ("mixing_length", "mixing_length", "last"), ("mixing_length_status", "mixing_length_status", "last"),
                   ("mixing_index", "mixing_index", "last"),
                   ("phase_volume_drift", "phase_volume_drift", "last"),
                   ("phase_volume_drift_closed", "phase_volume_drift_closed", "last"),
                   ("open_boundary", "open_boundary", "any"),
                   ("interface_width", "interface_width", "last"), ("droplet_count", "droplet_count", "last"),
                   ("D_num", "D_num", "audit"), ("D_num_stderr", "D_num_stderr", "audit"),
                   ("D_num_significant", "significant", "audit"))


@dataclass
class CampaignResult:
    """The campaign table (a DataFrame, one row per run) and each run's measure result (None when reused)."""

    table: object
    runs: list = field(default_factory=list)
    parameter: str = "parameter"
    unit: str = ""


def run_label(entry: dict, k: int) -> str:
    """The folder-safe label of run ``k`` (its ``label``, else its number)."""
    label = str(entry.get("label") or f"{k:03d}")
    return re.sub(r"[^A-Za-z0-9_.-]+", "_", label)


def campaign_summary(steps, audit: dict, skipped=()) -> dict:
    """The summary figures of one run (see :data:`SUMMARY_FIGURES`); NaN where the run has none.

    ``skipped`` lists the steps the run left out (``MeasureResult.skipped``): their number is
    ``skipped_steps``; ``steps`` the number it measured. ``open_boundary`` and ``D_num_significant``
    are True or False (None where the run has no velocity or no diffusion audit); ``mixing_length_status``
    is a word of :data:`~phasegauge.analysis.mixing.MIXING_LENGTH_STATUSES` (None where the run has no
    mixing length).
    """
    out = {}
    for column, source, how in SUMMARY_FIGURES:
        if how == "audit":
            value = (audit or {}).get(source)
        elif steps is None or source not in steps or not len(steps):
            value = None
        elif how == "any":
            value = bool(steps[source].astype(bool).any())
        else:
            value = steps[source].iloc[-1]
        if column == "mixing_length_status":  # a word, read back from steps.csv as a word or, empty, as NaN
            out[column] = value if isinstance(value, str) and value else None
        elif isinstance(value, (bool, np.bool_)):
            out[column] = bool(value)
        elif column in ("open_boundary", "D_num_significant"):
            out[column] = None
        else:
            out[column] = float(value) if value is not None and np.isfinite(float(value)) else float("nan")
    out["steps"] = 0 if steps is None else int(len(steps))
    out["skipped_steps"] = len(skipped or ())
    return out


def _finished(folder: str):
    """(steps table, audit, skipped steps) of a finished measure run in ``folder``, or None."""
    import pandas as pd

    from ..report._files import RUN_MARKER

    try:
        with open(os.path.join(folder, RUN_MARKER), encoding="utf-8") as handle:
            if json.load(handle).get("state") != "complete":
                return None
        steps = pd.read_csv(os.path.join(folder, "steps.csv"))
        audit = {}
        path = os.path.join(folder, "diffusion_audit.json")
        if os.path.isfile(path):
            with open(path, encoding="utf-8") as handle:
                audit = json.load(handle)
        with open(os.path.join(folder, "manifest.json"), encoding="utf-8") as handle:
            skipped = json.load(handle).get("skipped_steps") or []
        return steps, audit, skipped
    except (OSError, ValueError):
        return None


def _time_origin(folder: str) -> str:
    """Where a finished run's times came from (its manifest's ``series.time_origin``), "" when unknown."""
    try:
        with open(os.path.join(folder, "manifest.json"), encoding="utf-8") as handle:
            return str((json.load(handle).get("series") or {}).get("time_origin", ""))
    except (OSError, ValueError, AttributeError):
        return ""


def campaign_warning(table, times) -> str | None:
    """One line on the runs whose figures are not of the same time as the others', or None.

    A run that skipped steps, and runs whose last measured time (``time``) ends before the latest
    one's by more than the span reach of the runs' outputs
    (:func:`~phasegauge.analysis.convergence.span_reach`; at least 1e-12 of the time, for round-off).
    ``times``: every run's output times (its
    steps.csv ``time``). A run of one step that skipped none (a steady result) is not compared.
    """
    from ..analysis.convergence import covered_span, span_reach

    parts = []
    skipped = [(run, int(n)) for run, n in zip(table["run"], table["skipped_steps"]) if n]
    if skipped:
        parts.append(f"{_runs(len(skipped))} skipped steps (" + ", ".join(f"{run}: {n}" for run, n in skipped) + ")")
    compared = [(run, float(t)) for run, t, n, k in zip(table["run"], table["time"], table["steps"],
                                                         table["skipped_steps"]) if np.isfinite(t) and (n > 1 or k)]
    early = []
    if compared:
        latest = max(t for _, t in compared)
        first, _ = covered_span([latest], span_reach(*times))  # the latest time less the span's reach
        early = [(run, t) for run, t in compared if t < first]
        if early:
            # times written as the CSV tables write them (repr: the shortest text that reads back the same float)
            parts.append(f"{_runs(len(early))} end{'s' if len(early) == 1 else ''} before t = {latest!r}, the "
                         "latest run's last time (" + ", ".join(f"{run}: {t!r}" for run, t in early) + ")")
    if not parts:
        return None
    so = "their figures are of an earlier time than the others'" if early else "their figures leave those steps out"
    return (" and ".join(parts) + f": {so} (campaign.csv columns time and skipped_steps); write the skipped "
            "steps again, or end every run at one time ([input] time_to)")


def _runs(n: int) -> str:
    return f"{n} run{'s' if n != 1 else ''}"


def run_campaign(runs: list, options, *, out, parameter: str = "parameter", unit: str = "",
                 overwrite: bool = False, resume: bool = False, workers: int = 1, threads: int | None = None,
                 progress=False, contours: bool = True, snapshots: int = 4, scheduler: str | None = None,
                 plot_format: str = "png", keep_cache: bool = False) -> CampaignResult:
    """Measure every run of a campaign and tabulate its summary figures against the parameter.

    Parameters
    ----------
    runs : list of dict
        Each ``path`` (a series), ``parameter`` (a number) and optional ``label``.
    options : MeasureOptions
        The options every run is measured with.
    out : str or os.PathLike
        The campaign folder: ``campaign.csv``, plots, ``manifest.json`` and one
        ``run_<label>`` measure folder per run.
    parameter, unit : str
        Name and unit of the swept parameter (column names and plot labels).
    overwrite, resume : bool
        As for ``measure``; a resumed campaign takes the finished runs from their
        folders and resumes the unfinished ones (reusing their finished steps).
    workers : int
        Local worker processes for the whole campaign. Runs are measured side by
        side, one process each and each run serial inside, up to ``workers`` at a
        time; when fewer runs are to measure than workers, each run gets
        ``workers // runs`` processes for its steps (fixed at the start). ``workers=1`` measures the runs
        one after another in this process. The tables do not depend on it.
    threads : int, optional
        Threads of each process (as for ``measure``); by default the CPUs shared among every
        process measuring at once.
    progress : bool or None
        As for ``measure``; the line names the run (or, side by side, the runs
        being measured).
    contours, snapshots, scheduler, plot_format, keep_cache
        As for ``measure``, for every run. With a Dask ``scheduler`` the runs are
        measured one after another, each on the cluster.

    Returns
    -------
    CampaignResult
        ``runs`` holds each run's :class:`~phasegauge.run.measure.MeasureResult`
        (without its ``mesh`` when the run was measured in a worker process), or
        None for a run taken from its finished folder.

    Raises
    ------
    OptionError
        No runs, repeated labels, a parameter that is no finite number, bad workers.
    PhasegaugeError
        The first run that fails, as ``measure`` raises it; runs that finished stay
        in their folders for ``resume``.
    """
    from ..report._files import output_transaction, prepare_output_folder
    from .cache import code_digest
    from ..model._threads import check_threads
    from .options import check_workers

    if not runs:
        raise OptionError("a campaign needs at least one run", fix="add [[runs]] tables with path and parameter")
    labels = [run_label(r, k) for k, r in enumerate(runs)]
    if len(set(labels)) != len(labels):
        raise OptionError("run labels repeat", fix="give every [[runs]] table its own label")
    for r in runs:
        value = r.get("parameter")
        if isinstance(value, bool) or not isinstance(value, (int, float)) or not np.isfinite(value):
            raise OptionError(f"every run needs a finite number as parameter, found {value!r}",
                              fix="write parameter = 0.5 in each [[runs]] table")
    workers = check_workers(workers)
    if threads is not None:
        check_threads(threads)
    started = time.time()
    key = hashlib.sha256(json.dumps([[os.path.abspath(r["path"]), float(r["parameter"]), label]
                                     for r, label in zip(runs, labels)]).encode()
                         + options.key().encode()).hexdigest()[:16]
    folders = [os.path.join(os.fspath(out), f"run_{label}") for label in labels]
    _check_series([(r, label) for r, label, f in zip(runs, labels, folders)  # those still to measure
                   if not (resume and os.path.isdir(f) and _finished(f) is not None)], options)
    with output_transaction(out) as txn:
        prepare_output_folder(out, overwrite=overwrite, resume=resume, run_key=key, code=code_digest(),
                              contours=bool(contours and "interface" in options.analyses))
        if txn is not None:  # a failed run leaves the finished ones for --resume
            txn.worth_keeping = lambda: any(_finished(f) is not None for f in folders)
        done = [_finished(f) if resume else None for f in folders]
        todo = [k for k, d in enumerate(done) if d is None]
        jobs = [_RunJob(k, labels[k], runs[k]["path"], folders[k], resume and os.path.isdir(folders[k]))
                for k in todo]
        settings = dict(options=options, contours=contours, snapshots=snapshots, scheduler=scheduler,
                        plot_format=plot_format, keep_cache=keep_cache, threads=threads)
        results = [None] * len(runs)
        if workers > 1 and len(jobs) > 1 and not scheduler:
            measured = _side_by_side(jobs, settings, workers=workers, progress=progress)
        else:
            measured = _one_after_another(jobs, settings, workers=workers, progress=progress, total=len(runs))
        for k, res in measured.items():
            results[k] = res
            done[k] = (res.steps, res.audit, res.skipped)
        rows = []
        for k, (r, label) in enumerate(zip(runs, labels)):
            steps, audit, skipped = done[k]
            rows.append({"run": label, "parameter": float(r["parameter"]), "path": os.path.abspath(r["path"]),
                         "folder": f"run_{label}", **campaign_summary(steps, audit, skipped)})
        table = _table(rows)
        found = campaign_warning(table, [_times(steps) for steps, _, _ in done])
        notes = []
        if found is not None:
            warning = SeriesWarning(found, where=os.fspath(out))
            warnings.warn(warning, stacklevel=2)
            notes.append(warning.one_line())
        from ._report_data import package_version
        from ..report._campaign_report import write_campaign_report

        write_campaign_report(out, table, parameter=parameter, unit=unit, version=package_version(), started=started,
                              warnings=notes, sections="mixing" in options.analyses and bool(options.section_axis),
                              time_origins=[_time_origin(f) for f in folders])
    return CampaignResult(table=table, runs=results, parameter=parameter, unit=unit)


@dataclass(frozen=True)
class _RunJob:
    """One run still to measure: its number, label, series, folder and whether to resume it."""

    index: int
    label: str
    path: str
    folder: str
    resume: bool


def _check_series(runs: list, options) -> None:
    """Find the steps of every run to measure (``(run, label)`` pairs) before any is measured: a run whose
    series cannot be found or listed is refused with its label, before the others' work (the steps
    themselves are read when measured; a resumed campaign's finished runs are not looked at)."""
    from ..errors import PhasegaugeError
    from ..io import Series

    for r, label in runs:
        try:
            Series(r["path"], sort_by_time=options.sort_by_time).close()
        except PhasegaugeError as err:
            raise type(err)(err.what, where=f"[[runs]] '{label}', {err.where or r['path']}", fix=err.fix) from None


def _measure_job(job: _RunJob, settings: dict, *, workers: int, progress, progress_label: str):
    """Measure one run; its warnings name the run (``run LABEL: ...``), as every run's files may have the
    same names."""
    from .measure import measure

    caught = []
    try:
        with warnings.catch_warnings(record=True) as caught:
            warnings.simplefilter("always")
            return measure(job.path, out=job.folder, workers=workers, resume=job.resume, progress=progress,
                           progress_label=progress_label, **settings)
    finally:
        _warn_with_label(caught, job.label)


def _warn_with_label(caught, label: str) -> None:
    """Issue the ``caught`` warnings again (after the ``catch_warnings`` block), phasegauge's naming the run."""
    for w in caught:
        message = w.message
        if isinstance(message, PhasegaugeWarning):
            where = f"run {label}" + (f", {message.where}" if message.where else "")
            warnings.warn(type(message)(message.what, where=where), stacklevel=3)
        else:
            warnings.warn_explicit(message, w.category, w.filename, w.lineno)


def _one_after_another(jobs, settings, *, workers, progress, total) -> dict:
    """Measure the runs in this process, one after another, each with ``workers`` processes."""
    measured = {}
    for job in jobs:
        label = f"run {job.label} ({job.index + 1}/{total}): steps"
        measured[job.index] = _measure_job(job, settings, workers=workers, progress=progress, progress_label=label)
    return measured


def _side_by_side(jobs, settings, *, workers, progress) -> dict:
    """Measure the runs in forked processes, up to ``workers`` at a time (see :func:`run_campaign`).

    Each run's process sends back its result (without the mesh) or its error. The
    first error stops the other runs (their folders stay resumable) and is raised.
    """
    import multiprocessing as mp
    from multiprocessing.connection import wait

    from ..model._threads import thread_count
    from .progress import Progress

    ctx = mp.get_context("fork") if hasattr(os, "fork") else mp.get_context()
    side = min(workers, len(jobs))
    inner = max(1, workers // len(jobs))
    # the CPUs shared among every process measuring at once, as a single run shares them
    if settings["threads"] is None:
        settings = {**settings, "threads": thread_count(side * inner)}
    queue = list(jobs)
    running = {}  # connection -> (job, process)
    measured = {}
    bar = Progress(len(jobs), "runs", enabled=progress)

    def show():
        names = ", ".join(job.label for job, _ in running.values())
        bar.label = "runs" + (f" (measuring {names})" if names else "")

    try:
        while queue or running:
            while queue and len(running) < side:
                job = queue.pop(0)
                receive, send = ctx.Pipe(duplex=False)
                process = ctx.Process(target=_serve_run, args=(job, settings, inner, send, os.getpid()),
                                      name=f"phasegauge-run-{job.label}", daemon=False)
                process.start()
                send.close()
                running[receive] = (job, process)
                show()
                bar.update(0)
            for conn in wait(list(running)):
                job, process = running.pop(conn)
                try:
                    kind, payload, trace = conn.recv()
                except (EOFError, OSError):
                    kind, payload, trace = "lost", None, ""
                conn.close()
                process.join()
                if kind == "error":
                    from .executors import WorkerTraceback

                    raise payload from WorkerTraceback(trace)
                if kind == "lost":
                    from ..errors import AnalysisError

                    raise AnalysisError(f"the process measuring run {job.label} ended without a result "
                                        f"(exit status {process.exitcode})", where=job.folder,
                                        fix="rerun with --resume (and fewer workers if memory ran out)")
                measured[job.index] = payload
                show()
                bar.update()
    finally:
        for conn, (job, process) in running.items():  # an error or an interrupt: stop the others
            process.terminate()
        for conn, (job, process) in running.items():
            process.join()
            conn.close()
        bar.close()
    return measured


def _serve_run(job: _RunJob, settings: dict, workers: int, conn, parent: int) -> None:
    """A forked campaign worker: measure one run and send ``('result', MeasureResult, '')`` or
    ``('error', exception, traceback text)``."""
    import traceback

    from .executors import _die_with_parent, _portable

    _die_with_parent(parent)
    try:
        result = _measure_job(job, settings, workers=workers, progress=False, progress_label="steps")
        result.mesh = None  # the parent draws nothing: the run's report is written
        message = ("result", result, "")
    except BaseException as exc:  # handed to the parent, which raises it
        message = ("error", _portable(exc), traceback.format_exc())
    try:
        conn.send(message)
    finally:
        conn.close()


def _times(steps):
    """A run's output times (its steps table's ``time``), empty without one."""
    if steps is None or "time" not in steps:
        return np.empty(0)
    return steps["time"].to_numpy(dtype=float)


def _table(rows):
    import pandas as pd

    table = pd.DataFrame(rows)
    return table.sort_values("parameter", kind="stable", ignore_index=True)
