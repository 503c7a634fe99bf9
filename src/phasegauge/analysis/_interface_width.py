"""Interface width: band volume, threshold-free, second-moment and local profile fits.

The estimators and their entry points. The work is done by three modules: the integrals
over the simplex split (:mod:`._width_integrals`), the signed distances to the contour
(:mod:`._signed_distance`) and the local logistic fits (:mod:`._profile_fits`).

Every width is reported as the equivalent 5-95 % thickness of the logistic
profile c(n) = 1/2 (1 + tanh(n / (2 eps))) (Olsson & Kreiss 2005), which is
2 ln(19) eps = 5.889 eps, so that the estimators can be compared directly; the
logistic eps itself is returned as ``interface_eps``.
"""

from __future__ import annotations

from contextlib import nullcontext

import numpy as np
import pandas as pd

from ..errors import OptionError
from ..model._statistics import weighted_quantile
from ..model.contour import Contour
from ..model.corners import CornerExtremes, cell_gradient, corner_extremes
from ..model.mesh import Mesh
from ..model._threads import Beside, check_threads
from ..model.simplices import _split_plan
from ._boundary_reach import boundary_share
from ._facing_interface import FACING_REACH, facing_interface_share
from ._bulk_noise import between_bulks, leave_out_noise
from ._contour import _check_extremes, _check_level, find_interface
from ._profile_fits import PROFILE_COLUMNS, WIDTH_PER_EPS, _profile_table
from ._hex_integrals import _HexBand, coned_hexahedra
from ._signed_distance import MeasuredDistances, _ContourGeometry, _whole_cell_pieces
from ._bulk_plateaus import bulk_plateaus
from ._width_integrals import _TAIL, NEAR_BAND, _GridBand, _SplitBand, _grid_tetrahedra, moment_cells

__all__ = ["interface_metrics", "interface_profile_table", "prepare_widths", "PreparedWidths", "METRIC_KEYS",
           "PROFILE_COLUMNS", "WIDTH_PER_EPS"]

#: 10-90 % thickness per unit eps: 2 ln 9
_WIDTH_10_90_PER_EPS = 2.0 * np.log(9.0)
#: below this many cells across 0.1 < c < 0.9 a stretch of interface counts as under-resolved
RESOLVED_CELLS = 4.0
#: the second moment is taken out to this many eps from the contour
_MOMENT_RANGE = 10.0

METRIC_KEYS = ("interface_size", "interface_width", "interface_width_cells", "width_threshold_free",
               "interface_eps", "width_second_moment", "interface_variance", "width_profile_median",
               "width_profile_p90", "widest_x", "widest_y", "widest_z",
               "under_resolved_interface_fraction", "interface_cells_across", "bulk_c_low", "bulk_c_high",
               "width_cell_data_bias", "interface_near_boundary_fraction", "interface_near_interface_fraction",
               "bulk_noise_left_out")

#: bias of the widths on point values rebuilt from cell data, per (h / eps)^2 (measured on cell
#: averages of the logistic profile: +0.46 / +1.4 / +6.3 / +30 % at h / eps = 1/4, 1/2, 1, 2)
CELL_DATA_BIAS = 0.063


# --------------------------------------------------------------------------- arguments

def _indicator_values(mesh: Mesh, indicator, *, need_cells: bool = True):
    """(cell values, point values) of an Indicator or a plain array (cells None if not needed)."""
    if hasattr(indicator, "cell") and hasattr(indicator, "point"):
        cell = np.asarray(indicator.cell, dtype=np.float64)
        point = np.asarray(indicator.point, dtype=np.float64)
        if cell.shape != (mesh.n_cells,) or point.shape != (mesh.n_points,):
            raise OptionError(f"indicator does not fit the mesh ({mesh.n_cells} cells, "
                              f"{mesh.n_points} points)", fix="build the indicator on this mesh")
        return cell, point
    values = np.asarray(indicator, dtype=np.float64)
    if values.shape == (mesh.n_points,):
        return (mesh.point_to_cell(values) if need_cells else None), values
    if values.shape == (mesh.n_cells,):
        return values, mesh.cell_to_point(values)
    raise OptionError(f"indicator must be an Indicator or an array of {mesh.n_points} point or "
                      f"{mesh.n_cells} cell values, found shape {values.shape}",
                      fix="pass make_indicator(...) or Indicator.point")


def _check_samples(max_samples) -> int:
    if isinstance(max_samples, bool) or not isinstance(max_samples, (int, np.integer)) or max_samples < 1:
        raise OptionError(f"max_samples must be a positive integer, found {max_samples!r}",
                          fix="for example max_samples=2000")
    return int(max_samples)


# --------------------------------------------------------------------------- main entry

class PreparedWidths:
    """What the widths read besides the distances: the contour, the values between the bulk values
    and the band integrals. Made by :func:`prepare_widths` (or inside :func:`interface_metrics`),
    for :func:`interface_metrics` of the same mesh, indicator and level.

    Attributes
    ----------
    contour : Contour
        The contour at ``level``.
    plateaus : tuple of 3 floats
        ``(low, high, tail)`` as :func:`bulk_plateaus` gives them.
    level : float
        The contour level.

    The other attributes are the metrics' own: the indicator and its point values (``indicator``,
    ``c_point``), the contour's element sizes, centroids and normals (``geometry``) and the whole
    cells' pieces the distances search (``pieces``, or None), those values between the bulk values
    (``clipped``, with ``width_level``), the threshold-free numerator on cell data (``cell_mixed``)
    and the band integrals (``integrals``).
    """

    def __init__(self, mesh: Mesh, indicator, level: float, *, contour=None, extremes=None, plateaus=None,
                 threads: int = 1):
        self.level = _check_level(level)
        threads = check_threads(threads)
        self.mesh, self.indicator = mesh, indicator
        _, self.c_point = _indicator_values(mesh, indicator, need_cells=False)
        extremes = _check_extremes(mesh, extremes)
        plateaus = None if plateaus is None else _check_plateaus(plateaus)
        if contour is not None and not isinstance(contour, Contour):
            raise OptionError(f"contour must be a Contour, found {type(contour).__name__}",
                              fix="pass the result of find_interface, or None")
        layout = _grid_tetrahedra(mesh)
        if extremes is None and layout is None:  # read by the integrals (and the contour on the cells)
            extremes = corner_extremes(mesh, self.c_point)
        if layout is None and threads >= 2:  # the split plan both threads read: made before they run
            _split_plan(mesh, threads=threads)
        band = _band_kind(mesh, layout)
        merge = band.merges_pieces(mesh)
        side = found = None
        if contour is not None:
            found = (contour,) + _contour_geometry(mesh, contour, merge)
        elif threads >= 2:  # found beside the integrals, with its geometry (nothing there warns)
            side = Beside(_found_contour, mesh, self.c_point, self.level, extremes, merge)
        else:
            found = _found_contour(mesh, self.c_point, self.level, extremes, merge)
        with side or nullcontext():  # waited for however the integrals end
            low, high, tail = (bulk_plateaus(self.c_point, self.level, mesh, extremes=extremes) if plateaus is None
                               else plateaus)
            self.plateaus = (low, high, tail)
            self.clipped = self._rescaled(self.c_point)  # the estimators see the profile between the bulk values
            self.width_level = self.level if (low, high) == (0.0, 1.0) else (self.level - low) / (high - low)
            self.clipped, near = leave_out_noise(mesh, indicator, self.c_point, self.clipped, self.plateaus,
                                                 self.width_level, extremes)
            self.cell_mixed = _cell_mixed(mesh, indicator, low, high, tail, near)
            if near is not None and layout is None:  # the extremes of the values the integrals read
                extremes = corner_extremes(mesh, self.clipped)
            self.noise_left_out = near is not None
            self.integrals = self._integrals(band, layout, extremes, tail, rescaled=near is not None)
            self._moment_plan, self._moments = (band, layout, tail), None  # see moment_integrals
        self.contour, self.geometry, self.pieces = found if side is None else side.result()

    def _rescaled(self, values: np.ndarray) -> np.ndarray:
        """``values`` between the bulk values, clipped to [0, 1] (monotone: cells' corner extremes map too)."""
        return between_bulks(values, *self.plateaus[:2])

    @property
    def moment_integrals(self):
        """The band integrals the second moment reads (formed when first read): over the values between the bulk
        values as written, not clipped nor with bulk noise left out (its weight grad c . grad d takes noise at zero
        mean, which those would bias), on every cell where they vary but within the tail of 0 or 1 (an overshoot
        above 1 and its fall back count, :func:`._width_integrals.moment_cells`); the widths' own where those read
        the same values (their cells then differ only where c is constant, which weighs nothing)."""
        if self._moments is None:
            (low, high, _), (band, layout, tail) = self.plateaus, self._moment_plan
            values = self.c_point if (low, high) == (0.0, 1.0) else (self.c_point - low) / (high - low)
            # the bulk noise's tail cut-off is the widths' alone: the moments keep every cell but those within
            # round-off of a bulk (a cut-off of 0.0126 dropped the logistic's tails beyond 4.4 eps, 20 % of the
            # variance: D 0.875 of a front's with bulks 0.02/0.98 and 0.4 % noise, 0.996 with the floor)
            same = tail <= _TAIL and np.array_equal(values, self.clipped, equal_nan=True)
            self._moments = self.integrals if same else \
                self._integrals(band, layout, None if layout is not None else corner_extremes(self.mesh, values),
                                _TAIL, rescaled=True, values=values, near_band=-np.inf, written=True)
        return self._moments

    def _integrals(self, band, layout, extremes, tail: float, *, rescaled: bool = False, values=None,
                   near_band: float = NEAR_BAND, written: bool = False):
        """The band integrals of ``values`` (the clipped ones by default); ``written``: the second moment's, over
        the values as written, on the cells :func:`._width_integrals.moment_cells` picks (a cell wholly above 1 or
        below 0 counts)."""
        mesh, (low, high, _) = self.mesh, self.plateaus
        values = self.clipped if values is None else values
        if band is _GridBand:
            return _GridBand(mesh, values, layout, cutoff=tail, near_band=near_band, written=written)
        # the extremes of the clipped values are the clipped extremes: those of c will do
        lo, hi = extremes
        if (low, high) != (0.0, 1.0) and not rescaled:
            lo, hi = (lo - low) / (high - low), (hi - low) / (high - low)
        active = moment_cells(lo, hi, tail) if written else (hi > tail) & (lo < 1.0 - tail)
        if band is _HexBand:  # hexahedra coned on all faces: integrated cell by cell
            return _HexBand(mesh, values, active, coned_hexahedra(mesh), lo, hi, near_band=near_band)
        return _SplitBand(mesh, values, active, near_band=near_band)


def _band_kind(mesh: Mesh, layout):
    """The class of the band integrals of ``mesh``: on a grid's layout, on coned hexahedra cell by
    cell, else on the simplex split (its ``merges_pieces`` says which elements its distances search)."""
    if layout is not None:
        return _GridBand
    return _HexBand if coned_hexahedra(mesh) is not None else _SplitBand


def _contour_geometry(mesh: Mesh, contour: Contour, merge: bool) -> tuple:
    """The contour's element sizes, centroids and normals, and with ``merge`` (and elements) the
    whole cells' pieces the distances search (else None)."""
    geometry = _ContourGeometry(contour)
    return geometry, (_whole_cell_pieces(mesh, geometry) if merge and contour.n_elements else None)


def _found_contour(mesh: Mesh, c_point, level: float, extremes, merge: bool) -> tuple:
    """The contour at ``level`` and its geometry (:func:`_contour_geometry`): the work of the contour's
    own thread, beside the band integrals."""
    contour = find_interface(mesh, c_point, level=level, extremes=extremes)
    return (contour,) + _contour_geometry(mesh, contour, merge)


def _cell_mixed(mesh: Mesh, indicator, low: float, high: float, tail: float, near=None):
    """int c (1 - c) dV on the solver's cell values (data on cells), else None.

    With data on cells the point values are averages of the cells around each point, which
    widens the profile (by about 3 % (h / eps)^2 in every estimator on the point values). The
    threshold-free numerator integrates the cell values themselves (midpoint rule, error
    O(h^2 / eps^2) with no smoothing), while its denominator, the total variation int |grad c| dV,
    is kept by the averaging of a monotone profile. With ``near`` (the cells within the contour's
    reach, where bulk noise is left out) only those cells count.
    """
    if getattr(indicator, "location", None) != "cell":
        return None
    c = (np.asarray(indicator.cell, dtype=np.float64) - low) / (high - low)
    c = np.clip(np.where(np.isfinite(c), c, 0.0), 0.0, 1.0)
    keep = (c > tail) & (c < 1.0 - tail)
    if near is not None:
        keep &= near
    return float(np.sum((c * (1.0 - c) * mesh.cell_measures)[keep]))


def _check_plateaus(plateaus) -> tuple[float, float, float]:
    try:
        low, high, tail = (float(v) for v in plateaus)
    except (TypeError, ValueError):
        raise OptionError(f"plateaus must be (low, high, tail) as bulk_plateaus gives them, found {plateaus!r}",
                          fix="pass bulk_plateaus(c_point, level) of the same values, or None") from None
    if not (np.isfinite([low, high, tail]).all() and low < high):
        raise OptionError(f"plateaus must be finite with low < high, found {plateaus!r}",
                          fix="pass bulk_plateaus(c_point, level) of the same values, or None")
    return low, high, tail


def _nan_metrics() -> dict:
    return {key: float("nan") for key in METRIC_KEYS}


def interface_metrics(mesh: Mesh, indicator, *, level: float = 0.5, contour: Contour | None = None,
                      extremes: CornerExtremes | None = None, max_samples: int = 2000,
                      return_distances: bool = False, plateaus=None, threads: int = 1,
                      prepared: PreparedWidths | None = None, periodic: tuple = ()):
    """Size and width of the interface, by four independent estimators.

    Parameters
    ----------
    mesh : Mesh
    indicator : Indicator or ndarray
        The phase indicator (:func:`phasegauge.make_indicator`), or an array
        of ``n_points`` point values or ``n_cells`` cell values (cell values
        are averaged to points with :meth:`Mesh.cell_to_point`).
    level : float
        Contour level, default 0.5.
    contour : Contour, optional
        The contour at ``level`` when already found (saves the work).
    extremes : CornerExtremes, optional
        Per-cell corner minima and maxima of the indicator's point values,
        as :func:`find_interface` with ``return_extremes=True`` gives them for
        the same values (saves a pass over the cells); None: computed here.
    max_samples : int
        At most this many contour elements (evenly strided) get a local
        profile fit.
    return_distances : bool
        Also return the signed distances to the contour the estimators
        measured at the mesh points (for
        :func:`phasegauge.analysis.thermo.interface_distance`, which then
        searches only where they leave the answer open).
    plateaus : tuple of 3 floats, optional
        ``(low, high, tail)`` as :func:`bulk_plateaus` gives them for the same point values
        and ``level`` (a caller that also labels droplets computes them once); None:
        computed here.
    threads : int
        Threads of the signed-distance searches (the same numbers on any number);
        with two or more and no ``contour``, the contour is found beside the
        band integrals.
    prepared : PreparedWidths, optional
        The contour, bulk values and band integrals :func:`prepare_widths`
        formed for the same mesh, indicator (the same object: it is not read
        again) and ``level`` (a caller that reads the contour before the
        widths forms them once); then ``contour``, ``extremes`` and
        ``plateaus`` are not given.
    periodic : tuple of str
        Axes (``'x'``, ...) along which the domain wraps: their boundary planes cut no profile
        (``interface_near_boundary_fraction``).

    Returns
    -------
    dict
        ``interface_size`` : float, length (2D) or area (3D) of the contour.
        ``interface_width`` : float, length; band volume of 0.05 < c < 0.95
        divided by the interface size: the 5-95 % thickness (5.889 eps for
        the logistic profile).
        ``interface_width_cells`` : float; ``interface_width`` over the local
        cell size (length-weighted mean of the sizes of the cells the contour
        passes through).
        ``width_threshold_free`` : float, length; 5.889 ``interface_eps``.
        ``interface_eps`` : float, length; int c(1-c) dV / int |grad c| dV,
        the logistic eps with no threshold.
        ``width_second_moment`` : float, length; 5.889 sqrt(3 var) / pi, the
        logistic 5-95 % thickness with the same variance of dc/dn.
        ``interface_variance`` : float, length squared; variance of the
        normal-distance distribution of dc/dn (weighted by grad c . grad d,
        d the signed distance, over the values between the bulk values as
        written: no clip, no bulk noise left out), the quantity
        :func:`diffusion_audit` fits.
        ``width_profile_median``, ``width_profile_p90`` : float, length;
        length/area-weighted median and 90th percentile of the local logistic
        fits of c against normal distance (:func:`interface_profile_table`),
        as 5-95 % thickness.
        ``widest_x``, ``widest_y``, ``widest_z`` : float; where the local fit
        is widest.
        ``under_resolved_interface_fraction`` : float in [0, 1]; share of the
        interface size with fewer than 4 cells across 0.1 < c < 0.9 (common
        practice), the local 10-90 % thickness taken as ln 9 / (2 |grad c|).
        ``interface_cells_across`` : float; length/area-weighted median of
        that local 10-90 % thickness in cells (what tells a diffuse
        interface from a sharp one, :func:`interface_kind`).
        ``bulk_c_low``, ``bulk_c_high`` : float; the bulk values of the two
        phases the widths are taken between (:func:`bulk_plateaus`; 0 and 1
        unless a plateau sits more than 1e-3 off).
        ``width_cell_data_bias`` : float; with data on cells, the expected
        relative bias of the widths on point values rebuilt from the cells,
        0.063 (h / eps)^2 (NaN with data on points); the threshold-free
        width integrates the cell values and carries a fifth of it.
        ``interface_near_interface_fraction`` : float in [0, 1]; share of the
        interface size with another stretch of interface, facing the other
        way, within 1.5 x the second moment's reach along its normal (a thin film,
        a ligament, the far side of a small drop: its profile is cut halfway,
        :func:`._facing_interface.facing_interface_share`).
        ``bulk_noise_left_out`` : float; 1 where the bulk noise was left out
        of the widths (the points beyond the contour's reach read their
        side's bulk), else 0.
        All NaN when c does not cross ``level``.
    MeasuredDistances or None
        With ``return_distances`` only: ``point`` (signed distances at the
        mesh points, inf beyond ``bound``, the second moment's range, NaN
        where c is flat around the point), the contour's geometry and
        ``bound``; None when c does not cross ``level``.

    Raises
    ------
    OptionError
        An indicator of the wrong shape, a non-finite level, a bad
        ``max_samples``, a ``contour`` that is not a Contour, ``extremes``
        that do not fit the mesh, a bad ``threads``, or ``prepared`` for
        another mesh, indicator or level, or given with any of ``contour``,
        ``extremes`` and ``plateaus``.

    Notes
    -----
    Integrals use the piecewise-linear interpolant of the point values clipped
    to [0, 1] on the conforming simplex split of the cells (exact for that interpolant),
    not the cell values: the band edges then cut cells at the right place.
    With cell data the point values are measure-weighted averages of the
    cells around each point, which smooths the profile slightly (widths come
    out a few % high at 4 cells across the interface, less when finer).
    Hexahedra the split cones (a face bent, or cut two ways by its cells) are
    integrated cell by cell: over the split's own 12 tetrahedra where a band
    edge crosses the cell, by a quadrature of the cell's trilinear map
    elsewhere (exact on parallelepipeds, within O(h^2) of the split
    otherwise), and the distances of such a mesh are searched against one
    plane per crossed cell, every cell's (the wedges and pyramids beside the
    hexahedra too; within O(h^2 / R) of the contour's triangles); the
    6-tetrahedra table is taken only where
    every face is flat (its corners spanning a volume below 1e-10 of its
    diagonal cubed) and cut alike from both
    sides (no looser flatness, so no added error).
    Cells whose corners all lie within 1e-6 of 0 or of 1 are skipped (with bulk
    values off 0 and 1, within :func:`bulk_plateaus`' ``tail``, three spreads of
    the bulk's noise read beyond the profile's tail); the
    second moment is taken out to max(10 eps, 4 h) from the contour, eps from
    the band volume (the logistic tails beyond hold 0.3 % of the variance: a
    small negative bias that cancels in the diffusion audit's relative terms).
    Its weight is the measure times grad c . grad d (d the signed distance, linear
    on each simplex like c) over the values between the bulk values as written (not
    clipped, no bulk noise left out): noise adds to it at zero mean.

    For the logistic profile c = 1/2 (1 + tanh(n / (2 eps))): band volume per
    area over a < c < 1 - a is 2 eps ln((1 - a) / a); int c(1 - c) dn = eps
    and int |dc/dn| dn = 1; dc/dn is a logistic density of variance
    pi^2 eps^2 / 3. The Cahn-Hilliard profile tanh(x / (sqrt(2) eps_CH)) in
    [-1, 1] is the same shape with eps = eps_CH / sqrt(2). The normal
    distance is measured to the contour itself; a curved interface adds
    O(w^2 / R) to the band and moment estimates.

    Bulk cell noise that reaches the band edge (a spread above 1.25 % of the
    jump between the bulks) would count in the band wherever it lies: the
    points beyond the contour's reach then read their side's bulk
    (:func:`._bulk_noise.beyond_reach_points`), which keeps ``interface_width``
    within 3 % of its noise-free value up to a spread of 3 %; beyond 3 % a
    :class:`PhasegaugeWarning`. ``bulk_noise_left_out`` says whether a step did
    so; the second moment does not read it.

    References
    ----------
    .. [1] Olsson, E. and Kreiss, G. (2005), "A conservative level set method
       for two phase flow", J. Comput. Phys. 210:225-246 (logistic profile).
    .. [2] Cahn, J. W. and Hilliard, J. E. (1958), "Free energy of a nonuniform
       system. I. Interfacial free energy", J. Chem. Phys. 28:258 (tanh profile).
    """
    max_samples = _check_samples(max_samples)
    if prepared is None:
        prepared = PreparedWidths(mesh, indicator, level, contour=contour, extremes=extremes, plateaus=plateaus,
                                  threads=threads)
    else:
        threads = check_threads(threads)
        _check_prepared(prepared, mesh, indicator, level, contour, extremes, plateaus)
    metrics, _, distances = _metrics(prepared, max_samples, threads, distances=return_distances, periodic=periodic)
    return (metrics, distances) if return_distances else metrics


def prepare_widths(mesh: Mesh, indicator, *, level: float = 0.5, threads: int = 1) -> PreparedWidths:
    """The contour, the bulk values and the band integrals of :func:`interface_metrics`, formed
    before the widths (for a caller that reads the contour first: ``interface_metrics(...,
    prepared=...)`` then measures the rest).

    Parameters
    ----------
    mesh, indicator, level
        As for :func:`interface_metrics`.
    threads : int
        With two or more, the contour is found on a thread beside the band integrals (the same
        numbers as on one).

    Returns
    -------
    PreparedWidths
        ``contour`` (as :func:`find_interface` gives it) and ``plateaus`` (as
        :func:`bulk_plateaus` gives them) to read; the rest is for
        :func:`interface_metrics`.

    Raises
    ------
    OptionError
        An indicator of the wrong shape, a non-finite level or a bad ``threads``.
    """
    return PreparedWidths(mesh, indicator, level, threads=threads)


def _check_prepared(prepared, mesh: Mesh, indicator, level: float, contour, extremes, plateaus) -> None:
    if not isinstance(prepared, PreparedWidths):
        raise OptionError(f"prepared must be what prepare_widths gives, found {type(prepared).__name__}",
                          fix="pass prepare_widths(mesh, indicator, level=...), or None")
    if prepared.mesh is not mesh or prepared.indicator is not indicator or prepared.level != _check_level(level):
        raise OptionError("prepared was formed for another mesh, indicator or level",
                          fix="pass prepare_widths(...) of the same mesh, indicator object and level")
    if contour is not None or extremes is not None or plateaus is not None:
        raise OptionError("prepared already holds the contour, the extremes and the bulk values",
                          fix="give prepared alone, or contour, extremes and plateaus without it")


def interface_profile_table(mesh: Mesh, indicator, *, level: float = 0.5, contour: Contour | None = None,
                            extremes: CornerExtremes | None = None, max_samples: int = 2000) -> pd.DataFrame:
    """Local logistic fits of c along interface normals, one row per sampled element.

    Parameters
    ----------
    mesh, indicator, level, contour, extremes, max_samples
        As for :func:`interface_metrics`.

    Returns
    -------
    pandas.DataFrame
        Columns ``element`` (contour element), ``cell`` (mesh cell), ``x, y,
        z`` (element centroid), ``normal_x, normal_y, normal_z`` (unit normal
        towards higher c), ``cell_size`` (length), ``offset`` (length, where
        the fit has c = 0.5 along the normal, from the centroid),
        ``interface_eps`` (length, local logistic eps), ``width`` (length,
        5.889 eps), ``width_cells``, ``n_samples`` (samples in 0.05 < c < 0.95
        used), ``weight`` (interface length/area the row stands for). Empty
        when c does not cross ``level``.

    Notes
    -----
    Each sampled element gathers the mesh points within max(0.35 w, 2 h) of
    its centroid (w the band-volume width, h the local cell size) whose c lies
    in 0.05 < c < 0.95, and fits logit(c) = (n - n0) / eps by weighted least
    squares (weights c (1 - c)), n being the signed normal distance of each
    point to the contour: the profile across the interface, sampled at the
    mesh's own points (no interpolation). A second interface farther than
    that radius is not mixed in. Rows with fewer than 3 points get NaN.

    References
    ----------
    .. [1] Olsson, E. and Kreiss, G. (2005), J. Comput. Phys. 210:225-246.
    """
    max_samples = _check_samples(max_samples)
    prepared = PreparedWidths(mesh, indicator, level, contour=contour, extremes=extremes)
    return _metrics(prepared, max_samples)[1]


def _metrics(prepared: PreparedWidths, max_samples: int, threads: int = 1, *, distances: bool = False,
             periodic: tuple = ()):
    """The metrics, the profile table and (with ``distances``, else None) the distances measured."""
    mesh, contour, integrals = prepared.mesh, prepared.contour, prepared.integrals
    geometry = prepared.geometry
    size = geometry.size
    if contour.n_elements == 0 or not size > 0 or integrals.count == 0:
        return _nan_metrics(), pd.DataFrame(columns=list(PROFILE_COLUMNS)), None
    width = integrals.band / size
    total_grad = integrals.total_gradient
    mixed = integrals.mixed if prepared.cell_mixed is None else prepared.cell_mixed
    eps = mixed / total_grad if total_grad > 0 else float("nan")
    # second moment of the normal distance, weighted by |grad c|, out to 10 eps (the logistic
    # tails beyond hold 0.3 % of its variance) or 4 cells, whichever is farther
    sizes = geometry.sizes
    h = mesh.cell_sizes_of(contour.cells)
    h_interface = float((sizes * h).sum() / size)
    # (eps of the band volume: a low-level cloud of c away from the interface inflates the
    # threshold-free eps, and would widen the range that then picks up more of that cloud; bulk noise
    # lowers it, 0.7 eps at 0.8 % of the jump, and would narrow the range, cutting the tails)
    band_eps = width / WIDTH_PER_EPS
    bound = max(_MOMENT_RANGE * band_eps, 4.0 * h_interface) if np.isfinite(band_eps) else np.inf
    searched = geometry if prepared.pieces is None else prepared.pieces
    dist = integrals.distances(searched, prepared.width_level, bound, threads)
    moments = prepared.moment_integrals
    m0, m1, m2 = moments.moments(dist if moments is integrals
                                 else moments.distances(searched, prepared.width_level, bound, threads))
    variance = m2 / m0 - (m1 / m0) ** 2 if m0 > 0 else float("nan")
    # cells of the contour
    g_el = cell_gradient(mesh, prepared.clipped, cells=contour.cells)
    with np.errstate(divide="ignore"):
        across = (_WIDTH_10_90_PER_EPS / (4.0 * np.linalg.norm(g_el, axis=1))) / h
    under = float(sizes[~(across >= RESOLVED_CELLS)].sum() / size)
    cells_across = weighted_quantile(np.nan_to_num(across, nan=1e30, posinf=1e30), sizes, 0.5)
    values, dist, known = integrals.at_points(dist)
    measured = (MeasuredDistances(np.where(known & np.isnan(dist), np.inf, dist), geometry, float(bound))
                if distances else None)
    table = _profile_table(mesh, geometry, values, dist, known & np.isfinite(dist), width, max_samples)
    local = table["width"].to_numpy(dtype=float)
    w = table["weight"].to_numpy(dtype=float)
    if np.isfinite(local).any():
        i = int(np.nanargmax(local))
        widest = (float(table["x"].iat[i]), float(table["y"].iat[i]), float(table["z"].iat[i]))
    else:
        widest = (float("nan"),) * 3
    metrics = {
        "interface_size": float(size),
        "interface_width": width,
        "interface_width_cells": width / h_interface,
        "width_threshold_free": WIDTH_PER_EPS * eps,
        "interface_eps": eps,
        "width_second_moment": WIDTH_PER_EPS * np.sqrt(3.0 * max(variance, 0.0)) / np.pi,
        "interface_variance": float(variance),
        "width_profile_median": weighted_quantile(local, w, 0.5),
        "width_profile_p90": weighted_quantile(local, w, 0.9),
        "widest_x": widest[0], "widest_y": widest[1], "widest_z": widest[2],
        "under_resolved_interface_fraction": under,
        "interface_cells_across": float(cells_across) if np.isfinite(cells_across) else float("nan"),
        "bulk_c_low": float(prepared.plateaus[0]), "bulk_c_high": float(prepared.plateaus[1]),
        "width_cell_data_bias": (CELL_DATA_BIAS * (h_interface / eps) ** 2
                                 if prepared.cell_mixed is not None and eps > 0 else float("nan")),
        # the share of the interface whose profile the second moment's reach cuts at the boundary
        "interface_near_boundary_fraction": boundary_share(mesh, geometry.centroids, sizes, float(bound),
                                                           normals=geometry.normals, lateral=h_interface,
                                                           periodic=periodic),
        # the share whose profile another interface, facing it, cuts within 1.5 x that reach (a thin film)
        "interface_near_interface_fraction": facing_interface_share(geometry.centroids, geometry.normals, sizes,
                                                                    FACING_REACH * float(bound), h_interface),
        "bulk_noise_left_out": float(prepared.noise_left_out),
    }
    return metrics, table, measured
