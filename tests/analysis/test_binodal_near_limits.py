"""The binodal where it is hard in floating point: within 1e-6 of a pure component, and near a critical point."""

import warnings

import numpy as np
import pytest
from scipy.optimize import brentq, fsolve

from phasegauge.analysis.thermo import NrtlModel, RegularSolutionModel, equilibrium_at, phase_diagram
from phasegauge.errors import AnalysisError, PhasegaugeWarning


def _regular_lean(chi):
    """The lean binodal of g/RT = x ln x + (1-x) ln(1-x) + chi x (1-x): the root of ln(x/(1-x)) = chi (2x - 1)
    (analytic, symmetric: rich = 1 - lean) below the spinodal x (1 - x) = 1 / (2 chi), by scipy's brentq."""
    spinodal = 0.5 - 0.5 * np.sqrt(1 - 2 / chi)
    return brentq(lambda x: np.log(x) - np.log1p(-x) - chi * (2 * x - 1), 1e-300, spinodal, xtol=1e-310, rtol=1e-15)


@pytest.mark.parametrize("chi", [12.0, 14.0, 20.0, 30.0])
def test_regular_solution_binodal_within_1e_6_of_the_pure_components(chi):
    # chi 14: lean 8.3e-7, chi 30: 9.4e-14; both sides must solve (the rich one carries 1 - x as sigmoid(-u):
    # 1 - x in floating point left Delta mu_2 a noise of 1e-16 / (1 - x) and the binodal was refused from chi 14)
    lean = _regular_lean(chi)
    eq = equilibrium_at(RegularSolutionModel(A_a=chi), 300.0)
    assert eq.binodal_lean == pytest.approx(lean, rel=1e-9)
    # 1 - rich is rounded to the float spacing at 1 (1.1e-16), the rest to 1e-9 relative (our threshold)
    assert 1 - eq.binodal_rich == pytest.approx(lean, rel=1e-9, abs=2.3e-16)
    assert eq.confirmed


def _nrtl_ln_gamma(x1, x2, tau12, tau21, alpha):
    """Renon & Prausnitz (1968) binary NRTL ln gamma_1, ln gamma_2, written out with x1 and x2 given apart."""
    g12, g21 = np.exp(-alpha * tau12), np.exp(-alpha * tau21)
    ln_g1 = x2 ** 2 * (tau21 * (g21 / (x1 + x2 * g21)) ** 2 + tau12 * g12 / (x2 + x1 * g12) ** 2)
    ln_g2 = x1 ** 2 * (tau12 * (g12 / (x2 + x1 * g12)) ** 2 + tau21 * g21 / (x1 + x2 * g21) ** 2)
    return ln_g1, ln_g2


def test_a_binodal_within_1e_6_of_x_1_solves_as_its_mirror_does():
    # an NRTL pair like a hydrocarbon in water: named one way round the rich phase is 1 - 2.7e-7, the
    # other way round (the same model with the components swapped) the lean phase is 2.7e-7
    t, alpha, b = 298.15, 0.2, (4000.0, 2098.27)
    rich_side = equilibrium_at(NrtlModel(tau_b=b, alpha=alpha), t)
    lean_side = equilibrium_at(NrtlModel(tau_b=b[::-1], alpha=alpha), t)
    assert 1 - rich_side.binodal_rich < 1e-6
    # 1 - rich is exact to the float spacing at 1 (1.1e-16 / 2.7e-7 = 4e-10 relative)
    assert 1 - rich_side.binodal_rich == pytest.approx(lean_side.binodal_lean, rel=1e-9)
    assert rich_side.binodal_lean == pytest.approx(1 - lean_side.binodal_rich, abs=1e-12)

    # scipy's fsolve on isoactivity in ln x_a and ln(1 - x_b), with the Renon-Prausnitz gammas written out
    tau12, tau21 = b[0] / t, b[1] / t

    def isoactivity(v):
        xa, eb = np.exp(v)
        a1, a2 = _nrtl_ln_gamma(xa, 1 - xa, tau12, tau21, alpha)
        b1, b2 = _nrtl_ln_gamma(1 - eb, eb, tau12, tau21, alpha)
        return [np.log(xa) + a1 - np.log1p(-eb) - b1, np.log1p(-xa) + a2 - np.log(eb) - b2]

    start = np.log([rich_side.binodal_lean * 1.1, (1 - rich_side.binodal_rich) * 0.9])
    xa, eb = np.exp(fsolve(isoactivity, start, xtol=1e-14))
    assert rich_side.binodal_lean == pytest.approx(xa, rel=1e-9)
    assert 1 - rich_side.binodal_rich == pytest.approx(eb, rel=1e-9)


@pytest.mark.parametrize("excess", [1e-8, 1e-10])
def test_the_binodal_near_a_critical_point_is_not_newtons_start(excess):
    # regular solution at chi = 2 + excess: the half-width y/2 of the binodal solves ln((1+y)/(1-y)) = chi y
    # (the analytic equation above with y = 2x - 1), by scipy's brentq above the spinodal's y; the start
    # (twice the spinodal's half-width, 2/sqrt(3) of the binodal's) passed an absolute test on Delta mu,
    # which shrinks like (x_b - x_a)^3 here
    chi = 2.0 + excess
    spinodal = np.sqrt(1 - 2 / chi)
    y = brentq(lambda y: np.log1p(y) - np.log1p(-y) - chi * y, spinodal, 0.5, xtol=1e-300, rtol=1e-15)
    eq = equilibrium_at(RegularSolutionModel(A_a=chi), 300.0)
    assert 0.5 - eq.binodal_lean == pytest.approx(y / 2, rel=1e-3)   # our threshold (the brentq root: 1e-6)
    assert eq.binodal_rich - 0.5 == pytest.approx(y / 2, rel=1e-3)


def test_a_composition_beyond_double_precision_is_refused_naming_the_cause():
    # chi 40: the binodal is exp(-40) = 4e-18 (analytic, above), 1 - x of the rich phase is below a float's
    # spacing at 1: the message names that, not a convergence failure
    with pytest.raises(AnalysisError, match="within about 2e-16 of a pure component"):
        equilibrium_at(RegularSolutionModel(A_a=40.0), 300.0)


def test_a_phase_diagram_leaves_an_unsolvable_temperature_empty_with_one_warning():
    # A = 10500 / T: 35 at 300 K (binodal 6.3e-16, analytic as above), beyond double precision below ~290 K
    model = RegularSolutionModel(A_b=10500.0)
    t = np.linspace(255.0, 345.0, 7)
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        diagram = phase_diagram(model, t)
    ours = [w for w in caught if issubclass(w.category, PhasegaugeWarning)]
    assert len(ours) == 1 and "the binodal was not solved at 3 temperatures from 255 to 285 K" in str(ours[0].message)
    assert not diagram["solved"][:3].any() and np.isnan(diagram["binodal_lean"][:3]).all()
    assert diagram["solved"][3:].all()
    for k in range(3, 7):
        assert diagram["binodal_lean"][k] == pytest.approx(_regular_lean(10500.0 / t[k]), rel=1e-9)
