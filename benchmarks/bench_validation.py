"""Speed of the validation work (issue 17): probes and lines on a big step, campaigns on workers.

Two parts, both in this one process (ratios against a baseline measured in the same run):

* ``probes``: an XDMF series of tetrahedra (a grid split into six per cube, as
  ``bench_measure.py`` builds it; ``--cells`` millions, default 1) with the moving droplets of
  ``bench_measure.py`` on the points. ``phasegauge.measure`` (every analysis, serial, no output
  folder) runs without and then with ``--probes``/``--lines`` (``--probes-count`` probes and
  ``--lines-count`` lines of ``--line-points`` points, default 1,000, 20 and 100, written as the
  CSV files of the README and read by the readers the command line uses), in ``--repeat`` rounds.
  Printed: the median step after the first of each and their ratio; the sampling's own time per
  step (the step's ``sample_step`` call timed inside the run, so the neighbours' load cancels out
  of the ratio to the step) over the step; and the first step's point location (the first call,
  which builds the sampler once per mesh) apart.
* ``campaign``: ``--runs`` series (default 4) of ``--campaign-cells`` millions of tetrahedra
  (default 0.1) and ``--campaign-steps`` steps (default 5), each with its own droplets. Each run
  alone as a measure recipe (``phasegauge run RUN.toml``), then the campaign recipe with all of
  them (``phasegauge run CAMPAIGN.toml -j 1`` and ``-j 2``). Printed: wall and CPU seconds, the
  campaign over the sum of the single runs, and the 2-worker efficiency ``sum / (2 t_j2)`` (and
  ``t_j1 / (2 t_j2)``); CPU seconds of ``-j 2`` over ``-j 1`` (the cost of going parallel, which
  neighbours on a shared machine do not distort).

Usage::

    PYTHONPATH=src python benchmarks/bench_validation.py [--parts probes,campaign] [--cells 1]
        [--steps 5] [--repeat 2] [--probes-count 1000] [--lines-count 20] [--line-points 100]
        [--runs 4] [--campaign-cells 0.1] [--campaign-steps 5] [--keep DIR] [--json FILE]

About 3 minutes of work at the defaults (mostly the 1M-cell measure runs); the series are built
in a temporary folder first (about a minute for 1M cells) unless ``--keep`` names one that has them.
"""

from __future__ import annotations

import argparse
import os
import sys
import tempfile
import time

import numpy as np

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
from bench_measure import _cpu_seconds, build, droplet_field, finish  # noqa: E402  (the same series as the measure benchmark)

SECTIONS = 20


# ------------------------------------------------------------------ probes and lines
def write_point_files(folder: str, *, probes: int, lines: int, points: int, seed: int = 7) -> tuple[str, str]:
    """Probe and line CSV files (README formats) with points spread over the unit box."""
    rng = np.random.default_rng(seed)
    probe_path = os.path.join(folder, "probes.csv")
    with open(probe_path, "w") as handle:
        handle.write("name,x,y,z\n")
        for k, (x, y, z) in enumerate(rng.uniform(0.02, 0.98, (probes, 3))):
            handle.write(f"p{k:04d},{float(x)!r},{float(y)!r},{float(z)!r}\n")
    line_path = os.path.join(folder, "lines.csv")
    with open(line_path, "w") as handle:
        handle.write("name,x0,y0,z0,x1,y1,z1,points\n")
        for k, ends in enumerate(rng.uniform(0.02, 0.98, (lines, 6))):
            handle.write(f"line{k:02d}," + ",".join(repr(float(v)) for v in ends) + f",{points}\n")
    return probe_path, line_path


class _SamplingClock:
    """Times every ``sample_step`` call of a serial run (the step module's own reference to it)."""

    def __init__(self):
        import phasegauge.run.step as step_module

        self.module = step_module
        self.original = step_module.sample_step
        self.calls: list[float] = []

    def __enter__(self):
        original, calls = self.original, self.calls

        def timed(*args, **kwargs):
            t = time.perf_counter()
            out = original(*args, **kwargs)
            calls.append(time.perf_counter() - t)
            return out

        self.module.sample_step = timed
        return self

    def __exit__(self, *exc):
        self.module.sample_step = self.original


def run_measure(path: str, *, probes=(), lines=()) -> dict:
    import phasegauge

    with _SamplingClock() as clock:
        cpu = _cpu_seconds()
        t0 = time.perf_counter()
        result = phasegauge.measure(path, "c", section_axis="x", section_count=SECTIONS,
                                    probes=probes, lines=lines)
        seconds = time.perf_counter() - t0
        cpu = _cpu_seconds() - cpu
    per_step = [r.seconds for r in result.results]
    out = {"seconds": seconds, "cpu_seconds": cpu, "per_step": per_step, "sampling": list(clock.calls)}
    if result.probes is not None:
        out["probe_rows"] = int(len(result.probes))
        out["probe_nan"] = int(result.probes["value"].isna().sum())
    if result.lines is not None:
        out["line_rows"] = int(len(result.lines))
    return out


def part_probes(args, folder: str) -> dict:
    from phasegauge.io import read_line_file, read_probe_file

    t = time.perf_counter()
    info = build(folder, "tetra", args.cells, args.steps)
    print(f"\nprobes: tetra {info['cells']} cells, {info['points']} points, {info['steps']} steps "
          f"(built in {time.perf_counter() - t:.0f} s)", flush=True)
    probe_path, line_path = write_point_files(os.path.dirname(info["path"]), probes=args.probes_count,
                                              lines=args.lines_count, points=args.line_points)
    probes, lines = read_probe_file(probe_path), read_line_file(line_path)
    runs = {"plain": [], "sampled": []}
    for _ in range(args.repeat):  # rounds of both: a slow spell hits them alike
        runs["plain"].append(run_measure(info["path"]))
        runs["sampled"].append(run_measure(info["path"], probes=probes, lines=lines))
        for name in runs:
            out = runs[name][-1]
            print(f"  {name:8s} {out['seconds']:7.2f} s  cpu {out['cpu_seconds']:7.2f} s  first step "
                  f"{out['per_step'][0]:.2f} s  later steps (median) {np.median(out['per_step'][1:]):.3f} s",
                  flush=True)
    plain_later = float(np.median([s for r in runs["plain"] for s in r["per_step"][1:]]))
    sampled_later = float(np.median([s for r in runs["sampled"] for s in r["per_step"][1:]]))
    plain_first = min(r["per_step"][0] for r in runs["plain"])
    sampled_first = min(r["per_step"][0] for r in runs["sampled"])
    sampling_later = float(np.median([s for r in runs["sampled"] for s in r["sampling"][1:]]))
    location = min(r["sampling"][0] for r in runs["sampled"]) - sampling_later
    row = {"cells": info["cells"], "steps": info["steps"],
           "sampled_points": args.probes_count + args.lines_count * args.line_points,
           "plain_step_s": plain_later, "sampled_step_s": sampled_later,
           "step_ratio": sampled_later / plain_later,
           "sampling_per_step_s": sampling_later,
           "sampling_over_step": sampling_later / plain_later,
           "plain_first_step_s": plain_first, "sampled_first_step_s": sampled_first,
           "point_location_s": location, "point_location_over_step": location / plain_later,
           "plain_cpu_s": min(r["cpu_seconds"] for r in runs["plain"]),
           "sampled_cpu_s": min(r["cpu_seconds"] for r in runs["sampled"])}
    row["cpu_ratio"] = row["sampled_cpu_s"] / row["plain_cpu_s"]
    row["probe_nan"] = runs["sampled"][-1].get("probe_nan")
    print("  " + "  ".join(f"{k}={_fmt(v)}" for k, v in row.items()), flush=True)
    return {"info": info, "runs": runs, "row": row}


# ------------------------------------------------------------------ campaign
def build_campaign(folder: str, *, runs: int, millions: float, steps: int) -> tuple[list, int]:
    """``runs`` series on one tetrahedral mesh, each with its droplets further along their path."""
    import meshio

    from phasegauge.meshgen import grid_mesh

    n = max(4, int(round((millions * 1e6 / 6) ** (1.0 / 3.0))))
    mesh = grid_mesh((n, n, n), kind="tetra", seed=1)
    paths = []
    cwd = os.getcwd()
    for r in range(runs):
        sub = os.path.join(folder, f"campaign_{n}_{steps}", f"run{r}")
        path = os.path.join(sub, "series.xdmf")
        paths.append(path)
        if os.path.exists(path):
            continue
        os.makedirs(sub, exist_ok=True)
        os.chdir(sub)  # meshio's TimeSeriesWriter writes its .h5 into the working folder
        try:
            with meshio.xdmf.TimeSeriesWriter("series.xdmf") as writer:
                writer.write_points_cells(mesh.points, [(b.cell_type, b.connectivity) for b in mesh.blocks])
                for k in range(steps):  # run r starts r steps further along the droplets' path
                    writer.write_data(float(k), point_data={
                        "c": droplet_field(mesh.points, k + r, steps + runs, 1.0 / n)})
        finally:
            os.chdir(cwd)
    return paths, mesh.n_cells


_OPTIONS = ('[mixing]\nsection_axis = "x"\nsection_count = 20\n'
            '[output]\nfolder = "{out}"\noverwrite = true\n')


def _write(path: str, text: str) -> str:
    with open(path, "w") as handle:
        handle.write(text)
    return path


def _run_cli(arguments: list[str]) -> dict:
    from click.testing import CliRunner

    from phasegauge.cli import main

    cpu = _cpu_seconds()
    t0 = time.perf_counter()
    outcome = CliRunner().invoke(main, arguments, catch_exceptions=False)
    seconds = time.perf_counter() - t0
    if outcome.exit_code != 0:
        raise RuntimeError(f"phasegauge {' '.join(arguments)} failed: {outcome.output[-2000:]}")
    return {"seconds": seconds, "cpu_seconds": _cpu_seconds() - cpu}


def part_campaign(args, folder: str) -> dict:
    t = time.perf_counter()
    paths, cells = build_campaign(folder, runs=args.runs, millions=args.campaign_cells, steps=args.campaign_steps)
    base = os.path.dirname(os.path.dirname(paths[0]))
    print(f"\ncampaign: {args.runs} runs of {cells} tetrahedra, {args.campaign_steps} steps "
          f"(built in {time.perf_counter() - t:.0f} s)", flush=True)
    singles = []
    for r, path in enumerate(paths):
        recipe = _write(os.path.join(base, f"single{r}.toml"),
                        f'[input]\npath = "{path}"\nfield = "c"\n' + _OPTIONS.format(out=f"out_single{r}"))
        singles.append(_run_cli(["run", recipe]))
        print(f"  single run {r}   {singles[-1]['seconds']:7.2f} s  cpu {singles[-1]['cpu_seconds']:7.2f} s",
              flush=True)
    runs_text = "".join(f'[[runs]]\npath = "{p}"\nparameter = {r + 1}\nlabel = "r{r}"\n' for r, p in enumerate(paths))
    campaign = _write(os.path.join(base, "campaign.toml"),
                      '[input]\nfield = "c"\n[campaign]\nparameter = "offset"\nunit = "steps"\n'
                      + _OPTIONS.format(out="out_campaign") + runs_text)
    jobs = {}
    for workers in (1, 2):
        jobs[workers] = _run_cli(["run", campaign, "-j", str(workers)])
        print(f"  campaign -j {workers}  {jobs[workers]['seconds']:7.2f} s  cpu {jobs[workers]['cpu_seconds']:7.2f} s",
              flush=True)
    total = sum(s["seconds"] for s in singles)
    total_cpu = sum(s["cpu_seconds"] for s in singles)
    row = {"runs": args.runs, "cells": cells, "steps": args.campaign_steps,
           "singles_sum_s": total, "singles_cpu_s": total_cpu,
           "j1_s": jobs[1]["seconds"], "j2_s": jobs[2]["seconds"],
           "j1_cpu_s": jobs[1]["cpu_seconds"], "j2_cpu_s": jobs[2]["cpu_seconds"],
           "j1_over_sum": jobs[1]["seconds"] / total, "j2_over_sum": jobs[2]["seconds"] / total,
           "j2_over_j1": jobs[2]["seconds"] / jobs[1]["seconds"],
           "efficiency_vs_sum": total / (2 * jobs[2]["seconds"]),
           "efficiency_vs_j1": jobs[1]["seconds"] / (2 * jobs[2]["seconds"]),
           "cpu_j1_over_sum": jobs[1]["cpu_seconds"] / total_cpu,
           "cpu_j2_over_j1": jobs[2]["cpu_seconds"] / jobs[1]["cpu_seconds"]}
    print("  " + "  ".join(f"{k}={_fmt(v)}" for k, v in row.items()), flush=True)
    return {"singles": singles, "jobs": jobs, "row": row}


def _fmt(value) -> str:
    if isinstance(value, float):
        return f"{value:.3g}"
    return str(value)


def main(argv=None) -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--parts", default="probes,campaign", help="from probes, campaign")
    parser.add_argument("--cells", type=float, default=1.0, help="millions of tetrahedra of the probe series")
    parser.add_argument("--steps", type=int, default=5, help="steps of the probe series")
    parser.add_argument("--repeat", type=int, default=2, help="rounds of (without, with) probes and lines")
    parser.add_argument("--probes-count", type=int, default=1000)
    parser.add_argument("--lines-count", type=int, default=20)
    parser.add_argument("--line-points", type=int, default=100)
    parser.add_argument("--runs", type=int, default=4, help="runs of the campaign")
    parser.add_argument("--campaign-cells", type=float, default=0.1, help="millions of tetrahedra per campaign run")
    parser.add_argument("--campaign-steps", type=int, default=5)
    parser.add_argument("--keep", default=None, help="build the series in this folder and keep them")
    parser.add_argument("--json", default=None, help="also write all figures to this JSON file")
    args = parser.parse_args(argv)
    import warnings

    from phasegauge.errors import MeshWarning

    warnings.simplefilter("ignore", MeshWarning)  # the droplets look periodic; probes outside show as probe_nan
    parts = [p for p in args.parts.split(",") if p]
    for p in parts:
        if p not in ("probes", "campaign"):
            parser.error(f"unknown part {p!r}; choose from probes, campaign")
    folder = args.keep or tempfile.mkdtemp(prefix="pg-bench-validation-")
    os.makedirs(folder, exist_ok=True)
    cwd = os.getcwd()
    os.chdir(folder)  # the recipes' output folders land here
    print(f"series in {folder}; {os.cpu_count()} cores", flush=True)
    everything = {}
    try:
        if "probes" in parts:
            everything["probes"] = part_probes(args, folder)
        if "campaign" in parts:
            everything["campaign"] = part_campaign(args, folder)
    finally:
        os.chdir(cwd)
    print("\nsummary (targets: probes and lines <= 1.05 x a step; a campaign on W workers scales like the runs)")
    for name, res in everything.items():
        print(name + ": " + "  ".join(f"{k}={_fmt(v)}" for k, v in res["row"].items()))
    finish(everything, args.json, folder, keep=args.keep)


if __name__ == "__main__":
    main()
