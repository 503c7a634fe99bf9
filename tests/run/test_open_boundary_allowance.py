"""What integrating an open domain's boundary flow between outputs, and reading it from the written fields,
may miss: small enough that a leak shows, large enough that a conserving run is not called leaking.

Outside checks: a travelling wave c = 0.5 + 0.4 sin(2 pi (x - t) / 0.8) carried by u = (1, 0) through a
channel [0, 1] x [0, 0.5] conserves exactly, its phase outflow rate is H (c(1, t) - c(0, t)) [analytic],
and scipy's ``quad`` gives the rate's exact time integral, against which the trapezoid's error is measured;
a plug inlet U = 1 across a channel of height H lets in U H of phase [elementary kinematics]; a front or
a drop translated with the flow conserves [elementary kinematics].
"""

import numpy as np
import pandas as pd
import pytest

from conftest import write_listing
from phasegauge import measure
from phasegauge.meshgen import grid_mesh

LENGTH, HEIGHT, WAVELENGTH = 1.0, 0.5, 0.8


def _wave(x, t):
    return 0.5 + 0.4 * np.sin(2 * np.pi * (x - t) / WAVELENGTH)


def _rate(t):
    return HEIGHT * (_wave(LENGTH, t) - _wave(0.0, t))


def _volume(t):
    # H int_0^L c dx [analytic]
    k = 2 * np.pi / WAVELENGTH
    return HEIGHT * (0.5 * LENGTH + 0.4 / k * (np.cos(k * (0.0 - t)) - np.cos(k * (LENGTH - t))))


def _findings(steps):
    from phasegauge.analysis.conservation import drift_columns
    from phasegauge.run._drift_findings import drift_findings
    from phasegauge.run.options import MeasureOptions

    table = drift_columns(pd.DataFrame({"time": steps[0], "phase_volume": steps[1], "open_boundary": True,
                                        "boundary_phase_outflow": steps[2]}))
    return {f.kind: f for f in drift_findings(table, MeasureOptions(field="c"), True, 0.0)}, table


@pytest.mark.parametrize("dt", [0.1, 0.05])
def test_the_allowance_covers_the_trapezoids_error_of_a_resolved_flow_and_no_more(dt):
    # the allowance was half the change of the rate times the interval, summed: 23.6 % of V0 at dt = 0.1
    # (11.8 % at 0.05) against the trapezoid's real error of 1.16 % (0.29 %); now the error term from
    # second differences (twice it: SMOOTH_MARGIN), the first and the last interval at the first-order bound:
    # at least the real error and no more than 10 times it (our threshold; 8.5 and 10 measured: 9.9 % and
    # 2.9 % of V0, so a leak of 1 % an output is still found, the test below)
    from scipy.integrate import quad

    from phasegauge.run._drift_findings import outflow_allowance

    t = np.round(np.arange(0, 1.0001, dt), 10)
    rate = _rate(t)
    _, table = _findings((t, _volume(t), rate))
    exact = np.array([quad(_rate, 0.0, end)[0] for end in t])  # [scipy]
    error = np.abs(table["phase_volume_outflow"].to_numpy() - exact)
    allowance = outflow_allowance(table)
    assert np.all(allowance >= error - 1e-12)
    assert allowance[-1] <= 10.5 * error.max()


@pytest.mark.parametrize("dt, leak", [(0.1, 0.01), (0.05, 0.002)])
def test_a_leak_beside_a_resolved_flow_is_found_and_its_conserving_run_is_quiet(dt, leak):
    # a share ``leak`` of V0 lost at each output (10 % and 4 % in all) read "not judged" behind the
    # first-order allowance; the same run without the leak conserves [analytic]
    t = np.round(np.arange(0, 1.0001, dt), 10)
    volume = _volume(t)
    found, _ = _findings((t, volume, _rate(t)))
    assert "phase_volume_drift" not in found
    found, _ = _findings((t, volume - leak * volume[0] * np.arange(t.size), _rate(t)))
    drift = found["phase_volume_drift"]
    assert drift.figures["signed_drift_closed"] < -0.5 * leak * (t.size - 1)


def test_a_not_judged_resolved_flow_does_not_ask_for_closer_outputs_blindly():
    # the conserving wave at 8 outputs a period leaves 1.1 % (the trapezoid's error): within the error
    # term, whose advice names the trapezoid's own error and its fall with the square of the interval
    from scipy.integrate import quad

    t = np.round(np.arange(0, 1.0001, 0.1), 10)

    exact_outflow = np.array([quad(_rate, 0.0, end)[0] for end in t])  # [scipy]
    volume = _volume(0.0) - exact_outflow
    found, _ = _findings((t, volume, _rate(t)))
    note = found["phase_volume_not_judged"]
    assert "trapezoidal rule's own error" in note.text and "second differences" in note.text


def _channel_points(folder, mesh, fields, times):
    return write_listing(str(folder), [(t, f"s_{k}.vtu", mesh, None, fields(t)) for k, t in enumerate(times)])


def test_the_travelling_wave_on_points_in_files_is_quiet_and_its_leak_is_found(tmp_path):
    mesh = grid_mesh((30, 15), ((0.0, LENGTH), (0.0, HEIGHT)), kind="triangle")
    x = mesh.coordinates[:, 0]
    u = np.tile([1.0, 0.0, 0.0], (len(x), 1))
    times = np.round(np.arange(0, 1.0001, 0.1), 10)
    v0 = _volume(0.0)
    for leak, warned in ((0.0, False), (0.01, True)):
        def fields(t, leak=leak):
            return {"c": _wave(x, t) - round(t / 0.1) * leak * v0 / (LENGTH * HEIGHT), "U": u}
        folder = tmp_path / f"leak_{leak}"
        folder.mkdir()
        result = measure(_channel_points(folder, mesh, fields, times), "c", velocity="U",
                         analyses=("conservation",))
        kinds = {f.kind: f for f in result.findings}
        assert ("phase_volume_drift" in kinds) == warned, [f.text for f in result.findings]


def _fractions(mesh, front):
    # exact cell fractions of x < front on a grid of quads [analytic: the clipped length over the cell's]
    lo = mesh.cell_centroids[:, 0] - 0.5 * _spacing(mesh)
    return np.clip((front - lo) / _spacing(mesh), 0.0, 1.0)


def _spacing(mesh):
    x = np.unique(np.round(mesh.coordinates[:, 0], 12))
    return float(x[1] - x[0])


def test_a_front_reaching_the_outlet_is_no_leak(tmp_path):
    # a sharp front x_f = 0.5 + t carried by u = (1, 0) through [0, 2] x [0, 0.5] reaches the outlet at
    # t = 1.5: the outlet's rate jumps from 0 to U H between two outputs, and the trapezoid gives half an
    # interval's outflow that did not leave (2.5 % of the largest phase volume): not judged, never a leak
    mesh = grid_mesh((80, 20), ((0.0, 2.0), (0.0, 0.5)), kind="quad")
    u = np.tile([1.0, 0.0, 0.0], (mesh.n_cells, 1))
    times = np.round(np.arange(0, 2.0001, 0.1), 10)
    listing = write_listing(str(tmp_path), [(t, f"s_{k}.vtu", mesh, {"c": _fractions(mesh, 0.5 + t), "U": u})
                                            for k, t in enumerate(times)])
    found = {f.kind: f for f in measure(listing, "c", velocity="U", analyses=("conservation",)).findings}
    assert "phase_volume_drift" not in found
    assert "where the rate jumps" in found["phase_volume_not_judged"].text


@pytest.mark.parametrize("location", ["point", "cell"])
def test_a_drop_leaving_at_the_outlet_is_no_leak(tmp_path, location):
    # a diffuse drop of radius 0.2 carried out through x = 2 by u = (1, 0), outputs every 0.1
    mesh = grid_mesh((80, 40), ((0.0, 2.0), (0.0, 1.0)), kind="quad")
    where = mesh.coordinates if location == "point" else mesh.cell_centroids
    u = np.tile([1.0, 0.0, 0.0], (len(where), 1))
    steps = []
    for k, t in enumerate(np.round(np.arange(0, 0.8001, 0.1), 10)):
        fields = {"c": 0.5 * (1 - np.tanh((np.hypot(where[:, 0] - 1.5 - t, where[:, 1] - 0.5) - 0.2) / 0.03)),
                  "U": u}
        steps.append((t, f"s_{k}.vtu", mesh, None, fields) if location == "point" else (t, f"s_{k}.vtu", mesh, fields))
    found = {f.kind for f in measure(write_listing(str(tmp_path), steps), "c", velocity="U",
                                     analyses=("conservation",)).findings}
    assert "phase_volume_drift" not in found


def test_the_travelling_wave_on_cells_is_no_leak(tmp_path):
    # on cells the face takes its cell's c, off the face's by the gradient times the distance (1.2 % of the
    # phase volume by t = 1 here); that share is bounded (boundary_phase_outflow_unknown), not read as lost
    mesh = grid_mesh((60, 30), ((0.0, LENGTH), (0.0, HEIGHT)), kind="triangle")
    x = mesh.cell_centroids[:, 0]
    u = np.tile([1.0, 0.0, 0.0], (mesh.n_cells, 1))
    steps = [(t, f"s_{k}.vtu", mesh, {"c": _wave(x, t), "U": u})
             for k, t in enumerate(np.round(np.arange(0, 1.0001, 0.05), 10))]
    result = measure(write_listing(str(tmp_path), steps), "c", velocity="U", analyses=("conservation",))
    assert "phase_volume_drift" not in {f.kind for f in result.findings}, [f.text for f in result.findings]
    assert (result.steps["boundary_phase_outflow_unknown"] > 0).all()


def _plug_inlet_steps(mesh, times):
    # velocity on points as a converter writes it: the wall points, the inlet's corner points among them,
    # carry the no-slip wall's u = 0, every other point U = (1, 0, 0); the phase enters over the whole
    # inlet behind a front x_f = 0.5 + t (c on points)
    X = mesh.coordinates
    height = X[:, 1].max()
    wall = np.isclose(X[:, 1], 0.0) | np.isclose(X[:, 1], height)
    if X.shape[1] == 3:
        wall |= np.isclose(X[:, 2], 0.0) | np.isclose(X[:, 2], X[:, 2].max())
    u = np.zeros((len(X), 3))
    u[~wall, 0] = 1.0
    return [(t, f"s_{k}.vtu", mesh, None, {"c": 0.5 * (1 - np.tanh((X[:, 0] - 0.5 - t) / 0.04)), "U": u})
            for k, t in enumerate(times)]


@pytest.mark.parametrize("shape, bounds, inflow", [
    ((40, 10), ((0, 2), (0, 0.5)), 0.5),  # U H [elementary kinematics]
    ((160, 40), ((0, 2), (0, 0.5)), 0.5),
    ((40, 10, 10), ((0, 2), (0, 0.5), (0, 0.5)), 0.25),  # U H^2, a square duct
])
def test_a_plug_inlet_beside_no_slip_walls_with_point_velocities_is_not_read_as_a_gain(tmp_path, shape, bounds,
                                                                                       inflow):
    # a finite-volume solver's inlet faces all carry U: its phase inflow is U H (U H^2 in the duct), and the
    # phase volume in the files grows at that rate. The point values fall to 0 over the inlet faces at the
    # walls: the flux reads h / H low (10 % at 10 cells across, 17.5 % in the duct), which read "+6.15 %
    # gained" (+1.54 % at 40 cells, +7.78 % in the duct) with a caveat of "about 1 %". Now the share those
    # faces may miss is bounded and the exact inflow lies within it
    mesh = grid_mesh(shape, bounds)
    times = np.round(np.arange(0, 0.41, 0.1), 10)
    result = measure(write_listing(str(tmp_path), _plug_inlet_steps(mesh, times)), "c", velocity="U",
                     analyses=("conservation",))
    rate = result.steps["boundary_phase_outflow"].to_numpy()
    unknown = result.steps["boundary_phase_outflow_unknown"].to_numpy()
    if len(shape) == 2:  # half a face of h per wall corner is missed: U (H - h) [analytic]
        np.testing.assert_allclose(-rate, inflow * (1 - 1 / shape[1]), rtol=1e-9)
    assert np.all(rate - unknown <= -inflow + 1e-9) and np.all(rate + unknown >= -inflow - 1e-9)
    kinds = {f.kind: f for f in result.findings}
    assert "phase_volume_drift" not in kinds, [f.text for f in result.findings]
    assert "sharing a corner with a wall" in kinds["phase_volume_not_judged"].text


@pytest.mark.parametrize("n", [10, 20])
def test_a_poiseuille_inlet_on_points_keeps_its_flux_and_is_bracketed(n):
    # u = 6 U y (1 - y) (y = Y / H, mean U = 1): U H = 0.5 enters [analytic]; the point values integrate it
    # by the trapezoid, 0.5 (1 - 1 / n^2) [analytic: the trapezoid's error on a parabola], unchanged; the
    # wall faces' bound, at their inner corner's value, holds the exact inflow (wide: 5.4 % at n = 10)
    from phasegauge.analysis.conservation import open_boundary_flux

    mesh = grid_mesh((4 * n, n), ((0, 2), (0, 0.5)))
    X = mesh.coordinates
    y = X[:, 1] / 0.5
    u = np.column_stack([6 * y * (1 - y), 0 * y, 0 * y])
    flux = open_boundary_flux(mesh, u, (X[:, 0] < 1.0).astype(float))
    assert flux["boundary_phase_outflow"] == pytest.approx(-0.5 * (1 - 1 / n ** 2), rel=1e-12)
    assert flux["boundary_phase_outflow"] - flux["boundary_phase_outflow_unknown"] <= -0.5
    assert flux["boundary_phase_outflow_unknown"] == pytest.approx(2 * (0.5 / n) * 3 * (1 / n) * (1 - 1 / n), rel=1e-9)


@pytest.mark.parametrize("start", [0.0, 0.3])
def test_a_rate_decaying_from_the_first_output_is_no_gain(start):
    # a dye gradient flushed out of a channel [0, 2] x [0, 0.5] by a plug flow u = 1: c = e^(-3 (2 - x + t)),
    # the phase volume e^(-3 t) (1 - e^-6) / 6 and the net outflow rate 0.5 e^(-3 t) (1 - e^-6), exactly
    # [analytic], output every 1/6 (two outputs an e-folding). The first interval's curvature is largest where
    # no second difference sees it (the trapezoid's error there 0.82 % of V0 against an allowance of 0.65 %
    # read "+0.815 % gained"): the end intervals take the first-order bound
    t = start + np.round(np.arange(0, 2.0001, 1 / 6), 10)
    rate = 0.5 * np.exp(-3 * t) * (1 - np.exp(-6))
    volume = np.exp(-3 * t) * (1 - np.exp(-6)) / 6
    found, _ = _findings((t, volume, rate))
    assert "phase_volume_drift" not in found
