"""The rising-bubble checks of a compare run on exact cell fractions of an analytic bubble: the bubble's
resolution decides whether its circularity is judged, a run in the x-z plane reads as the x-y one, and a run
whose outputs were lost (files truncated, so skipped) is not judged across the gap; a quadtree (two levels,
refined about the interface, as a quadtree solver writes it) is judged by its finest cells, as quads.

Outside reference: the analytic bubble of conftest, an ellipse of area pi R^2 (R = 0.25) in the 1 x 2 box
(Hysing et al. 2009, case 1 geometry), aspect k(t) = 1 + (k1 - 1) exp(-((t - 1.9) / 0.7)^2) with k1 chosen
(scipy brentq) so that its circularity 2 pi R / (4 a E(1 - b^2/a^2)) (scipy ellipe) is 0.9013 at t = 1.9;
rising at V(t) = 0.2417 (t / 0.92)^p exp(p (1 - t / 0.92)) with p chosen so that 0.5 + int_0^3 V = 1.081
(scipy quad).
"""

import meshio
import numpy as np
import pandas as pd
import pytest
from conftest import BUBBLE_RADIUS, bubble_aspect, bubble_centre, bubble_velocity, ellipse_circularity

from phasegauge.analysis.references import NOT_APPLICABLE
from phasegauge.meshgen import grid_mesh
from phasegauge.run.compare import RunSpec, compare_runs

R = BUBBLE_RADIUS


def _write(folder, times, nx, *, plane="xy", sub=16, lost=()):
    """Exact cell fractions (sub x sub samples a cell) of the bubble on nx x 2nx quads, velocity (0, V) along the
    rise, as a 2D run in ``plane``; a 'time,path' listing; the files at the ``lost`` times cut in half."""
    folder.mkdir()
    mesh = grid_mesh((nx, 2 * nx), [(0, 1), (0, 2)], kind="quad")
    h = 1.0 / nx
    offsets = (np.arange(sub) + 0.5) / sub * h - 0.5 * h
    dx, dy = (a.ravel() for a in np.meshgrid(offsets, offsets))
    x, y = mesh.cell_centroids[:, :1] + dx, mesh.cell_centroids[:, 1:2] + dy
    rise = 1 if plane == "xy" else 2
    points = np.zeros((len(mesh.points), 3))
    points[:, 0], points[:, rise] = mesh.points[:, 0], mesh.points[:, 1]
    quads = np.concatenate([b.connectivity for b in mesh.blocks])
    lines = ["time,path"]
    for k, t in enumerate(times):
        a, b = R * np.sqrt(bubble_aspect(t)), R / np.sqrt(bubble_aspect(t))
        yc = bubble_centre(t)
        c = (((x - 0.5) / a) ** 2 + ((y - yc) / b) ** 2 < 1).mean(axis=1)
        u = np.zeros((mesh.n_cells, 3))
        u[:, rise] = bubble_velocity(t)
        path = folder / f"b_{k:03d}.vtu"
        meshio.write(path, meshio.Mesh(points, [("quad", quads)], cell_data={"alpha": [c], "U": [u]}))
        if np.any(np.isclose(t, lost)):
            path.write_bytes(path.read_bytes()[: path.stat().st_size // 2])
        lines.append(f"{t},{path.name}")
    (folder / "run.csv").write_text("\n".join(lines) + "\n")
    return str(folder / "run.csv")


def _quadtree(folder, times, nx, sub=16):
    """The bubble's exact cell fractions (sub x sub samples a cell) on a two-level quadtree over [0, 1] x [0, 2]:
    cells of h = 1 / nx within 3 coarse cells of the interface at some output, 2h elsewhere (hanging points at
    the level change); velocity (0, V); a 'time,path' listing."""
    folder.mkdir()
    h, cells = 1.0 / nx, []
    shapes = [(bubble_aspect(t), bubble_centre(t)) for t in times]
    for j in range(nx):
        for i in range(nx // 2):
            cx, cy = (2 * i + 1) * h, (2 * j + 1) * h
            near = any(abs(np.hypot((cx - 0.5) / np.sqrt(k), (cy - yc) * np.sqrt(k)) - R) < 6 * h for k, yc in shapes)
            cells += [(2 * i + di, 2 * j + dj, 1) for dj in (0, 1) for di in (0, 1)] if near else [(2 * i, 2 * j, 2)]
    cells = np.array(cells)
    ids = {}
    quads = [[ids.setdefault(p, len(ids)) for p in ((i, j), (i + s, j), (i + s, j + s), (i, j + s))]
             for i, j, s in cells]
    points = np.c_[np.array(list(ids), dtype=float) * h, np.zeros(len(ids))]
    offsets = (np.arange(sub) + 0.5) / sub
    dx, dy = (a.ravel() for a in np.meshgrid(offsets, offsets))
    x, y = (cells[:, :1] + cells[:, 2:] * dx) * h, (cells[:, 1:2] + cells[:, 2:] * dy) * h
    lines = ["time,path"]
    for k, t in enumerate(times):
        a, b = R * np.sqrt(bubble_aspect(t)), R / np.sqrt(bubble_aspect(t))
        c = (((x - 0.5) / a) ** 2 + ((y - bubble_centre(t)) / b) ** 2 < 1).mean(axis=1)
        u = np.zeros((len(cells), 3))
        u[:, 1] = bubble_velocity(t)
        meshio.write(folder / f"b_{k:03d}.vtu", meshio.Mesh(points, [("quad", np.array(quads))],
                                                            cell_data={"alpha": [c], "U": [u]}))
        lines.append(f"{t},b_{k:03d}.vtu")
    (folder / "run.csv").write_text("\n".join(lines) + "\n")
    return str(folder / "run.csv")


def _checks(path, other=None, **kw):
    result = compare_runs(RunSpec(path, "alpha", velocity="U", label="a"), RunSpec(other or path, "alpha", label="b"),
                          rising_bubble=True, **kw)
    return result.reference_checks.set_index("quantity"), result


@pytest.mark.filterwarnings("ignore")
@pytest.mark.parametrize("nx", [40, 80])  # the bubble 10 and 20 cells in radius
def test_exact_cell_fractions_are_not_failed_for_their_resolution(tmp_path, nx):
    times = np.round(np.arange(1.6, 2.2 + 1e-9, 0.1), 10)
    checks, result = _checks(_write(tmp_path / "run", times, nx))
    row = checks.loc["min:circularity"]
    measured = result.first.droplets.groupby("time")["circularity"].min()
    bias = measured.loc[1.9] - ellipse_circularity(bubble_aspect(1.9))
    if nx == 40:
        # the measured circularity reads +0.0034 high at t = 1.9 (0.34 (h/R)^2 = 0.0034), above the band's top
        # 0.9033: it read fail before; now not applicable, naming the resolution and the fix
        assert 0.0025 < bias < 0.0036, bias
        assert row["verdict"] == NOT_APPLICABLE
        assert "10.0 cells in radius" in row["note"] and "finer mesh" in row["note"]
    else:
        assert 0.0004 < bias < 0.001, bias  # 0.34 (h/R)^2 = 0.00085, under a quarter of the band (our threshold)
        assert row["verdict"] == "pass"
        assert row["value"] == pytest.approx(0.9013, abs=0.001)
    assert checks.loc["time_of_min:circularity", "verdict"] == "pass"


@pytest.mark.filterwarnings("ignore")
@pytest.mark.parametrize("nx", [80, 120])  # the bubble 20 and 30 finest cells in radius
def test_a_quadtree_is_judged_by_the_cells_the_interface_crosses(tmp_path, nx):
    # read as "cells off a regular grid" (a bias of -0.0081 claimed) with the coarse cells' median size (15.0
    # cells in radius at nx = 120): min:circularity was never judged
    times = np.round(np.arange(1.6, 2.2 + 1e-9, 0.1), 10)
    checks, result = _checks(_quadtree(tmp_path / "run", times, nx))
    measured = result.first.droplets.groupby("time")["circularity"].min()
    bias = measured.loc[1.9] - ellipse_circularity(bubble_aspect(1.9))
    assert -0.001 < bias < 0.0005, bias  # measured: -0.0001 at 20 cells, -0.0007 at 30 (ellipe, above)
    row = checks.loc["min:circularity"]
    assert row["verdict"] == "pass", row["note"]
    assert row["value"] == pytest.approx(0.9013, abs=0.001)


def test_axis_aligned_squares_are_told_from_triangles_and_distorted_quads():
    from phasegauge.run._compare_references import _axis_aligned_squares

    for kind, jitter, squares in (("quad", 0.0, True), ("triangle", 0.0, False), ("quad", 0.2, False)):
        mesh = grid_mesh((8, 16), [(0, 1), (0, 2)], kind=kind, jitter=jitter)
        assert _axis_aligned_squares(mesh, np.arange(mesh.n_cells)) is squares, kind


@pytest.mark.filterwarnings("ignore")
def test_a_run_in_the_xz_plane_reads_as_the_xy_run(tmp_path):
    times = np.round(np.arange(0.0, 3.0 + 1e-9, 0.2), 10)
    xy, _ = _checks(_write(tmp_path / "xy", times, 32))
    xz, _ = _checks(_write(tmp_path / "xz", times, 32, plane="xz"))
    pd.testing.assert_frame_equal(xy, xz)
    assert xy.loc["centroid_y", "verdict"] == "pass"  # analytic 1.081
    assert xy.loc["max:velocity_y", "verdict"] == "pass"  # analytic 0.2417 at t = 0.92
    assert xy.loc["max:velocity_y", "value"] == pytest.approx(0.2417, abs=0.002)
    assert xy.loc["centroid_y", "value"] == pytest.approx(1.081, abs=0.002)


@pytest.mark.filterwarnings("ignore")
def test_a_run_with_lost_outputs_is_not_judged_across_the_gap(tmp_path):
    times = np.round(np.arange(0.0, 3.0 + 1e-9, 0.1), 10)
    lost = times[(times > 0.95) & (times < 2.05)]  # t = 1.0 ... 2.0: files cut in half, so skipped
    whole = _write(tmp_path / "whole", times, 24)
    cut = _write(tmp_path / "cut", times, 24, lost=lost)
    (tmp_path / "ref.csv").write_text(f"quantity,time,value,tolerance\ncircularity,1.5,"
                                      f"{ellipse_circularity(bubble_aspect(1.5)):.6f},0.002\n")
    checks, result = _checks(cut, whole, reference_table=str(tmp_path / "ref.csv"))
    assert len(result.first.skipped) == len(lost)
    for q in ("min:circularity", "time_of_min:circularity", "max:velocity_y", "time_of_max:velocity_y",
              "circularity"):
        assert checks.loc[q, "verdict"] == NOT_APPLICABLE, checks
        assert "its step skipped" in checks.loc[q, "note"]
    assert checks.loc["centroid_y", "verdict"] == "pass"
