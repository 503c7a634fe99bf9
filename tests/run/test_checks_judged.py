"""A standing check counts as made only where the run judged it, not where its column is present.

Outside checks: an open channel's phase volume changes by what its boundary flow, a rate per unit time,
carries; over steps that store no time that rate cannot be integrated (dimensional analysis), so its
conservation cannot be judged. A field c = 0 everywhere holds no phase: its phase volume is exactly 0
(the integral of 0), it has no interface (c never crosses 1/2) and no droplet. A tanh drop of radius 0.25
held still keeps its phase volume, pi (R^2 + pi^2 w^2 / 3) for a logistic profile of width w (the
Sommerfeld expansion), so its clean run makes every check.
"""

import json

import meshio
import numpy as np

from phasegauge import measure

ROWS = ("interface_widening", "phase_volume_drift", "indicator_bounds", "interface_resolution", "droplet_resolution")


def _quads(nx, ny, lx, ly):
    x, y = np.linspace(0, lx, nx + 1), np.linspace(0, ly, ny + 1)
    xx, yy = np.meshgrid(x, y, indexing="ij")
    points = np.c_[xx.ravel(), yy.ravel(), 0 * xx.ravel()]
    idx = np.arange(points.shape[0]).reshape(nx + 1, ny + 1)
    quads = np.c_[idx[:-1, :-1].ravel(), idx[1:, :-1].ravel(), idx[1:, 1:].ravel(), idx[:-1, 1:].ravel()]
    return points, quads


def _checks(out) -> dict:
    record = json.load(open(out / "manifest.json"))
    return {c["check"]: (c["made"], c["not_made_because"]) for c in record["standing_checks"]}


def test_open_channel_over_numbered_steps_does_not_make_conservation(tmp_path):
    points, quads = _quads(80, 20, 1.0, 0.25)
    centre = points[quads].mean(1)
    for k in range(5):  # a drop carried by u = (1, 0) from the inflow at x = 0 to the outflow at x = 1
        c = 1 / (1 + np.exp((np.hypot(centre[:, 0] - (0.3 + 0.1 * k), centre[:, 1] - 0.125) - 0.07) / 0.01))
        u = np.c_[np.ones(len(c)), 0 * c, 0 * c]
        meshio.write(tmp_path / f"s_{k}.vtu", meshio.Mesh(points, [("quad", quads)], cell_data={"c": [c], "U": [u]}))
    result = measure(str(tmp_path / "s_*.vtu"), "c", out=tmp_path / "out", velocity="U", contours=False, snapshots=0)
    assert any(f.kind == "phase_volume_not_judged" for f in result.findings)
    made, why = _checks(tmp_path / "out")["phase_volume_drift"]
    assert not made and "store no times" in why  # before: made true


def test_a_field_with_no_phase_makes_no_check_that_needs_one(tmp_path):
    points, quads = _quads(64, 64, 1.0, 1.0)
    for k in range(3):
        meshio.write(tmp_path / f"s_{k}.vtu", meshio.Mesh(points, [("quad", quads)],
                                                          point_data={"c": 0.0 * points[:, 0]}))
    result = measure(str(tmp_path / "s_*.vtu"), "c", out=tmp_path / "out", contours=False, snapshots=0)
    assert np.all(result.steps["phase_volume"].to_numpy() == 0)  # the integral of 0
    checks = _checks(tmp_path / "out")
    assert checks["phase_volume_drift"] == (False, "no phase: the phase volume is 0 at every step")
    assert checks["interface_resolution"] == (False, "no interface found at any step")
    assert checks["droplet_resolution"] == (False, "no droplets found")
    assert checks["indicator_bounds"] == (True, "")  # 0 lies in [0, 1]: bounded, judged
    # before: "no flags: phase volume within tolerance, indicator bounded, interface and droplets resolved"
    assert result.standing_checks == json.load(open(tmp_path / "out" / "manifest.json"))["standing_checks"]


def test_a_clean_closed_drop_makes_every_check(tmp_path):
    points, quads = _quads(64, 64, 1.0, 1.0)
    r = np.hypot(points[:, 0] - 0.5, points[:, 1] - 0.5)
    for k in range(5):
        meshio.write(tmp_path / f"s_{k}.vtu", meshio.Mesh(points, [("quad", quads)],
                                                          point_data={"c": 1 / (1 + np.exp((r - 0.25) / 0.015))}))
    result = measure(str(tmp_path / "s_*.vtu"), "c", out=tmp_path / "out", contours=False, snapshots=0)
    # a logistic profile about a circle: pi (R^2 + pi^2 w^2 / 3), the Sommerfeld expansion of the Fermi function's
    # first moment (exact to terms in exp(-R / w))
    area = np.pi * (0.25 ** 2 + np.pi ** 2 * 0.015 ** 2 / 3)
    np.testing.assert_allclose(result.steps["phase_volume"].to_numpy(), area, rtol=1e-3)  # our tolerance: the grid
    assert not result.flags
    assert _checks(tmp_path / "out") == {name: (True, "") for name in ROWS}


def test_a_level_set_does_not_vouch_for_its_indicator_bounds(tmp_path):
    # a signed distance phi = 0.25 - r (values -0.46 to 0.25) leaves [0, 1] by design; the indicator measured
    # from it is its Heaviside (cut-cell fractions), in [0, 1] by construction, so "indicator bounded"
    # judges nothing; the phase volume of the circle is pi 0.25^2 (analytic, within the grid's error)
    points, quads = _quads(64, 64, 1.0, 1.0)
    phi = 0.25 - np.hypot(points[:, 0] - 0.5, points[:, 1] - 0.5)
    for k in range(3):
        meshio.write(tmp_path / f"s_{k}.vtu", meshio.Mesh(points, [("quad", quads)], point_data={"phi": phi}))
    result = measure(str(tmp_path / "s_*.vtu"), "phi", out=tmp_path / "out", level_set=True, contours=False,
                     snapshots=0)
    np.testing.assert_allclose(result.steps["phase_volume"].to_numpy(), np.pi * 0.25 ** 2, rtol=5e-3)
    made, why = _checks(tmp_path / "out")["indicator_bounds"]
    assert not made and "bounded by construction" in why  # before: made, "no flags: ..., indicator bounded, ..."
