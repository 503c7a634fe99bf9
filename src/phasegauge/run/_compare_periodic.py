"""The periodic axes of a comparison: one box for both runs, checked before either is measured.

``compare --periodic`` (recipe ``[compare] periodic``, ``compare_runs(periodic=)``) means what
``measure --periodic`` means, for both runs: their droplets join across the axes' boundary planes,
and the shape comparison's interface distances wrap there. The period of those distances is the
common grid's extent, so both runs must span the same box along each periodic axis.
"""

from __future__ import annotations

import warnings

from ..errors import InputError, PhasegaugeWarning
from ..model.axes import AXIS_NAMES
from .options import MeasureOptions

__all__ = ["normalize_periodic", "check_one_period"]

#: two runs' extents along a periodic axis may differ by this share of the larger (round-off of
#: coordinates written in single precision; our threshold)
PERIOD_SHARE = 1e-6


def normalize_periodic(periodic) -> tuple:
    """The periodic axes as measure takes them (lower case, among x, y, z), refused as measure refuses them."""
    if isinstance(periodic, str):
        periodic = tuple(a.strip() for a in periodic.split(",") if a.strip())
    return MeasureOptions(field="c", periodic=tuple(periodic or ())).periodic


def check_one_period(both, chosen, periodic) -> None:
    """Refuse two runs whose first chosen meshes (as measured: a slab one cell thick as 2D) do not span
    each periodic axis, or span it over other lengths (the distances would wrap by a wrong period)."""
    if not periodic:
        return
    from ._compare_steps import _as_measured

    boxes = []
    with warnings.catch_warnings():  # each measure run reports its series' warnings
        warnings.simplefilter("ignore", PhasegaugeWarning)
        for series, steps in zip(both, chosen):
            mesh, _ = _as_measured(series.read_mesh(steps[0] if steps else 0))
            plane = list(mesh.plane_axes[: mesh.dimension])
            used = mesh.coordinates[mesh.used_points]
            boxes.append({AXIS_NAMES[a]: (float(used[:, k].min()), float(used[:, k].max()))
                          for k, a in enumerate(plane)})
    for axis in periodic:
        missing = [s.path for s, box in zip(both, boxes) if axis not in box]
        if missing:
            raise InputError(f"periodic axis {axis} is not an axis this run's mesh spans", where=missing[0],
                             fix=f"leave {axis} out of --periodic (recipe: [compare] periodic)")
        (lo_a, hi_a), (lo_b, hi_b) = boxes[0][axis], boxes[1][axis]
        period = max(hi_a - lo_a, hi_b - lo_b)
        if abs(lo_a - lo_b) > PERIOD_SHARE * period or abs(hi_a - hi_b) > PERIOD_SHARE * period:
            raise InputError(f"the runs span other lengths along the periodic axis {axis} (the first from "
                             f"{lo_a:.6g} to {hi_a:.6g}, the second from {lo_b:.6g} to {hi_b:.6g}), so no one "
                             "period wraps both (point data of a periodic run written as N points, without its "
                             "boundary plane repeated, spans one spacing less than the period)",
                             where=f"{both[0].path}; {both[1].path}",
                             fix=f"compare runs of the same periodic box (point data with the boundary plane written "
                                 f"on both sides), or leave {axis} out of --periodic")
