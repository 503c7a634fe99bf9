"""Binodal, spinodal and critical points of binary mixtures against analytic and published values."""

import numpy as np
import pytest

from phasegauge.analysis.thermo import (DoubleWellModel, NrtlModel, RegularSolutionModel, binodal,
                                        critical_points, equilibrium_at, phase_diagram, spinodal)


@pytest.mark.parametrize("a, lean, spinodal_lean", [(2.5, 0.144794, 0.276393), (3.0, 0.070720, 0.211325)])
def test_regular_solution_binodal_and_spinodal(a, lean, spinodal_lean):
    # Regular solution (one-constant Margules): the binodal solves ln(x/(1-x)) = A (2x - 1) and the
    # spinodal x (1 - x) = 1 / (2A) (analytic; REFERENCES.md: A 2.5 -> 0.144794 / 0.855206,
    # spinodal 0.276393; A 3 -> 0.070720)
    eq = equilibrium_at(RegularSolutionModel(A_a=a), 300.0)
    assert eq.binodal_lean == pytest.approx(lean, abs=1e-6)
    assert eq.binodal_rich == pytest.approx(1 - lean, abs=1e-6)
    assert eq.spinodal_lean == pytest.approx(spinodal_lean, abs=1e-6)
    assert eq.spinodal_rich == pytest.approx(1 - spinodal_lean, abs=1e-6)
    assert eq.spinodal_lean == pytest.approx(0.5 - 0.5 * np.sqrt(1 - 2 / a), abs=1e-10)
    x = eq.binodal_lean
    assert np.log(x / (1 - x)) == pytest.approx(a * (2 * x - 1), abs=1e-9)
    assert eq.confirmed and eq.separates


def test_regular_solution_critical_point_is_a_2_at_half():
    # analytic: g'' = 1/(x(1-x)) - 2A vanishes first at x = 1/2 when A = 2; A = b / T gives Tc = b / 2
    points = critical_points(RegularSolutionModel(A_b=750.0), temperatures=(100.0, 2000.0))
    assert len(points) == 1
    assert points[0].temperature == pytest.approx(375.0, rel=1e-8)
    assert points[0].composition == pytest.approx(0.5, abs=1e-6)
    assert points[0].kind == "UCST"
    assert not equilibrium_at(RegularSolutionModel(A_a=1.99), 300.0).separates
    assert equilibrium_at(RegularSolutionModel(A_a=2.01), 300.0).separates


def test_lower_critical_solution_temperature():
    # A = 4 - 600 / T grows with T: A = 2 (critical, analytic) at T = 300 K, separated above it
    model = RegularSolutionModel(A_a=4.0, A_b=-600.0)
    points = critical_points(model, temperatures=(100.0, 1000.0))
    assert [p.kind for p in points] == ["LCST"]
    assert points[0].temperature == pytest.approx(300.0, rel=1e-8)
    assert not equilibrium_at(model, 290.0).separates
    assert equilibrium_at(model, 310.0).separates


def test_nrtl_with_alpha_zero_is_margules_with_a_sum_of_taus():
    # Renon & Prausnitz (1968): alpha = 0 reduces NRTL to one-constant Margules with A = tau12 + tau21
    nrtl = NrtlModel(tau_a=(1.1, 1.9), tau_b=(30.0, -60.0), alpha=0.0)
    t = 300.0
    margules = RegularSolutionModel(A_a=1.1 + 1.9, A_b=30.0 - 60.0)
    x = np.linspace(0.01, 0.99, 50)
    np.testing.assert_allclose(nrtl.mixing_gibbs(x, t), margules.mixing_gibbs(x, t), rtol=1e-12)
    a, b = equilibrium_at(nrtl, t), equilibrium_at(margules, t)
    assert a.binodal_lean == pytest.approx(b.binodal_lean, abs=1e-10)
    assert a.binodal_rich == pytest.approx(b.binodal_rich, abs=1e-10)


@pytest.mark.parametrize("alpha, tau_c", [(0.0, 1.0000), (0.2, 1.1433), (0.3, 1.2802)])
def test_symmetric_nrtl_critical_tau(alpha, tau_c):
    # REFERENCES.md (computed): symmetric NRTL (tau12 = tau21 = tau) becomes unstable at tau 1.0000
    # (alpha 0, = Margules A 2), 1.1433 (alpha 0.2), 1.2802 (alpha 0.3), at x = 1/2 by symmetry
    model = NrtlModel(tau_a=(0.0, 0.0), tau_b=(300.0, 300.0), alpha=alpha)
    points = critical_points(model, temperatures=(50.0, 1000.0))
    assert len(points) == 1 and points[0].kind == "UCST"
    assert 300.0 / points[0].temperature == pytest.approx(tau_c, abs=6e-5)
    assert points[0].composition == pytest.approx(0.5, abs=1e-5)


def test_isoactivity_and_global_stability_of_an_asymmetric_nrtl_pair():
    # the definition of the binodal: equal activities of both components (Renon & Prausnitz 1968),
    # and the common tangent lies below Delta g_mix everywhere (tangent-plane criterion)
    model = NrtlModel(tau_a=(0.5, 1.0), tau_b=(600.0, 500.0), alpha=0.3)
    t = 300.0
    eq = equilibrium_at(model, t)
    mu_a = model.chemical_potentials(np.array([eq.binodal_lean]), t)
    mu_b = model.chemical_potentials(np.array([eq.binodal_rich]), t)
    np.testing.assert_allclose(np.ravel(mu_a), np.ravel(mu_b), atol=1e-10)
    x = np.linspace(1e-6, 1 - 1e-6, 20001)
    g = model.mixing_gibbs(x, t)
    ga, gb = (model.mixing_gibbs(np.array([v]), t)[0] for v in (eq.binodal_lean, eq.binodal_rich))
    line = ga + (gb - ga) / (eq.binodal_rich - eq.binodal_lean) * (x - eq.binodal_lean)
    assert np.min(g - line) > -1e-12
    assert eq.binodal_lean < eq.spinodal_lean < eq.spinodal_rich < eq.binodal_rich


def test_strongly_immiscible_pair_keeps_its_digits():
    # A = 12: the binodal is near exp(-12) ~ 6e-6 (regular solution, analytic equation above)
    eq = equilibrium_at(RegularSolutionModel(A_a=12.0), 300.0)
    x = eq.binodal_lean
    assert 1e-6 < x < 1e-5
    assert np.log(x / (1 - x)) == pytest.approx(12.0 * (2 * x - 1), rel=1e-10)


def test_phase_diagram_over_temperatures_matches_single_solves():
    model = NrtlModel(tau_a=(0.5, 1.0), tau_b=(600.0, 500.0), alpha=0.3)
    t = np.linspace(250.0, 1200.0, 200)
    diagram = phase_diagram(model, t)
    tc = critical_points(model, temperatures=(100.0, 3000.0))[0].temperature
    assert np.all(np.isfinite(diagram["binodal_lean"][t < tc - 1]))
    assert np.all(np.isnan(diagram["binodal_lean"][t > tc + 1]))
    assert diagram["confirmed"].all()
    for k in (0, 57, 120):
        eq = equilibrium_at(model, t[k])
        assert diagram["binodal_lean"][k] == pytest.approx(eq.binodal_lean, abs=1e-12)
        assert diagram["spinodal_rich"][k] == pytest.approx(eq.spinodal_rich, abs=1e-12)
    # near the critical point the binodal closes onto it
    near = equilibrium_at(model, tc * (1 - 1e-5))
    xc = critical_points(model, temperatures=(100.0, 3000.0))[0].composition
    assert abs(near.binodal_lean - xc) < 0.02 and abs(near.binodal_rich - xc) < 0.02


def test_double_well_has_fixed_bulk_values():
    # f = (x - a)^2 (x - b)^2: minima at a and b, f'' = 0 at the midpoint -+ (b - a) / (2 sqrt 3) (analytic)
    model = DoubleWellModel(lean=0.1, rich=0.8)
    lean, rich, ok = binodal(model, [300.0, 400.0])
    assert np.all(lean == 0.1) and np.all(rich == 0.8) and ok.all()
    s_lean, s_rich = spinodal(model, 300.0)
    assert s_lean[0] == pytest.approx(0.45 - 0.35 / np.sqrt(3))
    assert critical_points(model) == []


def test_binodal_against_the_thermo_package():
    # thermo (Caleb Bell, Chemical Engineering Design Library) evaluates the NRTL activity
    # coefficients; the binodal is found here from its gammas alone: the lower convex hull of
    # Delta g_mix / RT (scipy.spatial.ConvexHull) and scipy's root finder on isoactivity
    thermo_nrtl = pytest.importorskip("thermo.nrtl")
    from scipy.optimize import fsolve
    from scipy.spatial import ConvexHull

    tau_a, tau_b, alpha, t = (0.5, 1.0), (600.0, 500.0), 0.3, 320.0

    def gammas(x):
        m = thermo_nrtl.NRTL(T=t, xs=[x, 1 - x], tau_as=[[0, tau_a[0]], [tau_a[1], 0]],
                             tau_bs=[[0, tau_b[0]], [tau_b[1], 0]], alpha_cs=[[0, alpha], [alpha, 0]])
        return np.array(m.gammas())

    xs = np.linspace(1e-4, 1 - 1e-4, 2001)
    g = np.array([x * np.log(x * gammas(x)[0]) + (1 - x) * np.log((1 - x) * gammas(x)[1]) for x in xs])
    hull = ConvexHull(np.column_stack([xs, g]))
    lower = [s for s, eq in zip(hull.simplices, hull.equations) if eq[1] < 0]
    widest = max(lower, key=lambda s: abs(xs[s[1]] - xs[s[0]]))
    start = np.sort(xs[widest])

    def activities(x):
        return np.array([x, 1 - x]) * gammas(x)

    def isoactivity(v):
        a, b = v
        return np.log(activities(a)) - np.log(activities(b))

    ref = np.sort(fsolve(isoactivity, start, xtol=1e-13))
    ours = equilibrium_at(NrtlModel(tau_a=tau_a, tau_b=tau_b, alpha=alpha), t)
    assert ours.binodal_lean == pytest.approx(ref[0], abs=1e-8)
    assert ours.binodal_rich == pytest.approx(ref[1], abs=1e-8)
    assert abs(start[0] - ref[0]) < 2e-3   # the hull alone already brackets it on this grid


@pytest.mark.parametrize("tau, alpha", [((5.7735198, 4.19731308), 0.3955669740864026),
                                        ((4.21346491, 2.90402641), 0.45864885239545133),
                                        ((3.71333566, 5.71380535), 0.3813830281232188)])
def test_two_separate_splits_give_the_widest_globally_stable_pair(tau, alpha):
    # NRTL with large tau and alpha near 0.5 has two unstable regions at one temperature; the pair
    # must be a bridge of the lower convex hull of Delta g_mix / RT (scipy.spatial.ConvexHull on a
    # fine grid) and satisfy isoactivity (regression: the outermost spinodal roots gave a pair that
    # failed the tangent test, or no convergence)
    from scipy.spatial import ConvexHull

    model = NrtlModel(tau_a=tau, alpha=alpha)
    eq = equilibrium_at(model, 300.0)
    assert eq.confirmed
    x = np.unique(np.concatenate([1 / (1 + np.exp(-np.linspace(-30, 30, 6001))), np.linspace(1e-4, 1 - 1e-4, 4001)]))
    g = model.mixing_gibbs(x, 300.0)
    hull = ConvexHull(np.column_stack([x, g]))
    bridges = [np.sort(x[s]) for s, q in zip(hull.simplices, hull.equations) if q[1] < 0]
    widest = max(bridges, key=lambda p: p[1] - p[0])
    assert eq.binodal_lean == pytest.approx(widest[0], abs=5e-3)
    assert eq.binodal_rich == pytest.approx(widest[1], abs=5e-3)
    mu_a = model.chemical_potentials(np.array([eq.binodal_lean]), 300.0)
    mu_b = model.chemical_potentials(np.array([eq.binodal_rich]), 300.0)
    np.testing.assert_allclose(np.ravel(mu_a), np.ravel(mu_b), atol=1e-9)


def test_closed_loop_has_a_lower_and_an_upper_critical_temperature():
    # alpha = 0, tau12 = tau21 = tau(T) = a + b / T + e ln T: Margules with A = 2 tau (Renon & Prausnitz
    # 1968), critical where tau = 1 (analytic A = 2); tau peaks at T = b / e, so both an LCST and a UCST
    from scipy.optimize import brentq

    a, b, e = 69.14, -3000.0, -10.0
    model = NrtlModel(tau_a=(a, a), tau_b=(b, b), tau_e=(e, e), alpha=0.0)
    points = critical_points(model, temperatures=(150.0, 600.0))
    assert [p.kind for p in points] == ["LCST", "UCST"]
    tau = lambda t: a + b / t + e * np.log(t) - 1.0   # noqa: E731
    expected = [brentq(tau, 150.0, b / e), brentq(tau, b / e, 600.0)]
    np.testing.assert_allclose([p.temperature for p in points], expected, rtol=1e-8)
    assert not equilibrium_at(model, 170.0).separates and equilibrium_at(model, 300.0).separates
