"""Liquid-liquid tie lines of a ternary NRTL mixture against a published case."""

import numpy as np
import pytest

from phasegauge.analysis.thermo import NrtlModel, liquid_liquid_split, nrtl_ln_gamma, nrtl_split, nrtl_tau

# Ethyl acetate (1) / water (2) / ethanol (3) at 343 K, NRTL parameters of Renon & Prausnitz (1969),
# Ind. Eng. Chem. Process Des. Dev. 8, 413, as used in the PyTherm applied-thermodynamics course
# notebook "GE4 LLE flash" (I. Segtovich): Delta g_ij in cal/mol 12: 1335, 21: 2510, 23: 976, 32: 88,
# 13: 301, 31: 322; alpha_12 0.4, alpha_13 = alpha_23 0.3; feed 0.42 / 0.52 / 0.06. The notebook's
# tie line (converged to 1e-5 in K): x_I = (0.58176, 0.34614, 0.07209), x_II = (0.02192, 0.94784, 0.03024).
CAL = 4.184
R_NOTEBOOK = 8.3144598
DELTA_G = np.array([[0.0, 1335.0, 301.0], [2510.0, 0.0, 976.0], [322.0, 88.0, 0.0]]) * CAL
ALPHA = np.array([[0.0, 0.4, 0.3], [0.4, 0.0, 0.3], [0.3, 0.3, 0.0]])
PHASE_I = (0.58176, 0.34614, 0.07209)
PHASE_II = (0.02192, 0.94784, 0.03024)


def _split():
    tau = nrtl_tau(DELTA_G, 343.0, gas_constant=R_NOTEBOOK)
    return tau, nrtl_split([0.42, 0.52, 0.06], tau, ALPHA)


def test_published_ethyl_acetate_water_ethanol_tie_line():
    # Renon & Prausnitz (1969) parameters; published tie line (see above), 5e-5 for the notebook's tolerance
    _, line = _split()
    organic, aqueous = (line.phase_one, line.phase_two) if line.phase_one[0] > line.phase_two[0] else (
        line.phase_two, line.phase_one)
    np.testing.assert_allclose(organic, PHASE_I, atol=5e-5)
    np.testing.assert_allclose(aqueous, PHASE_II, atol=5e-5)


def test_tie_line_satisfies_isoactivity_and_the_lever_rule():
    tau, line = _split()
    a, b = line.phase_one, line.phase_two
    np.testing.assert_allclose(np.log(a) + nrtl_ln_gamma(a, tau, ALPHA), np.log(b) + nrtl_ln_gamma(b, tau, ALPHA),
                               atol=1e-10)
    np.testing.assert_allclose((1 - line.fraction_two) * a + line.fraction_two * b, [0.42, 0.52, 0.06], atol=1e-12)
    # ethanol (the solute) prefers the organic phase: K = 0.07209 / 0.03024 from the published line
    k = line.partition_coefficients()
    ethanol_k = k[2] if a[0] > b[0] else 1 / k[2]
    assert ethanol_k == pytest.approx(0.07209 / 0.03024, rel=2e-3)


def test_one_stable_liquid_gives_no_tie_line():
    # ethanol-rich feeds are miscible (the plait point of this system is far below 0.5 ethanol)
    tau = nrtl_tau(DELTA_G, 343.0, gas_constant=R_NOTEBOOK)
    assert nrtl_split([0.2, 0.3, 0.5], tau, ALPHA) is None


def test_multicomponent_nrtl_matches_the_binary_form():
    # the same Renon & Prausnitz (1968) equations written for two components
    model = NrtlModel(tau_a=(1.1, 0.7), tau_b=(100.0, -50.0), alpha=0.35)
    t = 310.0
    tau12, tau21 = model.tau(t)
    x = np.linspace(0.05, 0.95, 7)
    binary = np.column_stack(model.ln_gamma(x, t))
    multi = nrtl_ln_gamma(np.column_stack([x, 1 - x]), np.array([[0.0, tau12], [tau21, 0.0]]), 0.35)
    np.testing.assert_allclose(multi, binary, rtol=1e-12)


def test_binary_tie_line_equals_the_binodal():
    from phasegauge.analysis.thermo import equilibrium_at

    model = NrtlModel(tau_a=(0.5, 1.0), tau_b=(600.0, 500.0), alpha=0.3)
    eq = equilibrium_at(model, 300.0)
    line = liquid_liquid_split([0.5, 0.5], lambda x: np.array(model.ln_gamma(x[0], 300.0)))
    pair = sorted([line.phase_one[0], line.phase_two[0]])
    assert pair[0] == pytest.approx(eq.binodal_lean, abs=1e-9)
    assert pair[1] == pytest.approx(eq.binodal_rich, abs=1e-9)


def test_bad_feed_is_refused():
    from phasegauge.errors import OptionError

    with pytest.raises(OptionError, match="positive mole fractions summing to 1"):
        liquid_liquid_split([0.5, 0.6], lambda x: np.zeros(2))
