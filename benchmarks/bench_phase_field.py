"""Benchmark: what the equilibrium and coarsening figures add to a step of ``measure``.

A series of a spinodal pattern (an order parameter in [-1, 1]: a smoothed random field through
tanh, coarser at every step) on a ~1M-cell uniform regular grid of hexahedra (the free energy
works on regular grids only) is measured four times in one process: without the options (the
baseline), with ``free_energy`` (chemical-potential spread, free energy and tension of a double
well with kappa), with ``coarsening`` (first moment of the structure factor), and with both.
Printed: the median step time after the first of each run and its ratio to the baseline. The
issue's target is at most +15 % with both.

Run::

    PYTHONPATH=src python benchmarks/bench_phase_field.py [--cells 100] [--steps 4]
"""

from __future__ import annotations

import argparse
import os
import tempfile
import time

import meshio  # noqa: F401  (imported before any timing: the readers' import is not the work)
import numpy as np

from phasegauge import measure
from phasegauge.meshgen import grid_mesh, to_meshio

#: the double well (beta / 4)(phi^2 - 1)^2 with its gradient coefficient
MODEL = '[model]\nkind = "double-well"\nlean = -1.0\nrich = 1.0\nheight = 0.25\nkappa = 2e-4\n'


def pattern(shape, scale, seed=7):
    """A spinodal-like order parameter: white noise smoothed over ``scale`` cells, through tanh."""
    rng = np.random.default_rng(seed)
    noise = rng.standard_normal(shape)
    k = np.sqrt(sum(g ** 2 for g in np.meshgrid(*[np.fft.fftfreq(n) for n in shape], indexing="ij")))
    smooth = np.real(np.fft.ifftn(np.fft.fftn(noise) * np.exp(-0.5 * (k * scale * 2 * np.pi) ** 2)))
    return np.tanh(3.0 * smooth / smooth.std())


def write_series(folder, cells, steps):
    mesh = grid_mesh((cells, cells, cells))
    grid = mesh.regular_grid
    lines = []
    for k in range(steps):
        phi = pattern(grid.cell_shape, 2.0 + 1.5 * k)
        values = phi.ravel()[grid.cell_index]  # the mesh's cells in their grid places
        name = f"spinodal_{k}.vtu"
        to_meshio(mesh, cell_data={"phi": values}).write(os.path.join(folder, name))
        lines.append(f"{1.0 + k},{name}")
    listing = os.path.join(folder, "run.steps")
    with open(listing, "w") as handle:
        handle.write("\n".join(lines) + "\n")
    return listing, mesh.n_cells


def step_seconds(result):
    return float(np.median([r.seconds for r in result.results[1:]]))


def main():
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--cells", type=int, default=100, help="grid cells per side (100: 1M cells)")
    parser.add_argument("--steps", type=int, default=4)
    args = parser.parse_args()

    with tempfile.TemporaryDirectory(prefix="pg-bench-phase-field-") as folder:
        listing, n = write_series(folder, args.cells, args.steps)
        model = os.path.join(folder, "well.toml")
        with open(model, "w") as handle:
            handle.write(MODEL)
        for k in range(args.steps):  # read once untimed: no run pays the disk alone
            meshio.read(os.path.join(folder, f"spinodal_{k}.vtu"))
        t0 = time.perf_counter()
        meshio.read(os.path.join(folder, "spinodal_1.vtu"))
        raw = time.perf_counter() - t0
        runs = {"baseline": {}, "free energy": {"free_energy": model}, "coarsening": {"coarsening": True},
                "both": {"free_energy": model, "coarsening": True}}
        seconds, last = {}, None
        for name, options in runs.items():
            result = measure(listing, "phi", range=(-1, 1), **options)
            seconds[name] = step_seconds(result)
            last = result if name == "both" else last
        base = seconds["baseline"]
        print(f"measure step on {n} hexahedra (every analysis), raw read of one step {raw:.3f} s")
        for name, value in seconds.items():
            extra = "" if name == "baseline" else f": +{100 * (value / base - 1):.1f} %"
            print(f"  {name:12s} {value:.3f} s{extra}")
        print("  (target: both <= +15 %)")
        steps = last.steps
        print("coarsening length per step: " + ", ".join(f"{v:.4f}" for v in steps["coarsening_length"]))
        print("chemical potential spread (rms) per step: "
              + ", ".join(f"{v:.4g}" for v in steps["chemical_potential_spread_rms"]))


if __name__ == "__main__":
    main()
