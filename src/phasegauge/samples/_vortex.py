"""Samples ``vortex_upwind`` and ``vortex_sharp``: a dye blob in a reversing stirred cell.

Invented scenario: a round blob of dye (volume fraction c = 1) sits in a closed
square mixing cell whose stirrer turns one way, slows, and turns back, so the
flow is the reversed single vortex of LeVeque (1996) and Rider & Kothe (1998)::

    psi = (1/pi) sin^2(pi x) sin^2(pi y) cos(pi t / T),  u = dpsi/dy,  v = -dpsi/dx

At t = T the exact solution is the initial circle again, so whatever is left
of the difference is numerical error. The same blob is advected twice:

* ``vortex_upwind``: first-order upwind on 64 x 64 quads (smears);
* ``vortex_sharp``: superbee TVD fluxes with Zalesak's FCT limiter on 100 x 100
  quads (bounded and sharp).

Face fluxes are stream-function differences, so the discrete flow is exactly
divergence-free and the phase volume is conserved to round-off.
"""

from __future__ import annotations

import os

import numpy as np

from ..meshgen import grid_mesh
from ._finite_volume import advect
from ._writers import write_vtu_with_time

__all__ = ["VORTEX", "vortex_fields", "vortex_velocity", "circle_fraction", "write_vortex"]

#: invented run settings (the flow and the circle are the published test case)
VORTEX = {
    "period": 2.0,           # T: the flow reverses at T/2, the blob is back at T
    "centre": (0.5, 0.75),
    "radius": 0.15,
    "n_outputs": 16,         # steps written: t = 0, T/16, ..., T
    "courant": 0.5,          # max |u| dt / dx
    "runs": {"vortex_upwind": {"cells": 64, "scheme": "upwind"},
             "vortex_sharp": {"cells": 100, "scheme": "fct"}},
}


def stream_function(x, y, t, period):
    """psi(x, y, t) of the reversed single vortex, in area per time."""
    return (np.sin(np.pi * x) ** 2 * np.sin(np.pi * y) ** 2 * np.cos(np.pi * t / period)) / np.pi


def vortex_velocity(x, y, t, period):
    """Velocity (u, v) of the reversed single vortex at points (x, y) and time t."""
    g = np.cos(np.pi * t / period)
    u = np.sin(np.pi * x) ** 2 * np.sin(2 * np.pi * y) * g
    v = -np.sin(np.pi * y) ** 2 * np.sin(2 * np.pi * x) * g
    return u, v


def circle_fraction(n: int, centre, radius, *, sub: int = 8) -> np.ndarray:
    """Exact-ish volume fraction of a disc in the cells of an n x n unit-square grid.

    Each cell is sampled at sub x sub points, shape (n, n).
    """
    h = 1.0 / n
    offsets = (np.arange(sub) + 0.5) / sub
    x = (np.arange(n)[:, None] + offsets[None, :]).ravel() * h
    X, Y = np.meshgrid(x, x, indexing="ij")
    inside = (X - centre[0]) ** 2 + (Y - centre[1]) ** 2 < radius**2
    return inside.reshape(n, sub, n, sub).mean(axis=(1, 3))


def _face_fluxes(n, t, period):
    nodes = np.linspace(0.0, 1.0, n + 1)
    X, Y = np.meshgrid(nodes, nodes, indexing="ij")
    psi = stream_function(X, Y, t, period)
    flux_x = psi[:, 1:] - psi[:, :-1]          # int u dy over each x-face
    flux_y = -(psi[1:, :] - psi[:-1, :])       # int v dx over each y-face
    return flux_x, flux_y


def vortex_fields(n: int, scheme: str, params=VORTEX):
    """Run the reversed vortex on an n x n grid of the unit square.

    Returns
    -------
    times : ndarray of shape (n_outputs + 1,)
    fields : list of ndarray of shape (n, n)
        Cell volume fraction, index (i, j) = (x, y).
    """
    period, outputs = params["period"], params["n_outputs"]
    h = 1.0 / n
    interval = period / outputs
    substeps = int(np.ceil(interval / (params["courant"] * h)))
    dt = interval / substeps
    c = circle_fraction(n, params["centre"], params["radius"])
    fields, times = [c.copy()], [0.0]
    t = 0.0
    for k in range(outputs):
        for s in range(substeps):
            tm = (k * substeps + s + 0.5) * dt
            fx, fy = _face_fluxes(n, tm, period)
            c = advect(c, fx, fy, h * h, dt, scheme=scheme)
        t = (k + 1) * interval
        fields.append(c.copy())
        times.append(t)
    return np.array(times), fields


def write_vortex(directory: str, name: str, params=VORTEX) -> str:
    """Run one of the two vortex runs and write ``NAME/NAME_0000.vtu`` ... into ``directory``.

    Cell data: ``c`` (volume fraction, 1 = dye; float64) and ``velocity`` (3
    components at the cell centres at the step's time; float32); field data
    ``TimeValue``. Returns the folder.
    """
    run = params["runs"][name]
    n = run["cells"]
    mesh = grid_mesh((n, n), [(0.0, 1.0), (0.0, 1.0)], "quad")
    times, fields = vortex_fields(n, run["scheme"], params)
    folder = os.path.join(directory, name)
    os.makedirs(folder, exist_ok=True)
    centres = mesh.cell_centroids
    # grid_mesh numbers quads with i (x) slowest, matching the (x, y) arrays ravelled in C order
    for k, (t, c) in enumerate(zip(times, fields)):
        u, v = vortex_velocity(centres[:, 0], centres[:, 1], t, params["period"])
        velocity = np.column_stack([u, v, np.zeros_like(u)]).astype(np.float32)
        write_vtu_with_time(os.path.join(folder, f"{name}_{k:04d}.vtu"), mesh, t,
                            cell_data={"c": c.ravel(), "velocity": velocity})
    return folder
