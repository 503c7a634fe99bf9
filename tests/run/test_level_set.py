"""A level-set field measured as one: volumes from the cut cells, its slope instead of widths.

Outside references: the analytic circle and sphere (area pi R^2, perimeter 2 pi R, volume 4/3 pi R^3);
a plane phi = x - a, whose cut-cell volume is exact (1 - a) on simplices; and the gradient of
phi = r^2 - R^2, |grad phi| = 2 r, so | |grad phi| - 1 | = 1 - 2 r near r = R = 0.2 (0.6).
"""

import json
import os

import numpy as np
import pytest
from click.testing import CliRunner
from conftest import write_listing

from phasegauge import measure
from phasegauge.cli import main
from phasegauge.errors import OptionError
from phasegauge.meshgen import grid_mesh, to_meshio
from phasegauge.model.level_set import level_set_indicator


def _circle_area(n, kind="quad", radius=0.2):
    mesh = grid_mesh((n, n), kind=kind)
    phi = np.hypot(mesh.coordinates[:, 0] - 0.5, mesh.coordinates[:, 1] - 0.5) - radius
    cell, point = level_set_indicator(mesh, phi, "lower")
    return float((cell * mesh.cell_measures).sum())


@pytest.mark.parametrize("kind", ["quad", "triangle"])
def test_the_cut_cells_give_the_circle_to_second_order(kind):
    errors = [_circle_area(n, kind) / (np.pi * 0.04) - 1 for n in (50, 100, 200)]
    assert abs(errors[0]) < 2e-3
    for coarse, fine in zip(errors, errors[1:]):  # halving the cells quarters the error: second order
        assert 3.6 < coarse / fine < 4.4


@pytest.mark.parametrize("kind", ["tetra", "hexahedron", "wedge"])
def test_a_sphere_and_a_plane_in_3d(kind):
    mesh = grid_mesh((24, 24, 24), kind=kind)
    phi = np.linalg.norm(mesh.coordinates - 0.5, axis=1) - 0.3
    cell, point = level_set_indicator(mesh, phi, "lower")
    volume = float((cell * mesh.cell_measures).sum())
    assert volume == pytest.approx(4 / 3 * np.pi * 0.3 ** 3, rel=1e-2)
    # a plane x = 0.37 (not on a grid line): exact for a linear field on the split, either side
    plane = mesh.coordinates[:, 0] - 0.37
    for phase, expected in (("upper", 0.63), ("lower", 0.37)):
        cell, point = level_set_indicator(mesh, plane, phase)
        assert float((cell * mesh.cell_measures).sum()) == pytest.approx(expected, abs=1e-12)
    # the points' ramp has its 0.5 contour where phi = 0, and is bounded
    assert np.all((point >= 0) & (point <= 1))
    assert np.allclose(point[np.isclose(plane, 0)], 0.5)


def _series(folder, phi_of, radii, *, on_cells=False, n=120):
    mesh = grid_mesh((n, n), kind="quad")
    return write_listing(folder, ((float(k), f"ls_{k}.vtu", mesh,
                                   {"phi": phi_of(mesh.cell_centroids, radius)} if on_cells else None,
                                   None if on_cells else {"phi": phi_of(mesh.coordinates, radius)})
                                  for k, radius in enumerate(radii)))


def _distance(x, radius):
    return np.hypot(x[:, 0] - 0.5, x[:, 1] - 0.5) - radius


@pytest.mark.parametrize("on_cells", [False, True])
def test_a_shrinking_drop_measured_as_a_level_set(tmp_path, on_cells):
    radii = (0.2, 0.19, 0.18)
    res = measure(_series(str(tmp_path), _distance, radii, on_cells=on_cells), "phi", level_set=True, phase="lower")
    steps = res.steps
    area = np.pi * np.square(radii)
    np.testing.assert_allclose(steps["phase_volume"], area, rtol=1e-3)  # analytic, second order at 24 cells a radius
    np.testing.assert_allclose(steps["interface_size"], 2 * np.pi * np.array(radii), rtol=1e-3)
    assert (steps["droplet_count"] == 1).all()
    assert steps["phase_volume_drift"].iat[-1] == pytest.approx(area[-1] / area[0] - 1, abs=2e-3)
    for column in ("interface_width", "width_second_moment", "interface_variance", "interface_cells_across"):
        assert steps[column].isna().all(), column
    assert (steps["distance_error_median"] < 1e-2).all()  # a distance function: |grad phi| = 1
    assert res.audit["interface_kind"] == "level set"
    kinds = [f.kind for f in res.findings]
    assert "distance_error" not in kinds and "interface_widening" not in kinds and "indicator_overshoot" not in kinds


@pytest.mark.parametrize("height", [1.0, 0.6, 0.3])
def test_a_level_set_on_cells_keeps_a_film_at_the_wall(tmp_path, height):
    # phi = x - a on cells (a finite-volume level set), a film a cell, 0.6 or 0.3 of one thick at the wall
    # x = 0: the points' values continue the linear field to the wall (the fit without its limiter, two
    # rings out where the wall leaves one ring of centroids in a line), so the film's area is a (analytic)
    # and its interface the wall's length (before: 31 % low at one cell; at 0.3 every cell value is
    # positive and the film was lost)
    n = 100
    a = height / n

    def plane(x, _):
        return x[:, 0] - a

    res = measure(_series(str(tmp_path), plane, (0.0,), on_cells=True, n=n), "phi", level_set=True, phase="lower",
                  analyses=("interface", "conservation"))
    assert res.steps["phase_volume"].iat[0] == pytest.approx(a, rel=1e-9)
    assert res.steps["interface_size"].iat[0] == pytest.approx(1.0, rel=1e-9)


@pytest.mark.parametrize("centre, tolerance", [(-0.15, 5e-3), (-0.19, 3e-2)])
def test_a_drop_cut_by_a_wall_from_values_on_cells(tmp_path, centre, tolerance):
    # a drop of radius 0.2 centred outside the wall x = 0: a cap 5 or 1 cells high; its area against the
    # circular segment R^2 (a - sin 2a / 2), a = arccos(-x0 / R) (analytic)
    def cap(x, radius):
        return np.hypot(x[:, 0] - centre, x[:, 1] - 0.5) - radius

    res = measure(_series(str(tmp_path), cap, (0.2,), on_cells=True, n=100), "phi", level_set=True, phase="lower",
                  analyses=("interface", "conservation"))
    a = np.arccos(-centre / 0.2)
    assert res.steps["phase_volume"].iat[0] == pytest.approx(0.04 * (a - np.sin(2 * a) / 2), rel=tolerance)
    assert res.steps["interface_size"].iat[0] == pytest.approx(2 * a * 0.2, rel=tolerance)


def test_a_level_set_that_is_no_distance_function_is_warned_of(tmp_path):
    # phi = r^2 - R^2: the same zero contour (and volume), but |grad phi| = 2 r = 0.4 there
    def squared(x, radius):
        return (x[:, 0] - 0.5) ** 2 + (x[:, 1] - 0.5) ** 2 - radius ** 2

    res = measure(_series(str(tmp_path), squared, (0.2, 0.2)), "phi", level_set=True, phase="lower")
    assert res.steps["phase_volume"].iat[0] == pytest.approx(np.pi * 0.04, rel=1e-3)
    assert res.steps["distance_error_median"].iat[0] == pytest.approx(0.6, abs=0.01)
    finding = next(f for f in res.findings if f.kind == "distance_error")
    assert finding.severity == "warning" and "median up to 0.599" in finding.text


@pytest.mark.parametrize("shape", [(24, 24, 24), (40, 40)])
def test_a_level_set_on_cells_reaches_the_points_with_the_linear_fits_curvature_bias(shape):
    # the exact distance to a sphere (circle) of 3 (4) cells in radius at the cell centroids: the
    # linear least-squares fit through the cells around a point returns phi + h^2/8 laplacian(phi) on a
    # grid (the centroids' spread about the point; Taylor), laplacian(phi) = (d - 1)/r for the distance
    # to a sphere: the points outside it by h^2 (d - 1)/(8R), which README states (a drop of 3 cells
    # in radius reads about 14 % small in volume)
    from phasegauge.model.level_set import level_set_points

    mesh = grid_mesh(shape, kind="hexahedron" if len(shape) == 3 else "quad")
    h = 1.0 / shape[0]
    radius = (3 if len(shape) == 3 else 4) * h
    centre = np.full(len(shape), 0.5) + 0.013
    exact = np.linalg.norm(mesh.coordinates - centre, axis=1) - radius
    got = level_set_points(mesh, np.linalg.norm(mesh.cell_centroids - centre, axis=1) - radius)
    near = np.abs(exact) < 0.5 * h
    bias = (len(shape) - 1) * h * h / (8 * radius)
    r = exact[near] + radius
    assert np.mean(got[near] - exact[near]) == pytest.approx(np.mean((len(shape) - 1) * h * h / (8 * r)), rel=0.1)
    assert np.mean(got[near] - exact[near]) == pytest.approx(bias, rel=0.15)


def test_coarse_cells_beside_a_refined_band_are_near_by_their_own_size():
    # quads 0.0125 wide in 0.35 < x < 0.65 and 0.05 outside, phi = x - 0.4: a coarse cell whose corner
    # lies within two of its own sizes of x = 0.4 is near though three fine cells lie between (the
    # definition, with the exact distance |x - 0.4| at the corners: analytic)
    from phasegauge.analysis._level_set import near_interface
    from phasegauge.model.mesh import Mesh

    xs = np.unique(np.r_[np.arange(0.0, 0.35, 0.05), np.arange(0.35, 0.65, 0.0125), np.arange(0.65, 1.0001, 0.05)])
    ys = np.arange(0.0, 1.0001, 0.05)
    X, Y = np.meshgrid(xs, ys, indexing="ij")
    points = np.c_[X.ravel(), Y.ravel()]
    ny = ys.size
    i, j = np.meshgrid(np.arange(xs.size - 1), np.arange(ny - 1), indexing="ij")
    first = (i * ny + j).ravel()
    mesh = Mesh(points, [("quad", np.c_[first, first + ny, first + ny + 1, first + 1])])
    phi = mesh.coordinates[:, 0] - 0.4
    corner = np.abs(phi[mesh.blocks[0].connectivity]).min(axis=1)
    near = set(near_interface(mesh, phi).tolist())
    inside = np.flatnonzero(corner < 2.0 * mesh.cell_sizes - 1e-9)  # (cells at two sizes exactly: round-off)
    outside = np.flatnonzero(corner > 2.0 * mesh.cell_sizes + 1e-9)
    assert set(inside.tolist()) <= near and not near & set(outside.tolist())
    assert (mesh.cell_sizes[inside] > 0.03).any()  # coarse cells among them


@pytest.mark.parametrize("band", [1.9, 2.0, 3.0])
def test_a_narrow_band_level_set_is_judged_on_the_cells_near_its_interface(band):
    # a solver keeping phi a distance only in a band of a few cells, clipped beyond: the cells near
    # the interface are chosen on the mesh (a corner within two cell sizes of the points where phi = 0
    # on the cut cells' edges), not by |phi| (clipped at 1.9 cells every cell has |phi| below two
    # cells and the whole domain read as near: median 1 and a warning). Reference: the same cells'
    # | |grad phi| - 1 | of the clipped field, by numpy least squares over their corners; the cells
    # themselves against the unclipped exact distance (analytic circle)
    from phasegauge.analysis._level_set import distance_errors, near_interface

    mesh = grid_mesh((40, 40), kind="quad")
    h = 1.0 / 40
    exact = np.hypot(mesh.coordinates[:, 0] - 0.5, mesh.coordinates[:, 1] - 0.5) - 0.3
    clipped = np.clip(exact, -band * h, band * h)
    near = near_interface(mesh, clipped)
    assert np.array_equal(near, near_interface(mesh, exact))
    conn = mesh.blocks[0].connectivity[near]
    X, P = mesh.coordinates[conn], clipped[conn]  # (cells, 4, 2), (cells, 4)
    A = np.concatenate([X - X.mean(axis=1, keepdims=True), np.ones(conn.shape + (1,))], axis=2)
    slopes = np.array([np.linalg.lstsq(a, p, rcond=None)[0][:2] for a, p in zip(A, P)])
    error = np.abs(np.linalg.norm(slopes, axis=1) - 1.0)
    # a corner within two cells of phi = 0 (the exact distance; the nearest edge crossing lies within
    # half an edge of the circle's nearest point), and every cell with a corner within 1.9 cells chosen
    assert np.all(np.abs(exact[conn]).min(axis=1) <= 2.0 * h + 1e-12)
    within = np.abs(exact[mesh.blocks[0].connectivity]).min(axis=1) <= 1.9 * h
    assert set(np.flatnonzero(within)) <= set(near)
    got = distance_errors(mesh, clipped)
    assert got["distance_error_median"] == pytest.approx(np.median(error), abs=1e-9)  # (cells of equal size)
    assert got["distance_error_median"] < 0.1  # a distance function where it is judged: no warning


def test_what_a_level_set_cannot_take_is_refused(tmp_path):
    path = _series(str(tmp_path), _distance, (0.2,))
    with pytest.raises(OptionError, match="--range -1,1 was given with --level-set"):
        measure(path, "phi", level_set=True, range=(-1, 1))
    with pytest.raises(OptionError, match="--level 0.3 was given with --level-set"):
        measure(path, "phi", level_set=True, level=0.3)
    result = CliRunner().invoke(main, ["measure", path, "--field", "phi", "--level-set", "--range", "0,2",
                                       "-o", str(tmp_path / "out")])
    assert result.exit_code == 2 and "--range 0,2 was given with --level-set" in result.output


def test_the_command_line_recipe_and_compare_take_it(tmp_path):
    path = _series(str(tmp_path), _distance, (0.2, 0.2))
    out = tmp_path / "m"
    result = CliRunner().invoke(main, ["measure", path, "--field", "phi", "--level-set", "--phase", "lower",
                                       "-o", str(out), "-q"])
    assert result.exit_code == 0, result.output
    audit = json.loads((out / "diffusion_audit.json").read_text())
    assert audit["interface_kind"] == "level set"
    recipe = tmp_path / "r.toml"
    recipe.write_text(f'[input]\npath = "{path}"\nfield = "phi"\nlevel_set = true\nphase = "lower"\n'
                      f'[output]\nfolder = "{tmp_path / "r"}"\n')
    result = CliRunner().invoke(main, ["run", str(recipe), "-q"])
    assert result.exit_code == 0, result.output
    # the level set against a volume-of-fluid copy of itself (its own cut-cell fractions on cells)
    mesh = grid_mesh((120, 120), kind="quad")
    cell, _ = level_set_indicator(mesh, _distance(mesh.coordinates, 0.2), "lower")
    os.mkdir(tmp_path / "vof")
    for k in range(2):
        to_meshio(mesh, cell_data={"alpha": cell}).write(str(tmp_path / "vof" / f"a_{k}.vtu"))
    (tmp_path / "vof" / "run.steps").write_text("0,a_0.vtu\n1,a_1.vtu\n")
    result = CliRunner().invoke(main, ["compare", path, str(tmp_path / "vof" / "run.steps"), "--field-a", "phi",
                                       "--field-b", "alpha", "--level-set-a", "--phase-a", "lower",
                                       "-o", str(tmp_path / "c"), "-q"])
    assert result.exit_code == 0, result.output
    import pandas as pd

    table = pd.read_csv(tmp_path / "c" / "comparison.csv")  # the same shape, measured both ways
    assert (table["dice"] > 0.999).all() and (table["phase_volume_rel_diff"].abs() < 1e-9).all()
    assert (table["interface_size_rel_diff"].abs() < 2e-3).all()


def test_compare_names_its_own_options_when_a_level_set_run_gets_a_level_or_range(tmp_path):
    # compare's --level is both runs' level, and a run's range is --range-a: the refusals said measure's
    # --level and --range, and told to leave out a --level that the other run reads too
    from phasegauge.run.compare import RunSpec, compare_runs

    path = _series(str(tmp_path), _distance, (0.2,))
    base = ["compare", path, path, "--field-a", "phi", "--field-b", "phi", "--level-set-a", "--phase-a", "lower",
            "--level-set-b", "-o", str(tmp_path / "c"), "-q"]
    result = CliRunner().invoke(main, base + ["--level", "0.3"])
    assert result.exit_code != 0 and "--level 0.3 was given with --level-set-a" in result.output
    assert "it is both runs' level" in result.output and not (tmp_path / "c").exists()
    result = CliRunner().invoke(main, base + ["--range-b", "-1,1"])
    assert result.exit_code != 0 and "the second run (its options ending in -b" in result.output
    assert "--range -1,1 was given with --level-set" in result.output
    with pytest.raises(OptionError, match="range"):  # refused when the run is named, before any is measured
        RunSpec(path, "phi", range=(-1.0, 1.0), level_set=True)
    with pytest.raises(OptionError, match="--level-set-b"):
        compare_runs(RunSpec(path, "phi"), RunSpec(path, "phi", level_set=True), level=0.4)


def test_a_signed_distance_read_as_an_indicator_names_the_flag(tmp_path):
    # without --level-set the field's range warning says what it may be
    from phasegauge.errors import RangeWarning

    with pytest.warns(RangeWarning, match="or --level-set if it is a signed distance"):
        measure(_series(str(tmp_path), _distance, (0.2,)), "phi", analyses=("conservation",))
