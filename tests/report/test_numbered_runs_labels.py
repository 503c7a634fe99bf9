"""Runs whose files store no times are drawn against the step number in the campaign, convergence and
reference-check plots too, as in every other plot ("Units on the plots").

Outside check: the step files are written by meshio with no time in them, and VTK (pyvista) reads them with
no ``TimeValue`` field data [lib], so their times can only be step numbers.
"""

import os

import numpy as np
import pandas as pd
import pytest

from phasegauge.meshgen import grid_mesh, to_meshio
from phasegauge.run.options import MeasureOptions


def _numbered(folder, n, steps=3):
    """c = x^2 (1 - k/4) on an n x n quad grid, step k written as s_k.vtu with no time."""
    os.makedirs(folder, exist_ok=True)
    mesh = grid_mesh((n, n), kind="quad")
    x = mesh.cell_centroids[:, 0]
    for k in range(steps):
        to_meshio(mesh, cell_data={"c": x ** 2 * (1 - k / 4)}).write(os.path.join(folder, f"s_{k}.vtu"))
    pyvista = pytest.importorskip("pyvista")
    assert "TimeValue" not in pyvista.read(os.path.join(folder, "s_0.vtu")).field_data  # [lib]
    return os.path.join(folder, "s_*.vtu")


def test_convergence_of_numbered_runs_is_drawn_against_the_step(tmp_path, monkeypatch):
    import phasegauge.report._convergence_report as report
    from phasegauge.run.convergence import grid_convergence_run

    labels = []
    drawn = report.plot_convergence

    def kept(*args, **kwargs):
        figure = drawn(*args, **kwargs)
        labels.extend(ax.get_xlabel() for ax in figure.axes)
        return figure

    monkeypatch.setattr(report, "plot_convergence", kept)
    paths = [_numbered(str(tmp_path / name), n) for name, n in (("fine", 16), ("medium", 8), ("coarse", 4))]
    grid_convergence_run(*paths, options=MeasureOptions(field="c", analyses=("conservation",)), out=tmp_path / "conv")
    assert labels and set(labels) == {"step"}


def test_campaign_of_numbered_runs_passes_their_time_origins(tmp_path, monkeypatch):
    import phasegauge.report._campaign_report as report
    from phasegauge.run.campaign import run_campaign

    seen = []
    drawn = report.plot_campaign

    def kept(table, **kwargs):
        seen.append(list(kwargs.get("time_origins", ())))
        return drawn(table, **kwargs)

    monkeypatch.setattr(report, "plot_campaign", kept)
    runs = [{"path": _numbered(str(tmp_path / f"r{k}"), 8), "parameter": float(k), "label": f"r{k}"}
            for k in (1, 2)]
    run_campaign(runs, MeasureOptions(field="c", analyses=("conservation",)), out=tmp_path / "camp",
                 contours=False, snapshots=0)
    assert seen == [["index", "index"]]


@pytest.mark.parametrize("origins, per", [(["index", "index"], "step"), (["file", "file"], "run's time units"),
                                          (["index", "listing"], "run's time units or step")])
def test_campaign_d_num_label_per_step_where_no_run_stores_times(origins, per):
    from phasegauge.report._campaign_report import plot_campaign

    # a diffusivity is a length squared per unit time (Fick's second law): per step where the times are steps
    table = pd.DataFrame({"parameter": [1.0, 2.0], "D_num": [1e-3, 2e-3], "D_num_stderr": [1e-4, 1e-4],
                          "D_num_significant": [True, True]})
    figure = plot_campaign(table, time_origins=origins)
    (ax,) = [ax for ax in figure.axes if ax.get_visible() and ax.get_title() == "D_num"]
    assert ax.get_ylabel() == f"numerical diffusivity D_num (mesh units²/{per})"


def test_reference_check_plot_of_a_numbered_run():
    from phasegauge.analysis.references import check_rising_bubble
    from phasegauge.report._plots_compare import plot_reference_check

    t = np.arange(0, 3.01, 0.05)
    bubble = pd.DataFrame({"time": t, "circularity": 1 - 0.1 * np.exp(-((t - 1.9) / 0.6) ** 2),
                           "centroid_y": 0.5 + 0.58 * t / 3, "velocity_y": 0.24 * np.exp(-((t - 0.92) / 0.8) ** 2)})
    checks = check_rising_bubble(bubble)
    assert {ax.get_xlabel() for ax in plot_reference_check(bubble, checks, time_origin="index").axes} == {"step"}
    assert {ax.get_xlabel() for ax in plot_reference_check(bubble, checks).axes} == {"time (run's time units)"}
