"""What the reference checks of ``compare`` need of the first run besides its tables: the times of its
skipped outputs, the axis its bubble rises along and, for a sharp run on cells, its cell size and layout."""

from __future__ import annotations

import numpy as np

from ..model.axes import AXIS_NAMES

__all__ = ["skipped_times", "rise_axis", "bubble_cells"]


def skipped_times(result) -> list:
    """The (finite) times of a measure run's skipped steps."""
    return [float(r.time) for r in result.results
            if r.skipped is not None and r.time is not None and np.isfinite(r.time)]


def _outline(result):
    """The outline of the run's first analysed step, or None."""
    return next((r.outline for r in result.results if r.skipped is None and r.outline is not None), None)


def rise_axis(result) -> str:
    """The axis a bubble rises along: a 2D mesh's second plane axis (z for a run in the x-z plane, or a slab
    one cell thick in y); ``y`` for a 3D mesh or an unknown one (the checks read circularity, a 2D figure)."""
    outline = _outline(result)
    if outline is None or int(outline.dimension) != 2:
        return "y"
    return AXIS_NAMES[int(outline.plane_axes[1])]


def bubble_cells(result, series) -> dict:
    """Keywords ``cell_size`` and ``quad_grid`` of :func:`~phasegauge.analysis.references.check_rising_bubble`
    for a run with a sharp interface (cell fractions), whose circularity has a perimeter bias of its own: the
    median cell size and layout of the mesh of its first analysed step, read again from ``series`` (the run's
    :class:`~phasegauge.io.Series`) and taken as measure takes it (a slab one cell thick as its 2D plane).
    Empty for a diffuse run or a level set, a 3D mesh, or a mesh that cannot be read again."""
    import warnings

    from ..errors import PhasegaugeError
    from ..model.quasi2d import as_measured

    if (result.audit or {}).get("interface_kind") != "sharp":
        return {}
    step = next((r.index for r in result.results if r.skipped is None), None)
    if step is None:
        return {}
    try:
        with warnings.catch_warnings():  # the run has warned of its mesh already
            warnings.simplefilter("ignore")
            mesh = series.read_mesh(step)
            flat = as_measured(mesh, keep_3d=bool(getattr(result.options, "keep_3d", False)))
    except PhasegaugeError:
        return {}
    mesh = mesh if flat is None else flat.mesh
    if int(mesh.dimension) != 2:
        return {}
    return {"cell_size": float(np.median(mesh.cell_sizes)), "quad_grid": mesh.regular_grid is not None}
