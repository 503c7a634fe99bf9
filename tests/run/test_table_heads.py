"""Every per-step table of a measure run starts with the columns ``step, time``.

convergence.csv and campaign.csv are not per step (one row per quantity and time, one per run).
"""

import os

import numpy as np
import pandas as pd

from phasegauge import measure
from phasegauge.io import read_line_file, read_measured_file, read_probe_file
from phasegauge.meshgen import grid_mesh, to_meshio


def test_every_table_starts_step_time(tmp_path):
    mesh = grid_mesh((16, 16), kind="quad")
    x, y = mesh.cell_centroids[:, 0], mesh.cell_centroids[:, 1]
    lines = []
    for k in range(3):  # one disc that splits in two: breakup events
        gap = 0.1 * k
        c = np.zeros(mesh.n_cells)
        for cx in (0.5 - 0.12 - gap / 2, 0.5 + 0.12 + gap / 2):
            c = np.maximum(c, (np.hypot(x - cx, y - 0.5) < 0.15).astype(float))
        c[(abs(x - 0.5) < 0.12 - gap) & (abs(y - 0.5) < 0.05)] = 1.0
        to_meshio(mesh, cell_data={"alpha": c}).write(tmp_path / f"s_{k}.vtu")
        lines.append(f"{0.5 * k},s_{k}.vtu")
    (tmp_path / "run.steps").write_text("\n".join(lines) + "\n")
    out = tmp_path / "out"
    (tmp_path / "probes.csv").write_text("name,x,y\nmid,0.5,0.5\n")
    (tmp_path / "lines.csv").write_text("name,x0,y0,x1,y1,points\nacross,0,0.5,1,0.5,5\n")
    (tmp_path / "measured.csv").write_text("x,y,value,time\n0.5,0.5,1,0.25\n0.2,0.2,0,\n")
    measure(str(tmp_path / "run.steps"), "alpha", out=out, section_axis="x", section_count=4, contours=False,
            probes=read_probe_file(str(tmp_path / "probes.csv")), lines=read_line_file(str(tmp_path / "lines.csv")),
            measured=read_measured_file(str(tmp_path / "measured.csv")))
    tables = [name for name in sorted(os.listdir(out)) if name.endswith(".csv")]
    assert {"steps.csv", "droplets.csv", "events.csv", "profiles.csv", "probes.csv", "lines.csv", "validation.csv",
            "validation_summary.csv"} <= set(tables)
    for name in tables:
        assert list(pd.read_csv(out / name).columns[:2]) == ["step", "time"], name


def test_compare_tables_start_step_time(tmp_path):
    from phasegauge.run.compare import RunSpec, compare_runs

    mesh = grid_mesh((12, 12), kind="quad")
    x, y = mesh.cell_centroids[:, 0], mesh.cell_centroids[:, 1]
    for k in range(2):
        for name, r in (("a", 0.2), ("b", 0.22)):
            c = (np.hypot(x - 0.5, y - 0.5) < r + 0.02 * k).astype(float)
            to_meshio(mesh, cell_data={"alpha": c}, field_data={"TimeValue": np.array([0.1 * k])}).write(
                tmp_path / f"{name}_{k}.vtu")
    out = tmp_path / "cmp"
    compare_runs(RunSpec(str(tmp_path / "a_*.vtu"), "alpha", label="a"),
                 RunSpec(str(tmp_path / "b_*.vtu"), "alpha", label="b"), out=out)
    tables = [name for name in sorted(os.listdir(out)) if name.endswith(".csv")]
    assert {"comparison.csv", "pairs.csv", "droplet_statistics.csv", "steps_a.csv"} <= set(tables)
    for name in tables:
        if name != "reference_checks.csv":  # one row per check, not per step
            assert list(pd.read_csv(out / name).columns[:2]) == ["step", "time"], name
