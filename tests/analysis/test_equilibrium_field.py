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
    assert m["chemical_potential_spread_max"] == pytest.approx((2 - 2 * np.cos(2 * np.pi * h)) / h ** 2 * np.abs(phi).max(), rel=1e-9)
    tri = grid_mesh((8, 8), kind="triangle")
    assert np.isnan(equilibrium_metrics(tri, np.zeros(tri.n_cells), model, kappa=1.0)["free_energy"])


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
