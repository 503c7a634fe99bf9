"""Contour + width on a ~1M-tetrahedra step against pyvista's contour filter alone.

Run: PYTHONPATH=src python benchmarks/bench_interface.py [cells_per_side]

Both run in this process on the same mesh and point data (a diffuse sphere).
Printed: seconds for each and the ratio (ours / pyvista); below 1 means the
whole interface analysis is faster than VTK's contour alone. Mesh-only work
(coordinates, cell sizes) is cached on the mesh as in a series, so the second,
warm run is the per-step figure.
"""

from __future__ import annotations

import sys
import time

import numpy as np


def main(n: int = 55) -> None:
    import pyvista

    from phasegauge.analysis.interface import find_interface, interface_metrics
    from phasegauge.meshgen import grid_mesh, to_meshio

    pyvista.OFF_SCREEN = True
    mesh = grid_mesh((n, n, n), kind="tetra")
    d = np.linalg.norm(mesh.coordinates - 0.5, axis=1)
    eps = 1.5 / n
    c = 0.5 * (1 + np.tanh((0.3 - d) / (2 * eps)))
    grid = pyvista.from_meshio(to_meshio(mesh, point_data={"c": c}))

    def ours():
        contour = find_interface(mesh, c)
        return contour, interface_metrics(mesh, c, contour=contour)

    def theirs():
        return grid.contour([0.5], scalars="c")

    timings = {}
    for label, job in (("ours (cold)", ours), ("pyvista contour", theirs), ("ours (warm)", ours),
                       ("pyvista contour (again)", theirs)):
        start = time.perf_counter()
        result = job()
        timings[label] = time.perf_counter() - start
        if label.startswith("ours"):
            contour, metrics = result
            size = contour.size
        else:
            size = float(result.compute_cell_sizes(length=False, volume=False).cell_data["Area"].sum())
        print(f"{label:26s} {timings[label]:7.2f} s   area {size:.6f}")
    print(f"mesh: {mesh.n_cells} tetrahedra, {mesh.n_points} points; exact sphere area {4 * np.pi * 0.09:.6f}")
    print(f"interface_width {metrics['interface_width']:.5f} (expected {2 * np.log(19) * eps:.5f})")
    ratio = timings["ours (warm)"] / min(timings["pyvista contour"], timings["pyvista contour (again)"])
    print(f"ratio contour+width / pyvista contour alone: {ratio:.2f}")


if __name__ == "__main__":
    main(int(sys.argv[1]) if len(sys.argv) > 1 else 55)
