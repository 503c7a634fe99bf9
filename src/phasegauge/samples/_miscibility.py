"""Sample ``solvent_quench``: an invented solvent pair that separates when cooled and mixes when reheated.

Invented scenario: in the settling vessel of a solvent-recovery unit, a mixture of solvents A and B
(mole fraction of A 0.45, the invented NRTL pair of ``sample_fields/solvent_pair.toml``, upper
critical solution temperature about 352.7 K) is cooled to 298.15 K, where it lies inside the
spinodal and separates into an A-lean and an A-rich liquid; later it is heated to 370 K, above the
critical temperature, and mixes again. A trace solute (mole fraction 0.02 on average) prefers the
A-rich liquid (partition coefficient 3 built into its drift). Dimensionless lengths and times.
"""

from __future__ import annotations

import os

import numpy as np

from ..meshgen import grid_mesh
from ..model.mixture_models import NrtlModel
from ._cahn_hilliard import _wavenumbers, cahn_hilliard, spectral_grid
from ._writers import write_xdmf_series

__all__ = ["SOLVENT_QUENCH", "solvent_pair_model", "nrtl_force", "solvent_quench_fields", "write_solvent_quench"]

#: invented parameters of the scenario (dimensionless, temperatures in K)
SOLVENT_QUENCH = {
    "grid": (64, 64),             # periodic unit box, one quad per spectral point
    "box": (1.0, 1.0),
    "epsilon": 0.02,              # interface parameter: about 4 cells across 10-90 %
    "mobility": 1.0,
    "dt": 2e-5,
    "stabilization": 4.0,         # >= half the largest f'' met (x stays within 0.1 to 0.9)
    "mean_composition": 0.45,     # mole fraction of solvent A
    "noise": 0.025,               # seeded initial fluctuation of x
    "cold": 298.15,               # K: two liquids (binodal 0.1186 / 0.8818)
    "hot": 370.0,                 # K: above the critical temperature, one liquid
    "cold_outputs": (0, 50, 100, 200, 400, 800),   # time steps of the outputs at the cold temperature
    "hot_outputs": (50, 100, 200, 400, 800),       # time steps after the heating
    "solute_mean": 0.02,
    "solute_partition": 3.0,      # equilibrium ratio of the solute in the rich and lean liquids
    "solute_diffusivity": 5.0,
    "solute_dt": 2e-5,
    "seed": 11,
}

#: binodal of the solvent pair at the cold temperature (lean, rich mole fraction of A), from
#: phasegauge.analysis.thermo.equilibrium_at(solvent_pair_model(), 298.15)
_COLD_BINODAL = (0.1186326, 0.8817626)


def solvent_pair_model() -> NrtlModel:
    """The invented NRTL pair of ``sample_fields/solvent_pair.toml``."""
    return NrtlModel(tau_a=(-1.6, -1.0), tau_b=(1000.0, 820.0), alpha=0.3, component="solvent A")


def nrtl_force(model, temperature: float, *, reference: float, scale: float):
    """``f'(phi)`` of the bulk free energy ``scale (T / reference) Delta g_mix / RT`` in phi = 2x - 1."""
    def force(phi):
        x = np.clip(0.5 * (1.0 + phi), 1e-9, 1.0 - 1e-9)
        mu1, mu2 = model.chemical_potentials(x, temperature)
        return scale * (temperature / reference) * 0.5 * (mu1 - mu2)
    return force


def _force_scale(model, temperature, lean):
    """Scale that gives f''(phi) = 2 at the lean binodal (the double well's value at its minima)."""
    h = 1e-5
    mu = lambda x: np.subtract(*model.chemical_potentials(np.asarray(x, dtype=float), temperature))  # noqa: E731
    curvature = float((mu(lean + h) - mu(lean - h)) / (2 * h))
    return 8.0 / curvature


def _advance_solute(s, x, duration, params):
    """The solute over ``duration`` in the frozen composition ``x``: ds/dt = D div(grad s - s beta grad x).

    Its equilibrium is s ~ exp(beta x), beta = ln K / (0.8818 - 0.1186), so K between the liquids.
    """
    if duration <= 0:
        return s
    beta = np.log(params["solute_partition"]) / (_COLD_BINODAL[1] - _COLD_BINODAL[0])
    k = _wavenumbers(s.shape, params["box"])
    k2 = sum(kk ** 2 for kk in k)
    axes = tuple(range(s.ndim))
    grad_x = [np.fft.irfftn(1j * kk * np.fft.rfftn(x), s=x.shape, axes=axes) for kk in k]
    n = max(1, int(np.ceil(duration / params["solute_dt"])))
    dt = duration / n
    d = params["solute_diffusivity"]
    sh = np.fft.rfftn(s)
    for _ in range(n):
        s = np.fft.irfftn(sh, s=x.shape, axes=axes)
        drift = sum(1j * kk * np.fft.rfftn(s * g) for kk, g in zip(k, grad_x))
        sh = (sh - dt * d * beta * drift) / (1.0 + dt * d * k2)
    return np.fft.irfftn(sh, s=x.shape, axes=axes)


def solvent_quench_fields(params=SOLVENT_QUENCH):
    """Run the scenario: Cahn-Hilliard with the NRTL free energy at the cold, then the hot temperature.

    Returns
    -------
    list of (time, temperature, x, s)
        x and s of shape ``params['grid']``: mole fractions of solvent A and of the solute.
    """
    model = solvent_pair_model()
    cold, hot = params["cold"], params["hot"]
    scale = _force_scale(model, cold, _COLD_BINODAL[0])
    rng = np.random.default_rng(params["seed"])
    x0 = params["mean_composition"] + params["noise"] * rng.standard_normal(params["grid"])
    common = dict(epsilon=params["epsilon"], mobility=params["mobility"], dt=params["dt"],
                  stabilization=params["stabilization"])
    first = cahn_hilliard(2 * x0 - 1, params["box"], save_steps=params["cold_outputs"],
                          bulk_force=nrtl_force(model, cold, reference=cold, scale=scale), **common)
    second = cahn_hilliard(first[-1], params["box"], save_steps=params["hot_outputs"],
                           bulk_force=nrtl_force(model, hot, reference=cold, scale=scale), **common)
    last = params["cold_outputs"][-1]
    steps = list(params["cold_outputs"]) + [last + s for s in params["hot_outputs"]]
    temps = [cold] * len(first) + [hot] * len(second)
    out = []
    s = np.full(params["grid"], params["solute_mean"])
    before = 0
    for step, temperature, phi in zip(steps, temps, first + second):
        x = 0.5 * (1.0 + phi)
        s = _advance_solute(s, x, (step - before) * params["dt"], params)
        before = step
        out.append((step * params["dt"], temperature, x, s.copy()))
    return out


def write_solvent_quench(directory: str, params=SOLVENT_QUENCH) -> str:
    """Run the scenario and write ``solvent_quench.xdmf`` (+ ``.h5``) into ``directory``.

    On the cells of a 64 x 64 quad grid (one cell per spectral point), float32: ``x`` (mole
    fraction of solvent A), ``s`` (solute mole fraction) and ``T`` (temperature in K, uniform).
    """
    nx, ny = params["grid"]
    mesh = grid_mesh((nx, ny), bounds=[(0.0, params["box"][0]), (0.0, params["box"][1])], kind="quad")
    centre = mesh.cell_centroids
    xs, ys = spectral_grid(params["grid"], params["box"])
    i = np.clip(np.rint(centre[:, 0] / (xs[1] - xs[0]) - 0.5).astype(int), 0, nx - 1)
    j = np.clip(np.rint(centre[:, 1] / (ys[1] - ys[0]) - 0.5).astype(int), 0, ny - 1)
    steps = ((t, None, {"x": x[i, j].astype(np.float32), "s": s[i, j].astype(np.float32),
                        "T": np.full(mesh.n_cells, temperature, dtype=np.float32)})
             for t, temperature, x, s in solvent_quench_fields(params))
    return write_xdmf_series(os.path.join(directory, "solvent_quench.xdmf"), mesh, steps)
