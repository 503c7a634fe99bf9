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
    # (its GCI23 / (r^p GCI12) with the apparent order is |f1 / f2| by algebra, so no check: NaN without a
    # formal order; with p_f = 2, by hand: (0.00676 / 3) / (4 x 0.00196 / 3) = 0.8622)
    out = grid_convergence(0.97050, 0.96854, 0.96178, cell_sizes=(1.0, 2.0, 4.0))
    assert out["apparent_order"] == pytest.approx(1.78618, abs=2e-5)
    assert round(out["extrapolated"], 6) == 0.971300
    assert round(100 * out["gci_fine"], 4) == 0.1031
    assert round(100 * out["gci_medium"], 4) == 0.3562
    assert np.isnan(out["asymptotic_ratio"])
    out = grid_convergence(0.97050, 0.96854, 0.96178, cell_sizes=(1.0, 2.0, 4.0), formal_order=2)
    assert out["asymptotic_ratio"] == pytest.approx(0.00676 / (4 * 0.00196), rel=1e-9)


def test_exact_power_law_recovered_with_non_constant_ratios():
    # analytic: phi(h) = 2 + 0.3 h^1.7 on h = 0.1, 0.17, 0.21 gives p = 1.7 and phi_ext = 2 exactly
    h = np.array([0.1, 0.17, 0.21])
    phi = 2 + 0.3 * h ** 1.7
    out = grid_convergence(*phi, cell_sizes=h)
    assert out["apparent_order"] == pytest.approx(1.7, rel=1e-9)
    assert out["extrapolated"] == pytest.approx(2.0, rel=1e-12)
    # with the formal order 1.7 the ratio (h3^p - h2^p)/(r32^p - 1) / (r21^p (h2^p - h1^p)/(r21^p - 1))
    # = h2^p / (r21^p h1^p) is 1 exactly (algebra), not phi1 / phi2 as with relative GCIs
    out = grid_convergence(*phi, cell_sizes=h, formal_order=1.7)
    assert out["asymptotic_ratio"] == pytest.approx(1.0, rel=1e-9)


def test_asymptotic_ratio_checks_the_formal_order_not_the_apparent_one():
    # phi = 1 + h^2 on h = 1, 2, 4: 2, 5, 17, eps21 = 3, eps32 = 12 (exact second order). Roache (1998)'s
    # GCI_23 = r^pf GCI_12 with the GCIs Fs |eps| / (r^pf - 1), by hand: p_f = 2: (12 / 3) / (4 x 3 / 3) = 1;
    # p_f = 1: (12 / 1) / (2 x 3 / 1) = 2. Without a formal order it was |phi1 / phi2| = 0.4 whatever the data
    out = grid_convergence(2.0, 5.0, 17.0, cell_sizes=(1.0, 2.0, 4.0))
    assert out["apparent_order"] == pytest.approx(2.0, rel=1e-12)
    assert np.isnan(out["asymptotic_ratio"])
    assert grid_convergence(2.0, 5.0, 17.0, cell_sizes=(1.0, 2.0, 4.0), formal_order=2)["asymptotic_ratio"] == \
        pytest.approx(1.0, rel=1e-12)
    assert grid_convergence(2.0, 5.0, 17.0, cell_sizes=(1.0, 2.0, 4.0), formal_order=1)["asymptotic_ratio"] == \
        pytest.approx(2.0, rel=1e-12)
    for bad in (0, -1, float("nan"), "two"):
        with pytest.raises(OptionError, match="formal order must be a positive number"):
            grid_convergence(2.0, 5.0, 17.0, cell_sizes=(1.0, 2.0, 4.0), formal_order=bad)


def test_oscillatory_flagged_and_arrays_element_by_element():
    # 1.0, 0.95, 1.05: signs alternate, |e32/e21| = 2; 1.0, 0.9, 0.95: |e32/e21| = 0.5, below the p -> 0
    # limit 1 of Celik's eq. (5) for alternating signs: oscillatory and divergent, no order
    fine, medium, coarse = (np.array([1.0, 6.063, 1.0, 1.0]), np.array([0.95, 5.972, 1.0, 0.9]),
                            np.array([1.05, 5.863, 1.0, 0.95]))
    out = grid_convergence(fine, medium, coarse, cell_sizes=(1.0, 1.5, 2.0))
    assert out["oscillatory"].tolist() == [True, False, False, True]
    assert out["divergent"].tolist() == [False, False, False, True]
    assert np.isnan(out["apparent_order"][2:]).all()  # equal values, divergent: no order
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


@pytest.mark.parametrize("order", [1.0, 2.0])
@pytest.mark.parametrize("r21, r32", [(1.3, 2.0), (2.0, 1.5), (1.5, 1.5), (1.54, 1.3)])
def test_exact_power_law_gives_its_order_for_any_ratios(r21, r32, order):
    # phi = phi0 + C h^p exactly: Celik et al. 2008 eqs. (3)-(10) give p, phi_ext21 = phi0 and
    # GCI_fine = 1.25 |phi1 - phi2| / |phi1| / (r21^p - 1) in closed form (for constant r, eq. (5) is
    # p = ln(e32/e21) / ln r). Refined by 1.3 then 2 the fixed-point iteration of eq. (5) oscillated away
    # (no figures); brentq on the signed form finds the root.
    h = np.array([1.0, r21, r21 * r32])
    phi0, c = 2.6, 0.005
    phi = phi0 + c * h ** order
    out = grid_convergence(*phi, cell_sizes=h)
    assert out["apparent_order"] == pytest.approx(order, rel=1e-9)
    assert out["extrapolated"] == pytest.approx(phi0, rel=1e-12)
    gci = 1.25 * abs(phi[0] - phi[1]) / phi[0] / (r21 ** order - 1)
    assert out["gci_fine"] == pytest.approx(gci, rel=1e-9)
    if r21 == r32:
        assert out["apparent_order"] == pytest.approx(np.log((phi[2] - phi[1]) / (phi[1] - phi[0])) / np.log(r21),
                                                      rel=1e-9)
    assert not out["divergent"] and not out["oscillatory"]


def test_equal_differences_with_unequal_ratios_get_their_order():
    # drop counts 5, 6, 7 on h = 1, 2, 3 (r21 = 2, r32 = 1.5): e32/e21 = 1 = 2^p (1.5^p - 1) / (2^p - 1)
    # holds at p = 1 (by hand: 2 * 0.5 / 1), so phi_ext = (2 * 5 - 6) / (2 - 1) = 4 and GCI = 1.25 * 0.2 / 1
    out = grid_convergence(5.0, 6.0, 7.0, cell_sizes=(1.0, 2.0, 3.0))
    assert out["apparent_order"] == pytest.approx(1.0, rel=1e-9)
    assert out["extrapolated"] == pytest.approx(4.0, rel=1e-9)
    assert out["gci_fine"] == pytest.approx(0.25, rel=1e-9)
    assert not out["divergent"]


@pytest.mark.parametrize("values, sizes", [((2.6, 2.7, 2.75), (1.0, 1.5, 2.25)), ((1.0, 1.1, 1.15), (1.0, 1.3, 2.0)),
                                           ((5.0, 6.0, 7.0), (1.0, 2.0, 4.0))])
def test_values_moving_apart_are_divergent_with_empty_figures(values, sizes):
    # Stern et al. (2001): the convergence ratio e21/e32 = 2 (> 1) is monotone divergence; for constant r the
    # signed order ln(e32/e21)/ln r is negative (-1.71 for the first) or zero (the third). With r21 = 1.3,
    # r32 = 1.54 the ratio e32/e21 = 0.5 lies below ln r32 / ln r21 = 1.64, the p -> 0 limit of Celik's
    # eq. (5): no positive order. The |.| form read p = 1.71 and 8.35 with GCIs of 4.8 % and 1.6 %.
    out = grid_convergence(*values, cell_sizes=sizes)
    assert out["divergent"] and not out["oscillatory"]
    for name in ("apparent_order", "extrapolated", "gci_fine", "gci_medium", "asymptotic_ratio"):
        assert np.isnan(out[name]), name


def test_oscillatory_divergence_is_flagged_both_ways():
    # e21 = -0.1, e32 = +0.05: signs alternate and |e32/e21| = 0.5 lies below 1, the p -> 0 limit for s = -1
    out = grid_convergence(1.0, 0.9, 0.95, cell_sizes=(1.0, 1.5, 2.25))
    assert out["oscillatory"] and out["divergent"] and np.isnan(out["apparent_order"])
    # oscillatory convergence as before: |e32/e21| = 2 > 1 has its root (constant r: ln 2 / ln 1.5)
    out = grid_convergence(1.0, 0.95, 1.05, cell_sizes=(1.0, 1.5, 2.25))
    assert out["oscillatory"] and not out["divergent"]
    assert out["apparent_order"] == pytest.approx(np.log(2.0) / np.log(1.5), rel=1e-9)


def test_agreeing_rows_take_the_quantitys_scale():
    import pandas as pd

    from phasegauge.analysis.convergence import AGREEMENT_SHARE, agreeing_rows

    # the review's conserved drop volume (0.401379941, 0.40137992, 0.401378988: spread 9.5e-7, 2.4e-6 of it)
    # agrees; Slater's values (0.9705, 0.96854, 0.96178; NASA GRC worked example) do not; a drift of 5e-6 is
    # a fraction (scale 1) and agrees; a length of 1e-6 on a column reaching 0.3 agrees, one of 0.1 does not
    table = pd.DataFrame({
        "quantity": ["phase_volume", "pressure_drop", "phase_volume_drift", "widest_x", "widest_x"],
        "time": [0.0, 0.0, 0.0, 0.0, 1.0],
        "value_fine": [0.401379941, 0.9705, 6.0e-7, 0.3, 0.3],
        "value_medium": [0.40137992, 0.96854, 6.2e-7, 0.300001, 0.2],
        "value_coarse": [0.401378988, 0.96178, 5.4e-6, 0.299999, 0.1]})
    assert agreeing_rows(table).tolist() == [True, False, True, True, False]
    assert AGREEMENT_SHARE == 1e-4  # our threshold
    assert not agreeing_rows(table, share=1e-7).any()
    assert agreeing_rows(table.iloc[:0]).tolist() == []
