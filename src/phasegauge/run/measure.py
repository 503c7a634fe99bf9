"""The measure pipeline: every analysis on every step, in order or in parallel, resumable.

Data flow (see DEVELOPERS.md)::

    series path -> steps (each read once, by the worker that analyses it)
      -> mesh + fields -> indicator -> per-step analyses -> StepResult (small)
      -> in step order: droplet tracking, phase-volume drift, diffusion audit
      -> MeasureResult (DataFrames) -> report folder (optional)

Workers receive the series path and a step index, never arrays, and return a
:class:`StepResult` of scalars and small tables. Steps can run in this process,
in local worker processes, or on a Dask cluster; all three give identical
tables. With an output folder, each finished step is cached there, keyed by the
step file's content hash and the options, so ``resume=True`` finishes an
interrupted run without redoing finished steps.
"""

from __future__ import annotations

import dataclasses
import hashlib
import json
import os
import pickle
import time
import warnings
from dataclasses import dataclass, field

import numpy as np

from ..errors import (AnalysisError, FieldNotFoundError, FieldShapeError, InputError, InputFileNotFound,
                      MeshWarning, OptionError, PhasegaugeError, PhasegaugeWarning, SeriesError, SeriesWarning,
                      SkippedStepWarning, UnsupportedMeshError, collapse_warnings)
from ..model.indicator import make_indicator, normalize_phase, parse_range

__all__ = ["MeasureOptions", "StepResult", "MeasureResult", "measure", "run_step", "ANALYSES"]

#: the analyses ``measure`` can run
ANALYSES = ("interface", "droplets", "mixing", "conservation")

_AXES = {"x": 0, "y": 1, "z": 2}

#: the leading columns of steps.csv, in order (more follow; see the README)
STEP_COLUMNS = ("step", "time", "phase_volume", "phase_volume_drift", "phase_volume_drift_abs",
                "interface_size", "interface_width", "interface_width_cells", "droplet_count",
                "segregation_intensity", "mixing_index", "c_min", "c_max", "overshoot_volume")


@dataclass(frozen=True)
class MeasureOptions:
    """What to measure and how (everything that changes the numbers).

    Parameters
    ----------
    field : str
        Field mapped to the phase indicator.
    value_range : tuple of float
        Field values mapped to c = 0 and c = 1.
    phase : {'upper', 'lower'}
        Which side of the range is the measured phase.
    level : float
        Indicator level of the interface and of droplet labelling, in (0, 1).
    velocity : str or None
        Velocity field (for droplet velocities, prediction in tracking and
        flow-weighted cross sections).
    analyses : tuple of str
        Subset of :data:`ANALYSES`.
    connectivity : {'face', 'point'}
        Cell adjacency for droplet labelling.
    periodic : tuple of str
        Periodic axes (``'x'``, ``'y'``, ``'z'``) for droplet labelling.
    ignore_remerge_within : int
        A breakup that merges again within this many steps is not an event.
    densities : tuple of float or None
        Densities of the measured phase and the other phase, for masses.
    diffusivity : float or None
        Physical diffusivity or mobility to compare the numerical one with.
    box : tuple or None
        ``((xmin, xmax), (ymin, ymax), (zmin, zmax))`` region for mixing figures.
    section_axis : str or None
        Axis of the cross-section profiles (``'x'``...); None for none.
    section_count : int
        Number of planes when ``section_positions`` is not given.
    section_positions : tuple of float or None
    mixing_target : float
        Mixing index that defines the mixing length.
    segregation_scale : bool
        Also compute Danckwerts' scale of segregation (from the autocorrelation
        on a regular resampling; costs an FFT of the domain per step).
    drift_tolerance : float
        Relative phase-volume drift that raises a flag in the report.
    strict : bool
        Fail on a bad step instead of skipping it.
    """

    field: str
    value_range: tuple = (0.0, 1.0)
    phase: str = "upper"
    level: float = 0.5
    velocity: str | None = None
    analyses: tuple = ANALYSES
    connectivity: str = "face"
    periodic: tuple = ()
    ignore_remerge_within: int = 0
    densities: tuple | None = None
    diffusivity: float | None = None
    box: tuple | None = None
    section_axis: str | None = None
    section_count: int = 20
    section_positions: tuple | None = None
    mixing_target: float = 0.9
    segregation_scale: bool = False
    drift_tolerance: float = 1e-3
    strict: bool = False

    def __post_init__(self):
        set_ = object.__setattr__
        if not isinstance(self.field, str) or not self.field:
            raise OptionError("a field name is needed", fix="give --field NAME (see 'phasegauge inspect')")
        set_(self, "value_range", parse_range(self.value_range))
        set_(self, "phase", normalize_phase(self.phase))
        level = float(self.level)
        if not 0.0 < level < 1.0:
            raise OptionError(f"level must lie strictly between 0 and 1, found {level}",
                              fix="the interface is usually at --level 0.5")
        set_(self, "level", level)
        analyses = tuple(self.analyses)
        unknown = [a for a in analyses if a not in ANALYSES]
        if unknown or not analyses:
            raise OptionError(f"unknown analyses {unknown}" if unknown else "no analysis chosen",
                              fix="choose from " + ", ".join(ANALYSES))
        set_(self, "analyses", tuple(a for a in ANALYSES if a in analyses))
        if self.connectivity not in ("face", "point"):
            raise OptionError(f"connectivity must be 'face' or 'point', found {self.connectivity!r}",
                              fix="'face' keeps droplets that touch at a corner apart")
        periodic = tuple(str(a).lower() for a in (self.periodic or ()))
        if any(a not in _AXES for a in periodic):
            raise OptionError(f"periodic axes must be among x, y, z, found {periodic}", fix="for example x,y")
        set_(self, "periodic", periodic)
        if self.section_axis is not None and str(self.section_axis).lower() not in _AXES:
            raise OptionError(f"section axis must be x, y or z, found {self.section_axis!r}",
                              fix="for a channel along x: x")
        if self.section_axis is not None:
            set_(self, "section_axis", str(self.section_axis).lower())
        if int(self.section_count) < 1:
            raise OptionError("section count must be at least 1", fix="for example 20")
        if self.section_positions is not None:
            set_(self, "section_positions", tuple(float(p) for p in self.section_positions))
        if self.densities is not None:
            dens = tuple(float(d) for d in self.densities)
            if len(dens) != 2 or min(dens) < 0:
                raise OptionError(f"densities must be two non-negative numbers, found {self.densities}",
                                  fix="give the measured phase's density then the other's")
            set_(self, "densities", dens)
        if self.diffusivity is not None and not float(self.diffusivity) >= 0:
            raise OptionError(f"diffusivity must be non-negative, found {self.diffusivity}",
                              fix="give the physical diffusivity or mobility in length^2/time")
        if not 0.0 < float(self.mixing_target) <= 1.0:
            raise OptionError("mixing target must lie in (0, 1]", fix="0.9 is common practice")
        if self.box is not None:
            box = tuple(tuple(float(v) for v in pair) for pair in self.box)
            if any(len(p) != 2 or p[0] >= p[1] for p in box):
                raise OptionError(f"box must be (lo, hi) pairs per axis, found {self.box}",
                                  fix="for example ((0, 1), (0, 0.5), (-1, 1))")
            set_(self, "box", box)

    def key(self) -> str:
        """Digest of every option that changes the numbers."""
        text = json.dumps(dataclasses.asdict(self), sort_keys=True, default=str)
        return hashlib.sha256(text.encode()).hexdigest()[:16]

    def step_extra(self, step, indicator):
        """Extra per-step work for a subclass (kept in ``StepResult.extra``); None here."""
        return None


@dataclass
class StepResult:
    """What one step's analyses return to the pipeline (small, picklable)."""

    index: int
    time: float
    path: str
    metrics: dict = field(default_factory=dict)
    droplets: object = None  # DataFrame or None
    label_cells: np.ndarray | None = None
    label_values: np.ndarray | None = None
    label_weights: np.ndarray | None = None
    profile: object = None  # DataFrame or None
    contour: object = None  # Contour of the step (kept for snapshots)
    mesh_signature: str = ""
    messages: list = field(default_factory=list)
    skipped: str | None = None
    seconds: float = 0.0
    file_sha256: str = ""
    reused: bool = False
    error: PhasegaugeError | None = None  # why the step was skipped
    warning_records: list = field(default_factory=list)  # (category, what, where) of the step's warnings
    dimension: int = 0
    extra: object = None  # what options.step_extra returned (e.g. c sampled for a comparison)

    def labels(self, n_cells: int) -> tuple[np.ndarray, np.ndarray]:
        """Droplet label of every cell (-1: none) and the c dV weights of the labelled cells."""
        out = np.full(n_cells, -1, dtype=np.int32)
        weights = np.zeros(n_cells)
        if self.label_cells is not None:
            out[self.label_cells] = self.label_values
            weights[self.label_cells] = self.label_weights
        return out, weights


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
        Findings the report puts first (widening interface, drift, overshoot...).
    skipped : list of str
        Steps left out, with the reason.
    warnings : list of str
        Warnings of the run, each once (repeats over steps collapsed).
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
    mesh: object = field(default=None, repr=False)  # mesh of the last step (for drawing)
    warnings: list = field(default_factory=list)


# ------------------------------------------------------------------ per step
_SERIES = {}


def _open(path):
    from ..io import Series

    series = _SERIES.get(path)
    if series is None:
        if len(_SERIES) > 4:
            for s in _SERIES.values():
                s.close()
            _SERIES.clear()
        with warnings.catch_warnings():  # the series' own warnings are reported once, by measure()
            warnings.simplefilter("ignore", PhasegaugeWarning)
            series = Series(path)
        _SERIES[path] = series
    return series


def _step_file_hash(info) -> str:
    from ..io._inputs import sha256_of

    return sha256_of(info.path)


def _data_stamp(info) -> str:
    """Size and modification time of the HDF5 files an XDMF step reads ('' for other steps).

    Part of the cache key, so that rewritten HDF5 data is not taken from the
    cache (hashing the HDF5 files whole would cost as much as reading them).
    """
    if info.grid is None:
        return ""
    from ..io._meshio_adapter import _hdf5_names

    folder = os.path.dirname(os.path.abspath(info.path))
    stamps = []
    for name in _hdf5_names(info.path):
        full = name if os.path.isabs(name) else os.path.join(folder, name)
        try:
            st = os.stat(full)
            stamps.append(f"{name}:{st.st_size}:{st.st_mtime_ns}")
        except OSError:
            stamps.append(f"{name}:missing")
    return "|".join(stamps)


def _cache_file(cache_dir: str, index: int, key: str) -> str:
    return os.path.join(cache_dir, f"step_{index:06d}_{key}.pkl")


def run_step(path, index: int, options: MeasureOptions, *, cache_dir: str | None = None,
             contour_dir: str | None = None, keep_contour: bool = False) -> StepResult:
    """Read step ``index`` of the series at ``path`` and run every analysis on it.

    This is the unit of parallel work: it takes a path, not arrays. With
    ``cache_dir``, a result cached for the same file content and options is
    returned without recomputing, and a new result is cached atomically.
    A step whose input is bad (:data:`STEP_ERRORS`) returns a result with
    ``skipped`` and ``error`` set, unless ``options.strict``; a failure inside
    the tool raises :class:`AnalysisError` naming the step.
    """
    series = _open(os.fspath(path))
    info = series.steps[index]
    digest = ""
    if cache_dir is not None and os.path.isfile(info.path):
        digest = _step_file_hash(info)
        key = hashlib.sha256(f"{digest}|{info.grid}|{_data_stamp(info)}|{options.key()}".encode()).hexdigest()[:20]
        cached = _cache_file(cache_dir, index, key)
        if os.path.exists(cached):
            try:
                with open(cached, "rb") as handle:
                    result = pickle.load(handle)
                result.reused = True
                if not keep_contour:
                    result.contour = None
                return result
            except Exception:  # a damaged cache entry is recomputed
                pass
    else:
        cache_dir = None  # a missing step file: nothing to key a cache entry by
    start = time.perf_counter()
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        try:
            step = series.read(index)
            result = analyse_step(step, options, contour_dir=contour_dir)
        except STEP_ERRORS as err:
            err = err.at(info.where)
            if options.strict:
                raise err from None
            result = StepResult(index, info.time, info.path, skipped=err.one_line(), error=err)
        except PhasegaugeError:
            raise
        except Exception as exc:  # a failure inside the tool: name the step, keep the cause for --debug
            raise AnalysisError(f"{type(exc).__name__}: {_short(exc)}", where=info.where,
                                fix="rerun with --debug for the traceback and report it") from exc
    if result.skipped is None:  # a skipped step's warnings are about what made it fail
        result.warning_records = [(w.category, getattr(w.message, "what", str(w.message)), info.where)
                                  for w in caught if issubclass(w.category, PhasegaugeWarning)]
    result.messages = [f"{where}: {what}" for _, what, where in result.warning_records]
    result.seconds = time.perf_counter() - start
    result.file_sha256 = digest
    if cache_dir is not None and result.skipped is None:  # a bad step is tried again on resume
        from ..report._files import atomic_write_bytes

        atomic_write_bytes(cached, pickle.dumps(result, protocol=pickle.HIGHEST_PROTOCOL))
    if not keep_contour:
        result.contour = None
    return result


#: errors of one step's input: the step is skipped with a warning (or, with ``strict``, the run stops)
STEP_ERRORS = (InputError, FieldNotFoundError, InputFileNotFound)


def _short(exc: BaseException) -> str:
    text = " ".join(str(exc).split()) or type(exc).__name__
    return text if len(text) <= 160 else text[:157] + "..."


def _wrong_field_option(err) -> bool:
    """True for an error that says the chosen field itself is wrong (not this step's file)."""
    return isinstance(err, FieldNotFoundError) or (isinstance(err, FieldShapeError) and "component" in err.what)


def _check_mesh(mesh, where: str) -> None:
    """Refuse a mesh without volume; warn once per mesh about inverted and zero-size cells."""
    total = mesh.total_measure
    word = "area" if mesh.dimension == 2 else "volume"
    if not np.isfinite(total) or total <= 0:
        raise UnsupportedMeshError(f"the cells have no {word} (total {total:g}): the points coincide or are not "
                                   "finite", where=where, fix="the file is damaged or the mesh collapsed; "
                                   "write the step again")
    if getattr(mesh, "_quality_warned", False):
        return
    mesh._quality_warned = True
    inverted, degenerate = mesh.inverted_cells, mesh.degenerate_cells
    if inverted:
        warnings.warn(MeshWarning(f"{_cells(inverted)} inverted (corners in the opposite order to the rest); "
                                  f"the magnitude of their {word} is used", where=where), stacklevel=3)
    if degenerate:
        text = (f"1 cell has zero {word}; it carries" if degenerate == 1 else
                f"{degenerate} cells have zero {word}; they carry")
        warnings.warn(MeshWarning(f"{text} no phase volume", where=where), stacklevel=3)


def _cells(count: int) -> str:
    return "1 cell is" if count == 1 else f"{count} cells are"


def _velocity(step, options):
    """Velocity of the step on cells and on points, or (None, None).

    Each side is converted only when an analysis of the run uses it: droplets use cell values,
    the boundary flux and cross sections point values.
    """
    if options.velocity is None:
        return None, None
    name = options.velocity
    fields = step.fields
    where = step.info.where
    if name in fields.cell_data:
        values = np.asarray(fields.cell_data[name], dtype=np.float64)
        location = "cell"
    elif name in fields.point_data:
        values = np.asarray(fields.point_data[name], dtype=np.float64)
        location = "point"
    else:
        from ..errors import FieldNotFoundError

        raise FieldNotFoundError(f"velocity field '{name}' not found; fields there: "
                                 + (", ".join(fields.names()) or "none"), where=where,
                                 fix="name the velocity field with --velocity, or leave it out")
    if values.ndim != 2 or values.shape[1] not in (2, 3):
        from ..errors import FieldShapeError

        raise FieldShapeError(f"velocity field '{name}' must have 2 or 3 components, found shape "
                              f"{values.shape}", where=where, fix="name a vector field")
    if values.shape[1] == 2:
        values = np.hstack([values, np.zeros((values.shape[0], 1))])
    mesh = step.mesh
    need_points = "conservation" in options.analyses or (
        "mixing" in options.analyses and options.section_axis is not None)
    if location == "cell":
        return values, (mesh.cell_to_point(values) if need_points else None)
    return (mesh.point_to_cell(values) if "droplets" in options.analyses else None), values


def analyse_step(step, options: MeasureOptions, *, contour_dir: str | None = None) -> StepResult:
    """Run the chosen analyses on one step read into the model (pure apart from contour files)."""
    from ..analysis import conservation, droplets as droplets_mod, interface, mixing

    mesh = step.mesh
    ind = make_indicator(mesh, step.fields, options.field, value_range=options.value_range,
                         phase=options.phase, where=step.info.where)
    if ind.nonfinite == ind.cell.size or not np.isfinite(ind.cell).any():
        raise InputError(f"field '{options.field}' has no finite values (all NaN or Inf)", where=step.info.where,
                         fix="the solver may have diverged at this step")
    _check_mesh(mesh, step.info.where)
    u_cell, u_point = _velocity(step, options)
    result = StepResult(step.index, step.time, step.info.path, mesh_signature=mesh.signature,
                        dimension=int(mesh.dimension))
    result.extra = options.step_extra(step, ind)
    m = {"step": step.index, "time": step.time}
    if "conservation" in options.analyses:
        m.update(conservation.conservation_metrics(mesh, ind, densities=options.densities))
        m.update(conservation.boundedness(mesh, ind))
        if u_point is not None:
            flux = conservation.open_boundary_flux(mesh, u_point, ind, velocity_location="point")
            m.update({k: v for k, v in flux.items() if k != "open_boundary"})
            m["open_boundary"] = bool(flux["open_boundary"])
    contour = None
    if "interface" in options.analyses or "droplets" in options.analyses:
        contour = interface.find_interface(mesh, ind.point, level=options.level)
    if "interface" in options.analyses:
        m.update(interface.interface_metrics(mesh, ind, level=options.level, contour=contour))
        if contour_dir is not None:
            from ..io import write_contour

            name = f"interface_{step.index:06d}.vtu"
            write_contour(contour, os.path.join(contour_dir, name))
    if "droplets" in options.analyses:
        axes = tuple(options.periodic)
        found = droplets_mod.label_droplets(
            mesh, ind.cell, level=options.level, connectivity=options.connectivity, periodic=axes,
            velocity=u_cell, interface_cells=contour.cells, interface_sizes=contour.element_sizes)
        table = found.table
        m["droplet_count"] = int(found.count)
        m["under_resolved_droplets"] = int(table["under_resolved"].sum()) if len(table) else 0
        labelled = np.flatnonzero(found.labels >= 0)
        result.label_cells = labelled.astype(np.int32 if mesh.n_cells < 2 ** 31 else np.int64)  # half the bytes
        result.label_values = found.labels[labelled].astype(np.int32)
        result.label_weights = np.asarray(found.weights)[labelled]
        result.droplets = table
    if "mixing" in options.analyses:
        m.update(mixing.mixing_metrics(mesh, ind.cell, box=options.box))
        if options.segregation_scale:
            m["segregation_scale"] = mixing.segregation_scale(mesh, ind.cell)
        if options.section_axis is not None:
            profile = mixing.cross_sections(mesh, ind, axis=options.section_axis,
                                            positions=options.section_positions,
                                            count=options.section_count, velocity=u_point)
            weighting = "flow" if u_point is not None else "area"
            m["mixing_length"] = mixing.mixing_length(profile, target=options.mixing_target,
                                                      weighting=weighting)
            profile.insert(0, "time", step.time)
            profile.insert(0, "step", step.index)
            result.profile = profile
    m["nonfinite_values"] = int(ind.nonfinite)
    result.metrics = m
    result.contour = contour
    return result


# ------------------------------------------------------------------ executors
def _run_local(path, indices, options, workers, cache_dir, contour_dir, keep, progress):
    """Steps ``indices`` on ``workers`` (at least 2) processes: this one and ``workers - 1`` forked ones.

    This process takes steps itself, the first of ``indices`` first; a feeder
    thread hands each fork its next step the moment the fork returns one (one
    step per fork at a time, so no fork holds queued steps while this process
    idles at the end). Only the forks' results cross between processes.

    The forks start before the first step: each builds the mesh caches for
    itself while this process builds its own on the first step, instead of
    idling until it is done (the caches take a few ordinary steps' time). A
    first step that says the field option is wrong stops the run and is raised.
    """
    from collections import deque
    from concurrent.futures import FIRST_COMPLETED, ProcessPoolExecutor, wait
    import multiprocessing as mp
    import threading

    results = {}
    todo = deque(indices)
    lock = threading.Lock()  # guards the progress bar, shared by this thread and the feeder

    def record(i, res):
        results[i] = res
        with lock:
            progress.update(reused=res.reused)

    def take():
        try:
            return todo.popleft()  # atomic: the feeder and this thread draw from one queue
        except IndexError:
            return None

    def run_one(i):
        res = run_step(path, i, options, cache_dir=cache_dir, contour_dir=contour_dir, keep_contour=i in keep)
        record(i, res)
        return res

    mine = take()  # this process's first step, before any fork takes one
    ctx = mp.get_context("fork") if hasattr(os, "fork") else mp.get_context()
    pending = {}
    failure = []

    def submit(pool):
        i = take()
        if i is not None:
            pending[pool.submit(run_step, path, i, options, cache_dir=cache_dir, contour_dir=contour_dir,
                                keep_contour=i in keep)] = i

    def feed(pool):
        try:
            while pending:
                done, _ = wait(list(pending), return_when=FIRST_COMPLETED)
                for future in done:
                    record(pending.pop(future), future.result())
                    submit(pool)
        except BaseException as exc:  # handed to the main thread, which raises it
            failure.append(exc)
            todo.clear()

    with ProcessPoolExecutor(max_workers=workers - 1, mp_context=ctx) as pool:
        for _ in range(workers - 1):
            submit(pool)
        feeder = threading.Thread(target=feed, args=(pool,), daemon=True)
        feeder.start()
        try:
            first = run_one(mine)
            if first.error is not None and _wrong_field_option(first.error):
                raise first.error
            while (i := take()) is not None:
                run_one(i)
        except BaseException:
            todo.clear()
            for f in list(pending):
                f.cancel()
            raise
        finally:
            feeder.join()
    if failure:
        raise failure[0]
    return [results[i] for i in indices]


def _run_dask(path, indices, options, scheduler, cache_dir, contour_dir, keep, progress):
    try:
        from distributed import Client, LocalCluster, as_completed
    except ImportError:
        raise OptionError("a Dask cluster needs the 'cluster' extra",
                          fix="pip install 'phasegauge[cluster]'") from None
    own_cluster = None
    if scheduler == "local":
        own_cluster = LocalCluster(n_workers=2, threads_per_worker=1, processes=True,
                                   dashboard_address=None)
        client = Client(own_cluster)
    else:
        try:
            client = Client(scheduler, timeout="20s")
        except Exception as exc:
            raise OptionError(f"cannot reach the Dask scheduler at {scheduler} ({exc})",
                              fix="check the address (tcp://host:8786) and that the scheduler runs") from None
    try:
        futures = [client.submit(run_step, path, i, options, cache_dir=cache_dir, contour_dir=contour_dir,
                                 keep_contour=i in keep, pure=False, key=f"phasegauge-step-{i}-{time.time_ns()}")
                   for i in indices]
        order = {f.key: i for f, i in zip(futures, indices)}
        results = {}
        for future in as_completed(futures):
            res = future.result()
            results[order[future.key]] = res
            progress.update(reused=res.reused)
        return [results[i] for i in indices]
    finally:
        client.close()
        if own_cluster is not None:
            own_cluster.close()


def _snapshot_steps(n: int, count: int = 4) -> set:
    if n <= count:
        return set(range(n))
    return {int(round(i)) for i in np.linspace(0, n - 1, count)}


# ------------------------------------------------------------------ the run
def measure(path, field: str | None = None, *, options: MeasureOptions | None = None, out=None,
            workers: int = 1, scheduler: str | None = None, overwrite: bool = False,
            resume: bool = False, progress: bool | None = False, write_contours: bool = True,
            snapshots: int = 4, **option_values) -> MeasureResult:
    """Run every analysis on every step of a series.

    Parameters
    ----------
    path : str or os.PathLike
        Series path (mesh file, XDMF time series, folder, quoted glob, step listing).
    field : str
        Field mapped to the phase indicator (or give ``options``).
    options : MeasureOptions, optional
        All analysis options at once; otherwise built from ``field`` and
        ``option_values`` (the fields of :class:`MeasureOptions`).
    out : str or os.PathLike, optional
        Output folder for tables, plots, contours, report and manifest.
        Without it nothing is written.
    workers : int
        Local worker processes (1: in this process).
    scheduler : str, optional
        Dask scheduler address, or ``'local'`` for a local Dask cluster.
    overwrite, resume : bool
        What to do with an existing output folder (see
        :func:`phasegauge.report.prepare_output_folder`).
    progress : bool or None
        Show progress on stderr (None: only on a terminal).
    write_contours : bool
        Write the interface of every step as a VTK file under ``out/contours``.
    snapshots : int
        Number of steps whose interface the report draws.

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

    if options is None:
        if field is None:
            raise OptionError("a field name is needed", fix="give field='NAME' (see phasegauge.describe_series)")
        options = MeasureOptions(field=field, **option_values)
    elif option_values or field is not None:
        options = dataclasses.replace(options, **({"field": field} if field else {}), **option_values)
    workers = int(workers)
    if workers < 1:
        raise OptionError(f"workers must be at least 1, found {workers}", fix="for example --workers 2")
    path = os.fspath(path)
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        series = Series(path)
    notes = _records(caught)
    try:
        problem = series.time_problem()
        if problem is not None:
            raise problem
        from ..report._files import output_transaction

        with output_transaction(out) as txn:
            return _measure(series, path, options, out, txn, workers=workers, scheduler=scheduler,
                            overwrite=overwrite, resume=resume, progress=progress,
                            write_contours=write_contours, snapshots=snapshots, notes=notes)
    finally:
        series.close()


def _records(caught) -> list:
    """(category, what, where) of the phasegauge warnings among ``caught``."""
    return [(w.category, getattr(w.message, "what", str(w.message)), getattr(w.message, "where", ""))
            for w in caught if issubclass(w.category, PhasegaugeWarning)]


def _measure(series, path, options, out, txn, *, workers, scheduler, overwrite, resume, progress,
             write_contours, snapshots, notes) -> MeasureResult:
    from .progress import Progress

    n = len(series)
    started = time.time()
    cache_dir = contour_dir = None
    if out is not None:
        from ..report._files import prepare_output_folder

        run_key = hashlib.sha256(f"{os.path.abspath(path)}|{options.key()}".encode()).hexdigest()[:16]
        prepare_output_folder(out, overwrite=overwrite, resume=resume, run_key=run_key)
        cache_dir = os.path.join(os.fspath(out), ".cache")
        os.makedirs(cache_dir, exist_ok=True)
        txn.worth_keeping = lambda: any(f.startswith("step_") and f.endswith(".pkl") for f in os.listdir(cache_dir))
        if write_contours and "interface" in options.analyses:
            contour_dir = os.path.join(os.fspath(out), "contours")
            os.makedirs(contour_dir, exist_ok=True)
    keep = _snapshot_steps(n, snapshots)
    bar = Progress(n, "steps", enabled=progress)
    if workers > 1 and not scheduler and n > 1:
        # local forks start at once and build their own mesh caches while this process takes
        # the first step; a field name that is wrong still stops the run after that step
        _close_open_series()  # workers open their own files (HDF5 handles do not cross a fork)
        everything = _run_local(path, list(range(n)), options, min(workers, n), cache_dir, contour_dir, keep, bar)
        bar.close()
        return _finish(series, everything, options, out, started, workers, scheduler, resume, notes)
    # the first step runs here, before any other: a field name that is wrong stops the run at once
    first = run_step(path, 0, options, cache_dir=cache_dir, contour_dir=contour_dir, keep_contour=0 in keep)
    bar.update(reused=first.reused)
    if first.error is not None and _wrong_field_option(first.error):
        raise first.error
    rest = list(range(1, n))
    if rest and scheduler:
        _close_open_series()  # workers open their own files (HDF5 handles do not cross a fork)
    if not rest:
        results = []
    elif scheduler:
        results = _run_dask(path, rest, options, scheduler, cache_dir, contour_dir, keep, bar)
    else:
        results = []
        for i in rest:
            res = run_step(path, i, options, cache_dir=cache_dir, contour_dir=contour_dir, keep_contour=i in keep)
            results.append(res)
            bar.update(reused=res.reused)
    bar.close()
    return _finish(series, [first] + results, options, out, started, workers, scheduler, resume, notes)


def _finish(series, results, options, out, started, workers, scheduler, resume, notes) -> MeasureResult:
    """Assemble the ordered step results and, with ``out``, write the report."""
    result = assemble(series, results, options, notes=notes)
    if out is not None:
        from ..report import write_measure_report
        from ._report_data import measure_report_data

        write_measure_report(out, result, **measure_report_data(series, result), started=started,
                             execution={"workers": workers, "scheduler": scheduler, "resume": resume})
    return result


def _close_open_series() -> None:
    from ..io._meshio_adapter import remember_mesh

    for s in _SERIES.values():
        remember_mesh(getattr(s, "_mesh", None))  # workers forked later reuse it with its caches
        s.close()
    _SERIES.clear()


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


def assemble(series, results: list, options: MeasureOptions, *, notes=()) -> MeasureResult:
    """Series-level work over the ordered step results: tables, tracking, drift, audit, flags.

    Steps whose mesh dimension differs from the first analysed step's are
    skipped (with ``strict``: refused). Warnings of the steps and of the series
    (``notes``: (category, what, where) records) are reported once per kind.
    """
    import pandas as pd

    from ..analysis import conservation

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
    records = list(notes) + _mesh_change_records(series, done)
    records += [(SkippedStepWarning, f"step skipped: {r.error.what}; {r.error.fix}", r.error.where)
                if r.error is not None else (SkippedStepWarning, f"step skipped: {r.skipped}", "")
                for r in results if r.skipped is not None]
    records += [rec for r in done for rec in getattr(r, "warning_records", [])]  # (older caches lack them)
    summary = collapse_warnings(records)
    for category, text in summary:
        warnings.warn(category(text), stacklevel=2)
    findings = [text for category, text in summary if not issubclass(category, SkippedStepWarning)]
    steps = pd.DataFrame([r.metrics for r in done])
    if "phase_volume" in steps:
        steps = conservation.drift_columns(steps)
    first = [c for c in STEP_COLUMNS if c in steps]
    steps = steps[first + [c for c in steps.columns if c not in first]]
    droplets = pd.DataFrame()
    events = pd.DataFrame(columns=["time", "step", "kind", "before", "after", "volume_before",
                                   "volume_after", "closure_error"])
    if "droplets" in options.analyses:
        droplets, events = _track(series, done, options)
    profiles = pd.concat([r.profile for r in done if r.profile is not None], ignore_index=True) \
        if any(r.profile is not None for r in done) else pd.DataFrame()
    audit = {}
    if "interface" in options.analyses and "interface_variance" in steps:
        from ..analysis.interface import diffusion_audit

        audit = diffusion_audit(steps["time"].to_numpy(), steps["interface_variance"].to_numpy(),
                                physical_diffusivity=options.diffusivity)
    flags = _flags(steps, droplets, audit, options, skipped) + findings
    mesh = None
    if any(r.contour is not None for r in done):
        with warnings.catch_warnings():  # reported above, from the steps
            warnings.simplefilter("ignore", PhasegaugeWarning)
            mesh = series.read_mesh(done[-1].index)
    return MeasureResult(steps=steps, droplets=droplets, events=events, profiles=profiles, audit=audit,
                         flags=flags, skipped=skipped, options=options, results=results, mesh=mesh,
                         warnings=[text for _, text in summary])


def _mesh_change_records(series, done) -> list:
    """A series note when the mesh changes between analysed steps."""
    changes = [b.index for a, b in zip(done[:-1], done[1:]) if a.mesh_signature != b.mesh_signature]
    if not changes:
        return []
    count = len({r.mesh_signature for r in done})
    at = ", ".join(str(i) for i in changes[:5]) + (" ..." if len(changes) > 5 else "")
    return [(SeriesWarning, f"the mesh changes between steps (at step {at}; {count} meshes): phase-volume drift "
                            "across a change includes any remapping of the solution", os.fspath(series.path))]


def _known_mesh(signature: str):
    """A mesh this process already built for the steps (its caches are reused), or None."""
    from ..io._meshio_adapter import _MESH_POOL  # meshes set aside before workers forked

    for mesh in [getattr(opened, "_mesh", None) for opened in _SERIES.values()] + list(_MESH_POOL):
        if mesh is not None and mesh.signature == signature:
            return mesh
    return None


def _track(series, done, options):
    from ..analysis.tracking import DropletTracker

    tracker = DropletTracker(ignore_remerge_within=options.ignore_remerge_within, periodic=options.periodic)
    meshes = {}
    for r in done:
        mesh = meshes.get(r.mesh_signature) or _known_mesh(r.mesh_signature)
        if mesh is None:
            with warnings.catch_warnings():  # reported once, from the steps
                warnings.simplefilter("ignore", PhasegaugeWarning)
                mesh = series.read(r.index).mesh
            meshes = {r.mesh_signature: mesh}
        if r.label_cells is None:  # no droplet cells kept
            labels, weights = r.labels(mesh.n_cells)
            tracker.add(r.index, r.time, mesh, labels, r.droplets, weights=weights)
        else:  # the labelled cells as they came (sorted): no arrays over every cell
            tracker._add_cells(r.index, r.time, mesh, r.droplets, r.label_cells, r.label_values, r.label_weights)
    return tracker.result()


def _flags(steps, droplets, audit, options, skipped) -> list:
    flags = []
    if audit.get("widening"):
        d = audit.get("D_num", float("nan"))
        text = f"interface keeps widening: numerical diffusivity {d:.3g}"
        if audit.get("D_ratio") is not None and np.isfinite(audit.get("D_ratio", np.nan)):
            text += f" ({audit['D_ratio']:.3g} x the physical value)"
        flags.append(text)
    open_domain = "open_boundary" in steps and bool(steps["open_boundary"].astype(bool).any())
    if "phase_volume_drift" in steps:
        worst = float(np.nanmax(np.abs(steps["phase_volume_drift"].to_numpy()))) if len(steps) else 0.0
        if worst > options.drift_tolerance:
            text = (f"phase volume drifts by up to {100 * worst:.3g} % (tolerance "
                    f"{100 * options.drift_tolerance:.3g} %)")
            if open_domain and "phase_volume_drift_closed" in steps:
                closed = float(np.nanmax(np.abs(steps["phase_volume_drift_closed"].to_numpy())))
                text += (f"; the domain has open boundaries, so this includes what crossed them: "
                         f"{100 * closed:.3g} % is left after adding the outflow back")
            flags.append(text)
    if open_domain:
        flags.append("the domain has inflow or outflow boundaries: phase-volume drift includes what crossed "
                     "them (phase_volume_drift_closed adds it back)")
    if "overshoot_volume" in steps:
        worst = float(np.nanmax(steps["overshoot_volume"].to_numpy()))
        if worst > 0:
            flags.append(f"indicator leaves [0, 1]: overshoot volume up to {worst:.3g} "
                         f"(c from {np.nanmin(steps['c_min']):.4g} to {np.nanmax(steps['c_max']):.4g})")
    if "under_resolved_interface_fraction" in steps:
        worst = float(np.nanmax(steps["under_resolved_interface_fraction"].to_numpy()))
        if worst > 0.1:
            flags.append(f"interface under-resolved: up to {100 * worst:.3g} % of it has fewer than 4 cells "
                         "across 0.1 < c < 0.9 (common practice)")
    if len(droplets) and "under_resolved" in droplets:
        n = int(droplets["under_resolved"].sum())
        if n:
            flags.append(f"{n} droplet observations are smaller than 2 cells in radius; their counts are "
                         "unreliable (Hendrickson, Weymouth & Yue 2020)")
    if skipped:
        flags.append(f"{len(skipped)} step(s) skipped: " + "; ".join(skipped[:3]))
    return flags
