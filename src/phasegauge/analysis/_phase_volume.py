"""Phase volume, its drift over a series, boundedness, and the phase flux through open boundaries."""

from __future__ import annotations

import numpy as np
import pandas as pd

from ..errors import OptionError
from ..model.fields import cell_values, field_location, vector_values
from ..model.indicator import Indicator
from ..model.mesh import Mesh
from ._sums import dot


__all__ = ["boundedness", "conservation_metrics", "volume_drift", "drift_columns",
           "open_boundary_flux"]


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
        - ``overshoot_volume``: int max(0, c - 1, -c) dV over the cells with
          finite c, in volume units (area in 2D); 0 for a bounded field;
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
    outside = np.flatnonzero((c > 1.0) | (c < 0.0))  # the cells with an excess (NaN compares False)
    excess = np.maximum(c[outside] - 1.0, -c[outside])
    return {"c_min": float(finite.min()) if finite.size else np.nan,
            "c_max": float(finite.max()) if finite.size else np.nan,
            "overshoot_volume": float(dot(excess, mesh.cell_measures[outside])),
            "nonfinite_values": nonfinite}


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
        in time: as exact as the output interval allows) and
        ``phase_volume_drift_closed`` = (V + outflow - V0) / V0, the drift the
        boundary flux does not explain.
    """
    if "phase_volume" not in steps_df:
        raise OptionError("the steps table has no 'phase_volume' column",
                          fix="compute conservation_metrics for every step first")
    out = steps_df.copy()
    relative, absolute = volume_drift(out["phase_volume"].to_numpy())
    out["phase_volume_drift"] = relative
    out["phase_volume_drift_abs"] = absolute
    if "boundary_phase_outflow" in out and "time" in out and len(out):
        rate = out["boundary_phase_outflow"].to_numpy(dtype=np.float64)
        t = out["time"].to_numpy(dtype=np.float64)
        outflow = np.concatenate([[0.0], np.cumsum(0.5 * (rate[1:] + rate[:-1]) * np.diff(t))])
        out["phase_volume_outflow"] = outflow
        v0 = float(out["phase_volume"].iloc[0])
        with np.errstate(invalid="ignore", divide="ignore"):
            out["phase_volume_drift_closed"] = (absolute + outflow) / v0 if v0 else np.nan
    return out


def _face_vectors(mesh: Mesh) -> tuple:
    """The boundary as simplices (segments in 2D, triangles in 3D).

    Returns corner point indices (n, k), owner cells (n,), outward unit
    normals (n, dim) and measures (n,).
    """
    corners, owner = mesh.boundary_faces
    X = mesh.coordinates
    if mesh.dimension == 2:
        pieces, owners = corners, owner
        d = X[pieces[:, 1]] - X[pieces[:, 0]]
        normal = np.stack([d[:, 1], -d[:, 0]], axis=1)
    else:
        triangle = corners[:, 0] < 0
        tri = corners[triangle][:, 1:]
        quad = corners[~triangle]
        # sorted corners lose the cycle: rebuild it as the cycle around the face centre
        quad = _cycle_quads(X, quad)
        pieces = np.concatenate([tri, quad[:, [0, 1, 2]], quad[:, [0, 2, 3]]])
        owners = np.concatenate([owner[triangle], owner[~triangle], owner[~triangle]])
        P = X[pieces]
        normal = 0.5 * np.cross(P[:, 1] - P[:, 0], P[:, 2] - P[:, 0])
    measure = np.linalg.norm(normal, axis=1)
    centre = X[pieces].mean(axis=1)
    outward = np.einsum("nd,nd->n", normal, centre - mesh.cell_centroids[owners])
    normal = normal * np.where(outward < 0, -1.0, 1.0)[:, None]
    with np.errstate(invalid="ignore", divide="ignore"):
        unit = normal / np.where(measure > 0, measure, 1.0)[:, None]
    return pieces, owners, unit, measure


def _cycle_quads(X: np.ndarray, quad: np.ndarray) -> np.ndarray:
    """Order the four corners of each quad face around its centre."""
    if quad.size == 0:
        return quad
    P = X[quad]
    centre = P.mean(axis=1, keepdims=True)
    normal = np.cross(P[:, 1] - P[:, 0], P[:, 2] - P[:, 0])
    normal += np.cross(P[:, 2] - P[:, 0], P[:, 3] - P[:, 0])
    u = P[:, 0] - centre[:, 0]
    v = np.cross(normal, u)
    rel = P - centre
    angle = np.arctan2(np.einsum("nkd,nd->nk", rel, v), np.einsum("nkd,nd->nk", rel, u))
    return np.take_along_axis(quad, np.argsort(angle, axis=1), axis=1)


def _velocity_vectors(mesh: Mesh, velocity, location) -> tuple[np.ndarray, str]:
    """Velocity vectors in the analysis space: (n, dimension), on points or cells."""
    array, location = vector_values(mesh, velocity, "velocity", location)
    if array.shape[1] == 3 and mesh.dimension == 2:
        array = array[:, list(mesh.plane_axes)]
    return array, location


def open_boundary_flux(mesh: Mesh, velocity, c=None, *, tolerance: float = 1e-6,
                       velocity_location: str | None = None, c_location: str | None = None) -> dict:
    """Flow and phase flux through the domain boundary.

    Parameters
    ----------
    mesh : Mesh
    velocity : ndarray of shape (n_points, 3 or dim) or (n_cells, 3 or dim)
        Velocity on points or cells, length units per time unit.
    c : Indicator or ndarray of shape (n_points,) or (n_cells,), optional
        Phase indicator; without it only the flow figures are returned.
    tolerance : float
        A boundary piece is open where |u.n| exceeds ``tolerance`` times the
        largest speed in the domain.
    velocity_location, c_location : {'point', 'cell'}, optional
        Where an array lives; needed only when the mesh has as many points
        as cells.

    Returns
    -------
    dict
        - ``open_boundary``: True when any boundary piece is open;
        - ``open_boundary_area``: measure of the open pieces (length in 2D);
        - ``boundary_outflow``: net int u.n dS, volume leaving per unit time
          (negative: net inflow);
        - ``boundary_phase_outflow``: net int c u.n dS, phase volume leaving
          per unit time (with ``c``).

    Notes
    -----
    Boundary faces are the faces (edges in 2D) owned by one cell; quad faces
    are split in two triangles. Point fields are linear on each piece and
    the product c u.n is integrated exactly (int f g = |S| (sum f_i g_i +
    sum f_i sum g_i) / (k (k + 1)) on a simplex with k corners); cell fields
    take the owner cell's value. The time integral of
    ``boundary_phase_outflow`` is what the phase-volume drift of an open
    domain contains besides numerical loss (see :func:`drift_columns`).
    """
    if not (np.isfinite(tolerance) and tolerance >= 0):
        raise OptionError(f"tolerance must be a number >= 0, found {tolerance!r}", fix="for example 1e-6")
    u, u_location = _velocity_vectors(mesh, velocity, velocity_location)
    if c is not None:
        c_values, c_location = field_location(mesh, c, "c", c_location)
    pieces, owners, unit, measure = _face_vectors(mesh)
    k = pieces.shape[1]
    if u_location == "point":
        un = np.einsum("nkd,nd->nk", u[pieces], unit)
    else:
        un = np.repeat(np.einsum("nd,nd->n", u[owners], unit)[:, None], k, axis=1)
    un = np.where(np.isfinite(un), un, 0.0)
    # open where |u.n| is a real share of the flow: relative to the largest speed anywhere, so a
    # wall where the velocity is zero to round-off does not count as open
    speed = float(np.nanmax(np.linalg.norm(u, axis=-1), initial=0.0))
    is_open = np.any(np.abs(un) > tolerance * speed, axis=1) if speed > 0 else np.zeros(len(un), bool)
    out = {"open_boundary": bool(is_open.any()), "open_boundary_area": float(measure[is_open].sum()),
           "boundary_outflow": float(dot(measure, un.mean(axis=1)))}
    if c is not None:
        if c_location == "point":
            cv = c_values[pieces]
        else:
            cv = np.repeat(c_values[owners][:, None], k, axis=1)
        cv = np.where(np.isfinite(cv), cv, 0.0)
        product = (np.einsum("nk,nk->n", cv, un) + cv.sum(axis=1) * un.sum(axis=1)) / (k * (k + 1))
        out["boundary_phase_outflow"] = float(dot(measure, product))
    return out
