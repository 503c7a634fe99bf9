"""The free energy of a measure run: the model's variable and the stencil's walls.

Outside checks: numpy's own evaluation of the discrete free energy and chemical potential (face
differences, the five-point Laplacian with closed walls by edge padding or wrapped by np.roll), and
the Cahn & Hilliard (1958) tension sigma = (2 sqrt 2 / 3) sqrt(kappa beta) of (beta/4)(phi^2 - 1)^2,
whose drop of radius R holds F = sigma 2 pi R [calc].
"""

import numpy as np
import pytest

from phasegauge import measure
from phasegauge.errors import OptionError
from phasegauge.meshgen import grid_mesh, to_meshio

N, RADIUS, XI = 200, 0.25, 0.012  # the drop of audit 22 (e1_drop.py): sqrt2 xi = 3.4 cells
BETA, KAPPA_PHI = 1.0, XI ** 2  # (beta/4)(phi^2 - 1)^2 whose equilibrium profile the drop is


def _grid_field(function, n=N):
    """The mesh, the cell values of ``function(x, y)`` in mesh order and the same on an (n, n) array."""
    mesh = grid_mesh((n, n))
    x, y = mesh.cell_centroids[:, 0], mesh.cell_centroids[:, 1]
    centres = (np.arange(n) + 0.5) / n
    gx, gy = np.meshgrid(centres, centres, indexing="ij")
    return mesh, function(x, y), function(gx, gy)


def _drop(x, y):
    return np.tanh((RADIUS - np.hypot(x - 0.5, y - 0.5)) / (np.sqrt(2) * XI))


def _series(folder, mesh, values, steps=2):
    folder.mkdir()
    for k in range(steps):
        to_meshio(mesh, cell_data={"phi": values}, field_data={"TimeValue": np.array([float(k)])}).write(
            str(folder / f"s_{k}.vtu"))
    return str(folder)


def _well(path, lean, rich, height, kappa):
    path.write_text(f'[model]\nkind = "double-well"\nlean = {lean}\nrich = {rich}\nheight = {height}\n'
                    f"kappa = {kappa!r}\n")
    return str(path)


def _numpy_energy(v, f, fprime, kappa, h, wrap=False):
    """F = sum f dV + kappa/2 sum (face differences / h)^2 dV and mu = f' - kappa lap, in numpy alone."""
    padded = np.pad(v, 1, mode="wrap" if wrap else "edge")  # beyond a wall the cell itself: no flux
    lap = (padded[2:, 1:-1] + padded[:-2, 1:-1] + padded[1:-1, 2:] + padded[1:-1, :-2] - 4 * v) / h ** 2
    faces = [np.diff(v, axis=a) for a in (0, 1)]
    if wrap:
        faces += [v[:1] - v[-1:], v[:, :1] - v[:, -1:]]
    gradient = sum(float(np.sum(d ** 2)) for d in faces)
    mu = fprime(v) - kappa * lap
    return float(np.sum(f(v)) * h * h + 0.5 * kappa * gradient), float(np.max(np.abs(mu - mu.mean())))


def test_one_model_file_reads_alike_for_model_and_free_energy(tmp_path):
    """Audit 22: a double well at c = 0 and 1 (what --model demands for a field in [-1, 1] with --range -1,1)
    given to --free-energy too was evaluated on phi: F 1100 times too large (12.34 against 0.0111 at 200^2) and
    a mu spread of 38 beside "on the binodal". Both options now read it on c = (phi + 1) / 2."""
    mesh, phi, grid_phi = _grid_field(_drop)
    run = _series(tmp_path / "run", mesh, phi, steps=1)
    height, kappa = 4.0, 1.44e-4  # audit 22's well_c.toml
    model = _well(tmp_path / "well_c.toml", 0.0, 1.0, height, kappa)
    result = measure(run, "phi", range=(-1, 1), model=model, temperature=300.0, free_energy=model,
                     analyses=("interface",))
    step = result.steps.iloc[0]
    c = 0.5 * (grid_phi + 1)
    energy, spread = _numpy_energy(c, lambda v: height * v ** 2 * (1 - v) ** 2,
                                   lambda v: 2 * height * v * (1 - v) * (1 - 2 * v), kappa, 1.0 / N)
    assert step["free_energy"] == pytest.approx(energy, rel=1e-9)  # numpy [lib]
    assert step["chemical_potential_spread_max"] == pytest.approx(spread, rel=1e-9)  # numpy [lib]
    assert energy == pytest.approx(0.011098, rel=1e-4)  # audit 22's e12_wellc.py (numpy): 0.0110976


def test_a_well_mapped_from_the_order_parameter_gives_cahn_hilliards_energy(tmp_path):
    """(beta/4)(phi^2 - 1)^2 with kappa on phi in [-1, 1] is 4 beta c^2 (1 - c)^2 with 4 kappa on c: the same
    energy. Its equilibrium drop holds F = sigma 2 pi R, sigma = (2 sqrt 2 / 3) sqrt(kappa beta) (Cahn &
    Hilliard 1958) [calc]; audit 22 measured -0.2 % on this drop (tolerance 1 %, our threshold)."""
    mesh, phi, grid_phi = _grid_field(_drop)
    run = _series(tmp_path / "run", mesh, phi, steps=1)
    model = _well(tmp_path / "well.toml", 0.0, 1.0, 4 * BETA, 4 * KAPPA_PHI)
    step = measure(run, "phi", range=(-1, 1), free_energy=model, analyses=("interface",)).steps.iloc[0]
    sigma = 2 * np.sqrt(2) / 3 * np.sqrt(KAPPA_PHI * BETA)
    assert step["free_energy"] == pytest.approx(sigma * 2 * np.pi * RADIUS, rel=0.01)
    assert step["interfacial_tension"] == pytest.approx(sigma, rel=0.01)
    # numpy on phi with the well written on phi: the same discrete energy to round-off [lib]
    energy, _ = _numpy_energy(grid_phi, lambda v: BETA / 4 * (v ** 2 - 1) ** 2, lambda v: BETA * v * (v ** 2 - 1),
                              KAPPA_PHI, 1.0 / N)
    assert step["free_energy"] == pytest.approx(energy, rel=1e-9)


@pytest.mark.parametrize("analyses", [("mixing",), ("droplets",), ("conservation",)])
def test_the_tension_is_measured_whatever_the_analyses(tmp_path, analyses):
    """Without the interface analysis the step still finds the contour c = level for the tension (it was left
    empty): the same sigma as with it, and Cahn & Hilliard's (2 sqrt 2 / 3) sqrt(kappa beta) within 1 % [calc]."""
    mesh, phi, _ = _grid_field(_drop)
    run = _series(tmp_path / "run", mesh, phi, steps=1)
    model = _well(tmp_path / "well.toml", 0.0, 1.0, 4 * BETA, 4 * KAPPA_PHI)
    full = measure(run, "phi", range=(-1, 1), free_energy=model, analyses=("interface",)).steps.iloc[0]
    step = measure(run, "phi", range=(-1, 1), free_energy=model, analyses=analyses).steps.iloc[0]
    assert step["interfacial_tension"] == pytest.approx(full["interfacial_tension"], rel=1e-9)
    assert step["interfacial_tension"] == pytest.approx(2 * np.sqrt(2) / 3 * np.sqrt(KAPPA_PHI * BETA), rel=0.01)


def test_a_well_on_the_fields_own_scale_is_refused_with_the_same_well_mapped(tmp_path):
    """A well at -1 and 1 would be evaluated where the field never goes (c in [0, 1]): refused in one line that
    writes the same energy on c (height times (hi - lo)^4 = 16, kappa times (hi - lo)^2 = 4), for both options."""
    mesh, phi, _ = _grid_field(_drop, n=16)
    run = _series(tmp_path / "run", mesh, phi, steps=1)
    model = _well(tmp_path / "well_phi.toml", -1.0, 1.0, 0.25, 2e-4)
    fix = r"lean = 0, rich = 1, height = 4, kappa = 0\.0008"
    with pytest.raises(OptionError, match=r"bulk values \(-1, 1\) lie outside \[0, 1\], but --free-energy .*" + fix):
        measure(run, "phi", range=(-1, 1), free_energy=model)
    with pytest.raises(OptionError, match=r"--model reads .*" + fix):
        measure(run, "phi", range=(-1, 1), model=model, temperature=300.0)
    with pytest.raises(OptionError, match=r"give the field's range with --range LO,HI"):  # no range to map by
        measure(run, "phi", free_energy=model)


def test_a_field_beyond_the_wells_is_warned_of(tmp_path):
    """A field in [-1, 1] measured without --range maps to c = -1 to 1, a whole gap beyond the wells 0 and 1
    (WELL_REACH, a quarter, our threshold): a warning names --range and the mapped composition."""
    mesh, phi, _ = _grid_field(_drop, n=32)
    run = _series(tmp_path / "run", mesh, phi)
    model = _well(tmp_path / "well.toml", 0.0, 1.0, 4.0, 1e-3)
    texts = [str(w) for w in measure(run, "phi", free_energy=model, analyses=("interface",)).warnings]
    assert any("beyond the --free-energy double well's wells c = 0 and 1" in t and "--range" in t for t in texts)
    texts = [str(w) for w in measure(run, "phi", range=(-1, 1), free_energy=model, analyses=("interface",)).warnings]
    assert not any("wells" in t for t in texts)


# ---------------------------------------------------------------- the stencil's walls (audit 22, finding 5)
def _pattern(cos_x, cos_y):
    """Domains of a smooth two-mode pattern through a tanh (a coarsening run's look: on 64^2 cells its
    interfaces are 3 to 4 cells across, where the modes below have slopes 9.4 to 12.6 per unit length)."""
    return lambda x, y: 0.5 * (1 + np.tanh((cos_x(x) + cos_y(y)) / 0.6))


#: whole wavelengths in the box, shifted off the boundary (a pattern mirrored there joins alike either way)
PERIODIC = _pattern(lambda x: np.cos(2 * np.pi * 2 * x + 0.7), lambda y: np.cos(2 * np.pi * 2 * y + 2.0))
#: a no-flux solver's modes, cos(k pi x): no gradient at the walls, the opposite walls unlike
WALLED = _pattern(lambda x: np.cos(3 * np.pi * x), lambda y: np.cos(5 * np.pi * y))
MIXED = _pattern(lambda x: np.cos(3 * np.pi * x), lambda y: np.cos(2 * np.pi * 2 * y + 2.0))


@pytest.mark.parametrize("pattern, expected", [(PERIODIC, ["x", "y"]), (WALLED, []), (MIXED, ["y"])])
def test_cells_look_periodic_where_the_pattern_is(pattern, expected):
    """Fields built periodic (whole wavelengths in the box) or not (cos(k pi x), no flux at the walls) [calc]."""
    from phasegauge.analysis.droplets import cells_look_periodic

    mesh, c, _ = _grid_field(pattern, n=64)
    assert cells_look_periodic(mesh, c) == expected
    assert cells_look_periodic(mesh, c, periodic=("x", "y")) == []


def test_cells_look_periodic_needs_a_sign():
    """No sign: white noise (it joins no better wrapped than walled), a field layered along the axis (nothing
    changes across the boundary), a drop centred in a closed box (uniform walls), a mesh that is no grid."""
    from phasegauge.analysis.droplets import cells_look_periodic

    mesh, _, _ = _grid_field(_drop, n=64)
    noise = np.random.default_rng(3).random(mesh.n_cells)
    assert cells_look_periodic(mesh, noise) == []
    x, y = mesh.cell_centroids[:, 0], mesh.cell_centroids[:, 1]
    assert cells_look_periodic(mesh, 0.5 * (1 + np.tanh((y - 0.5) / 0.03))) == []
    assert cells_look_periodic(mesh, 0.5 * (1 + _drop(x, y))) == []
    triangles = grid_mesh((8, 8), kind="triangle")
    assert cells_look_periodic(triangles, np.linspace(0, 1, triangles.n_cells)) == []


def test_a_periodic_run_without_periodic_is_warned_and_its_stencil_wraps_with_it(tmp_path):
    """Audit 22: a relaxed periodic Cahn-Hilliard run read a mu spread 31 times too high without --periodic and
    no warning. The figures against numpy's periodic (np.roll) and closed (edge) stencils [lib]; the warning
    names --periodic x,y, and with it none is given."""
    mesh, c, grid_c = _grid_field(PERIODIC, n=64)
    run = _series(tmp_path / "run", mesh, 2 * c - 1)
    height, kappa = 4.0, 1e-3
    model = _well(tmp_path / "well.toml", 0.0, 1.0, height, kappa)
    f = (lambda v: height * v ** 2 * (1 - v) ** 2, lambda v: 2 * height * v * (1 - v) * (1 - 2 * v))
    for periodic in ((), ("x", "y")):
        result = measure(run, "phi", range=(-1, 1), free_energy=model, periodic=periodic, analyses=("interface",))
        energy, spread = _numpy_energy(grid_c, *f, kappa, 1 / 64, wrap=bool(periodic))
        step = result.steps.iloc[0]
        assert step["free_energy"] == pytest.approx(energy, rel=1e-9)
        assert step["chemical_potential_spread_max"] == pytest.approx(spread, rel=1e-9)
        texts = [str(w) for w in result.warnings if "looks periodic" in str(w)]
        assert texts == ([] if periodic else [texts[0]])
        if not periodic:
            assert "along x,y" in texts[0] and "give --periodic x,y" in texts[0] and "(and 1 more step)" in texts[0]


def test_a_closed_box_run_is_not_warned_periodic(tmp_path):
    """The no-flux pattern (cos(k pi x) modes) measured without --periodic: no warning."""
    mesh, c, _ = _grid_field(WALLED, n=64)
    run = _series(tmp_path / "run", mesh, c)
    model = _well(tmp_path / "well.toml", 0.0, 1.0, 4.0, 1e-3)
    result = measure(run, "phi", free_energy=model, analyses=("interface",))
    assert not [w for w in result.warnings if "periodic" in str(w)]
