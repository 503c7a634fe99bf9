"""The second moment over values as written that overshoot the bulks (above 1 on one side, below 0 on the other).

Outside check: an exact solution of the diffusion equation c_t = D c_xx, an erf front plus a Gaussian bump above 1
on its high side and a dip below 0 on its low side (each the heat kernel, its amplitude falling as 1 / sigma while
sigma^2 = sigma0^2 + 2 D t; Crank, The Mathematics of Diffusion, 1975, eqs. 2.6 and 2.14, from memory). Its dc/dx
integrates to 1 and its mean stays put, so its signed variance grows by exactly 2 D t; the numpy quadrature below
checks that on the same profile, and scipy.stats.linregress fits the slope.
"""

import numpy as np
import pytest
from scipy import stats
from scipy.special import erf

from phasegauge.analysis.interface import interface_metrics
from phasegauge.meshgen import grid_mesh

N = 128
H = 1.0 / N
D = 2e-4
TIMES = np.linspace(0.0, 0.5, 6)
S0 = 4 * H  # the erf front's scale at t = 0
A, SIGMA0 = 1.5 * S0, 0.4 * S0  # where the bump and the dip sit, their width at t = 0


def _front(x, t, amplitude):
    n = x - 0.5
    s = np.sqrt(S0 ** 2 + 4 * D * t)
    sigma = np.sqrt(SIGMA0 ** 2 + 2 * D * t)
    lobe = amplitude * SIGMA0 / sigma
    return (0.5 * (1 + erf(n / s))
            + lobe * (np.exp(-(n - A) ** 2 / (2 * sigma ** 2)) - np.exp(-(n + A) ** 2 / (2 * sigma ** 2))))


def _exact_variance(t, amplitude):
    """The signed variance of dc/dx by numpy quadrature (trapezoid) over +-0.3 about the front."""
    x = np.linspace(0.2, 0.8, 200001)
    g = np.gradient(_front(x, t, amplitude), x)
    m0 = np.trapezoid(g, x)
    m1 = np.trapezoid(g * x, x) / m0
    return np.trapezoid(g * x * x, x) / m0 - m1 ** 2


def _meshes():
    return {"quads (the simplex split)": grid_mesh((N, 8), bounds=[(0, 1), (0, 8 * H)]),
            "triangles (their own split)": grid_mesh((N, 8), bounds=[(0, 1), (0, 8 * H)], kind="triangle"),
            "hexahedra (the grid's)": grid_mesh((96, 4, 4), bounds=[(0, 1), (0, 4 / 96), (0, 4 / 96)]),
            "jittered hexahedra (cell by cell)": grid_mesh((96, 4, 4), bounds=[(0, 1), (0, 4 / 96), (0, 4 / 96)],
                                                           jitter=0.2, seed=3)}


def test_the_exact_overshooting_front_grows_by_2_d_t():
    # the reference itself: numpy quadrature of the profile above against the analytic 2 D t
    for amplitude in (0.0, 0.02):
        variances = [_exact_variance(t, amplitude) for t in TIMES]
        assert stats.linregress(TIMES, variances).slope / 2 == pytest.approx(D, rel=1e-3)


@pytest.mark.parametrize("name", list(_meshes()))
@pytest.mark.parametrize("amplitude", [0.01, 0.02])
def test_an_overshoot_above_1_and_below_0_counts_in_the_second_moment(name, amplitude):
    mesh = _meshes()[name]
    x = mesh.coordinates[:, 0]
    variances, top = [], []
    for t in TIMES:
        c = _front(x, t, amplitude)
        top.append(c.max())
        variances.append(interface_metrics(mesh, c)["interface_variance"])
    assert top[0] > 1.002  # the values as written do leave [0, 1]
    fitted = stats.linregress(TIMES, variances).slope / 2
    # within 1 % of the exact D (our threshold; now 0.999-1.000 on every path, before 0.92-0.93 at 0.01 and
    # 0.77-0.82 at 0.02: the cells wholly above 1 or below 0, the overshoot's fall back to its bulk, were left out)
    assert fitted / D == pytest.approx(1.0, abs=0.01)
