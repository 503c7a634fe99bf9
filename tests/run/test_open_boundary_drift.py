"""An open domain's phase volume is judged by what the flow through its boundaries does not account for.

Outside checks: the phase flux u A c through an inlet and an outlet of a uniform flow (elementary
kinematics); a front carried one cell per output by that flow conserves the phase exactly; the
Taylor-Green vortex has u.n = 0 on every wall of the unit box (analytic), so no phase crosses
them; point values averaged from the cells as a writer does (pyvista's ``cell_data_to_point_data``)
[lib].
"""

import numpy as np
import pytest

from conftest import write_listing
from phasegauge import measure
from phasegauge.meshgen import grid_mesh

U, N = 2.0, 20
H = 1.0 / N


def _channel(folder, fields, times):
    """A [0, 2] x [0, 1] channel of quads, uniform u = (U, 0) on the cells, ``fields`` c per step."""
    mesh = grid_mesh((2 * N, N), ((0, 2), (0, 1)), kind="quad")
    u = np.tile([U, 0.0, 0.0], (mesh.n_cells, 1))
    return write_listing(str(folder), [(t, f"s_{k}.vtu", mesh, {"c": c(mesh.cell_centroids), "U": u})
                                       for k, (t, c) in enumerate(zip(times, fields))])


def _kinds(result):
    return {f.kind: f for f in result.findings}


def test_a_steady_field_the_flow_does_not_feed_is_a_loss(tmp_path):
    # c = 0.8 before x = 1, 0.3 after, the same at every output: U (0.8 - 0.3) = 1.0 phase volume per
    # time enters and nothing builds up; the raw drift is 0, the loss -1.0 t / V0 (V0 = 1.1)
    times = [H / U * k for k in range(6)]
    listing = _channel(tmp_path, [lambda x: np.where(x[:, 0] < 1, 0.8, 0.3)] * 6, times)
    found = _kinds(measure(listing, "c", velocity="U", analyses=("conservation",)))
    drift = found["phase_volume_drift"]
    assert drift.severity == "warning" and "not accounted for by the flow" in drift.text
    assert drift.figures["signed_drift_closed"] == pytest.approx(-1.0 * times[-1] / 1.1, rel=1e-9)
    assert drift.figures["largest_drift"] == pytest.approx(0.0, abs=1e-12)
    assert "open_boundary" in found


def test_a_front_the_flow_carries_is_no_drift_however_much_comes_in(tmp_path):
    # the front at x = 0.5 + k h, carried one cell per output (dt = h / U): conserved, though the
    # phase volume grows by U dt per output (a tenth of V0 each)
    times = [H / U * k for k in range(6)]
    fields = [lambda x, k=k: (x[:, 0] < 0.5 + k * H).astype(float) for k in range(6)]
    found = _kinds(measure(_channel(tmp_path, fields, times), "c", velocity="U", analyses=("conservation",)))
    assert "phase_volume_drift" not in found
    note = found["open_boundary"]
    assert note.severity == "note" and "the flow through them accounts for it" in note.text
    # 5 cells of 0.05 against the largest phase volume, 0.75 (an open domain's grows with its inflow: audit
    # 13 read a flux error of a share of what came in as hundreds of per cent of a first step of a trace)
    assert note.figures["largest_drift"] == pytest.approx(0.25 / 0.75, rel=1e-9)
    assert note.figures["largest_drift_closed"] < 1e-12


def test_a_channel_that_starts_empty_is_judged_against_its_largest_phase_volume(tmp_path):
    # empty at t = 0, then a front carried at half the flow's speed: half of what came in is lost
    times = [H / U * k for k in range(7)]
    fields = [lambda x, k=k: (x[:, 0] < 0.5 * k * H).astype(float) * (k > 0) for k in range(7)]
    result = measure(_channel(tmp_path, fields, times), "c", velocity="U", analyses=("conservation",))
    assert np.isnan(result.steps["phase_volume_drift"]).all()  # relative to 0: no column value
    drift = _kinds(result)["phase_volume_drift"]
    assert "the largest phase volume, 0.15: the first step holds none" in drift.text
    # at the end 0.15 in the channel; in came 0.225 (the inlet column holds phase from the third
    # output on: U c = 2 per time, its first interval half by the trapezoid): (0.15 - 0.225) / 0.15
    assert drift.figures["largest_drift_closed"] == pytest.approx(0.5, rel=1e-9)


def test_walls_of_point_velocities_averaged_from_the_cells_stay_closed(tmp_path):
    pv = pytest.importorskip("pyvista")
    from phasegauge.meshgen import to_meshio

    mesh = grid_mesh((N, N), kind="quad")
    x, y = mesh.cell_centroids.T
    u = np.column_stack([np.sin(np.pi * x) * np.cos(np.pi * y), -np.cos(np.pi * x) * np.sin(np.pi * y), 0 * x])
    grid = pv.from_meshio(to_meshio(mesh, cell_data={"U": u}))
    points = np.asarray(grid.cell_data_to_point_data().point_data["U"])  # [lib]
    c = ((x < 0.15) & (y > 0.3) & (y < 0.6)).astype(float)  # a drop on the left wall
    listing = write_listing(str(tmp_path), [(0.1 * k, f"s_{k}.vtu", mesh, {"c": c}, {"U": points}) for k in range(4)])
    result = measure(listing, "c", velocity="U", analyses=("conservation",))
    assert "phase_volume_drift" not in _kinds(result)
    assert np.abs(result.steps["boundary_phase_outflow"]).max() < 1e-12


def test_a_flow_that_changes_too_much_between_outputs_is_not_judged(tmp_path):
    # the inlet column holds phase at every other output only: the rate at the inlet alternates 0 and
    # U c = 2, so integrating it between outputs may miss as much as everything that came in
    times = [0.05 * k for k in range(7)]
    fields = [lambda x, k=k: (((x[:, 0] > 0.5) & (x[:, 0] < 1.0)) | ((x[:, 0] < H) & bool(k % 2))).astype(float)
              for k in range(7)]
    found = _kinds(measure(_channel(tmp_path, fields, times), "c", velocity="U", analyses=("conservation",)))
    assert "phase_volume_drift" not in found
    note = found["phase_volume_not_judged"]
    assert note.severity == "note" and note.figures["integration_allowance"] >= note.figures["largest_drift_closed"]


def test_a_warning_from_point_velocities_says_what_walls_can_do(tmp_path):
    # the Taylor-Green box with point velocities averaged from the cells and a drop in a corner, where
    # the flow along the wall vanishes: the corner's walls still read open (a false flux); the
    # warning says why it may be false
    pv = pytest.importorskip("pyvista")
    from phasegauge.meshgen import to_meshio

    mesh = grid_mesh((N, N), kind="quad")
    x, y = mesh.cell_centroids.T
    u = np.column_stack([np.sin(np.pi * x) * np.cos(np.pi * y), -np.cos(np.pi * x) * np.sin(np.pi * y), 0 * x])
    points = np.asarray(pv.from_meshio(to_meshio(mesh, cell_data={"U": u})).cell_data_to_point_data().point_data["U"])
    c = ((x < 0.15) & (y < 0.3)).astype(float)
    listing = write_listing(str(tmp_path), [(0.1 * k, f"s_{k}.vtu", mesh, {"c": c}, {"U": points}) for k in range(4)])
    drift = _kinds(measure(listing, "c", velocity="U", analyses=("conservation",)))["phase_volume_drift"]
    assert "the velocity is on points (no cell copy)" in drift.text and "write the velocity on cells" in drift.text


def test_a_channel_that_fills_is_judged_against_its_largest_phase_volume():
    # audit 13: the same 1 % flux error read "+2.5 %" in a channel that starts a fifth full and "+199 %" in
    # one that starts with a trace. Phase enters at 2 per unit time into a channel holding a trace (5e-4),
    # and 0.003 is lost by the end: -0.003 against the largest phase volume (0.1505 - 0.003), not the trace
    import pandas as pd

    from phasegauge.analysis.conservation import drift_columns
    from phasegauge.run._drift_findings import drift_findings
    from phasegauge.run.options import MeasureOptions

    t = np.array([0.0, 0.025, 0.05, 0.075])
    volume = 5e-4 + 2.0 * t - np.array([0.0, 0.0, 0.0, 0.003])
    steps = drift_columns(pd.DataFrame({"time": t, "phase_volume": volume, "open_boundary": True,
                                        "boundary_phase_outflow": -2.0}))
    (drift, _) = drift_findings(steps, MeasureOptions(field="c"), True, 0.0)
    assert drift.kind == "phase_volume_drift" and "the largest phase volume, 0.1475" in drift.text
    assert drift.figures["signed_drift_closed"] == pytest.approx(-0.003 / volume.max(), rel=1e-9)


def test_an_open_domain_over_numbered_steps_is_not_judged(tmp_path):
    # review 52: files that store no time are numbered 0, 1, 2 ..., and the boundary flow (a rate per unit
    # time) was integrated over step numbers: a conserving channel read "-589 % lost"
    from phasegauge.meshgen import to_meshio

    mesh = grid_mesh((2 * N, N), ((0, 2), (0, 1)), kind="quad")
    u = np.tile([U, 0.0, 0.0], (mesh.n_cells, 1))
    for k in range(5):  # the front carried one cell per output: conserved [elementary kinematics]
        c = (mesh.cell_centroids[:, 0] < 0.5 + k * H).astype(float)
        to_meshio(mesh, cell_data={"c": c, "U": u}).write(tmp_path / f"s_{k}.vtu")
    result = measure(tmp_path, "c", velocity="U", analyses=("conservation",))
    found = _kinds(result)
    assert "phase_volume_drift" not in found
    assert "the steps store no times" in found["phase_volume_not_judged"].text
    assert "phase_volume_drift_closed" not in result.steps
