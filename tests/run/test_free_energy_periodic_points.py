"""The free energy of point data from a periodic run, in either of its two layouts, and the warning
when such a run is measured without --periodic.

A periodic solver writes its points either on both ends of the period (the last plane a copy of
the first, as a finite element code does) or as N points 0..N-1 with the period one spacing beyond
the last plane (as a spectral code writes its N x N array). Outside checks: the exact eigenvalue of
the five-point stencil on a sampled sine, (2 - 2 cos(2 pi h)) / h^2 (a trigonometric identity)
[calc]; numpy's own periodic stencil (np.roll) on the same N x N values [lib]; the Cahn & Hilliard
(1958) tension sigma = (2 sqrt 2 / 3) sqrt(kappa beta) of (beta/4)(phi^2 - 1)^2 [pub/calc].
"""

import numpy as np
import pytest

from phasegauge import measure
from phasegauge.analysis.thermo import equilibrium_metrics
from phasegauge.meshgen import grid_mesh, to_meshio
from phasegauge.model.mixture_models import DoubleWellModel

HEIGHT, KAPPA = 4.0, 1e-3  # a well 4 c^2 (1 - c)^2 with kappa on c


def _lattice(shape, period=(1.0, 1.0), short=(True, True)):
    """The grid whose points sample a period along each axis: N points 0..N-1 where ``short`` (the period
    one spacing beyond the last plane), N + 1 points with the last plane on the period's end otherwise."""
    h = [p / n for p, n in zip(period, shape)]
    cells = [n - 1 if s else n for n, s in zip(shape, short)]
    mesh = grid_mesh(tuple(cells), bounds=[(0.0, c * step) for c, step in zip(cells, h)])
    return mesh, mesh.coordinates[:, 0], mesh.coordinates[:, 1], h


def _series(folder, mesh, values, steps=2):
    folder.mkdir()
    for k in range(steps):
        to_meshio(mesh, point_data={"phi": values}, field_data={"TimeValue": np.array([float(k)])}).write(
            str(folder / f"s_{k}.vtu"))
    return str(folder)


def _well(path):
    path.write_text(f'[model]\nkind = "double-well"\nlean = 0.0\nrich = 1.0\nheight = {HEIGHT}\nkappa = {KAPPA}\n')
    return str(path)


def _numpy_periodic(c, h):
    """F and the largest |mu - mean| of N x N values of a period, in numpy alone: the five-point stencil by
    np.roll, face differences including the one across the period's end, every point a whole h x h."""
    lap = sum((np.roll(c, 1, a) + np.roll(c, -1, a) - 2 * c) / h[a] ** 2 for a in (0, 1))
    gradient = sum(float(np.sum((np.roll(c, -1, a) - c) ** 2)) / h[a] ** 2 for a in (0, 1))
    mu = 2 * HEIGHT * c * (1 - c) * (1 - 2 * c) - KAPPA * lap
    dA = h[0] * h[1]
    return (float(np.sum(HEIGHT * c ** 2 * (1 - c) ** 2)) * dA + 0.5 * KAPPA * gradient * dA,
            float(np.max(np.abs(mu - mu.mean()))))


def _pattern(x, y):
    """Domains of a smooth two-mode pattern through a tanh, periodic on the unit square, off its boundary."""
    return 0.5 * (1 + np.tanh((np.cos(2 * np.pi * 2 * x + 0.7) + np.cos(2 * np.pi * 2 * y + 2.0)) / 0.6))


# ---------------------------------------------------------------- the two layouts (equilibrium_metrics)
@pytest.mark.parametrize("short", [(True, True), (True, False), (False, True)])
def test_a_sampled_sine_reads_the_stencils_eigenvalue_in_either_layout(short):
    """phi = sin(2 pi x) cos(2 pi y) on a period (64 x 40 points, hx != hy), each axis written short (N points)
    or with its end plane repeated: -lap phi = ((2 - 2 cos(2 pi hx)) / hx^2 + (2 - 2 cos(2 pi hy)) / hy^2) phi at
    every point, and int |grad phi|^2 dA = ((1 - cos(2 pi hx)) / hx^2 + (1 - cos(2 pi hy)) / hy^2) / 2 over the
    unit period (trigonometric sums; 2 pi^2 in the limit) [calc]. Before, the short layout was taken as one
    plane written twice: mu's spread read 415 against 78.8 with both axes short."""
    mesh, x, y, (hx, hy) = _lattice((64, 40), short=short)
    phi = np.sin(2 * np.pi * x) * np.cos(2 * np.pi * y)
    model = DoubleWellModel(lean=-1.0, rich=1.0, height=1e-12)
    m = equilibrium_metrics(mesh, phi, model, kappa=1.0, periodic=("x", "y"))
    eigen = (2 - 2 * np.cos(2 * np.pi * hx)) / hx ** 2 + (2 - 2 * np.cos(2 * np.pi * hy)) / hy ** 2
    assert m["chemical_potential_mean"] == pytest.approx(0.0, abs=1e-9)
    assert m["chemical_potential_spread_max"] == pytest.approx(eigen * np.abs(phi).max(), rel=1e-9)
    energy = ((1 - np.cos(2 * np.pi * hx)) / hx ** 2 + (1 - np.cos(2 * np.pi * hy)) / hy ** 2) / 2
    assert m["gradient_energy"] == pytest.approx(energy, rel=1e-9)


def test_both_layouts_of_one_periodic_slab_read_numpys_stencil_and_cahn_hilliards_energy():
    """A periodic slab of the well (beta/4)(phi^2 - 1)^2 written on c, one interface across the period's end
    along x (between the last plane and the first), y written with its end plane repeated (the slab is uniform
    along y, which therefore cannot tell its layout): both layouts of x hold the same energy, numpy's periodic
    stencil's to round-off [lib], and F per interface length is sigma = (2 sqrt 2 / 3) sqrt(kappa beta) (Cahn &
    Hilliard 1958) within 0.5 % at sqrt 2 xi = 4 spacings (our threshold; -0.2 % here). Before, the short
    layout lost the edge across the end: F read 9.2 % low and mu's spread 3.78 against numpy's 0.0207."""
    n, rows = 256, 8
    h = 1.0 / n
    xi = 4 * h / np.sqrt(2)
    beta, kappa_phi = 1.0, xi ** 2  # (beta/4)(phi^2 - 1)^2: on c, height 4 beta, kappa 4 kappa_phi
    model = DoubleWellModel(lean=0.0, rich=1.0, height=4 * beta)

    def slab(x):  # rich from x = 1/2 - 0.4 h to the period's end less 0.4 h (inside the end's edge), periodic
        u = np.mod(x - (0.5 - 0.4 * h), 1.0)  # from the slab's first interface
        distance = np.where(u < 0.5, np.minimum(u, 0.5 - u), -np.minimum(u - 0.5, 1.0 - u))  # > 0 inside
        return 0.5 * (1 + np.tanh(distance / (np.sqrt(2) * xi)))

    figures = {}
    for short in (True, False):
        mesh, x, _, _ = _lattice((n, rows), period=(1.0, rows * h), short=(short, False))
        figures[short] = equilibrium_metrics(mesh, slab(x), model, kappa=4 * kappa_phi, periodic=("x", "y"))
    grid_x = np.arange(n) * h
    reference = slab(np.repeat(grid_x[:, None], rows, axis=1))
    lap = (np.roll(reference, 1, 0) + np.roll(reference, -1, 0) - 2 * reference) / h ** 2  # uniform along y
    mu = 2 * 4 * beta * reference * (1 - reference) * (1 - 2 * reference) - 4 * kappa_phi * lap
    energy = (float(np.sum(4 * beta * reference ** 2 * (1 - reference) ** 2))
              + 0.5 * 4 * kappa_phi * float(np.sum((np.roll(reference, -1, 0) - reference) ** 2)) / h ** 2) * h * h
    for short in (True, False):
        assert figures[short]["free_energy"] == pytest.approx(energy, rel=1e-12)  # numpy [lib]
        assert figures[short]["chemical_potential_spread_max"] == pytest.approx(np.abs(mu - mu.mean()).max(),
                                                                               rel=1e-9)
    sigma = 2 * np.sqrt(2) / 3 * np.sqrt(kappa_phi * beta)  # Cahn & Hilliard 1958 [calc]
    assert energy / (2 * rows * h) == pytest.approx(sigma, rel=5e-3)


# ---------------------------------------------------------------- measure: figures and the warning
@pytest.mark.parametrize("short", [True, False])
def test_a_periodic_run_on_points_reads_numpys_periodic_stencil_in_either_layout(tmp_path, short):
    """The pattern's 64 x 64 point values of a period, written short or with the end planes repeated, measured
    with --periodic x,y: F and mu's spread are numpy's periodic stencil's on the same values [lib], with no
    'looks periodic' warning (before, the short layout read F 3.2 % low); the tension takes the gradient energy
    over the mesh as written, where the contour lies, and reads alike in both layouts (within 0.5 %, our
    threshold)."""
    mesh, x, y, h = _lattice((64, 64), short=(short, short))
    run = _series(tmp_path / "run", mesh, 2 * _pattern(x, y) - 1)
    result = measure(run, "phi", range=(-1, 1), free_energy=_well(tmp_path / "well.toml"), periodic=("x", "y"),
                     analyses=("interface",))
    step = result.steps.iloc[0]
    grid = np.arange(64) / 64
    energy, spread = _numpy_periodic(_pattern(*np.meshgrid(grid, grid, indexing="ij")), h)
    assert step["free_energy"] == pytest.approx(energy, rel=1e-9)
    assert step["chemical_potential_spread_max"] == pytest.approx(spread, rel=1e-9)
    assert not [w for w in result.warnings if "periodic" in str(w)]
    if short:
        other = _lattice((64, 64), short=(False, False))
        repeated = measure(_series(tmp_path / "repeated", other[0], 2 * _pattern(other[1], other[2]) - 1), "phi",
                           range=(-1, 1), free_energy=_well(tmp_path / "well.toml"), periodic=("x", "y"),
                           analyses=("interface",)).steps.iloc[0]
        assert step["interfacial_tension"] == pytest.approx(repeated["interfacial_tension"], rel=5e-3)


@pytest.mark.parametrize("short", [True, False])
def test_a_periodic_run_on_points_without_periodic_is_warned_whatever_the_analyses(tmp_path, short):
    """The same run measured without --periodic, the droplets not asked for: one warning naming x,y and
    --periodic (before, none: the droplets' own warning needs the droplets and planes equal to round-off)."""
    mesh, x, y, _ = _lattice((64, 64), short=(short, short))
    run = _series(tmp_path / "run", mesh, 2 * _pattern(x, y) - 1)
    result = measure(run, "phi", range=(-1, 1), free_energy=_well(tmp_path / "well.toml"), analyses=("interface",))
    texts = [str(w) for w in result.warnings if "looks periodic" in str(w)]
    assert len(texts) == 1 and "along x,y" in texts[0] and "give --periodic x,y" in texts[0]
    assert "plane of points" in texts[0] and "(and 1 more step)" in texts[0]


def _drop(x, y):
    return 0.5 * (1 + np.tanh((0.25 - np.hypot(x - 0.5, y - 0.5)) / 0.02))


def _channel(x, y):
    """Walled along x (the no-flux mode cos(3 pi x), no gradient at the walls, the two walls unlike), periodic
    along y (two whole wavelengths): a channel whose walls are at x = 0 and 1."""
    return 0.5 * (1 + np.tanh((np.cos(3 * np.pi * x) + np.cos(2 * np.pi * 2 * y + 2.0)) / 0.6))


@pytest.mark.parametrize("field, periodic, expected", [
    (_drop, (), None), (_channel, ("y",), None), (_channel, (), "y")])
def test_walls_are_not_warned_periodic_on_points(tmp_path, field, periodic, expected):
    """A drop in a closed box (both walls written, the matrix alike on each) and a channel walled along x,
    measured with its periodic y: no warning; the channel without --periodic: warned along y alone."""
    mesh, x, y, _ = _lattice((64, 64), short=(False, True))  # points on both walls along x; y a period
    run = _series(tmp_path / "run", mesh, 2 * field(x, y) - 1)
    result = measure(run, "phi", range=(-1, 1), free_energy=_well(tmp_path / "well.toml"), periodic=periodic,
                     analyses=("interface",))
    texts = [str(w) for w in result.warnings if "periodic" in str(w)]
    if expected is None:
        assert texts == []
    else:
        assert len(texts) == 1 and f"along {expected} " in texts[0] and f"give --periodic {expected} " in texts[0]
