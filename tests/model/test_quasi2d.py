"""Quasi-2D meshes (one cell thick) measured per unit depth as 2D.

Outside references: a circle of radius R has perimeter 2 pi R and area pi R^2, and circularity
pi d / P = 1 (Hysing et al. 2009's definition); the same disc on the 2D quad mesh built directly
(meshgen) gives the same tables.
"""

import os

import numpy as np
import pandas as pd
import pytest

from phasegauge import measure
from phasegauge.meshgen import grid_mesh, to_meshio
from phasegauge.model.quasi2d import one_cell_thick

R = 0.25
N = 64


def _disc(mesh):
    # a diffuse disc of radius R about (0.5, 0.5): c = 1/2 (1 - tanh((r - R) / w)), w = 1.5 h
    x, y = mesh.cell_centroids[:, 0], mesh.cell_centroids[:, 1]
    r = np.hypot(x - 0.5, y - 0.5)
    return 0.5 * (1 - np.tanh((r - R) / (1.5 / N)))


@pytest.mark.parametrize("kind,flat_kind", [("hexahedron", "quad"), ("wedge", "triangle")])
def test_one_cell_thick_mesh_becomes_its_face_plane(kind, flat_kind):
    mesh = grid_mesh((8, 6, 1), [(0, 1), (0, 0.75), (0, 0.1)], kind=kind)
    flat = one_cell_thick(mesh)
    direct = grid_mesh((8, 6), [(0, 1), (0, 0.75)], kind=flat_kind)
    assert flat.axis == 2 and flat.depth == pytest.approx(0.1)
    assert flat.record() == {"dimension": 2, "quasi_2d": True, "thin_axis": "z", "depth": pytest.approx(0.1)}
    np.testing.assert_array_equal(flat.mesh.points, direct.points)
    np.testing.assert_array_equal(flat.mesh.blocks[0].connectivity, direct.blocks[0].connectivity)
    # per unit depth: cell volume / depth = cell area [analytic, straight extrusion]
    np.testing.assert_allclose(mesh.cell_measures / flat.depth, flat.mesh.cell_measures, rtol=1e-12)


def test_thin_along_x_and_shifted_planes():
    mesh = grid_mesh((1, 5, 4), [(2.0, 2.05), (0, 1), (0, 1)])
    flat = one_cell_thick(mesh)
    assert flat.axis == 0 and flat.depth == pytest.approx(0.05)
    assert flat.mesh.plane_axes == (1, 2)


@pytest.mark.parametrize("shape,kind", [((4, 4, 2), "hexahedron"), ((4, 4, 1), "tetra"), ((4, 4, 1), "pyramid")])
def test_thicker_or_other_cells_stay_3d(shape, kind):
    assert one_cell_thick(grid_mesh(shape, kind=kind)) is None


def _write(folder, mesh, c, name):
    os.makedirs(folder, exist_ok=True)
    for k in range(2):
        to_meshio(mesh, cell_data={"c": c}, field_data={"TimeValue": np.array([0.5 * k])}).write(
            os.path.join(folder, f"{name}_{k}.vtu"))
    return folder


def test_disc_column_measured_per_unit_depth(tmp_path):
    hexes = grid_mesh((N, N, 1), [(0, 1), (0, 1), (0, 0.02)])
    quads = grid_mesh((N, N))
    a = measure(_write(tmp_path / "column", hexes, _disc(hexes), "column"), "c",
                analyses=("interface", "droplets", "conservation"))
    b = measure(_write(tmp_path / "disc", quads, _disc(quads), "disc"), "c",
                analyses=("interface", "droplets", "conservation"))
    steps = a.steps
    np.testing.assert_allclose(steps["depth"], 0.02, rtol=1e-12)
    # analytic, per unit depth: interface length 2 pi R, one droplet of circularity 1, and the
    # area int c dA = pi R^2 + pi^3 w^2 / 12 of the tanh disc (int_0^inf s (1 - tanh(s/w)) ds =
    # pi^2 w^2 / 24 on each side of r = R) [calc]
    w = 1.5 / N
    assert steps["phase_volume"].iloc[0] == pytest.approx(np.pi * R ** 2 + np.pi ** 3 * w ** 2 / 12, rel=1e-3)
    assert steps["interface_size"].iloc[0] == pytest.approx(2 * np.pi * R, rel=2e-3)
    assert (steps["droplet_count"] == 1).all()
    assert a.droplets["circularity"].iloc[0] == pytest.approx(1.0, abs=5e-3)
    assert a.droplets["sphericity"].isna().all()
    # the same disc on the 2D quad mesh: the same tables, bit for bit
    pd.testing.assert_frame_equal(steps.drop(columns=["depth"]), b.steps, check_exact=True)
    pd.testing.assert_frame_equal(a.droplets, b.droplets, check_exact=True)


def test_keep_3d_measures_the_slab(tmp_path):
    hexes = grid_mesh((16, 16, 1), [(0, 1), (0, 1), (0, 0.1)])
    res = measure(_write(tmp_path / "slab", hexes, _disc(hexes), "slab"), "c", keep_3d=True,
                  analyses=("conservation",))
    assert "depth" not in res.steps
    w = 1.5 / N
    assert res.steps["phase_volume"].iloc[0] == pytest.approx(0.1 * (np.pi * R ** 2 + np.pi ** 3 * w ** 2 / 12),
                                                              rel=2e-2)


def test_inspect_manifest_and_report_say_quasi_2d(tmp_path):
    import json

    from phasegauge.io.describe import describe_series, format_description

    hexes = grid_mesh((16, 16, 1), [(0, 1), (0, 1), (0, 0.05)])
    folder = _write(tmp_path / "slab", hexes, _disc(hexes), "slab")
    desc = describe_series(folder)
    assert desc["quasi_2d"] == {"dimension": 2, "quasi_2d": True, "thin_axis": "z", "depth": pytest.approx(0.05)}
    assert "quasi-2D    one cell thick along z" in format_description(desc)
    out = tmp_path / "out"
    measure(folder, "c", out=out, analyses=("interface", "conservation"))
    manifest = json.load(open(out / "manifest.json"))
    assert manifest["series"]["dimension"] == 2 and manifest["series"]["depth"] == pytest.approx(0.05)
    assert "per unit depth" in open(out / "report.html").read()


def test_column_with_cell_velocity_and_point_data_matches_the_2d_run(tmp_path):
    # a one-cell-thick slab with the indicator on points (both planes alike, as a 2D solver writes
    # it) and a cell velocity with a zero z component: the same tables as the 2D quad mesh
    hexes = grid_mesh((24, 24, 1), [(0, 1), (0, 1), (0, 0.1)])
    quads = grid_mesh((24, 24))

    def write(folder, mesh):
        os.makedirs(folder, exist_ok=True)
        x, y = mesh.points[:, 0], mesh.points[:, 1]
        c = 0.5 * (1 - np.tanh((np.hypot(x - 0.5, y - 0.4) - R) / 0.04))
        cx, cy = quads.cell_centroids[:, 0], quads.cell_centroids[:, 1]  # the same values on both (cell order)
        u = np.stack([np.sin(np.pi * cx) ** 2 * np.sin(2 * np.pi * cy),
                      -np.sin(2 * np.pi * cx) * np.sin(np.pi * cy) ** 2, 0 * cx], axis=1)
        to_meshio(mesh, point_data={"c": c}, cell_data={"U": u}).write(os.path.join(folder, "s.vtu"))
        return os.path.join(folder, "s.vtu")

    a = measure(write(tmp_path / "slab", hexes), "c", velocity="U")
    b = measure(write(tmp_path / "flat", quads), "c", velocity="U")
    pd.testing.assert_frame_equal(a.steps.drop(columns=["depth"]), b.steps, check_exact=True)
    pd.testing.assert_frame_equal(a.droplets, b.droplets, check_exact=True)
    assert not a.steps["open_boundary"].any()  # the front and back planes are gone, the walls closed


def _turned(mesh, degrees):
    """``mesh`` turned about x by ``degrees`` (the rotation matrix of numpy's cos and sin)."""
    from phasegauge.model.mesh import Mesh

    t = np.radians(degrees)
    turn = np.array([[1, 0, 0], [0, np.cos(t), -np.sin(t)], [0, np.sin(t), np.cos(t)]])
    return Mesh(mesh.points @ turn.T, [(b.cell_type, b.connectivity) for b in mesh.blocks]), turn


@pytest.mark.parametrize("kind", ["hexahedron", "wedge"])
def test_a_slab_between_turned_planes_is_measured_as_3d_with_a_warning(kind):
    import warnings

    from phasegauge.errors import MeshWarning
    from phasegauge.model.quasi2d import as_measured, tilted_slab

    slab, turn = _turned(grid_mesh((10, 10, 1), [(0, 1), (0, 1), (0, 0.05)], kind=kind), 30)
    assert one_cell_thick(slab) is None  # axis planes only
    normal, depth = tilted_slab(slab)
    # analytic: the planes' normal is the turned z axis, (0, -sin 30, cos 30); the depth is the extrusion's
    np.testing.assert_allclose(normal, turn @ [0, 0, 1], atol=1e-12)
    assert depth == pytest.approx(0.05, rel=1e-9)
    with pytest.warns(MeshWarning, match=r"one cell thick \(depth 0\.05\) but its two planes are not normal to x, y "
                                         r"or z \(normal 0, -0\.5, 0\.866\): it is measured as 3D.*normal to an axis"):
        assert as_measured(slab) is None
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        assert as_measured(slab, keep_3d=True) is None  # measured as 3D by choice: no word
        # the same slab on axis planes is quasi-2D, and a turned slab two cells thick is plain 3D: no word
        assert as_measured(grid_mesh((10, 10, 1), [(0, 1), (0, 1), (0, 0.05)], kind=kind)) is not None
        thick, _ = _turned(grid_mesh((10, 10, 2), [(0, 1), (0, 1), (0, 0.1)], kind=kind), 30)
        assert tilted_slab(thick) is None and as_measured(thick) is None


def test_a_turned_slab_far_from_the_origin_and_with_unused_points_is_found():
    """The planes' normal is taken from second moments about one of the used points: a slab far from
    the origin (coordinates 1e4 against a depth 0.05) loses no digits, and points no cell uses, far
    off the planes, do not count. Analytic: the turned z axis and the extrusion's depth."""
    from phasegauge.model.mesh import Mesh
    from phasegauge.model.quasi2d import tilted_slab

    slab, turn = _turned(grid_mesh((40, 30, 1), [(0, 1), (0, 0.7), (0, 0.05)]), 30)
    far = slab.points + 1e4
    loose = np.vstack([far, [[3e4, -2e4, 5e4], [1e4, 1e4, 1e4 + 0.5]]])  # two points no cell uses
    for points in (far, loose):
        normal, depth = tilted_slab(Mesh(points, [(b.cell_type, b.connectivity) for b in slab.blocks]))
        np.testing.assert_allclose(normal, turn @ [0, 0, 1], atol=1e-9)
        assert depth == pytest.approx(0.05, rel=1e-6)
    # a turned slab whose upper plane holds one point lifted by a tenth of the depth: not a slab
    lifted = far.copy()
    lifted[-1] += 0.005 * (turn @ [0, 0, 1])
    assert tilted_slab(Mesh(lifted, [(b.cell_type, b.connectivity) for b in slab.blocks])) is None


@pytest.mark.parametrize("offset", [0.0, 10.0, 100.0, 1000.0])
def test_a_turned_slab_with_single_precision_points_is_found(tmp_path, offset):
    """A slab turned by 30 degrees whose points are stored as float32 (as VTK writers store them by default): at
    |x| = 100 a float32 number is placed only to 7.6e-6 (numpy's spacing), above 1e-6 of the extent, and
    the slab went unnoticed (measured as 3D with no warning) from offset 100 on. Analytic: the turned z
    axis and the extrusion's depth, to the float32 rounding; a turned slab two cells thick is still none."""
    import meshio

    from phasegauge.io import Series
    from phasegauge.model.mesh import Mesh
    from phasegauge.model.quasi2d import tilted_slab

    assert np.spacing(np.float32(100.0)) == pytest.approx(7.63e-6, rel=1e-3)  # numpy: 2^-17
    slab, turn = _turned(grid_mesh((20, 20, 1), [(0, 1), (0, 1), (0, 0.05)]), 30)
    single = (slab.points + offset).astype(np.float32)
    normal, depth = tilted_slab(Mesh(single.astype(np.float64), [(b.cell_type, b.connectivity) for b in slab.blocks]))
    np.testing.assert_allclose(normal, turn @ [0, 0, 1], atol=1e-5)
    assert depth == pytest.approx(0.05, abs=4 * float(np.spacing(np.float32(offset + 1.5))))
    # the same points through a file written in single precision
    path = str(tmp_path / "slab.vtu")
    meshio.Mesh(single, [(b.cell_type, b.connectivity) for b in slab.blocks]).write(path)
    mesh = Series(path).read(0).mesh
    assert mesh.n_points == slab.n_points and tilted_slab(mesh) is not None
    thick, _ = _turned(grid_mesh((20, 20, 2), [(0, 1), (0, 1), (0, 0.1)]), 30)
    points = (thick.points + offset).astype(np.float32).astype(np.float64)
    assert tilted_slab(Mesh(points, [(b.cell_type, b.connectivity) for b in thick.blocks])) is None


def test_measure_says_a_turned_slab_is_measured_as_3d(tmp_path):
    import warnings

    axis = grid_mesh((16, 16, 1), [(0, 1), (0, 1), (0, 0.05)])
    turned, _ = _turned(axis, 30)
    c = (np.hypot(axis.cell_centroids[:, 0] - 0.5, axis.cell_centroids[:, 1] - 0.5) < R).astype(float)
    for name, mesh in (("turned", turned), ("axis", axis)):
        to_meshio(mesh, cell_data={"c": c}).write(str(tmp_path / f"{name}.vtu"))
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        turned_run, axis_run = measure(str(tmp_path / "turned.vtu"), "c"), measure(str(tmp_path / "axis.vtu"), "c")
    assert [w for w in turned_run.warnings if "one cell thick" in w and "measured as 3D" in w]
    assert not [w for w in axis_run.warnings if "one cell thick" in w]
    assert "depth" in axis_run.steps and "depth" not in turned_run.steps


def test_the_turned_slab_warning_names_its_file_and_step(tmp_path):
    # the warning of measure's per-step rule (as_measured, through run.step.flatten_step) named no place:
    # it now names the step's file and step, as inspect's (the same helper) does
    import types

    from phasegauge.errors import MeshWarning
    from phasegauge.io import Series
    from phasegauge.io.describe import describe_series
    from phasegauge.run.step import flatten_step

    turned, _ = _turned(grid_mesh((8, 8, 1), [(0, 1), (0, 1), (0, 0.05)]), 30)
    path = str(tmp_path / "turned.vtu")
    to_meshio(turned, cell_data={"c": np.zeros(turned.n_cells)}).write(path)
    step = Series(path).read(0)
    with pytest.warns(MeshWarning, match="not normal to x, y or z") as caught:
        same, flat = flatten_step(step, types.SimpleNamespace(keep_3d=False))
    assert same is step and flat is None
    places = [w.message.where for w in caught if "not normal to x, y or z" in w.message.what]
    assert places == ["turned.vtu, step 0"] and step.info.where == places[0]
    # inspect gives its warnings collapsed over steps, each line led by its place
    lines = [line for line in describe_series(path)["warnings"] if "not normal to x, y or z" in line]
    assert len(lines) == 1 and lines[0].startswith("turned.vtu, step 0: the mesh is one cell thick")
