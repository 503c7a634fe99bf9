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


@pytest.mark.parametrize("half, low, first", [(0.04, 0.95, 2), (0.03, 0.85, 0)])
def test_a_thin_film_is_flagged_where_its_two_interfaces_cut_each_others_profile(half, low, first):
    steps, fitted = _slab(half)
    # the distances to the nearest contour cut each profile at the midline: D reads low (now 0.934 and 0.782;
    # the bounds: our thresholds)
    assert fitted / D < low
    share = steps["interface_near_interface_fraction"].to_numpy()
    # both interfaces within 1.5 x the reach of each other from step ``first`` on (the thinner from the start)
    assert (share[first:] > 0.95).all() and (share[:first] == 0).all()
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


def _logistic_film_steps(cells):
    # a logistic film `cells` thick on 128 x 32 quads, off the grid's points by 0.37 cells, widening at D:
    # eps^2 = eps0^2 + 6 D t / pi^2, each lone profile's dc/dn a logistic density of variance pi^2 eps^2 / 3
    # (scipy.stats.logistic), which grows by exactly 2 D t
    n = 128
    mesh = grid_mesh((n, 32), bounds=[(0, 1), (0, 32 / n)])
    x = mesh.coordinates[:, 0]
    rows = []
    for t in np.linspace(0.0, 0.5, 11):
        eps = np.sqrt((1.4 / n) ** 2 + 6 * D * t / np.pi ** 2)
        c = 1.0 / (1.0 + np.exp((np.abs(x - 0.5 - 0.37 / n) - cells / n / 2) / eps))
        rows.append({"time": t, **interface_metrics(mesh, c)})
    steps = pd.DataFrame(rows)
    return steps, stats.linregress(steps["time"], steps["interface_variance"]).slope / 2.0  # scipy


@pytest.mark.parametrize("cells, low", [(18, 0.9), (21, 0.95)])
def test_a_logistic_film_whose_profiles_reach_each_other_is_flagged(cells, low):
    # L / eps 12.9 -> 10.5 and 15 -> 12.2 over the run: the logistic's tails reach past the midline, and D reads
    # low (now 0.85 and 0.91, as one logistic profile cut at the midline does: 0.87 and 0.92 by exact 1D moments;
    # the bounds: our thresholds); before, within one reach (a cut within 5 eps) neither was flagged
    steps, fitted = _logistic_film_steps(cells)
    assert fitted / D < low
    assert (steps["interface_near_interface_fraction"] > 0.95).all()
    found = facing_interface_finding(steps)
    assert found is not None and found.kind == "interface_near_interface"
    assert "1.5 x the widths' reach" in found.text


def test_a_film_16_eps_thick_and_an_emulsion_of_resolved_drops_are_not_flagged():
    # a logistic film 16 eps thick (eps 1.5 cells), and a lattice of 25 logistic drops of radius 8 eps whose
    # interfaces lie 16 eps apart, on 256^2 quads: no facing interface within 15 eps (the exact circles: 16 eps)
    n, eps = 128, 1.5 / 128
    mesh = grid_mesh((n, 32), bounds=[(0, 1), (0, 32 / n)])
    x = mesh.coordinates[:, 0]
    film = interface_metrics(mesh, 1.0 / (1.0 + np.exp((np.abs(x - 0.5 - 0.37 / n) - 8 * eps) / eps)))
    assert film["interface_near_interface_fraction"] == 0
    n, eps = 256, 1.5 / 256
    mesh = grid_mesh((n, n))
    radius, step = 8 * eps, 32 * eps
    centres = np.arange(step / 2, 1.0 - step / 2 + 1e-9, step)
    points = mesh.coordinates[:, :2]
    d = np.full(points.shape[0], np.inf)
    for cx in centres:
        for cy in centres:
            d = np.minimum(d, np.hypot(points[:, 0] - cx, points[:, 1] - cy))
    emulsion = interface_metrics(mesh, 1.0 / (1.0 + np.exp((d - radius) / eps)))
    assert centres.size == 5 and emulsion["interface_near_interface_fraction"] == 0
    assert facing_interface_finding(pd.DataFrame([{"time": 0.0, **emulsion}])) is None
