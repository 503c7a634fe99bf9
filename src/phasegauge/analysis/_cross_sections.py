"""Cross-section profiles: exact plane sections of the mesh and their statistics.

A plane normal to one axis cuts every simplex of the cells it crosses (the
conforming split of :func:`phasegauge.model.simplices.split_cells`) in a triangle
or a quadrilateral (3D) or a segment (2D).
Point fields are interpolated linearly along the cut edges, cell fields are
constant on the pieces of their cell, so each piece carries the exact field of
the linear (or piecewise-constant) representation. The piece integrals of c,
c^2 and their products with the normal velocity are polynomials of degree 3 at
most in the barycentric coordinates and are integrated exactly by the simplex
moment formula (:func:`_section_integrals`); c is shifted by its median first
so the variance does not suffer from cancellation.

The pieces depend on the mesh and the planes only: they are built once and
cached on the mesh (:mod:`._section_planes`), so a step of a series only
interpolates its fields along the cut edges and sums the moments.
"""

from __future__ import annotations

from math import factorial

import warnings

import numpy as np
import pandas as pd

from ..errors import OptionError, PhasegaugeWarning
from ..model.axes import AXIS_INDEX, AXIS_NAMES
from ..model.corners import corner_sum
from ..model.fields import field_location
from ..model.mesh import Mesh
from ..model._threads import ordered_map
from ._section_planes import _sections
from ._sums import dot


__all__ = ["cross_sections", "PROFILE_COLUMNS"]

#: columns of the table :func:`cross_sections` returns, in order
PROFILE_COLUMNS = ("position", "area", "mean_area_weighted", "mean_flow_weighted",
                   "segregation_intensity", "segregation_intensity_flow", "mixing_index",
                   "mixing_index_flow", "flow_rate", "backflow_fraction", "inflow_mean",
                   "segregation_intensity_inflow", "mixing_index_inflow", "weighting")

#: a section has no net flow where |int u.n dA| <= this x int |u.n| dA: the flow-weighted mean
#: divides by the net flow, so below this it would amplify round-off (float32 velocities of a closed
#: box leave about 1e-8 of the gross flow, velocities averaged onto points 1e-5) and recirculation
#: more than a thousand times
NO_FLOW_TOLERANCE = 1e-3
#: an inflow mean within this of 0 or 1 is one phase (round-off of a uniform section): no
#: segregation to measure the sections against
ONE_PHASE = 1e-9
#: a section where more than this share of int |u.n| dA runs against its net flow has back-flow: signed
#: flow weights would mix forward and backward flow (a variance could come out negative), so its flow-
#: weighted columns take area weights (our threshold)
BACKFLOW_TOLERANCE = 0.01
#: the first section's net flow differing by more than this share from the median of the other
#: sections' does not cut the whole inflow: a channel at an angle to the axis, inlets between sections
#: (our threshold; the median passes over one odd section among a few; an incompressible flow keeps its
#: volume flow along the channel, so one that grows, compressible or changing phase, is refused too)
FLOW_MISMATCH = 0.05
#: a first section whose own intensity of segregation is under this is uniform (mixing index above 0.97):
#: no segregated inflow to measure mixing against (dye injected downstream into carrier at c = 0.01, or a
#: premixed inflow; our threshold)
UNIFORM_INFLOW = 1e-3
#: ... and refused as the inflow (uniform or not) where a section downstream is this many times more
#: segregated than both it and that threshold: mixing along a channel does not undo itself, so an inlet lies
#: further downstream, or (without a velocity, the sections taken along +axis) the flow runs towards -axis. A
#: well-mixed channel's noise sits near the threshold on every section (0.00099 first and 0.00102 later at 1.6 %
#: noise): no sign of a segregation entering downstream (our threshold)
SEGREGATED_DOWNSTREAM = 4.0
#: a section whose mean c (weighted as the inflow's) differs from the inflow's mean m by more than this
#: share of sqrt(m (1 - m)) caps its mixing index against the inflow under 1 - this share: the reference is
#: then not the mixed state (our threshold)
MEAN_DRIFT = 0.02


#: how to mend an inflow section the sections' figures cannot be read against
_INFLOW_FIX = "sections downstream of every inlet (--section-positions), or the inflow's mean (--inflow-mean)"


def _area_weighted_notes(table: pd.DataFrame, global_axis: int, inflow_at: int | None = None) -> list:
    """One warning for the sections with no net flow and one for those with back-flow: their
    flow-weighted columns took area weights; and, where the inflow's mean is read at section ``inflow_at``
    and it has no net flow, that this mean is its area mean."""
    notes = []
    area = (table["weighting"] == "area").to_numpy()
    share = table["backflow_fraction"].to_numpy()
    # a share of about a half is no net flow (|net| = (1 - 2 share) of the gross flow)
    back = area & (share > BACKFLOW_TOLERANCE) & (share < 0.5 * (1.0 - NO_FLOW_TOLERANCE))
    for chosen, why in ((area & ~back, "no net flow through the section"),
                        (back, "back-flow through the section")):
        if not chosen.any():
            continue
        at = table.loc[chosen, ["position", "backflow_fraction"]].to_numpy()
        names = ", ".join(f"{AXIS_NAMES[global_axis]} = {x:.6g}" + (f" ({b:.0%} of its flow)" if chosen is back else "")
                          for x, b in at[:3])
        more = f" and {len(at) - 3} more" if len(at) > 3 else ""
        inflow = (chosen is not back and inflow_at is not None and bool(chosen[inflow_at])
                  and np.isfinite(table["mean_area_weighted"].iloc[inflow_at]))
        notes.append(PhasegaugeWarning(f"{why} at {names}{more}: the flow-weighted mean and mixing index there use "
                                       "area weights" + (" (signed flow weights would mix the forward and the "
                                                         "backward flow)" if chosen is back else "")
                                       + (f", and so does the inflow's mean, read at {AXIS_NAMES[global_axis]} = "
                                          f"{table['position'].iloc[inflow_at]:.6g}" if inflow else "")))
    return notes


def _partial_inflow(table: pd.DataFrame, first: int, where: str) -> str | None:
    """Why the first section's net flow cannot be the whole inflow, or None: it differs by more than
    :data:`FLOW_MISMATCH` from the median of the other sections' flows. Sections with no net flow
    (a closed box: flows of round-off) are left out; a first one with none has no inflow to judge."""
    flow = table["flow_rate"].to_numpy()
    # a back-flow share of about a half is no net flow (|net| = (1 - 2 share) of the gross flow)
    flowing = np.isfinite(flow) & ~(table["backflow_fraction"].to_numpy() >= 0.5 * (1.0 - NO_FLOW_TOLERANCE))
    others = np.flatnonzero(flowing & (np.arange(flow.size) != first))
    if others.size == 0 or not flowing[first]:
        return None
    median = float(np.median(flow[others]))
    if abs(flow[first] - median) <= FLOW_MISMATCH * abs(median):
        return None
    return (f"{where} carries a net flow of {flow[first]:.4g}, against {median:.4g} through the median of the "
            "others, so it does not cut the whole inflow (a channel at an angle to the axis, inlets or outlets "
            "between the sections, a velocity that is not finite over part of it, or a volume flow that changes "
            "along the channel: compressible, or changing phase)")


def _inflow_reference(table: pd.DataFrame, flux_means: np.ndarray, first: int, global_axis: int,
                      flowing: bool) -> tuple[float, list]:
    """The inflow's mean read from the first section along the flow, and the warnings on it; NaN
    where that section cannot be the inflow. With a velocity, the net dye flux over the net flow
    (``flux_means``: defined through a section with back-flow too, and the same through every section
    of a steady channel), else the area mean."""
    notes = []
    name = AXIS_NAMES[global_axis]
    where = f"the first section along the flow ({name} = {table['position'].iloc[first]:.6g})"
    area_means = table["mean_area_weighted"].to_numpy()
    means = np.where(np.isfinite(flux_means), flux_means, area_means) if flowing else area_means
    inflow = float(means[first])
    if flowing and np.isfinite(flux_means[first]) and table["weighting"].iloc[first] == "area":
        notes.append(PhasegaugeWarning(
            f"back-flow ({table['backflow_fraction'].iloc[first]:.0%} of its flow) through {where}: the inflow's "
            f"mean is its net flow of c over its net flow ({inflow:.4g}), not its area mean ({area_means[first]:.4g})"))
    problem = _partial_inflow(table, first, where) if flowing else None  # the cause, when so
    own = table["segregation_intensity_flow" if flowing else "segregation_intensity"].to_numpy()
    later = np.delete(own, first)
    later = later[np.isfinite(later)]
    if problem is None and np.isfinite(inflow) and not ONE_PHASE < inflow < 1 - ONE_PHASE:
        problem = f"{where} is of one phase (mean c {inflow:.3g})"
    elif (problem is None and np.isfinite(own[first]) and later.size
          and later.max() > SEGREGATED_DOWNSTREAM * max(UNIFORM_INFLOW, own[first])):
        # a section downstream more segregated than the first: not the inflow of that segregation, since mixing
        # along a channel does not undo itself (a first section with every later one as segregated or more
        # mixed: kept, uniform or not)
        other_way = "" if flowing else f"flow towards -{name}, or "
        if own[first] < UNIFORM_INFLOW:
            problem = (f"{where} is uniform (segregation {own[first]:.2g}, {later.max():.2g} downstream): "
                       f"no segregated inflow ({other_way}dye injected downstream of it, or a premixed inflow)")
        else:
            problem = (f"{where} is less segregated than a section after it ({own[first]:.2g} against "
                       f"{later.max():.2g}): not its inflow ({other_way}dye injected downstream of it)")
    if problem:
        fix = _INFLOW_FIX if flowing else "the velocity (--velocity), " + _INFLOW_FIX
        notes.append(PhasegaugeWarning(f"{problem}; mixing length and index against it undefined: {fix}"))
        return np.nan, notes  # no index against it, not a huge or a wrong one
    if not flowing:  # flow-weighted means are kept by a steady flow, and change at a dye front: nothing to judge
        notes += _drifting_mean(table, means, first, inflow, name)
    return inflow, notes


def _drifting_mean(table: pd.DataFrame, means: np.ndarray, first: int, inflow: float, name: str) -> list:
    """A warning where a section's area mean differs from the inflow's m by more than :data:`MEAN_DRIFT`
    of sqrt(m (1 - m)): the mixing index against the inflow cannot then pass 1 - that share there (I about
    m is at least (mean - m)^2 / (m (1 - m)), Danckwerts 1952)."""
    others = np.delete(means, first)
    positions = np.delete(table["position"].to_numpy(), first)
    keep = np.isfinite(others)
    if not keep.any() or not 0.0 < inflow < 1.0:
        return []
    share = np.abs(others[keep] - inflow) / np.sqrt(inflow * (1.0 - inflow))
    worst = int(np.argmax(share))
    if share[worst] <= MEAN_DRIFT:
        return []
    return [PhasegaugeWarning(
        f"the area mean of c changes along the channel ({name} = {positions[keep][worst]:.6g}: "
        f"{others[keep][worst]:.4g} against the inflow's {inflow:.4g}), so the mixing index against the inflow "
        f"cannot pass {1 - share[worst]:.3g} there: a dye front still travelling, or inflow streams of other "
        "speeds (give --velocity or --inflow-mean)")]


def normalize_axis(mesh: Mesh, axis) -> tuple[int, int]:
    """The global axis (0, 1, 2) and the analysis axis (index into ``mesh.coordinates``)."""
    key = axis.lower() if isinstance(axis, str) else axis
    if key in AXIS_INDEX:
        key = AXIS_INDEX[key]
    if not isinstance(key, (int, np.integer)) or isinstance(key, bool) or key not in (0, 1, 2):
        raise OptionError(f"axis must be 'x', 'y' or 'z', found {axis!r}",
                          fix="name the axis the planes are normal to, for example axis='x'")
    key = int(key)
    if key not in mesh.plane_axes:
        names = " or ".join(AXIS_NAMES[a] for a in mesh.plane_axes)
        raise OptionError(f"axis '{AXIS_NAMES[key]}' is normal to the plane of this 2D mesh",
                          fix=f"choose {names}")
    return key, mesh.plane_axes.index(key)


def normal_velocity(mesh: Mesh, velocity, global_axis: int,
                    location: str | None = None) -> tuple[np.ndarray, str]:
    """The velocity component along the plane normal, on points or cells."""
    array, location = field_location(mesh, velocity, "velocity", location)
    if array.ndim == 1:
        return array, location
    if array.ndim != 2 or array.shape[1] not in (2, 3):
        raise OptionError(f"velocity must have 1, 2 or 3 components, found shape {array.shape}",
                          fix="pass the velocity vectors (n, 3), or the normal component (n,)")
    if array.shape[1] == 3:
        return array[:, global_axis], location
    if mesh.dimension == 3:
        raise OptionError("a 3D mesh needs velocity vectors with 3 components",
                          fix="pass the full velocity field (n, 3)")
    return array[:, mesh.plane_axes.index(global_axis)], location


def default_positions(mesh: Mesh, global_axis: int, count: int) -> np.ndarray:
    """``count`` planes at the centres of equal slabs between the mesh bounds."""
    if isinstance(count, bool) or not isinstance(count, (int, np.integer)) or count < 1:
        raise OptionError(f"count must be a positive whole number, found {count!r}",
                          fix="for example count=20")
    lo, hi = mesh.bounds[:, global_axis]
    return lo + (np.arange(count) + 0.5) * (hi - lo) / count


def _section_integrals(measures: np.ndarray, c: list, u: list | None = None) -> tuple:
    """Exact integrals over simplices of the linear c (and u) given at their corners.

    ``c`` and ``u`` are lists of k corner value arrays (n,). Returns int c,
    int c^2, and with ``u``: int u, int u c, int u c^2.

    With k corners (dimension d = k - 1) and barycentric coordinates, int
    l_i l_j l_k = |S| d! a! b! c! / (d + n)! for a monomial of degree n
    (multiplicities a, b, c), which gives for corner values f, g, h:
    int f = |S| sum f / k; int f g = |S| (sum fg + sum f sum g) d! / (d + 2)!;
    int f g h = |S| (sum f sum g sum h + sum fg sum h + sum gh sum f + sum fh sum g
    + 2 sum fgh) d! / (d + 3)!.
    """
    k = len(c)
    d = k - 1
    # the sums are formed in the order (c0 + c1) + c2, as a sum over corners would
    sc = c[0] + c[1]
    cc = c[0] * c[0]
    work = c[1] * c[1]
    cc += work
    for ci in c[2:]:
        sc += ci
        np.multiply(ci, ci, out=work)
        cc += work
    np.multiply(sc, sc, out=work)
    work += cc
    out = [dot(measures, sc) / k, dot(measures, work) * factorial(d) / factorial(d + 2)]
    if u is None:
        return tuple(out)
    su = corner_sum(u)
    uc = [ui * ci for ui, ci in zip(u, c)]
    suc = corner_sum(uc)
    cubic = su * sc * sc + suc * sc + cc * su + suc * sc + 2 * corner_sum([p * ci for p, ci in zip(uc, c)])
    out += [dot(measures, su) / k, dot(measures, suc + su * sc) * factorial(d) / factorial(d + 2),
            dot(measures, cubic) * factorial(d) / factorial(d + 3)]
    return tuple(out)


def _median(values: np.ndarray) -> float:
    """``np.median`` of a 1D array of finite values, the same number, faster on large arrays.

    The middle ranks are selected among the values between two quantiles of
    a sample (a few comparisons over the array instead of a partition of a
    copy of it); when they are not there, the plain median.
    """
    n = values.size
    middle = [(n - 1) // 2, n // 2]  # one rank for odd n, the two middle ones for even n
    if n < 65536:
        return float(np.median(values))
    sample = np.sort(values[::64])
    lo, hi = sample[int(0.45 * sample.size)], sample[int(0.55 * sample.size)]
    below = int(np.count_nonzero(values < lo))
    if below <= middle[0]:
        inside = values[(values >= lo) & (values <= hi)]
        if middle[1] < below + inside.size:
            chosen = np.partition(inside, [m - below for m in middle])[[m - below for m in middle]]
            return float(np.mean(chosen if n % 2 == 0 else chosen[:1]))
    return float(np.median(values))


def _statistics(weight_total: float, first: float, second: float, shift: float) -> tuple[float, float]:
    """Mean and intensity of segregation from int w, int w (c - shift), int w (c - shift)^2."""
    if not weight_total:
        return np.nan, np.nan
    offset = first / weight_total
    mean = shift + offset
    variance = max(second / weight_total - offset * offset, 0.0)
    spread = mean * (1.0 - mean)
    return mean, (variance / spread if spread > 0 else np.nan)


def _about(weight_total: float, first: float, second: float, shift: float, reference: float) -> float:
    """Danckwerts' I about a given mean: int w (c - ref)^2 / (W ref (1 - ref)), from the shifted moments."""
    spread = reference * (1.0 - reference)
    if not weight_total or not np.isfinite(reference) or spread <= 0:
        return np.nan
    offset = reference - shift
    variance = max(second / weight_total - 2.0 * offset * first / weight_total + offset * offset, 0.0)
    return variance / spread


class _Planes:
    """The checked arguments of :func:`cross_sections`: the field, the velocity along the axis,
    the plane positions, and the section operator they need."""

    def __init__(self, mesh, c_point_or_indicator, axis, positions, count, velocity, c_location,
                 velocity_location):
        self.mesh = mesh
        self.global_axis, self.plane_axis = normalize_axis(mesh, axis)
        self.c, self.c_location = field_location(mesh, c_point_or_indicator, "c", c_location)
        if self.c.ndim != 1:
            raise OptionError(f"c must be a scalar field, found shape {self.c.shape}", fix="pass the indicator")
        if positions is None:
            positions = default_positions(mesh, self.global_axis, count)
        positions = np.atleast_1d(np.asarray(positions, dtype=np.float64))
        if positions.ndim != 1 or not np.all(np.isfinite(positions)):
            raise OptionError("positions must be a list of finite numbers",
                              fix="for example positions=[0.1, 0.2, 0.5]")
        low, high = mesh.bounds[:, self.global_axis]
        outside = positions[(positions < low) | (positions > high)]
        if outside.size:
            raise OptionError(f"section positions {', '.join(f'{p:g}' for p in outside)} lie outside the mesh, "
                              f"which spans {AXIS_NAMES[self.global_axis]} from {low:.6g} to {high:.6g}",
                              fix="give positions inside the mesh")
        self.positions = positions
        self.u = None
        if velocity is not None:
            self.u = normal_velocity(mesh, velocity, self.global_axis, velocity_location)
        tolerance = 1e-12 * max(float(np.ptp(mesh.bounds[:, self.global_axis])), 1e-300)
        # a plane through mesh points takes the faces on its lower side, except at the lower end
        self.lower_ends = positions <= mesh.bounds[0, self.global_axis] + tolerance
        self.locations = frozenset([self.c_location] + ([] if self.u is None else [self.u[1]]))

    def operator(self, threads: int):
        """The section operator of these planes (kept on the mesh: built once per axis and positions)."""
        return _sections(self.mesh, self.plane_axis, self.positions, self.lower_ends, self.locations,
                         threads=threads)


def prepare_cross_sections(mesh: Mesh, c_point_or_indicator, *, axis="x", positions=None, count: int = 20,
                           velocity=None, c_location: str | None = None, velocity_location: str | None = None,
                           threads: int = 1) -> None:
    """Build and keep the section operator that :func:`cross_sections` with the same arguments reads.

    Mesh work only: the planes cut (on up to ``threads`` threads) and kept on the mesh, nothing
    integrated and nothing warned; the same checks and errors as :func:`cross_sections`. A run
    builds it beside the step's other analyses on a new mesh.
    """
    _Planes(mesh, c_point_or_indicator, axis, positions, count, velocity, c_location,
            velocity_location).operator(threads)


def cross_sections(mesh: Mesh, c_point_or_indicator, *, axis="x", positions=None, count: int = 20,
                   velocity=None, c_location: str | None = None,
                   velocity_location: str | None = None, inflow_mean: float | None = None,
                   threads: int = 1) -> pd.DataFrame:
    """Mean, intensity of segregation and mixing index on planes across the domain.

    Parameters
    ----------
    mesh : Mesh
    c_point_or_indicator : Indicator or ndarray of shape (n_points,) or (n_cells,)
        The phase indicator, dimensionless. Point values are interpolated
        linearly inside each cell's simplices; cell values are constant on
        each cell. An :class:`Indicator` is used where its input data lives.
    axis : {'x', 'y', 'z'}
        The planes are normal to this axis (for a 2D mesh, one of its plane's
        axes; the sections are then lines).
    positions : array_like of float, optional
        Plane positions along ``axis``, in mesh length units.
    count : int
        Without ``positions``: this many planes at the centres of equal slabs
        between the mesh bounds (the ends themselves are not sampled).
    velocity : ndarray of shape (n, 3), (n, 2) or (n,), optional
        Velocity on points or cells; (n,) is taken as the component along the
        plane normal. Gives the flow-weighted columns and ``flow_rate``.
    c_location, velocity_location : {'point', 'cell'}, optional
        Where an array lives; needed only when the mesh has as many points
        as cells (otherwise the length tells).
    inflow_mean : float, optional
        The well-mixed reference: the mean of c over the whole inflow. By
        default the mean over the first plane along the flow (the lowest
        position; the highest when the net flow runs towards -axis),
        flow-weighted (area-weighted without velocity or without net flow
        through it).
    threads : int
        Threads that cut the planes when the mesh's section operator is built (once per mesh,
        axis and positions) and that integrate them; the profile is the same bit for bit on any
        number.

    Returns
    -------
    DataFrame
        One row per plane, columns :data:`PROFILE_COLUMNS`:

        - ``position``: plane position along ``axis``, length units;
        - ``area``: section area (3D) or length (2D), length units squared / length units;
        - ``mean_area_weighted``, ``mean_flow_weighted``: mean of c weighted by area and by u.n;
        - ``segregation_intensity``, ``segregation_intensity_flow``: I = var / (m (1 - m)) with
          the same weights; NaN when m (1 - m) <= 0 (a uniform pure phase, or m out of [0, 1]);
        - ``mixing_index``, ``mixing_index_flow``: 1 - sqrt(I);
        - ``flow_rate``: int u.n dA, volume per time (area per time in 2D), signed along +axis;
        - ``backflow_fraction``: the share of int |u.n| dA that runs against the net flow;
        - ``inflow_mean``: the reference mean (``inflow_mean``, or the first plane's mean);
        - ``segregation_intensity_inflow``, ``mixing_index_inflow``: Danckwerts' I about the
          inflow mean, int w (c - m_in)^2 / (W m_in (1 - m_in)), and 1 - sqrt(I), with flow
          weights (area weights where the plane has no net flow or there is no velocity): a
          plane of pure phase reads I near 1 (unmixed) whatever its own mean;
        - ``weighting``: 'flow' or 'area', the weights of the ``_flow`` and ``_inflow`` columns.

        Flow-weighted columns are NaN without ``velocity``. Where a plane's net
        flow rate is zero (|int u.n dA| <= 1e-3 int |u.n| dA), or it has back-flow, they take the
        area-weighted values, and a :class:`PhasegaugeWarning` names those planes.

    Raises
    ------
    OptionError
        Bad axis, count, positions, or fields whose length fits neither points nor cells.

    Notes
    -----
    The section is exact for the piecewise-linear interpolant on a split of
    every cell into simplices (quads into 2 triangles; hexahedra, wedges and
    pyramids with a bent quad face into tetrahedra from their centre, each
    such face cut along its shorter diagonal, so the split conforms even
    where quad faces are not flat): for simplex meshes
    this is the mesh's own interpolant; for quads and hexahedra it differs
    from the bilinear/trilinear one by O(h^2) inside a cell. A plane through mesh points takes the faces on its
    lower side (at the lowest mesh coordinate, those on its upper side), so
    every face counts once. Parts where c (or the velocity) is NaN are left
    out of the statistics and ``flow_rate`` but not of ``area``. Flow weights are signed, so a
    plane where more than 1 % of int |u.n| dA runs against its net flow (``backflow_fraction``)
    takes area weights, with a warning. Taken from the first plane, the inflow is refused (NaN
    inflow columns, a warning) where that plane's net flow differs by more than 5 % from the
    median of the others' (it does not cut the whole inflow), and
    where that plane is uniform (its own I under 1e-3: nothing segregated to mix, an inlet further
    downstream). Values of c are not clipped, so overshoots can make I > 1.

    References
    ----------
    Danckwerts, P. V. (1952). The definition and measurement of some
    characteristics of mixtures. Applied Scientific Research A3, 279-296.
    """
    table, notes = cross_sections_noted(mesh, c_point_or_indicator, axis=axis, positions=positions, count=count,
                                        velocity=velocity, c_location=c_location,
                                        velocity_location=velocity_location, inflow_mean=inflow_mean,
                                        threads=threads)
    for note in notes:
        warnings.warn(note, stacklevel=2)
    return table


def cross_sections_noted(mesh: Mesh, c_point_or_indicator, *, axis="x", positions=None, count: int = 20,
                         velocity=None, c_location: str | None = None, velocity_location: str | None = None,
                         inflow_mean: float | None = None, threads: int = 1) -> tuple[pd.DataFrame, list]:
    """:func:`cross_sections`' table and the warnings it gives, as a list, not given.

    For a thread beside the caller's analyses (:class:`phasegauge.model._threads.Beside`), whose
    warnings would land among the caller's in no fixed order: the caller gives them where it reads
    the table. The same arguments, table and errors as :func:`cross_sections`.
    """
    if inflow_mean is not None and not (np.isfinite(inflow_mean) and 0.0 < inflow_mean < 1.0):
        raise OptionError(f"inflow_mean must be a number strictly between 0 and 1, found {inflow_mean!r} (a "
                          "mixture of one phase has no segregation to measure against)",
                          fix="give the mean of c over the inflow, or leave it out")
    planes = _Planes(mesh, c_point_or_indicator, axis, positions, count, velocity, c_location, velocity_location)
    c, c_location, u = planes.c, planes.c_location, planes.u
    positions, global_axis = planes.positions, planes.global_axis
    finite = np.isfinite(c)
    finite_c = c if finite.all() else c[finite]
    shift = _median(finite_c) if finite_c.size else 0.0  # shifts c before squaring
    sections = planes.operator(threads)

    # point fields at the cut edges for all planes at once (c shifted there); cell fields are
    # read per piece from its cell. Non-finite values are looked for per piece only if there are any
    fields = [(c, c_location, shift)] + ([] if u is None else [(u[0], u[1], 0.0)])
    sources, all_finite = [], True
    for values, location, offset in fields:
        if location == "point":
            values = sections.cut_values(mesh, values)
            values -= offset
        all_finite = all_finite and bool(np.isfinite(values).all())
        sources.append(values)
    k = mesh.dimension

    def on_corners(field, p):
        values, (_, location, offset) = sources[field], fields[field]
        if location == "point":
            return [values[sections.corners[p][:, i].astype(np.intp)] for i in range(k)]
        return [values[sections.parent[p].astype(np.intp)] - offset] * k

    def plane(p):
        """The profile row of plane ``p`` and the moments its inflow figure reads."""
        w = sections.measures[p]
        cv = on_corners(0, p)
        un = None if u is None else on_corners(1, p)
        if not all_finite:
            # parts where c or the velocity is not finite are left out (of all but the area)
            good = np.logical_and.reduce([np.isfinite(v) for v in cv + (un or [])])
            w, cv = w[good], [v[good] for v in cv]
            un = None if un is None else [v[good] for v in un]
        integrals = _section_integrals(w, cv, un)
        flux_mean = np.nan
        mean, intensity = _statistics(float(w.sum()), integrals[0], integrals[1], shift)
        row = {"position": float(positions[p]), "area": float(sections.areas[p]), "mean_area_weighted": mean,
               "segregation_intensity": intensity, "weighting": "area"}
        used = (float(w.sum()),) + tuple(integrals[:2])
        if un is not None:
            flow, flow_c, flow_cc = integrals[2:]
            # int |u.n| dA and the part of it against the net flow, to the accuracy a tolerance needs (the
            # mean over each piece's corners)
            gross = float(dot(w, corner_sum([np.abs(v) for v in un]))) / len(un)
            against = float(dot(w, corner_sum([np.maximum(-v if flow >= 0 else v, 0.0) for v in un]))) / len(un)
            row["flow_rate"] = flow
            row["backflow_fraction"] = against / gross if gross > 0 else np.nan
            if abs(flow) > NO_FLOW_TOLERANCE * gross:  # net dye flux over net flow: defined with back-flow too
                flux_statistics = _statistics(flow, flow_c, flow_cc, shift)
                flux_mean = flux_statistics[0]
            if abs(flow) > NO_FLOW_TOLERANCE * gross and against <= BACKFLOW_TOLERANCE * gross:
                mean_f, intensity_f = flux_statistics
                used = (flow, flow_c, flow_cc)
                row["weighting"] = "flow"
            else:  # no net flow through this plane, or back-flow: area weights
                mean_f, intensity_f = mean, intensity
            row.update(mean_flow_weighted=mean_f, segregation_intensity_flow=intensity_f)
        return row, used, flux_mean

    # the planes side by side: each reads its own pieces, the rows come back in plane order
    rows, moments, flux_means = [], [], []
    for row, used, flux_mean in ordered_map(plane, range(len(positions)), threads=threads):
        rows.append(row)
        moments.append(used)
        flux_means.append(flux_mean)
    table = pd.DataFrame(rows, columns=list(PROFILE_COLUMNS))
    notes = []
    table[[c for c in PROFILE_COLUMNS if c != "weighting"]] = table[
        [c for c in PROFILE_COLUMNS if c != "weighting"]].astype(np.float64)
    # the inflow section: the first plane along the flow (the lowest position, the highest for flow towards -axis)
    backwards = u is not None and len(table) and float(np.nansum(table["flow_rate"].to_numpy())) < 0
    first = int(np.argmax(positions) if backwards else np.argmin(positions)) if len(table) else 0
    if u is not None and len(table):
        notes += _area_weighted_notes(table, global_axis, first if inflow_mean is None else None)
    if inflow_mean is None and len(table):
        inflow_mean, found = _inflow_reference(table, np.asarray(flux_means, dtype=float), first, global_axis,
                                               u is not None)
        notes += found
    table["inflow_mean"] = float(inflow_mean) if len(table) else np.nan
    table["segregation_intensity_inflow"] = [_about(*m, shift, float(inflow_mean)) for m in moments]
    with np.errstate(invalid="ignore"):
        table["mixing_index"] = 1.0 - np.sqrt(table["segregation_intensity"])
        table["mixing_index_flow"] = 1.0 - np.sqrt(table["segregation_intensity_flow"])
        table["mixing_index_inflow"] = 1.0 - np.sqrt(table["segregation_intensity_inflow"])
    return table[list(PROFILE_COLUMNS)], notes

