"""Demo series: readable, regenerable, and faithful to the published models behind them."""

from __future__ import annotations

import os

import numpy as np
import pytest

import phasegauge.samples as samples
from phasegauge import describe_series
from phasegauge.errors import OptionError, OutputError
from phasegauge.io import Series
from phasegauge.samples import (SAMPLE_NAMES, advect, cahn_hilliard, channel_concentration,
                                circle_fraction, filament_breakup_fields, write_samples)

ROOT = os.path.join(os.path.dirname(__file__), os.pardir, "sample_fields")
PATHS = {"filament_breakup": "filament_breakup.xdmf", "vortex_upwind": "vortex_upwind",
         "vortex_sharp": "vortex_sharp", "channel_mixing": "channel_mixing",
         "droplets_3d": "droplets_3d.xdmf", "solvent_quench": "solvent_quench.xdmf"}
#: name -> (steps, dimension, cell type, {field: location})
EXPECTED = {
    "filament_breakup": (40, 2, "triangle", {"phi": "point"}),
    "vortex_upwind": (17, 2, "quad", {"c": "cell", "velocity": "cell"}),
    "vortex_sharp": (17, 2, "quad", {"c": "cell", "velocity": "cell"}),
    "channel_mixing": (1, 2, "triangle", {"c": "point", "velocity": "point"}),  # each flow rate's series
    "droplets_3d": (21, 3, "hexahedron", {"phi": "point", "velocity": "point"}),
    "solvent_quench": (11, 2, "quad", {"x": "cell", "s": "cell", "T": "cell"}),
}


#: the channel sample is a campaign: one series per inlet flow rate in its folder
CHANNEL_SERIES = ("flow_rate_0.5.xdmf", "flow_rate_1.xdmf", "flow_rate_1.5.xdmf", "flow_rate_2.xdmf")


def committed(name):
    return os.path.join(ROOT, PATHS[name])


def series_paths(path, name):
    """The series of sample ``name`` written at ``path`` (the channel folder holds one per flow rate)."""
    if name == "channel_mixing":
        return [os.path.join(path, f) for f in CHANNEL_SERIES]
    return [path]


def test_every_public_name_imports():
    for name in samples.__all__:
        assert getattr(samples, name) is not None
    assert set(SAMPLE_NAMES) == set(PATHS)


def test_committed_samples_are_small():
    total = sum(os.path.getsize(os.path.join(d, f)) for d, _, fs in os.walk(ROOT) for f in fs)
    assert total < 20e6       # the limit for the committed copies


@pytest.mark.parametrize("name", SAMPLE_NAMES)
def test_committed_sample_is_readable(name):
    steps, dim, cell_type, fields = EXPECTED[name]
    for path in series_paths(committed(name), name):
        _check_description(describe_series(path), name, steps, dim, cell_type, fields)


def _check_description(desc, name, steps, dim, cell_type, fields):
    assert desc["steps"] == steps
    assert desc["dimension"] == dim
    assert list(desc["cell_types"]) == [cell_type]
    assert desc["time_origin"] in ("xdmf", "file")
    assert np.all(np.diff(desc["times"]) > 0)
    found = {f["name"]: f for f in desc["fields"]}
    for field, location in fields.items():
        assert found[field]["location"] == location
        assert found[field]["nonfinite"] == 0
    if name.startswith("vortex") or name == "channel_mixing":
        assert -1e-12 <= found["c"]["min"] and found["c"]["max"] <= 1 + 1e-12
    if "phi" in found:
        # Cahn-Hilliard bulk values sit near -1 and +1; curvature (Gibbs-Thomson) and, in
        # droplets_3d, the flow squeezing the interface push them a few per cent beyond
        assert -1.1 <= found["phi"]["min"] < -0.9 and 0.9 < found["phi"]["max"] <= 1.1


def test_vtu_steps_hold_their_time_as_field_data():
    import meshio

    files = sorted(os.listdir(committed("vortex_upwind")))
    raw = meshio.read(os.path.join(committed("vortex_upwind"), files[4]))
    assert raw.field_data["TimeValue"].tolist() == [0.5]   # step 4 of 16 over T = 2
    # VTK's own reader (through pyvista [lib]) finds the same field data
    import pyvista

    mesh = pyvista.read(os.path.join(committed("vortex_upwind"), files[4]))
    assert mesh.field_data["TimeValue"].tolist() == [0.5]
    series = Series(committed("vortex_upwind"))
    assert series.time_origins == ["file"]
    assert np.allclose(series.times, np.linspace(0.0, 2.0, 17), rtol=0, atol=1e-15)


def _arrays(path):
    with Series(path) as series:
        for i in range(len(series)):
            step = series.read(i)
            yield step.time, step.mesh, {**{f"point:{k}": v for k, v in step.fields.point_data.items()},
                                         **{f"cell:{k}": v for k, v in step.fields.cell_data.items()}}


def _assert_same(a, b):
    a, b = np.asarray(a), np.asarray(b)
    assert a.dtype == b.dtype and a.shape == b.shape
    if a.dtype == np.float32:
        np.testing.assert_array_max_ulp(a, b, maxulp=1)   # float32 storage: at most one rounding apart
    else:
        np.testing.assert_allclose(a, b, rtol=0, atol=1e-12)


@pytest.mark.slow
def test_regenerating_gives_the_committed_values(tmp_path):
    # one run of the whole set (tens of seconds on 2 cores)
    seen = []
    paths = write_samples(tmp_path, progress=lambda name, path: seen.append(name))
    assert seen == list(SAMPLE_NAMES)
    assert not [f for f in os.listdir(tmp_path) if f.startswith(".writing")]   # no temporaries left
    for name in SAMPLE_NAMES:
        assert os.path.basename(paths[name]) == PATHS[name]
        for new_path, old_path in zip(series_paths(paths[name], name), series_paths(committed(name), name),
                                      strict=True):
            new, old = list(_arrays(new_path)), list(_arrays(old_path))
            assert len(new) == len(old)
            for (t1, m1, f1), (t2, m2, f2) in zip(new, old):
                assert t1 == t2
                np.testing.assert_allclose(m1.points, m2.points, rtol=0, atol=1e-12)
                assert sorted(f1) == sorted(f2)
                for key in f1:
                    _assert_same(f1[key], f2[key])


def test_write_samples_checks_its_arguments(tmp_path):
    with pytest.raises(OptionError, match="unknown sample series 'bubbles'"):
        write_samples(tmp_path, names=["bubbles"])
    target = tmp_path / "file"
    target.write_text("x")
    with pytest.raises(OutputError, match="not a folder"):
        write_samples(target, names=["channel_mixing"])


def test_write_samples_writes_only_the_named_series(tmp_path):
    paths = write_samples(tmp_path / "new", names=["channel_mixing"])
    assert list(paths) == ["channel_mixing"]
    assert sorted(os.listdir(tmp_path / "new")) == ["channel_mixing"]
    assert sorted(os.listdir(tmp_path / "new" / "channel_mixing")) == sorted(
        name[:-5] + suffix for name in CHANNEL_SERIES for suffix in (".h5", ".xdmf"))


# ---------------------------------------------------------------- Cahn-Hilliard
@pytest.fixture(scope="module")
def filament_run():
    return filament_breakup_fields(energies=True)


def test_cahn_hilliard_conserves_the_mean_order_parameter(filament_run):
    # Cahn & Hilliard (1958): conserved dynamics, d/dt int phi = 0; the scheme leaves
    # the zero wavenumber untouched, so only FFT round-off remains (tolerance 1e-13)
    _, fields, _ = filament_run
    means = np.array([f.mean() for f in fields])
    assert np.max(np.abs(means - means[0])) < 1e-13


def test_cahn_hilliard_free_energy_never_increases(filament_run):
    # Cahn & Hilliard (1958) free energy is a Lyapunov functional of the model; the
    # stabilised semi-implicit scheme (Shen & Yang 2010, S >= 1) keeps it so discretely
    _, _, energy = filament_run
    assert np.all(np.diff(energy) <= 1e-12 * energy[0])
    assert energy[-1] < 0.5 * energy[0]


def test_filament_breaks_up_and_coarsens(filament_run):
    # droplet counts by scipy.ndimage.label on the spectral grid [lib]
    from scipy import ndimage

    _, fields, _ = filament_run
    counts = [ndimage.label(f > 0)[1] for f in fields]
    peak = int(np.argmax(counts))
    assert counts[peak] >= 4 > counts[0]          # pinch-off: more droplets
    assert counts[-1] == 1                        # coarsening: one droplet left


def test_cahn_hilliard_relaxes_to_the_tanh_profile():
    # Cahn & Hilliard (1958): planar equilibrium phi = tanh(x / (sqrt2 eps)); a sharp
    # step relaxes to it (tolerance 1e-3 on 256 points over 8 interface widths)
    n, length, eps = 256, 1.0, 0.02
    x = (np.arange(n) + 0.5) * length / n
    step = np.where(np.abs(x - 0.5) < 0.25, 1.0, -1.0)[:, None] * np.ones((1, 4))
    final = cahn_hilliard(step, (length, 0.1), epsilon=eps, mobility=1.0, dt=1e-6,
                          save_steps=[3000])[-1][:, 0]
    exact = np.tanh((0.25 - np.abs(x - 0.5)) / (np.sqrt(2) * eps))
    assert np.max(np.abs(final - exact)) < 1e-3


# ---------------------------------------------------------------- finite volume
def test_upwind_numerical_diffusion_matches_modified_equation():
    # LeVeque (2002), Finite Volume Methods for Hyperbolic Problems: first-order upwind
    # adds D = u dx (1 - C) / 2, so the variance of dc/dx grows by 2 D t. The donor-cell
    # kernel gives this exactly per step (binomial variance C (1 - C) dx^2), so the
    # tolerance is 0.5 % (edges and the discrete derivative). Same routine as the vortex.
    n, u, courant = 400, 1.0, 0.4
    dx = 1.0 / n
    x = (np.arange(n) + 0.5) * dx
    from scipy.special import erf

    c = (0.5 * (1 + erf((x - 0.25) / (np.sqrt(2) * 4 * dx))))[:, None]
    dt = courant * dx / u
    flux_x = np.full((n + 1, 1), u * dx)          # u times the face length dy = dx
    flux_y = np.zeros((n, 2))

    def variance(c):
        g = np.diff(c[:, 0]) / dx
        xf = x[:-1] + 0.5 * dx
        m = np.sum(g * xf) / np.sum(g)
        return np.sum(g * (xf - m) ** 2) / np.sum(g)

    v0 = variance(c)
    steps = 500
    for _ in range(steps):
        c = advect(c, flux_x, flux_y, dx * dx, dt, scheme="upwind")
    measured = (variance(c) - v0) / (2 * steps * dt)
    theory = u * dx * (1 - courant) / 2
    assert measured == pytest.approx(theory, rel=5e-3)


@pytest.mark.parametrize("scheme", ["upwind", "fct"])
def test_advection_is_conservative_and_bounded(scheme):
    from phasegauge.samples._vortex import _face_fluxes

    n = 40
    c = circle_fraction(n, (0.5, 0.75), 0.15)
    total = c.sum()
    fx, fy = _face_fluxes(n, 0.1, 2.0)
    for _ in range(20):
        c = advect(c, fx, fy, 1.0 / n**2, 0.5 / n, scheme=scheme)
    assert abs(c.sum() - total) < 1e-12 * total
    assert c.min() > -1e-12 and c.max() < 1 + 1e-12


def _shape_error(name):
    with Series(committed(name)) as series:
        first, last = series.read(0), series.read(len(series) - 1)
    area = first.mesh.cell_measures
    c0, c1 = first.fields.cell_data["c"], last.fields.cell_data["c"]
    return np.sum(np.abs((c0 > 0.5).astype(float) - (c1 > 0.5)) * area), last.time, c1, area, c0


def test_sharp_vortex_run_returns_to_the_circle():
    # LeVeque (1996); Rider & Kothe (1998): at t = T the exact shape is the initial circle.
    # Shape error E = int |H(c_exact - 1/2) - H(c - 1/2)| dV (Enright et al. 2002):
    # measured 0.0034, i.e. E / (2 pi r) = 0.36 dx; bound 0.5 dx.
    error, time, c, area, c0 = _shape_error("vortex_sharp")
    assert time == 2.0
    assert error / (2 * np.pi * 0.15) < 0.5 * 0.01
    assert abs(np.sum(c * area) - np.sum(c0 * area)) < 1e-12
    upwind_error = _shape_error("vortex_upwind")[0]
    assert upwind_error > 5 * error               # the upwind run is the smeared one


# ---------------------------------------------------------------- channel
def test_channel_series_matches_direct_integration():
    # the eigenfunction (Graetz 1883) series equals a direct integration of the same
    # semi-discrete equations u dc/dx = D d2c/dy2 by scipy.integrate.solve_ivp [lib]
    from scipy.integrate import solve_ivp

    from phasegauge.samples._channel import CHANNEL, poiseuille_velocity

    params = dict(CHANNEL, transverse_cells=60)
    n, pe = 60, 80.0
    h = 1.0 / n
    y = (np.arange(n) + 0.5) * h
    u = poiseuille_velocity(y)
    lap = (np.diag(np.ones(n - 1), 1) + np.diag(np.ones(n - 1), -1)
           - np.diag(np.r_[1.0, np.full(n - 2, 2.0), 1.0])) / h**2
    rhs = (1.0 / pe) * lap / u[:, None]
    sol = solve_ivp(lambda x, c: rhs @ c, (0, 3.0), (y < 0.5).astype(float), method="BDF",
                    t_eval=[0.5, 3.0], rtol=1e-10, atol=1e-12, jac=rhs)
    for j, x in enumerate([0.5, 3.0]):
        series = channel_concentration(np.full(n, x), y, pe, params)
        np.testing.assert_allclose(series, sol.y[:, j], atol=1e-7)


def test_channel_flow_weighted_mean_is_one_half():
    # mass balance: the dyed stream carries half the Poiseuille flux, so the
    # flow-weighted cross-section mean of c is 1/2 at every x (tolerance 1e-4)
    y = (np.arange(2000) + 0.5) / 2000
    from phasegauge.samples._channel import poiseuille_velocity

    u = poiseuille_velocity(y)
    for pe in (20.0, 320.0):
        for x in (0.3, 2.0, 9.0):
            c = channel_concentration(np.full_like(y, x), y, pe)
            assert np.sum(u * c) / np.sum(u) == pytest.approx(0.5, abs=1e-4)


# ---------------------------------------------------------------- 3D droplets
def test_droplets_3d_merge_and_conserve_volume():
    # connected regions by scipy.ndimage.label [lib] on the hexahedral grid points
    from scipy import ndimage

    counts, means = [], []
    with Series(committed("droplets_3d")) as series:
        for i in range(len(series)):
            step = series.read(i)
            grid = step.mesh.regular_grid
            phi = grid.points_to_array(step.fields.point_data["phi"])[:-1, :-1, :-1]  # periodic copy off
            counts.append(ndimage.label(phi > 0)[1])
            means.append(float(np.mean(phi, dtype=np.float64)))
    assert counts[0] == 2 and counts[-1] == 1
    assert counts == sorted(counts, reverse=True)       # one merge, no breakup
    # advective Cahn-Hilliard with a divergence-free flow conserves int phi; float32 storage
    assert np.ptp(means) < 1e-6


def test_cahn_hilliard_with_the_nrtl_free_energy_reaches_the_binodal():
    """A planar Cahn-Hilliard equilibrium has the common-tangent compositions on its plateaus (Cahn &
    Hilliard 1958): the solvent_quench generator's force, relaxed on a slab, meets the binodal that
    analysis.thermo solves by isoactivity."""
    from phasegauge.analysis.thermo import equilibrium_at
    from phasegauge.samples._miscibility import _force_scale, nrtl_force, solvent_pair_model

    model, t = solvent_pair_model(), 298.15
    eq = equilibrium_at(model, t)
    scale = _force_scale(model, t, eq.binodal_lean)
    x = (np.arange(128) + 0.5) / 128
    x0 = np.where(np.abs(x - 0.5) < 0.25, 0.8, 0.2)[:, None] * np.ones((1, 4))
    out = cahn_hilliard(2 * x0 - 1, (1.0, 4 / 128), epsilon=0.02, mobility=1.0, dt=2e-5, save_steps=[3000],
                        stabilization=4.0, bulk_force=nrtl_force(model, t, reference=t, scale=scale))
    xe = 0.5 * (1 + out[-1][:, 0])
    assert xe.min() == pytest.approx(eq.binodal_lean, abs=1e-5)
    assert xe.max() == pytest.approx(eq.binodal_rich, abs=1e-5)
