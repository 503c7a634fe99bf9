"""Every per-step table of a measure run starts with the columns ``step, time``."""

import os

import numpy as np
import pandas as pd

from phasegauge import measure
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
    measure(str(tmp_path / "run.steps"), "alpha", out=out, section_axis="x", section_count=4, contours=False)
    tables = [name for name in sorted(os.listdir(out)) if name.endswith(".csv")]
    assert {"steps.csv", "droplets.csv", "events.csv", "profiles.csv"} <= set(tables)
    for name in tables:
        assert list(pd.read_csv(out / name).columns[:2]) == ["step", "time"], name
