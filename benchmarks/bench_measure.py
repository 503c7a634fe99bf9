"""Speed at scale: ``phasegauge.measure`` against meshio's raw read and a pyvista pipeline.

Builds XDMF time series (static mesh, ``--steps`` steps, a moving and merging diffuse
droplet field ``c`` on the points) of about 0.25M, 1M and 4M cells of each kind:

* ``tetra``: a grid split into six tetrahedra per cube;
* ``hexahedron``: a jittered grid of hexahedra (the regular-grid fast path is not taken);
* ``grid``: the same grid of hexahedra, unjittered (the regular-grid fast path);
* ``hexahedron-cells``: the jittered hexahedra with ``c`` on the cells (the same droplets at the
  cell centroids), as a volume-of-fluid or finite-volume solver writes its fields: ``measure``
  reconstructs the point values (its limited linear fit), the baseline takes pyvista's
  ``cell_data_to_point_data`` and then the same pipeline.

Then times, each configuration in a fresh child process of this one run (so that its peak
memory is its own), after one untimed read of the series' files (every job finds them in the
file cache):

* ``raw``: meshio's ``TimeSeriesReader`` reading the mesh once and every step's data;
* ``baseline``: a straightforward general-purpose pipeline doing the same work per step with
  pyvista/VTK: read (meshio), ``compute_cell_sizes``, point-to-cell data, ``contour`` at 0.5
  and its area, band volume by ``threshold`` (interface width), ``threshold`` +
  ``connectivity`` with per-droplet volume and centroid, phase volume and moments by
  ``integrate_data``, 20 ``slice`` + ``integrate_data`` cross sections along x;
* ``serial``: ``phasegauge.measure(path, 'c', section_axis='x')`` in one process, every module a
  measure run imports imported before the time and memory reference points (``import_run_code``),
  as the baseline's job has pyvista imported: their seconds are reported beside
  (``import_seconds``), a run's fixed cost, not the steps' work;
* ``workers2``: the same with ``workers=2``;
* ``serial-warm`` (asked for by name; ``bench_kinds.py`` runs it): ``serial`` after one untimed run of
  ``measure`` on a small series of the same kind (about 1000 cells, two steps) in the same process, before
  the memory reference point: what a process loads once at its first run (modules imported as the run
  needs them, numpy's and scipy's first buffers: about 20 MB, not the mesh's) is then not in its peak.

With ``--repeat N`` every configuration runs N times, in rounds of all of them, and the
fastest run of each is reported (all times are kept in the JSON): on a machine shared with
other work a single run can be 20 % off either way.

Printed ratios: measure / baseline; per-step cost after the first / raw read of one step
(mesh + data, as reading that step alone); parallel efficiency t_serial / (2 t_2workers);
peak memory above the process's memory after imports (the same readers in every job), relative to one step's mesh + fields
bytes, for the first and the second half of the steps (flat means equal); time per cell; and the
CPU seconds of the 2-worker run over the serial run's (the cost of going parallel, which other
processes on a shared machine do not distort, unlike the wall-clock efficiency).

Usage::

    PYTHONPATH=src python benchmarks/bench_measure.py [--sizes 0.25,1] [--steps 20]
        [--kinds tetra,grid,hexahedron] [--skip-4m] [--keep DIR] [--configs raw,baseline,serial,workers2]
        [--repeat N]

``--sizes`` is in millions of cells (default ``0.25,1``; 4 is opt-in, ``--skip-4m`` drops it
again). The default run (tetra and grid, 0.25M and 1M, 20 steps) takes about 15-20 minutes on
2 cores; the jittered hexahedra (``--kinds hexahedron``, about 25 s per 1M-cell step) and 4M cells
are opt-in, best with fewer ``--steps``.
"""

from __future__ import annotations

import argparse
import json
import os
import subprocess
import sys
import tempfile
import threading
import time

import numpy as np

KINDS = ("tetra", "hexahedron", "grid", "hexahedron-cells")
CONFIGS = ("raw", "baseline", "serial", "workers2")
SECTIONS = 20


# ------------------------------------------------------------------ building the series
def _per_axis(kind: str, millions: float) -> int:
    per_cube = 6 if kind == "tetra" else 1
    return max(4, int(round((millions * 1e6 / per_cube) ** (1.0 / 3.0))))


def droplet_field(x: np.ndarray, k: int, steps: int, h: float) -> np.ndarray:
    """Two droplets that approach and merge, and a small one that crosses the box."""
    s = k / max(steps - 1, 1)
    eps = 1.0 * h
    centres = [(0.30 + 0.12 * s, 0.5, 0.5, 0.15), (0.70 - 0.12 * s, 0.5, 0.5, 0.15),
               (0.5, 0.15 + 0.7 * s, 0.2, 0.08)]
    c = np.zeros(len(x))
    for cx, cy, cz, radius in centres:
        r = np.sqrt((x[:, 0] - cx) ** 2 + (x[:, 1] - cy) ** 2 + (x[:, 2] - cz) ** 2)
        np.maximum(c, 0.5 * (1.0 + np.tanh((radius - r) / (2.0 * eps))), out=c)
    return c


def build(folder: str, kind: str, millions: float, steps: int) -> dict:
    """Write the series (or reuse one already there); return its description."""
    import meshio

    from phasegauge.meshgen import grid_mesh

    n = _per_axis(kind, millions)
    name = f"{kind}_{n}_{steps}"
    path = os.path.join(folder, name, "series.xdmf")
    info_path = os.path.join(folder, name, "info.json")
    if os.path.exists(info_path):
        with open(info_path) as handle:
            return json.load(handle)
    os.makedirs(os.path.dirname(path), exist_ok=True)
    on_cells = kind == "hexahedron-cells"
    mesh = grid_mesh((n, n, n), kind="tetra" if kind == "tetra" else "hexahedron",
                     jitter=0.2 if kind in ("hexahedron", "hexahedron-cells") else 0.0, seed=1)
    cwd = os.getcwd()
    os.chdir(os.path.dirname(path))  # meshio's TimeSeriesWriter writes its .h5 into the working folder
    try:
        with meshio.xdmf.TimeSeriesWriter(os.path.basename(path)) as writer:
            writer.write_points_cells(mesh.points, [(b.cell_type, b.connectivity) for b in mesh.blocks])
            for k in range(steps):
                if on_cells:
                    c = droplet_field(mesh.cell_centroids, k, steps, 1.0 / n)
                    writer.write_data(float(k), cell_data={"c": [c]})
                else:
                    writer.write_data(float(k), point_data={"c": droplet_field(mesh.points, k, steps, 1.0 / n)})
    finally:
        os.chdir(cwd)
    step_bytes = (mesh.points.nbytes + sum(b.connectivity.nbytes for b in mesh.blocks)
                  + 8 * (mesh.n_cells if on_cells else mesh.n_points))
    info = {"kind": kind, "millions": millions, "path": path, "cells": mesh.n_cells,
            "points": mesh.n_points, "steps": steps, "step_bytes": step_bytes}
    with open(info_path, "w") as handle:
        json.dump(info, handle)
    return info


# ------------------------------------------------------------------ the timed jobs
def job_raw(path: str, steps: int) -> dict:
    import meshio

    t0 = time.perf_counter()
    with meshio.xdmf.TimeSeriesReader(path) as reader:
        reader.read_points_cells()
        t_mesh = time.perf_counter() - t0
        for k in range(steps):
            reader.read_data(k)
    total = time.perf_counter() - t0
    data = (total - t_mesh) / steps
    return {"seconds": total, "mesh_seconds": t_mesh, "data_seconds_per_step": data,
            "step_seconds": t_mesh + data}


def baseline_step(grid, positions) -> tuple:
    """One step of the same-work pyvista pipeline on ``grid`` (point data ``c``): phase volume, range,
    segregation, contour area, band width, droplets with volumes and centres, the integral of c and
    the mean of c on a plane at each of ``positions`` along x."""
    sizes = grid.compute_cell_sizes(length=False, area=False, volume=True)
    volume = np.abs(sizes.cell_data["Volume"])
    cell_c = grid.point_data_to_cell_data().cell_data["c"]
    phase_volume = float(volume @ cell_c)
    c_min, c_max = float(cell_c.min()), float(cell_c.max())
    mean = phase_volume / volume.sum()
    segregation = float(volume @ (cell_c - mean) ** 2 / volume.sum() / (mean * (1 - mean)))
    contour = grid.contour([0.5], scalars="c")
    area = float(contour.compute_cell_sizes(length=False, volume=False).cell_data["Area"].sum())
    band = grid.threshold([0.05, 0.95], scalars="c", preference="point")
    band_volume = float(band.integrate_data().cell_data["Volume"][0]) if band.n_cells else 0.0
    width = band_volume / area if area > 0 else float("nan")
    inside = grid.threshold(0.5, scalars="c", preference="point", all_scalars=False)
    if inside.n_cells:
        parts = inside.connectivity()
        region = parts.cell_data["RegionId"]
        vol = np.abs(parts.compute_cell_sizes(length=False, area=False).cell_data["Volume"])
        count = int(region.max()) + 1
        dv = np.bincount(region, vol, minlength=count)
        centre = [np.bincount(region, vol * parts.cell_centers().points[:, d], count) / dv
                  for d in range(3)]
    else:
        count, dv, centre = 0, np.zeros(0), []
    whole = grid.integrate_data()
    moment = whole.point_data["c"][0]
    profile = []
    for p in positions:
        cut = grid.slice(normal="x", origin=(p, 0.5, 0.5)).integrate_data()
        profile.append(cut.point_data["c"][0] / cut.cell_data["Area"][0])
    return c_min, c_max, segregation, width, count, centre, moment, profile


def job_baseline(path: str, steps: int) -> dict:
    import meshio
    import pyvista

    pyvista.OFF_SCREEN = True
    t0 = time.perf_counter()
    per_step = []
    with meshio.xdmf.TimeSeriesReader(path) as reader:
        points, cells = reader.read_points_cells()
        grid = pyvista.from_meshio(meshio.Mesh(points, cells))
        lo, hi = grid.bounds[0], grid.bounds[1]
        positions = lo + (np.arange(SECTIONS) + 0.5) * (hi - lo) / SECTIONS
        for k in range(steps):
            ts = time.perf_counter()
            _, point_data, cell_data = reader.read_data(k)
            if "c" in point_data:
                grid.point_data["c"] = point_data["c"]
                baseline_step(grid, positions)
            else:  # a cell field: the point values by pyvista's own averaging, then the same pipeline
                grid.cell_data["c"] = cell_data["c"][0]
                baseline_step(grid.cell_data_to_point_data(), positions)
            per_step.append(time.perf_counter() - ts)
    return {"seconds": time.perf_counter() - t0, "per_step": per_step}


def job_measure(path: str, steps: int, workers: int) -> dict:
    import phasegauge

    t0 = time.perf_counter()
    result = phasegauge.measure(path, "c", workers=workers, section_axis="x", section_count=SECTIONS)
    total = time.perf_counter() - t0
    per_step = [r.seconds for r in result.results]
    return {"seconds": total, "per_step": per_step,
            "droplets": [int(v) for v in result.steps["droplet_count"]]}


def _cpu_seconds() -> float:
    """CPU seconds of this process and its finished children (worker processes)."""
    import resource

    own = resource.getrusage(resource.RUSAGE_SELF)
    kids = resource.getrusage(resource.RUSAGE_CHILDREN)
    return own.ru_utime + own.ru_stime + kids.ru_utime + kids.ru_stime


def import_run_code(small_series: str) -> float:
    """Import every module a ``measure`` run imports, as the baseline's job has pyvista imported: code, not
    the run's data or work, so before the time and memory reference points. Which modules: those of a
    throwaway process that ran ``measure`` on a small series of the same kind, the one the expression
    ``small_series`` builds there (in the temporary ``folder``; the benchmarks' modules imported).
    Returns the seconds the imports took here (a run's fixed cost, reported beside the table)."""
    import importlib

    script = ("import json, sys, tempfile, warnings; warnings.simplefilter('ignore')\n"
              "import bench_measure, bench_polyhedra, phasegauge\n"
              "with tempfile.TemporaryDirectory() as folder:\n"
              f"    phasegauge.measure({small_series}, 'c', workers=1, section_axis='x', section_count={SECTIONS})\n"
              "print('MODULES ' + json.dumps(sorted(sys.modules)))")
    env = dict(os.environ)
    env["PYTHONPATH"] = os.path.dirname(os.path.abspath(__file__)) + os.pathsep + env.get("PYTHONPATH", "")
    proc = subprocess.run([sys.executable, "-c", script], capture_output=True, text=True, env=env, check=True)
    line = next(line for line in proc.stdout.splitlines() if line.startswith("MODULES "))
    t0 = time.perf_counter()
    for name in json.loads(line[len("MODULES "):]):
        if name != "__main__" and name not in sys.modules:
            try:
                importlib.import_module(name)
            except ImportError:  # a module made on the fly there (none of a run's code)
                pass
    return time.perf_counter() - t0


def small_series(path: str) -> str:
    """The expression that builds a small series (about 1000 cells, two steps) of the kind of the series at
    ``path`` (its folder's info.json) in ``folder``, for :func:`import_run_code`."""
    with open(os.path.join(os.path.dirname(path), "info.json")) as handle:
        kind = json.load(handle)["kind"]
    return f"bench_measure.build(folder, {kind!r}, 0.001, 2)['path']"


def _child(config: str, path: str, steps: int) -> None:
    """Run one configuration; print a JSON line with timings and memory."""
    import psutil

    # import what the job imports before the memory reference point
    # (every job reads through meshio and h5py: about 12 MB of code, not data)
    import h5py  # noqa: F401
    import meshio  # noqa: F401

    import_s = 0.0
    if config == "baseline":
        import pyvista  # noqa: F401
    elif config != "raw":
        import pandas  # noqa: F401

        import_s = import_run_code(small_series(path))
    if config == "serial-warm":
        _small_run(path)
    me = psutil.Process()
    base = me.memory_info().rss
    samples = []
    done = threading.Event()

    def sample():
        while not done.is_set():
            rss = me.memory_info().rss
            for child in me.children(recursive=True):
                try:
                    rss_child = child.memory_info().rss
                except psutil.Error:
                    continue
                rss = max(rss, rss_child)  # workers: the largest process
            samples.append((time.perf_counter(), rss))
            done.wait(0.05)

    thread = threading.Thread(target=sample, daemon=True)
    cpu_start = _cpu_seconds()
    start = time.perf_counter()
    thread.start()
    if config == "raw":
        out = job_raw(path, steps)
    elif config == "baseline":
        out = job_baseline(path, steps)
    else:
        out = job_measure(path, steps, 1 if config == "serial" else 2)
    done.set()
    thread.join()
    end = time.perf_counter()
    out["cpu_seconds"] = _cpu_seconds() - cpu_start
    out["import_seconds"] = import_s
    half = start + 0.5 * (end - start)
    first = max([r for t, r in samples if t <= half], default=base)
    second = max([r for t, r in samples if t > half], default=base)
    out.update({"base_rss": base, "peak_first_half": first - base, "peak_second_half": second - base,
                "peak_rss": max(first, second)})
    print("RESULT " + json.dumps(out))


def _small_run(path: str) -> None:
    """One untimed ``measure`` on a small series of the kind of the series at ``path`` (its folder's
    info.json), written to a temporary folder; then the garbage collected."""
    import gc

    import phasegauge

    with open(os.path.join(os.path.dirname(path), "info.json")) as handle:
        kind = json.load(handle)["kind"]
    with tempfile.TemporaryDirectory() as folder:
        small = build(folder, kind, 0.001, 2)
        phasegauge.measure(small["path"], "c", workers=1, section_axis="x", section_count=SECTIONS)
    gc.collect()


def _warm_file_cache(path: str) -> None:
    """Read the series' files once, untimed, so every job (the raw read first) finds them in
    the operating system's file cache: otherwise the job that runs first pays the disk."""
    folder = os.path.dirname(path)
    for name in sorted(os.listdir(folder)):
        with open(os.path.join(folder, name), "rb") as handle:
            while handle.read(1 << 24):
                pass


def run_child(config: str, info: dict) -> dict:
    env = dict(os.environ)
    # every job (the baseline too) with numpy's huge-page advice as the command sets it (off unless
    # given: NUMPY_MADVISE_HUGEPAGE=1 in this process's environment measures numpy's default)
    env.setdefault("NUMPY_MADVISE_HUGEPAGE", "0")
    src = os.path.join(os.path.dirname(os.path.dirname(os.path.abspath(__file__))), "src")
    env["PYTHONPATH"] = src + os.pathsep + env.get("PYTHONPATH", "")
    proc = subprocess.run([sys.executable, os.path.abspath(__file__), "--child", config, info["path"],
                           str(info["steps"])], capture_output=True, text=True, env=env)
    for line in proc.stdout.splitlines():
        if line.startswith("RESULT "):
            return json.loads(line[len("RESULT "):])
    raise RuntimeError(f"{config} on {info['path']} failed:\n{proc.stderr[-3000:]}")


# ------------------------------------------------------------------ report
def _ratio_line(info: dict, res: dict) -> dict:
    row = {"kind": info["kind"], "cells": info["cells"], "steps": info["steps"]}
    raw, base, ser, par = (res.get(c) for c in CONFIGS)
    if raw:
        row["raw_s"] = raw["seconds"]
        row["raw_step_s"] = raw["step_seconds"]
    if base:
        row["baseline_s"] = base["seconds"]
    if ser:
        row["serial_s"] = ser["seconds"]
        later = ser["per_step"][1:] or ser["per_step"]
        row["step_after_first_s"] = float(np.median(later))
        row["first_step_s"] = ser["per_step"][0]
        row["us_per_cell_step"] = 1e6 * row["step_after_first_s"] / info["cells"]
        row["peak_x_step"] = max(ser["peak_first_half"], ser["peak_second_half"]) / info["step_bytes"]
        row["peak_halves_MB"] = (ser["peak_first_half"] / 2**20, ser["peak_second_half"] / 2**20)
    if par:
        row["workers2_s"] = par["seconds"]
        row["peak2_x_step"] = max(par["peak_first_half"], par["peak_second_half"]) / info["step_bytes"]
    if ser and base:
        row["measure_over_baseline"] = ser["seconds"] / base["seconds"]
    if ser and raw:
        row["step_over_raw"] = row["step_after_first_s"] / raw["step_seconds"]
    if ser and par:
        row["parallel_efficiency"] = ser["seconds"] / (2 * par["seconds"])
        if "cpu_seconds" in ser and "cpu_seconds" in par:
            # CPU spent by the two workers against the serial run: the overhead of going parallel,
            # which a machine shared with other processes does not distort
            row["cpu_workers2_over_serial"] = par["cpu_seconds"] / ser["cpu_seconds"]
    return row


def _fmt(value) -> str:
    if isinstance(value, float):
        return f"{value:.3g}"
    if isinstance(value, tuple):
        return "/".join(f"{v:.0f}" for v in value)
    return str(value)


def main(argv=None) -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--sizes", default="0.25,1", help="millions of cells, comma separated (4 is opt-in)")
    parser.add_argument("--steps", type=int, default=20)
    parser.add_argument("--kinds", default="tetra,grid", help=f"from {', '.join(KINDS)}")
    parser.add_argument("--configs", default=",".join(CONFIGS))
    parser.add_argument("--skip-4m", action="store_true", help="leave out the 4M-cell series")
    parser.add_argument("--keep", default=None, help="build the series in this folder and keep them")
    parser.add_argument("--json", default=None, help="also write all figures to this JSON file")
    parser.add_argument("--repeat", type=int, default=1,
                        help="run every configuration this many times (in rounds); report the fastest")
    parser.add_argument("--child", nargs=3, help=argparse.SUPPRESS)
    args = parser.parse_args(argv)
    if args.child:
        _child(args.child[0], args.child[1], int(args.child[2]))
        return
    sizes = [float(s) for s in args.sizes.split(",") if s]
    if args.skip_4m:
        sizes = [s for s in sizes if s < 3]
    kinds = [k for k in args.kinds.split(",") if k]
    configs = [c for c in args.configs.split(",") if c]
    for k in kinds:
        if k not in KINDS:
            parser.error(f"unknown kind {k!r}; choose from {', '.join(KINDS)}")
    folder = args.keep or tempfile.mkdtemp(prefix="pg-bench-measure-")
    os.makedirs(folder, exist_ok=True)
    print(f"series in {folder}; {os.cpu_count()} cores", flush=True)
    rows, everything = [], []
    for kind in kinds:
        for millions in sizes:
            t = time.perf_counter()
            info = build(folder, kind, millions, args.steps)
            print(f"\n{kind}: {info['cells']} cells, {info['points']} points, {info['steps']} steps "
                  f"(built in {time.perf_counter() - t:.0f} s)", flush=True)
            _warm_file_cache(info["path"])
            res, runs = {}, {c: [] for c in configs}
            for _ in range(args.repeat):  # rounds of all configurations: a slow spell hits them alike
                for config in configs:
                    out = run_child(config, info)
                    runs[config].append(out["seconds"])
                    if config not in res or out["seconds"] < res[config]["seconds"]:
                        res[config] = out  # the fastest run of each configuration is reported
                    print(f"  {config:9s} {out['seconds']:8.2f} s   peak +"
                          f"{max(out['peak_first_half'], out['peak_second_half']) / 2**20:.0f} MB",
                          flush=True)
            for config in configs:
                res[config]["all_seconds"] = runs[config]
            row = _ratio_line(info, res)
            rows.append(row)
            everything.append({"info": info, "results": res, "row": row})
            print("  " + "  ".join(f"{k}={_fmt(v)}" for k, v in row.items() if k not in ("kind",)), flush=True)
    print("\nsummary (targets: measure/baseline <= 0.5, step/raw <= 3, efficiency >= 0.8, peak <= 4x step)")
    keys = ["kind", "cells", "baseline_s", "serial_s", "workers2_s", "measure_over_baseline", "raw_step_s",
            "step_after_first_s", "step_over_raw", "parallel_efficiency", "cpu_workers2_over_serial",
            "peak_x_step", "peak_halves_MB",
            "us_per_cell_step"]
    print(" | ".join(keys))
    for row in rows:
        print(" | ".join(_fmt(row.get(k, "")) for k in keys))
    finish(everything, args.json, folder, keep=args.keep)


def finish(everything, json_path, folder, *, keep) -> None:
    """Write the results as JSON when asked and remove the series' folder unless it is kept."""
    if json_path:
        with open(json_path, "w") as handle:
            json.dump(everything, handle, indent=1, default=str)
    if not keep:
        import shutil

        shutil.rmtree(folder, ignore_errors=True)


if __name__ == "__main__":
    main()
