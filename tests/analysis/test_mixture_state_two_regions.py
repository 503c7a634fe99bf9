"""A model with two two-phase regions at one temperature: every composition's state against scipy.

Outside references: the two-phase regions are the bridges of the lower convex hull of the mixing free
energy on a fine grid (scipy's ConvexHull, Qhull), and "unstable" is where the free energy is concave
(numpy's second differences of it). The model is the shipped solvent pair (NRTL) at 100 K, where the
hull shows two regions, about (0.0004, 0.519) and (0.534, 0.9999), with a stable gap between them.
"""

import os

import numpy as np
import pytest
from scipy.spatial import ConvexHull

from phasegauge.analysis.thermo import mixture_state
from phasegauge.io._model_file import read_mixture_model

MODEL = os.path.join(os.path.dirname(__file__), "..", "..", "sample_fields", "solvent_pair.toml")
T = 100.0


def _reference():
    model = read_mixture_model(MODEL)
    x = np.linspace(1e-6, 1 - 1e-6, 200001)
    g = model.mixing_gibbs(x, T)
    hull = ConvexHull(np.c_[x, g])
    lower = sorted({int(i) for simplex, eq in zip(hull.simplices, hull.equations) if eq[1] < 0 for i in simplex})
    bridges = [(x[a], x[b]) for a, b in zip(lower[:-1], lower[1:]) if b - a > 1 and x[b] - x[a] > 1e-3]
    concave = np.r_[False, np.diff(g, 2) < 0, False]
    return model, x, bridges, concave


@pytest.mark.parametrize("composition", [0.005, 0.1, 0.27, 0.5, 0.527, 0.6, 0.88])
def test_states_of_a_model_with_two_regions(composition):
    model, x, bridges, concave = _reference()
    assert len(bridges) == 2  # Qhull's lower hull: two two-phase regions at 100 K
    k = int(np.argmin(np.abs(x - composition)))
    if concave[k]:
        expected = "unstable"
    elif any(low < composition < high for low, high in bridges):
        expected = "metastable"
    else:
        expected = "stable"
    assert mixture_state(model, T, composition) == expected
