"""What a series holds: steps, times, mesh, fields (the ``inspect`` command)."""

from __future__ import annotations

import os
import warnings

import numpy as np

from ..errors import (BlocksLeftOutNote, FieldNotFoundError, InputError, InputFileNotFound, MeshWarning,
                      PhasegaugeWarning, ReadingNote, SeriesWarning, SkippedStepWarning, collapse_warnings)
from ..model.axes import AXIS_NAMES
from . import Series

#: errors of one step's file: the step is reported as unreadable and the others are described
_STEP_ERRORS = (InputError, FieldNotFoundError, InputFileNotFound)

__all__ = ["describe_series", "format_description"]

#: a series with at most this many cell-steps is scanned whole; a larger one at its first and last step
FULL_SCAN_CELL_STEPS = 5_000_000


def describe_series(path, *, scan: str = "auto", sort_by_time: bool = False) -> dict:
    """Describe a series.

    Parameters
    ----------
    path : str or os.PathLike or Series
    scan : {'auto', 'all', 'first'}
        Which steps field statistics come from: every step, the first, or
        (``auto``) every step of a small series and the first and last of a large one.
    sort_by_time : bool
        Order the steps by the times stored in their files (see :class:`Series`).

    Returns
    -------
    dict
        JSON-ready: ``path, kind, steps, times, time_origin, points, cells,
        cell_types, boundary_cell_types, dimension, cells_read_as (how convex point set cells
        were read, else None), bounds, cell_size, mesh_changes,
        scanned_steps, fields`` (each field: ``name, location, components, min, max,
        nonfinite``), ``field_copies`` (the fields written on cells and on points
        under one name, with the copy measure reads), ``fields_left_out`` (fields a
        multiblock file's blocks do not all hold, not read: name to why), ``cell_copies_left_out`` (fields
        whose cell copy some block lacks, read from their point copy: name to why),
        ``blocks_left_out`` (blocks of multiblock files not read: boundary patches), ``unreadable_steps``
        (one line each) and ``warnings``
        (one line each, repeats over steps collapsed; also issued as warnings).
        A time that could not be read is None.

    Raises
    ------
    PhasegaugeError
        The path holds no series, or no step of it can be read (the first
        step's error).
    """
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        series = path if isinstance(path, Series) else Series(path, sort_by_time=sort_by_time)
        try:
            desc = _describe(series, scan)
        finally:
            series.close()
    records = [(w.category, getattr(w.message, "what", str(w.message)), getattr(w.message, "where", ""))
               for w in caught if issubclass(w.category, PhasegaugeWarning)]
    patches = [name for w in caught if isinstance(w.message, BlocksLeftOutNote)
               for name in w.message.names]  # blocks of faces in a volume format: left out as .vtp ones
    # how cells were read is said as 'cells_read_as' (blocks left out as 'blocks_left_out'): no warning
    records = [rec for rec in records if not issubclass(rec[0], ReadingNote)]
    desc["blocks_left_out"] = list(dict.fromkeys(desc["blocks_left_out"] + patches))
    records += [(SkippedStepWarning, f"{err.what}; {err.fix}", err.where)
                for err in desc.pop("_errors")]
    summary = collapse_warnings(records)
    for category, text in summary:
        warnings.warn(category(text), stacklevel=2)
    desc["warnings"] = [text for _, text in summary]
    return desc


def _describe(series, scan: str) -> dict:
    n = len(series)
    errors = []
    first = None
    for i in range(n):  # the first step that can be read gives the mesh
        try:
            first = series.read(i)
            break
        except _STEP_ERRORS as err:
            errors.append(err)
    if first is None:
        err = errors[0]
        if n > 1:
            err = type(err)(f"{err.what} (no step can be read: all {n} failed; this is the first)",
                            where=err.where, fix=err.fix)
        raise err
    mesh = first.mesh
    if scan == "all":
        indices = list(range(n))
    elif scan == "first":
        indices = [first.index]
    elif n * mesh.n_cells <= FULL_SCAN_CELL_STEPS:
        indices = list(range(n))
    else:
        indices = sorted({first.index, n - 1})
    stats: dict = {}
    meshes = {mesh.cells_signature}  # the same hash as the steps' below
    dimensions = {mesh.dimension}
    scanned = []
    for i in indices:
        if i < first.index:
            continue  # already failed above
        try:
            step = first if i == first.index else series.read(i)
        except _STEP_ERRORS as err:
            errors.append(err)
            continue
        scanned.append(i)
        meshes.add(step.mesh.cells_signature)  # the cells, whatever their numbering
        dimensions.add(step.mesh.dimension)
        for location, data in (("point", step.fields.point_data), ("cell", step.fields.cell_data)):
            for name, values in data.items():
                _accumulate(stats, name, location, np.asarray(values))
    problem = series.time_problem()
    if problem is not None:
        warnings.warn(SeriesWarning(f"{problem.what}; measure refuses these steps together: {problem.fix}",
                                    where=problem.where), stacklevel=3)
    if len(dimensions) > 1:
        warnings.warn(SeriesWarning("the steps mix 2D and 3D meshes; measure skips the steps whose dimension "
                                    "differs from the first step's", where=os.fspath(series.path)), stacklevel=3)
    word = "area" if mesh.dimension == 2 else "volume"
    if not mesh.total_measure > 0:
        warnings.warn(MeshWarning(f"the cells have no {word} (total {mesh.total_measure:g}); measure refuses "
                                  "this mesh", where=first.info.where), stacklevel=3)
    from ..model._overlaps import overlap_problem

    overlap = overlap_problem(mesh) if mesh.total_measure > 0 else None
    if overlap is not None:
        warnings.warn(MeshWarning(f"{overlap}; measure refuses this mesh", where=first.info.where), stacklevel=3)
    sizes = mesh.cell_sizes
    from ..model.quasi2d import as_measured

    flat = as_measured(mesh, where=first.info.where)  # (and the warning on a slab between turned planes)
    from ..model._wedge_sector import wedge_sector

    sector = wedge_sector(mesh)
    desc = {
        "path": os.fspath(series.path),
        "kind": series.kind,
        "steps": n,
        "times": [float(t) if np.isfinite(t) else None for t in series.times],
        "time_origin": "+".join(series.time_origins),
        "points": int(mesh.n_points),
        "cells": int(mesh.n_whole_cells),  # a cell a reader split counts once
        "cell_types": {k: int(v) for k, v in mesh.cell_type_counts.items()},
        "boundary_cell_types": {k: int(v) for k, v in mesh.boundary_type_counts.items()},
        "dimension": int(mesh.dimension),
        "quasi_2d": None if flat is None else flat.record(),
        "cells_read_as": mesh.memo("convex_point_sets", lambda: None, keep=False),
        "listing_file": getattr(series, "listing_file", None),
        "bounds": mesh.bounds.tolist(),
        "total_measure": float(mesh.total_measure),
        "regular_grid": (list(mesh.regular_grid.cell_shape) if mesh.regular_grid is not None else None),
        "cell_size": {"min": float(sizes.min()), "median": float(np.median(sizes)),
                      "max": float(sizes.max())},
        "hanging_faces": mesh.hanging_faces,
        "wedge_sector": None if sector is None else sector.record(),
        "inverted_cells": int(mesh.inverted_cells),
        "degenerate_cells": int(mesh.degenerate_cells),
        "mesh_changes": len(meshes) > 1,
        "scanned_steps": scanned,
        "fields": [stats[k] for k in sorted(stats)],
        "field_copies": _field_copies(stats),
        "fields_left_out": {name: why for name, (why, _) in sorted(first.fields.fields_left_out.items())},
        "cell_copies_left_out": dict(sorted(first.fields.cell_copies_left_out.items())),
        "blocks_left_out": _blocks_left_out(first.info.path),
        "unreadable_steps": [err.one_line() for err in errors],
        "_errors": errors,
    }
    return desc


def _field_copies(stats: dict) -> dict:
    """Fields on cells and on points under one name -> which copy measure reads, in words."""
    on = {}
    for entry in stats.values():
        on.setdefault(entry["name"], set()).add(entry["location"])
    return {name: (f"'{name}' is written on cells and on points under one name: measure reads the cell "
                   "copy, the solver's own values")
            for name in sorted(on) if len(on[name]) == 2}


def _blocks_left_out(path: str) -> list:
    """Names of the blocks of a multiblock step file that are not read (boundary patches)."""
    from ._multiblock import is_index_file, multiblock_blocks

    if not is_index_file(path):
        return []

    try:
        return multiblock_blocks(path).left_out_names()
    except InputError:
        return []


def _accumulate(stats: dict, name: str, location: str, values: np.ndarray) -> None:
    key = f"{location}:{name}"
    comps = 1 if values.ndim == 1 else int(np.prod(values.shape[1:]))
    numeric = np.issubdtype(values.dtype, np.number)
    entry = stats.setdefault(key, {"name": name, "location": location, "components": comps,
                                   "min": None, "max": None, "nonfinite": 0})
    if not numeric or values.size == 0:
        return
    v = values.astype(np.float64, copy=False)
    finite = np.isfinite(v)
    entry["nonfinite"] += int(v.size - np.count_nonzero(finite))
    if finite.any():
        if comps > 1:
            mag = np.linalg.norm(np.where(finite, v, 0).reshape(v.shape[0], -1), axis=1)
            lo, hi = float(mag.min()), float(mag.max())
            entry["magnitude"] = True
        else:
            lo, hi = float(v[finite].min()), float(v[finite].max())
        entry["min"] = lo if entry["min"] is None else min(entry["min"], lo)
        entry["max"] = hi if entry["max"] is None else max(entry["max"], hi)


def format_description(desc: dict) -> str:
    """Human-readable text of :func:`describe_series`."""
    times = [t for t in desc["times"] if t is not None]
    lines = [f"series      {desc['path']} ({desc['kind']})",
             f"steps       {desc['steps']}"
             + (f", time {times[0]:g} to {times[-1]:g}" if times else "")
             + f" (time from: {_origin_words(desc['time_origin'])})",
             f"mesh        {desc['dimension']}D, {desc['points']} points, {desc['cells']} cells"
             + (" (mesh changes between steps)" if desc["mesh_changes"] else ""),
             "cell types  " + ", ".join(f"{k} {v}" for k, v in desc["cell_types"].items())]
    if desc.get("listing_file"):
        lines.append(f"listing     the folder's step listing {os.path.basename(desc['listing_file'])} gives the "
                     "steps' order and times")
    if desc.get("cells_read_as"):
        lines.append(f"read as     {desc['cells_read_as']}")
    if desc.get("quasi_2d"):
        q = desc["quasi_2d"]
        lines.append(f"quasi-2D    one cell thick along {q['thin_axis']} (depth {q['depth']:.6g}): measure works per "
                     "unit depth as 2D (lengths, areas, circularity); --keep-3d measures it as 3D")
    if desc["boundary_cell_types"]:
        lines.append("not analysed " + ", ".join(f"{k} {v}" for k, v in desc["boundary_cell_types"].items())
                     + " (lower-dimensional cells)")
    if desc["regular_grid"]:
        lines.append("grid        regular, " + " x ".join(str(n) for n in desc["regular_grid"]) + " cells")
    lo, hi = desc["bounds"]
    lines.append("bounds      " + "  ".join(f"{a} [{l:.6g}, {h:.6g}]" for a, l, h in zip(AXIS_NAMES, lo, hi)))
    cs = desc["cell_size"]
    word = "area" if desc["dimension"] == 2 else "volume"
    lines.append(f"domain      {word} {desc['total_measure']:.6g}; cell size min {cs['min']:.4g}, "
                 f"median {cs['median']:.4g}, max {cs['max']:.4g}")
    if desc.get("wedge_sector"):
        w = desc["wedge_sector"]
        at = ", ".join(f"{a} = {v:.6g}" for a, v in w["through"].items())
        lines.append(f"wedge       {w['angle_degrees']:.3g} degree sector about a line along {w['axis']} ({at}), "
                     "one cell thick: an axisymmetric run, measured as the 3D sector (no axisymmetric measures)")
    if desc.get("hanging_faces"):
        faces = "edges" if desc["dimension"] == 2 else "faces"
        lines.append(f"hanging     {desc['hanging_faces']} {faces} lie on parts of larger {faces} (hanging nodes of a "
                     "refined mesh): measure joins the cells across them")
    if desc["inverted_cells"] or desc["degenerate_cells"]:
        lines.append(f"warning     {desc['inverted_cells']} inverted and {desc['degenerate_cells']} "
                     "zero-size cells")
    if desc.get("unreadable_steps"):
        places = [text.split(": ", 1)[0] for text in desc["unreadable_steps"]]
        lines.append(f"unreadable  {len(places)} step(s): " + "; ".join(places[:5])
                     + (" ..." if len(places) > 5 else "") + " (reasons on stderr and in --json)")
    scanned = desc["scanned_steps"]
    label = "all steps" if len(scanned) == desc["steps"] else "steps " + ", ".join(map(str, scanned))
    lines.append(f"fields      ({label})")
    for f in desc["fields"]:
        rng = "no numbers" if f["min"] is None else f"min {f['min']:.6g}, max {f['max']:.6g}"
        if f.get("magnitude"):
            rng += " (magnitude)"
        bad = f", {f['nonfinite']} NaN/Inf" if f["nonfinite"] else ""
        lines.append(f"  {f['name']:<16} on {f['location']}s, {f['components']} component"
                     f"{'s' if f['components'] != 1 else ''}, {rng}{bad}")
    for name, text in desc.get("field_copies", {}).items():
        lines.append(f"  note      {text} (for the measured field --field-location point reads the point copy)")
    for name, why in desc.get("fields_left_out", {}).items():
        lines.append(f"  {name:<16} not read: {why}")
    for name, why in desc.get("cell_copies_left_out", {}).items():
        lines.append(f"  {name:<16} cell copy not read: {why} (measure reads the point copy)")
    if desc.get("blocks_left_out"):
        if desc.get("kind") == "collection":  # an XDMF collection's steps written as spatial collections
            lines.append("left out    spatial collection pieces " + ", ".join(desc["blocks_left_out"])
                         + " (boundary patches; the volume pieces are read)")
        else:
            lines.append("left out    blocks " + ", ".join(desc["blocks_left_out"])
                         + " of the multiblock files (boundary patches and other polygon data; the volume blocks are "
                           "read)")
    return "\n".join(lines)


def _origin_words(origin: str) -> str:
    words = {"xdmf": "XDMF Time", "file": "time value in each file", "listing": "step listing",
             "folder_name": "the step folders' names (no times stored in the files)",
             "index": "step index (no times stored)", "unknown": "none where the file could not be read"}
    return " + ".join(words.get(o, o) for o in origin.split("+"))
