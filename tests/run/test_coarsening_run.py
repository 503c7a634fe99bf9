"""measure --coarsening on a self-similar pattern growing as t^(1/3) (Lifshitz & Slyozov 1961)."""

import os

import numpy as np
import pytest

from phasegauge import measure
from phasegauge.meshgen import grid_mesh, to_meshio


def test_coarsening_finding_and_plot(tmp_path):
    folder = tmp_path / "run"
    folder.mkdir()
    mesh = grid_mesh((128, 128))
    x, y = mesh.cell_centroids.T
    periods = np.array([8, 6, 4, 3, 2])
    listing = []
    for i, m in enumerate(periods):
        k = 2 * np.pi * m
        c = 0.5 * (1 + np.tanh(3 * (np.cos(k * x) + np.cos(k * y) + 0.7 * np.cos(k * (x + y)))))
        t = (periods[0] / m) ** 3
        to_meshio(mesh, cell_data={"c": c}).write(str(folder / f"s_{i}.vtu"))
        listing.append(f"{float(t)!r},run/s_{i}.vtu")
    (tmp_path / "steps.csv").write_text("\n".join(listing) + "\n")
    out = tmp_path / "out"
    result = measure(str(tmp_path / "steps.csv"), field="c", coarsening=True, out=str(out), analyses=("interface",))
    note = next(f for f in result.findings if f.kind == "coarsening")
    assert note.figures["exponent"] == pytest.approx(1 / 3, abs=0.02)
    assert os.path.exists(out / "coarsening.png")
