"""One table for every cell kind: ``measure`` against the baseline pipeline in the same run.

Runs, one configuration at a time in fresh child processes (the jobs of ``bench_measure.py`` and
``bench_polyhedra.py``, unchanged), the series of both scripts at each size:

* ``tetra``, ``grid``, ``hexahedron``, ``hexahedron-cells``: ``bench_measure.py``'s XDMF series (a
  grid split into tetrahedra, the regular grid of hexahedra, the jittered hexahedra, the same with the
  field on the cells), configurations ``raw``, ``baseline``, ``serial`` and ``serial-warm`` (its peak
  only: the same run after one small run of the kind in its process, see ``bench_measure.py``);
* ``polyhedron``: ``bench_polyhedra.py``'s folder of VTK polyhedra (the jittered hexahedra
  written as polyhedra, which the reader takes as hexahedra), configurations ``baseline``
  (pyvista on the polyhedra) and ``polyhedra`` (``measure``);
* ``polyhedron-mixed``: its ``split`` folder (the same with one cell of another shape, which alone
  is coned into pyramids and tetrahedra, the others read as hexahedra), ``measure`` only, beside the
  same baseline;
* ``polyhedron-band``: its ``band`` folder (a fifth of the cells, a band through the box, no
  ordinary cells: they are coned, the others read as hexahedra), ``measure`` only;
* ``polyhedron-raw``: its ``raw`` folder (the ``polyhedron`` files with their arrays appended as
  raw bytes, not base64 and zlib: VTK reads them about seven times faster), ``measure`` only,
  beside the same baseline (which reads the ``polyhedron`` files);
* ``polyhedron-split``: its ``triangulated`` folder (every face written as two triangles, so no
  cell is an ordinary one and every one is split into tetrahedra, as the ``polyhedron`` rows of
  rounds before the fourteenth and the ``polyhedron-split`` rows of the fourteenth were), ``measure``
  only, beside the same baseline.

and prints one markdown table: wall and CPU seconds of the baseline and of ``measure``, their
ratio, the seconds of importing the modules a ``measure`` run imports (done before the time and
memory reference points since the thirty-second round, as the baseline has pyvista imported; earlier
rounds' ``measure`` seconds and peaks hold them), the first step, the later steps' median,
microseconds per cell-step, peak memory over one step's mesh and fields (the cells as hexahedra or
tetrahedra in XDMF: points, int64 corners, one field), peak memory over one step as the series' own
file holds it (for the polyhedra their face streams too: 4.1x the hexahedra's bytes, 6x where every
face is two triangles), the peak over one step's mesh and fields of a process that ran ``measure``
once before on a small series (the XDMF kinds: without what a first run loads once beyond its
modules), and beside them the previous round's ratio, per cell-step time and peak from
``previous_round.json`` (figures copied from ``RESULTS.md``, each with its section).

Usage::

    PYTHONPATH=src python benchmarks/bench_kinds.py [--sizes 0.25,1,4] [--steps 5]
        [--kinds tetra,grid,hexahedron,polyhedron,polyhedron-mixed,polyhedron-band,polyhedron-split,polyhedron-raw]
        [--skip polyhedron-split:4]
        [--json OUT]

``--skip KIND:SIZE`` leaves a series out (say why in RESULTS.md: the polyhedra at 4M cells need
about 63x a step's bytes, more memory than this machine has).
"""

from __future__ import annotations

import argparse
import json
import os
import shutil
import sys
import tempfile
import time

import numpy as np

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
import bench_measure  # noqa: E402  (the jobs and series of the per-kind benchmarks, unchanged)
import bench_polyhedra  # noqa: E402

HERE = os.path.dirname(os.path.abspath(__file__))
KINDS = ("tetra", "grid", "hexahedron", "hexahedron-cells", "polyhedron", "polyhedron-mixed", "polyhedron-band",
         "polyhedron-split", "polyhedron-raw")
#: the folder of ``bench_polyhedra.py`` each polyhedral kind reads
POLYHEDRAL_SERIES = {"polyhedron": "polyhedra", "polyhedron-mixed": "split", "polyhedron-band": "band",
                     "polyhedron-split": "triangulated", "polyhedron-raw": "raw"}
COLUMNS = ("kind", "cells", "baseline s (cpu)", "measure s (cpu)", "measure / baseline wall (cpu)", "imports s",
           "first step s", "later steps s", "us per cell-step", "peak / step bytes", "peak / the file's step bytes",
           "peak after a small run / step bytes",
           "previous: measure / baseline", "previous: us per cell-step", "previous: peak / step bytes")


def run_measure_kind(folder: str, kind: str, millions: float, steps: int) -> dict:
    """``bench_measure.py``'s baseline and serial jobs on one series; the figures of one row."""
    info = bench_measure.build(folder, kind, millions, steps)
    bench_measure._warm_file_cache(info["path"])
    base = bench_measure.run_child("baseline", info)
    ser = bench_measure.run_child("serial", info)
    warm = bench_measure.run_child("serial-warm", info)
    peak = max(ser["peak_first_half"], ser["peak_second_half"])
    row = _row(kind, info["cells"], base, ser, peak / info["step_bytes"], peak / info["step_bytes"])
    row["peak_x_step_warm"] = max(warm["peak_first_half"], warm["peak_second_half"]) / info["step_bytes"]
    return row


def run_polyhedra(folder: str, millions: float, steps: int, kind: str = "polyhedron", baselines=None) -> dict:
    """``bench_polyhedra.py``'s baseline and measure jobs on the polyhedra (``polyhedron``: hexahedra
    written as polyhedra, read as hexahedra; ``polyhedron-mixed``: one cell of another shape among them;
    ``polyhedron-band``: a fifth of them of another shape; ``polyhedron-split``: every face as two
    triangles, so all are split; ``polyhedron-raw``: the ``polyhedron`` files with raw appended
    arrays); the figures of one row. The baseline runs once per size (``baselines``)."""
    info = bench_polyhedra.build(folder, millions, steps, names=("polyhedra", POLYHEDRAL_SERIES[kind]))
    series = info[POLYHEDRAL_SERIES[kind]]
    baselines = {} if baselines is None else baselines
    if millions not in baselines:
        bench_measure._warm_file_cache(os.path.join(info["polyhedra"], ""))  # the files of that folder
        baselines[millions] = bench_polyhedra.run_child("baseline", info["polyhedra"])
    bench_measure._warm_file_cache(os.path.join(series, ""))
    ser = bench_polyhedra.run_child("polyhedra", series)
    return _row(kind, info["cells"], baselines[millions], ser, ser["peak"] / info["step_bytes"],
                ser["peak"] / bench_polyhedra.file_step_bytes(series))


def _row(kind, cells, base, ser, peak_x, peak_x_file) -> dict:
    """One row; ``peak_x`` against one step of the cells as an XDMF file of hexahedra or tetrahedra holds
    them (points, int64 corners, one field), ``peak_x_file`` against one step as the series' own file
    holds it (the same for the XDMF kinds; for the polyhedra their face streams too)."""
    later = float(np.median(ser["per_step"][1:] or ser["per_step"]))
    return {"kind": kind, "cells": int(cells),
            "baseline_s": base["seconds"], "baseline_cpu": base.get("cpu_seconds", float("nan")),
            "measure_s": ser["seconds"], "measure_cpu": ser.get("cpu_seconds", float("nan")),
            "import_s": ser.get("import_seconds", float("nan")),
            "first_step_s": ser["per_step"][0], "later_step_s": later,
            "us_per_cell_step": 1e6 * later / cells, "peak_x_step": peak_x, "peak_x_file": peak_x_file}


def table(rows, previous) -> str:
    """The markdown table of ``rows`` with the previous round's figures beside them."""
    lines = ["| " + " | ".join(COLUMNS) + " |", "|" + "---|" * len(COLUMNS)]
    for r in rows:
        before = previous.get(r["kind"], {}).get(r["size"], {})
        cells = [r["kind"], f"{r['cells']:,}".replace(",", " "),
                 f"{r['baseline_s']:.2f} ({r['baseline_cpu']:.2f})", f"{r['measure_s']:.2f} ({r['measure_cpu']:.2f})",
                 f"{r['measure_s'] / r['baseline_s']:.2f} ({r['measure_cpu'] / r['baseline_cpu']:.2f})",
                 f"{r.get('import_s', float('nan')):.2f}",
                 f"{r['first_step_s']:.2f}", f"{r['later_step_s']:.3f}", f"{r['us_per_cell_step']:.2f}",
                 f"{r['peak_x_step']:.1f}", f"{r.get('peak_x_file', float('nan')):.1f}",
                 f"{r['peak_x_step_warm']:.1f}" if "peak_x_step_warm" in r else "-"]
        cells += [str(before.get(key, "-")) for key in ("measure_over_baseline", "us_per_cell_step", "peak_x_step")]
        lines.append("| " + " | ".join(cells) + " |")
    return "\n".join(lines)


def main(argv=None) -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--sizes", default="0.25,1,4", help="millions of cells, comma separated")
    parser.add_argument("--steps", type=int, default=5)
    parser.add_argument("--kinds", default=",".join(KINDS), help=f"from {', '.join(KINDS)}")
    parser.add_argument("--skip", default="", help="KIND:SIZE pairs to leave out, comma separated")
    parser.add_argument("--json", default=None, help="also write the rows to this JSON file")
    parser.add_argument("--keep", default=None, help="build the series in this folder and keep them")
    args = parser.parse_args(argv)
    kinds = [k for k in args.kinds.split(",") if k]
    for k in kinds:
        if k not in KINDS:
            parser.error(f"unknown kind {k!r}; choose from {', '.join(KINDS)}")
    skip = {tuple(p.split(":")) for p in args.skip.split(",") if p}
    with open(os.path.join(HERE, "previous_round.json")) as handle:
        previous = json.load(handle)["figures"]
    folder = args.keep or tempfile.mkdtemp(prefix="pg-bench-kinds-")
    os.makedirs(folder, exist_ok=True)
    rows, baselines = [], {}
    for millions in (s for s in args.sizes.split(",") if s):
        for kind in kinds:
            if (kind, millions) in skip:
                print(f"{kind} at {millions}M cells: left out (--skip)", flush=True)
                continue
            start = time.perf_counter()
            sub = os.path.join(folder, f"{kind.split('-')[0]}-{millions}")  # the polyhedral kinds share one folder
            os.makedirs(sub, exist_ok=True)
            row = (run_polyhedra(sub, float(millions), args.steps, kind, baselines) if kind.startswith("polyhedron")
                   else run_measure_kind(sub, kind, float(millions), args.steps))
            row["size"] = millions  # the previous round's figures are keyed by the size asked
            rows.append(row)
            print(f"{kind} {row['cells']} cells: measure / baseline {row['measure_s'] / row['baseline_s']:.2f} "
                  f"(cpu {row['measure_cpu'] / row['baseline_cpu']:.2f}), {row['us_per_cell_step']:.2f} us per "
                  f"cell-step, peak {row['peak_x_step']:.1f}x step ({time.perf_counter() - start:.0f} s)", flush=True)
            later = [k for k in kinds[kinds.index(kind) + 1:] if (k, millions) not in skip]
            shared = kind.startswith("polyhedron") and any(k.startswith("polyhedron") for k in later)
            if not args.keep and not shared:  # a series' files are not needed once its row is measured
                shutil.rmtree(sub, ignore_errors=True)
    print()
    print(table(rows, previous))
    if args.json:
        with open(args.json, "w") as handle:
            json.dump(rows, handle, indent=1)
    if not args.keep:
        shutil.rmtree(folder, ignore_errors=True)


if __name__ == "__main__":
    main()
