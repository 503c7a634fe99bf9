"""The fixed cost of a run's report: ``write_measure_report`` against plain matplotlib line plots.

Builds (or reuses) the XDMF series of ``bench_measure.py`` (``--kind``, ``--cells`` millions,
``--steps`` steps), measures it once untimed (``phasegauge.measure(path, 'c', section_axis='x')``,
4 interface snapshots) and keeps what the run hands its report (the result tables and
``measure_report_data``). Then times, in rounds (``--repeat``, fastest kept):

* ``report, fresh process``: a child process that has imported phasegauge, pandas and numpy
  (as the run has when its steps are done) writes the whole output folder
  (``write_measure_report``: tables, plots, page, manifest), matplotlib's import included;
* ``baseline, fresh process``: a child with the same imports that imports matplotlib and draws
  as many plain line plots (one line of 20 points, Agg canvas, PNG at the report's 110 dpi,
  written to files) as the report draws figures;
* the same two again in this process, where matplotlib is imported already;
* with ``--fork``, also the fresh-process report with its drawing fork (``report/_drawing.py``) forced off
  and forced on, whatever the machine's load (the report itself forks only where a core is free); the
  CPU seconds of a child include its drawing fork's; with ``--whole-run`` also whole runs (with the
  import thread) with the report's drawing fork forced off and on;
* ``report data``: ``measure_report_data`` (input hashes, snapshots, records) in this process.

With ``--whole-run``, also whole ``measure`` processes on the series (``phasegauge.measure(path, 'c',
out=..., section_axis='x', snapshots=4)`` on each of ``--whole-workers`` (1 and 2), from the interpreter's start to its
exit), with the report's plotting imported on a background thread during the steps (as the run does)
(started whatever the load: the run itself starts it only where a core is free) and without it (the
thread's work replaced by nothing), alternately.

With ``--figures``, also each figure in this process, fastest of ``--repeat`` rounds in CPU seconds:
making all figures (``measure_figures``), then per figure its layout and its drawing with the PNG
encoding (as ``atomic_save_figure`` does them).

Printed: seconds and the ratio report / baseline (the machine's load cancels in the ratio when
both run in the same round). CPU seconds of each child are given beside the wall clock.

Usage::

    PYTHONPATH=src python benchmarks/bench_report.py [--cells 0.25] [--steps 20] [--kind tetra]
        [--repeat 3] [--keep DIR] [--whole-run] [--figures]
"""

from __future__ import annotations

import argparse
import os
import pickle
import shutil
import subprocess
import sys
import tempfile
import time

HERE = os.path.dirname(os.path.abspath(__file__))
DPI = 110


def _prepare(folder: str, kind: str, millions: float, steps: int) -> tuple:
    sys.path.insert(0, HERE)
    import warnings

    from bench_measure import build

    import phasegauge
    from phasegauge.io import open_series
    from phasegauge.run._report_data import measure_report_data

    info = build(folder, kind, millions, steps)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        result = phasegauge.measure(info["path"], "c", section_axis="x", snapshots=4)
    series = open_series(info["path"])
    t0 = time.perf_counter()
    data = measure_report_data(series, result)
    data_seconds = time.perf_counter() - t0
    data.update(started=time.time(), execution={"workers": 1, "scheduler": None, "plot_format": "png"})
    return info, result, data, data_seconds


def write_report(result, data, out: str) -> int:
    """Write the report into a fresh folder ``out``; the number of figures drawn."""
    from phasegauge.report import write_measure_report

    shutil.rmtree(out, ignore_errors=True)
    os.makedirs(out)
    write_measure_report(out, result, **data)
    return sum(1 for name in os.listdir(out) if name.endswith(".png"))


def plain_plots(count: int, out: str) -> None:
    """``count`` plain line plots on the Agg canvas, each saved as a PNG file."""
    import numpy as np
    from matplotlib.backends.backend_agg import FigureCanvasAgg
    from matplotlib.figure import Figure

    os.makedirs(out, exist_ok=True)
    x = np.arange(20.0)
    for k in range(count):
        figure = Figure(figsize=(6.4, 4.0))
        FigureCanvasAgg(figure)
        ax = figure.add_subplot()
        ax.plot(x, np.sqrt(x + k), "-o", markersize=3)
        ax.set_xlabel("time")
        ax.set_ylabel("value")
        figure.savefig(os.path.join(out, f"plot_{k}.png"), dpi=DPI)


def _cpu() -> float:
    """CPU seconds of this process and of its children that have ended (the report's drawing fork)."""
    times = os.times()
    return times.user + times.system + times.children_user + times.children_system


def _child(job: str, pickled: str, out: str, count: str) -> None:
    import numpy  # noqa: F401  (the run has these before its report)
    import pandas  # noqa: F401

    import phasegauge  # noqa: F401
    import phasegauge.report  # noqa: F401

    with open(pickled, "rb") as handle:
        result, data = pickle.load(handle)
    if job in ("report-fork", "report-one"):  # the drawing fork forced on or off, whatever the load
        from phasegauge.report import _drawing

        _drawing.fork_helps = (lambda count: True) if job == "report-fork" else (lambda count: False)
    cpu, t0 = _cpu(), time.perf_counter()
    if job.startswith("report"):
        write_report(result, data, out)
    else:
        plain_plots(int(count), out)
    print(f"{time.perf_counter() - t0:.4f} {_cpu() - cpu:.4f}")


_WHOLE_RUN = """
import os, sys, time, warnings
import phasegauge
import phasegauge.report
import phasegauge.run.executors as executors
import phasegauge.run.measure as run_measure
if sys.argv[3] == "without":
    run_measure._import_drawing = lambda: None
else:  # the thread whatever the machine's load (the run itself starts it only where a core is free)
    run_measure._spare_core = lambda workers, scheduler: True
if sys.argv[5] != "auto":  # the report's drawing fork forced on or off
    from phasegauge.report import _drawing
    _drawing.fork_helps = (lambda count: True) if sys.argv[5] == "on" else (lambda count: False)
marks = {}
run_steps, report = executors.run_steps, phasegauge.report.write_measure_report


def timed(name, function):
    def call(*args, **kwargs):
        t0, c0 = time.perf_counter(), sum(os.times()[:4])  # this process and its reaped children (a drawing fork)
        try:
            return function(*args, **kwargs)
        finally:
            marks[name] = (time.perf_counter() - t0, sum(os.times()[:4]) - c0)
    return call


executors.run_steps = timed("steps", run_steps)
phasegauge.report.write_measure_report = timed("report", report)
with warnings.catch_warnings():
    warnings.simplefilter("ignore")
    phasegauge.measure(sys.argv[1], "c", out=sys.argv[2], section_axis="x", snapshots=4, workers=int(sys.argv[4]),
                       overwrite=True)
print(*marks["steps"], *marks["report"])
"""


def _whole_run(path: str, out: str, preload: str, workers: int, fork: str = "auto") -> tuple:
    """Wall and CPU seconds of a whole measure process (CPU: the child and its forks); then wall and
    CPU seconds of its steps (``run_steps``) and of its report (CPU: the process and the children it
    reaped meanwhile: the step workers, the report's drawing fork)."""
    import resource

    env = dict(os.environ, MPLBACKEND="Agg")
    before = resource.getrusage(resource.RUSAGE_CHILDREN)
    t0 = time.perf_counter()
    done = subprocess.run([sys.executable, "-c", _WHOLE_RUN, path, out, preload, str(workers), fork], env=env,
                          check=True, capture_output=True, text=True)
    wall = time.perf_counter() - t0
    after = resource.getrusage(resource.RUSAGE_CHILDREN)
    cpu = (after.ru_utime - before.ru_utime) + (after.ru_stime - before.ru_stime)
    return (wall, cpu, *(float(v) for v in done.stdout.split()[-4:]))


def _time_figures(result, data, repeat: int) -> None:
    """Print the CPU seconds of making the report's figures, and of laying out and drawing each."""
    from phasegauge.report import _files
    from phasegauge.report._measure_report import measure_figures

    best = {}
    for _ in range(max(1, repeat)):
        cpu = time.process_time()
        figures = measure_figures(result, data["snapshots"])
        best["make all"] = min(best.get("make all", 1e9), time.process_time() - cpu)
        for stem, _caption, figure in figures:
            cpu = time.process_time()
            _files._lay_out_once(figure, DPI)
            middle = time.process_time()
            _files._png_bytes(figure, DPI)
            end = time.process_time()
            best[f"{stem}: layout"] = min(best.get(f"{stem}: layout", 1e9), middle - cpu)
            best[f"{stem}: draw + PNG"] = min(best.get(f"{stem}: draw + PNG", 1e9), end - middle)
    for name, seconds in best.items():
        print(f"figures, {name:38s} {seconds:7.3f} s CPU")


def _run_child(job: str, pickled: str, out: str, count: int) -> tuple:
    env = dict(os.environ, MPLBACKEND="Agg")
    done = subprocess.run([sys.executable, os.path.abspath(__file__), "--child", job, pickled, out, str(count)],
                          capture_output=True, text=True, env=env, check=True)
    wall, cpu = (float(v) for v in done.stdout.split()[-2:])
    return wall, cpu


def main(argv=None) -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--cells", type=float, default=0.25, help="millions of cells")
    parser.add_argument("--steps", type=int, default=20)
    parser.add_argument("--kind", default="tetra", help="tetra, hexahedron or grid (as bench_measure.py)")
    parser.add_argument("--repeat", type=int, default=3)
    parser.add_argument("--keep", default=None, help="build the series in this folder and keep it")
    parser.add_argument("--whole-run", action="store_true",
                        help="also time whole measure processes with and without the background plotting import")
    parser.add_argument("--whole-workers", default="1,2", help="the --workers of the whole runs, comma-separated")
    parser.add_argument("--figures", action="store_true", help="also time each figure in this process")
    parser.add_argument("--fork", action="store_true",
                        help="also the fresh-process report with the drawing fork forced off and on, alternately")
    parser.add_argument("--child", nargs=4, help=argparse.SUPPRESS)
    args = parser.parse_args(argv)
    if args.child:
        _child(*args.child)
        return
    whole_workers = [int(w) for w in args.whole_workers.split(",")]
    folder = args.keep or tempfile.mkdtemp(prefix="pg_bench_report_")
    scratch = tempfile.mkdtemp(prefix="pg_bench_report_out_")
    try:
        info, result, data, data_seconds = _prepare(folder, args.kind, args.cells, args.steps)
        pickled = os.path.join(scratch, "report_input.pkl")
        with open(pickled, "wb") as handle:
            pickle.dump((result, data), handle)
        count = write_report(result, data, os.path.join(scratch, "warmup"))  # also imports matplotlib here
        rows = {}

        def keep(name, value):
            rows.setdefault(name, []).append(value)

        for _ in range(max(1, args.repeat)):
            keep("report, fresh process", _run_child("report", pickled, os.path.join(scratch, "r"), count))
            if args.fork:
                for job, name in (("report-one", "one process"), ("report-fork", "drawing fork")):
                    keep(f"report, fresh process, {name}", _run_child(job, pickled, os.path.join(scratch, "r"), count))
            keep("baseline, fresh process", _run_child("baseline", pickled, os.path.join(scratch, "b"), count))
            cpu, t0 = _cpu(), time.perf_counter()
            write_report(result, data, os.path.join(scratch, "r_here"))
            keep("report, this process", (time.perf_counter() - t0, _cpu() - cpu))
            cpu, t0 = _cpu(), time.perf_counter()
            plain_plots(count, os.path.join(scratch, "b_here"))
            keep("baseline, this process", (time.perf_counter() - t0, _cpu() - cpu))
            if args.whole_run:
                for workers in whole_workers:
                    for preload in ("with", "without"):
                        keep(f"measure -j {workers}, {preload} import thread",
                             _whole_run(info["path"], os.path.join(scratch, "m"), preload, workers))
                    if args.fork:  # the thread on, the report's drawing fork forced off and on
                        for fork in ("off", "on"):
                            keep(f"measure -j {workers}, with import thread, fork {fork}",
                                 _whole_run(info["path"], os.path.join(scratch, "m"), "with", workers, fork))
        best = {name: min(values) for name, values in rows.items()}
        print(f"series: {info['kind']}, {info['cells']} cells, {info['steps']} steps; the report draws {count} figures")
        print(f"report data (input hashes, snapshots): {data_seconds:.3f} s")
        for name, (wall, cpu, *parts) in best.items():
            print(f"{name:38s} {wall:7.3f} s wall  {cpu:7.3f} s CPU"
                  + ("  (steps {:.3f} s wall {:.3f} s CPU, report {:.3f} s wall {:.3f} s CPU)".format(*parts)
                     if parts else ""))
        for where in ("fresh process", "this process"):
            base = best[f"baseline, {where}"]
            for name in [n for n in best if n.startswith(f"report, {where}")]:
                report = best[name]
                print(f"{name} / baseline: {report[0] / base[0]:.2f} (wall)  {report[1] / base[1]:.2f} (CPU)")
        if args.whole_run:
            for workers in whole_workers:
                with_, without = (best[f"measure -j {workers}, {p} import thread"] for p in ("with", "without"))
                print(f"measure -j {workers}, with / without the import thread: {with_[0] / without[0]:.3f} (wall)  "
                      f"{with_[1] / without[1]:.3f} (CPU)")
                for preload in ("with", "without"):
                    runs = rows[f"measure -j {workers}, {preload} import thread"]
                    print(f"  {preload:7s} the thread, each round (wall / CPU s): "
                          + ", ".join(f"{r[0]:.2f} / {r[1]:.2f}" for r in runs))
                for fork in ("off", "on") if args.fork else ():
                    runs = rows[f"measure -j {workers}, with import thread, fork {fork}"]
                    print(f"  drawing fork {fork}: the report inside each run (wall / CPU s): "
                          + ", ".join(f"{r[4]:.3f} / {r[5]:.3f}" for r in runs))
        if args.figures:
            _time_figures(result, data, args.repeat)
    finally:
        shutil.rmtree(scratch, ignore_errors=True)
        if args.keep is None:
            shutil.rmtree(folder, ignore_errors=True)


if __name__ == "__main__":
    main()
