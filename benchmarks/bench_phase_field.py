"""Benchmark: what the equilibrium and coarsening figures add to a step of ``measure``.

A series of a spinodal pattern (an order parameter in [-1, 1]: a smoothed random field through
tanh, coarser at every step) on a ~1M-cell uniform regular grid of hexahedra (the free energy
works on regular grids only) is measured four times in one process: without the options (the
baseline), with ``free_energy`` (chemical-potential spread, free energy and tension of a double
well with kappa), with ``coarsening`` (first moment of the structure factor), and with both.
Printed: the median step time after the first of each run and its ratio to the baseline; then
the same steps run again by one step runner per option set taking turns, timed in CPU seconds of
the process (``time.process_time``: what a loaded machine's other work does not add). The
issue's target is at most +15 % with both.

Run::

    PYTHONPATH=src python benchmarks/bench_phase_field.py [--cells 100] [--steps 4]
"""

from __future__ import annotations

import argparse
import os
import sys
import tempfile
import time

import meshio  # noqa: F401  (imported before any timing: the readers' import is not the work)
import numpy as np

from phasegauge import measure
from phasegauge.meshgen import grid_mesh

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
from bench_miscibility import cpu_step_seconds, step_seconds, write_listing, write_step  # noqa: E402

#: the double well (beta / 4)(phi^2 - 1)^2 with its gradient coefficient, written on c = (phi + 1) / 2 as
#: --free-energy reads it (height times 16, kappa times 4)
MODEL = '[model]\nkind = "double-well"\nlean = 0.0\nrich = 1.0\nheight = 4.0\nkappa = 8e-4\n'


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
        phi = pattern(grid.cell_shape, 6.0 + 3.0 * k)  # smoothed over 6, 9, 12, ... cells
        values = phi.ravel()[grid.cell_index]  # the mesh's cells in their grid places
        lines.append(write_step(folder, f"spinodal_{k}.vtu", 1.0 + k, mesh, {"phi": values}))
    return write_listing(folder, lines), mesh.n_cells


def main():
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--cells", type=int, default=100, help="grid cells per side (100: 1M cells)")
    parser.add_argument("--steps", type=int, default=4)
    parser.add_argument("--rounds", type=int, default=1, help="turns of the step runners in CPU time")
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
            extra = "" if name == "baseline" else f": {100 * (value / base - 1):+.1f} %"
            print(f"  {name:12s} {value:.3f} s{extra}")
        print("  (target: both <= +15 %)")
        cpu = cpu_step_seconds(listing, [dict(field="phi", range=(-1, 1), **options) for options in runs.values()],
                               args.steps, args.rounds)
        print("the same steps in CPU seconds (step runners taking turns):")
        for name, value in zip(runs, cpu):
            extra = "" if name == "baseline" else f": {100 * (value / cpu[0] - 1):+.1f} %"
            print(f"  {name:12s} {value:.3f} s{extra}")
        steps = last.steps
        print("coarsening length per step: " + ", ".join(f"{v:.4f}" for v in steps["coarsening_length"]))
        print("chemical potential spread (rms) per step: "
              + ", ".join(f"{v:.4g}" for v in steps["chemical_potential_spread_rms"]))


if __name__ == "__main__":
    main()
