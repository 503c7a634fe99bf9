"""Mixing index against the inflow mean, and sections without net flow.

Outside reference: Danckwerts (1952), I = sigma^2 / (a (1 - a)) with a the mean of the whole
mixture and sigma^2 the mean square deviation from it, computed here by hand with numpy on the
cell values the planes cut.
"""

import warnings

import numpy as np
import pandas as pd
import pytest

from phasegauge.analysis.mixing import cross_sections, mixing_length
from phasegauge.errors import PhasegaugeWarning
from phasegauge.meshgen import grid_mesh


def _channel(n=10):
    # [0, 2] x [0, 1], Poiseuille u = 6 y (1 - y) on cells; the inflow half (x < 1) carries the phase
    # in the band y < 0.3, the outlet half is a pure-phase section (c = 0.01) or a smooth profile
    mesh = grid_mesh((2 * n, n), [(0, 2), (0, 1)])
    x, y = mesh.cell_centroids[:, 0], mesh.cell_centroids[:, 1]
    u = np.stack([6 * y * (1 - y), np.zeros_like(y), np.zeros_like(y)], axis=1)
    return mesh, x, y, u


def _danckwerts(c, weight, reference):
    """I about a given mean, by hand: sum w (c - a)^2 / (sum w a (1 - a)) [Danckwerts 1952]."""
    return float(np.sum(weight * (c - reference) ** 2) / (np.sum(weight) * reference * (1 - reference)))


def test_pure_phase_section_is_not_mixed_against_the_inflow():
    n = 10
    mesh, x, y, u = _channel(n)
    c = np.where(x < 1, (y < 0.3).astype(float), np.where(x < 1.5, 0.01, 0.4 + 0.3 * (y - 0.5)))
    positions = [0.05, 1.25, 1.75]  # through cell centres: each plane cuts one column of cells
    table = cross_sections(mesh, c, positions=positions, velocity=u, c_location="cell",
                           velocity_location="cell")
    # the hand computation on the cut cells: weights h u(y_j) (flow), the inflow mean from the first plane
    column = np.sort(np.unique(np.round(y, 12)))
    w = 6 * column * (1 - column) / n
    c_in = (column < 0.3).astype(float)
    m_in = float(np.sum(w * c_in) / np.sum(w))
    assert table["inflow_mean"].iloc[0] == pytest.approx(m_in, rel=1e-12)
    assert list(table["weighting"]) == ["flow"] * 3
    expected = [_danckwerts(c_in, w, m_in), _danckwerts(np.full(n, 0.01), w, m_in),
                _danckwerts(0.4 + 0.3 * (column - 0.5), w, m_in)]
    np.testing.assert_allclose(table["segregation_intensity_inflow"], expected, rtol=1e-10)
    np.testing.assert_allclose(table["mixing_index_inflow"], 1 - np.sqrt(expected), rtol=1e-10)
    # the section through pure phase: its own-mean index reads "mixed", against the inflow it does not
    assert table["mixing_index_flow"].iloc[1] == pytest.approx(1.0)
    assert table["mixing_index_inflow"].iloc[1] < 0.5
    # the inflow section itself: the same I as the own-mean one (the same mean)
    assert table["segregation_intensity_inflow"].iloc[0] == pytest.approx(table["segregation_intensity_flow"].iloc[0])


def test_inflow_mean_given_and_area_weights_without_velocity():
    mesh, x, y, _ = _channel(8)
    c = np.where(x < 1, y, 0.5)
    table = cross_sections(mesh, c, positions=[0.5, 1.5], c_location="cell", inflow_mean=0.25)
    assert (table["weighting"] == "area").all() and (table["inflow_mean"] == 0.25).all()
    column = np.sort(np.unique(np.round(y, 12)))
    h = np.full(8, 1 / 8)
    np.testing.assert_allclose(table["segregation_intensity_inflow"],
                               [_danckwerts(column, h, 0.25), _danckwerts(np.full(8, 0.5), h, 0.25)], rtol=1e-10)


def test_no_net_flow_falls_back_to_area_weights_with_one_warning():
    # u = (cos(2 pi y), 0) has zero net flow through every x plane [analytic: int_0^1 cos(2 pi y) dy = 0]
    mesh = grid_mesh((8, 16))
    y = mesh.points[:, 1]
    u = np.stack([np.cos(2 * np.pi * y), np.zeros_like(y), np.zeros_like(y)], axis=1)
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        table = cross_sections(mesh, y, count=4, velocity=u, c_location="point")
    ours = [w for w in caught if issubclass(w.category, PhasegaugeWarning)]
    assert len(ours) == 1 and "no net flow through the section at x = 0.125" in str(ours[0].message)
    assert (table["weighting"] == "area").all()
    np.testing.assert_allclose(table["mixing_index_flow"], table["mixing_index"])
    assert np.isfinite(mixing_length(table, reference="section", weighting="flow", target=0.1))


def test_a_closed_box_has_no_inflow_to_refuse():
    # the whole-change read: in a closed box (a Taylor-Green cell, u.n = 0 on the walls, analytic) every
    # section's net flow is round-off (1e-17), and the flow check compared those, refusing the inflow
    # with "does not cut the whole inflow"; the sections without net flow take area weights, as before
    m = grid_mesh((16, 16))
    x, y = m.points[:, 0], m.points[:, 1]
    u = np.stack([np.sin(np.pi * x) * np.cos(np.pi * y), -np.cos(np.pi * x) * np.sin(np.pi * y), 0 * x], axis=1)
    c = (np.hypot(x - 0.2, y - 0.5) < 0.2).astype(float)  # a drop the first section (x = 0.125) cuts
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        table = cross_sections(m, c, count=4, velocity=u, c_location="point")
    assert not [w for w in caught if "carries a net flow" in str(w.message) or "of one phase" in str(w.message)]
    assert (table["weighting"] == "area").all()
    assert table["inflow_mean"].iloc[0] == pytest.approx(table["mean_area_weighted"].iloc[0], rel=1e-12)


def test_sections_with_no_net_flow_do_not_abort_a_run(tmp_path):
    # regression: --sections y --velocity velocity on a closed box aborted the whole run
    from phasegauge import measure
    from phasegauge.meshgen import to_meshio

    mesh = grid_mesh((16, 16))
    x, y = mesh.cell_centroids[:, 0], mesh.cell_centroids[:, 1]
    u = np.stack([np.sin(np.pi * x) ** 2 * np.sin(2 * np.pi * y), -np.sin(2 * np.pi * x) * np.sin(np.pi * y) ** 2,
                  np.zeros_like(x)], axis=1)
    to_meshio(mesh, cell_data={"c": (x < 0.4).astype(float), "velocity": u}).write(tmp_path / "box.vtu")
    with warnings.catch_warnings(record=True):
        warnings.simplefilter("always")
        res = measure(tmp_path / "box.vtu", "c", velocity="velocity", section_axis="y", section_count=4,
                      analyses=("mixing",))
    assert len(res.profiles) == 4 and "mixing_index_inflow" in res.profiles
    assert any("no net flow through the section" in text for text in res.warnings)


def test_inflow_is_the_first_section_along_the_flow():
    # flow towards -x: the inflow section is the highest position [the same hand computation]
    mesh, x, y, u = _channel(10)
    c = np.where(x > 1, (y < 0.3).astype(float), 0.3)
    table = cross_sections(mesh, c, positions=[0.55, 1.95], velocity=-u, c_location="cell",
                           velocity_location="cell")
    column = np.sort(np.unique(np.round(y, 12)))
    w = 6 * column * (1 - column) / 10
    m_in = float(np.sum(w * (column < 0.3)) / np.sum(w))
    assert table["inflow_mean"].iloc[0] == pytest.approx(m_in, rel=1e-12)


def test_the_mixing_length_is_not_read_at_a_dye_front():
    # a dye stream (c = 1, y < 0.3) reaching x = 1 only, a carrier floor of 1e-3 beyond it: no section
    # is mixed. Against the inflow (Danckwerts 1952, by hand below) every section reads far from
    # mixed; against its own mean the uniform carrier beyond the front reads 1, "mixed", there
    mesh, x, y, u = _channel()
    c = np.where((x < 1) & (y < 0.3), 1.0, 1e-3)
    table = cross_sections(mesh, c, positions=[0.25, 0.75, 1.25, 1.75], velocity=u, c_location="cell",
                           velocity_location="cell")
    assert np.isnan(mixing_length(table))
    assert 0.75 < mixing_length(table, reference="section") <= 1.25  # between the last stream and the front
    # beyond the front, by hand: all 1e-3 against the inflow mean
    beyond = table[table["position"] > 1]
    column = np.full(10, 1e-3)
    weight = 6 * (np.arange(10) + 0.5) / 10 * (1 - (np.arange(10) + 0.5) / 10)
    expected = _danckwerts(column, weight, float(table["inflow_mean"].iat[0]))
    np.testing.assert_allclose(beyond["segregation_intensity_inflow"], expected, rtol=1e-10)
    assert (beyond["mixing_index_inflow"] < 0.5).all()


def test_the_mixing_length_walks_along_a_flow_towards_minus_x():
    # the mirror image of a two-stream channel: the inflow at x = 2, the flow towards -x, mixing
    # downstream (smaller x). Outside check: mirror symmetry, x -> 2 - x: the same channel flowing
    # towards +x (field mirrored) gives its length at the mirrored position
    mesh, x, y, u = _channel()
    positions = [0.25, 0.75, 1.25, 1.75]  # symmetric about x = 1

    def field(distance_from_inflow):
        spread = np.clip(distance_from_inflow / 2, 0, 1)  # 0 at the inflow, 1 at the outlet: the streams blend
        return np.where(y < 0.5, 0.5 + 0.5 * (1 - spread), 0.5 - 0.5 * (1 - spread))

    backward = cross_sections(mesh, field(2 - x), positions=positions, velocity=-u, c_location="cell",
                              velocity_location="cell")
    forward = cross_sections(mesh, field(x), positions=positions, velocity=u, c_location="cell",
                             velocity_location="cell")
    index = backward.set_index("position")["mixing_index_inflow"]
    assert index[1.75] < index[1.25] < index[0.75] < index[0.25]  # mixing grows towards -x
    target = float((index[1.25] + index[0.75]) / 2)
    length = mixing_length(backward, target=target)
    assert 0.75 < length < 1.25  # between those planes, not at x = 0.25
    assert length == pytest.approx(2 - mixing_length(forward, target=target), abs=1e-9)


def test_a_first_section_of_one_phase_is_warned_of():
    # a side inlet downstream of the first section: that section is pure carrier, its m (1 - m) = 0
    mesh, x, y, u = _channel()
    c = np.where((x > 0.5) & (y < 0.3), 1.0, 0.0)
    with pytest.warns(PhasegaugeWarning, match=r"first section along the flow \(x = 0.25\) is of one phase"):
        table = cross_sections(mesh, c, positions=[0.25, 0.75, 1.25], velocity=u, c_location="cell",
                               velocity_location="cell")
    assert np.isnan(mixing_length(table))


def test_a_first_section_of_one_phase_to_round_off_is_warned_of_too():
    # the first section all dye: its flow-weighted mean comes out 1 - 2e-16, not 1 (round-off), which
    # made m (1 - m) tiny and the index against it about -6.5e7 (Danckwerts' I, by hand, divides by it)
    mesh, x, y, u = _channel(7)
    c = np.where(x < 0.5, 1.0, np.where(y < 0.2, 1.0, 0.0))
    with pytest.warns(PhasegaugeWarning, match="is of one phase"):
        table = cross_sections(mesh, c, positions=[0.25, 0.75, 1.25, 1.75], velocity=u, c_location="cell",
                               velocity_location="cell")
    assert table["mixing_index_inflow"].isna().all() and np.isnan(mixing_length(table))


@pytest.mark.parametrize("given", [0.0, 1.0, 1.5, -0.2])
def test_an_inflow_mean_of_one_phase_is_refused(given):
    from phasegauge.errors import OptionError

    mesh, x, y, u = _channel()
    with pytest.raises(OptionError, match="inflow_mean must be a number strictly between 0 and 1"):
        cross_sections(mesh, np.where(y < 0.3, 1.0, 0.0), positions=[0.5], velocity=u, c_location="cell",
                       velocity_location="cell", inflow_mean=given)


def test_a_section_with_back_flow_takes_area_weights_and_says_so():
    # audit 9: a recirculation at x in (1, 2), u = 1 + 3 cos(2 pi y) (net flow 1; u < 0 on 0.30 < y < 0.70),
    # holding unmixed fluid. Signed flow weights gave a negative variance there, clipped to 0: "perfectly
    # mixed", and the mixing length was read from it. Outside reference: the back-flow share
    # int max(-u, 0) / int |u| by scipy's quad on the cells' values
    from scipy.integrate import quad

    mesh = grid_mesh((60, 200), [(0, 3), (0, 1)])
    x, y = mesh.cell_centroids[:, 0], mesh.cell_centroids[:, 1]
    inside = (x > 1) & (x < 2)
    ux = np.where(inside, 1 + 3 * np.cos(2 * np.pi * y), 1.0)
    u = np.stack([ux, np.zeros_like(ux), np.zeros_like(ux)], axis=1)
    c = np.where(inside & (np.abs(y - 0.5) < 0.15), (y < 0.5).astype(float), np.where(y < 0.5, 1.0, 0.0))
    c = np.where(inside & (np.abs(y - 0.5) >= 0.15), 0.5, c)
    with pytest.warns(PhasegaugeWarning, match=r"back-flow through the section at x = 1.525 \(2\d% of its flow\)"):
        table = cross_sections(mesh, c, positions=[0.525, 1.525, 2.525], velocity=u, c_location="cell",
                               velocity_location="cell")
    back = table.set_index("position").loc[1.525]
    cells = np.sort(np.unique(np.round(y, 12)))  # the cell values the plane reads, piecewise constant in y

    def u_cells(t):
        return 1 + 3 * np.cos(2 * np.pi * cells[min(int(t * 200), 199)])

    breaks = list(np.linspace(0, 1, 201))
    against = sum(quad(lambda t: max(-u_cells(t), 0.0), a, b)[0] for a, b in zip(breaks[:-1], breaks[1:]))
    gross = sum(quad(lambda t: abs(u_cells(t)), a, b)[0] for a, b in zip(breaks[:-1], breaks[1:]))
    assert back["backflow_fraction"] == pytest.approx(against / gross, rel=1e-9)
    assert back["weighting"] == "area" and back["segregation_intensity_flow"] == back["segregation_intensity"]
    assert back["segregation_intensity_inflow"] > 0.2  # unmixed fluid reads unmixed, not 0
    assert table["backflow_fraction"].iloc[0] == 0.0 and table["weighting"].iloc[0] == "flow"


def test_a_first_section_that_carries_part_of_the_flow_is_no_inflow():
    # audit 9: a first section that does not carry the whole flow (here a side inlet doubles the flow at
    # x = 1; at an angle to the axis a plane cuts a corner of the inlet) read its own mean as the
    # inflow's. Outside reference: the net flows int u dy = 1 and 2 (analytic)
    mesh, x, y, _ = _channel(10)
    ux = np.where(x < 1, 1.0, 2.0)
    u = np.stack([ux, np.zeros_like(ux), np.zeros_like(ux)], axis=1)
    c = np.where(x < 1, (y < 0.5).astype(float), 0.25 + 0.5 * y)
    with pytest.warns(PhasegaugeWarning, match=r"carries a net flow of 1, against 2 through the median of the others"):
        table = cross_sections(mesh, c, positions=[0.25, 1.25, 1.5, 1.75], velocity=u, c_location="cell",
                               velocity_location="cell")
    np.testing.assert_allclose(table["flow_rate"], [1, 2, 2, 2], rtol=1e-12)
    assert table["inflow_mean"].isna().all() and table["mixing_index_inflow"].isna().all()
    assert np.isnan(mixing_length(table))
    given = cross_sections(mesh, c, positions=[0.25, 1.25], velocity=u, c_location="cell",
                           velocity_location="cell", inflow_mean=0.4)
    assert (given["inflow_mean"] == 0.4).all()  # a mean given is the user's: no flow check


@pytest.mark.parametrize("carrier", [1e-7, 1e-4, 0.01])
def test_dye_injected_into_carrier_downstream_of_the_first_section(carrier):
    # audit 9: carrier not exactly 0 upstream (a phase-field bulk sits at 0.01-0.03), dye added at x = 1:
    # the uniform first section read as the inflow, the sections downstream as "mixed" -2.9 (I about it
    # far above 1, by Danckwerts' formula by hand), and the mixing length landed in pure carrier
    mesh, x, y, u = _channel(10)
    c = np.where(x < 1, carrier, np.where(y < 0.3, 1.0, carrier))
    with pytest.warns(PhasegaugeWarning, match=r"\(x = 0.25\) is uniform .* no segregated inflow"):
        table = cross_sections(mesh, c, positions=[0.25, 0.75, 1.25, 1.75], velocity=u, c_location="cell",
                               velocity_location="cell")
    column = np.sort(np.unique(np.round(y, 12)))
    w = 6 * column * (1 - column)
    assert _danckwerts(np.where(column < 0.3, 1.0, carrier), w, carrier) > 1.25  # what it read before
    assert table["mixing_index_inflow"].isna().all() and np.isnan(mixing_length(table))
    # the inflow's mean given (dye and carrier streams together): used
    given = cross_sections(mesh, c, positions=[0.25, 1.25, 1.75], velocity=u, c_location="cell",
                           velocity_location="cell", inflow_mean=0.2)
    assert (given["inflow_mean"] == 0.2).all() and given["mixing_index_inflow"].notna().all()


@pytest.mark.parametrize("dye", [0.3, 0.7])
def test_a_dye_front_is_no_refused_inflow_whatever_the_dye_share(dye):
    # review 44: a check of I about the inflow mean above 1.25 refused a dye front once the dye was over
    # 56 % of the inflow (a pure-carrier section reads I = m / (1 - m) about the inflow mean m). By hand:
    # the sections ahead of the front read I = m / (1 - m), unmixed, and the inflow stays defined
    mesh, x, y, u = _channel(10)
    streams = (y < dye).astype(float)  # a flow-weighted share of dye, not dye itself: computed below
    c = np.where(x < 1, streams, 0.0)
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        table = cross_sections(mesh, c, positions=[0.25, 0.75, 1.25, 1.75], velocity=u, c_location="cell",
                               velocity_location="cell")
    column = np.sort(np.unique(np.round(y, 12)))
    w = 6 * column * (1 - column)
    m = float(np.sum(w * (column < dye)) / np.sum(w))
    np.testing.assert_allclose(table["segregation_intensity_inflow"].iloc[2:], m / (1 - m), rtol=1e-10)


def test_the_inflow_flow_check_reads_two_sections_and_tolerates_a_slow_change():
    # review 44: with two sections the check was skipped; a volume flow growing 3 % per unit length was
    # refused. Outside reference: the net flows, int u dy (analytic: 1, 2; 1 + 0.03 x)
    # review 45: one odd section next to the first (the velocity not finite over part of it) refused a
    # whole first section; review 46: inlets between every section (flows 1, 2, 3, 4) must be refused, and a
    # volume flow growing 25 % a unit is refused with them (an incompressible flow keeps its volume flow)
    mesh, x, y, _ = _channel(10)
    c = (y < 0.5).astype(float)
    odd = (x > 0.8) & (x < 1.0) & (y > 0.6)
    cases = ((np.where(x < 1, 1.0, 2.0), [0.25, 1.75], True), (1.0 + 0.03 * x, [0.25, 1.75], False),
             (1.0 + 0.25 * x, [0.05, 0.65, 1.25, 1.85], True),
             (1.0 + np.floor(x / 0.5), [0.25, 0.75, 1.25, 1.75], True),
             (np.where(odd, np.nan, 1.0), [0.45, 0.95, 1.45, 1.95], False))
    for ux, positions, refused in cases:
        u = np.stack([ux, np.zeros_like(ux), np.zeros_like(ux)], axis=1)
        with warnings.catch_warnings(record=True) as caught:
            warnings.simplefilter("always")
            table = cross_sections(mesh, c, positions=positions, velocity=u, c_location="cell",
                                   velocity_location="cell")
        said = [str(w.message) for w in caught if "carries a net flow" in str(w.message)]
        assert bool(said) == refused and table["inflow_mean"].isna().all() == refused, positions


def test_the_mixing_length_is_a_distance_from_the_inlet_end():
    # audit 9: the length was the position, so a channel from x = 2 to 12, or one flowing towards -x,
    # read its position as its length. By hand: linear interpolation between the planes' indices
    table = pd.DataFrame({"position": [3.0, 5.0, 7.0, 9.0], "mixing_index_inflow": [0.5, 0.8, 0.95, 0.99],
                          "flow_rate": [1.0] * 4})
    at = 5.0 + (0.9 - 0.8) / (0.95 - 0.8) * 2.0
    assert mixing_length(table) == pytest.approx(at)
    assert mixing_length(table, ends=(2.0, 12.0)) == pytest.approx(at - 2.0)
    mirrored = table.assign(position=14.0 - table["position"], flow_rate=-1.0)  # the same channel towards -x
    assert mixing_length(mirrored, ends=(2.0, 12.0)) == pytest.approx(at - 2.0)
