"""Widths with data on cells: the threshold-free width integrates the cell values.

Outside check: exact cell averages of the logistic profile c = 1/2 (1 + tanh(x / (2 eps)))
(Olsson & Kreiss 2005; its integral is eps ln(1 + e^(x/eps))), whose 5-95 % thickness is
2 ln 19 eps = 5.889 eps [calc, REFERENCES.md].
"""

import numpy as np
import pytest

from phasegauge.analysis.interface import interface_metrics
from phasegauge.io._meshio_adapter import StepFields
from phasegauge.meshgen import grid_mesh
from phasegauge.model.indicator import make_indicator

EPS = 0.02


def _cell_average_profile(cells_per_eps):
    h = EPS / cells_per_eps
    n = int(round(1 / h))
    mesh = grid_mesh((n, 8), bounds=[(0, 1), (0, 8 / n)])
    x = mesh.cell_centroids[:, 0]

    def antiderivative(t):
        return EPS * np.logaddexp(0.0, (t - 0.5) / EPS)

    c = (antiderivative(x + h / 2) - antiderivative(x - h / 2)) / h
    return mesh, make_indicator(mesh, StepFields(cell_data={"c": c}), "c", range=(0, 1))


@pytest.mark.parametrize("cells_per_eps, tolerance", [(4, 0.002), (2, 0.005), (1, 0.02)])
def test_threshold_free_width_on_cell_values_within_tolerance(cells_per_eps, tolerance):
    mesh, ind = _cell_average_profile(cells_per_eps)
    m = interface_metrics(mesh, ind)
    exact = 2 * np.log(19) * EPS
    assert abs(m["width_threshold_free"] / exact - 1) < tolerance
    # the point-value band width keeps the bias the column states (within a factor 1.5)
    bias = m["interface_width"] / exact - 1
    assert m["width_cell_data_bias"] == pytest.approx(bias, rel=0.5)


def test_point_data_has_no_cell_data_bias():
    mesh = grid_mesh((50, 4), bounds=[(0, 1), (0, 0.08)])
    c = 0.5 * (1 + np.tanh((mesh.points[:, 0] - 0.5) / (2 * EPS)))
    m = interface_metrics(mesh, c)
    assert np.isnan(m["width_cell_data_bias"])
