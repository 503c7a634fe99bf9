"""Tracking with a velocity over steps that store no times (audit 14)."""

import warnings

import numpy as np

from phasegauge import measure
from phasegauge.meshgen import grid_mesh, to_meshio


def _moving_disc(folder, *, listing):
    # a disc of radius 0.08 carried at u = 0.5 along x, 0.05 per output of 0.1 (a third of its diameter):
    # one drop, one track, no event [the scenario as built]
    folder.mkdir()
    mesh = grid_mesh((100, 50), bounds=((0.0, 1.0), (0.0, 0.5)))
    centre = mesh.cell_centroids
    u = np.tile([0.5, 0.0, 0.0], (mesh.n_cells, 1))
    for k in range(5):
        c = (np.hypot(centre[:, 0] - 0.2 - 0.05 * k, centre[:, 1] - 0.25) < 0.08).astype(float)
        to_meshio(mesh, cell_data={"alpha": c, "U": u}).write(folder / f"out_{k}.vtu")
    if listing:
        (folder / "run.steps").write_text("".join(f"{0.1 * k},out_{k}.vtu\n" for k in range(5)))
        return folder / "run.steps"
    return folder


def test_a_velocity_over_numbered_steps_is_not_used_to_move_the_drops(tmp_path):
    # audit 14: the files store no time, so dt = 1 (a step number) and each drop was moved by 0.5, ten
    # times its motion: every step read as a disappearance and an appearance, and the warning advised
    # writing output more often
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        result = measure(_moving_disc(tmp_path / "numbered", listing=False), "alpha", velocity="U",
                         analyses=("droplets",))
    assert result.droplets["track"].nunique() == 1 and len(result.events) == 0
    assert any("the velocity cannot move the drops between outputs" in str(w.message) for w in caught)
    # with the steps' times the velocity moves them, and the drop keeps its one track
    timed = measure(_moving_disc(tmp_path / "timed", listing=True), "alpha", velocity="U", analyses=("droplets",))
    assert timed.droplets["track"].nunique() == 1 and len(timed.events) == 0


def _pinch_off():
    """A drop with a tail and bulb moving at 0.9 (the tail region at 0.3), then at t = 0.1 the drop 0.09
    on and the bulb pinched off as a satellite 0.03 on: the mesh, the cell velocity and the two fields."""
    mesh = grid_mesh((200, 100), bounds=((0.0, 1.0), (0.0, 0.5)))
    x, y = mesh.cell_centroids[:, 0], mesh.cell_centroids[:, 1]
    u = np.zeros((mesh.n_cells, 3))
    u[:, 0] = np.where(x > 0.25, 0.9, 0.3)
    disc = lambda cx: np.hypot(x - cx, y - 0.25) < 0.05  # noqa: E731
    bulb = lambda cx: np.hypot(x - cx, y - 0.25) < 0.0125  # noqa: E731
    first = disc(0.30) | bulb(0.20) | ((x > 0.2) & (x < 0.26) & (np.abs(y - 0.25) < 0.005))
    return mesh, u, (first, disc(0.39) | bulb(0.23))


def test_a_satellite_that_lags_its_drop_is_a_breakup_with_the_velocity(tmp_path):
    # audit 14: at pinch-off the tail moves slower than the drop (u = 0.3 there, 0.9 in the drop); each
    # cell was moved by the drop's mean velocity, so the satellite's old cells landed ten cells ahead of
    # it and it read as an appearance, no breakup. Each cell moved by its own velocity finds it [the
    # scenario as built: one drop with a tail and bulb, then the drop and a satellite]
    folder = tmp_path / "pinch"
    folder.mkdir()
    mesh, u, steps = _pinch_off()
    for k, c in enumerate(steps):
        to_meshio(mesh, cell_data={"alpha": c.astype(float), "U": u}).write(folder / f"p_{k}.vtu")
    (folder / "run.steps").write_text("0.0,p_0.vtu\n0.1,p_1.vtu\n")
    result = measure(folder / "run.steps", "alpha", velocity="U", analyses=("droplets",))
    kinds = result.events["kind"].tolist()
    assert "breakup" in kinds and "appearance" not in kinds, result.events


def test_a_confined_drop_that_jumps_between_outputs_is_warned_of(tmp_path):
    # audit 14: a drop filling the gap between a channel's two walls (as in a microchannel) touches the
    # domain's box on both sides of z, and was left out of the check as if leaving through an outlet: a
    # jump of more than its diameter between outputs gave made-up disappearances and appearances, no word
    folder = tmp_path / "gap"
    folder.mkdir()
    mesh = grid_mesh((60, 30, 3), bounds=((0.0, 1.0), (0.0, 0.5), (0.0, 0.05)))
    x, y = mesh.cell_centroids[:, 0], mesh.cell_centroids[:, 1]
    for k in range(4):
        c = (np.hypot(x - 0.2 - 0.2 * k, y - 0.25) < 0.08).astype(float)  # jumps 0.2, its diameter 0.16
        to_meshio(mesh, cell_data={"alpha": c}).write(folder / f"g_{k}.vtu")
    (folder / "run.steps").write_text("".join(f"{0.1 * k},g_{k}.vtu\n" for k in range(4)))
    result = measure(folder / "run.steps", "alpha", analyses=("droplets",))
    assert "tracking_unreliable" in [f.kind for f in result.findings], result.events


def test_drops_side_by_side_in_shear_keep_their_tracks(tmp_path):
    # review 52: with every cell moved by its own velocity, two drops at rest on the centre line of a
    # shear flow u_x = y, 0.01 apart, written every 2 strain units, smeared onto each other: a made-up
    # complex event. They do not move [the scenario as built: identical at both steps]: two tracks, no event
    folder = tmp_path / "shear"
    folder.mkdir()
    mesh = grid_mesh((200, 100), bounds=((0.0, 2.0), (-0.5, 0.5)))
    x, y = mesh.cell_centroids[:, 0], mesh.cell_centroids[:, 1]
    u = np.zeros((mesh.n_cells, 3))
    u[:, 0] = y
    c = ((np.hypot(x - 0.895, y) < 0.1) | (np.hypot(x - 1.105, y) < 0.1)).astype(float)
    for k in range(2):
        to_meshio(mesh, cell_data={"alpha": c, "U": u}).write(folder / f"s_{k}.vtu")
    (folder / "run.steps").write_text("0.0,s_0.vtu\n2.0,s_1.vtu\n")
    result = measure(folder / "run.steps", "alpha", velocity="U", analyses=("droplets",))
    assert result.droplets["track"].nunique() == 2 and len(result.events) == 0, result.events


def test_the_python_tracker_takes_the_cells_velocities(tmp_path):
    # review 52: the Python API moved cells by the drop's mean alone, so the lagging satellite was still an
    # appearance there; add(cell_velocity=) finds the breakup as the run does
    from phasegauge.analysis.droplets import label_droplets
    from phasegauge.analysis.tracking import DropletTracker

    mesh, u, steps = _pinch_off()
    tracker = DropletTracker()
    for k, c in enumerate(steps):
        found = label_droplets(mesh, c.astype(float), velocity=u)
        tracker.add(k, 0.1 * k, mesh, found, cell_velocity=u)
    _, events = tracker.result()
    assert "breakup" in events["kind"].tolist()
