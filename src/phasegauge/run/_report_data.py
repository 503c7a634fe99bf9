"""What a run hands its report besides the tables: plain records and arrays, nothing to read or compute.

The report layer draws and writes what it is given. Everything that needs the
input files (their hashes, the HDF5 files an XDMF names), the series or the
model objects (meshes, contours) is turned into plain records and arrays here.
"""

from __future__ import annotations

import numpy as np

from ..model.axes import AXIS_NAMES

__all__ = ["series_record", "blocks_left_out", "series_input_files", "interface_snapshots", "measure_report_data",
           "measured_as", "package_version"]


def package_version() -> str:
    """The phasegauge version that runs, from the installed package's metadata (``"unknown"`` without one).

    The run sits below the package's ``__init__`` in the layers, so it reads the version the way any
    other program would instead of importing it upwards.
    """
    from importlib import metadata

    try:
        return metadata.version("phasegauge")
    except metadata.PackageNotFoundError:
        return "unknown"


def measured_time_origin(series, results) -> str:
    """Where the measured steps' times come from ('file', 'xdmf', 'listing', 'folder_name', 'index',
    joined by '+'), '' when no step was measured: a step choice may leave out steps whose times come
    from elsewhere."""
    # each step's own (set when it was read; results cached before it was kept: the series' record)
    origins = [getattr(r, "time_origin", "") or series.steps[r.index].time_origin
               for r in results if 0 <= r.index < len(series.steps)]
    return "+".join(dict.fromkeys(origins))


def series_record(series) -> dict:
    """Path, kind, number of steps and time origin of a series, as the manifest and page show them."""
    import os

    record = {"path": os.path.abspath(series.path), "kind": series.kind, "steps": len(series),
              "time_origin": "+".join(series.time_origins)}
    if getattr(series, "listing_file", None):  # a folder's own step listing gave order and times
        record["listing_file"] = os.path.abspath(series.listing_file)
    if series.steps and series.steps[0].path.lower().endswith(".vtm"):
        from ..errors import InputError
        from ..io._multiblock import multiblock_blocks

        try:
            left_out = multiblock_blocks(series.steps[0].path).left_out_names()
        except InputError:
            left_out = []
        if left_out:
            record["blocks_left_out"] = left_out
    if getattr(series, "sort_by_time", False):
        record["order"] = "by the times in the files (sort_by_time)"
    return record


def blocks_left_out(record: dict, results) -> list:
    """The names of the multiblock blocks a run left out: the polygon-data blocks of the first step's file
    (``record``, the series' :func:`series_record`) and the blocks of faces written in a volume format that
    the steps' reads left out (the :class:`~phasegauge.errors.BlocksLeftOutNote` of each step's ``notes``,
    their ``names``), listed alike; [] when none."""
    from ..errors import BlocksLeftOutNote

    names = list(record.get("blocks_left_out", []))
    names += [name for r in results for note in (getattr(r, "notes", None) or [])
              if isinstance(note, BlocksLeftOutNote) for name in note.names]
    return list(dict.fromkeys(names))


def cells_read_as(results) -> list:
    """How the steps' cells were read, each kind of note once (its first text, with how many more differ): the
    :class:`~phasegauge.errors.ReadingNote` lines of
    their ``notes`` other than blocks left out (cells written decomposed, read as whole cells; cells with their own
    copies of their corners, merged); [] when none."""
    from ..errors import BlocksLeftOutNote

    kinds: dict = {}  # per kind of note, its texts once each (the counts in them differ by step or block)
    for r in results:
        if getattr(r, "skipped", None) is None:
            for note in getattr(r, "notes", None) or []:
                if not isinstance(note, BlocksLeftOutNote):
                    kinds.setdefault(type(note), {})[note.what] = None
    return [next(iter(texts)) + (f" (and {len(texts) - 1} more alike, by step or block)" if len(texts) > 1 else "")
            for texts in kinds.values()]


def measured_as(results, *, keep_3d: bool = False) -> dict:
    """How the steps were measured: ``dimension`` and, for a quasi-2D mesh, ``depth`` and ``measured_as``.

    A mesh one cell thick is measured per unit depth as 2D (its steps carry a ``depth``).
    """
    done = [r for r in results if getattr(r, "skipped", None) is None and getattr(r, "dimension", 0)]
    if not done:
        return {}
    out = {"dimension": int(done[0].dimension)}
    depth = next((r.metrics["depth"] for r in done if "depth" in (r.metrics or {})), None)
    if depth is not None:
        out["depth"] = float(depth)
        out["measured_as"] = (f"2D per unit depth: the 3D mesh is one cell thick (depth {depth:.6g}); lengths, "
                              "areas and circularity of its face plane")
    elif keep_3d:
        out["measured_as"] = "3D (--keep-3d)"
    return out


def series_input_files(series, results=()) -> list:
    """Every input file of a series with its size and SHA-256, reusing the hashes its workers computed.

    A listing's own file comes first, then the step files (each XDMF file followed by the HDF5 files
    it names).
    """
    from ..io import input_files

    known = {r.path: r.file_sha256 for r in results if getattr(r, "file_sha256", "")}
    return input_files(series, known)


def interface_snapshots(mesh, contours: dict, times: dict | None = None) -> dict | None:
    """The interfaces of chosen steps as arrays to draw (None when there is nothing to draw).

    Parameters
    ----------
    mesh : Mesh
        The mesh whose bounds frame the drawing.
    contours : dict of int to Contour
        Contours keyed by step; empty ones are left out.
    times : dict of int to float, optional

    Returns
    -------
    dict or None
        ``steps``: step -> (points of shape (m, 2) in the mesh plane or (m, 3),
        elements of shape (k, 2) segments or (k, 3) triangles, indices into the
        points); ``times``; ``bounds``: array (2, d) of the lower and upper
        corner over the drawn axes; ``axis_names``.
    """
    drawn = {step: c for step, c in contours.items() if c is not None and c.n_elements}
    if not drawn or mesh is None:
        return None
    axes = list(mesh.plane_axes) if mesh.dimension == 2 else [0, 1, 2]
    steps = {step: (np.asarray(c.points)[:, axes], np.asarray(c.elements)) for step, c in sorted(drawn.items())}
    return {"steps": steps, "times": dict(times or {}), "bounds": np.asarray(mesh.bounds)[:, axes],
            "axis_names": tuple(AXIS_NAMES[a] for a in axes)}


def measure_report_data(series, result, record: dict | None = None) -> dict:
    """Keyword arguments of :func:`phasegauge.report.write_measure_report` besides the tables.

    ``series`` (a record: ``record``, the series' :func:`series_record` where the run has it, completed
    here), ``inputs`` (files with size and SHA-256), ``snapshots`` (interface arrays of the steps whose
    contours were kept), ``step_timings`` and ``version``.
    """
    results = list(result.results)
    contours = {r.index: getattr(r, "contour", None) for r in results}
    record = dict(series_record(series) if record is None else record)
    record["time_origin"] = measured_time_origin(series, results) or record["time_origin"]
    sources = [r.field_source for r in results if getattr(r, "field_source", "")]
    if sources:
        record["field_read"] = sources[0]
    record.update(measured_as(results, keep_3d=getattr(result.options, "keep_3d", False)))
    left_out = blocks_left_out(record, results)
    if left_out:
        record["blocks_left_out"] = left_out
    read_as = cells_read_as(results)
    if read_as:
        record["cells_read_as"] = "; ".join(read_as)
    return {
        "series": record,
        "inputs": series_input_files(series, results),
        "snapshots": interface_snapshots(result.mesh, contours, {r.index: r.time for r in results}),
        "version": package_version(),
        "step_timings": {"step_seconds_sum": round(sum(r.seconds for r in results if not r.reused), 3),
                         "steps_reused": sum(1 for r in results if r.reused)},
    }
