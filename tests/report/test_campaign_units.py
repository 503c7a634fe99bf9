"""campaign.png labels each panel's y axis with its column's unit, as every other plot does.

The units are those of the quantities: a mixing length is a distance along the channel (a length, in
the unit the mesh coordinates are written in), and a diffusivity is a length squared per unit time (the
variance of a diffusing profile grows as 2 D t: Einstein 1905, Fick's second law); a drift relative to
the first step, a mixing index and a count have none.
"""

import numpy as np
import pandas as pd

from phasegauge.report._campaign_report import plot_campaign


def _panel(figure, title):
    (ax,) = [ax for ax in figure.axes if ax.get_visible() and ax.get_title().startswith(title)]
    return ax


def test_each_campaign_panel_carries_its_unit():
    table = pd.DataFrame({"parameter": [1.0, 2.0, 3.0], "mixing_length": [1.5, 3.1, 4.4],
                          "mixing_index": [0.95, 0.9, 0.8], "phase_volume_drift": [1e-4, 2e-4, 3e-4],
                          "interface_width": [0.05, 0.06, 0.07], "droplet_count": [1, 2, 3],
                          "D_num": [1e-3, 2e-3, 3e-3], "D_num_stderr": [1e-4, 1e-4, 1e-4],
                          "D_num_significant": [True, True, True]})
    figure = plot_campaign(table, parameter="flow_rate", unit="m3/s")
    assert _panel(figure, "mixing length").get_ylabel() == "mixing length (mesh units)"
    assert _panel(figure, "final interface width").get_ylabel() == "final interface width (mesh units)"
    assert _panel(figure, "D_num").get_ylabel() == "numerical diffusivity D_num (mesh units²/run's time units)"
    # dimensionless: no unit
    assert _panel(figure, "final mixing index").get_ylabel() == "final mixing index"
    assert _panel(figure, "final droplet count").get_ylabel() == "final droplet count"
    assert _panel(figure, "final phase-volume drift").get_ylabel() == "final phase-volume drift (relative)"
    assert all(ax.get_xlabel() == "flow_rate (m3/s)" for ax in figure.axes if ax.get_visible())
    assert np.allclose(_panel(figure, "mixing length").lines[0].get_ydata(), table["mixing_length"])
