"""Grid convergence index against published worked examples."""

import numpy as np
import pytest

from phasegauge.analysis.convergence import grid_convergence, representative_cell_size
from phasegauge.errors import OptionError


def test_celik_2008_table_1_first_column():
    # Celik et al. 2008, J. Fluids Eng. 130, 078001, Table 1, first column (2D: h = (A/N)^(1/2)):
    # N = 18000, 8000, 4500; r21 = 1.5, r32 = 1.333; phi = 6.063, 5.972, 5.863
    # -> p = 1.53, phi_ext21 = 6.1685, e_a21 = 1.5 %, e_ext21 = 1.7 %, GCI_fine21 = 2.2 %
    h = [representative_cell_size(1.0, n, 2) for n in (18000, 8000, 4500)]
    out = grid_convergence(6.063, 5.972, 5.863, cell_sizes=h)
    assert out["refinement_ratio_21"] == pytest.approx(1.5, abs=5e-4)
    assert out["refinement_ratio_32"] == pytest.approx(1.333, abs=5e-4)
    assert round(out["apparent_order"], 2) == 1.53
    assert round(out["extrapolated"], 4) == 6.1685
    assert round(100 * out["relative_error_fine"], 1) == 1.5
    assert round(100 * out["extrapolated_relative_error_fine"], 1) == 1.7
    assert round(100 * out["gci_fine"], 1) == 2.2
    assert not out["oscillatory"]


def test_constant_ratio_two_worked_example():
    # NASA verification tutorial (examining spatial grid convergence): h = 1, 2, 4,
    # f = 0.97050, 0.96854, 0.96178 -> p = 1.78618, f_exact = 0.971300, GCI12 = 0.1031 %, GCI23 = 0.3562 %,
    # and GCI23 / (r^p GCI12) close to 1 (asymptotic range)
    out = grid_convergence(0.97050, 0.96854, 0.96178, cell_sizes=(1.0, 2.0, 4.0))
    assert out["apparent_order"] == pytest.approx(1.78618, abs=2e-5)
    assert round(out["extrapolated"], 6) == 0.971300
    assert round(100 * out["gci_fine"], 4) == 0.1031
    assert round(100 * out["gci_medium"], 4) == 0.3562
    assert out["asymptotic_ratio"] == pytest.approx(1.0, abs=0.01)


def test_exact_power_law_recovered_with_non_constant_ratios():
    # analytic: phi(h) = 2 + 0.3 h^1.7 on h = 0.1, 0.17, 0.21 gives p = 1.7 and phi_ext = 2 exactly
    h = np.array([0.1, 0.17, 0.21])
    phi = 2 + 0.3 * h ** 1.7
    out = grid_convergence(*phi, cell_sizes=h)
    assert out["apparent_order"] == pytest.approx(1.7, rel=1e-9)
    assert out["extrapolated"] == pytest.approx(2.0, rel=1e-12)
    # relative errors divide by phi1 and phi2, so the asymptotic ratio of an exact power law is phi1 / phi2
    assert out["asymptotic_ratio"] == pytest.approx(phi[0] / phi[1], rel=1e-9)


def test_oscillatory_flagged_and_arrays_element_by_element():
    fine, medium, coarse = np.array([1.0, 6.063, 1.0]), np.array([0.9, 5.972, 1.0]), np.array([0.95, 5.863, 1.0])
    out = grid_convergence(fine, medium, coarse, cell_sizes=(1.0, 1.5, 2.0))
    assert out["oscillatory"].tolist() == [True, False, False]
    assert np.isnan(out["apparent_order"][2])  # equal values: no order
    assert np.isfinite(out["apparent_order"][:2]).all()


def test_cell_sizes_in_wrong_order_refused():
    with pytest.raises(OptionError, match="FINE MEDIUM COARSE"):
        grid_convergence(1, 2, 3, cell_sizes=(2.0, 1.0, 4.0))
    with pytest.raises(OptionError, match="positive"):
        representative_cell_size(0.0, 10, 2)


def test_round_off_differences_give_no_order():
    # a segregation intensity that is zero on every mesh, to round-off (3.8e-28, 1.9e-27, 1.2e-28): no
    # order, no GCI, not oscillatory (Celik et al. 2008 take the order from differences that exist)
    out = grid_convergence(3.8e-28, 1.9e-27, 1.2e-28, cell_sizes=(1.0, 2.0, 4.0), scale=1.0)
    assert np.isnan(out["apparent_order"]) and np.isnan(out["gci_fine"]) and not out["oscillatory"]
    out = grid_convergence(1.0 - 1e-14, 1.0, 1.0 - 2e-14, cell_sizes=(1.0, 2.0, 4.0))
    assert np.isnan(out["apparent_order"]) and not out["oscillatory"]


def test_small_dimensional_values_still_converge():
    # a micro-channel volume of 1e-15 m^3 converging at second order (phi = V (1 + h^2), by hand):
    # its own magnitude is its scale, so its differences are no round-off
    h = np.array([0.01, 0.02, 0.04])
    phi = 1e-15 * (1.0 + h ** 2)
    out = grid_convergence(*phi, cell_sizes=tuple(h))
    assert out["apparent_order"] == pytest.approx(2.0, rel=1e-9)
    assert out["extrapolated"] == pytest.approx(1e-15, rel=1e-9)


def test_a_conserving_run_gives_no_drift_order():
    # phase_volume_drift of a run that conserves to round-off (a fraction: scale 1), and its change
    # V - V0 on the phase volume's scale (0.3): no order, no GCI (the round-off figures by hand)
    import pandas as pd

    from phasegauge.analysis._grid_convergence import convergence_table

    frames = [pd.DataFrame({"time": [0.0, 1.0], "phase_volume": [0.3, 0.3 + e],
                            "phase_volume_drift": [0.0, e / 0.3], "phase_volume_drift_abs": [0.0, e]})
              for e in (3e-17, -5e-17, 1e-17)]
    table = convergence_table(*frames, cell_sizes=(1.0, 2.0, 4.0))
    rows = table[(table["time"] == 1.0) & table["quantity"].isin(["phase_volume_drift", "phase_volume_drift_abs"])]
    assert len(rows) == 2 and rows["apparent_order"].isna().all() and not rows["oscillatory"].any()
