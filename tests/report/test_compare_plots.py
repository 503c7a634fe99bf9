"""Comparison figures build on Agg without error and show what they claim."""

import matplotlib

matplotlib.use("Agg")

import numpy as np  # noqa: E402
import pandas as pd  # noqa: E402
import pytest  # noqa: E402

from phasegauge.analysis.compare import SamplingGrid, common_grid, compare_metrics, resample_to_grid  # noqa: E402
from phasegauge.analysis.references import check_rising_bubble  # noqa: E402
from phasegauge.errors import OptionError  # noqa: E402
from phasegauge.meshgen import grid_mesh  # noqa: E402
from phasegauge.report._plots_compare import (plot_interface_overlay, plot_metric_curves,  # noqa: E402
                                              plot_metric_differences, plot_reference_check,
                                              plot_shape_history)
from phasegauge.run._compare_steps import overlay_arrays  # noqa: E402


def _disc(mesh, centre, r, eps=0.02):
    rho = np.linalg.norm(mesh.coordinates - np.asarray(centre), axis=1)
    return 0.5 * (1 - np.tanh((rho - r) / (2 * eps)))


@pytest.mark.parametrize("dim,kinds", [(2, ("quad", "triangle")), (3, ("hexahedron", "tetra"))])
def test_interface_overlay(tmp_path, dim, kinds):
    a = grid_mesh((16,) * dim, kind=kinds[0])
    b = grid_mesh((12,) * dim, kind=kinds[1])
    grid = common_grid(a, b)
    values_a = resample_to_grid(a, _disc(a, (0.45,) + (0.5,) * (dim - 1), 0.25), grid)
    values_b = resample_to_grid(b, _disc(b, (0.55,) + (0.5,) * (dim - 1), 0.25), grid)
    drawn = overlay_arrays(values_a, values_b, grid, level=0.5)
    assert drawn["axis_names"] == ("x", "y") and drawn["mismatch"].shape == grid.shape[:2]
    fig = plot_interface_overlay(drawn["mismatch"], drawn["extent"], drawn["segments_a"], drawn["segments_b"],
                                 axis_names=drawn["axis_names"], title="t = 1")
    ax = fig.axes[0]
    labels = [line.get_label() for line in ax.get_lines()]
    assert labels == ["A", "B"]
    # the circle of A (centre 0.45, r 0.25) reaches x = 0.2 on the plotted (mid) plane (analytic)
    xa = ax.get_lines()[0].get_xdata()
    assert np.nanmin(xa) == pytest.approx(0.2, abs=0.02)
    # the discs differ where exactly one holds a point: |x - 0.45|, |x - 0.55| against 0.25 (analytic)
    x = grid.axes[0]
    inside = lambda centre: np.abs(x - centre) < 0.25  # noqa: E731  the line y = 0.5 (and z = 0.5)
    row = drawn["mismatch"][:, int(np.argmin(np.abs(grid.axes[1] - 0.5)))]
    far = np.min(np.abs(x[:, None] - [0.2, 0.3, 0.7, 0.8]), axis=1) > 0.03  # off the circles' edges
    expected = inside(0.45) ^ inside(0.55)
    assert expected[far].sum() >= 2 and np.array_equal(row[far], expected[far])
    fig.savefig(tmp_path / "overlay.png")


def test_overlay_slice_checks():
    grid = SamplingGrid([(0, 1)] * 3, (4, 4, 4))
    values = np.zeros(grid.shape)
    with pytest.raises(OptionError, match="slice_normal must be 0, 1 or 2"):
        overlay_arrays(values, values, grid, slice_normal=3)
    with pytest.raises(OptionError, match="lies outside the grid"):
        overlay_arrays(values, values, grid, slice_position=2.0)
    assert overlay_arrays(values, values, grid, slice_normal=0)["axis_names"] == ("y", "z")


def test_metric_and_shape_plots(tmp_path):
    t = np.linspace(0, 1, 6)
    a = pd.DataFrame({"step": range(6), "time": t, "phase_volume": 1 + t, "interface_width": 0.02 + 0 * t})
    b = pd.DataFrame({"step": range(6), "time": t, "phase_volume": 1 + 0.9 * t, "interface_width": 0.01 + 0 * t})
    comparison = compare_metrics(a, b)
    fig = plot_metric_curves(comparison)
    assert [ax.get_title() for ax in fig.axes] == ["phase volume", "interface width"]  # titles in words
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
    assert [ax.get_title() for ax in fig.axes] == ["circularity", "velocity y", "centroid y"]
    fig.savefig(tmp_path / "reference.png")
