"""Speed on polyhedral cells: ``phasegauge.measure`` on VTK polyhedra against the same hexahedra
and against a pyvista pipeline doing the same work on the polyhedra.

Builds folder series of ``--steps`` VTK XML files over one jittered grid of about ``--sizes``
million hexahedra, with the droplet field ``c`` of ``bench_measure.droplet_field`` on the points,
written as pyvista writes them by default (every array base64-encoded inside the XML, in
zlib-compressed blocks) unless said otherwise:

* ``polyhedra``: every cell written as a VTK polyhedron (42), six quad faces each;
* ``hexahedra``: the same cells written as VTK hexahedra (12);
* ``split``: the polyhedra again, with the first cell's bottom face (on the boundary) written as two
  triangles: that one cell is no ordinary cell, so the reader cones it (pyramids and tetrahedra
  about its centre) and reads every other one as a hexahedron, as in a hexahedral mesh with a few
  polyhedra of other shapes (a file whose polyhedra are all hexahedra is read as hexahedra);
* ``triangulated``: the polyhedra with every face written as two triangles (cut along the diagonal
  from its lowest point number, alike from both sides): no cell is an ordinary cell, so the reader
  splits every one into tetrahedra about its centre, as in a file of polyhedra of other shapes;
* ``band``: the polyhedra with the faces between the x-layers of a band through the middle of the
  box (about a fifth of the cells) written as two triangles alike: those cells are coned (pyramids
  and tetrahedra about their centres), the others read as hexahedra, as in a hexahedral mesh with a
  region of polyhedra;
* ``raw``: the ``polyhedra`` files again, written by VTK's XML writer with the arrays appended after
  the XML as raw bytes (no base64, no compression): the same cells and values, 3.5x the bytes, and
  VTK's reader takes about a seventh of the time (its reading of base64 and zlib blocks runs on one
  thread), so the read's share of a later step shows beside the analysis's.

Then times, each configuration in a fresh child process, after one untimed read of the files:

* ``baseline``: per step, ``pyvista.read`` of the polyhedral file and the work of
  ``bench_measure.job_baseline`` (cell sizes, point-to-cell data, contour area, band volume,
  threshold + connectivity droplets, integrals, 20 slices);
* ``polyhedra`` / ``hexahedra``: ``phasegauge.measure(folder, 'c', section_axis='x')`` in one
  process.

Printed: measure / baseline on the polyhedra; the polyhedra's time per cell-step after the
first step over the hexahedra's (the per-cell target is 1: the same speed per cell); first
steps; peak memory over one step's mesh and fields (the hexahedra's bytes).

Usage::

    PYTHONPATH=src python benchmarks/bench_polyhedra.py [--sizes 0.25] [--steps 5] [--keep DIR]
        [--configs baseline,polyhedra,hexahedra]
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

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))

from bench_measure import SECTIONS, _cpu_seconds, baseline_step, droplet_field, import_run_code  # noqa: E402

CONFIGS = ("baseline", "polyhedra", "hexahedra")
#: the series written (see the module notes)
SERIES = ("polyhedra", "hexahedra", "split", "triangulated", "band", "raw")


def build(folder: str, millions: float, steps: int, names=SERIES) -> dict:
    """Write the series ``names`` (a series of an earlier build in ``folder`` is kept); return the
    description of every series built there so far."""
    import pyvista

    from phasegauge.meshgen import grid_mesh, to_polyhedral_grid

    n = max(4, int(round((millions * 1e6) ** (1.0 / 3.0))))
    base = os.path.join(folder, f"poly_{n}_{steps}")
    info_path = os.path.join(base, "info.json")
    done = set()  # series of an earlier build are kept
    if os.path.exists(info_path):
        with open(info_path) as handle:
            info = json.load(handle)
        done = {name for name in SERIES if name in info}
        if done.issuperset(names):
            return info
    mesh = grid_mesh((n, n, n), kind="hexahedron", jitter=0.2, seed=1)
    makers = {"polyhedra": to_polyhedral_grid, "split": _one_odd_cell, "triangulated": _triangulated, "band": _band,
              "raw": to_polyhedral_grid,
              "hexahedra": lambda m: pyvista.UnstructuredGrid({pyvista.CellType.HEXAHEDRON: m.blocks[0].connectivity},
                                                              m.points)}
    for name in names:
        if name in done:
            continue
        grid = makers[name](mesh)
        os.makedirs(os.path.join(base, name), exist_ok=True)
        for k in range(steps):
            grid.point_data["c"] = droplet_field(mesh.points, k, steps, 1.0 / n)
            path = os.path.join(base, name, f"step_{k:04d}.vtu")
            grid.save(path) if name != "raw" else _save_raw(grid, path)
    step_bytes = mesh.points.nbytes + sum(b.connectivity.nbytes for b in mesh.blocks) + 8 * mesh.n_points
    info = {"cells": mesh.n_cells, "points": mesh.n_points, "steps": steps, "step_bytes": step_bytes,
            **{name: os.path.join(base, name) for name in SERIES if name in done or name in names}}
    with open(info_path, "w") as handle:
        json.dump(info, handle)
    return info


def _save_raw(grid, path: str) -> None:
    """``grid`` as a VTK XML file with its arrays appended as raw bytes, uncompressed."""
    from vtkmodules.vtkIOXML import vtkXMLUnstructuredGridWriter

    writer = vtkXMLUnstructuredGridWriter()
    writer.SetFileName(path)
    writer.SetInputData(grid)
    writer.SetDataModeToAppended()
    writer.EncodeAppendedDataOff()
    writer.SetCompressorTypeToNone()
    writer.SetHeaderTypeToUInt64()  # one block an array: 32-bit sizes would stop at 4 GiB
    if not writer.Write():
        raise RuntimeError(f"VTK could not write {path}")


def file_step_bytes(series: str) -> int:
    """Bytes of one step of ``series`` as its file holds it, read by VTK (pyvista): points, cell
    connectivity, offsets and types, the polyhedra's face stream and face locations, point fields.
    A polyhedral file's mesh is several times that of the same cells as hexahedra (``step_bytes``):
    6 faces of 4 corners, or 12 triangles, listed for every cell beside its corner list."""
    import glob

    import pyvista

    grid = pyvista.read(sorted(glob.glob(os.path.join(series, "*.vtu")))[0])
    arrays = [grid.points, grid.cell_connectivity, grid.cell_offsets, grid.celltypes,
              *grid.point_data.values(), *grid.cell_data.values()]
    faces = grid.GetPolyhedronFaces(), grid.GetPolyhedronFaceLocations()
    total = sum(np.asarray(a).nbytes for a in arrays)
    for cell_array in faces:
        if cell_array is not None:  # connectivity and offsets of VTK's cell arrays
            total += 8 * (cell_array.GetNumberOfConnectivityIds() + cell_array.GetNumberOfOffsets())
    return int(total)


def _one_odd_cell(mesh):
    """The mesh's hexahedra as polyhedra, the first cell's bottom face (z lowest: on the boundary of
    the grid) as two triangles."""
    import pyvista

    from phasegauge.model.cells import FACES

    conn = mesh.blocks[0].connectivity
    faces = FACES["hexahedron"]
    per_cell = 1 + sum(1 + len(f) for f in faces)
    rows = np.column_stack([np.full(len(conn), per_cell), np.full(len(conn), len(faces))]
                           + [c for f in faces for c in (np.full(len(conn), len(f)), *(conn[:, i] for i in f))])
    a, b, c, d = conn[0, list(faces[0])]  # (0, 3, 2, 1): the bottom face, outward
    first = [per_cell + 3, len(faces) + 1, 3, a, b, c, 3, a, c, d] + rows[0, 7:].tolist()  # after the first face
    stream = np.concatenate([first, rows[1:].ravel()]).astype(np.int64)
    types = np.full(len(conn), pyvista.CellType.POLYHEDRON, dtype=np.uint8)
    return pyvista.UnstructuredGrid(stream, types, mesh.points)


def _triangulated(mesh):
    """The mesh's hexahedra as polyhedra of 12 triangles: each quad face cut along the diagonal from
    its lowest point number (so both cells on a face cut it alike)."""
    import pyvista

    from phasegauge.model.cells import FACES

    conn = mesh.blocks[0].connectivity
    n = len(conn)
    columns = [np.full(n, 1 + 12 * 4), np.full(n, 12)]
    for face in FACES["hexahedron"]:
        loop = conn[:, list(face)]
        first = np.argmin(loop, axis=1)
        a, b, c, d = (loop[np.arange(n), (first + j) % 4] for j in range(4))
        for tri in ((a, b, c), (a, c, d)):
            columns += [np.full(n, 3), *tri]
    stream = np.column_stack(columns).ravel().astype(np.int64)
    return pyvista.UnstructuredGrid(stream, np.full(n, pyvista.CellType.POLYHEDRON, dtype=np.uint8), mesh.points)


def _band(mesh, share: float = 0.2):
    """The mesh's hexahedra as polyhedra, the faces between the x-layers of a band of about ``share`` of
    the cells (through the middle) as two triangles each, cut alike from both sides."""
    import pyvista

    from phasegauge.model.cells import FACES

    conn = mesh.blocks[0].connectivity
    n_cells = len(conn)
    layers = int(round(n_cells ** (1.0 / 3.0)))
    lo, hi = mesh.points[:, 0].min(), mesh.points[:, 0].max()
    layer = np.minimum((layers * (mesh.cell_centroids[:, 0] - lo) / (hi - lo)).astype(int), layers - 1)
    first = int(round(layers * (0.5 - share / 2)))
    last = first + max(1, int(round(layers * share))) - 1  # faces between layers first..last cut
    faces = FACES["hexahedron"]
    plus, minus = faces.index((1, 2, 6, 5)), faces.index((3, 0, 4, 7))  # the +x and -x faces
    cut = np.zeros((n_cells, len(faces)), dtype=bool)
    cut[:, plus] = (layer >= first) & (layer < last)
    cut[:, minus] = (layer > first) & (layer <= last)
    sizes = np.where(cut, 8, 5)  # a face's entries: 4 and its corners, or 3, a, b, c, 3, a, c, d
    length = 2 + sizes.sum(axis=1)  # each cell's: its length and face count, then its faces
    start = np.concatenate([[0], np.cumsum(length + 1)[:-1]])  # (the cell's length before it)
    stream = np.empty(int((length + 1).sum()), dtype=np.int64)
    stream[start] = length
    stream[start + 1] = len(faces) + cut.sum(axis=1)
    at = start + 2
    for j, face in enumerate(faces):
        loop = conn[:, list(face)]
        whole, split = ~cut[:, j], cut[:, j]
        rows = np.column_stack([np.full(int(whole.sum()), 4), loop[whole]])
        stream[at[whole][:, None] + np.arange(5)] = rows
        q = loop[split]
        low = np.argmin(q, axis=1)
        a, b, c, d = (q[np.arange(len(q)), (low + k) % 4] for k in range(4))
        three = np.full(len(q), 3)
        stream[at[split][:, None] + np.arange(8)] = np.column_stack([three, a, b, c, three, a, c, d])
        at = at + sizes[:, j]
    types = np.full(n_cells, pyvista.CellType.POLYHEDRON, dtype=np.uint8)
    return pyvista.UnstructuredGrid(stream, types, mesh.points)


def job_baseline(folder: str) -> dict:
    import pyvista

    pyvista.OFF_SCREEN = True
    t0 = time.perf_counter()
    per_step = []
    for name in sorted(os.listdir(folder)):
        ts = time.perf_counter()
        grid = pyvista.read(os.path.join(folder, name))
        lo, hi = grid.bounds[0], grid.bounds[1]
        positions = lo + (np.arange(SECTIONS) + 0.5) * (hi - lo) / SECTIONS
        baseline_step(grid, positions)
        per_step.append(time.perf_counter() - ts)
    return {"seconds": time.perf_counter() - t0, "per_step": per_step}


def job_measure(folder: str) -> dict:
    import phasegauge

    t0 = time.perf_counter()
    result = phasegauge.measure(folder, "c", section_axis="x", section_count=SECTIONS)
    return {"seconds": time.perf_counter() - t0, "per_step": [r.seconds for r in result.results],
            "droplets": [int(v) for v in result.steps["droplet_count"]],
            "phase_volume": [float(v) for v in result.steps["phase_volume"]]}


def _child(config: str, folder: str) -> None:
    import psutil
    import pyvista  # noqa: F401  (both read VTK files with it or beside it)

    import_s = 0.0
    if config != "baseline":  # every module the run imports, as the baseline has pyvista
        name = os.path.basename(os.path.normpath(folder))
        import_s = import_run_code(
            f"bench_polyhedra.build(folder, 0.001, 2, names=('polyhedra', {name!r}))[{name!r}]")
    me = psutil.Process()
    base = me.memory_info().rss
    peak = [base]
    done = threading.Event()

    def sample():
        while not done.is_set():
            peak[0] = max(peak[0], me.memory_info().rss)
            done.wait(0.05)

    thread = threading.Thread(target=sample, daemon=True)
    cpu = _cpu_seconds()
    thread.start()
    out = job_baseline(folder) if config == "baseline" else job_measure(folder)
    done.set()
    thread.join()
    out.update({"cpu_seconds": _cpu_seconds() - cpu, "peak": peak[0] - base, "import_seconds": import_s})
    print("RESULT " + json.dumps(out))


def run_child(config: str, folder: str) -> dict:
    env = dict(os.environ)
    # every job (the baseline too) with numpy's huge-page advice as the command sets it (off unless
    # given: NUMPY_MADVISE_HUGEPAGE=1 in this process's environment measures numpy's default)
    env.setdefault("NUMPY_MADVISE_HUGEPAGE", "0")
    src = os.path.join(os.path.dirname(os.path.dirname(os.path.abspath(__file__))), "src")
    env["PYTHONPATH"] = src + os.pathsep + env.get("PYTHONPATH", "")
    proc = subprocess.run([sys.executable, os.path.abspath(__file__), "--child", config, folder],
                          capture_output=True, text=True, env=env)
    for line in proc.stdout.splitlines():
        if line.startswith("RESULT "):
            return json.loads(line[len("RESULT "):])
    raise RuntimeError(f"{config} on {folder} failed:\n{proc.stderr[-3000:]}")


def main(argv=None) -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--sizes", default="0.25", help="millions of cells, comma separated")
    parser.add_argument("--steps", type=int, default=5)
    parser.add_argument("--configs", default=",".join(CONFIGS))
    parser.add_argument("--keep", default=None, help="build the series in this folder and keep them")
    parser.add_argument("--child", nargs=2, help=argparse.SUPPRESS)
    args = parser.parse_args(argv)
    if args.child:
        _child(*args.child)
        return
    folder = args.keep or tempfile.mkdtemp(prefix="pg-bench-poly-")
    configs = [c for c in args.configs.split(",") if c]
    print(f"series in {folder}; {os.cpu_count()} cores", flush=True)
    for millions in (float(s) for s in args.sizes.split(",") if s):
        info = build(folder, millions, args.steps)
        print(f"\n{info['cells']} cells, {info['points']} points, {info['steps']} steps", flush=True)
        for name in ("polyhedra", "hexahedra"):  # untimed read: every job finds the files cached
            for f in sorted(os.listdir(info[name])):
                with open(os.path.join(info[name], f), "rb") as handle:
                    while handle.read(1 << 24):
                        pass
        res = {}
        for config in configs:
            res[config] = run_child(config, info["hexahedra" if config == "hexahedra" else "polyhedra"])
            out = res[config]
            print(f"  {config:9s} {out['seconds']:8.2f} s (cpu {out['cpu_seconds']:.1f})  first step {out['per_step'][0]:.2f} s  later steps "
                  f"{np.median(out['per_step'][1:] or out['per_step']):.2f} s  peak "
                  f"{out['peak'] / info['step_bytes']:.1f}x step", flush=True)
        poly, hexa, base = res.get("polyhedra"), res.get("hexahedra"), res.get("baseline")
        if poly and base:
            print(f"  measure / baseline on polyhedra: {poly['seconds'] / base['seconds']:.2f}")
        if poly and hexa:
            later = [np.median(r["per_step"][1:] or r["per_step"]) for r in (poly, hexa)]
            print(f"  polyhedra / hexahedra per cell-step after the first: {later[0] / later[1]:.2f}; "
                  f"first step {poly['per_step'][0] / hexa['per_step'][0]:.2f}; "
                  f"us per cell-step {1e6 * later[0] / info['cells']:.2f} / {1e6 * later[1] / info['cells']:.2f}")
            print(f"  droplets {poly['droplets']} / {hexa['droplets']}; phase volume relative difference "
                  f"{max(abs(a - b) / b for a, b in zip(poly['phase_volume'], hexa['phase_volume'])):.1e}")
    if not args.keep:
        import shutil

        shutil.rmtree(folder, ignore_errors=True)


if __name__ == "__main__":
    main()
