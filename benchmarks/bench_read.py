"""Reading a series into the model against meshio's raw read of the same files.

Builds an XDMF time series of about 1M tetrahedra (several steps, static mesh), then times
in one process:

* raw: meshio's TimeSeriesReader reading the mesh once and every step's data;
* model: phasegauge's Series reading every step into Mesh + fields, plus the mesh work
  (cell measures, centroids, face adjacency) that is done once per series.

Prints both times and their ratio. Usage:

    python benchmarks/bench_read.py [--cells-per-axis 55] [--steps 5] [--keep DIR]
"""

from __future__ import annotations

import argparse
import os
import tempfile
import time

import numpy as np


def build(folder: str, n: int, steps: int) -> str:
    import meshio

    from phasegauge.meshgen import grid_mesh

    mesh = grid_mesh((n, n, n), kind="tetra")
    path = os.path.join(folder, "series.xdmf")
    cwd = os.getcwd()
    os.chdir(folder)  # meshio's TimeSeriesWriter writes its HDF5 file into the working folder
    try:
        with meshio.xdmf.TimeSeriesWriter(path) as writer:
            writer.write_points_cells(mesh.points, [(b.cell_type, b.connectivity) for b in mesh.blocks])
            x = mesh.points
            for k in range(steps):
                r = np.linalg.norm(x - 0.5, axis=1)
                phi = np.tanh((0.3 - r) / (0.02 * (1 + k)))
                writer.write_data(float(k), point_data={"phi": phi})
    finally:
        os.chdir(cwd)
    return path, mesh.n_cells


def time_raw(path: str, steps: int) -> float:
    import meshio

    t = time.perf_counter()
    with meshio.xdmf.TimeSeriesReader(path) as reader:
        reader.read_points_cells()
        for k in range(steps):
            reader.read_data(k)
    return time.perf_counter() - t


def time_model(path: str) -> tuple[float, float, float]:
    """Total time, the once-per-series mesh work, and the time of the steps after the first."""
    from phasegauge.io import Series

    t = time.perf_counter()
    series = Series(path)
    mesh_seconds = 0.0
    later = 0.0
    for i in range(len(series)):
        s0 = time.perf_counter()
        step = series.read(i)
        m0 = time.perf_counter()
        _ = step.mesh.cell_measures, step.mesh.cell_centroids, step.mesh.face_pairs
        mesh_seconds += time.perf_counter() - m0
        if i > 0:
            later += time.perf_counter() - s0
    series.close()
    return time.perf_counter() - t, mesh_seconds, later


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    parser.add_argument("--cells-per-axis", type=int, default=55, help="tetra grid: 6 n^3 cells (55: 1.0M)")
    parser.add_argument("--steps", type=int, default=5)
    parser.add_argument("--keep", default=None, help="build the series in this folder and keep it")
    args = parser.parse_args()
    folder = args.keep or tempfile.mkdtemp(prefix="pg-bench-read-")
    os.makedirs(folder, exist_ok=True)
    path, cells = build(folder, args.cells_per_axis, args.steps)
    raw = time_raw(path, args.steps)
    model, mesh_work, later = time_model(path)
    raw2 = time_raw(path, args.steps)  # again, so file caching favours neither side
    raw = min(raw, raw2)
    print(f"cells {cells}, steps {args.steps}")
    print(f"meshio raw read, all steps        {raw:8.3f} s")
    print(f"phasegauge read into model        {model:8.3f} s  (mesh work once: {mesh_work:.3f} s; "
          f"building the model once: {model - mesh_work - later:.3f} s)")
    print(f"steps after the first             {later:8.3f} s  ({later / max(args.steps - 1, 1) * 1e3:.1f} ms a step)")
    print(f"ratio model / raw, whole series   {model / raw:8.1f}")
    print(f"ratio later steps / raw per step  {later / (raw * (args.steps - 1) / args.steps):8.2f}")


if __name__ == "__main__":
    main()
