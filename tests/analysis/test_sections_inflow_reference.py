"""The inflow's mean a channel's sections are read against: back-flow at the first section, a channel
mixed by the first section, and area means that drift along the channel.

Outside references: analytic channel fields whose cup-mixing mean and flow-weighted index are known in
closed form, integrated with scipy's quad and solved with scipy's brentq; Danckwerts (1952),
I = sigma^2 / (a (1 - a)) about the mixture's mean a.
"""

import warnings

import numpy as np
import pytest
from scipy import integrate, optimize, special

from phasegauge.analysis.mixing import cross_sections_noted, mixing_length, mixing_length_note, mixing_length_status
from phasegauge.meshgen import grid_mesh

SECTIONS = np.arange(0.125, 10.0, 0.25)  # 40 sections through a channel [0, 10] x [0, 1]


def _points(nx=80, ny=40):
    mesh = grid_mesh((nx, ny), [(0, 10), (0, 1)])
    return mesh, mesh.points[:, 0], mesh.points[:, 1]


def _measure(mesh, c, u=None):
    velocity = None if u is None else np.stack([u, np.zeros_like(u), np.zeros_like(u)], axis=1)
    table, notes = cross_sections_noted(mesh, c, positions=SECTIONS, velocity=velocity, c_location="point",
                                        velocity_location=None if u is None else "point")
    return table, [str(n) for n in notes]


def test_back_flow_at_the_first_section_keeps_the_inflows_cup_mixing_mean():
    # dye c0 = 0.4 erfc((y - 0.3) / 0.02) under u = 6 y (1 - y) - A(x) cos(2 pi y), A = 0.8 e^(-x / 0.4): a
    # near-wall recirculation at the entrance (5 % of the flow runs backwards at x = 0.125), net flow 1 through
    # every section; c relaxes to the cup-mixing mean m with the dye flux int u c dy = m at every x
    k = 0.5
    c0 = lambda y: 0.4 * special.erfc((y - 0.3) / 0.02)  # noqa: E731
    amp = lambda x: 0.8 * np.exp(-x / 0.4)  # noqa: E731
    u = lambda x, y: 6 * y * (1 - y) - amp(x) * np.cos(2 * np.pi * y)  # noqa: E731
    m = integrate.quad(lambda y: 6 * y * (1 - y) * c0(y), 0, 1, points=[0.3])[0]
    j = integrate.quad(lambda y: np.cos(2 * np.pi * y) * (c0(y) - m), 0, 1, points=[0.3])[0]
    cf = lambda x, y: m + np.exp(-k * x) * (c0(y) - m + amp(x) * j)  # noqa: E731
    # the analytic mixing length (target 0.9, flow weights, about m): scipy quad + brentq
    index = lambda x: 1 - np.sqrt(integrate.quad(lambda y: u(x, y) * (cf(x, y) - m) ** 2, 0, 1,  # noqa: E731
                                                 points=[0.3])[0] / (m * (1 - m)))
    exact = optimize.brentq(lambda x: index(x) - 0.9, 1.0, 9.9)  # 4.267
    mesh, x, y = _points()
    table, notes = _measure(mesh, cf(x, y), u(x, y))
    assert table["weighting"].iloc[0] == "area" and table["backflow_fraction"].iloc[0] > 0.04
    assert table["inflow_mean"].iloc[0] == pytest.approx(m, rel=2e-3)  # was the area mean 0.3025
    assert mixing_length(table) == pytest.approx(exact, abs=0.03)  # was NaN (the index stopped at 0.718)
    assert any("back-flow (5% of its flow) through the first section along the flow (x = 0.125)" in n
               and "not its area mean" in n for n in notes)


def _fast(k):
    # c = 0.5 + 0.5 e^(-k x) cos(pi y) under Poiseuille u = 6 y (1 - y): flow-weighted index about the cup
    # mean 0.5 is 1 - e^(-k x) sqrt(r), r = int u cos^2 / int u (scipy quad)
    r = (integrate.quad(lambda y: 6 * y * (1 - y) * np.cos(np.pi * y) ** 2, 0, 1)[0]
         / integrate.quad(lambda y: 6 * y * (1 - y), 0, 1)[0])
    mesh, x, y = _points(400)
    table, notes = _measure(mesh, 0.5 + 0.5 * np.exp(-k * x) * np.cos(np.pi * y), 6 * y * (1 - y))
    return table, notes, (lambda s: 1 - np.exp(-k * s) * np.sqrt(r)), r


def test_a_channel_still_below_the_target_at_a_uniform_first_section_has_a_mixing_length():
    # k = 25, target 0.99: the first section's index 0.969 (intensity under 1e-3, "uniform") is below the
    # target, the second's 0.99994. The length was refused (NaN); analytic 0.163 lies between the two sections,
    # and the length read between them is the linear interpolation of the analytic indices there
    table, notes, index, r = _fast(25)
    exact = np.log(np.sqrt(r) / 0.01) / 25
    assert 0.125 < exact < 0.375
    between = 0.125 + (0.99 - index(0.125)) / (index(0.375) - index(0.125)) * 0.25
    assert mixing_length(table, target=0.99) == pytest.approx(between, rel=2e-3)
    assert not any("uniform" in n for n in notes)
    assert mixing_length_note(table, 0.99, mixing_length(table, target=0.99)) is None


def test_a_channel_mixed_before_its_first_section_reads_an_upper_bound():
    # k = 30: index 0.982 at the first section (x = 0.125), above 0.99999 further on; analytic length
    # 0.059 for the target 0.9. It read NaN ("not reached"); now the first section's position, said to be a bound
    table, notes, index, r = _fast(30)
    exact = np.log(np.sqrt(r) / 0.1) / 30
    length = mixing_length(table, target=0.9)
    assert table["mixing_index_inflow"].iloc[0] == pytest.approx(index(0.125), abs=1e-3)
    assert exact < length == pytest.approx(0.125)
    note = mixing_length_note(table, 0.9, length)
    assert "met at the first section along the flow (x = 0.125" in note and "upper bound" in note


def test_a_well_mixed_channels_noise_keeps_its_first_section_as_the_inflow():
    # c = 0.5 + a noise of amplitude 0.03 (deterministic) under Poiseuille flow: every section's intensity of
    # segregation sits near a (2 a)^2 / 12 / (1/4) = 0.0012 (a uniform noise's variance about m = 1/2,
    # Danckwerts 1952), under and over the uniform threshold by chance. Such a channel is mixed everywhere: the
    # first section stays the inflow and the mixing length is an upper bound at it (it was refused, NaN,
    # where one later section's noise read 0.00102 against the first's 0.00099)
    rng = np.random.default_rng(7)
    mesh, x, y = _points()
    c = 0.5 + 0.03 * (2 * rng.random(x.size) - 1)
    table, notes = _measure(mesh, c, 6 * y * (1 - y))
    intensity = table["segregation_intensity_flow"].to_numpy()
    assert np.all(intensity < 4 * 0.0012)
    assert not any("uniform" in n for n in notes)
    assert mixing_length(table, target=0.9) == pytest.approx(SECTIONS[0])


def test_a_missing_mixing_length_says_why():
    table, _, index, _ = _fast(0.2)  # the index at x = 9.875: 1 - e^(-1.975) sqrt(r) = 0.918 < 0.95
    assert index(9.875) < 0.95 and np.isnan(mixing_length(table, target=0.95))
    assert "no section meets the mixing target 0.95" in mixing_length_note(table, 0.95, np.nan)


def test_area_means_that_drift_along_the_channel_are_warned_of():
    # dye in the lower 30 % under Poiseuille flow relaxing to its cup-mixing mean (0.216): the area mean falls
    # from 0.300 at the inlet to 0.217, so without a velocity the index against the inflow's area mean cannot
    # pass 1 - |a - m| / sqrt(m (1 - m)) (I about m is at least (a - m)^2 / (m (1 - m)), Danckwerts 1952)
    c0 = lambda y: 0.5 * special.erfc((y - 0.3) / 0.02)  # noqa: E731
    cup = integrate.quad(lambda y: 6 * y * (1 - y) * c0(y), 0, 1, points=[0.3])[0]
    mesh, x, y = _points()
    c = cup + (c0(y) - cup) * np.exp(-0.5 * x)
    table, notes = _measure(mesh, c)
    m = table["inflow_mean"].iloc[0]
    cap = 1 - np.abs(table["mean_area_weighted"] - m) / np.sqrt(m * (1 - m))
    assert (table["mixing_index_inflow"] <= cap + 1e-12).all() and cap.min() < 0.85
    drift = [n for n in notes if "area mean of c changes along the channel" in n]
    assert len(drift) == 1 and "--velocity" in drift[0] and f"cannot pass {cap.min():.3g}" in drift[0]
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        _, flowing = _measure(mesh, c, 6 * y * (1 - y))  # flow-weighted means are kept: nothing to say
    assert not any("changes along the channel" in n for n in flowing)


def test_a_channel_flowing_towards_minus_x_without_a_velocity_has_no_inflow_at_its_outlet():
    # the channel of _fast(0.25) mirrored, c = 0.5 + 0.5 e^(-k (10 - x)) cos(pi y): the inflow at x = 10, mixing
    # towards -x. Without a velocity the sections are taken along +x, so the first is the outlet (intensity of
    # segregation 0.0036, over the uniform threshold; 0.44 at the inlet end): read against it, every section
    # looked mixed and the length an "upper bound" at x = 0.125; the analytic length from the inlet is
    # ln(sqrt(r) / 0.1) / k = 6.9 (Danckwerts' index about the cup mean, scipy quad). Now refused as the inflow,
    # naming --velocity; with the velocity (towards -x) the length is the mirrored analytic one
    k = 0.25
    r = (integrate.quad(lambda y: 6 * y * (1 - y) * np.cos(np.pi * y) ** 2, 0, 1)[0]
         / integrate.quad(lambda y: 6 * y * (1 - y), 0, 1)[0])
    exact = np.log(np.sqrt(r) / 0.1) / k
    mesh, x, y = _points(400)
    c = 0.5 + 0.5 * np.exp(-k * (10 - x)) * np.cos(np.pi * y)
    table, notes = _measure(mesh, c)
    assert 1e-3 < table["segregation_intensity"].iloc[0] < 0.01
    assert np.isnan(mixing_length(table, target=0.9))
    assert mixing_length_status(table, target=0.9) == "undefined"
    assert any("less segregated than a section after it" in n and "--velocity" in n and len(n) <= 360 for n in notes)
    backward, notes = _measure(mesh, c, -6 * y * (1 - y))
    assert mixing_length(backward, target=0.9, ends=(0.0, 10.0)) == pytest.approx(exact, abs=0.03)
    assert not any("less segregated" in n for n in notes)
    # mixing faster (k = 0.5): the outlet is uniform (intensity 2.6e-5); the warning names the direction too
    table, notes = _measure(mesh, 0.5 + 0.5 * np.exp(-0.5 * (10 - x)) * np.cos(np.pi * y))
    assert mixing_length_status(table, target=0.9) == "undefined"
    assert any("is uniform" in n and "flow towards -x" in n and len(n) <= 360 for n in notes)  # not cut
