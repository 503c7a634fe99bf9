"""Plots of mixing profiles, phase-volume drift and mixing index."""

import numpy as np
import pandas as pd
import pytest

from phasegauge.errors import OptionError
from phasegauge.meshgen import grid_mesh
from phasegauge.analysis.mixing import cross_sections
from phasegauge.report._plots_mixing import (plot_mixing_index, plot_mixing_profile,
                                             plot_phase_volume_drift)


def test_profile_plot_has_one_curve_per_label(tmp_path):
    mesh = grid_mesh((12, 6))
    x, y = mesh.points[:, 0], mesh.points[:, 1]
    profiles = {f"t = {t}": cross_sections(mesh, 0.5 + (y - 0.5) * np.exp(-t * x), count=6,
                                           velocity=np.ones(mesh.n_points))
                for t in (1.0, 3.0)}
    figure = plot_mixing_profile(profiles, axis_label="x")
    lines = figure.axes[0].get_lines()
    assert len(lines) == 5  # two profiles, each against its own and the inflow mean, and the target line
    np.testing.assert_allclose(lines[0].get_ydata(), profiles["t = 1.0"]["mixing_index_flow"])
    np.testing.assert_allclose(lines[1].get_ydata(), profiles["t = 1.0"]["mixing_index_inflow"])
    assert lines[1].get_color() == lines[0].get_color() and "inflow mean" in lines[1].get_label()
    figure.savefig(tmp_path / "profile.png")
    assert (tmp_path / "profile.png").stat().st_size > 0
    no_flow = {"a": cross_sections(mesh, y, count=3)}
    assert "(area-weighted)" in plot_mixing_profile(no_flow).axes[0].get_lines()[0].get_label()
    with pytest.raises(OptionError, match="weighting must be"):
        plot_mixing_profile(profiles, weighting="mass")


def test_time_plots(tmp_path):
    steps = pd.DataFrame({"step": [0, 1, 2], "time": [0.0, 0.5, 1.0],
                          "phase_volume_drift": [0.0, 1e-3, 2e-3],
                          "phase_volume_drift_closed": [0.0, 0.0, 1e-6],
                          "mixing_index": [0.1, 0.4, 0.6], "mixed_volume_fraction": [0.0, 0.3, 0.5]})
    drift = plot_phase_volume_drift(steps)
    assert len(drift.axes[0].get_lines()) == 3
    mixing = plot_mixing_index(steps)
    np.testing.assert_allclose(mixing.axes[0].get_lines()[0].get_xdata(), steps["time"])
    drift.savefig(tmp_path / "drift.png")
    mixing.savefig(tmp_path / "mixing.png")
    with pytest.raises(OptionError, match="no column 'mixing_index'"):
        plot_mixing_index(steps.drop(columns="mixing_index"))
