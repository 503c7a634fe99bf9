"""The measure run: every analysis on every step, in order or in parallel, resumable.

Data flow (see DEVELOPERS.md)::

    series path -> steps (each read once, by the worker that analyses it: run/step.py)
      -> mesh + fields -> indicator -> per-step analyses -> StepResult (small)
      -> in step order: droplet tracking; then phase-volume drift, diffusion audit, findings (run/assemble.py)
      -> MeasureResult (DataFrames) -> report folder (optional)

Steps run in this process, in local worker processes, or on a Dask cluster
(run/executors.py); all three give identical tables. With an output folder,
each finished step is cached there (run/cache.py), keyed by the step file's
content hash and the options, so ``resume=True`` finishes an interrupted run
without redoing finished steps.
"""

from __future__ import annotations

import dataclasses
import hashlib
import os
import time
import warnings
from dataclasses import dataclass, field

import numpy as np

from ..errors import OptionError, PhasegaugeWarning, SeriesError
from ..model._threads import check_threads, thread_count
from .options import ANALYSES, OLD_OPTION_NAMES, MeasureOptions, check_workers, renamed_keywords
from .step import StepResult, run_step

__all__ = ["MeasureOptions", "StepResult", "MeasureResult", "measure", "run_step", "ANALYSES"]


@dataclass
class MeasureResult:
    """Tables of a measure run (pandas DataFrames) and series-level findings.

    Attributes
    ----------
    steps : DataFrame
        One row per step (the columns of ``steps.csv``).
    droplets : DataFrame
        One row per droplet per step, with its track id.
    events : DataFrame
        Breakup, coalescence, complex, appearance and disappearance events.
    profiles : DataFrame
        Cross-section profiles of every step (empty without ``section_axis``).
    audit : dict
        Numerical-diffusion audit of the interface width history.
    flags : list of str
        Findings the report puts first (widening interface, drift, overshoot...): the
        texts of ``findings``.
    skipped : list of str
        Steps left out, with the reason.
    warnings : list of str
        Warnings of the run, each once (repeats over steps collapsed).
    findings : list of Finding
        The findings as records (kind, severity, text, figures), in the order of ``flags``.
    reading : list of str
        What was read, one line each: which copy of a field written on cells and on
        points, and the blocks of multiblock files left out.
    standing_checks : list of dict
        The standing checks of a clean run (widening, phase volume, bounds, resolution), each
        made or not and why (:func:`phasegauge.run._checks.standing_checks`).
    mesh : Mesh or MeshOutline
        The last analysed step's mesh, for drawing: the Mesh when this process
        kept it, else its :class:`~phasegauge.model.outline.MeshOutline` (bounds,
        dimension, plane axes); None when no contour was kept.
    """

    steps: object
    droplets: object
    events: object
    profiles: object
    audit: dict
    flags: list
    skipped: list
    options: MeasureOptions
    results: list = field(default_factory=list, repr=False)
    mesh: object = field(default=None, repr=False)  # mesh (or outline) of the last step, for drawing
    warnings: list = field(default_factory=list)
    findings: list = field(default_factory=list, repr=False)
    reading: list = field(default_factory=list)  # what was read: the field's copy, blocks left out (info lines)
    probes: object = None  # DataFrame of probes.csv, or None without probes
    lines: object = None  # DataFrame of lines.csv, or None without lines
    validation: object = None  # DataFrame of validation.csv, or None without measured values
    validation_summary: object = None  # per time and overall figures of validation.csv's comparison
    phase_diagram: object = None  # binodal and spinodal arrays around the run's temperatures (a run with a model)
    standing_checks: list = field(default_factory=list)  # the standing checks made or not, and why (run/_checks.py)


def measure(path, field: str | None = None, *, options: MeasureOptions | None = None, out=None,
            workers: int = 1, threads: int | None = None, scheduler: str | None = None, overwrite: bool = False,
            resume: bool = False, progress: bool | None = False, contours: bool = True,
            snapshots: int = 4, mesh_pool=None, invocation: dict | None = None, plot_format: str = "png",
            keep_cache: bool = False, progress_label: str = "steps", **option_values) -> MeasureResult:
    """Run every analysis on every step of a series.

    Parameters
    ----------
    path : str or os.PathLike
        Series path (mesh file, XDMF time series, folder, quoted glob, step listing).
    field : str
        Field mapped to the phase indicator (or give ``options``).
    options : MeasureOptions, optional
        All analysis options at once; otherwise built from ``field`` and
        ``option_values`` (the fields of :class:`MeasureOptions`; a wrong name is
        refused with the nearest one, an old name accepted with an
        :class:`~phasegauge.errors.OldNameWarning`).
    out : str or os.PathLike, optional
        Output folder for tables, plots, contours, report and manifest.
        Without it nothing is written.
    workers : int
        Local worker processes (1: in this process).
    threads : int, optional
        Threads of each process for the work that splits into independent parts (a new mesh's
        faces, geometry and split plan, its section operator beside the other analyses, each
        step's planes and the widths' distance searches). Default: the CPUs this process may use (at most 8, or
        the environment variable ``PHASEGAUGE_THREADS``) shared among the local workers; one on
        a Dask cluster's workers. The tables are the same bit for bit on any number. Where the C
        library is glibc, a step run on two or more (a step of at least 500 000 cells) has the
        process's threads allocate in the arenas it has from then on, making none of their own
        (``mallopt(M_ARENA_MAX, 1)``, unless ``MALLOC_ARENA_MAX`` or ``GLIBC_TUNABLES`` set the
        count: see :func:`phasegauge.model._threads.share_one_arena`).
    scheduler : str, optional
        Dask scheduler address, or ``'local'`` for a local Dask cluster.
    overwrite, resume : bool
        What to do with an existing output folder (see
        :func:`phasegauge.report.prepare_output_folder`).
    progress : bool or None
        Show progress on stderr (None: a live line on a terminal, a whole line every few
        seconds otherwise, as in a batch log).
    contours : bool
        Write the interface of every step as a VTK file under ``out/contours``
        (old name ``write_contours``).
    snapshots : int
        Number of steps whose interface the report draws.
    mesh_pool : MeshPool, optional
        Where the meshes of the series are kept (see :class:`phasegauge.io.MeshPool`);
        pass the pool of an earlier run on the same meshes to reuse their cached
        work (local workers inherit it). Default: a pool of this run.
    plot_format : {'png', 'svg', 'pdf'}
        File format of the plots (the report page embeds PNG images either way).
    progress_label : str
        What the progress line counts (``'steps of run A'`` when two runs are measured).
    keep_cache : bool
        Keep ``out/.cache`` (the finished steps) after a complete run; by default it is
        removed once the report is written (an interrupted run always keeps it, for ``resume``).
    invocation : dict, optional
        How the run was asked for, kept in the manifest: ``{'command_line': ...}`` or
        ``{'recipe': text, 'recipe_path': ...}``. Default: ``{'python': 'phasegauge.measure'}``.

    Returns
    -------
    MeasureResult

    Raises
    ------
    PhasegaugeError
        Bad options or output folder; times that do not increase; the chosen
        field missing (or not a scalar) at the first step; with
        ``options.strict`` any bad step; without it, only when no step at all
        can be analysed (the first step's error, with the count).

    Notes
    -----
    Without ``strict``, a step whose input is bad (unreadable or missing
    file, no finite values, a mesh without volume or of another dimension)
    is skipped: one :class:`SkippedStepWarning` per kind of failure, and the
    step is listed in ``MeasureResult.skipped``, the report and the manifest.
    Other warnings (range, NaN values, mesh quality, gaps in the file
    numbering) are issued once per kind, not once per step, and become flags.
    With ``out``, a run that fails puts back the outputs ``overwrite`` had set
    aside, and removes a new folder unless it holds finished steps (see
    :func:`phasegauge.report._files.output_transaction`).
    """
    from ..io import Series

    own = ("path", "field", "options", "out", "workers", "threads", "scheduler", "overwrite", "resume", "progress",
           "contours", "snapshots", "mesh_pool", "invocation", "plot_format", "keep_cache", "progress_label")
    option_values = renamed_keywords(option_values, [f.name for f in dataclasses.fields(MeasureOptions)] + list(own),
                                     old={**OLD_OPTION_NAMES, "write_contours": "contours"}, where="measure()")
    contours = option_values.pop("contours", contours)
    if options is None:
        if field is None:
            raise OptionError("a field name is needed", fix="give field='NAME' (see phasegauge.describe_series)")
        options = MeasureOptions(field=field, **option_values)
    elif option_values or field is not None:
        options = dataclasses.replace(options, **({"field": field} if field else {}), **option_values)
    workers = check_workers(workers)
    threads = thread_count(1 if scheduler else workers) if threads is None else check_threads(threads)
    check_snapshots(snapshots)
    from .executors import check_scheduler

    check_scheduler(scheduler)
    from ..report._files import PLOT_FORMATS

    if plot_format not in PLOT_FORMATS:
        raise OptionError(f"plot format must be one of {', '.join(PLOT_FORMATS)}, found {plot_format!r}",
                          fix="for example --plot-format svg")
    path = os.fspath(path)
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        series = Series(path, mesh_pool=mesh_pool, sort_by_time=options.sort_by_time)
    notes = _records(caught)
    try:
        from ._selection import chosen_steps

        # the chosen steps' times must increase (a restart's repeated steps may be left out)
        indices = chosen_steps(series.times, steps=options.steps, time_from=options.time_from,
                               time_to=options.time_to, every=options.every, where=series.path)
        problem = series.time_problem(indices)
        if problem is not None:
            raise problem
        _check_measured_times(series, indices, options)
        check_output_place(series, out)
        from ..report._files import output_transaction

        with output_transaction(out) as txn:
            return _measure(series, indices, options, out, txn, workers=workers, threads=threads,
                            scheduler=scheduler, overwrite=overwrite, resume=resume, progress=progress,
                            contours=contours, snapshots=snapshots, notes=notes,
                            invocation=invocation or {"python": "phasegauge.measure"},
                            output={"plot_format": plot_format, "keep_cache": bool(keep_cache)},
                            progress_label=progress_label)
    finally:
        series.close()


def check_snapshots(snapshots) -> int:
    """``snapshots`` as a whole number of 0 or more, or an :class:`OptionError`."""
    if isinstance(snapshots, bool) or not isinstance(snapshots, (int, np.integer)) or snapshots < 0:
        raise OptionError(f"snapshots must be a whole number of 0 or more, found {snapshots!r}",
                          fix="4 snapshots is the default; 0 draws none")
    return int(snapshots)


def check_output_place(series, out) -> None:
    """Refuse an output folder that would mix with the input, before anything is written.

    An output folder inside a folder series would be read as input by a later run (its
    contour files are mesh files), and a step file inside the output folder would be
    removed by ``overwrite``.
    """
    if out is None:
        return
    target = os.path.realpath(os.fspath(out))

    def inside(path, folder):
        return path == folder or path.startswith(folder.rstrip(os.sep) + os.sep)

    if os.path.isdir(series.path) and inside(target, os.path.realpath(series.path)):
        raise OptionError("the output folder is inside the input folder, where a later run would read its "
                          "files as steps", where=os.fspath(out), fix="choose an output folder outside "
                          f"{series.path}")
    for step_file in series.files:
        if inside(os.path.realpath(step_file), target):
            raise OptionError(f"the output folder holds the input file {os.path.basename(step_file)}, which "
                              "--overwrite would remove", where=os.fspath(out),
                              fix="choose an output folder that holds no input")


def _records(caught) -> list:
    """(category, what, where) of the phasegauge warnings among ``caught``; how cells were read
    (:class:`~phasegauge.errors.ReadingNote`, met when the series' files are looked at) is said by the steps."""
    from ..errors import ReadingNote

    return [(w.category, getattr(w.message, "what", str(w.message)), getattr(w.message, "where", ""))
            for w in caught if issubclass(w.category, PhasegaugeWarning) and not issubclass(w.category, ReadingNote)]


def _measure(series, indices, options, out, txn, *, workers, threads, scheduler, overwrite, resume, progress,
             contours, snapshots, notes, invocation, output, progress_label="steps") -> MeasureResult:
    from .assemble import TrackingFeed, assemble
    from .cache import StepCache, code_digest
    from .executors import run_steps
    from .progress import Progress
    from .step import StepRunner

    started = time.time()
    n = len(indices)
    cache = contour_dir = None
    if out is not None:
        from ..report._files import prepare_output_folder

        run_key = hashlib.sha256(f"{os.path.abspath(series.path)}|{options.key()}".encode()).hexdigest()[:16]
        writes_contours = bool(contours and "interface" in options.analyses)
        prepare_output_folder(out, overwrite=overwrite, resume=resume, run_key=run_key, code=code_digest(),
                              contours=writes_contours)
        cache = StepCache(os.path.join(os.fspath(out), ".cache"), options.key())
        txn.worth_keeping = cache.holds_finished_steps
        if writes_contours:
            contour_dir = os.path.join(os.fspath(out), "contours")
            os.makedirs(contour_dir, exist_ok=True)
    runner = StepRunner(series.path, options, cache=cache, contour_dir=contour_dir,
                        keep={indices[k] for k in snapshot_steps(n, snapshots)}, series=series, threads=threads)
    feed = TrackingFeed(options, indices, cache=cache)
    before = input_stamps(series)
    bar = Progress(n, progress_label, enabled=progress)
    plots = out is not None and (n > 1 or bool(snapshots and "interface" in options.analyses))
    drawing = _DrawingImport(bar) if plots and _spare_core(workers, scheduler) else None
    try:
        results = run_steps(runner, indices, workers=workers, scheduler=scheduler, feed=feed,
                            progress=drawing or bar)
    finally:
        if drawing is not None:
            drawing.join()
    bar.close()
    _check_read_times(results, options)
    changed = [path for path, stamp in input_stamps(series).items() if before.get(path) != stamp]
    if changed:
        raise SeriesError(f"{len(changed)} input file{'s' if len(changed) != 1 else ''} changed while the run read "
                          f"{'them' if len(changed) != 1 else 'it'} ({_short_list(changed)}), so the steps may "
                          "mix old and new content", where=series.path,
                          fix="run again once the solver has finished writing (--overwrite)")
    if contour_dir is not None:
        _write_contour_listing(contour_dir, results)
    result = assemble(series, results, options, notes=notes, feed=feed, mesh_pool=runner.mesh_pool)
    from ._report_data import series_record

    record = series_record(series)  # (the first .vtm's blocks read once)
    result.reading = _reading(record, results)
    if out is not None:
        from ..report import write_measure_report
        from ._report_data import measure_report_data

        write_measure_report(out, result, **measure_report_data(series, result, record), started=started,
                             execution={"workers": workers, "threads": threads, "scheduler": scheduler,
                                        "resume": resume, "contours": bool(contours), "invocation": invocation,
                                        **output})
        if not output["keep_cache"]:
            import shutil

            shutil.rmtree(os.path.join(os.fspath(out), ".cache"), ignore_errors=True)
    return result


class _DrawingImport:
    """The run's progress display, which also starts importing the report's plotting (matplotlib) on a
    background thread when the first step is done.

    The import (about 0.4 s) then overlaps the other steps instead of delaying the report, where the
    run leaves a core free (:func:`_spare_core`). It starts after the first step, not before: local
    workers are forked when the run starts, and a fork must not copy an import half done. Under the
    GIL the two threads take turns where both run Python code; only the steps' numpy work leaves the
    interpreter free for the import.
    """

    def __init__(self, progress):
        self.progress, self.thread = progress, None

    def update(self, n: int = 1, *, reused: bool = False) -> None:
        if self.thread is None:
            import threading

            self.thread = threading.Thread(target=_import_drawing, name="import-plotting", daemon=True)
            self.thread.start()
        self.progress.update(n, reused=reused)

    def join(self) -> None:
        """Wait for the import to end (before the report draws, or before an error leaves the run)."""
        if self.thread is not None:
            self.thread.join()


def _spare_core(workers: int, scheduler) -> bool:
    """Whether this machine has a core the run's steps leave free, for the plotting import to use.

    A local run of ``workers`` processes keeps that many cores busy; the import only slows it when it
    has to share them (measured on 2 cores with 2 workers). A Dask run on a remote scheduler leaves this
    process waiting; a ``'local'`` Dask cluster takes every core. A run in a child process (a campaign
    measures its runs side by side in forked processes) shares the cores with its siblings: no import.
    Nor when other programs keep the cores busy (the load average): on a 2-core machine under a load of
    3 to 4 a serial run was no faster with the import alongside.
    """
    import multiprocessing

    if multiprocessing.parent_process() is not None:
        return False
    if scheduler:
        return scheduler != "local"
    cores = len(os.sched_getaffinity(0)) if hasattr(os, "sched_getaffinity") else (os.cpu_count() or 1)
    # other programs' work: the last minute's load average (where the system gives one; os.getloadavg
    # raises OSError where it is unobtainable, e.g. without /proc)
    try:
        busy = os.getloadavg()[0] if hasattr(os, "getloadavg") else 0.0
    except OSError:
        busy = 0.0
    return workers + busy < cores


def _import_drawing() -> None:
    from ..report._plots import import_drawing

    try:
        import_drawing()
    except Exception:  # the report imports again in the run's own thread, and any error shows there
        pass


#: the step listing written beside the contour files
CONTOUR_LISTING = "interface.steps"


def _write_contour_listing(contour_dir: str, results) -> None:
    """``contours/interface.steps``: a ``time,path`` line per contour file, so the folder reads as a series."""
    from ..report._files import atomic_write_text

    lines = ["time,path"]
    for r in sorted(results, key=lambda r: r.index):
        name = f"interface_{r.index:06d}.vtu"
        if r.skipped is None and np.isfinite(r.time) and os.path.exists(os.path.join(contour_dir, name)):
            lines.append(f"{float(r.time)!r},{name}")
    atomic_write_text(os.path.join(contour_dir, CONTOUR_LISTING), "\n".join(lines) + "\n")


def _reading(record: dict, results) -> list:
    """Info lines on what the run read: a field's copy when it has two, multiblock blocks left out (polygon
    data, in the series' ``record``, and volume-format blocks of faces:
    :class:`~phasegauge.errors.BlocksLeftOutNote`), how cells were read (the other
    :class:`~phasegauge.errors.ReadingNote` lines, each once)."""
    from ._report_data import blocks_left_out, cells_read_as

    lines = []
    sources = [r.field_source for r in results if getattr(r, "field_source", "") and r.skipped is None]
    if sources and "exists too" in sources[0]:
        lines.append(f"read {sources[0]}")
    left_out = blocks_left_out(record, results)  # polygon data, and blocks of faces in a volume format, alike
    if left_out:
        what = "spatial collection pieces" if record.get("kind") == "collection" else "multiblock blocks"
        lines.append(f"{what} left out: {', '.join(left_out)} (boundary patches: the volume {what.split()[-1]} are "
                     "read)")
    return lines + cells_read_as(results)


def _check_measured_times(series, indices, options) -> None:
    """Refuse measured values with times against steps numbered 0, 1, 2 ... (files that store no time):
    the measured times would be read as step numbers. The first chosen file is read whole first (not an
    XDMF file's): a time it stores beyond its head is found when it is read."""
    from ._selection import numbered_steps

    if not any(np.isfinite(entry[4]) for entry in options.measured) or not numbered_steps(series, indices):
        return
    raise SeriesError("the measured values have times, but the steps' files store none, so the steps are numbered "
                      "0, 1, 2 ...: the measured times would be read as step numbers", where=series.path,
                      fix="give a 'time,path' listing of the steps as the path (recipe: path), or leave the time "
                          "column out of the measured file")


def _check_read_times(results, options) -> None:
    """Refuse step times that do not increase once the steps are read.

    Discovery checks the times it can see cheaply; a time found only by reading
    the whole file (a step that had none before) is checked here, so a run never
    writes drift, tracking or the audit over steps out of order.
    """
    from ..errors import SeriesError
    from ..io._series_gaps import two_times

    done = [r for r in results if r.skipped is None and np.isfinite(r.time)]
    stored = [r for r in done if getattr(r, "time_origin", "") in ("file", "xdmf")]
    other = [r for r in done if getattr(r, "time_origin", "") in ("index", "folder_name")]
    if stored and other:  # a time found only by reading beside steps without one: no one time axis
        said = "its folder's name" if other[0].time_origin == "folder_name" else "its step number"
        raise SeriesError(f"some steps store their times and others do not (step {other[0].index} takes {said}; "
                          f"step {stored[0].index} stores {stored[0].time:.6g}): they would be one time axis",
                          where=f"{other[0].path}, step {other[0].index}",
                          fix="write the time into every file or give a 'time,path' listing")
    for before, after in zip(done[:-1], done[1:]):
        if after.time <= before.time:
            fix = ("remove the repeated step" if after.time == before.time else
                   "rename the files so their names sort like their times, give a 'time,path' listing, or order "
                   "the steps by their file times with --sort-by-time (recipe: sort_by_time = true)")
            if options.sort_by_time:
                fix = "some times were found only by reading the files: give a 'time,path' listing"
            shown = two_times(before.time, after.time)
            raise SeriesError(f"times do not increase: step {after.index} has time {shown[1]} after "
                              f"{shown[0]} at step {before.index} ({before.path})",
                              where=f"{after.path}, step {after.index}", fix=fix)


def input_stamps(series) -> dict:
    """Size and modification time of every file the series reads (step files and their data files)."""
    from ..io import step_data_files

    paths = list(series.files)
    for path in series.files:
        try:
            paths.extend(step_data_files(path))
        except Exception:  # a file that cannot be parsed is reported by its step
            pass
    stamps = {}
    for path in dict.fromkeys(paths):
        try:
            st = os.stat(path)
            stamps[path] = (st.st_size, st.st_mtime_ns)
        except OSError:
            stamps[path] = None
    return stamps


def _short_list(paths, limit: int = 3) -> str:
    names = [os.path.basename(p) for p in paths[:limit]]
    return ", ".join(names) + (f" and {len(paths) - limit} more" if len(paths) > limit else "")


def snapshot_steps(n: int, count: int = 4) -> set:
    """The ``count`` steps (evenly spread) whose interface the report draws."""
    if n <= count:
        return set(range(n))
    return {int(round(i)) for i in np.linspace(0, n - 1, count)}
