"""Sample ``channel_mixing``: a dye stream meeting clear water in a straight channel, at four flow rates.

Invented scenario: in the dosing channel of a dye-mixing unit, dyed water
(c = 1) enters through the lower half of the inlet and clear water (c = 0)
through the upper half. The flow is laminar plane Poiseuille flow in a channel
of height 1 and length 10; the dye diffuses with D = 0.04. The operator runs
the unit at four inlet flow rates Q (per unit depth, Q = U H with U the mean
speed): 0.5, 1, 1.5 and 2, so Pe = U H / D = 12.5, 25, 37.5 and 50. Each flow
rate is its own series (one XDMF file, one steady step at time 0): a campaign
of four runs, ``recipes/channel_mixing.toml``.

Model: steady advection-diffusion with the axial diffusion neglected (valid for
Pe >> 1), ``u(y) dc/dx = D d2c/dy2`` with no flux through the walls: a
Graetz-type eigenfunction series (Graetz 1883; e.g. Shah & London 1978),
c(x, y) = sum_k a_k v_k(y) exp(mu_k x), whose transverse eigenfunctions are
computed on a fine finite-volume grid in y.
"""

from __future__ import annotations

import functools
import os

import numpy as np

from ._meshes import box_triangles
from ._writers import write_xdmf_series

__all__ = ["CHANNEL", "poiseuille_velocity", "channel_concentration", "flow_rate_name", "write_channel_mixing"]

#: invented parameters (dimensionless)
CHANNEL = {
    "length": 10.0,
    "height": 1.0,
    "mean_velocity": 1.0,         # channel_concentration works at mean speed 1: c depends on Pe only
    "diffusivity": 0.04,
    "flow_rates": (0.5, 1.0, 1.5, 2.0),   # Q = U H per unit depth
    "transverse_cells": 400,     # grid of the eigenfunctions
    "mesh_spacing": 0.04,        # triangle edge length: about 14 500 triangles
    "seed": 11,
}


def poiseuille_velocity(y, *, height: float = 1.0, mean_velocity: float = 1.0):
    """Plane Poiseuille profile u(y) = 6 U y (H - y) / H^2, zero at both walls."""
    y = np.asarray(y, dtype=float)
    return 6.0 * mean_velocity * y * (height - y) / height**2


@functools.lru_cache(maxsize=4)
def _transverse_modes(n: int, height: float, mean: float):
    """u-weighted orthonormal eigenmodes of d2/dy2 (no-flux walls) on n cells, and eigenvalues."""
    from scipy.linalg import eigh_tridiagonal

    h = height / n
    yc = (np.arange(n) + 0.5) * h
    root = 1.0 / np.sqrt(poiseuille_velocity(yc, height=height, mean_velocity=mean))
    # finite-volume d2/dy2 with no-flux walls, symmetrised with u^(-1/2) on both sides
    diagonal = -np.r_[1.0, np.full(n - 2, 2.0), 1.0] / h**2 * root**2
    off = root[:-1] * root[1:] / h**2
    values, vectors = eigh_tridiagonal(diagonal, off)
    return root[:, None] * vectors, values, yc


def channel_concentration(x, y, peclet: float, params=CHANNEL) -> np.ndarray:
    """Steady concentration at points (x, y) for one Peclet number.

    Parameters
    ----------
    x, y : ndarray of shape (n,)
        Positions; x from the inlet, y from the lower wall.
    peclet : float
        U H / D.

    Returns
    -------
    ndarray of shape (n,), dimensionless in [0, 1]

    References
    ----------
    Graetz, L. (1883). Ueber die Waermeleitungsfaehigkeit von Fluessigkeiten.
    Annalen der Physik 254, 79-94.
    """
    height, mean = params["height"], params["mean_velocity"]
    diffusivity = mean * height / peclet
    modes, values, yc = _transverse_modes(params["transverse_cells"], height, mean)
    n, h = len(yc), yc[1] - yc[0]
    weight = poiseuille_velocity(yc, height=height, mean_velocity=mean)
    inlet = (yc < 0.5 * height).astype(float)
    coeff = modes.T @ (weight * inlet)
    rates = diffusivity * np.minimum(values, 0.0)            # mu_k <= 0
    x = np.asarray(x, dtype=float)
    y = np.asarray(y, dtype=float)
    # linear interpolation of every mode in y (flat beyond the outer cell centres)
    position = np.clip((y - yc[0]) / h, 0.0, n - 1.0)
    below = np.minimum(position.astype(int), n - 2)
    frac = (position - below)[:, None]
    at_y = modes[below] * (1.0 - frac) + modes[below + 1] * frac
    return np.einsum("pk,k,pk->p", at_y, coeff, np.exp(np.outer(x, rates)))


def flow_rate_name(flow_rate: float) -> str:
    """File stem of the series at ``flow_rate``: ``flow_rate_0.5``, ``flow_rate_1``, ..."""
    return f"flow_rate_{flow_rate:g}"


def write_channel_mixing(directory: str, params=CHANNEL) -> str:
    """Write the folder ``channel_mixing/``: one series per inlet flow rate.

    Each ``flow_rate_<Q>.xdmf`` (+ ``.h5``) holds one steady step (time 0): c
    (float64) and the Poiseuille velocity of mean speed Q / H (float32) on the
    points of the same triangles. The Peclet number of each is Q / D.

    Returns
    -------
    str
        The folder (give its files to a campaign recipe, one ``[[runs]]`` each).
    """
    folder = os.path.join(directory, "channel_mixing")
    os.makedirs(folder, exist_ok=True)
    mesh = box_triangles(((0.0, params["length"]), (0.0, params["height"])), params["mesh_spacing"],
                         seed=params["seed"])
    x, y = mesh.points[:, 0], mesh.points[:, 1]
    height = params["height"]
    for flow_rate in params["flow_rates"]:
        mean = flow_rate / height
        peclet = mean * height / params["diffusivity"]
        u = poiseuille_velocity(y, height=height, mean_velocity=mean)
        velocity = np.column_stack([u, np.zeros_like(u), np.zeros_like(u)]).astype(np.float32)
        c = np.clip(channel_concentration(x, y, peclet, params), 0.0, 1.0)
        write_xdmf_series(os.path.join(folder, flow_rate_name(flow_rate) + ".xdmf"), mesh,
                          [(0.0, {"c": c, "velocity": velocity}, None)])
    return folder
