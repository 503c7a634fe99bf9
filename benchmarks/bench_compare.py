"""Speed of the comparison layer, reported as ratios to the VTK probe filter (pyvista ``sample``).

Run: PYTHONPATH=src python benchmarks/bench_compare.py [scale]
"""

import sys
import time

import numpy as np
import pyvista as pv

from phasegauge.analysis.compare import SamplingGrid, resample_to_grid, shape_comparison
from phasegauge.meshgen import grid_mesh, to_meshio


def _best(fn, repeat=2):
    times = []
    for _ in range(repeat):
        t = time.perf_counter()
        fn()
        times.append(time.perf_counter() - t)
    return min(times)


def main(scale: int = 1):
    for dim, kind, n, m in ((2, "triangle", 200 * scale, 400 * scale), (3, "tetra", 24 * scale, 48 * scale),
                            (3, "wedge", 24 * scale, 48 * scale)):
        mesh = grid_mesh((n,) * dim, kind=kind, jitter=0.2)
        field = np.sin(4 * mesh.coordinates[:, 0])
        grid = SamplingGrid([(0, 1)] * dim, (m,) * dim)
        ours = _best(lambda: resample_to_grid(mesh, field, grid))
        source = pv.from_meshio(to_meshio(mesh, point_data={"f": field}))
        P = grid.points()
        target = pv.PolyData(np.column_stack([P, np.zeros(len(P))]) if dim == 2 else P)
        vtk = _best(lambda: target.sample(source))
        print(f"resample {kind:8s} {mesh.n_cells:8d} cells -> {grid.n_samples:8d} samples: "
              f"{ours:.3f} s, VTK probe {vtk:.3f} s, ratio {ours / vtk:.2f}")
    for dim, n in ((2, 200 * scale), (3, 24 * scale)):
        a = grid_mesh((n,) * dim, kind="triangle" if dim == 2 else "tetra")
        b = grid_mesh((n,) * dim)
        ca = 0.5 * (1 - np.tanh((np.linalg.norm(a.coordinates - 0.45, axis=1) - 0.25) / 0.02))
        cb = 0.5 * (1 - np.tanh((np.linalg.norm(b.coordinates - 0.5, axis=1) - 0.25) / 0.02))
        t = _best(lambda: shape_comparison(a, ca, b, cb), repeat=1)
        print(f"shape_comparison {dim}D {a.n_cells} vs {b.n_cells} cells: {t:.2f} s")


if __name__ == "__main__":
    main(int(sys.argv[1]) if len(sys.argv) > 1 else 1)
