"""A velocity written as separate scalar fields (u.x, u.y(, u.z)) measures as the vector does.

Outside checks: plug flow u = (U, 0) through a channel of height H carries U H c of the phase per
unit time through each open end (elementary kinematics), so the phase enters at -U H and leaves at
0 while the front, on cell faces, stays inside; the phase volume is the front's x times H (exact,
the cells are wholly full or empty). The vector and its components are the same numbers, so every
column is equal bit for bit.
"""

import json

import numpy as np
import pandas as pd
import pytest

from conftest import write_listing
from phasegauge import measure
from phasegauge.errors import FieldNotFoundError, FieldShapeError
from phasegauge.meshgen import grid_mesh

U, N = 2.0, 16
H = 1.0 / N


def _front_steps(mesh, axis, k, component_names, on_points=False):
    """c = 1 behind a front at 0.25 + k h along ``axis``, u = U along it; the velocity as the vector U
    or as scalar fields ``component_names``."""
    c = (mesh.cell_centroids[:, axis] < 0.25 + k * H).astype(float)
    n = mesh.n_points if on_points else mesh.n_cells
    u = np.zeros((n, mesh.dimension))
    u[:, axis] = U
    velocity = {"U": u} if component_names is None else {name: u[:, i].copy()
                                                          for i, name in enumerate(component_names)}
    return ({"c": c}, velocity) if on_points else ({"c": c, **velocity}, None)


def _series(folder, mesh, axis, component_names, on_points=False, twice=False):
    """The steps; ``twice``: c and U on the cells and a copy on the points under the same names, as
    some writers give both (the cell copy is read)."""
    folder.mkdir()
    steps = []
    for k in range(5):
        cells, points = _front_steps(mesh, axis, k, component_names, on_points)
        if twice:
            points = {name: np.full((mesh.n_points, *np.shape(values)[1:]), 7.0) for name, values in cells.items()}
        steps.append((k * H / U, f"s_{k}.vtu", mesh, cells, points))
    return write_listing(str(folder), steps)


def test_velocity_components_on_cells_give_every_figure_of_the_vector(tmp_path):
    # a channel [0, 2] x [0, 1] of triangles, the front carried one cell per output
    mesh = grid_mesh((2 * N, N), ((0, 2), (0, 1)), kind="triangle")
    vector = measure(_series(tmp_path / "vector", mesh, 0, None, twice=True), "c", velocity="U",
                     analyses=("conservation", "droplets"))
    split = measure(_series(tmp_path / "split", mesh, 0, ("u.x", "u.y")), "c", velocity=("u.x", "u.y"),
                    analyses=("conservation", "droplets"), out=str(tmp_path / "out"))
    # the inflow of plug flow: -U H_channel c_in = -2 x 1 x 1 per unit time (elementary kinematics)
    np.testing.assert_allclose(split.steps["boundary_phase_outflow"], -U * 1.0, rtol=1e-12)
    np.testing.assert_allclose(split.steps["phase_volume"], [0.25 + k * H for k in range(5)], rtol=1e-12)
    pd.testing.assert_frame_equal(split.steps.drop(columns=["path"], errors="ignore"),
                                  vector.steps.drop(columns=["path"], errors="ignore"), check_exact=True)
    pd.testing.assert_frame_equal(split.droplets, vector.droplets, check_exact=True)
    assert [f.text for f in split.findings] == [f.text for f in vector.findings]
    with open(tmp_path / "out" / "manifest.json") as handle:  # the manifest records the components used
        assert json.load(handle)["options"]["velocity"] == "u.x,u.y"
    again = measure(_series(tmp_path / "text", mesh, 0, ("u.x", "u.y")), "c", velocity="u.x, u.y",
                    analyses=("conservation",))
    pd.testing.assert_series_equal(again.steps["boundary_phase_outflow"], split.steps["boundary_phase_outflow"],
                                   check_exact=True)


def test_three_velocity_components_on_points_of_a_3d_mesh(tmp_path):
    # a box of tetrahedra, flow along z written on the points as Ux, Uy, Uz (a common naming of components)
    mesh = grid_mesh((4, 4, N), kind="tetra")
    names = ("Ux", "Uy", "Uz")
    vector = measure(_series(tmp_path / "vector", mesh, 2, None, on_points=True), "c", velocity="U",
                     analyses=("conservation",))
    split = measure(_series(tmp_path / "split", mesh, 2, names, on_points=True), "c", velocity=list(names),
                    analyses=("conservation",))
    # plug flow through the unit cross-section: the phase enters at -U per unit time
    np.testing.assert_allclose(split.steps["boundary_phase_outflow"], -U, rtol=1e-9)
    pd.testing.assert_frame_equal(split.steps.drop(columns=["path"], errors="ignore"),
                                  vector.steps.drop(columns=["path"], errors="ignore"), check_exact=True)


def test_velocity_components_refused_with_the_step_and_the_fix(tmp_path):
    mesh = grid_mesh((4, 4, 4), kind="hexahedron")
    c = np.zeros(mesh.n_cells)
    listing = write_listing(str(tmp_path), [(0.0, "s_0.vtu", mesh, {"c": c, "u.x": c, "u.y": c},
                                             {"u.z": np.zeros(mesh.n_points)})])
    with pytest.raises(FieldShapeError, match=r"s_0.vtu, step 0: velocity field 'u.x,u.y' has 2 components on "
                                              r"a 3D mesh.*u\.x,u\.y,\.\.\."):
        measure(listing, "c", velocity="u.x,u.y", analyses=("conservation",))
    with pytest.raises(FieldShapeError, match=r"s_0.vtu, step 0: .*do not share a location \(u.x on cells, u.y on "
                                              r"cells, u.z on points\).*all on cells or all on points"):
        measure(listing, "c", velocity="u.x,u.y,u.z", analyses=("conservation",))
    with pytest.raises(FieldNotFoundError, match=r"velocity field 'U' not found; fields there: c, u.x, u.y, u.z.*"
                                                 r"joined by commas \(here perhaps u.x,u.y,u.z\)"):
        measure(listing, "c", velocity="U", analyses=("conservation",))
    assert "\n" not in str(pytest.raises(FieldShapeError, measure, listing, "c", velocity="u.x,u.y").value)


@pytest.mark.parametrize("entry", ['["u.x", "u.y"]', '"u.x,u.y"'])
def test_a_recipe_names_the_velocity_components_as_a_list_or_as_the_comma_text(tmp_path, entry):
    from phasegauge.errors import OptionError
    from phasegauge.recipes import load_recipe, run_recipe

    mesh = grid_mesh((2 * N, N), ((0, 2), (0, 1)), kind="quad")
    listing = _series(tmp_path / "split", mesh, 0, ("u.x", "u.y"))
    recipe = tmp_path / "measure.toml"
    recipe.write_text(f'[input]\npath = "{listing}"\nfield = "c"\nvelocity = {entry}\n'
                      '[run]\nanalyses = ["conservation"]\n[output]\nfolder = "out"\n')
    result = run_recipe(str(recipe))
    # plug flow through the channel's height 1: the phase enters at -U per unit time (kinematics)
    np.testing.assert_allclose(result.steps["boundary_phase_outflow"], -U, rtol=1e-12)
    with open(tmp_path / "out" / "manifest.json") as handle:
        assert json.load(handle)["options"]["velocity"] == "u.x,u.y"
    recipe.write_text(f'[input]\npath = "{listing}"\nfield = "c"\nvelocity = 3\n[output]\nfolder = "out"\n')
    with pytest.raises(OptionError, match=r"\[input\] velocity must be a text in quotes or a list \[..\], found 3"):
        load_recipe(str(recipe))


def test_a_vector_whose_name_holds_a_comma_and_space_is_read_whole(tmp_path):
    # a solver's averaged vector named 'U, avg' (the option normalises it to 'U,avg'): the same numbers as
    # the vector named U, the plug inflow -U H_channel c_in = -2 per unit time [elementary kinematics]
    mesh = grid_mesh((2 * N, N), ((0, 2), (0, 1)), kind="quad")
    folder = tmp_path / "avg"
    folder.mkdir()
    steps = []
    for k in range(3):
        cells, _ = _front_steps(mesh, 0, k, None)
        cells["U, avg"] = cells.pop("U")
        steps.append((k * H / U, f"s_{k}.vtu", mesh, cells, None))
    res = measure(write_listing(str(folder), steps), "c", velocity="U, avg", analyses=("conservation",))
    np.testing.assert_allclose(res.steps["boundary_phase_outflow"], -U * 1.0, rtol=1e-12)
