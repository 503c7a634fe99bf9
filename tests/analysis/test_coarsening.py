"""Coarsening length from the structure factor and its growth exponent.

Outside checks: a pattern of cosines of wavelength lambda has its whole structure factor on the
shell |k| = 2 pi / lambda, so L = lambda exactly [calc]; a self-similar pattern scaled as
L ~ t^(1/3) (Lifshitz & Slyozov 1961) gives n = 1/3; numpy's polyfit for the fit [lib].
"""

import numpy as np
import pytest

from phasegauge.analysis.mixing import coarsening_exponent, coarsening_length
from phasegauge.meshgen import grid_mesh


def test_cosine_pattern_length_is_its_wavelength():
    mesh = grid_mesh((128, 128))
    x, y = mesh.cell_centroids[:, 0], mesh.cell_centroids[:, 1]
    for periods in (4, 8, 16):
        c = 0.5 + 0.25 * (np.cos(2 * np.pi * periods * x) + np.cos(2 * np.pi * periods * y))
        assert coarsening_length(mesh, c) == pytest.approx(1.0 / periods, rel=1e-9)


def test_self_similar_pattern_gives_one_third():
    mesh = grid_mesh((256, 256))
    x, y = mesh.cell_centroids[:, 0], mesh.cell_centroids[:, 1]
    periods = np.array([16, 12, 8, 6, 4])  # 16 to 64 cells per period
    lengths, times = [], (periods[0] / periods) ** 3.0  # L = 1 / periods grows as t^(1/3)
    for m in periods:
        k = 2 * np.pi * m
        pattern = np.cos(k * x) + np.cos(k * y) + 0.7 * np.cos(k * (x + y)) + 0.3 * np.sin(k * (x - y))
        c = 0.5 * (1 + np.tanh(3 * pattern))  # sharp, as a coarsened spinodal pattern
        lengths.append(coarsening_length(mesh, c))
    lengths = np.array(lengths)
    ratio = lengths * periods  # a fixed multiple of the scale: self-similar
    assert np.ptp(ratio) / ratio.mean() < 0.02
    fit = coarsening_exponent(times, lengths)
    assert fit["exponent"] == pytest.approx(1 / 3, abs=0.01)
    slope = np.polyfit(np.log(times), np.log(lengths), 1)[0]  # numpy's fit [lib]
    assert fit["exponent"] == pytest.approx(slope, rel=1e-9)
    assert fit["exponent_stderr"] < 0.01 and fit["points"] == 5


def test_unstructured_mesh_resampled():
    # nearest-centroid resampling adds staircase noise at high k: L reads low, by 3 % here
    mesh = grid_mesh((128, 128), kind="triangle")
    x, y = mesh.cell_centroids.T
    c = 0.5 + 0.25 * (np.cos(2 * np.pi * 8 * x) + np.cos(2 * np.pi * 8 * y))
    found = coarsening_length(mesh, c, resolution=128)
    assert 0.95 / 8 < found < 1 / 8
