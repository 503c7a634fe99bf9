"""compare --periodic: droplets joined across a periodic boundary in both runs, interface distances
wrapped there (a drop crossing the boundary in one run only is no breakup and no half-box distance)."""

import json

import numpy as np
import pandas as pd
import pytest
from click.testing import CliRunner

from phasegauge.analysis.compare import SamplingGrid, shape_comparison_on_grid
from phasegauge.cli import main
from phasegauge.errors import InputError, OptionError
from phasegauge.meshgen import grid_mesh, to_meshio
from phasegauge.recipes import load_recipe
from phasegauge.run.compare import RunSpec, compare_runs

R = 0.2  # drop radius
EPS = 0.015  # phi = tanh((R - r) / (sqrt2 EPS)): c = (1 + phi) / 2 is logistic of scale s = EPS / sqrt2
OFFSET = 0.02  # B's drop lies this far ahead of A's along x


def _periodic_distance(points, centre):
    dx = np.abs(points[:, 0] - centre[0])
    dx = np.minimum(dx, 1.0 - dx)  # the unit box, periodic in x
    return np.hypot(dx, points[:, 1] - centre[1])


def _crossing_runs(tmp_path, width_b=1.0):
    """A: a tanh drop across the periodic x boundary at t = 0 (centre x = 0.185); B: a one-cell ramp
    of the same drop OFFSET ahead (centre 0.205, inside the box); both move 0.01 per output."""
    quad = grid_mesh((80, 80))
    tri = grid_mesh((64, 64), bounds=[(0.0, width_b), (0.0, 1.0)], kind="triangle")
    for k in range(2):
        ra = _periodic_distance(quad.coordinates, (0.185 + 0.01 * k, 0.5))
        to_meshio(quad, point_data={"phi": np.tanh((R - ra) / (np.sqrt(2) * EPS))}).write(tmp_path / f"a_{k}.vtu")
        rb = _periodic_distance(tri.coordinates, (0.185 + OFFSET + 0.01 * k, 0.5))
        to_meshio(tri, point_data={"alpha": np.clip(0.5 + (R - rb) * 64, 0, 1)}).write(tmp_path / f"b_{k}.vtu")
    for run in "ab":
        lines = ["time,path"] + [f"{0.1 * k:.1f},{run}_{k}.vtu" for k in range(2)]
        (tmp_path / f"{run}.csv").write_text("\n".join(lines) + "\n")
    return str(tmp_path / "a.csv"), str(tmp_path / "b.csv")


def _specs(a, b):
    return RunSpec(a, "phi", (-1, 1), label="pf"), RunSpec(b, "alpha", label="vof")


def test_periodic_interface_distances_wrap_on_the_grid():
    # analytic: two circles of radius R whose centres lie OFFSET apart (x = 0.185 and 0.205) are OFFSET
    # apart in the Hausdorff distance; only the first crosses the periodic x boundary, so without the
    # wrap its piece beyond the boundary is measured across the box
    grid = SamplingGrid([(0, 1), (0, 1)], (200, 200))
    points = grid.points()
    values = [(0.5 * (1 - np.tanh((_periodic_distance(points, (x, 0.5)) - R) / 0.01))).reshape(grid.shape)
              for x in (0.185, 0.185 + OFFSET)]
    wrapped = shape_comparison_on_grid(*values, grid, periodic=("x",), axis_names=("x", "y"))
    assert wrapped["hausdorff"] == pytest.approx(OFFSET, abs=0.003)  # our threshold: 0.6 grid spacings
    plain = shape_comparison_on_grid(*values, grid)
    assert plain["hausdorff"] > 0.5


def test_periodic_interface_distances_wrap_in_3d():
    # analytic: spheres of radius R whose centres lie OFFSET apart along x (only the first crossing the
    # periodic x boundary) are OFFSET apart in the Hausdorff distance
    grid = SamplingGrid([(0, 1), (0, 1), (0, 1)], (80, 80, 80))
    points = grid.points()
    values = []
    for x in (0.185, 0.185 + OFFSET):
        r = np.hypot(_periodic_distance(points, (x, 0.5)), points[:, 2] - 0.5)
        values.append((0.5 * (1 - np.tanh((r - R) / 0.02))).reshape(grid.shape))
    wrapped = shape_comparison_on_grid(*values, grid, periodic=("x",))
    # our threshold: half a grid spacing (3D queries lie one spacing apart)
    assert wrapped["hausdorff"] == pytest.approx(OFFSET, abs=0.5 / 80)
    assert shape_comparison_on_grid(*values, grid)["hausdorff"] > 0.5


def test_a_drop_across_the_periodic_boundary_is_one_drop_in_both_runs(tmp_path):
    a, b = _crossing_runs(tmp_path)
    result = compare_runs(*_specs(a, b), out=tmp_path / "out", periodic=("x",))
    stats = pd.read_csv(tmp_path / "out" / "droplet_statistics.csv")
    # one drop each side at both times (at t = 0 only A's crosses the boundary)
    assert list(stats["droplet_count_a"]) == [1, 1] and list(stats["droplet_count_b"]) == [1, 1]
    # analytic: the logistic drop's volume pi R^2 + pi^3 s^2 / 3 (Fermi-Dirac integral, s = EPS / sqrt2),
    # so its equivalent diameter is 2 R sqrt(1 + pi^2 s^2 / (3 R^2)); the ramp's is 2 R
    s = EPS / np.sqrt(2)
    assert np.allclose(stats["mean_equivalent_diameter_a"], 2 * R * np.sqrt(1 + np.pi ** 2 * s ** 2 / (3 * R ** 2)),
                       rtol=1e-3)
    assert np.allclose(stats["mean_equivalent_diameter_b"], 2 * R, rtol=2e-3)
    # analytic: equal circles OFFSET apart are OFFSET apart in the Hausdorff distance (through the boundary)
    table = result.comparison
    # our threshold: half of B's cell, where the clipped one-cell ramp's linear interpolant may put its contour
    assert np.allclose(table["hausdorff"], OFFSET, atol=0.5 / 64)
    assert (table["mean_distance"] < OFFSET).all()
    options = json.loads((tmp_path / "out" / "manifest.json").read_text())["options"]
    assert options["pf"]["periodic"] == options["vof"]["periodic"] == ["x"]


def test_compare_periodic_on_the_command_line_and_in_a_recipe_give_the_same_tables(tmp_path):
    a, b = _crossing_runs(tmp_path)
    res = CliRunner().invoke(main, ["compare", a, b, "--field-a", "phi", "--range-a=-1,1", "--field-b", "alpha",
                                    "--label-a", "pf", "--label-b", "vof", "--periodic", "x", "-o",
                                    str(tmp_path / "cli"), "--quiet"])
    assert res.exit_code == 0, res.output
    recipe = tmp_path / "c.toml"
    recipe.write_text(f'[first]\npath = "{a}"\nfield = "phi"\nrange = [-1, 1]\nlabel = "pf"\n'
                      f'[second]\npath = "{b}"\nfield = "alpha"\nlabel = "vof"\n[compare]\nperiodic = ["x"]\n'
                      f'[output]\nfolder = "{tmp_path}/recipe"\n')
    res = CliRunner().invoke(main, ["run", str(recipe), "--quiet"])
    assert res.exit_code == 0, res.output
    for name in ("comparison.csv", "droplet_statistics.csv"):
        cli, rec = (pd.read_csv(tmp_path / f / name) for f in ("cli", "recipe"))
        pd.testing.assert_frame_equal(cli, rec)
    assert list(pd.read_csv(tmp_path / "cli" / "droplet_statistics.csv")["droplet_count_a"]) == [1, 1]


def test_periodic_in_a_run_table_is_pointed_to_the_compare_table(tmp_path):
    recipe = tmp_path / "c.toml"
    recipe.write_text('[first]\npath = "a.csv"\nfield = "phi"\nperiodic = ["x"]\n'
                      '[second]\npath = "b.csv"\nfield = "alpha"\n[output]\nfolder = "o"\n')
    with pytest.raises(OptionError, match=r"unknown key 'periodic' in \[first\]; it belongs in \[compare\]"):
        load_recipe(recipe)
    recipe.write_text('[first]\npath = "a.csv"\nfield = "phi"\n[second]\npath = "b.csv"\nfield = "alpha"\n'
                      '[compare]\nperiodic = ["w"]\n[output]\nfolder = "o"\n')
    with pytest.raises(OptionError, match=r"\[compare\] periodic must be among x, y, z, found \('w',\)"):
        load_recipe(recipe)


def test_runs_of_other_periods_are_refused_before_measuring(tmp_path):
    a, b = _crossing_runs(tmp_path, width_b=1.2)
    with pytest.raises(InputError, match="the runs span other lengths along the periodic axis x"):
        compare_runs(*_specs(a, b), out=tmp_path / "out", periodic=("x",))
    assert not (tmp_path / "out").exists()
    with pytest.raises(InputError, match="periodic axis z is not an axis this run's mesh spans"):
        compare_runs(*_specs(a, b), periodic=("z",))
