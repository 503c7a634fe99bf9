"""The share of an interface with another interface facing it within the widths' reach (a thin film).

Outside check: the exact solution of the diffusion equation for a slab of half-thickness H started sharp at
t = -0.1, c = 1/2 [erf((x - 1/2 + H) / s) - erf((x - 1/2 - H) / s)], s = sqrt(4 D (t + 0.1)) (Crank, The
Mathematics of Diffusion, 1975, eq. 2.15; from memory); alone, each interface's dc/dn is a normal density of
variance s^2 / 2, which grows by exactly 2 D t. Its slope is fitted by scipy.stats.linregress.
"""

import numpy as np
import pandas as pd
import pytest
from scipy import stats
from scipy.special import erf

from phasegauge.analysis.interface import interface_metrics
from phasegauge.meshgen import grid_mesh
from phasegauge.run._boundary_findings import NEAR_INTERFACE_SHARE, facing_interface_finding

D = 2e-4
TIMES = np.linspace(0.0, 0.5, 6)


def _slab(half):
    mesh = grid_mesh((128, 128))
    x = mesh.coordinates[:, 0]
    rows = []
    for t in TIMES:
        s = np.sqrt(4 * D * (t + 0.1))
        m = interface_metrics(mesh, 0.5 * (erf((x - 0.5 + half) / s) - erf((x - 0.5 - half) / s)))
        rows.append({"time": t, **m})
    steps = pd.DataFrame(rows)
    return steps, stats.linregress(TIMES, steps["interface_variance"]).slope / 2.0  # scipy; grows by 2 D t


def test_a_wide_slab_has_no_facing_interface_and_reads_its_diffusivity():
    steps, fitted = _slab(0.2)
    assert fitted / D == pytest.approx(1.0, abs=0.005)  # the exact solution; 0.5 %: our threshold (now 1.0000)
    assert (steps["interface_near_interface_fraction"] == 0).all()
    assert facing_interface_finding(steps) is None


@pytest.mark.parametrize("half, low", [(0.04, 0.95), (0.03, 0.85)])
def test_a_thin_film_is_flagged_where_its_two_interfaces_cut_each_others_profile(half, low):
    steps, fitted = _slab(half)
    # the distances to the nearest contour cut each profile at the midline: D reads low (now 0.934 and 0.782;
    # the bounds: our thresholds)
    assert fitted / D < low
    share = steps["interface_near_interface_fraction"].to_numpy()
    assert share.max() > 0.95 and share[0] == 0  # both interfaces within reach of each other at the end only
    found = facing_interface_finding(steps)
    assert found is not None and found.kind == "interface_near_interface" and found.severity == "warning"
    assert found.figures["threshold"] == NEAR_INTERFACE_SHARE
    assert "cut halfway" in found.text and "read low" in found.text
    assert facing_interface_finding(steps, kind="sharp") is None  # a sharp interface has no profile to cut


def test_the_far_side_of_a_drop_smaller_than_the_reach_faces_it():
    # a logistic drop of radius 6 cells, eps 1.5 cells: its diameter lies within the reach of ten eps
    mesh = grid_mesh((64, 64))
    r = np.linalg.norm(mesh.coordinates[:, :2] - 0.5, axis=1)
    small = interface_metrics(mesh, 1.0 / (1.0 + np.exp((r - 6 / 64) / (1.5 / 64))))
    large = interface_metrics(mesh, 1.0 / (1.0 + np.exp((r - 24 / 64) / (1.5 / 64))))
    assert small["interface_near_interface_fraction"] > 0.95
    assert large["interface_near_interface_fraction"] == 0
