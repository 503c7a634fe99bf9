"""One step: read it, run every chosen analysis on it, hand back a small result.

:func:`analyse_step` runs the analyses on a step already read into the model.
:class:`StepRunner` is the unit of parallel work: it holds one series open (its
files stay open between steps, its meshes are kept in a :class:`MeshPool`) and
turns a step index into a :class:`StepResult` of scalars and small tables,
taking it from the resume cache when it can. Workers receive a runner and step
indices, never arrays.
"""

from __future__ import annotations

import os
import time
import warnings
from contextlib import nullcontext
from dataclasses import dataclass, field

import numpy as np

from ..errors import (AnalysisError, FieldNotFoundError, InputError, InputFileNotFound, MeshWarning,
                      NonFiniteWarning, PhasegaugeError, PhasegaugeWarning, ReadingNote, SeriesError,
                      UnsupportedMeshError, short_text)
from ..model.axes import AXIS_INDEX
from ..model.fields import vector_field
from ..model.indicator import make_indicator
from ..model.outline import MeshOutline
from ..model._overlaps import overlap_problem
from ..model._threads import Beside, prepare_mesh
from ._sampling import sample_step

__all__ = ["StepResult", "StepRunner", "analyse_step", "run_step", "STEP_ERRORS"]

#: errors of one step's input: the step is skipped with a warning (or, with ``strict``, the run stops)
STEP_ERRORS = (InputError, FieldNotFoundError, InputFileNotFound)


@dataclass
class StepResult:
    """What one step's analyses return to the run (small, picklable).

    ``outline`` carries what series-level work needs of the step's mesh (its
    identity, extent and, in a run with droplets, the cell centroids while the
    step waits to be tracked); ``label_cells``, ``label_values`` and
    ``label_weights`` are the labelled cells of the droplet analysis (cell numbers, droplet
    numbers, ``c dV``; ``label_velocity`` their velocities with a velocity field, on a mesh
    not split by its reader): on a mesh whose cells a reader split (``label_whole``), whole cells
    numbered by :attr:`Mesh.cell_parents`, as the droplets are labelled there. Once the run's
    :class:`~phasegauge.run.assemble.TrackingFeed` has linked the step they are None (its
    tracking reads them first, when it tracks the step): the run's result list keeps no
    per-cell arrays.
    """

    index: int
    time: float
    path: str
    metrics: dict = field(default_factory=dict)
    droplets: object = None  # DataFrame or None
    label_cells: np.ndarray | None = None
    label_values: np.ndarray | None = None
    label_weights: np.ndarray | None = None
    label_whole: bool = False  # label_cells are whole cells of a split mesh
    label_velocity: np.ndarray | None = None  # (k, dimension) velocity of the labelled cells, or None
    profile: object = None  # DataFrame or None
    contour: object = None  # Contour of the step (kept for snapshots)
    mesh_signature: str = ""
    cells_signature: str = ""  # the cells whatever their numbering (Mesh.cells_signature)
    skipped: str | None = None
    seconds: float = 0.0
    file_sha256: str = ""
    reused: bool = False
    error: PhasegaugeError | None = None  # why the step was skipped
    warning_records: list = field(default_factory=list)  # (category, what, where) of the step's warnings
    notes: list = field(default_factory=list)  # its info lines: the ReadingNote warnings themselves
    dimension: int = 0
    outline: MeshOutline | None = None
    extra: object = None  # what options.step_extra returned (e.g. c sampled for a comparison)
    field_source: str = ""  # which copy of the field was read, in words
    velocity_location: str | None = None  # 'cell' or 'point': where the boundary flux took the velocity
    samples: np.ndarray | None = None  # field and c at the run's probe, line and measured points (n, 2)
    time_origin: str = ""  # where the time came from, once the step was read (StepInfo.time_origin)


# ------------------------------------------------------------------ the analyses of one step
def check_mesh(mesh, where: str) -> None:
    """Refuse a mesh without volume; warn about inverted and zero-size cells.

    Every step of a mesh is warned about (its figures are cached on the mesh): the run's warnings
    are collapsed to one line a kind with the count of steps, the same however the steps were
    shared among processes or taken from a resumed run's cache.
    """
    total = mesh.total_measure
    word = "area" if mesh.dimension == 2 else "volume"
    if not np.isfinite(total) or total <= 0:
        points = mesh.points
        spread = np.linalg.eigvalsh(np.cov(points.T)) if np.all(np.isfinite(points)) and len(points) > 1 else [0.0]
        if np.count_nonzero(np.asarray(spread) > 1e-12 * max(spread)) >= mesh.dimension:  # the corners' order
            raise UnsupportedMeshError(f"the cells have no {word} (total {total:g}) though the points are spread: "
                                       "every cell is flat, or its corners are listed in an order that crosses "
                                       "(a bowtie quad has none)", where=where,
                                       fix="list each cell's corners in order around it, as VTK numbers them")
        raise UnsupportedMeshError(f"the cells have no {word} (total {total:g}): the points coincide, lie on one "
                                   f"{'line' if mesh.dimension == 2 else 'plane'} or are not finite", where=where,
                                   fix="the file is damaged or the mesh collapsed; write the step again")
    problem = overlap_problem(mesh)
    if problem is not None:
        raise UnsupportedMeshError(problem, where=where,
                                   fix="write each cell once (pieces of a parallel run joined without repeating "
                                       "their shared cells), or the step's volume mesh alone")
    inverted, degenerate = mesh.inverted_cells, mesh.degenerate_cells
    if inverted:
        warnings.warn(MeshWarning(f"{_cells(inverted)} inverted (corners in the opposite order to the rest); "
                                  f"the magnitude of their {word} is used", where=where), stacklevel=3)
    if degenerate:
        text = (f"1 cell has zero {word}; it carries" if degenerate == 1 else
                f"{degenerate} cells have zero {word}; they carry")
        warnings.warn(MeshWarning(f"{text} no phase volume", where=where), stacklevel=3)
    from ..model._wedge_sector import wedge_sector

    sector = wedge_sector(mesh)
    if sector is not None:
        warnings.warn(MeshWarning(f"the mesh is {sector.words()}: an axisymmetric run, measured as the 3D sector "
                                  "(volumes and droplet sizes are the sector's; its cells, thin across it, make the "
                                  "interface read wider in cells, so the interface kind and the resolution findings "
                                  "may be wrong)", where=where), stacklevel=3)


def _cells(count: int) -> str:
    return "1 cell is" if count == 1 else f"{count} cells are"


def step_velocity(step, options):
    """Velocity of the step on cells and on points, and where the file has it, or (None, None, None).

    Each side is converted only when an analysis of the run uses it: droplets use cell values,
    the boundary flux and cross sections the file's own values (a cell-centred solver's cell
    values are never averaged onto points for them).
    """
    if options.velocity is None:
        return None, None, None
    mesh = step.mesh
    # two components lie in a 2D mesh's plane (u_x, u_z for a case in the x-z plane)
    # or its scalar components, 'u.x,u.y', all on cells or all on points
    values, location = vector_field(step.fields, options.velocity, where=step.info.where,
                                    fix="name the velocity field with --velocity, or leave it out",
                                    plane_axes=tuple(mesh.plane_axes) if mesh.dimension == 2 else (0, 1),
                                    dimension=int(mesh.dimension))
    bad = int(np.count_nonzero(~np.isfinite(values).all(axis=1)))
    if bad:
        warnings.warn(NonFiniteWarning(f"velocity field '{options.velocity}' is not finite at {bad} {location}s: "
                                       "boundary faces there are read as closed, what may cross them bounded "
                                       "(boundary_phase_outflow_unknown)", where=step.info.where), stacklevel=2)
    if location == "cell":
        return values, None, location
    return (mesh.point_to_cell(values) if "droplets" in options.analyses else None), values, location


def flatten_step(step, options):
    """The step on the 2D mesh of its lower plane when its mesh is one cell thick (quasi-2D).

    Returns the step (a new one on the 2D mesh, or the step itself: with
    ``options.keep_3d``, or a mesh that is not one cell thick) and the
    :class:`~phasegauge.model.quasi2d.Quasi2D` record or None. Cell data carries over
    unchanged (the cells keep their order); point data is the lower plane's.
    """
    from dataclasses import replace

    from ..model.quasi2d import as_measured

    flat = as_measured(step.mesh, keep_3d=getattr(options, "keep_3d", False), where=step.info.where)
    if flat is None:
        return step, None
    fields = replace(step.fields, point_data={name: np.asarray(values)[flat.points]
                                              for name, values in step.fields.point_data.items()})
    return replace(step, mesh=flat.mesh, fields=fields), flat


#: cells from which a step's work goes on threads (measured on 2 cores: at 0.25M tetrahedra no time
#: saved and 25 % more peak memory, each thread's allocator keeping its own free memory; at 1M
#: hexahedra 8-20 % less wall time, see benchmarks/RESULTS.md, "Twelfth round: threads")
THREADED_CELLS = 500_000


def analyse_step(step, options, *, contour_dir: str | None = None, threads: int = 1) -> StepResult:
    """Run the chosen analyses on one step read into the model (pure apart from contour files).

    Parameters
    ----------
    step : Step
    options : MeasureOptions
    contour_dir : str, optional
        Folder to write the step's interface into (``interface_NNNNNN.vtu``).
    threads : int
        Threads for the work that splits into independent parts (a new mesh's geometry and faces,
        the planes of a section operator, the widths' distance searches) on a mesh of at least
        :data:`THREADED_CELLS` cells; the result is the same bit for bit on any number. With two
        or more, the sections are measured beside the phase analyses (a new mesh's operator built
        there first, on half the threads), and within those the contour beside the widths' band
        integrals (or, with no widths asked, the bulk values beside the contour) and the droplets
        beside the widths: up to two threads more than ``threads`` may then run at
        once (they share the interpreter lock, so they overlap only in part).
    """
    from ..analysis import droplets, mixing

    step, flat = flatten_step(step, options)
    mesh = step.mesh
    if mesh.n_cells < THREADED_CELLS:  # too little work a part: threads would cost memory, save no time
        threads = 1
    # the first step of a mesh: its geometry and faces side by side, then the split plan
    prepare_mesh(mesh, threads=threads, split=bool({"interface", "droplets"} & set(options.analyses))
                 or options.section_axis is not None)
    ind = make_indicator(mesh, step.fields, options.field, range=options.range, phase=options.phase,
                         where=step.info.where, field_location=options.field_location, level_set=options.level_set,
                         threads=threads)
    if ind.nonfinite == ind.cell.size or not np.isfinite(ind.cell).any():
        raise InputError(f"field '{options.field}' has no finite values (all NaN or Inf)", where=step.info.where,
                         fix="the solver may have diverged at this step")
    check_mesh(mesh, step.info.where)
    u_cell, u_point, u_location = step_velocity(step, options)
    result = StepResult(step.index, step.time, step.info.path, mesh_signature=mesh.signature,
                        cells_signature=mesh.cells_signature, dimension=int(mesh.dimension),
                        time_origin=step.info.time_origin,
                        outline=MeshOutline.of(mesh, centroids="droplets" in options.analyses))
    result.extra = options.step_extra(step, ind)
    result.field_source = ind.source
    result.velocity_location = u_location
    result.samples = sample_step(mesh, ind, options, where=step.info.where)
    m = {"step": step.index, "time": step.time}
    # whether the field looks periodic along an axis not measured so: worked out once, when the
    # droplets' or the free energy's warning first asks
    look = droplets.PeriodicLook(mesh, ind, periodic=options.periodic, level=options.level)
    if flat is not None:  # measured per unit depth: say so in the steps table
        m["depth"] = float(flat.depth)
    # the sections (and a new mesh's section operator) are measured beside the phase analyses, their
    # warnings given here after them; a new operator takes half the threads (the analyses the rest),
    # later steps' sections one (the analyses all); decided before the thread starts
    side = threads // 2
    planes = _section_arguments(options, u_cell, u_point, u_location)
    new = not mesh.memo("cross_sections", dict, keep=False)
    sections = _sections_beside(mesh, ind, options, planes, side if new else min(side, 1))
    inner = threads - side if sections is not None and new else threads
    with sections or nullcontext():  # waited for however the analyses end
        contour, measured = _phase_analyses(step, mesh, ind, options, result, m, (u_cell, u_point, u_location),
                                            contour_dir, inner, look)
    if options.level_set and "interface" in options.analyses:  # no width of its own: its slope instead
        from ..analysis._level_set import distance_errors

        m.update(distance_errors(mesh, ind.level_set))
    if "mixing" in options.analyses:
        m.update(mixing.mixing_metrics(mesh, ind.cell, box=options.box))
        if options.segregation_scale:
            m["segregation_scale"] = mixing.segregation_scale(mesh, ind.cell, periodic=tuple(options.periodic))
        if options.section_axis is not None:
            if sections is not None:  # its error where one thread meets it: here
                profile, notes = sections.result()
                for note in notes:
                    warnings.warn(note, stacklevel=1)
            else:
                profile = mixing.cross_sections(mesh, ind, **planes, threads=threads)
            # against the whole inflow: a section of pure carrier (ahead of a front) is not "mixed"
            # measured from the end of the mesh the flow enters by
            ends = tuple(float(e) for e in mesh.bounds[:, AXIS_INDEX[options.section_axis]])
            m["mixing_length"] = mixing.mixing_length(profile, target=options.mixing_target, ends=ends)
            m["mixing_length_status"] = mixing.mixing_length_status(profile, target=options.mixing_target)
            note = mixing.mixing_length_note(profile, options.mixing_target, m["mixing_length"],
                                             options.section_axis)
            if note:
                warnings.warn(PhasegaugeWarning(note), stacklevel=1)
            profile.insert(0, "time", step.time)
            profile.insert(0, "step", step.index)
            result.profile = profile
    if options.coarsening or options.free_energy is not None:  # the spacing and the tension: one interface size
        size = _interface_size(mesh, ind, options, m, contour)
    if options.coarsening:
        m["coarsening_length"] = mixing.coarsening_length(mesh, ind.cell)
        m["interface_spacing"] = mixing.interface_spacing(mesh, ind.point, level=options.level, interface_size=size)
    if options.free_energy is not None:
        from ._phase_field import equilibrium_step

        m.update(equilibrium_step(step, mesh, ind, options, size, look))
    if options.model is not None:  # a partially miscible mixture: bulk compositions against the model
        from ._mixture import mixture_step

        m.update(mixture_step(step, mesh, ind, contour, m, options, droplets=result.droplets, measured=measured))
    m["nonfinite_values"] = int(ind.nonfinite)
    result.metrics = m
    result.contour = contour
    return result


def _section_arguments(options, u_cell, u_point, u_location) -> dict:
    """The planes and the velocity of the step's sections: what the section operator and the
    profile both take (:func:`phasegauge.analysis.mixing.cross_sections`)."""
    return {"axis": options.section_axis, "positions": options.section_positions, "count": options.section_count,
            "velocity": u_cell if u_location == "cell" else u_point, "velocity_location": u_location,
            "inflow_mean": options.inflow_mean}


def _sections_beside(mesh, ind, options, planes: dict, threads: int):
    """The step's sections measured on a thread of their own (:func:`mixing.cross_sections_noted`,
    the planes on up to ``threads`` threads, a new mesh's operator built there first), or None (no
    thread to spare, or no sections). It reads the indicator and the velocity, which no analysis
    writes, and the mesh's caches, pure functions of the mesh; its warnings come back as a list."""
    from ..analysis import mixing

    if threads < 1 or "mixing" not in options.analyses or options.section_axis is None:
        return None
    return Beside(mixing.cross_sections_noted, mesh, ind, **planes, threads=threads)


def _phase_analyses(step, mesh, ind, options, result, m: dict, velocity: tuple, contour_dir, threads: int,
                    look):
    """Conservation, interface and droplets of one step, into ``m`` and ``result``; returns the
    contour and the distances the widths measured (or None). ``look`` is the step's
    :class:`~phasegauge.analysis.droplets.PeriodicLook`."""
    from ..analysis import conservation, interface

    u_cell, u_point, u_location = velocity
    if "conservation" in options.analyses:
        m.update(conservation.conservation_metrics(mesh, ind, densities=options.densities))
        m.update(conservation.boundedness(mesh, ind))
        if u_location is not None:
            # the boundary flux takes the velocity where the file has it: a cell-centred solver's
            # own cell values on its boundary faces, never values averaged onto wall points
            flux = conservation.open_boundary_flux(
                mesh, u_cell if u_location == "cell" else u_point, ind, velocity_location=u_location,
                periodic=tuple(options.periodic))
            m.update({k: v for k, v in flux.items() if k != "open_boundary"})
            m["open_boundary"] = bool(flux["open_boundary"])
    contour = measured = plateaus = prepared = None
    # the contour and the measured bulk values of the two phases (the widths and the droplets are
    # taken between them); with threads to spare, work beside (nothing there warns): the contour
    # beside the widths' band integrals, or the bulk values beside the contour
    widths = "interface" in options.analyses and not options.level_set  # a level set has none
    if widths:
        prepared = interface.prepare_widths(mesh, ind, level=options.level, threads=threads)
        contour, plateaus = prepared.contour, prepared.plateaus
    elif {"interface", "droplets"} & set(options.analyses):
        bulk = Beside(interface.bulk_plateaus, ind.point, options.level, mesh) if threads >= 2 else None
        with bulk or nullcontext():
            contour = interface.find_interface(mesh, ind.point, level=options.level)
        plateaus = interface.bulk_plateaus(ind.point, options.level, mesh) if bulk is None else bulk.result()
    labels = None  # with threads to spare, the droplets are labelled beside the widths (nothing there warns)
    if "droplets" in options.analyses and "interface" in options.analyses and threads >= 2:
        labels = Beside(_label_droplets, mesh, ind, options, u_cell, contour, plateaus)
    with labels or nullcontext():
        if widths:
            # a mixture run keeps the distances the widths measured: its bulk cells need few more
            metrics = interface.interface_metrics(mesh, ind, level=options.level, prepared=prepared,
                                                  return_distances=options.model is not None, threads=threads,
                                                  periodic=tuple(options.periodic))
            prepared = None  # the band integrals and values between the bulk values: not held further
            if options.model is not None:
                metrics, measured = metrics
            m.update(metrics)
        elif "interface" in options.analyses:  # a level set: its contour's size (its slope is measured after)
            from ..analysis._level_set import level_set_widths

            m.update(level_set_widths(np.sum(contour.element_sizes), plateaus[0], plateaus[1]))
        if "interface" in options.analyses and contour_dir is not None:
            from ..io import write_contour

            write_contour(contour, os.path.join(contour_dir, f"interface_{step.index:06d}.vtu"),
                          time=step.time, step=step.index,
                          file_cells=_file_cells(mesh))
    if "droplets" in options.analyses:
        found = _label_droplets(mesh, ind, options, u_cell, contour, plateaus) if labels is None else labels.result()
        table = found.table
        _warn_periodic_look(look, ind.location, step.info.where)
        m["droplet_count"] = int(found.count)
        m["under_resolved_droplets"] = int(table["under_resolved"].sum()) if len(table) else 0
        labelled = np.flatnonzero(found.labels >= 0)
        result.label_cells = labelled.astype(np.int32 if mesh.n_cells < 2 ** 31 else np.int64)  # half the bytes
        result.label_values = found.labels[labelled].astype(np.int32)
        result.label_weights = np.asarray(found.weights)[labelled]
        result.label_whole = bool(found.whole_cells)  # numbered per whole cell on a split mesh
        if u_cell is not None and not result.label_whole:  # each cell moved by its own velocity when tracked
            result.label_velocity = np.asarray(u_cell)[labelled][:, list(mesh.plane_axes[:mesh.dimension])]
        result.droplets = table
        del found, labelled  # labels and c dV of every cell (16 bytes a cell): not held through the sections
    return contour, measured


def _file_cells(mesh):
    """The file's number of each cell of ``mesh`` where it is not the mesh's own (a contour's ``cell``), or None."""
    return mesh.cell_parents if mesh.file_cells is None else mesh.file_cells


def _label_droplets(mesh, ind, options, u_cell, contour, plateaus):
    """The step's droplets (:func:`phasegauge.analysis.droplets.label_droplets`), measured between
    the bulk values the widths used."""
    from ..analysis import droplets

    low, high, tail = plateaus
    return droplets.label_droplets(
        mesh, ind, level=options.level, connectivity=options.adjacency, periodic=tuple(options.periodic),
        velocity=u_cell, interface_cells=contour.cells, interface_sizes=contour.element_sizes,
        interface_centres=contour.centroids, interface_normals=contour.normals, bulk=(low, high),
        band_floor=max(1e-3, tail) if (low, high) != (0.0, 1.0) else 1e-3)


def _interface_size(mesh, ind, options, m: dict, contour) -> float:
    """The step's interface size (length in 2D, area in 3D) of the contour c = level: the interface
    analysis's, else the droplets' contour's, else the contour found here (the coarsening's spacing and the
    free energy's tension need it whatever ``--analyses`` holds)."""
    if "interface_size" in m:
        return m["interface_size"]
    if contour is None:
        from ..analysis._contour import find_interface

        contour = find_interface(mesh, ind.point, level=options.level)
    return float(np.sum(contour.element_sizes))


def _warn_periodic_look(look, location: str, where: str) -> None:
    """One warning (collapsed over steps) when droplets crossing a boundary not measured as periodic
    would be counted twice (:attr:`~phasegauge.analysis.droplets.PeriodicLook.droplet_axes`: the
    boundary layers join as neighbouring ones join and the phase reaches both, or point values
    written on both ends of a period match to round-off)."""
    axes = look.droplet_axes
    if axes:
        names = ",".join(axes)
        how = ("the last plane of points along {} joins the first as neighbouring planes join (or matches it)"
               if location == "point" else "the cells' last layer along {} joins the first as neighbouring layers join")
        warnings.warn(MeshWarning(f"{how.format(names)}: the run looks periodic, and droplets crossing the "
                                  f"boundary are counted twice; give --periodic {names} if it is", where=where),
                      stacklevel=2)


# ------------------------------------------------------------------ the unit of parallel work
class StepRunner:
    """Runs steps of one series: ``runner.run(index)`` is the unit of parallel work.

    Parameters
    ----------
    path : str or os.PathLike
        The series.
    options : MeasureOptions
    cache : StepCache, optional
        Where finished steps are kept (and found on resume).
    contour_dir : str, optional
        Folder for each step's interface file.
    keep : collection of int
        Steps whose contour stays in the result (the report's snapshots).
    mesh_pool : MeshPool, optional
        Where the series keeps its meshes (give one to reuse meshes an earlier run built).
    series : Series, optional
        The series already open at ``path`` (saves discovering it again).
    threads : int
        Threads of this process for the steps' mesh work (see :func:`analyse_step`).

    Notes
    -----
    Picklable: a runner sent to another process takes its path, options,
    cache and an empty mesh pool, and opens the series there on its first step,
    on one thread (a Dask worker runs its own threads side by side).
    A forked process inherits the open series and the kept meshes as they are.
    """

    def __init__(self, path, options, *, cache=None, contour_dir: str | None = None, keep=(),
                 mesh_pool=None, series=None, threads: int = 1):
        from ..io import MeshPool

        self.path = os.fspath(path)
        self.options = options
        self.cache = cache
        self.contour_dir = contour_dir
        self.keep = frozenset(int(i) for i in keep)
        self.mesh_pool = series.mesh_pool if series is not None else (mesh_pool or MeshPool())
        self._series = series
        self.threads = int(threads)

    def __getstate__(self):
        state = self.__dict__.copy()
        state["_series"] = None
        state["threads"] = 1
        return state

    @property
    def tracking(self) -> bool:
        """True when the run tracks droplets (so the steps' cell centroids are needed afterwards)."""
        return "droplets" in self.options.analyses

    def series(self):
        """The open series (opened on first use; its own warnings are reported once, by the run)."""
        if self._series is None:
            from ..io import Series

            with warnings.catch_warnings():
                warnings.simplefilter("ignore", PhasegaugeWarning)
                self._series = Series(self.path, mesh_pool=self.mesh_pool, sort_by_time=self.options.sort_by_time)
        return self._series

    def close(self) -> None:
        """Close the series' files (the kept meshes stay in the pool)."""
        if self._series is not None:
            self._series.close()

    def outline(self, signature: str) -> MeshOutline | None:
        """The outline with centroids of a mesh this runner holds or the cache keeps, or None."""
        mesh = self.mesh_pool.find(signature)
        if mesh is not None:
            return MeshOutline.of(mesh, centroids=True)
        return None if self.cache is None else self.cache.load_outline(signature)

    def run(self, index: int) -> StepResult:
        """Read step ``index`` and run every analysis on it (or take it from the cache).

        A step whose input is bad (:data:`STEP_ERRORS`) returns a result with
        ``skipped`` and ``error`` set, unless ``options.strict``; a failure inside
        the tool raises :class:`AnalysisError` naming the step.
        """
        series = self.series()
        info = series.steps[index]
        keep_contour = index in self.keep
        entry = None if self.cache is None else self.cache.entry(info)  # None: no file to key it by
        if entry is not None and not self.cache.holds(entry) and self.cache.changed_since(info, entry):
            from ..io import step_data_files

            what = "the step's file or a data file it names" if step_data_files(info.path) else "the step's file"
            grew = " (an XDMF collection is keyed whole: one a solver still writes changes with every step)" \
                if info.grid is not None else ""
            raise SeriesError(f"{what} changed since the run that is being resumed read it{grew}",
                              where=f"{info.path}, step {info.index}",
                              fix="start the run again with --overwrite (or restore the file)")
        if entry is not None:
            cached = self.cache.load(entry)
            if cached is not None and self._complete(cached):
                if not keep_contour:
                    cached.contour = None
                return cached
        start = time.perf_counter()
        with warnings.catch_warnings(record=True) as caught:
            warnings.simplefilter("always")
            try:
                step = series.read(index)
                result = analyse_step(step, self.options, contour_dir=self.contour_dir, threads=self.threads)
            except STEP_ERRORS as err:
                err = err.at(info.where)
                if self.options.strict:
                    raise err from None
                result = StepResult(index, info.time, info.path, skipped=err.one_line(), error=err)
            except PhasegaugeError as err:  # an option this step's mesh shows to be wrong: name the step
                raise err.with_where(info.where) from None
            except Exception as exc:  # a failure inside the tool: name the step, keep the cause for --debug
                raise AnalysisError(f"{type(exc).__name__}: {short_text(exc, 160)}", where=info.where,
                                    fix="rerun with --debug for the traceback and report it") from exc
        if result.skipped is None:  # a skipped step's warnings are about what made it fail
            records = [(w.category, getattr(w.message, "what", str(w.message)), info.where)
                       for w in caught if issubclass(w.category, PhasegaugeWarning)]
            # how cells or blocks were read (blocks left out) is an info line of the run, not a finding: kept apart
            result.notes = [w.message for w in caught if isinstance(w.message, ReadingNote)]
            result.warning_records = [rec for rec in records if not issubclass(rec[0], ReadingNote)]
        result.seconds = time.perf_counter() - start
        result.file_sha256 = entry.file_sha256 if entry is not None else ""
        if entry is not None and result.skipped is None:  # a bad step is tried again on resume
            outline = result.outline
            if self.tracking and outline is not None and not self.cache.has_outline(outline.signature):
                self.cache.store_outline(outline)
            self.cache.store(entry, result)
        if not keep_contour:
            result.contour = None
        return result

    def _complete(self, cached: StepResult) -> bool:
        """True when a cached result can stand for the step: with droplets, its mesh outline is kept too.

        The outline gets its centroids back when this runner holds the mesh.
        """
        if not self.tracking:
            return True
        if cached.outline is None:
            return False
        signature = cached.outline.signature
        mesh = self.mesh_pool.find(signature)
        if mesh is not None:
            cached.outline = MeshOutline.of(mesh, centroids=True)
            return True
        return self.cache.has_outline(signature)


def run_step(path, index: int, options, *, cache_dir: str | None = None, contour_dir: str | None = None,
             keep_contour: bool = False) -> StepResult:
    """Read step ``index`` of the series at ``path`` and run every analysis on it (one step on its own).

    With ``cache_dir``, a result cached for the same file content and options is
    returned without recomputing, and a new result is cached atomically. A run
    of many steps uses one :class:`StepRunner` instead (it keeps the series open).
    """
    from .cache import StepCache

    cache = None if cache_dir is None else StepCache(cache_dir, options.key())
    runner = StepRunner(path, options, cache=cache, contour_dir=contour_dir, keep=(index,) if keep_contour else ())
    try:
        return runner.run(index)
    finally:
        runner.close()
