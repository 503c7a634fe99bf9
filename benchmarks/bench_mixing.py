"""Benchmark: mixing metrics and 20 cross-section profiles on a ~1M-cell step, against pyvista.

phasegauge: ``mixing_metrics`` (volume-weighted) and ``cross_sections`` (20 planes, area- and
flow-weighted statistics), first on a fresh Mesh (cell geometry and incidence computed inside the
timing), then again as for the next step of a series (the mesh's cached geometry reused).
pyvista: ``compute_cell_sizes`` plus numpy for the volume figures, and per plane ``slice``
followed by ``integrate_data`` of c, c^2, u, u c, u c^2 (the same statistics from integrals).
Conversion of the mesh to pyvista is not timed. Run:

    PYTHONPATH=src python benchmarks/bench_mixing.py [--cells-per-axis 100]
"""

from __future__ import annotations

import argparse
import time

import numpy as np
import pyvista

from phasegauge.analysis.mixing import cross_sections, mixing_metrics
from phasegauge.model.mesh import Mesh
from phasegauge.meshgen import grid_mesh, to_meshio

pyvista.OFF_SCREEN = True


def field(points):
    x, y, z = points[:, 0], points[:, 1], points[:, 2]
    c = 0.5 + 0.5 * np.tanh((y - 0.5 - 0.1 * np.sin(6 * x) * np.cos(4 * z)) / (0.02 + 0.1 * x))
    u = 1.0 + 0.5 * y * (1 - y)
    return c, u


def run_phasegauge(mesh, c, velocity):
    start = time.perf_counter()
    volume = mixing_metrics(mesh, mesh.point_to_cell(c))
    profile = cross_sections(mesh, c, count=20, velocity=velocity)
    return time.perf_counter() - start, volume, profile


def run_pyvista(grid, positions):
    start = time.perf_counter()
    sizes = grid.compute_cell_sizes(length=False, area=False, volume=True)
    cells = grid.point_data_to_cell_data()
    v = np.abs(sizes.cell_data["Volume"])
    cc = cells.cell_data["c"]
    m = np.dot(v, cc) / v.sum()
    intensity = np.dot(v, (cc - m) ** 2) / v.sum() / (m * (1 - m))
    rows = []
    for p in positions:
        integrated = grid.slice(normal="x", origin=(p, 0.5, 0.5)).integrate_data()
        area = integrated.cell_data["Area"][0]
        get = lambda name: integrated.point_data[name][0]  # noqa: E731
        mean = get("c") / area
        var = get("c2") / area - mean ** 2
        flow = get("u")
        mean_f = get("uc") / flow
        var_f = get("uc2") / flow - mean_f ** 2
        rows.append((p, area, mean, var / (mean * (1 - mean)), mean_f, var_f / (mean_f * (1 - mean_f))))
    return time.perf_counter() - start, intensity, np.array(rows)


def main():
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--cells-per-axis", type=int, default=100)
    n = parser.parse_args().cells_per_axis
    template = grid_mesh((n, n, n), kind="hexahedron")
    c, u = field(template.points)
    velocity = np.zeros((template.n_points, 3))
    velocity[:, 0] = u
    grid = pyvista.from_meshio(to_meshio(template, point_data={"c": c, "c2": c * c, "u": u, "uc": u * c,
                                                               "uc2": u * c * c}))
    mesh = Mesh(template.points, template.blocks)  # fresh: cell geometry computed in the first run
    cold, volume, profile = run_phasegauge(mesh, c, velocity)
    warm, volume, profile = run_phasegauge(mesh, c, velocity)  # next step of a series: mesh cached
    theirs, intensity, rows = run_pyvista(grid, profile["position"].to_numpy())
    print(f"mesh: {template.n_cells} hexahedra, {template.n_points} points; 20 planes normal to x")
    print(f"phasegauge mixing_metrics + cross_sections, fresh mesh: {cold:.2f} s")
    print(f"phasegauge mixing_metrics + cross_sections, mesh geometry cached: {warm:.2f} s")
    print(f"pyvista compute_cell_sizes + 20 x (slice + integrate_data): {theirs:.2f} s")
    print(f"ratio pyvista / phasegauge: fresh {theirs / cold:.2f}, cached {theirs / warm:.2f}")
    print(f"volume I: phasegauge {volume['segregation_intensity']:.6f}, pyvista+numpy {intensity:.6f}")
    print(f"max |area difference| {np.max(np.abs(profile['area'] - rows[:, 1])):.2e}")
    print(f"max |mean difference| {np.max(np.abs(profile['mean_area_weighted'] - rows[:, 2])):.2e}")
    # pyvista integrates the interpolated c^2, not the square of the interpolated c: O(h^2) apart
    print(f"max |I difference| {np.max(np.abs(profile['segregation_intensity'] - rows[:, 3])):.2e}")
    print(f"max |I_flow difference| {np.max(np.abs(profile['segregation_intensity_flow'] - rows[:, 5])):.2e}")


if __name__ == "__main__":
    main()
