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


#: cells the interface crosses: indicator strictly between these (our threshold)
CUT = (0.01, 0.99)
#: an axis-aligned square: its sides along the plane's axes and equal within this share (our threshold)
SQUARE_SHARE = 0.01


def bubble_cells(result, series) -> dict:
    """Keywords ``cell_size`` and ``quad_grid`` of :func:`~phasegauge.analysis.references.check_rising_bubble`
    for a run with a sharp interface (cell fractions), whose circularity has a perimeter bias of its own: the
    median size of the cells the interface crosses (indicator strictly between 0.01 and 0.99) in the first
    analysed step, read again from ``series`` (the run's :class:`~phasegauge.io.Series`) and taken as measure
    takes it (a slab one cell thick as its 2D plane); ``quad_grid`` where the mesh is a regular grid or those
    cells are axis-aligned squares (a quadtree's leaves, a refined mesh as a quadtree solver writes it). Empty for a
    diffuse run or a level set, a 3D mesh, or a mesh that cannot be read again."""
    import warnings

    from ..errors import PhasegaugeError
    from ..model.indicator import make_indicator
    from .step import flatten_step

    if (result.audit or {}).get("interface_kind") != "sharp":
        return {}
    step = next((r.index for r in result.results if r.skipped is None), None)
    if step is None:
        return {}
    o = result.options
    try:
        with warnings.catch_warnings():  # the run has warned of its mesh and field already
            warnings.simplefilter("ignore")
            s, _ = flatten_step(series.read(step), o)
            c = make_indicator(s.mesh, s.fields, o.field, range=o.range, phase=o.phase, warn=False,
                               field_location=o.field_location, level_set=o.level_set).cell
    except PhasegaugeError:
        return {}
    mesh = s.mesh
    if int(mesh.dimension) != 2:
        return {}
    with np.errstate(invalid="ignore"):
        cut = np.flatnonzero((c > CUT[0]) & (c < CUT[1]))
    if not cut.size:
        cut = np.arange(mesh.n_cells)
    return {"cell_size": float(np.median(mesh.cell_sizes_of(cut))),
            "quad_grid": mesh.regular_grid is not None or _axis_aligned_squares(mesh, cut)}


def _axis_aligned_squares(mesh, cells) -> bool:
    """Whether every one of ``cells`` (indices) of a 2D mesh is a quad whose sides lie along the plane's
    axes and are equal (within :data:`SQUARE_SHARE`): a quadtree's leaves, of one size or of several."""
    if mesh.cell_parents is not None:
        return False
    wanted = np.zeros(mesh.n_cells, dtype=bool)
    wanted[cells] = True
    axes = list(mesh.plane_axes[:2])
    start = 0
    for block in mesh.blocks:
        mine = wanted[start:start + len(block)]
        start += len(block)
        if not mine.any():
            continue
        if block.cell_type != "quad":
            return False
        corners = mesh.points[block.connectivity[mine]][:, :, axes]  # (cells, 4, 2)
        low, high = corners.min(axis=1), corners.max(axis=1)
        side = high - low
        size = side.max(axis=1, keepdims=True)
        # each corner on the box's corners (sides along the axes), the box square
        off = np.minimum(np.abs(corners - low[:, None]), np.abs(corners - high[:, None]))
        on_box = off <= SQUARE_SHARE * size[:, None]
        if not (on_box.all() and np.all(np.abs(side[:, 0] - side[:, 1]) <= SQUARE_SHARE * size[:, 0])):
            return False
    return True
