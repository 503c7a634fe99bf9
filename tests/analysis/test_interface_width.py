"""Interface width estimators, boundedness and the numerical-diffusion audit."""

import math

import numpy as np
import pandas as pd
import pytest

from phasegauge.analysis.interface import (
                                           METRIC_KEYS,
                                           PROFILE_COLUMNS,
                                           diffusion_audit,
                                           find_interface,
                                           interface_metrics,
                                           interface_profile_table,
                                           )
from phasegauge.errors import OptionError
from phasegauge.model.indicator import make_indicator
from phasegauge.io import StepFields
from phasegauge.meshgen import grid_mesh

# logistic profile c = 1/2 (1 + tanh(n / (2 eps))) (Olsson & Kreiss 2005): band volume per area
# over 0.05 < c < 0.95 is 2 eps ln 19 = 5.889 eps (REFERENCES.md [calc])
BAND = 2 * math.log(19.0)
ESTIMATORS = ("interface_width", "width_threshold_free", "width_second_moment",
              "width_profile_median")


def _slab(kind, cells_across):
    """A thin slab across x with the 5-95 % band spanning ``cells_across`` cells."""
    dim = 2 if kind in ("quad", "triangle", "polygon") else 3
    nx = 40 if cells_across == 4 else 64
    h = 1.0 / nx
    shape = (nx, 4) if dim == 2 else (nx, 3, 3)
    bounds = [(0, 1), (0, 4 * h)] if dim == 2 else [(0, 1), (0, 3 * h), (0, 3 * h)]
    return grid_mesh(shape, bounds, kind=kind), cells_across * h


def _indicator(mesh, location, function, **kwargs):
    X = mesh.coordinates if location == "point" else mesh.cell_centroids
    values = function(X)
    fields = StepFields(point_data={"c": values}) if location == "point" else StepFields(cell_data={"c": values})
    return make_indicator(mesh, fields, "c", **kwargs)


def test_constants_from_references():
    assert BAND == pytest.approx(5.889, abs=1e-3)                      # Olsson & Kreiss 2005 [calc]
    assert 2 * math.sqrt(2) * math.atanh(0.9) == pytest.approx(4.164066, abs=1e-6)  # Cahn-Hilliard


# Logistic profile of known eps (Olsson & Kreiss 2005) at 4 and 8 cells across the 5-95 % band:
# every estimator returns 5.889 eps. Bias is positive: the piecewise-linear interpolant adds about
# h^2/6 to the variance of dc/dn, and cell data (averaged to points) about h^2/4 more.
# Tolerances (relative): point data -2 % to +8 % at 4 cells, +3 % at 8; cell data +20 % and +6 %,
# and down to -8 % (local fits on mixed 3D cells scatter: cell-to-point averaging is first order
# on uneven stencils).
@pytest.mark.parametrize("kind", ["quad", "triangle", "polygon", "hexahedron", "tetra", "wedge",
                                  "pyramid", "mixed"])
@pytest.mark.parametrize("location", ["point", "cell"])
@pytest.mark.parametrize("cells_across", [4, 8])
def test_logistic_profile_widths(kind, location, cells_across):
    mesh, width = _slab(kind, cells_across)
    eps = width / BAND
    ind = _indicator(mesh, location, lambda X: 0.5 * (1 + np.tanh((X[:, 0] - 0.5037) / (2 * eps))))
    r = interface_metrics(mesh, ind)
    high = {("point", 4): 0.08, ("point", 8): 0.03, ("cell", 4): 0.20, ("cell", 8): 0.06}[
        (location, cells_across)]
    low = -0.02 if location == "point" else -0.08
    for key in ESTIMATORS:
        assert low < r[key] / width - 1 < high, key
    assert r["interface_eps"] == pytest.approx(r["width_threshold_free"] / BAND)
    # dc/dn is a logistic density of variance pi^2 eps^2 / 3 (REFERENCES.md [calc])
    assert 0.96 < r["interface_variance"] / (np.pi ** 2 * eps ** 2 / 3) < (1 + high) ** 2
    # planar: the contour size is the slab's cross-section (exact geometry); pyramid centres carry
    # the mean of nonlinear corner values, so the contour ripples at O(h^2); cell data averaged
    # to points on diagonal splits ripples more (up to +2.7 % on tetrahedra)
    cross = mesh.bounds[1, 1] ** (mesh.dimension - 1)
    assert r["interface_size"] == pytest.approx(cross, rel=3e-3 if location == "point" else 3e-2)


# Cahn & Hilliard (1958) equilibrium phi = tanh(x / (sqrt2 eps)) in [-1, 1]: the 5-95 % thickness
# (phi from -0.9 to 0.9) is 4.164066 eps (REFERENCES.md [calc]); as c it is the logistic of
# eps_c = eps / sqrt2
@pytest.mark.parametrize("kind", ["quad", "tetra"])
@pytest.mark.parametrize("cells_across", [4, 8])
def test_cahn_hilliard_profile_widths(kind, cells_across):
    mesh, width = _slab(kind, cells_across)
    eps_ch = width / 4.164066
    ind = _indicator(mesh, "point", lambda X: np.tanh((X[:, 0] - 0.4981) / (np.sqrt(2) * eps_ch)),
                     range=(-1, 1))
    r = interface_metrics(mesh, ind)
    high = 0.08 if cells_across == 4 else 0.03
    for key in ESTIMATORS:
        assert -0.02 < r[key] / (4.164066 * eps_ch) - 1 < high, key
    assert -0.02 < r["interface_eps"] / (eps_ch / np.sqrt(2)) - 1 < high


def test_curved_interface_width():
    # a circle of radius R = 0.3 with w = 8 cells: curvature adds O(w^2/R) (REFERENCES.md [calc])
    mesh = grid_mesh((96, 96), kind="triangle")
    width = 8 / 96
    eps = width / BAND
    d = np.linalg.norm(mesh.coordinates - 0.5, axis=1)
    r = interface_metrics(mesh, 0.5 * (1 + np.tanh((0.3 - d) / (2 * eps))))
    assert r["interface_size"] == pytest.approx(2 * np.pi * 0.3, rel=2e-3)
    for key in ESTIMATORS:
        assert r[key] == pytest.approx(width, rel=0.05), key


def test_width_in_cells_and_under_resolution():
    # fewer than 4 cells across 0.1 < c < 0.9 counts as under-resolved (common practice):
    # 4 cells across 5-95 % are 4 ln9/ln19 = 2.98 cells across 10-90 %; 8 are 5.97
    coarse, w4 = _slab("quad", 4)
    fine, w8 = _slab("quad", 8)
    for mesh, width, fraction in ((coarse, w4, 1.0), (fine, w8, 0.0)):
        eps = width / BAND
        r = interface_metrics(mesh, 0.5 * (1 + np.tanh((mesh.coordinates[:, 0] - 0.5037) / (2 * eps))))
        assert r["under_resolved_interface_fraction"] == fraction
        assert r["interface_width_cells"] == pytest.approx(r["interface_width"] * (1 / mesh.cell_sizes[0]))
    sharp = grid_mesh((40, 4), kind="quad")
    step = (sharp.cell_centroids[:, 0] > 0.5).astype(float)  # a volume-of-fluid-like jump
    r = interface_metrics(sharp, step)
    assert r["under_resolved_interface_fraction"] == 1.0
    assert r["interface_width_cells"] < 2.5


def test_profile_table_finds_the_widest_place():
    # eps grows linearly with y: the widest fit is at the top, the 90th percentile above the median
    mesh = grid_mesh((80, 20), kind="quad")
    x, y = mesh.coordinates.T
    eps = (0.01 + 0.01 * y)
    c = 0.5 * (1 + np.tanh((x - 0.5) / (2 * eps)))
    r = interface_metrics(mesh, c)
    assert r["widest_y"] > 0.9
    assert r["width_profile_p90"] > r["width_profile_median"]
    table = interface_profile_table(mesh, c)
    assert list(table.columns) == list(PROFILE_COLUMNS)
    assert len(table) == find_interface(mesh, c).n_elements
    # each local fit returns the local logistic width, 5.889 eps(y) (Olsson & Kreiss 2005)
    expected = BAND * (0.01 + 0.01 * table["y"])
    assert np.allclose(table["width"], expected, rtol=0.06)
    assert np.allclose(table["offset"], 0.0, atol=0.2 / 80)


def test_profile_fit_ignores_a_second_interface():
    # two parallel interfaces 0.2 apart (a film): each local fit still sees one profile
    mesh = grid_mesh((100, 4), bounds=[(0, 1), (0, 0.04)], kind="quad")
    x = mesh.coordinates[:, 0]
    eps = 0.01
    c = 0.5 * (np.tanh((x - 0.4) / (2 * eps)) - np.tanh((x - 0.6) / (2 * eps)))
    table = interface_profile_table(mesh, c)
    assert np.allclose(table["interface_eps"], eps, rtol=0.05)


def test_max_samples_strides_the_table():
    mesh = grid_mesh((40, 40), kind="triangle")
    d = np.linalg.norm(mesh.coordinates - 0.5, axis=1)
    c = 0.5 * (1 + np.tanh((0.3 - d) / 0.04))
    table = interface_profile_table(mesh, c, max_samples=10)
    assert 5 <= len(table) <= 10
    assert table["weight"].sum() == pytest.approx(find_interface(mesh, c).size, rel=0.3)


def test_no_interface_gives_nan():
    mesh = grid_mesh((6, 6))
    r = interface_metrics(mesh, np.zeros(mesh.n_points))
    assert list(r) == list(METRIC_KEYS)
    assert all(np.isnan(v) for v in r.values())
    assert interface_profile_table(mesh, np.ones(mesh.n_cells)).empty


def test_nan_cells_are_left_out():
    mesh, width = _slab("quad", 8)
    x = mesh.coordinates[:, 0]
    c = 0.5 * (1 + np.tanh((x - 0.5037) / (2 * width / BAND)))
    c[x < 0.1] = np.nan  # far from the interface: nothing changes
    r = interface_metrics(mesh, c)
    assert r["interface_width"] == pytest.approx(width, rel=0.03)


def test_given_contour_is_used():
    mesh = grid_mesh((20, 20), kind="triangle")
    c = 0.5 * (1 + np.tanh((mesh.coordinates[:, 0] - 0.5) / 0.04))
    contour = find_interface(mesh, c)
    assert interface_metrics(mesh, c, contour=contour) == pytest.approx(interface_metrics(mesh, c),
                                                                         nan_ok=True)


@pytest.mark.parametrize("kwargs,match", [({"max_samples": 0}, "max_samples must be"),
                                          ({"contour": "line"}, "contour must be a Contour"),
                                          ({"level": None}, "level must be a number")])
def test_metric_option_errors(kwargs, match):
    mesh = grid_mesh((4, 4))
    with pytest.raises(OptionError, match=match):
        interface_metrics(mesh, np.zeros(mesh.n_points), **kwargs)


def test_indicator_shape_error():
    mesh = grid_mesh((4, 4))
    with pytest.raises(OptionError, match="indicator must be"):
        interface_metrics(mesh, np.zeros(7))


def test_boundedness():
    from phasegauge.analysis.conservation import boundedness

    # c = 1.2 on the left half, -0.1 on the right: overshoot 0.2 * 0.5 + 0.1 * 0.5 (exact)
    mesh = grid_mesh((10, 10), kind="triangle")
    c = np.where(mesh.cell_centroids[:, 0] < 0.5, 1.2, -0.1)
    ind = make_indicator(mesh, StepFields(cell_data={"c": c}), "c", warn=False)
    r = boundedness(mesh, ind)
    assert r["c_min"] == pytest.approx(-0.1) and r["c_max"] == pytest.approx(1.2)
    assert r["overshoot_volume"] == pytest.approx(0.15)
    assert np.isnan(boundedness(mesh, np.full(mesh.n_cells, np.nan))["c_min"])


# ------------------------------------------------------------------ diffusion audit

def _upwind_history(nx=100, courant=0.5, steps=100, every=10):
    """First-order upwind advection of a logistic profile at u = 1 on [0, 1] (written here)."""
    dx = 1.0 / nx
    u = 1.0
    dt = courant * dx / u
    xc = (np.arange(nx) + 0.5) * dx
    c = 1.0 - 0.5 * (1 + np.tanh((xc - 0.2) / (2 * dx)))
    history = [(0.0, c.copy())]
    for n in range(1, steps + 1):
        c[1:] = c[1:] - courant * (c[1:] - c[:-1])
        c[0] = c[0] - courant * (c[0] - 1.0)  # inflow: c = 1
        if n % every == 0:
            history.append((n * dt, c.copy()))
    return history, u, dx, courant


# First-order upwind adds numerical diffusion D = u dx (1 - C) / 2 (modified equation; LeVeque
# 2002, Finite Volume Methods for Hyperbolic Problems). The variance of dc/dn grows by 2 D t
# (REFERENCES.md [calc]); the constant interpolation bias cancels in the slope. Tolerance 4 %.
@pytest.mark.parametrize("kind", ["quad", "triangle", "hexahedron"])
def test_upwind_numerical_diffusion(kind):
    history, u, dx, courant = _upwind_history()
    nx = len(history[0][1])
    if kind == "hexahedron":
        mesh = grid_mesh((nx, 2, 2), [(0, 1), (0, 2 * dx), (0, 2 * dx)], kind=kind)
    else:
        mesh = grid_mesh((nx, 3), [(0, 1), (0, 3 * dx)], kind=kind)
    xc = mesh.cell_centroids[:, 0]
    centres = (np.arange(nx) + 0.5) * dx
    times, variances = [], []
    for t, profile in history:
        cell_values = np.interp(xc, centres, profile)
        times.append(t)
        variances.append(interface_metrics(mesh, cell_values)["interface_variance"])
    audit = diffusion_audit(times, variances, physical_diffusivity=1e-3)
    expected = u * dx * (1 - courant) / 2
    assert audit["D_num"] == pytest.approx(expected, rel=0.04)
    assert audit["D_num_stderr"] < 0.02 * expected
    assert audit["D_ratio"] == pytest.approx(audit["D_num"] / 1e-3)
    assert audit["widening"] and audit["r_squared"] > 0.99
    # a physical diffusivity of zero (pure advection) is accepted: the numerical value stands alone
    alone = diffusion_audit(times, variances, physical_diffusivity=0.0)
    assert alone["D_num"] == audit["D_num"] and np.isnan(alone["D_ratio"])


def test_audit_on_an_exact_line():
    # var = 2 + 2 D t with D = 0.25 (REFERENCES.md: D = 1/2 d(var)/dt)
    t = np.linspace(0, 4, 9)
    r = diffusion_audit(t, 2 + 0.5 * t)
    assert r["D_num"] == pytest.approx(0.25)
    assert r["D_num_stderr"] == pytest.approx(0.0, abs=1e-12)
    assert r["variance_0"] == pytest.approx(2.0)
    assert r["width_growth"] == pytest.approx(np.sqrt(4 / 2) - 1)
    assert r["widening"] and r["n_steps"] == 9 and np.isnan(r["D_ratio"])


def test_audit_logistic_form():
    # logistic: D = (pi^2/6) d(eps^2)/dt (REFERENCES.md [calc]): eps^2 = 1e-4 + 3e-5 t
    t = np.linspace(0, 2, 6)
    variances = np.pi ** 2 * (1e-4 + 3e-5 * t) / 3
    assert diffusion_audit(t, variances)["D_num"] == pytest.approx(np.pi ** 2 / 6 * 3e-5)


def test_audit_is_robust_to_an_outlier_and_flags_no_widening_when_flat():
    rng = np.random.default_rng(4)
    t = np.linspace(0, 1, 30)
    v = 1.0 + 0.2 * t + rng.normal(0, 1e-3, t.size)
    v[7] += 0.5  # one disturbed step
    r = diffusion_audit(t, v)
    assert r["D_num"] == pytest.approx(0.1, rel=0.03)
    flat = diffusion_audit(t, 1.0 + rng.normal(0, 1e-3, t.size))
    assert not flat["widening"]
    tiny = diffusion_audit(t, 1.0 + 0.02 * t)  # significant but only 1 % wider
    assert not tiny["widening"]


def test_audit_with_too_few_steps_or_nan():
    r = diffusion_audit([0, 1, 2], [1.0, np.nan, 1.2])
    assert np.isnan(r["D_num"]) and r["widening"] is False and r["n_steps"] == 2


@pytest.mark.parametrize("args,kwargs,match", [
    (([0, 1], [1, 2, 3]), {}, "differ in length"),
    (([[0, 1]], [[1, 2]]), {}, "one-dimensional"),
    (([0, 1, 2], [1, 2, 3]), {"min_steps": 2}, "min_steps must be"),
    (([0, 1, 2], [1, 2, 3]), {"physical_diffusivity": -1}, "physical diffusivity must be"),
    (([0, 1, 2], [1, 2, 3]), {"confidence": 1.5}, "confidence must lie"),
])
def test_audit_errors(args, kwargs, match):
    with pytest.raises(OptionError, match=match):
        diffusion_audit(*args, **kwargs)


def test_audit_accepts_pandas_columns():
    df = pd.DataFrame({"time": [0.0, 1.0, 2.0, 3.0], "interface_variance": [1.0, 1.1, 1.2, 1.3]})
    assert diffusion_audit(df["time"], df["interface_variance"])["D_num"] == pytest.approx(0.05)
