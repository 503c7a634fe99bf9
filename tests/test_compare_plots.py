"""Comparison figures build on Agg without error and show what they claim."""

import matplotlib

matplotlib.use("Agg")

import numpy as np  # noqa: E402
import pandas as pd  # noqa: E402
import pytest  # noqa: E402

from phasegauge.analysis.compare import compare_metrics  # noqa: E402
from phasegauge.analysis.references import check_rising_bubble  # noqa: E402
from phasegauge.errors import OptionError  # noqa: E402
from phasegauge.meshgen import grid_mesh  # noqa: E402
from phasegauge.report._plots_compare import (plot_interface_overlay, plot_metric_curves,  # noqa: E402
                                              plot_metric_differences, plot_reference_check,
                                              plot_shape_history)


def _disc(mesh, centre, r, eps=0.02):
    rho = np.linalg.norm(mesh.coordinates - np.asarray(centre), axis=1)
    return 0.5 * (1 - np.tanh((rho - r) / (2 * eps)))


@pytest.mark.parametrize("dim,kinds", [(2, ("quad", "triangle")), (3, ("hexahedron", "tetra"))])
def test_interface_overlay(tmp_path, dim, kinds):
    a = grid_mesh((16,) * dim, kind=kinds[0])
    b = grid_mesh((12,) * dim, kind=kinds[1])
    fig = plot_interface_overlay(a, _disc(a, (0.45,) + (0.5,) * (dim - 1), 0.25), b,
                                 _disc(b, (0.55,) + (0.5,) * (dim - 1), 0.25), title="t = 1")
    ax = fig.axes[0]
    labels = [line.get_label() for line in ax.get_lines()]
    assert labels == ["A", "B"]
    # the circle of A (centre 0.45, r 0.25) reaches x = 0.2 on the plotted (mid) plane
    xa = ax.get_lines()[0].get_xdata()
    assert np.nanmin(xa) == pytest.approx(0.2, abs=0.02)
    fig.savefig(tmp_path / "overlay.png")


def test_metric_and_shape_plots(tmp_path):
    t = np.linspace(0, 1, 6)
    a = pd.DataFrame({"step": range(6), "time": t, "phase_volume": 1 + t, "interface_width": 0.02 + 0 * t})
    b = pd.DataFrame({"step": range(6), "time": t, "phase_volume": 1 + 0.9 * t, "interface_width": 0.01 + 0 * t})
    comparison = compare_metrics(a, b)
    fig = plot_metric_curves(comparison)
    assert [ax.get_title() for ax in fig.axes] == ["phase_volume", "interface_width"]
    fig.savefig(tmp_path / "curves.png")
    fig = plot_metric_differences(comparison, metrics=["phase_volume"], relative=False)
    np.testing.assert_allclose(fig.axes[0].get_lines()[1].get_ydata(), 0.1 * t)
    with pytest.raises(OptionError, match="not in the comparison table"):
        plot_metric_curves(comparison, metrics=["dice"])
    shapes = pd.DataFrame({"time": t, "mismatch_volume": t, "dice": 1 - t / 10, "hausdorff": t / 5})
    assert len(plot_shape_history(shapes).axes) == 3


def test_reference_check_plot(tmp_path):
    t = np.arange(0, 3.01, 0.05)
    bubble = pd.DataFrame({"time": t, "circularity": 1 - 0.1 * np.exp(-((t - 1.9) / 0.6) ** 2),
                           "centroid_y": 0.5 + 0.58 * t / 3, "velocity_y": 0.24 * np.exp(-((t - 0.92) / 0.8) ** 2)})
    fig = plot_reference_check(bubble, check_rising_bubble(bubble))
    assert [ax.get_title() for ax in fig.axes] == ["circularity", "velocity_y", "centroid_y"]
    fig.savefig(tmp_path / "reference.png")
