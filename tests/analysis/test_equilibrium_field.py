"""Equilibrium checks of a phase-field: chemical potential, free energy, interfacial tension.

Outside checks: the Cahn-Hilliard (1958) planar equilibrium profile and its tension,
sigma = sqrt(2 kappa A) / 6 for f = A c^2 (1 - c)^2 (REFERENCES.md, Cahn-Hilliard interface) and
sigma = (2 sqrt 2 / 3) sqrt(kappa beta) for (beta/4)(phi^2 - 1)^2 (REFERENCES.md, 2 sqrt2 / 3 in
the unit scaling) [pub/calc].
"""

import numpy as np
import pytest

from phasegauge.analysis.thermo import equilibrium_metrics
from phasegauge.meshgen import grid_mesh
from phasegauge.model.mixture_models import DoubleWellModel


def _strip(n=400, rows=4):
    return grid_mesh((n, rows), bounds=[(0, 1), (0, rows / n)])


@pytest.mark.parametrize("A, kappa", [(1.0, 1e-4), (4.0, 4e-4)])
def test_tension_of_the_c_well_matches_closed_form(A, kappa):
    mesh = _strip()
    eps = np.sqrt(kappa / A)
    x = mesh.cell_centroids[:, 0]
    c = 0.5 * (1 + np.tanh((x - 0.5) / (np.sqrt(2) * eps)))
    model = DoubleWellModel(lean=0.0, rich=1.0, height=A)
    size = 4 / 400  # the strip's height: the interface length
    m = equilibrium_metrics(mesh, c, model, kappa=kappa, interface_size=size)
    sigma = np.sqrt(2 * kappa * A) / 6  # Cahn & Hilliard 1958 [calc]
    assert m["interfacial_tension"] == pytest.approx(sigma, rel=5e-3)
    # equipartition at equilibrium: bulk and gradient energy each half of sigma per length
    assert m["free_energy"] / size == pytest.approx(sigma, rel=5e-3)
    # relaxed: mu uniform to discretisation error; a profile twice too wide is not
    scale = 2 * A  # f'' at the wells
    assert m["chemical_potential_spread_max"] < 0.01 * scale
    wide = 0.5 * (1 + np.tanh((x - 0.5) / (2 * np.sqrt(2) * eps)))
    w = equilibrium_metrics(mesh, wide, model, kappa=kappa, interface_size=size)
    assert w["chemical_potential_spread_max"] > 10 * m["chemical_potential_spread_max"]
    assert w["free_energy"] > m["free_energy"]


def test_tension_of_the_phi_well_matches_closed_form():
    beta, kappa = 2.0, 2e-4
    mesh = _strip()
    x = mesh.cell_centroids[:, 0]
    phi = np.tanh((x - 0.5) / np.sqrt(2 * kappa / beta))
    model = DoubleWellModel(lean=-1.0, rich=1.0, height=beta / 4)
    m = equilibrium_metrics(mesh, phi, model, kappa=kappa, interface_size=4 / 400)
    assert m["interfacial_tension"] == pytest.approx(2 * np.sqrt(2) / 3 * np.sqrt(kappa * beta), rel=5e-3)


def test_periodic_stencil_and_non_grid_meshes():
    mesh = grid_mesh((64, 64))
    x, y = mesh.cell_centroids.T
    phi = np.sin(2 * np.pi * x)  # lap = -(2 pi)^2 phi exactly in the continuum
    model = DoubleWellModel(lean=-1.0, rich=1.0, height=1e-12)
    m = equilibrium_metrics(mesh, phi, model, kappa=1.0, periodic=("x", "y"))
    assert m["chemical_potential_mean"] == pytest.approx(0.0, abs=1e-9)
    # mu = -lap phi = (2 pi)^2 phi (discrete stencil: (2 - 2 cos(2 pi h)) / h^2)
    h = 1 / 64
    expected = (2 - 2 * np.cos(2 * np.pi * h)) / h ** 2 * np.abs(phi).max()
    assert m["chemical_potential_spread_max"] == pytest.approx(expected, rel=1e-9)
    tri = grid_mesh((8, 8), kind="triangle")
    assert np.isnan(equilibrium_metrics(tri, np.zeros(tri.n_cells), model, kappa=1.0)["free_energy"])


@pytest.mark.parametrize("width_cells", [1.5, 2.0, 3.0])
def test_tension_of_point_data_is_as_accurate_as_of_cell_data(width_cells):
    """A planar tanh strip (walled box) written on the points: the tension on the point lattice (edge
    differences between points) reads as close to (2 sqrt 2 / 3) sqrt(kappa beta) (Cahn & Hilliard 1958)
    as the same profile on the cells. Cell means of the corners read 10, 6 and 3 % low here."""
    beta, n, rows = 1.0, 200, 4
    h = 1.0 / n
    mesh = _strip(n, rows)
    xi = width_cells * h / np.sqrt(2)  # sqrt 2 xi, the tanh's width, in cells
    kappa = beta * xi ** 2
    sigma = 2 * np.sqrt(2) / 3 * np.sqrt(kappa * beta)  # Cahn & Hilliard 1958 [calc]
    model = DoubleWellModel(lean=-1.0, rich=1.0, height=beta / 4)
    errors = {}
    for where, X in (("cell", mesh.cell_centroids), ("point", mesh.coordinates)):
        phi = np.tanh((X[:, 0] - 0.5 + 0.3 * h) / (np.sqrt(2) * xi))  # the interface off the lattice
        m = equilibrium_metrics(mesh, phi, model, kappa=kappa, interface_size=rows / n)
        errors[where] = m["interfacial_tension"] / sigma - 1
        # equipartition: the free energy per length is sigma too, to the same order
        assert m["free_energy"] / (rows / n) == pytest.approx(sigma, rel=abs(errors[where]) + 1e-3)
        assert m["chemical_potential_spread_max"] < 0.07 * 2 * beta  # f'' = 2 beta at the wells; our threshold
    # the cell data's own error, -2.9, -1.6 and -0.7 %; points within a hundredth of it (our threshold)
    assert abs(errors["point"]) <= abs(errors["cell"]) * 1.01 + 1e-5
    assert errors["point"] < 0  # a tanh sampled at 1.5 to 3 points per width reads low


def test_periodic_point_data_wraps_across_the_duplicated_plane():
    """phi = sin(2 pi x) on the points of a periodic unit square (x = 0 and x = 1 the same points): the
    discrete Laplacian is -(2 - 2 cos(2 pi h)) / h^2 phi at every point and the gradient energy
    int |grad phi|^2 dA is (1 - cos(2 pi h)) / h^2 exactly (trigonometric sums), 2 pi^2 in the limit."""
    n = 64
    h = 1.0 / n
    mesh = grid_mesh((n, n))
    x = mesh.coordinates[:, 0]
    phi = np.sin(2 * np.pi * x)
    model = DoubleWellModel(lean=-1.0, rich=1.0, height=1e-12)
    m = equilibrium_metrics(mesh, phi, model, kappa=1.0, periodic=("x", "y"))
    assert m["chemical_potential_mean"] == pytest.approx(0.0, abs=1e-9)
    assert m["chemical_potential_spread_max"] == pytest.approx((2 - 2 * np.cos(2 * np.pi * h)) / h ** 2, rel=1e-9)
    assert m["gradient_energy"] == pytest.approx((1 - np.cos(2 * np.pi * h)) / h ** 2, rel=1e-9)
    # walls instead: the mirror point beyond x = 0 and 1 (no flux) bends mu only at the two walls
    walled = equilibrium_metrics(mesh, phi, model, kappa=1.0)
    assert walled["gradient_energy"] == pytest.approx(m["gradient_energy"], rel=1e-12)
    assert walled["chemical_potential_spread_max"] > m["chemical_potential_spread_max"]


def test_measure_with_free_energy_reports_tension_and_decay(tmp_path):
    """A relaxing series (the profile sharpening towards equilibrium) lowers its free energy."""
    from phasegauge import measure
    from phasegauge.meshgen import to_meshio

    model_file = tmp_path / "well.toml"
    A, kappa = 1.0, 1e-4
    model_file.write_text('[model]\nkind = "double-well"\nlean = 0.0\nrich = 1.0\n'
                          f"height = {A}\nkappa = {kappa}\n")
    folder = tmp_path / "run"
    folder.mkdir()
    mesh = _strip(200, 4)
    x = mesh.cell_centroids[:, 0]
    eps = np.sqrt(kappa / A)
    for k, stretch in enumerate((3.0, 2.0, 1.4, 1.0)):
        c = 0.5 * (1 + np.tanh((x - 0.5) / (np.sqrt(2) * eps * stretch)))
        to_meshio(mesh, cell_data={"c": c}, field_data={"TimeValue": np.array([float(k)])}).write(
            str(folder / f"s_{k}.vtu"))
    result = measure(str(folder), field="c", free_energy=str(model_file))
    steps = result.steps
    assert np.all(np.diff(steps["free_energy"]) < 0)
    assert steps["interfacial_tension"].iat[-1] == pytest.approx(np.sqrt(2 * kappa * A) / 6, rel=0.01)
    assert "free_energy_increase" not in [f.kind for f in result.findings]


def test_measure_reads_the_tension_of_point_data_on_the_points(tmp_path):
    """measure --free-energy on a field written on the points: the tanh strip of sqrt 2 xi = 2 cells reads
    sigma = (2 sqrt 2 / 3) sqrt(kappa beta) (Cahn & Hilliard 1958) within 2 % (-1.6 % on cells; the cells'
    corner means read -6.1 %)."""
    from phasegauge import measure
    from phasegauge.meshgen import to_meshio

    beta, n, rows = 1.0, 200, 4
    h = 1.0 / n
    kappa = beta * (2 * h / np.sqrt(2)) ** 2
    model_file = tmp_path / "well.toml"
    # the well (beta/4)(phi^2 - 1)^2 with kappa on phi, written on c = (phi + 1)/2 as --free-energy reads it:
    # height 16 beta/4, kappa x 4 (phi = 2c - 1); F and sigma are the same in either variable
    model_file.write_text(f'[model]\nkind = "double-well"\nlean = 0.0\nrich = 1.0\nheight = {16 * beta / 4}\n'
                          f"kappa = {float(4 * kappa)!r}\n")
    folder = tmp_path / "run"
    folder.mkdir()
    mesh = _strip(n, rows)
    phi = np.tanh((mesh.coordinates[:, 0] - 0.5 + 0.3 * h) / (2 * h))
    for k in range(2):
        to_meshio(mesh, point_data={"phi": phi}, field_data={"TimeValue": np.array([float(k)])}).write(
            str(folder / f"s_{k}.vtu"))
    steps = measure(str(folder), field="phi", range=(-1, 1), free_energy=str(model_file)).steps
    sigma = 2 * np.sqrt(2) / 3 * np.sqrt(kappa * beta)  # Cahn & Hilliard 1958 [calc]
    assert steps["interfacial_tension"].iat[0] == pytest.approx(sigma, rel=0.02)


def _regular_solution_profile(x, A, kappa, lean):
    """Planar equilibrium profile of f = x ln x + (1-x) ln(1-x) + A x (1-x) (energies in RT per molar
    volume): the first integral of Cahn & Hilliard (1958), dz = sqrt(kappa / (2 (f - f_b))) dx with
    f_b the common tangent (flat for this symmetric f), integrated from x = 1/2 at z = 0 by scipy's
    quad and inverted by interpolation."""
    from scipy.integrate import quad

    def excess(c):
        f = c * np.log(c) + (1 - c) * np.log(1 - c) + A * c * (1 - c)
        fb = lean * np.log(lean) + (1 - lean) * np.log(1 - lean) + A * lean * (1 - lean)
        return max(f - fb, 1e-300)

    levels = 0.5 + (0.5 - lean) * np.tanh(np.linspace(-4.0, 4.0, 801))  # dense near the plateaus
    levels = np.clip(levels, lean + 1e-9, 1 - lean - 1e-9)
    z = np.array([quad(lambda s: np.sqrt(kappa / (2 * excess(s))), 0.5, c, limit=200)[0] for c in levels])
    return np.interp(x, z, levels), quad(lambda s: np.sqrt(2 * kappa * excess(s)), lean, 1 - lean,
                                                       limit=200)[0]


def test_tension_of_a_regular_solution_matches_the_quadrature():
    """An activity model's free energy: the measured tension against sigma = int sqrt(2 kappa (f - f_b)) dx
    between the binodal compositions (Cahn & Hilliard 1958, by scipy's quad); the binodal of A = 3 is
    0.070720 (analytic, REFERENCES.md); mu = f'(x) - kappa lap x is uniform (0 by symmetry)."""
    from phasegauge.model.mixture_models import RegularSolutionModel

    A, kappa, lean = 3.0, 2e-5, 0.0707202
    mesh = _strip(800, 4)
    x = mesh.cell_centroids[:, 0]
    profile, sigma = _regular_solution_profile(x - 0.5, A, kappa, lean)
    model = RegularSolutionModel(A_a=A, kappa=kappa)
    m = equilibrium_metrics(mesh, profile, model, kappa=kappa, interface_size=4 / 800, temperature=300.0)
    assert m["interfacial_tension"] == pytest.approx(sigma, rel=1e-2)
    assert abs(m["chemical_potential_mean"]) < 1e-2
    assert m["chemical_potential_spread_max"] < 0.05  # f'' at the binodal is about 9 (A = 3)
    # without a temperature an activity model gives NaN, not a number at a made-up temperature
    assert np.isnan(equilibrium_metrics(mesh, profile, model, kappa=kappa)["free_energy"])


def test_measure_with_an_activity_model_free_energy(tmp_path):
    """--free-energy with a regular-solution model file and --temperature: the tension per step."""
    from click.testing import CliRunner

    from phasegauge.cli import main
    from phasegauge.meshgen import to_meshio

    A, kappa, lean = 3.0, 2e-5, 0.0707202
    model_file = tmp_path / "regular.toml"
    model_file.write_text(f'[model]\nkind = "regular"\nchi = {A}\nkappa = {kappa}\n')
    folder = tmp_path / "run"
    folder.mkdir()
    mesh = _strip(800, 4)
    x = mesh.cell_centroids[:, 0]
    profile, sigma = _regular_solution_profile(x - 0.5, A, kappa, lean)
    for k in range(2):
        to_meshio(mesh, cell_data={"x": profile}, field_data={"TimeValue": np.array([float(k)])}).write(
            str(folder / f"s_{k}.vtu"))
    out = tmp_path / "out"
    result = CliRunner().invoke(main, ["measure", str(folder), "-f", "x", "-o", str(out), "--analyses", "interface",
                                       "--free-energy", str(model_file), "--temperature", "300"])
    assert result.exit_code == 0, result.output
    import pandas as pd

    steps = pd.read_csv(out / "steps.csv")
    assert steps["interfacial_tension"].iat[-1] == pytest.approx(sigma, rel=1e-2)
    missing = CliRunner().invoke(main, ["measure", str(folder), "-f", "x", "-o", str(tmp_path / "o2"),
                                        "--free-energy", str(model_file)])
    assert missing.exit_code == 2 and "needs one temperature" in missing.output
