"""Phase volume, its drift over a series and boundedness (the boundary flux is in ``_boundary_flux``)."""

from __future__ import annotations

import numpy as np
import pandas as pd

from ..errors import OptionError
from ..model.fields import cell_values
from ..model.indicator import Indicator
from ..model.mesh import Mesh
from ._sums import dot


__all__ = ["boundedness", "conservation_metrics", "volume_drift", "drift_columns", "known_rates"]


def boundedness(mesh: Mesh, indicator) -> dict:
    """How far the indicator leaves [0, 1].

    Parameters
    ----------
    mesh : Mesh
    indicator : Indicator or ndarray of shape (n_cells,)

    Returns
    -------
    dict
        - ``c_min``, ``c_max``: extreme finite values where the data lives
          (points for point data, cells for cell data or a plain array);
          NaN when no value is finite;
        - ``overshoot_volume``: int max(0, c - 1, -c) dV, in volume units (area
          in 2D); 0 for a bounded field. For data on cells (or an array) over
          the cells with finite c; for data on points over the points with
          finite c, each point's excess times its share of the cells' volume
          (:func:`._bulk_plateaus.point_volumes`, lumped): the cells' corner
          means would let a dip at a few points cancel against their
          neighbours and read 0;
        - ``nonfinite_values``: count of NaN/Inf input values
          (``indicator.nonfinite``; for an array, its non-finite cells).
    """
    c = cell_values(mesh, indicator)
    if isinstance(indicator, Indicator):
        native = indicator.point if indicator.location == "point" else indicator.cell
        nonfinite = int(indicator.nonfinite)
    else:
        native = c
        nonfinite = int(np.count_nonzero(~np.isfinite(c)))
    native = np.asarray(native, dtype=np.float64)
    finite = native if np.isfinite(native).all() else native[np.isfinite(native)]
    on_points = isinstance(indicator, Indicator) and indicator.location == "point"
    values = native if on_points else c
    outside = np.flatnonzero((values > 1.0) | (values < 0.0))  # those with an excess (NaN compares False)
    excess = np.maximum(values[outside] - 1.0, -values[outside])
    if on_points:
        from ._bulk_plateaus import point_volumes

        volume = float(dot(excess, point_volumes(mesh)[outside])) if outside.size else 0.0
    else:
        volume = float(dot(excess, mesh.cell_measures[outside]))
    return {"c_min": float(finite.min()) if finite.size else np.nan,
            "c_max": float(finite.max()) if finite.size else np.nan,
            "overshoot_volume": volume, "nonfinite_values": nonfinite}


def _densities(densities) -> tuple[float, float]:
    try:
        rho_phase, rho_other = (float(d) for d in densities)
    except (TypeError, ValueError):
        raise OptionError(f"densities must be two numbers (phase, other), found {densities!r}",
                          fix="for example densities=(1000, 1.2)") from None
    if not (np.isfinite(rho_phase) and np.isfinite(rho_other)) or rho_phase < 0 or rho_other < 0:
        raise OptionError(f"densities must be finite and not negative, found {densities!r}",
                          fix="give the density of the measured phase, then of the other phase")
    return rho_phase, rho_other


def conservation_metrics(mesh: Mesh, indicator, *, densities=None) -> dict:
    """Phase volume (and masses) of one step.

    Parameters
    ----------
    mesh : Mesh
    indicator : Indicator or ndarray of shape (n_cells,)
    densities : (float, float), optional
        Density of the measured phase (c = 1) and of the other phase, mass
        per volume unit.

    Returns
    -------
    dict
        - ``phase_volume``: int c dV over cells with finite c, volume units
          (area in 2D). c is NOT clipped to [0, 1]: a conservative scheme
          conserves int c dV including its overshoots, so clipping would hide
          or create drift; the overshoot is reported by :func:`boundedness`;
        - ``domain_volume``: volume of all cells;
        - ``nonfinite_volume``: volume of the cells whose c is NaN/Inf (left out);
        - with ``densities``: ``phase_mass`` = rho_phase int c dV,
          ``other_mass`` = rho_other int (1 - c) dV (finite cells), and
          ``total_mass``, their sum.
    """
    rho = _densities(densities) if densities is not None else None
    c = cell_values(mesh, indicator)
    measures = mesh.cell_measures
    good = np.isfinite(c)
    every = bool(good.all())  # the usual case: no copies
    c_good, m_good = (c, measures) if every else (c[good], measures[good])
    phase_volume = float(dot(c_good, m_good))
    out = {"phase_volume": phase_volume, "domain_volume": float(mesh.total_measure),
           "nonfinite_volume": 0.0 if every else float(measures[~good].sum())}
    if rho is not None:
        other_volume = float(m_good.sum()) - phase_volume
        out["phase_mass"] = rho[0] * phase_volume
        out["other_mass"] = rho[1] * other_volume
        out["total_mass"] = out["phase_mass"] + out["other_mass"]
    return out


def volume_drift(phase_volumes) -> tuple[np.ndarray, np.ndarray]:
    """Change of the phase volume relative to the first step.

    Parameters
    ----------
    phase_volumes : array_like of shape (n_steps,)
        Phase volume per step, in time order.

    Returns
    -------
    relative : ndarray of shape (n_steps,)
        (V - V0) / V0, dimensionless; NaN when V0 is 0 or not finite.
    absolute : ndarray of shape (n_steps,)
        V - V0, volume units.
    """
    v = np.asarray(phase_volumes, dtype=np.float64)
    if v.ndim != 1:
        raise OptionError(f"phase volumes must be one value per step, found shape {v.shape}",
                          fix="pass the phase_volume column")
    if v.size == 0:
        return v.copy(), v.copy()
    absolute = v - v[0]
    if v[0] == 0 or not np.isfinite(v[0]):
        return np.full_like(v, np.nan), absolute
    return absolute / v[0], absolute


def known_rates(steps: pd.DataFrame) -> np.ndarray:
    """``boundary_phase_outflow`` per step with a step's NaN (a rate not given: :func:`open_boundary_flux`
    gives none, a table made otherwise may) interpolated linearly in time from the steps around it; zeros
    where no step has one."""
    rate = steps["boundary_phase_outflow"].to_numpy(dtype=np.float64)
    known = np.isfinite(rate)
    if known.all():
        return rate
    if not known.any():
        return np.zeros(rate.size)
    t = steps["time"].to_numpy(dtype=np.float64)
    return np.interp(t, t[known], rate[known])


def drift_columns(steps_df: pd.DataFrame) -> pd.DataFrame:
    """A copy of a steps table with the phase-volume drift added.

    Parameters
    ----------
    steps_df : DataFrame
        One row per step in time order, with ``phase_volume``; optionally
        ``time`` and ``boundary_phase_outflow`` (from
        :func:`open_boundary_flux`, phase volume leaving per unit time).

    Returns
    -------
    DataFrame
        Adds ``phase_volume_drift`` (relative to the first step) and
        ``phase_volume_drift_abs`` (volume units). With ``time`` and
        ``boundary_phase_outflow`` also ``phase_volume_outflow`` (phase volume
        that left through the boundary since the first step, trapezoidal rule
        in time: as exact as the output interval allows; a step's rate that is
        NaN is taken from the steps around it, :func:`known_rates`) and
        ``phase_volume_drift_closed`` = (V + outflow - V0) / V0, the drift the
        boundary flux does not explain; not added when the table has an
        ``open_boundary`` column that is false at every step.
    """
    if "phase_volume" not in steps_df:
        raise OptionError("the steps table has no 'phase_volume' column",
                          fix="compute conservation_metrics for every step first")
    out = steps_df.copy()
    relative, absolute = volume_drift(out["phase_volume"].to_numpy())
    out["phase_volume_drift"] = relative
    out["phase_volume_drift_abs"] = absolute
    # a series with no open boundary at any step gets no outflow columns (nothing crossed)
    any_open = "open_boundary" not in out or bool(out["open_boundary"].astype(bool).any())
    if "boundary_phase_outflow" in out and "time" in out and len(out) and any_open:
        rate = known_rates(out)
        t = out["time"].to_numpy(dtype=np.float64)
        outflow = np.concatenate([[0.0], np.cumsum(0.5 * (rate[1:] + rate[:-1]) * np.diff(t))])
        out["phase_volume_outflow"] = outflow
        v0 = float(out["phase_volume"].iloc[0])
        with np.errstate(invalid="ignore", divide="ignore"):
            out["phase_volume_drift_closed"] = (absolute + outflow) / v0 if v0 else np.nan
    return out
