"""Sample ``droplets_3d``: two oil droplets brought together by a straining flow, and merging.

Invented scenario: in the mixing head of a coolant-emulsion unit, two oil
droplets of equal size sit on the axis of a steady straining (stagnation-point)
flow that pushes them together; their diffuse interfaces meet, a neck forms and
the two become one droplet, which the flow then flattens. Dimensionless units.

Model: the advective Cahn-Hilliard equation (Cahn & Hilliard 1958) with a
prescribed steady, divergence-free, periodic cellular flow::

    u = A (-2 sin(k x') cos(k y') cos(k z'), cos(k x') sin(k y') cos(k z'),
           cos(k x') cos(k y') sin(k z')),   x' = x - 1/2, k = 2 pi

solved by the semi-implicit spectral scheme of :mod:`._cahn_hilliard` on a
periodic unit cube; near the centre the flow is -2 A k x' along x (inflow) and
A k y', A k z' across (outflow). Written on the hexahedral grid whose points
are the spectral grid points.
"""

from __future__ import annotations

import os

import numpy as np

from ..model.mesh import Mesh
from ._cahn_hilliard import cahn_hilliard
from ._writers import write_xdmf_series

__all__ = ["DROPLETS_3D", "straining_flow", "droplets_3d_fields", "write_droplets_3d"]

#: invented parameters (dimensionless)
DROPLETS_3D = {
    "grid": 36,                  # spectral points per axis = hexahedra per axis
    "epsilon": 0.028,            # 10-90 % interface width 3.107 eps = 0.087 (3.1 cells)
    "mobility": 5e-4,
    "strain": 0.08,              # A
    "radius": 0.17,
    "offset": 0.255,             # droplet centres at x = 1/2 -+ offset on the flow axis
    "dt": 0.005,
    "n_steps": 300,              # to t = 1.5
    "n_outputs": 20,
}


def straining_flow(x, y, z, strain: float) -> np.ndarray:
    """The periodic straining flow at points; returns shape (3,) + x.shape."""
    k = 2 * np.pi
    cx, cy, cz = np.cos(k * (x - 0.5)), np.cos(k * (y - 0.5)), np.cos(k * (z - 0.5))
    sx, sy, sz = np.sin(k * (x - 0.5)), np.sin(k * (y - 0.5)), np.sin(k * (z - 0.5))
    return strain * np.stack([-2 * sx * cy * cz, cx * sy * cz, cx * cy * sz])


def _node_grid(n: int):
    x = np.arange(n) / n
    return np.meshgrid(x, x, x, indexing="ij")


def droplets_3d_fields(params=DROPLETS_3D):
    """Run the scenario; returns (times, list of phi arrays of shape (n, n, n), velocity (3, n, n, n))."""
    n = params["grid"]
    X, Y, Z = _node_grid(n)
    eps, r, d = params["epsilon"], params["radius"], params["offset"]
    phi = -np.ones_like(X)
    for sign in (-1.0, 1.0):
        dist = r - np.sqrt((X - 0.5 - sign * d) ** 2 + (Y - 0.5) ** 2 + (Z - 0.5) ** 2)
        phi = np.maximum(phi, np.tanh(dist / (np.sqrt(2) * eps)))
    velocity = straining_flow(X, Y, Z, params["strain"])
    steps = np.linspace(0, params["n_steps"], params["n_outputs"] + 1).round().astype(int)
    fields = cahn_hilliard(phi, (1.0, 1.0, 1.0), epsilon=eps, mobility=params["mobility"],
                           dt=params["dt"], save_steps=steps, velocity=velocity)
    return steps * params["dt"], fields, velocity


def _periodic_hex_mesh(n: int) -> tuple[Mesh, np.ndarray]:
    """Hexahedra over [0, 1]^3 with (n + 1)^3 points; index of the periodic node of each point."""
    from ..meshgen import grid_mesh

    mesh = grid_mesh((n, n, n), [(0.0, 1.0)] * 3, "hexahedron")
    idx = np.arange(n + 1) % n
    I, J, K = np.meshgrid(idx, idx, idx, indexing="ij")
    return mesh, np.ravel_multi_index((I.ravel(), J.ravel(), K.ravel()), (n, n, n))


def write_droplets_3d(directory: str, params=DROPLETS_3D) -> str:
    """Write ``droplets_3d.xdmf`` (+ ``.h5``): phi and velocity (float32) on the points of hexahedra."""
    n = params["grid"]
    times, fields, velocity = droplets_3d_fields(params)
    mesh, node = _periodic_hex_mesh(n)
    vel = velocity.reshape(3, -1)[:, node].T.astype(np.float32)
    steps = ((t, {"phi": f.ravel()[node].astype(np.float32), "velocity": vel}, None) for t, f in zip(times, fields))
    return write_xdmf_series(os.path.join(directory, "droplets_3d.xdmf"), mesh, steps)
