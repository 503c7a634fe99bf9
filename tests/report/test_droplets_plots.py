"""Plots of droplet counts and sizes: figures are built, marked and saved without a display."""

import matplotlib

matplotlib.use("Agg")

import numpy as np  # noqa: E402
import pandas as pd  # noqa: E402
import pytest  # noqa: E402
from matplotlib.figure import Figure  # noqa: E402

from phasegauge.errors import OptionError  # noqa: E402
from phasegauge.report._plots_droplets import plot_droplet_count, plot_size_distribution  # noqa: E402


@pytest.fixture
def tables():
    rows = []
    for step, count in enumerate([1, 1, 2, 2, 3, 1]):
        for k in range(count):
            rows.append({"step": step, "time": 0.5 * step, "track": k, "equivalent_diameter": 0.1 / (k + 1),
                         "volume": 0.01 / (k + 1) ** 2})
    droplets = pd.DataFrame(rows)
    events = pd.DataFrame({"time": [1.0, 2.0, 2.5], "step": [2, 4, 5],
                           "kind": ["breakup", "breakup", "coalescence"], "before": ["0", "0", "0 1 2"],
                           "after": ["0 1", "0 2", "0"], "volume_before": [1.0, 1.0, 1.0],
                           "volume_after": [1.0, 1.0, 1.0], "closure_error": [0.0, 0.0, 0.0]})
    return droplets, events


def test_count_plot_from_droplets_and_from_steps(tables, tmp_path):
    droplets, events = tables
    fig = plot_droplet_count(droplets, events)
    assert isinstance(fig, Figure)
    labels = [t.get_text() for t in fig.axes[0].get_legend().get_texts()]
    assert labels == ["droplets", "breakup (2)", "coalescence (1)"]
    line = fig.axes[0].lines[0]
    np.testing.assert_array_equal(line.get_ydata(), [1, 1, 2, 2, 3, 1])
    fig.savefig(tmp_path / "count.png")
    assert (tmp_path / "count.png").stat().st_size > 0
    steps = pd.DataFrame({"step": [0, 1, 2], "time": [0.0, 1.0, 2.0], "droplet_count": [0, 2, 1]})
    np.testing.assert_array_equal(plot_droplet_count(steps).axes[0].lines[0].get_ydata(), [0, 2, 1])


def test_size_distribution_plot(tables, tmp_path):
    droplets, _ = tables
    fig = plot_size_distribution(droplets)
    ax = fig.axes[0]
    assert ax.get_ylabel() == "equivalent diameter (mesh units)"
    median = ax.lines[0]
    np.testing.assert_allclose(median.get_ydata()[-2], 0.1 / 2)  # sizes 0.1, 0.05, 0.0333: median 0.05
    fig.savefig(tmp_path / "sizes.png")
    plot_size_distribution(droplets, column="volume")


def test_plot_errors_name_the_missing_columns(tables):
    with pytest.raises(OptionError, match="neither a 'droplet_count' column"):
        plot_droplet_count(pd.DataFrame({"x": [1]}))
    with pytest.raises(OptionError, match="needs columns 'time' and 'diameter'"):
        plot_size_distribution(tables[0], column="diameter")
