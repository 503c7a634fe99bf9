"""Grid convergence of a case run on three meshes (the ``convergence`` command).

Each of the three inputs is a series (measured here with the same options) or
the output folder of a finished ``measure`` run (its ``steps.csv``,
``droplets.csv`` and ``manifest.json``). The representative cell size of each
mesh comes from the first step's mesh (for a folder: of the series its manifest
names) unless given. The figures are those of
:func:`phasegauge.analysis.convergence.convergence_table`.
"""

from __future__ import annotations

import dataclasses
import os
import time
import warnings
from dataclasses import dataclass, field

from ..errors import (InputError, InputFileNotFound, MeshWarning, OptionError, PhasegaugeWarning,
                      ResolutionWarning, SeriesWarning)
from ._convergence_options import as_json, check_given_options, check_same_options, location_read, measured_with
from ._convergence_options import given_options as _given_options

__all__ = ["ConvergenceSource", "ConvergenceResult", "grid_convergence_run", "is_measure_folder",
           "MESH_NAMES"]

#: the three meshes, finest first
MESH_NAMES = ("fine", "medium", "coarse")

@dataclass
class ConvergenceSource:
    """One of the three runs: where it came from, its tables and its mesh size."""

    name: str
    path: str
    kind: str  # 'series' or 'measure folder'
    steps: object = None
    droplets: object = None
    series_path: str = ""
    n_cells: int = 0
    dimension: int = 0
    total_measure: float = float("nan")
    cell_size: float = float("nan")
    field: str = ""
    recorded_dimension: int = 0  # a measure folder's: the dimension its steps were measured in
    recorded_depth: float = 0.0  # the depth of a mesh one cell thick its steps were measured on as 2D
    keep_3d: bool = False  # a measure folder's option
    depth: float = 0.0  # of a mesh one cell thick measured as 2D
    time_origin: str = ""  # where the run's times came from ('index': it stores none, its times are step numbers)
    options: dict = dataclasses.field(default_factory=dict)  # the measure options it was measured with (JSON)
    location_read: str = ""  # where its field was read from ('cell' or 'point'; "" where not recorded)

    def record(self) -> dict:
        """The source as the manifest keeps it."""
        return {"mesh": self.name, "path": os.path.abspath(self.path), "kind": self.kind,
                "series": self.series_path, "field": self.field, "cells": self.n_cells,
                "dimension": self.dimension, "total_measure": self.total_measure, "cell_size": self.cell_size,
                "steps": 0 if self.steps is None else int(len(self.steps)), "time_origin": self.time_origin,
                **({"depth": self.depth} if self.depth else {}), "options": self.options}


@dataclass
class ConvergenceResult:
    """The convergence table (a DataFrame) and the three sources."""

    table: object
    sources: list = field(default_factory=list)
    safety_factor: float = 1.25


def is_measure_folder(path) -> bool:
    """True for the output folder of a finished measure run (``steps.csv`` and ``manifest.json``)."""
    path = os.fspath(path)
    return os.path.isdir(path) and all(os.path.isfile(os.path.join(path, n)) for n in ("steps.csv", "manifest.json"))


def _check_cell_sizes(cell_sizes):
    if cell_sizes is None:
        return None
    try:
        sizes = tuple(float(h) for h in cell_sizes)
    except (TypeError, ValueError):
        raise OptionError(f"cell sizes must be three numbers, found {cell_sizes!r}",
                          fix="give h_fine,h_medium,h_coarse") from None
    if len(sizes) != 3 or not all(h > 0 for h in sizes) or not sizes[0] < sizes[1] < sizes[2]:
        raise OptionError(f"cell sizes must be three positive numbers growing from fine to coarse, found {sizes}",
                          fix="give h_fine,h_medium,h_coarse with h_fine < h_medium < h_coarse")
    return sizes


def _read_folder(source: ConvergenceSource) -> None:
    import json

    import pandas as pd

    folder = source.path
    try:
        with open(os.path.join(folder, "manifest.json"), encoding="utf-8") as handle:
            manifest = json.load(handle)
        source.steps = pd.read_csv(os.path.join(folder, "steps.csv"))
        drops = os.path.join(folder, "droplets.csv")
        source.droplets = pd.read_csv(drops) if os.path.isfile(drops) and os.path.getsize(drops) else None
    except (OSError, ValueError) as exc:
        raise InputError(f"cannot read the measure run's tables ({exc})", where=folder,
                         fix="give the output folder of a finished 'phasegauge measure' run") from None
    if manifest.get("command") != "measure" or "time" not in source.steps:
        raise InputError("is not the output folder of a measure run (no measure manifest or no time column)",
                         where=folder, fix="give the output folder of a finished 'phasegauge measure' run, "
                                           "or the series itself")
    source.series_path = str((manifest.get("series") or {}).get("path", ""))
    source.time_origin = str((manifest.get("series") or {}).get("time_origin", ""))
    source.options = dict(manifest.get("options") or {})
    source.location_read = location_read((manifest.get("series") or {}).get("field_read"))
    source.field = str((manifest.get("options") or {}).get("field", ""))
    source.keep_3d = bool((manifest.get("options") or {}).get("keep_3d", False))
    try:
        source.recorded_dimension = int((manifest.get("series") or {}).get("dimension", 0))
        source.recorded_depth = float((manifest.get("series") or {}).get("depth", 0.0))
    except (TypeError, ValueError):
        source.recorded_dimension = 0


def _measured_as_2d(source: ConvergenceSource, options) -> bool:
    """Whether a mesh one cell thick is read as 2D: a measure folder's as its run recorded, else unless keep_3d."""
    if source.kind == "measure folder":
        recorded = source.recorded_dimension
        if recorded in (2, 3):
            return recorded == 2  # as the measure run recorded its steps
        return not source.keep_3d
    return not getattr(options, "keep_3d", False)


def _mesh_size(source: ConvergenceSource, known: bool, options=None) -> None:
    from ..io import Series
    from ..model.quasi2d import as_measured

    if known:
        return
    if source.kind == "measure folder" and not os.path.exists(source.series_path):
        raise InputFileNotFound(f"the series this run measured ({source.series_path}) is not there, so its "
                                "cell size is unknown", where=source.path,
                                fix="give the cell sizes with --cell-sizes h_fine,h_medium,h_coarse")
    with warnings.catch_warnings():  # the measure run reports the series' own warnings
        warnings.simplefilter("ignore", PhasegaugeWarning)
        with Series(source.series_path) as series:
            mesh = series.read_mesh(0)
    flat = as_measured(mesh, keep_3d=not _measured_as_2d(source, options),
                       where=source.series_path)  # (as run.step.flatten_step)
    if flat is not None:
        mesh, source.depth = flat.mesh, float(flat.depth)
    source.n_cells = int(mesh.n_whole_cells)
    source.dimension = int(mesh.dimension)
    source.total_measure = float(mesh.total_measure)
    if source.kind == "series":  # as its measure run will record them
        source.recorded_dimension, source.recorded_depth = source.dimension, source.depth


def _times_words(times, shown: int = 3) -> str:
    times = sorted(float(t) for t in times)
    words = ", ".join(f"{t:g}" for t in times[:shown])
    return words + (f" and {len(times) - shown} more" if len(times) > shown else "")


def _divergent_warning(table) -> str:
    """One line naming the divergent quantities and their times ("" when there are none)."""
    if not len(table) or "divergent" not in table:
        return ""
    rows = table[table["divergent"].astype(bool)]
    if not len(rows):
        return ""
    named = [f"{q} at t = {_times_words(g['time'])}" for q, g in rows.groupby("quantity", sort=False)]
    oscillating = int(rows["oscillatory"].astype(bool).sum()) if "oscillatory" in rows else 0
    kind = f"; {oscillating} rows also oscillatory" if oscillating else ""
    return (f"values not converging as the mesh is refined: the fine pair differ by as much as or more than any "
            f"positive order allows for these refinement ratios (no apparent order, so no extrapolated value or "
            f"GCI; column 'divergent'{kind}) for {'; '.join(named)}: refine further, or check that the three runs "
            "are one case given FINE MEDIUM COARSE")


def _unpaired_warning(fine_times, paired, sources) -> str:
    """One line naming the fine run's times left out of the pairing ("" when every one is paired)."""
    import numpy as np

    fine_times = np.asarray(fine_times, dtype=float)
    left = fine_times[~np.isin(fine_times, paired)]
    if not len(left):
        return ""
    spans = ", ".join(f"{s.name} {float(s.steps['time'].min()):g} to {float(s.steps['time'].max()):g}"
                      for s in sources[1:] if len(s.steps) > 1)
    return (f"the fine run's times {_times_words(left)} lie outside the other runs' time spans ({spans}) and are "
            "left out of the pairing; run the three meshes over the same times to compare them there")


def _numbered(source) -> bool:
    """Whether a run's times are step numbers (it stores none: time origin ``index``)."""
    return "index" in str(source.time_origin).split("+")


def _time_pairing_warning(sources) -> str:
    """Refuse runs some of which store times and some not; one line when all pair by step number ("" else).

    Runs of one step (steady results) and runs whose time origin is unknown (older measure
    folders) are left out.
    """
    runs = [s for s in sources if s.time_origin and s.steps is not None and len(s.steps) > 1]
    numbered = [s for s in runs if _numbered(s)]
    if numbered and len(numbered) < len(runs):
        timed = [s for s in runs if not _numbered(s)]
        one = len(numbered) == 1
        raise InputError(f"the {' and '.join(s.name for s in numbered)} run{'' if one else 's'} "
                         f"store{'s' if one else ''} no times ({'its' if one else 'their'} times are step numbers) "
                         f"while the {' and '.join(s.name for s in timed)} run{'' if len(timed) == 1 else 's'} "
                         f"store{'s' if len(timed) == 1 else ''} times, so steps would pair with times",
                         where=numbered[0].path,
                         fix="give each run as a 'time,path' listing (or store the times in its files), then "
                             "measure it again")
    if len(numbered) < 2:
        return ""
    counts = [len(s.steps) for s in numbered]
    differ = (" (their step counts differ: " + ", ".join(f"{s.name} {n}" for s, n in zip(numbered, counts)) + ")"
              if len(set(counts)) > 1 else "")
    return ("the runs store no times, so their steps are paired by step number (step k with step k)" + differ
            + ": right only if every run wrote its outputs at the same physical interval from the same start; "
            "give each run as a 'time,path' listing (or store the times in its files) to pair them by time")


def _quantities_words(rows, shown: int = 2) -> str:
    """The quantities of ``rows`` with their times, the first ``shown`` of them."""
    named = [f"{q} at t = {_times_words(g['time'])}" for q, g in rows.groupby("quantity", sort=False)]
    more = len(named) - shown
    return ", ".join(named[:shown]) + (f" and {more} more quantit{'y' if more == 1 else 'ies'}" if more > 0 else "")


def _agreeing_words(left_out, share) -> str:
    """The rows of implausible order left out of the warning as agreeing meshes, in words ("" for none)."""
    count = int(left_out.sum())
    return (f" ({count} more row{'' if count == 1 else 's'} whose three meshes agree within {share:g} of the "
            "quantity's scale, our threshold, left out)") if count else ""


def _order_warnings(table, formal_order) -> list:
    """One line for apparent orders above the plausible limit (the coarse value off the trend), one for
    orders more than :data:`FORMAL_ORDER_TOLERANCE` from the formal order (none, or one each).

    Rows whose three meshes agree within
    :data:`~phasegauge.analysis.convergence.AGREEMENT_SHARE` of the quantity's scale are left out
    of both (:func:`~phasegauge.analysis.convergence.agreeing_rows`).
    """
    import numpy as np

    from ..analysis.convergence import AGREEMENT_SHARE, FORMAL_ORDER_TOLERANCE, agreeing_rows, implausible_order_limit

    if not len(table):
        return []
    order = table["apparent_order"].to_numpy(dtype=float)
    limit = implausible_order_limit(formal_order)
    agree = agreeing_rows(table)  # the three meshes agree beyond what an order resolves: none is warned of
    high = np.isfinite(order) & (order > limit) & ~agree
    lines = []
    if high.any():
        row = table[high].loc[table[high]["apparent_order"].idxmax()]
        why = "our threshold" + (", twice the formal order" if formal_order is not None else "")
        lines.append(f"apparent order above {limit:g} ({why}) for {_quantities_words(table[high], 1)} (p up to "
                     f"{row['apparent_order']:.3g}: {row['quantity']} at t = {row['time']:g}, coarse "
                     f"{row['value_coarse']:.4g} against medium {row['value_medium']:.4g} and fine "
                     f"{row['value_fine']:.4g}): the coarse value lies off the trend of the other two (outside the "
                     "asymptotic range, or not one case measured alike); add a finer mesh, or check the coarse run"
                     + _agreeing_words(agree & np.isfinite(order) & (order > limit), AGREEMENT_SHARE))
    if formal_order is not None:
        off = np.isfinite(order) & ~high & ~agree & (np.abs(order - formal_order) > FORMAL_ORDER_TOLERANCE)
        if off.any():
            lines.append(f"apparent order more than {FORMAL_ORDER_TOLERANCE:g} (our threshold) from the formal order "
                         f"{formal_order:g} for {_quantities_words(table[off], 1)} (p {order[off].min():.3g} to "
                         f"{order[off].max():.3g}): the meshes are not in the asymptotic range of that order "
                         "(asymptotic_ratio away from 1); refine further before reading the GCI as the error band")
    return lines


def grid_convergence_run(fine, medium, coarse, *, options=None, given_options=None, cell_sizes=None,
                         safety_factor: float = 1.25, formal_order=None, out=None, overwrite: bool = False,
                         workers: int = 1, threads: int | None = None,
                         progress: bool | None = False) -> ConvergenceResult:
    """Grid convergence of every per-step quantity of one case run on three meshes.

    Parameters
    ----------
    fine, medium, coarse : str or os.PathLike
        Each a series or the output folder of a finished measure run, finest mesh first.
    options : MeasureOptions, optional
        How to measure the inputs that are series (needed when one is).
    given_options : dict, optional
        The measuring options given explicitly, by name (as on the command line): each is compared
        with every measure folder's own and refused where it differs, since a folder is not measured
        again. Default: the options of ``options`` that differ from their defaults.
    cell_sizes : sequence of 3 floats, optional
        Representative cell sizes h_fine < h_medium < h_coarse, in mesh length units.
        Default: (total measure / number of cells)^(1/dimension) of each first step's mesh.
    safety_factor : float
        Safety factor of the GCI (1.25 for three meshes).
    formal_order : float, optional
        The scheme's order of accuracy: the asymptotic-range ratio is taken with it, and apparent
        orders more than :data:`~phasegauge.analysis.convergence.FORMAL_ORDER_TOLERANCE` from it, or
        above twice it, are warned of. Without it the ratio is NaN and orders above
        :data:`~phasegauge.analysis.convergence.HIGHEST_PLAUSIBLE_ORDER` are warned of.
    out : str or os.PathLike, optional
        Output folder (``convergence.csv``, ``convergence.png``, ``manifest.json``);
        refused when it exists unless ``overwrite``.
    workers : int
        Local worker processes for measuring series.
    threads : int, optional
        Threads of each process (as for ``measure``).
    progress : bool or None

    Returns
    -------
    ConvergenceResult

    Raises
    ------
    OptionError
        Runs measured with different options that change the figures (:data:`._convergence_options.MEASURING_OPTIONS`),
        or options given that differ from a measure folder's own.
    InputError
        Runs some of which store times and some not (steps would pair with times).

    References
    ----------
    Celik et al. (2008), J. Fluids Eng. 130, 078001.
    """
    from ..report._files import output_transaction

    with output_transaction(out):
        return _run(fine, medium, coarse, options=options, given=_given_options(options, given_options),
                    cell_sizes=cell_sizes, safety_factor=safety_factor,
                    formal_order=formal_order, out=out, overwrite=overwrite, workers=workers, threads=threads,
                    progress=progress)


def _run(fine, medium, coarse, *, options, given, cell_sizes, safety_factor, formal_order, out, overwrite, workers,
         threads, progress):
    from ..analysis.convergence import (check_formal_order, convergence_table, droplet_integrals, paired_times,
                                        representative_cell_size)
    from .options import check_workers

    started = time.time()
    sizes = _check_cell_sizes(cell_sizes)
    formal_order = check_formal_order(formal_order)
    if not safety_factor >= 1.0:
        raise OptionError(f"safety factor must be at least 1, found {safety_factor!r}",
                          fix="use 1.25 for three meshes (Celik et al. 2008)")
    check_workers(workers)
    if threads is not None:
        from ..model._threads import check_threads

        check_threads(threads)
    sources = []
    for name, path in zip(MESH_NAMES, (fine, medium, coarse)):
        path = os.fspath(path)
        if not os.path.exists(path) and not any(ch in path for ch in "*?["):
            raise InputFileNotFound("not found", where=path, fix=f"give the {name} run's series or measure folder")
        source = ConvergenceSource(name=name, path=path,
                                   kind="measure folder" if is_measure_folder(path) else "series")
        if source.kind == "measure folder":
            _read_folder(source)
            if options is not None and source.field and options.field != source.field:
                raise OptionError(f"the {name} run measured field '{source.field}', not '{options.field}'",
                                  where=path, fix="measure the three runs with the same field")
        else:
            if options is None:
                raise OptionError(f"the {name} input is a series, so the field to measure is needed", where=path,
                                  fix="give --field (and --range, --phase as for measure)")
            source.series_path, source.field = os.path.abspath(path), options.field
            source.options = as_json(dataclasses.asdict(options))
        sources.append(source)
    check_same_options(sources)
    check_given_options(sources, given)
    for source in sources:
        _mesh_size(source, known=sizes is not None, options=options)
    check_same_options(sources)  # again, with the series' meshes read: keep_3d where one is one cell thick
    if sizes is None:
        dims = {s.dimension for s in sources}
        if len(dims) != 1:
            raise InputError(f"the three meshes have different dimensions ({sorted(dims)})",
                             fix="give three runs of the same case")
        sizes = tuple(representative_cell_size(s.total_measure, s.n_cells, s.dimension) for s in sources)
        measures = [s.total_measure for s in sources]
        if max(measures) > 1.01 * min(measures):
            covered = ", ".join(f"{m:g}" for m in measures)
            warnings.warn(MeshWarning(f"the three meshes cover different measures ({covered}): "
                                      "are they the same case?"))
        if not sizes[0] < sizes[1] < sizes[2]:
            raise OptionError("the representative cell sizes do not grow from the fine to the coarse mesh "
                              f"({', '.join(f'{h:.4g}' for h in sizes)})",
                              fix="give the runs in the order FINE MEDIUM COARSE")
    for source, h in zip(sources, sizes):
        source.cell_size = float(h)
    if out is not None:
        from ..io import Series
        from ..report._files import prepare_output_folder
        from .measure import check_output_place

        for source in sources:
            if source.kind == "series":
                with warnings.catch_warnings():
                    warnings.simplefilter("ignore", PhasegaugeWarning)
                    with Series(source.path) as series:
                        check_output_place(series, out)
            elif os.path.abspath(out) == os.path.abspath(source.path):
                raise OptionError("the output folder is one of the measure folders read", where=out,
                                  fix="choose another output folder")
        prepare_output_folder(out, overwrite=overwrite, run_key="")
    from .measure import measure

    for source in sources:
        if source.kind == "series":
            res = measure(source.path, options=options, workers=workers, threads=threads, progress=progress,
                          snapshots=0, contours=False)
            source.steps, source.droplets = res.steps, res.droplets
            source.time_origin = "+".join(dict.fromkeys(r.time_origin for r in res.results
                                                        if r.skipped is None and r.time_origin))
            done = [r for r in res.results if r.skipped is None]
            source.location_read = next((location_read(r.field_source) for r in done
                                         if getattr(r, "field_source", "")), "")
            source.recorded_dimension = int(getattr(done[0], "dimension", 0) or 0) if done else 0
            source.recorded_depth = float(next((r.metrics["depth"] for r in done if "depth" in (r.metrics or {})),
                                               0.0))
    check_same_options(sources)  # again, with where the series read the field
    notes = []
    pairing = _time_pairing_warning(sources)
    if pairing:
        notes.append(pairing)
        warnings.warn(SeriesWarning(pairing, where=sources[0].path))
    tables = []
    for source in sources:
        steps = source.steps
        integrals = droplet_integrals(source.droplets)
        if len(integrals):
            steps = steps.merge(integrals.drop(columns=["time"]), on="step", how="left")
        tables.append(steps)
    table = convergence_table(*tables, cell_sizes=sizes, safety_factor=safety_factor, formal_order=formal_order)
    unpaired = _unpaired_warning(tables[0]["time"], paired_times(*(t["time"].to_numpy(dtype=float) for t in tables)),
                                 sources)
    if unpaired:
        notes.append(unpaired)
        warnings.warn(SeriesWarning(unpaired, where=sources[0].path))
    divergent = _divergent_warning(table)
    if divergent:
        notes.append(divergent)
        warnings.warn(ResolutionWarning(divergent))
    for line in _order_warnings(table, formal_order):
        notes.append(line)
        warnings.warn(ResolutionWarning(line))
    result = ConvergenceResult(table=table, sources=sources, safety_factor=safety_factor)
    if out is not None:
        from ._report_data import package_version
        from ..report._canvas import shared_time_origin
        from ..report._convergence_report import write_convergence_report

        write_convergence_report(out, table, sources=[s.record() for s in sources], safety_factor=safety_factor,
                                 formal_order=formal_order,
                                 options=measured_with(sources),
                                 version=package_version(), started=started, notes=notes,
                                 time_origin=shared_time_origin([s.time_origin for s in sources]))
    return result
