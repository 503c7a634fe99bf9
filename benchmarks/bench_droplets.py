"""Benchmark: droplet labelling of a ~1M-cell step against pyvista threshold + connectivity.

Run from the worktree root:  PYTHONPATH=src /work/venv/bin/python benchmarks/bench_droplets.py [--cells N]

Both sides label the same step in the same process. phasegauge's numbers are the whole
``label_droplets`` call (labels, band sharing, the full table); pyvista's are ``threshold`` +
``connectivity`` only (labels, no table), with the conversion to a pyvista grid left out. Mesh-only
work that a series pays once (face pairs, regular-grid detection) is in the first call, timed apart. Tracking is timed on
a second step moved by two cells, beside the labelling.
"""

from __future__ import annotations

import argparse
import time

import numpy as np


def _field(mesh, seed=0, n_drops=400, shift=0.0):
    """Logistic droplets of radius 2.5 to 8 cells, interface eps = 0.3 cell."""
    rng = np.random.default_rng(seed)
    X = mesh.cell_centroids
    dim = mesh.dimension
    h = float(np.median(mesh.cell_sizes)) if mesh.regular_grid is not None else mesh.total_measure ** (1 / dim) / 100
    centres = rng.random((n_drops, dim))
    centres[:, 0] += shift
    radius = rng.uniform(2.5, 8.0, n_drops) * h
    from scipy.spatial import cKDTree

    dist, idx = cKDTree(centres).query(X, k=4)
    signed = np.min(dist - radius[idx], axis=1)
    return 0.5 * (1 - np.tanh(signed / (2 * 0.3 * h)))


def _best(fn, repeat=3):
    times = []
    for _ in range(repeat):
        t = time.perf_counter()
        out = fn()
        times.append(time.perf_counter() - t)
    return min(times), out


def main():
    parser = argparse.ArgumentParser()
    parser.add_argument("--cells", type=int, default=1_000_000)
    parser.add_argument("--repeat", type=int, default=3)
    args = parser.parse_args()

    import pyvista as pv

    from phasegauge.analysis.droplets import label_droplets
    from phasegauge.analysis.tracking import DropletTracker
    from phasegauge.meshgen import grid_mesh, to_meshio

    pv.OFF_SCREEN = True
    side = int(round(args.cells ** (1 / 3)))
    cases = [("hexahedron grid (regular path)", grid_mesh((side,) * 3)),
             ("tetra mesh (graph path)", grid_mesh((int(round((args.cells / 6) ** (1 / 3))),) * 3, kind="tetra"))]
    for name, mesh in cases:
        c = _field(mesh)
        t = time.perf_counter()
        label_droplets(mesh, c)  # first call: the mesh caches (grid layout or face pairs, measures) fill
        first_call = time.perf_counter() - t
        ours, result = _best(lambda: label_droplets(mesh, c), args.repeat)
        grid = pv.from_meshio(to_meshio(mesh, cell_data={"c": c}))

        def pyvista_labels():
            kept = grid.threshold(0.5, scalars="c")
            return kept.connectivity(extraction_mode="all")

        theirs, regions = _best(pyvista_labels, args.repeat)
        n_theirs = len(np.unique(regions.cell_data["RegionId"]))
        point = label_droplets(mesh, c, connectivity="point").count
        c2 = _field(mesh, shift=2.0 / side)
        second = label_droplets(mesh, c2)

        def track():
            tracker = DropletTracker()
            tracker.add(0, 0.0, mesh, result)
            tracker.add(1, 1.0, mesh, second)
            return tracker.result()

        tracking, (_, events) = _best(track, args.repeat)
        print(f"{name}: {mesh.n_cells} cells")
        print(f"  first call, mesh caches cold (once)  {first_call:8.3f} s")
        print(f"  label_droplets (face, full table)    {ours:8.3f} s   droplets {result.count}")
        print(f"  pyvista threshold + connectivity     {theirs:8.3f} s   regions {n_theirs} "
              f"(point adjacency; ours with point adjacency: {point})")
        print(f"  ratio pyvista / phasegauge           {theirs / ours:8.2f}")
        print(f"  tracking two steps                   {tracking:8.3f} s   ({tracking / ours:.2f} x one labelling;"
              f" {len(events)} events)")


if __name__ == "__main__":
    main()
