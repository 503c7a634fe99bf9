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


def test_all_regions_against_the_hull_and_the_curvature():
    # every two-phase region (Qhull's lower hull bridges on a grid of spacing 5e-6) and every unstable
    # range (the ends of numpy's concave runs, to the fine grid's spacing)
    from phasegauge.analysis._binodal import all_regions

    model, x, bridges, concave = _reference()
    regions, unstable = all_regions(model, T)
    assert len(regions) == len(bridges) == 2
    for (a, b), (ra, rb) in zip(regions, bridges):  # each refined by isoactivity: to the fine grid's spacing
        assert a == pytest.approx(ra, abs=1e-5) and b == pytest.approx(rb, abs=1e-5)
    edges = np.flatnonzero(np.diff(concave.astype(int)))
    runs = [(x[edges[i] + 1], x[edges[i + 1]]) for i in range(0, edges.size, 2)]
    assert len(unstable) == len(runs) == 2
    for (a, b), (ra, rb) in zip(unstable, runs):
        assert a == pytest.approx(ra, abs=2e-5) and b == pytest.approx(rb, abs=2e-5)


@pytest.mark.parametrize("temperature", [65.0, 70.0, 77.0, 100.0])
def test_the_second_region_is_refined_at_every_temperature(temperature):
    # the region beside the binodal against Qhull's lower hull on a grid of spacing 2.5e-6 (from 60 to
    # 99 K Newton's own isoactivity test fails near the pure component although it has the pair)
    from phasegauge.analysis._binodal import equilibrium_at, other_regions

    model = read_mixture_model(MODEL)
    x = np.linspace(1e-7, 1 - 1e-7, 400001)
    hull = ConvexHull(np.c_[x, model.mixing_gibbs(x, temperature)])
    lower = sorted({int(i) for simplex, eq in zip(hull.simplices, hull.equations) if eq[1] < 0 for i in simplex})
    bridges = [(x[a], x[b]) for a, b in zip(lower[:-1], lower[1:]) if b - a > 1 and x[b] - x[a] > 1e-3]
    eq = equilibrium_at(model, temperature)
    (lean, rich), = other_regions(model, temperature, eq.binodal_lean, eq.binodal_rich)
    second = [b for b in bridges if b[0] >= eq.binodal_rich - 1e-3]
    assert len(second) == 1
    assert lean == pytest.approx(second[0][0], abs=2e-5) and rich == pytest.approx(second[0][1], abs=5e-6)


def test_the_equilibrium_command_names_both_regions():
    import json

    from click.testing import CliRunner

    from phasegauge.cli import main

    text = CliRunner().invoke(main, ["equilibrium", MODEL, "--temperature", "100"]).output
    assert "note: 2 two-phase regions: 0.00039219 to 0.518846, 0.534473 to 0.999902 (1 - 9.82e-05)" in text
    record = json.loads(CliRunner().invoke(main, ["equilibrium", MODEL, "--temperature", "100", "--json"]).output)
    assert len(record["two_phase_regions"]) == 2 and len(record["unstable_ranges"]) == 2
    one = json.loads(CliRunner().invoke(main, ["equilibrium", MODEL, "--temperature", "298.15", "--json"]).output)
    assert one["two_phase_regions"] == [[one["binodal_lean"], one["binodal_rich"]]]


def test_the_phase_diagram_lists_the_second_region(tmp_path):
    # 90, 100 and 110 K: at 100 K the second region is the one Qhull finds beside the binodal (the test
    # above); the diagram's record lists it, draws it and says so
    import json

    from click.testing import CliRunner

    from phasegauge.cli import main

    model, _, bridges, _ = _reference()
    out = tmp_path / "pd"
    result = CliRunner().invoke(main, ["equilibrium", MODEL, "--temperatures", "90,110", "--count", "3",
                                       "-o", str(out)])
    assert result.exit_code == 0, result.output
    record = json.loads((out / "phase_diagram.json").read_text())
    at_100 = [r for r in record["other_two_phase_regions"] if r["temperature"] == 100.0]
    assert len(at_100) == 1
    assert at_100[0]["lean"] == pytest.approx(bridges[1][0], abs=1e-5)
    assert at_100[0]["rich"] == pytest.approx(bridges[1][1], abs=1e-5)
    assert any("second two-phase region" in f for f in record["findings"])
    assert "second two-phase region" in result.output
