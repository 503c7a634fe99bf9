"""Sample ``filament_breakup``: an oil ligament in a coolant emulsion pinching into droplets.

Invented scenario: a ligament of oil, torn from a nozzle lip into a water-based
coolant, lies across a 2 x 1 window. Its thickness varies along its length; the
necks thin and pinch, the pieces round up into droplets, and the small droplets
dissolve into the large ones (Ostwald coarsening) as the Cahn-Hilliard free
energy decreases. Dimensionless units throughout.
"""

from __future__ import annotations

import os

import numpy as np

from ._cahn_hilliard import cahn_hilliard, spectral_grid
from ._meshes import box_triangles
from ._writers import write_xdmf_series

__all__ = ["FILAMENT", "filament_initial", "filament_breakup_fields", "write_filament_breakup"]

#: invented parameters of the scenario (dimensionless)
FILAMENT = {
    "box": (2.0, 1.0),            # window, periodic in the spectral run
    "grid": (160, 80),            # spectral grid
    "epsilon": 0.02,              # interface parameter: 10-90 % width 3.107 eps = 0.062
    "mobility": 1.0,
    "dt": 4e-5,
    "n_steps": 1200,              # run to t = 0.048
    "n_outputs": 40,              # saved at times growing as k^2.5 (fast pinch, slow coarsening)
    "half_thickness": 0.06,       # mean half-thickness of the ligament (3 eps)
    "length": 1.6,                # ligament length, centred in the window
    "main_mode": 6,               # dominant thickness wave: 6 waves on the 2.0 window
    "main_amplitude": 0.7,
    "noise_amplitude": 0.15,      # seeded random modes 2..11
    "mesh_spacing": 0.015,        # triangle edge length: about 20 600 triangles
    "seed": 7,
}


def filament_initial(params=FILAMENT) -> np.ndarray:
    """Initial order parameter on the spectral grid, shape ``params['grid']``."""
    lx, ly = params["box"]
    x, y = spectral_grid(params["grid"], params["box"])
    X, Y = np.meshgrid(x, y, indexing="ij")
    rng = np.random.default_rng(params["seed"])
    h0 = params["half_thickness"]
    h = h0 * (1 + params["main_amplitude"] * np.cos(2 * np.pi * params["main_mode"] * X / lx))
    for m in range(2, 12):
        h += h0 * params["noise_amplitude"] * rng.standard_normal() * np.cos(
            2 * np.pi * m * X / lx + rng.uniform(0, 2 * np.pi))
    centre = 0.5 * ly + 0.04 * np.sin(2 * np.pi * 2 * X / lx)
    distance = np.minimum(h - np.abs(Y - centre), 0.5 * params["length"] - np.abs(X - 0.5 * lx))
    return np.tanh(distance / (np.sqrt(2) * params["epsilon"]))


def _output_steps(params) -> np.ndarray:
    k = np.arange(params["n_outputs"] + 1) / params["n_outputs"]
    steps = np.unique(np.round(params["n_steps"] * k**2.5).astype(int))
    return steps


def filament_breakup_fields(params=FILAMENT, *, energies: bool = False):
    """Run the Cahn-Hilliard model of the scenario on its periodic spectral grid.

    Returns
    -------
    times : ndarray of shape (n_outputs,)
    fields : list of ndarray of shape ``params['grid']``
        phi at each output time.
    energy : ndarray, only with ``energies``
        Free energy after every time step.
    """
    steps = _output_steps(params)
    result = cahn_hilliard(filament_initial(params), params["box"], epsilon=params["epsilon"],
                           mobility=params["mobility"], dt=params["dt"], save_steps=steps,
                           energies=energies)
    times = steps * params["dt"]
    if energies:
        return times, result[0], result[1]
    return times, result


def sample_periodic(field: np.ndarray, lengths, points: np.ndarray) -> np.ndarray:
    """Cubic-spline value of a cell-centred periodic grid field at ``points`` (n, d)."""
    from scipy.ndimage import map_coordinates

    coords = [points[:, d] / (lengths[d] / field.shape[d]) - 0.5 for d in range(field.ndim)]
    return map_coordinates(field, coords, order=3, mode="grid-wrap")


def write_filament_breakup(directory: str, params=FILAMENT) -> str:
    """Run the scenario and write ``filament_breakup.xdmf`` (+ ``.h5``) into ``directory``.

    phi (order parameter in [-1, 1], +1 = oil; float32) on the points of an
    unstructured triangle mesh, one step per output time.
    """
    lx, ly = params["box"]
    mesh = box_triangles(((0.0, lx), (0.0, ly)), params["mesh_spacing"], seed=params["seed"])
    times, fields = filament_breakup_fields(params)
    xy = mesh.points[:, :2]
    steps = ((t, {"phi": sample_periodic(f, params["box"], xy).astype(np.float32)}, None)
             for t, f in zip(times, fields))
    return write_xdmf_series(os.path.join(directory, "filament_breakup.xdmf"), mesh, steps)
