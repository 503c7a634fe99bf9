"""The per-step side of a comparison: sampling in the measure workers, shapes of paired steps, overlays.

Each run's steps are read once, by the measure run's own workers: a step the
comparison will pair has its indicator sampled there on the common grid
(:class:`SamplingOptions`), and the shape metrics of a pair are computed from
the two sampled arrays its step results carry. Which steps pair is predicted
from the series' times before measuring; a pair the prediction missed (a
skipped step, a time only the file knew) or whose meshes differ from the ones
the grid was built for is read again, so the tables never depend on the
prediction.
"""

from __future__ import annotations

import warnings
from dataclasses import dataclass

import numpy as np

from ..analysis import compare as cmp
from ..errors import InputError, OptionError, PhasegaugeError, PhasegaugeWarning
from ..model.axes import AXIS_NAMES
from .measure import MeasureOptions
from .options import accept_old_names

__all__ = ["SampledField", "SamplingOptions", "SamplingPlan", "plan_sampling", "paired_shapes",
           "overlay_arrays"]


@dataclass(frozen=True)
class SampledField:
    """A step's indicator sampled on the comparison grid (what :class:`SamplingOptions` adds to a step).

    Attributes
    ----------
    signature : str
        Signature of the mesh the values were sampled from.
    values : ndarray of shape ``grid.shape``, dimensionless
        c on points, interpolated at the grid samples (NaN outside the mesh).
    """

    signature: str
    values: np.ndarray


@accept_old_names
@dataclass(frozen=True)
class SamplingOptions(MeasureOptions):
    """Measure options whose step workers also sample c on the comparison grid.

    Parameters
    ----------
    grid : SamplingGrid or None
        The common grid (None: sample nothing).
    mesh_signature : str
        Only steps on this mesh are sampled (the grid was built for it).
    sample_steps : tuple of int or None
        Steps to sample; None for every step.
    """

    grid: object = None
    mesh_signature: str = ""
    sample_steps: tuple | None = None

    def step_extra(self, step, indicator):
        """The step's c on points sampled on the grid (a :class:`SampledField`), or None."""
        if self.grid is None or step.mesh.signature != self.mesh_signature:
            return None
        if self.sample_steps is not None and step.index not in self.sample_steps:
            return None
        return SampledField(step.mesh.signature, cmp.resample_to_grid(step.mesh, indicator.point, self.grid))


@dataclass(frozen=True)
class SamplingPlan:
    """What the measure runs of a comparison sample: the grid, its meshes and the steps per run."""

    grid: object
    signatures: tuple
    steps: tuple
    axis_names: tuple

    def options(self, base: MeasureOptions, run: int) -> MeasureOptions:
        """``base`` with the sampling of run ``run`` (0 or 1) added."""
        import dataclasses

        if self.grid is None:
            return base
        values = {f.name: getattr(base, f.name) for f in dataclasses.fields(MeasureOptions)}
        return SamplingOptions(**values, grid=self.grid, mesh_signature=self.signatures[run],
                               sample_steps=self.steps[run])


def _axis_names(mesh) -> tuple:
    return tuple(AXIS_NAMES[i] for i in mesh.plane_axes[:2]) if mesh.dimension == 2 else AXIS_NAMES


def plan_sampling(series_a, series_b, *, spacing=None, time_tolerance=None, chosen=(None, None),
                  predicted=None) -> SamplingPlan:
    """Predict the paired steps from the series' times and build the grid from their first pair's meshes.

    ``chosen``: the steps of each run that are measured (None: all), so that only they are paired;
    ``predicted``: that prediction made already (:func:`_predicted_pairs`), not made again.

    Steps whose time is unknown before reading (NaN, or the step index) make the prediction
    unsafe: then every step is sampled. With no predicted pair nothing is sampled. The meshes
    are read here (one step per run). Any error (an unreadable mesh, domains that do not
    overlap, a bad tolerance) leaves the plan empty: the pairs are then read again after the
    measure runs, which report the error where they always did.
    """
    empty = SamplingPlan(None, ("", ""), (), ())
    try:
        with warnings.catch_warnings():  # the measure runs report each series' warnings
            warnings.simplefilter("ignore", PhasegaugeWarning)
            steps, first = predicted or _predicted_pairs(series_a, series_b, time_tolerance, chosen)
            if first is None:
                return empty
            mesh_a, flat_a = _as_measured(series_a.read_mesh(first[0]), str(series_a.path))
            mesh_b, flat_b = _as_measured(series_b.read_mesh(first[1]), str(series_b.path))
        problem = _space_problem(mesh_a, mesh_b, series_a.path, series_b.path, (flat_a, flat_b))
        grid = None if problem else cmp.common_grid(mesh_a, mesh_b, spacing=spacing)
    except PhasegaugeError:
        return empty
    finally:
        series_a.close()  # the measure runs' workers open their own files
        series_b.close()
    if problem is not None:  # refused before either run is measured
        raise problem
    return SamplingPlan(grid, (mesh_a.signature, mesh_b.signature), steps, _axis_names(mesh_a))


def _as_measured(mesh, where: str = ""):
    """The mesh as measure reads it: a 3D mesh one cell thick as the 2D mesh of its lower plane, so
    the common grid, and the sampling in the measure runs' workers, are 2D there too; and whether it
    was so read (``where``: the run's path, named in its warning)."""
    from ..model.quasi2d import as_measured

    flat = as_measured(mesh, where=where)
    return (mesh, False) if flat is None else (flat.mesh, True)


def _space_problem(mesh_a, mesh_b, path_a: str, path_b: str, flat=(False, False)):
    """An :class:`InputError` naming both runs where their meshes (as measured) differ in dimension
    or plane (:func:`phasegauge.analysis._resample.check_same_space`), else None; ``flat`` says which
    was a 3D mesh one cell thick, read as 2D."""
    from ..analysis._resample import check_same_space

    try:
        check_same_space(mesh_a, mesh_b)
    except InputError as err:
        said = "; ".join(f"run {run}'s mesh is one cell thick, so it is read as 2D, as measure reads it"
                         for run, thin in zip("AB", flat) if thin)
        return InputError(err.what + (f" ({said})" if said else ""), where=f"{path_a}; {path_b}",
                          fix="compare runs written in the same dimension and plane")
    return None


def _predicted_pairs(series_a, series_b, time_tolerance, chosen=(None, None)):
    """Steps of each run expected to pair (None: every step) and the first pair (None: no pair), among
    the ``chosen`` steps of each (None: all)."""
    import pandas as pd

    picked = [list(range(len(s))) if c is None else list(c) for s, c in zip((series_a, series_b), chosen)]
    times = [[float(s.times[i]) for i in p] for s, p in zip((series_a, series_b), picked)]
    certain = all(np.all(np.isfinite(t)) and all(s.steps[i].time_origin != "index" for i in p)
                  for s, t, p in zip((series_a, series_b), times, picked))
    if not certain:
        first = tuple(p[0] if p else 0 for p in picked)
        return (None, None), first
    pairs, _, _ = cmp.pair_times(pd.Series(times[0], index=picked[0]), pd.Series(times[1], index=picked[1]),
                                 tolerance=time_tolerance)
    if not len(pairs):
        return (), None
    steps = (tuple(int(i) for i in pairs["step_a"]), tuple(int(i) for i in pairs["step_b"]))
    return steps, (steps[0][0], steps[1][0])


def paired_shapes(pairs, results_a, results_b, plan: SamplingPlan, *, series, options, level: float,
                  spacing=None, overlay_pairs=(), periodic=()) -> tuple[list, list]:
    """Shape metrics of every paired step, and the overlay arrays of the pairs ``overlay_pairs``.

    Parameters
    ----------
    pairs : DataFrame
        From :func:`phasegauge.analysis.compare.pair_times` on the two steps tables.
    results_a, results_b : list of StepResult
        The measure runs' step results (their ``extra`` holds the sampled fields).
    plan : SamplingPlan
    series : pair of Series
        Opened on the two runs, for pairs read again.
    options : pair of MeasureOptions
        Each run's options as it was measured: a pair read again builds its indicator with them
        (field, range, phase, field location, level set), as the measure workers did.
    level : float
    spacing : float, optional
        Spacing of grids built for pairs read again.
    overlay_pairs : collection of int
        Positions (in ``pairs``) of the pairs to draw.
    periodic : tuple of str
        The comparison's periodic axes: interface distances wrap there.

    Returns
    -------
    rows : list of dict
        ``step_a``, ``step_b`` and the scalar shape metrics per pair.
    overlays : list of dict
        :func:`overlay_arrays` of the chosen pairs, with their ``time``.
    """
    sampled_a = {r.index: getattr(r, "extra", None) for r in results_a if r.skipped is None}
    sampled_b = {r.index: getattr(r, "extra", None) for r in results_b if r.skipped is None}
    grids = {tuple(plan.signatures): plan.grid} if plan.grid is not None else {}
    rows, overlays = [], []
    for k, row in enumerate(pairs.itertuples(index=False)):
        fa, fb = sampled_a.get(int(row.step_a)), sampled_b.get(int(row.step_b))
        if fa is not None and fb is not None and (fa.signature, fb.signature) == tuple(plan.signatures):
            grid, values_a, values_b, names = plan.grid, fa.values, fb.values, plan.axis_names
        else:
            grid, values_a, values_b, names = _read_pair(row, grids, series=series, options=options,
                                                         spacing=spacing)
        shape = cmp.shape_comparison_on_grid(values_a, values_b, grid, level=level, periodic=periodic,
                                             axis_names=names)
        rows.append({"step_a": int(row.step_a), "step_b": int(row.step_b),
                     **{name: value for name, value in shape.items() if np.isscalar(value)}})
        if k in overlay_pairs:
            overlays.append({"time": float(row.time_a), "time_b": float(row.time_b),
                             **overlay_arrays(values_a, values_b, grid, level=level, axis_names=names)})
    return rows, overlays


def _read_pair(row, grids: dict, *, series, options, spacing):
    """Read both steps of a pair and sample them (a pair the measure workers did not sample), each
    step's indicator built from its run's measure options as :func:`.step.analyse_step` builds it."""
    from ..model.indicator import make_indicator
    from .step import flatten_step

    fields = []
    for run, step in ((0, int(row.step_a)), (1, int(row.step_b))):
        o = options[run]
        s, _ = flatten_step(series[run].read(step), o)  # as measure reads it: a slab as 2D
        c = make_indicator(s.mesh, s.fields, o.field, range=o.range, phase=o.phase, where=s.info.where,
                           warn=False, field_location=o.field_location, level_set=o.level_set)
        fields.append((s.mesh, c.point))
    (mesh_a, ca), (mesh_b, cb) = fields
    key = (mesh_a.signature, mesh_b.signature)
    if key not in grids:
        grids.clear()  # one grid while both meshes stay the same
        grids[key] = cmp.common_grid(mesh_a, mesh_b, spacing=spacing)
    grid = grids[key]
    return (grid, cmp.resample_to_grid(mesh_a, ca, grid), cmp.resample_to_grid(mesh_b, cb, grid),
            _axis_names(mesh_a))


def overlay_arrays(values_a, values_b, grid, *, level: float = 0.5, axis_names=("x", "y", "z"),
                   slice_normal: int = 2, slice_position: float | None = None) -> dict:
    """What the report draws of a pair: where the phases differ and both interfaces, on one plane.

    Parameters
    ----------
    values_a, values_b : ndarray of shape ``grid.shape``
        Both runs' c sampled on ``grid``.
    grid : SamplingGrid
    level : float
        The interface is ``c = level``, the phase ``c > level``.
    axis_names : sequence of str
        Names of the grid's axes.
    slice_normal : {0, 1, 2}
        3D only: the axis normal to the drawn plane (default z).
    slice_position : float, optional
        3D only: where the plane cuts that axis (default the middle); the
        layer of samples whose box holds it is drawn.

    Returns
    -------
    dict
        ``mismatch``: bool array (n_x, n_y), True where exactly one run has
        its phase; ``extent``: (x0, x1, y0, y1) of the plane; ``segments_a``,
        ``segments_b``: the interfaces as segments, shape (n, 2, 2), in length
        units (marching squares); ``axis_names``: the two drawn axes.

    Raises
    ------
    OptionError
        A slice normal other than 0, 1, 2, or a position outside the grid.
    """
    a = np.asarray(values_a, dtype=np.float64)
    b = np.asarray(values_b, dtype=np.float64)
    names = tuple(axis_names)
    if grid.dimension == 3:
        if slice_normal not in (0, 1, 2):
            raise OptionError(f"slice_normal must be 0, 1 or 2, found {slice_normal!r}", fix="2 cuts normal to z")
        lo, hi = grid.bounds[slice_normal]
        position = 0.5 * (lo + hi) if slice_position is None else float(slice_position)
        if not lo <= position <= hi:
            raise OptionError(f"slice position {position} lies outside the grid ({lo}, {hi})",
                              fix="give a position inside both runs' domains")
        n = grid.shape[slice_normal]
        layer = min(int((position - lo) / grid.spacing[slice_normal]), n - 1)
        a, b = np.take(a, layer, axis=slice_normal), np.take(b, layer, axis=slice_normal)
        kept = [d for d in range(3) if d != slice_normal]
        grid = cmp.SamplingGrid(tuple(grid.bounds[d] for d in kept), tuple(grid.shape[d] for d in kept))
        names = tuple(names[d] for d in kept)
    valid = np.isfinite(a) & np.isfinite(b)
    (x0, x1), (y0, y1) = grid.bounds
    return {"mismatch": valid & ((a > level) ^ (b > level)), "extent": (x0, x1, y0, y1),
            "segments_a": cmp.interface_elements(a, grid, level, valid=valid),
            "segments_b": cmp.interface_elements(b, grid, level, valid=valid), "axis_names": names[:2]}
