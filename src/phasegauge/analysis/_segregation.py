"""Volume mixing figures: intensity and scale of segregation (Danckwerts 1952), mixing length."""

from __future__ import annotations

import numpy as np
import pandas as pd

from ..errors import OptionError
from ..model.axes import AXIS_NAMES
from ..model.fields import cell_values
from ..model.corners import cell_extent
from ..model.mesh import Mesh
from ..model.simplices import clip_simplices, simplex_measures, split_cells
from ._labelling import _normalize_periodic
from ._sums import dot


__all__ = ["mixing_metrics", "mixing_length", "mixing_length_status", "segregation_scale", "MIXED_RANGE",
           "MIXING_LENGTH_STATUSES"]

#: c strictly between these counts as mixed in ``mixed_volume_fraction``
MIXED_RANGE = (0.05, 0.95)
#: what a mixing length is (:func:`mixing_length_status`, the ``mixing_length_status`` column): the target
#: reached between two sections; met at the first section already (the length is an upper bound); met at no
#: section (NaN: longer than the sections reach); no index to read it from (NaN: the inflow refused)
MIXING_LENGTH_STATUSES = ("reached", "upper_bound", "not_reached", "undefined")


def normalize_box(mesh: Mesh, box) -> np.ndarray:
    """A box ``((xmin, xmax), (ymin, ymax), (zmin, zmax))`` as bounds on the analysis axes.

    For a 2D mesh the entry of the axis normal to its plane is ignored; None
    as a bound means unbounded.
    """
    try:
        rows = [tuple(pair) for pair in box]
        ok = len(rows) in (2, 3) and all(len(r) == 2 for r in rows)
    except TypeError:
        ok = False
    if not ok:
        raise OptionError(f"box must be ((xmin, xmax), (ymin, ymax), (zmin, zmax)), found {box!r}",
                          fix="give a lower and an upper bound per axis (None for no bound)")
    rows = rows + [(None, None)] * (3 - len(rows))
    out = np.empty((mesh.dimension, 2))
    for k, axis in enumerate(mesh.plane_axes[: mesh.dimension]):
        lo, hi = rows[axis]
        out[k] = (-np.inf if lo is None else float(lo), np.inf if hi is None else float(hi))
        if not out[k, 0] < out[k, 1]:
            raise OptionError(f"box bounds along {AXIS_NAMES[axis]} must increase, found {rows[axis]}",
                              fix="give (lower, upper)")
        low, high = mesh.bounds[:, axis]
        if out[k, 1] <= low or out[k, 0] >= high:
            raise OptionError(f"the box lies outside the mesh along {AXIS_NAMES[axis]}: it spans "
                              f"{out[k, 0]:.6g} to {out[k, 1]:.6g}, the mesh {low:.6g} to {high:.6g}",
                              fix="give a box that overlaps the mesh")
    return out


def box_fractions(mesh: Mesh, box: np.ndarray) -> np.ndarray:
    """Fraction of each cell's measure inside an axis-aligned box, exactly for the simplex split.

    Parameters
    ----------
    mesh : Mesh
    box : ndarray of shape (dimension, 2)
        Lower and upper bound per analysis axis.

    Returns
    -------
    ndarray of shape (n_cells,), in [0, 1]
        Only the cells a box face crosses are split (conforming split of
        :func:`phasegauge.model.simplices.split_cells`) and clipped.
    """
    dim = mesh.dimension
    inside = np.ones(mesh.n_cells, dtype=bool)
    outside = np.zeros(mesh.n_cells, dtype=bool)
    for axis in range(dim):
        lo, hi = cell_extent(mesh, axis)
        inside &= (lo >= box[axis, 0]) & (hi <= box[axis, 1])
        outside |= (hi <= box[axis, 0]) | (lo >= box[axis, 1])
    fraction = inside.astype(np.float64)
    cut = np.nonzero(~inside & ~outside)[0]
    if cut.size == 0:
        return fraction
    split = split_cells(mesh, cut)
    X, parent = split.corner_values(mesh.coordinates), split.owner
    whole = np.bincount(parent, simplex_measures(X), minlength=mesh.n_cells)[cut]
    for axis in range(dim):
        for value, sign in ((box[axis, 0], -1.0), (box[axis, 1], 1.0)):
            X, parent = clip_simplices(X, parent, sign * (X[:, :, axis] - value))
    kept = np.bincount(parent, simplex_measures(X), minlength=mesh.n_cells)[cut]
    with np.errstate(invalid="ignore", divide="ignore"):
        fraction[cut] = np.where(whole > 0, np.clip(kept / whole, 0.0, 1.0), 0.0)
    return fraction


def _intensity(weights: np.ndarray, c: np.ndarray) -> tuple[float, float]:
    total = weights.sum()
    if total <= 0:
        return np.nan, np.nan
    mean = float(dot(weights, c) / total)
    variance = float(dot(weights, (c - mean) ** 2) / total)
    spread = mean * (1.0 - mean)
    return mean, (variance / spread if spread > 0 else np.nan)


def mixing_metrics(mesh: Mesh, c_cell, *, box=None) -> dict:
    """Volume-weighted intensity of segregation, mixing index and mixed volume fraction.

    Parameters
    ----------
    mesh : Mesh
    c_cell : ndarray of shape (n_cells,) or Indicator
        Phase indicator on cells, dimensionless (not clipped).
    box : sequence of (lo, hi) pairs, optional
        ``((xmin, xmax), (ymin, ymax), (zmin, zmax))`` in mesh length units;
        None as a bound leaves that side open. Cells are clipped exactly by
        the box (each cell counts with the part of its volume inside).

    Returns
    -------
    dict
        - ``segregation_intensity``: I = var(c) / (m (1 - m)), volume-weighted
          (1 segregated, 0 perfectly mixed); NaN when m (1 - m) <= 0;
        - ``mixing_index``: 1 - sqrt(I);
        - ``mixed_volume_fraction``: share of the volume with 0.05 < c < 0.95;
        - ``mean_indicator``: m, the volume mean of c;
        - ``region_volume``: the volume (area in 2D) the figures cover, cells
          with NaN c left out.

    Raises
    ------
    OptionError
        c of the wrong length, or a malformed box.

    Notes
    -----
    With c constant per cell, the variance inside each cell is lost: for
    fields resolved by the mesh I is biased low by O(h^2). Overshoots
    (c outside [0, 1]) are kept, so I can exceed 1.

    References
    ----------
    Danckwerts, P. V. (1952). The definition and measurement of some
    characteristics of mixtures. Applied Scientific Research A3, 279-296.
    """
    c = cell_values(mesh, c_cell)
    weights = mesh.cell_measures
    if box is not None:
        weights = weights * box_fractions(mesh, normalize_box(mesh, box))
    good = np.isfinite(c) & (weights > 0)
    w, v = (weights, c) if good.all() else (weights[good], c[good])  # the usual case: no copies
    mean, intensity = _intensity(w, v)
    volume = float(w.sum())
    lo, hi = MIXED_RANGE
    mixed = float(w[(v > lo) & (v < hi)].sum() / volume) if volume > 0 else np.nan
    return {"segregation_intensity": intensity,
            "mixing_index": 1.0 - np.sqrt(intensity) if np.isfinite(intensity) else np.nan,
            "mixed_volume_fraction": mixed, "mean_indicator": mean, "region_volume": volume}


def mixing_length(profile: pd.DataFrame, *, target: float = 0.9, reference: str = "inflow",
                  weighting: str = "flow", ends: tuple | None = None) -> float:
    """First position along a profile where the mixing index reaches ``target``, or with ``ends`` the
    distance to it from the end the flow enters by.

    Parameters
    ----------
    profile : DataFrame
        A table from :func:`cross_sections` (columns ``position`` and the mixing index read).
    target : float
        Mixing index to reach, in (0, 1]; 0.9 by default (common practice).
    reference : {'inflow', 'section'}
        ``'inflow'`` (default): ``mixing_index_inflow``, each section against the well-mixed state of
        the whole inflow (Danckwerts 1952), with the table's own weights (its ``weighting`` column:
        flow, or area where a section has no net flow or there is no velocity). A section of pure
        carrier (ahead of a dye front, or outside the stream) reads unmixed. ``'section'``: each
        section against its own mean (``mixing_index_flow`` or ``mixing_index`` by ``weighting``),
        where a section of pure carrier reads 1, "mixed".
    weighting : {'flow', 'area'}
        With ``reference='section'``: the flow-weighted or the area-weighted mixing index.
    ends : (float, float), optional
        The domain's extent (low, high) along the profile's axis: the result is then the distance
        from the end the flow enters by (the low end; the high end when the net flow runs towards
        -axis) to that position, a length whichever way the channel runs.

    Returns
    -------
    float
        The position (mesh length units, same axis as the profile), walking
        along the flow (from the highest position down when the net flow runs
        towards -axis; rising positions without a velocity), interpolated
        linearly between the last plane below ``target`` and the first plane
        at or above it; the first position when that plane is already mixed
        (an upper bound); NaN when no plane reaches ``target``, or when no plane
        has an index (against the inflow: the inflow refused, see
        :func:`cross_sections`). Subtract the inlet position for a length (``ends``).
        Which of these it is: :func:`mixing_length_status`.

    Raises
    ------
    OptionError
        Bad target, reference or weighting, a table without the needed columns, or
        ``reference='section', weighting='flow'`` on a profile computed without velocity.
    """
    at, _, backwards = _read_mixing_length(profile, target, reference, weighting)
    if ends is None or not np.isfinite(at):
        return at
    return float(ends[1]) - at if backwards else at - float(ends[0])


def mixing_length_status(profile: pd.DataFrame, *, target: float = 0.9, reference: str = "inflow",
                         weighting: str = "flow") -> str:
    """What the :func:`mixing_length` of the same profile and arguments is, one of
    :data:`MIXING_LENGTH_STATUSES`.

    Parameters
    ----------
    profile, target, reference, weighting
        As for :func:`mixing_length`.

    Returns
    -------
    str
        ``'reached'``: the target is reached between two sections (the length is interpolated there);
        ``'upper_bound'``: the first section along the flow already meets it (the length is that section's,
        an upper bound: the channel mixed at or before it); ``'not_reached'``: no section meets it (the length
        is NaN: longer than the sections reach); ``'undefined'``: no section has a mixing index to read (the
        length is NaN: against the inflow, the inflow was refused, see :func:`cross_sections`; or no sections).

    Raises
    ------
    OptionError
        As for :func:`mixing_length`.
    """
    return _read_mixing_length(profile, target, reference, weighting)[1]


def _read_mixing_length(profile: pd.DataFrame, target: float, reference: str,
                        weighting: str) -> tuple[float, str, bool]:
    """The position where the mixing index first reaches ``target`` along the flow (see :func:`mixing_length`),
    its status (:data:`MIXING_LENGTH_STATUSES`), and whether the net flow runs towards -axis."""
    if reference not in ("inflow", "section"):
        raise OptionError(f"reference must be 'inflow' or 'section', found {reference!r}",
                          fix="'inflow' measures each section against the whole inflow, 'section' against its own mean")
    if weighting not in ("flow", "area"):
        raise OptionError(f"weighting must be 'flow' or 'area', found {weighting!r}",
                          fix="'flow' weighs by u.n, 'area' by the section area")
    if not (np.isfinite(target) and 0 < target <= 1):
        raise OptionError(f"target mixing index must be in (0, 1], found {target!r}", fix="for example 0.9")
    column = ("mixing_index_inflow" if reference == "inflow" else
              "mixing_index_flow" if weighting == "flow" else "mixing_index")
    if "position" not in profile or column not in profile:
        raise OptionError(f"the profile has no '{column}' or 'position' column",
                          fix="pass a table from cross_sections")
    backwards, table = _along_the_flow(profile, column)
    if column == "mixing_index_flow" and len(profile) and profile[column].isna().all():
        raise OptionError("the profile has no flow-weighted mixing index (no velocity given, or no "
                          "net flow through the planes)",
                          fix="pass velocity to cross_sections, or use weighting='area'")
    x = table["position"].to_numpy()
    m = table[column].to_numpy()
    if not len(table):
        return np.nan, "undefined", backwards
    reached = np.nonzero(m >= target)[0]
    if reached.size == 0:
        return np.nan, "not_reached", backwards
    i = int(reached[0])
    if i == 0:
        return float(x[0]), "upper_bound", backwards
    return float(x[i - 1] + (target - m[i - 1]) / (m[i] - m[i - 1]) * (x[i] - x[i - 1])), "reached", backwards


def _along_the_flow(profile: pd.DataFrame, column: str) -> tuple[bool, pd.DataFrame]:
    """Whether the net flow runs towards -axis, and the profile's ``position`` and ``column`` (rows where both are
    finite) along the flow: from the highest position down when it runs towards -axis (as the inflow section is
    taken), rising positions otherwise and without a velocity."""
    backwards = "flow_rate" in profile and float(np.nansum(profile["flow_rate"].to_numpy(dtype=float))) < 0
    return backwards, profile[["position", column]].dropna().sort_values("position", ascending=not backwards,
                                                                         kind="stable")


def mixing_length_note(profile: pd.DataFrame, target: float, length: float, axis: str = "x") -> str | None:
    """What a mixing length read against the inflow (:func:`mixing_length`) does not say by itself:
    that it is an upper bound (the target met at the first section along the flow: the channel mixed at
    or before it), or why it is missing (no section meets the target). None otherwise, and where the
    inflow was refused (:func:`cross_sections` warned of that)."""
    if "mixing_index_inflow" not in profile or not len(profile):
        return None
    _, table = _along_the_flow(profile, "mixing_index_inflow")
    if not len(table):
        return None
    x, m = table["position"].to_numpy(), table["mixing_index_inflow"].to_numpy()
    if np.isfinite(length) and m[0] >= target:
        return (f"the mixing target {target:g} is met at the first section along the flow ({axis} = {x[0]:.6g}, mixing "
                f"index against the inflow {m[0]:.3g}), so the mixing length {length:.4g} is an upper bound: the "
                "channel mixed at or before it; put sections nearer the inlet (--section-positions) for the length")
    if not np.isfinite(length):
        best = int(np.argmax(m))
        return (f"no section meets the mixing target {target:g} (the highest mixing index against the inflow is "
                f"{m[best]:.3g}, at {axis} = {x[best]:.6g}), so the mixing length is empty (not reached within the "
                "sections): a longer channel, or a lower target (--mixing-target)")
    return None


def segregation_scale(mesh: Mesh, c_cell, *, resolution: int | None = None, periodic=()) -> float:
    """Linear scale of segregation (Danckwerts 1952) from the autocorrelation of c.

    Parameters
    ----------
    mesh : Mesh
    c_cell : ndarray of shape (n_cells,) or Indicator
        Phase indicator on cells.
    resolution : int, optional
        Samples along the longest side of the bounding box. Default: about
        one per cell (mean cell size), at most 1024 (2D) or 160 (3D).
    periodic : sequence of {'x', 'y', 'z'}
        Periodic axes: the bounding box is one period along them, and the autocorrelation wraps
        around (circular) instead of ending at the box's faces.

    Returns
    -------
    float
        S = int_0^r0 R(r) dr, in mesh length units, with R the correlation
        coefficient of c at two points a distance r apart (averaged over all
        directions) and r0 its first zero; when R stays positive up to half
        the smallest box side, the integral stops there (an underestimate).
        NaN for a uniform field.

    Notes
    -----
    c is resampled on a regular grid over the bounding box: directly on a
    uniform rectilinear mesh, else each sample takes the value of the nearest
    cell centroid; samples farther than 1.5 cell sizes from every centroid
    (outside a non-box domain) are left out. R(r) is the FFT autocorrelation of
    the masked fluctuation divided by the overlap count (an unbiased estimate),
    zero-padded along walled axes and circular along periodic ones, averaged in
    shells one sample wide, each shell placed at the mean length of its lags
    (not at its nominal radius: the lags rounded to one sample lie farther out on
    average, 1.2 samples for the first shell in 2D). Integrating up to the first
    zero of R is common practice.

    On walled axes the finite window is felt: a pattern cut by the box's faces
    reads a few per cent off (cos(kx) over whole periods, R(r) = cos(kr) -
    sin(kr) / (k (L - r)) along x), and R near half the box can stay far from
    the periodic one, so give the periodic axes of a periodic run.

    References
    ----------
    Danckwerts, P. V. (1952). The definition and measurement of some
    characteristics of mixtures. Applied Scientific Research A3, 279-296.
    """

    c = cell_values(mesh, c_cell)
    if resolution is not None and (isinstance(resolution, bool) or not isinstance(resolution, (int, np.integer))
                                   or resolution < 4):
        raise OptionError(f"resolution must be a whole number >= 4, found {resolution!r}",
                          fix="for example resolution=256")
    _, wrapped = _normalize_periodic(mesh, periodic)
    sample, spacing = regular_sample(mesh, c, resolution)
    return _scale_from_samples(sample, spacing, wrapped)


def regular_sample(mesh: Mesh, c: np.ndarray, resolution: int | None = None):
    """Cell values on a regular grid over the bounding box, and its spacing.

    Directly on a uniform regular grid (no resolution asked); else the nearest cell centroid of
    each grid point (NaN farther than 1.5 cell sizes), ``resolution`` points along the longest
    side (default: the mean cell size, at most 1024 in 2D and 160 in 3D).
    """
    from scipy.spatial import cKDTree

    dim = mesh.dimension
    grid = mesh.regular_grid
    if resolution is None and grid is not None and grid.uniform:
        sample = grid.cells_to_array(c)
        spacing = np.array(grid.spacing)
    else:
        low, high = mesh.bounds[:, list(mesh.plane_axes[:dim])]
        extent = high - low
        if resolution is None:
            size = (mesh.total_measure / mesh.n_whole_cells) ** (1.0 / dim)
            resolution = int(min(np.ceil(extent.max() / size), 1024 if dim == 2 else 160))
        h = extent.max() / resolution
        shape = np.maximum(1, np.round(extent / h)).astype(int)
        spacing = extent / shape
        axes = [low[d] + (np.arange(shape[d]) + 0.5) * spacing[d] for d in range(dim)]
        at = np.stack([g.ravel() for g in np.meshgrid(*axes, indexing="ij")], axis=1)
        distance, nearest = cKDTree(mesh.cell_centroids).query(at)
        values = c[nearest]
        values[distance > 1.5 * mesh.cell_sizes_of(nearest)] = np.nan
        sample = values.reshape(shape)
    return sample, spacing


def _scale_from_samples(sample: np.ndarray, spacing: np.ndarray, wrapped=()) -> float:
    """S from samples on a regular grid; ``wrapped``: indices of the periodic sample axes."""
    mask = np.isfinite(sample)
    if mask.sum() < 2:
        return np.nan
    mean = sample[mask].mean()
    fluctuation = np.where(mask, sample - mean, 0.0)
    variance = float(np.mean(fluctuation[mask] ** 2))
    if variance <= 0:
        return np.nan
    # circular along periodic axes; zero-padded to twice the length along the others (no wrap-around)
    padded = [n if k in wrapped else 2 * n for k, n in enumerate(sample.shape)]
    axes = tuple(range(sample.ndim))
    spectrum = np.fft.rfftn(fluctuation, padded, axes=axes)
    product = np.fft.irfftn(spectrum * np.conj(spectrum), padded, axes=axes)
    mask_spectrum = np.fft.rfftn(mask.astype(np.float64), padded, axes=axes)
    overlap = np.fft.irfftn(mask_spectrum * np.conj(mask_spectrum), padded, axes=axes)
    # lag of every entry (negative lags wrap around) and its length
    lags = np.meshgrid(*[np.fft.fftfreq(n, 1.0 / n) * h for n, h in zip(padded, spacing)], indexing="ij")
    radius = np.sqrt(sum(lag ** 2 for lag in lags))
    limit = 0.5 * min(n * h for n, h in zip(sample.shape, spacing))
    usable = (overlap > 0.5) & (radius <= limit)
    correlation = product[usable] / np.round(overlap[usable]) / variance
    step = float(min(spacing))
    lengths = radius[usable]
    shell = np.round(lengths / step).astype(int)
    count = np.bincount(shell)
    keep = count > 0
    # each shell at the mean length of its lags, where its mean R belongs
    r = np.bincount(shell, lengths)[keep] / count[keep]
    R = np.bincount(shell, correlation)[keep] / count[keep]
    negative = np.nonzero(R <= 0)[0]
    if negative.size:
        j = int(negative[0])
        r_zero = r[j - 1] + R[j - 1] / (R[j - 1] - R[j]) * (r[j] - r[j - 1])
        r = np.append(r[:j], r_zero)
        R = np.append(R[:j], 0.0)
    return float(np.trapezoid(R, r) if hasattr(np, "trapezoid") else np.trapz(R, r))
