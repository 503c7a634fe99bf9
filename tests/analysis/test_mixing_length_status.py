"""What a mixing length is: reached, an upper bound, not reached, or undefined (``mixing_length_status``).

Outside references: the erf solution of two streams (c = 1 above y = 1/2, 0 below) entering a channel
0 < y < 1 in plug flow, u dc/dx = D d2c/dy2, walls without flux (Crank 1975, The Mathematics of Diffusion,
method of images), whose intensity of segregation is the cosine series
I(x) = sum_{n odd} 8 / (n pi)^2 exp(-2 n^2 pi^2 kappa x) (Parseval), kappa = D / u; the mixing length is
where 1 - sqrt(I) reaches the target, solved with scipy's brentq. Danckwerts (1952):
I = sigma^2 / (a (1 - a)) about the inflow's mean a, undefined for a = 0 (an inflow of one phase).
"""

import numpy as np
import pytest
from scipy import optimize, special

from phasegauge.analysis.mixing import (MIXING_LENGTH_STATUSES, cross_sections_noted, mixing_length,
                                        mixing_length_note, mixing_length_status)
from phasegauge.errors import OptionError
from phasegauge.meshgen import grid_mesh

KAPPA = 0.05  # D / u
LENGTH = 6.0


def _two_streams(x, y, images=6):
    """The erf solution of two streams in plug flow, mirrored about the walls y = 0 and y = 1 (Crank 1975)."""
    scale = 2 * np.sqrt(KAPPA * np.maximum(x, 1e-300))
    c = np.zeros_like(y)
    for k in range(-images, images + 1):
        c += 0.5 * (special.erf((y - 0.5 + 2 * k) / scale) - special.erf((y - 1.5 + 2 * k) / scale))
    return c


def _index(x, terms=200):
    """1 - sqrt(I(x)), I the cosine series of the same solution (Parseval; Danckwerts 1952)."""
    n = np.arange(1, 2 * terms, 2)
    return 1 - np.sqrt(np.sum(8 / (n * np.pi) ** 2 * np.exp(-2 * (n * np.pi) ** 2 * KAPPA * x)))


def _exact_length(target):
    return optimize.brentq(lambda x: _index(x) - target, 0.05, 50.0)


def _profile(positions, injected_at=0.0):
    """The sections of the erf stream on a 120 x 40 grid of [0, 6] x [0, 1], plug flow; with ``injected_at``
    the streams meet at that x, pure carrier (c = 0) ahead of it."""
    mesh = grid_mesh((120, 40), [(0.0, LENGTH), (0.0, 1.0)])
    x, y = mesh.points[:, 0], mesh.points[:, 1]
    c = np.where(x < injected_at, 0.0, _two_streams(x - injected_at, y))
    velocity = np.zeros((mesh.n_points, 3))
    velocity[:, 0] = 1.0
    table, notes = cross_sections_noted(mesh, c, positions=positions, velocity=velocity, c_location="point",
                                        velocity_location="point")
    return table, [str(n) for n in notes]


def test_the_statuses_are_the_four_words_of_the_column():
    assert MIXING_LENGTH_STATUSES == ("reached", "upper_bound", "not_reached", "undefined")


def test_an_erf_stream_that_mixes_within_the_sections_is_reached():
    exact = _exact_length(0.9)  # 4.45 (first term alone: ln(800 / pi^2) / (2 pi^2 kappa))
    assert exact == pytest.approx(np.log(800 / np.pi ** 2) / (2 * np.pi ** 2 * KAPPA), rel=1e-3)
    table, _ = _profile(np.arange(0.25, LENGTH, 0.25))
    assert mixing_length_status(table) == "reached"
    # linear interpolation between sections 0.25 apart and the grid's smoothing: within 0.01 (our tolerance)
    assert mixing_length(table) == pytest.approx(exact, abs=0.01)


def test_an_erf_stream_mixed_before_the_first_section_is_an_upper_bound_at_that_section():
    # sections from x = 5 only, past the analytic length 4.45: the first already meets the target, so the length
    # is that section's position, longer than the true one
    positions = np.arange(5.0, LENGTH, 0.25)
    table, notes = _profile(positions)
    assert table["mixing_index_inflow"].iloc[0] == pytest.approx(_index(5.0), abs=2e-3)
    assert mixing_length_status(table) == "upper_bound"
    assert mixing_length(table) == positions[0] > _exact_length(0.9)
    assert mixing_length(table, ends=(0.0, LENGTH)) == positions[0]
    assert not any("undefined" in n for n in notes)  # the first section stays the inflow
    assert "upper bound" in mixing_length_note(table, 0.9, mixing_length(table))


def test_a_target_above_every_section_is_not_reached():
    positions = np.arange(0.25, LENGTH, 0.25)
    table, _ = _profile(positions)
    assert _index(positions[-1]) < 0.99 < 0.999  # the last section's analytic index: 0.947
    assert _exact_length(0.99) > LENGTH
    assert mixing_length_status(table, target=0.99) == "not_reached"
    assert np.isnan(mixing_length(table, target=0.99))


def test_a_refused_inflow_leaves_the_mixing_length_undefined():
    # the streams meet at x = 1: the first section (x = 0.25) is pure carrier, an inflow of mean 0, against which
    # Danckwerts' I (divided by a (1 - a)) is undefined; the inflow is refused with a warning
    table, notes = _profile(np.arange(0.25, LENGTH, 0.25), injected_at=1.0)
    assert any("is of one phase" in n and "undefined" in n for n in notes)
    assert table["mixing_index_inflow"].isna().all()
    assert mixing_length_status(table) == "undefined"
    assert np.isnan(mixing_length(table))
    # against each section's own mean the sections of pure carrier have none (a = 0), and the streams mix 4.45
    # past where they meet
    assert mixing_length_status(table, reference="section") == "reached"
    assert mixing_length(table, reference="section") == pytest.approx(1.0 + _exact_length(0.9), abs=0.01)


def test_no_sections_is_undefined_and_bad_arguments_are_refused_as_for_the_length():
    table, _ = _profile(np.arange(0.25, LENGTH, 0.25))
    assert mixing_length_status(table.iloc[:0]) == "undefined"
    with pytest.raises(OptionError, match="target mixing index must be in"):
        mixing_length_status(table, target=1.5)
