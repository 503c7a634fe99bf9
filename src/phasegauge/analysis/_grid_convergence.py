"""Grid convergence: apparent order, Richardson extrapolation and the Grid Convergence Index.

The procedure is the one of Celik et al. (2008): three meshes of one case,
fine (1), medium (2) and coarse (3), with representative cell sizes
h1 < h2 < h3; the apparent order p solves Celik's eq. (5) in its signed form

    |eps32 / eps21| = r21^p (r32^p - s) / (r21^p - s),

with eps21 = phi2 - phi1, eps32 = phi3 - phi2, s = sign(eps32 / eps21) and
r21 = h2 / h1, r32 = h3 / h2. Its right side rises in p from ln r32 / ln r21
(s = +1) or 1 (s = -1) at p -> 0 without bound, so it has one positive root when
|eps32 / eps21| lies above that limit, found by bracketing (``scipy.optimize.brentq``),
and none otherwise: the values then do not converge as the mesh is refined (divergent).
Everything here is arrays in, arrays out.
"""

from __future__ import annotations

from types import MappingProxyType

import numpy as np

from ..errors import OptionError

__all__ = ["representative_cell_size", "grid_convergence", "convergence_table", "droplet_integrals", "paired_times",
           "span_reach", "covered_span", "SPAN_REACH_SHARE", "GCI_SAFETY_FACTOR", "CONVERGENCE_FIELDS",
           "CONVERGENCE_COLUMNS", "check_formal_order", "implausible_order_limit", "HIGHEST_PLAUSIBLE_ORDER",
           "FORMAL_ORDER_TOLERANCE", "AGREEMENT_SHARE", "agreeing_rows"]

#: safety factor of the fine-grid GCI for three meshes (Roache 1998; Celik et al. 2008)
GCI_SAFETY_FACTOR = 1.25

#: names of the arrays :func:`grid_convergence` returns
CONVERGENCE_FIELDS = ("refinement_ratio_21", "refinement_ratio_32", "apparent_order", "extrapolated",
                      "relative_error_fine", "extrapolated_relative_error_fine", "gci_fine", "gci_medium",
                      "asymptotic_ratio", "oscillatory", "divergent")


def representative_cell_size(total_measure, n_cells, dimension: int):
    """Representative cell size h = (total measure / N)^(1/dimension).

    Parameters
    ----------
    total_measure : float or ndarray
        Area (2D) or volume (3D) of the mesh, in mesh length units to the power ``dimension``.
    n_cells : int or ndarray
        Number of cells.
    dimension : {1, 2, 3}

    Returns
    -------
    float or ndarray, in mesh length units

    References
    ----------
    Celik, I. B., Ghia, U., Roache, P. J., Freitas, C. J., Coleman, H., Raad, P. E. (2008).
    Procedure for estimation and reporting of uncertainty due to discretization in CFD
    applications. J. Fluids Eng. 130, 078001, eq. (1)-(2).
    """
    if dimension not in (1, 2, 3):
        raise OptionError(f"dimension must be 1, 2 or 3, found {dimension!r}", fix="give the mesh's dimension")
    total = np.asarray(total_measure, dtype=float)
    count = np.asarray(n_cells, dtype=float)
    if np.any(count <= 0) or np.any(~(total > 0)):
        raise OptionError(f"total measure and cell count must be positive, found {total_measure!r} and "
                          f"{n_cells!r}", fix="give the measure and cell count of a non-empty mesh")
    h = (total / count) ** (1.0 / dimension)
    return float(h) if h.ndim == 0 else h


#: differences between meshes below this share of a quantity's scale are round-off: taken as equal
#: values (no order, no GCI), not as a convergence of their own
ROUND_OFF = 1e-10

#: quantities of the steps table that are fractions or indices in [0, 1]: their scale is 1 (a
#: segregation intensity of 1e-28 on every mesh is zero, whatever its round-off)
UNIT_SCALE = frozenset({"segregation_intensity", "mixing_index", "mixing_index_inflow", "mean_indicator",
                        "under_resolved_interface_fraction", "mixed_volume_fraction", "bulk_c_low", "bulk_c_high",
                        "c_min", "c_max", "phase_volume_drift"})

#: quantities whose scale is another column's (a phase volume's change, on the phase volume's scale)
SCALE_OF = MappingProxyType({"phase_volume_drift_abs": "phase_volume"})


#: an apparent order below this is none: the values do not come closer as the mesh is refined
#: (r21^p - 1 would put the GCI above a million times the relative error; our threshold)
SMALLEST_ORDER = 1e-6

#: the search for the apparent order stops here (no order beyond it is read; our threshold)
LARGEST_ORDER = 1e4

#: without a formal order, an apparent order above this is implausible: the coarse value lies off the trend
#: of the other two (few schemes exceed fourth order; our threshold)
HIGHEST_PLAUSIBLE_ORDER = 5.0

#: an apparent order more than this away from the formal order is outside the asymptotic range (our threshold)
FORMAL_ORDER_TOLERANCE = 0.5


#: three meshes whose values differ by no more than this share of the quantity's scale agree beyond what an
#: apparent order resolves (a conserved volume the same to 6 digits): no order is warned of there (our threshold)
AGREEMENT_SHARE = 1e-4


def agreeing_rows(table, share: float = AGREEMENT_SHARE):
    """Which rows of a convergence table have three meshes that agree within ``share`` of the quantity's scale.

    The scale is that of the round-off test: 1 for fractions and indices (:data:`UNIT_SCALE`), the other
    column's for :data:`SCALE_OF`, else the largest magnitude the quantity takes on the three meshes at
    any paired time. Their apparent order measures how the last digits were sampled, not the scheme.

    Parameters
    ----------
    table : DataFrame
        A :func:`convergence_table`.
    share : float

    Returns
    -------
    ndarray of bool, shape (len(table),)
    """
    values = table[["value_fine", "value_medium", "value_coarse"]].to_numpy(dtype=float)
    if not len(values):
        return np.zeros(0, dtype=bool)
    quantity = table["quantity"].to_numpy()
    largest = {q: float(np.nanmax(np.abs(values[quantity == q]), initial=0.0)) for q in set(quantity)}
    scale = np.array([max(largest[q], 1.0 if q in UNIT_SCALE else largest.get(SCALE_OF.get(q), 0.0))
                      for q in quantity])
    spread = np.nanmax(values, axis=1) - np.nanmin(values, axis=1)
    return np.isfinite(spread) & (spread <= share * scale)


def check_formal_order(formal_order):
    """The formal order as a float (None stays None); refused unless positive and finite."""
    if formal_order is None:
        return None
    try:
        value = float(formal_order)
    except (TypeError, ValueError):
        value = float("nan")
    if not (0.0 < value < np.inf):
        raise OptionError(f"the formal order must be a positive number, found {formal_order!r}",
                          fix="give the order of accuracy of the scheme, for example 2")
    return value


def implausible_order_limit(formal_order=None) -> float:
    """The apparent order above which the coarse value lies off the trend: twice the formal order when
    given, else :data:`HIGHEST_PLAUSIBLE_ORDER` (our thresholds)."""
    formal_order = check_formal_order(formal_order)
    return HIGHEST_PLAUSIBLE_ORDER if formal_order is None else 2.0 * formal_order


def _log_model_ratio(p, r21, r32, s):
    """ln of r21^p (r32^p - s) / (r21^p - s), the model's |eps32/eps21| at order p (no overflow)."""
    a, b = p * np.log(r32), p * np.log(r21)
    if s > 0:  # b + ln(e^a - 1) - ln(e^b - 1), with ln(e^x - 1) = x + ln(1 - e^-x)
        return a + np.log(-np.expm1(-a)) - np.log(-np.expm1(-b))
    return b + np.logaddexp(a, 0.0) - np.logaddexp(b, 0.0)


def _apparent_order(ratio, r21, r32, tolerance, max_iterations):
    """The positive root p of Celik's eq. (5) for one quantity, or -1 when there is none, NaN if undefined.

    ``ratio`` is eps32 / eps21 (finite, not zero). The model ratio rises in p from its p -> 0 limit
    (ln r32 / ln r21 for s = +1, 1 for s = -1): a |ratio| at or below that limit has no positive root.
    """
    from scipy.optimize import brentq

    s = 1.0 if ratio > 0 else -1.0
    target = np.log(abs(ratio))

    def residual(p):
        return _log_model_ratio(p, r21, r32, s) - target

    if not residual(SMALLEST_ORDER) < 0.0:
        return -1.0
    high = 1.0
    while residual(high) < 0.0:
        if high >= LARGEST_ORDER:
            return float("nan")
        high *= 2.0
    low = max(SMALLEST_ORDER, high / 2.0) if high > 1.0 else SMALLEST_ORDER
    return brentq(residual, low, high, xtol=tolerance, rtol=max(tolerance, 4 * np.finfo(float).eps),
                  maxiter=max_iterations)


def grid_convergence(fine, medium, coarse, *, cell_sizes, safety_factor: float = GCI_SAFETY_FACTOR,
                     tolerance: float = 1e-12, max_iterations: int = 500, scale=None, formal_order=None) -> dict:
    """Apparent order, extrapolated value and Grid Convergence Index of values on three meshes.

    Parameters
    ----------
    fine, medium, coarse : float or array_like of shape (n,)
        One quantity (or n quantities, element by element) on the fine, medium
        and coarse mesh.
    cell_sizes : sequence of 3 floats, or of 3 arrays of shape (n,)
        Representative cell sizes h1 < h2 < h3 (fine, medium, coarse), in mesh length units.
    safety_factor : float
        Safety factor of the GCI (1.25 for three meshes).
    tolerance : float
        The apparent order is found to this tolerance, absolute and relative (``brentq``'s
        ``xtol`` and ``rtol``).
    max_iterations : int
        Most iterations of the root search.
    scale : float or array_like, optional
        The quantity's scale for the round-off test (1 for a fraction).
    formal_order : float, optional
        The scheme's order of accuracy p_f, for the asymptotic-range ratio (NaN without it).

    Returns
    -------
    dict of str to ndarray of shape (n,) (or float for scalar input)
        ``refinement_ratio_21`` (h2/h1), ``refinement_ratio_32`` (h3/h2),
        ``apparent_order`` p, ``extrapolated`` phi_ext21, ``relative_error_fine``
        (the approximate relative error e_a21 = |(phi1 - phi2)/phi1|),
        ``extrapolated_relative_error_fine`` (e_ext21 = |(phi_ext21 - phi1)/phi_ext21|),
        ``gci_fine`` (Fs e_a21 / (r21^p - 1)), ``gci_medium`` (Fs e_a32 / (r32^p - 1)),
        ``asymptotic_ratio`` (with the formal order p_f: GCI_medium / (r21^pf GCI_fine), the
        GCIs taken with p_f and in the quantity's units, Fs |eps| / (r^pf - 1), so 1 in the
        asymptotic range of that order; NaN without a formal order, since with the apparent
        order it is |phi1 / phi2| whatever the data), ``oscillatory`` (True when eps32/eps21 < 0) and
        ``divergent`` (True when Celik's equation has no positive root: the values move
        apart, or come no closer, as the mesh is refined; for a constant ratio
        |eps21| >= |eps32|). Relative errors and GCIs are fractions, not percent. Where
        the order is undefined (equal values on two meshes, a divergent quantity) the
        order and everything after it is NaN; an order below :data:`SMALLEST_ORDER` is none.
        Values differing by no more than :data:`ROUND_OFF` of the quantity's scale (the largest
        of the three magnitudes, or ``scale`` when that is larger: 1 for a fraction) are equal.

    Raises
    ------
    OptionError
        Cell sizes not increasing from fine to coarse, a safety factor below 1, or a formal order
        that is not a positive number.

    References
    ----------
    Celik, I. B., Ghia, U., Roache, P. J., Freitas, C. J., Coleman, H., Raad, P. E. (2008).
    Procedure for estimation and reporting of uncertainty due to discretization in CFD
    applications. J. Fluids Eng. 130, 078001, eqs. (3)-(10).
    Roache, P. J. (1998). Verification and Validation in Computational Science and
    Engineering. Hermosa, Albuquerque (the asymptotic-range check).
    """
    formal_order = check_formal_order(formal_order)
    if not (safety_factor >= 1.0):
        raise OptionError(f"safety factor must be at least 1, found {safety_factor!r}",
                          fix="use 1.25 for three meshes (Celik et al. 2008)")
    if len(cell_sizes) != 3:
        raise OptionError(f"three cell sizes are needed (fine, medium, coarse), found {len(cell_sizes)}",
                          fix="give h1 < h2 < h3")
    scalar = np.ndim(fine) == 0 and np.ndim(medium) == 0 and np.ndim(coarse) == 0 and all(
        np.ndim(h) == 0 for h in cell_sizes)
    phi1, phi2, phi3, h1, h2, h3 = np.broadcast_arrays(*(np.atleast_1d(np.asarray(a, dtype=float)) for a in
                                                         (fine, medium, coarse, *cell_sizes)))
    if np.any(~(h1 > 0)) or np.any(~(h2 > h1)) or np.any(~(h3 > h2)):
        raise OptionError("cell sizes must grow from the fine to the coarse mesh (h1 < h2 < h3)",
                          fix="give the meshes in the order FINE MEDIUM COARSE")
    r21, r32 = h2 / h1, h3 / h2
    eps21, eps32 = phi2 - phi1, phi3 - phi2
    # round-off is no difference: below ROUND_OFF of the quantity's scale (its largest magnitude on
    # the three meshes, or the scale the caller gives) the two meshes give the same value
    size = np.maximum(np.maximum(np.abs(phi1), np.abs(phi2)), np.abs(phi3))
    if scale is not None:
        size = np.maximum(size, np.asarray(scale, dtype=float))
    eps21 = np.where(np.abs(eps21) <= ROUND_OFF * size, 0.0, eps21)
    eps32 = np.where(np.abs(eps32) <= ROUND_OFF * size, 0.0, eps32)
    with np.errstate(divide="ignore", invalid="ignore"):
        ratio = eps32 / eps21
        defined = np.isfinite(ratio) & (ratio != 0)
        s = np.sign(ratio)
        p = np.full(ratio.shape, np.nan)
        for k in np.flatnonzero(defined):
            p[k] = _apparent_order(ratio[k], r21[k], r32[k], tolerance, max_iterations)
        divergent = defined & (p < 0)
        p = np.where(p > 0, p, np.nan)
        r21p, r32p = r21 ** p, r32 ** p
        extrapolated = (r21p * phi1 - phi2) / (r21p - 1.0)
        e21 = np.abs((phi1 - phi2) / phi1)
        e32 = np.abs((phi2 - phi3) / phi2)
        e_ext = np.abs((extrapolated - phi1) / extrapolated)
        gci_fine = safety_factor * e21 / (r21p - 1.0)
        gci_medium = safety_factor * e32 / (r32p - 1.0)
        if formal_order is None:  # with the apparent order the ratio is |phi1 / phi2|: no check
            asymptotic = np.full(ratio.shape, np.nan)
        else:  # Roache's GCI_23 = r21^pf GCI_12, the GCIs at the formal order in the quantity's units
            r21f, r32f = r21 ** formal_order, r32 ** formal_order
            asymptotic = np.where(defined, (np.abs(eps32) / (r32f - 1.0)) / (r21f * np.abs(eps21) / (r21f - 1.0)),
                                  np.nan)
    out = {"refinement_ratio_21": r21, "refinement_ratio_32": r32, "apparent_order": p,
           "extrapolated": extrapolated, "relative_error_fine": e21, "extrapolated_relative_error_fine": e_ext,
           "gci_fine": gci_fine, "gci_medium": gci_medium, "asymptotic_ratio": asymptotic,
           "oscillatory": defined & (s < 0), "divergent": divergent}
    if scalar:
        return {k: (bool(v[0]) if v.dtype == bool else float(v[0])) for k, v in out.items()}
    return out


#: leading columns of the convergence table (``convergence.csv``)
CONVERGENCE_COLUMNS = ("quantity", "time", "value_fine", "value_medium", "value_coarse", "cell_size_fine",
                       "cell_size_medium", "cell_size_coarse", "apparent_order", "extrapolated",
                       "relative_error_fine", "gci_fine")

_NOT_QUANTITIES = ("step", "time", "step_a", "step_b", "track")


def droplet_integrals(droplets):
    """Per-step integral quantities of a droplet table.

    Parameters
    ----------
    droplets : DataFrame
        One row per droplet per step with ``step``, ``time``, ``volume`` and
        (optionally) ``equivalent_diameter``.

    Returns
    -------
    DataFrame
        One row per step: ``step``, ``time``, ``total_droplet_volume`` (sum of the
        droplet volumes), ``largest_droplet_volume`` and ``mean_droplet_diameter``
        (mean equivalent diameter), in mesh length units.
    """
    import pandas as pd

    if droplets is None or not len(droplets) or "volume" not in droplets:
        return pd.DataFrame(columns=["step", "time", "total_droplet_volume", "largest_droplet_volume",
                                     "mean_droplet_diameter"])
    grouped = droplets.groupby("step", sort=True)
    out = pd.DataFrame({"time": grouped["time"].first(), "total_droplet_volume": grouped["volume"].sum(),
                        "largest_droplet_volume": grouped["volume"].max()})
    if "equivalent_diameter" in droplets:
        out["mean_droplet_diameter"] = grouped["equivalent_diameter"].mean()
    return out.reset_index()


#: a run's time span reaches this share of the median output interval beyond its first and last
#: output (a run ending 1e-7 before the others still pairs at their last time; our threshold)
SPAN_REACH_SHARE = 1e-6


def span_reach(*runs) -> float:
    """How far a run's time span reaches beyond its first and last output: :data:`SPAN_REACH_SHARE`
    of the median output interval of the runs' finite times (0 with no interval).

    Parameters
    ----------
    *runs : array_like of float
        The output times of each run.
    """
    spans = [np.asarray(t, dtype=float).ravel() for t in runs]
    intervals = np.concatenate([np.diff(np.unique(t[np.isfinite(t)])) for t in spans] or [np.empty(0)])
    return SPAN_REACH_SHARE * float(np.median(intervals)) if len(intervals) else 0.0


def covered_span(times, reach: float) -> tuple[float, float]:
    """The time span a run's outputs ``times`` (finite, not empty) cover: their first and last time
    widened by ``reach`` (:func:`span_reach`), and by at least 1e-12 of the time for round-off."""
    t = np.asarray(times, dtype=float)
    low, high = float(np.min(t)), float(np.max(t))
    return low - max(reach, 1e-12 * max(1.0, abs(low))), high + max(reach, 1e-12 * max(1.0, abs(high)))


def paired_times(times_fine, times_medium, times_coarse) -> np.ndarray:
    """The times at which three runs are compared: the fine run's times inside every run's time span.

    Each span reaches :data:`SPAN_REACH_SHARE` of the median output interval of the three runs (at
    least 1e-12 of the time, for round-off) beyond its first and last time. A run with one step (a
    steady result) spans every time; three one-step runs pair at the fine time.
    """
    spans = [np.asarray(t, dtype=float) for t in (times_fine, times_medium, times_coarse)]
    fine = spans[0]
    reach = span_reach(*spans)
    keep = np.ones(fine.shape, dtype=bool)
    for t in spans[1:]:
        if len(t) > 1:
            first, last = covered_span(t, reach)
            keep &= (fine >= first) & (fine <= last)
    return fine[keep]


def _values_at(frame, column, times):
    t = frame["time"].to_numpy(dtype=float)
    v = frame[column].to_numpy(dtype=float)
    if len(t) == 1:
        return np.full(len(times), v[0])
    order = np.argsort(t, kind="stable")
    t, v = t[order], v[order]
    exact = np.searchsorted(t, times)
    exact = np.minimum(exact, len(t) - 1)
    hit = np.isclose(t[exact], times, rtol=1e-12, atol=0.0)
    return np.where(hit, v[exact], np.interp(times, t, v))


def convergence_table(fine, medium, coarse, *, cell_sizes, safety_factor: float = GCI_SAFETY_FACTOR,
                      formal_order=None):
    """Grid convergence of every scalar quantity of three runs' per-step tables, at paired times.

    Parameters
    ----------
    fine, medium, coarse : DataFrame
        Per-step tables with a ``time`` column and quantity columns (``steps.csv``,
        optionally joined with :func:`droplet_integrals`).
    cell_sizes : sequence of 3 floats
        Representative cell sizes h1 < h2 < h3.
    safety_factor : float
    formal_order : float, optional
        The scheme's order of accuracy, for ``asymptotic_ratio`` (see :func:`grid_convergence`).

    Returns
    -------
    DataFrame
        One row per quantity and paired time: :data:`CONVERGENCE_COLUMNS`, then
        ``refinement_ratio_21``, ``refinement_ratio_32``,
        ``extrapolated_relative_error_fine``, ``gci_medium``, ``asymptotic_ratio``,
        ``oscillatory`` and ``divergent``. The medium and coarse values are interpolated
        linearly in time at the fine run's times (exact where the times agree; a time within
        the span reach beyond a run's last output takes that output's value). Quantities are
        the numeric columns all three tables share, except step numbers and time.

    References
    ----------
    Celik et al. (2008), J. Fluids Eng. 130, 078001.
    """
    import pandas as pd

    frames = (fine, medium, coarse)
    for frame in frames:
        if "time" not in frame:
            raise OptionError("a per-step table has no 'time' column", fix="hand the steps tables of three runs")
    shared = [c for c in fine.columns if c not in _NOT_QUANTITIES and all(c in f for f in frames[1:])
              and all(pd.api.types.is_numeric_dtype(f[c]) and not pd.api.types.is_bool_dtype(f[c])
                      for f in frames)]
    times = paired_times(*(f["time"].to_numpy(dtype=float) for f in frames))
    h = [float(x) for x in cell_sizes]
    rows = []
    for column in shared:
        values = [_values_at(f, column, times) for f in frames]
        scale = 1.0 if column in UNIT_SCALE else None
        if column in SCALE_OF and SCALE_OF[column] in shared:
            scale = max(float(np.nanmax(np.abs(f[SCALE_OF[column]].to_numpy(dtype=float)))) for f in frames)
        figures = grid_convergence(*values, cell_sizes=h, safety_factor=safety_factor, scale=scale,
                                   formal_order=formal_order)
        block = {"quantity": column, "time": times, "value_fine": values[0], "value_medium": values[1],
                 "value_coarse": values[2], "cell_size_fine": h[0], "cell_size_medium": h[1],
                 "cell_size_coarse": h[2]}
        block.update(figures)
        rows.append(pd.DataFrame(block))
    extra = [c for c in CONVERGENCE_FIELDS if c not in CONVERGENCE_COLUMNS]
    if not rows:
        return pd.DataFrame(columns=list(CONVERGENCE_COLUMNS) + extra)
    table = pd.concat(rows, ignore_index=True)
    return table[list(CONVERGENCE_COLUMNS) + extra]
