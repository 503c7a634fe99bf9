"""A crest or a tail cut by the domain is no bulk: the side keeps its ideal value 0 or 1.

Outside checks: the analytic logistic profile c = 1 / (1 + exp(-x / w)) (the tanh profile of Cahn & Hilliard 1958,
(1 + tanh(x / (2 w))) / 2; REFERENCES.md [calc]); its values never reach 0 or 1, so the right bulk values are the
ideal 0 and 1 the formula tends to. A filament is the difference of two such fronts, a bump a logistic of the
radius whose crest never reaches 1.
"""

import numpy as np
import pytest

from phasegauge.analysis._bulk_plateaus import bulk_plateaus
from phasegauge.meshgen import grid_mesh


def _logistic(x, w):
    return 1.0 / (1.0 + np.exp(-x / w))


def _filament_half_separation(top, w):
    # the half-separation d at which the crest 2 / (1 + exp(d / w)) - 1 reaches ``top``: d = w ln((1 + t) / (1 - t))
    return w * np.log((1.0 + top) / (1.0 - top))


@pytest.mark.parametrize("cut", [0.005, 0.003, 0.002])
def test_a_tanh_tail_cut_by_the_wall_reads_the_ideal_low_bulk(cut):
    # a planar front whose low side the wall at x = 0 cuts at c = cut (review case: 200 x 20 quads, w = 0.02);
    # before: low bulk 0.0172 at a cut of 0.005, widths 4.7 % low
    w = 0.02
    mesh = grid_mesh((200, 20), bounds=[(0.0, 1.0), (0.0, 0.1)])
    x0 = w * np.log(cut / (1.0 - cut))  # analytic: c(0) = cut
    c = _logistic(mesh.coordinates[:, 0] + x0, w)
    assert c.min() == pytest.approx(cut)
    assert bulk_plateaus(c, 0.5, mesh)[:2] == (0.0, 1.0)
    assert bulk_plateaus(c, 0.5)[:2] == (0.0, 1.0)  # the same values without the mesh


@pytest.mark.parametrize("top", [0.99, 0.6])
def test_a_strip_s_crest_reads_the_ideal_high_bulk(top):
    # a straight filament in a matrix at 0 whose crest stops at ``top`` (before: high bulk 0.980 and 0.5765)
    w = 0.02
    mesh = grid_mesh((200, 20), bounds=[(-0.5, 0.5), (0.0, 0.1)])
    d = _filament_half_separation(top, w)
    x = mesh.coordinates[:, 0]
    c = _logistic(x + d, w) - _logistic(x - d, w)
    assert c.max() == pytest.approx(top, abs=1e-9)  # analytic crest at x = 0, a grid point
    assert bulk_plateaus(c, 0.5, mesh)[:2] == (0.0, 1.0)
    assert bulk_plateaus(c, 0.5)[:2] == (0.0, 1.0)


@pytest.mark.parametrize("top", [0.55, 0.6])
def test_a_bump_s_crest_reads_the_ideal_high_bulk(top):
    # a 2D bump c = logistic(r0 - r) with r0 < 0, so its crest at the centre stops at ``top``
    # (before: high bulk 0.519 and 0.532 without the mesh); the crest spans a few cells: w = 20 cells
    w = 0.1
    mesh = grid_mesh((200, 200), bounds=[(-0.5, 0.5), (-0.5, 0.5)])
    r = np.linalg.norm(mesh.coordinates, axis=1)
    r0 = w * np.log(top / (1.0 - top))
    c = _logistic(r0 - r, w)
    assert c.max() == pytest.approx(top, abs=1e-9)
    assert bulk_plateaus(c, 0.5, mesh)[:2] == (0.0, 1.0)
    assert bulk_plateaus(c, 0.5)[:2] == (0.0, 1.0)


def test_a_matrix_short_of_zero_far_from_its_drop_keeps_its_bulk():
    # a matrix at 0.02 + 0.004 N(0, 1) (numpy's seeded generator, clipped at 0.005) around a logistic drop of
    # radius 0.2: its values never reach 0, and it lies well beyond the drop's reach: its bulk is its own
    w = 0.01
    mesh = grid_mesh((160, 160), kind="triangle")
    r = np.linalg.norm(mesh.coordinates - 0.5, axis=1)
    matrix = np.clip(0.02 + 0.004 * np.random.default_rng(3).standard_normal(r.size), 0.005, None)
    c = matrix + (1.0 - matrix) * _logistic(0.2 - r, w)
    side = c[c < 0.5]
    low, high, _ = bulk_plateaus(c, 0.5, mesh)
    assert float(side.min()) <= low <= float(np.percentile(side, 75))  # numpy on the side's own values
    assert low == pytest.approx(0.02, abs=0.002)  # the matrix's mean, set above (our threshold)
    assert high == 1.0


def _packed_drops(mesh, spacing, radius, w, matrix, noise, seed=0):
    # logistic drops of ``radius`` on a lattice of ``spacing`` jittered by up to a tenth of it (numpy's seeded
    # generator), in a matrix at ``matrix`` + noise N(0, 1)
    rng = np.random.default_rng(seed)
    centres = np.arange(0.0, 1.0, spacing) + spacing / 2
    cx, cy = np.meshgrid(centres, centres)
    centres = np.c_[cx.ravel(), cy.ravel()] + rng.uniform(-0.1, 0.1, (cx.size, 2)) * spacing
    x = mesh.coordinates[:, :2]
    r = np.min(np.linalg.norm(x[:, None, :] - centres[None], axis=2), axis=1)
    return matrix + noise * rng.standard_normal(r.size) + (1.0 - matrix) * _logistic(radius - r, w)


@pytest.mark.parametrize("kind", ["quad", "triangle"])
def test_a_matrix_packed_between_drops_about_ten_eps_apart_keeps_its_bulk(kind):
    # 100 drops of radius 0.03 = 7.5 eps on a lattice of spacing 0.1 (gaps about 10 eps, area fraction 0.28) in a
    # matrix at 0.02 + 0.004 N(0, 1): only 4 % of the matrix lies beyond 8 eps of the contour (before: low bulk 0,
    # the widths 13.5 % wide on points, 19 % on cells)
    mesh = grid_mesh((300, 300), kind=kind)
    c = _packed_drops(mesh, 0.1, 0.03, 0.004, 0.02, 0.004)
    low, high, _ = bulk_plateaus(c, 0.5, mesh)
    assert low == pytest.approx(0.02, abs=0.01)  # the matrix's mean, set above; 0.01: our threshold
    assert high == 1.0


def test_a_matrix_in_a_narrow_channel_keeps_its_bulk():
    # a channel 30 eps high (0.15, eps = w = 0.005) with a train of logistic drops of radius 10 eps on its axis,
    # 5 eps from the walls and 10 eps apart, in a matrix at 0.02 + 0.004 N(0, 1) (before: low bulk 0)
    w = 0.005
    mesh = grid_mesh((600, 90), bounds=[(0.0, 1.0), (0.0, 0.15)])
    x = mesh.coordinates
    centres = np.arange(0.0, 1.0, 0.15) + 0.075
    r = np.min(np.hypot(x[:, 0, None] - centres[None], x[:, 1, None] - 0.075), axis=1)
    c = 0.02 + 0.004 * np.random.default_rng(0).standard_normal(r.size) + 0.98 * _logistic(0.05 - r, w)
    low, high, _ = bulk_plateaus(c, 0.5, mesh)
    assert low == pytest.approx(0.02, abs=0.01)  # the matrix's mean, set above; 0.01: our threshold
    assert high == 1.0


@pytest.mark.parametrize("case", ["tail 0.002", "strip 0.99"])
def test_a_cut_tail_and_a_crest_in_a_square_read_the_ideal(case):
    # the tail and the strip above on 200 x 200 quads: the boundary faces along the front no longer lie within
    # 2.5 eps of every point, so the tail is told by its distance to the wall and the crest by the reach alone
    w = 0.02
    mesh = grid_mesh((200, 200), bounds=[(-0.5, 0.5), (0.0, 1.0)])
    x = mesh.coordinates[:, 0]
    if case == "tail 0.002":
        c = _logistic(x + 0.5 + w * np.log(0.002 / 0.998), w)  # analytic: c = 0.002 on the wall x = -0.5
    else:
        d = _filament_half_separation(0.99, w)
        c = _logistic(x + d, w) - _logistic(x - d, w)
    assert bulk_plateaus(c, 0.5, mesh)[:2] == (0.0, 1.0)
