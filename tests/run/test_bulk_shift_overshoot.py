"""A bulk off its well is the Gibbs-Thomson shift only where both bulks moved alike and by little.

Outside checks: the overshoot volume of point data against numpy's lumped integral of max(0, c - 1, -c)
(trapezoid weights on the uniform grid: each point a quarter of each cell it is a corner of); the
Gibbs-Thomson shift of a Cahn-Hilliard drop moves both coexisting bulk values by mu / f'' (Cahn & Hilliard
1958, linearised), equal at the two wells of a symmetric double well, here written as an analytic tanh drop
with both plateaus moved by the same amount.
"""

import numpy as np
import pandas as pd
import pytest

from phasegauge import measure
from phasegauge.meshgen import grid_mesh, to_meshio
from phasegauge.run.assemble import MAX_SHIFT, findings
from phasegauge.run.options import MeasureOptions


def _drop(folder, n, width, shift):
    """A tanh drop of radius 0.25 on the points of an n x n unit square (c = 1 inside), through ``shift``
    (c -> the shifted field); returns the folder and the field."""
    folder.mkdir()
    mesh = grid_mesh((n, n))
    x, y = mesh.points[:, 0], mesh.points[:, 1]
    base = 0.5 * (1 - np.tanh((np.hypot(x - 0.5, y - 0.5) - 0.25) / width))
    c = shift(base)
    for k in range(3):
        to_meshio(mesh, point_data={"c": c}, field_data={"TimeValue": np.array([0.1 * k])}).write(
            str(folder / f"s_{k}.vtu"))
    return str(folder), mesh, c


def _lumped_overshoot(mesh, c, n):
    """numpy: sum of max(0, c - 1, -c) times the point's trapezoid weight on the uniform unit grid."""
    x, y = mesh.points[:, 0], mesh.points[:, 1]
    edge = np.isclose(x, 0) | np.isclose(x, 1), np.isclose(y, 0) | np.isclose(y, 1)
    weight = np.where(edge[0], 0.5, 1.0) * np.where(edge[1], 0.5, 1.0) / n ** 2
    return float((np.maximum(0, np.maximum(c - 1, -c)) * weight).sum())


def _checks(result):
    return {c["check"]: c for c in result.standing_checks}


@pytest.mark.parametrize("shift, share", [
    pytest.param(lambda b: b - 0.02 * (1 - b), 0.0119, id="matrix-only"),  # the matrix at -0.02, the drop at 1
    pytest.param(lambda b: b - 0.1, 0.0673, id="whole-field")])  # matrix -0.1, drop 0.9: a loss or a wrong range
def test_one_bulk_on_its_well_or_a_large_shift_is_overshoot(tmp_path, shift, share):
    """Regression: both were noted as "physics, not overshoot" (shift -0.02 and +0; -0.1 and -0.1) and the
    standing check read "indicator bounded"; the overshoot is 1.2 % and 6.7 % of the domain."""
    n = 64
    path, mesh, c = _drop(tmp_path / "run", n, np.sqrt(2) * 2 / n, shift)
    result = measure(path, field="c", analyses=("conservation", "interface"))
    kinds = [f.kind for f in result.findings]
    assert "indicator_overshoot" in kinds and "bulk_plateaus" not in kinds
    warning = result.findings[kinds.index("indicator_overshoot")]
    reference = _lumped_overshoot(mesh, c, n)  # numpy, trapezoid point weights
    assert reference == pytest.approx(share, abs=1e-4)
    assert warning.figures["overshoot_volume"] == pytest.approx(reference, rel=1e-9)
    assert _checks(result)["indicator_bounds"]["passed_as"] == "indicator bounded"


@pytest.mark.parametrize("delta", [0.008, -0.008])
def test_both_bulks_shifted_alike_by_little_are_noted(tmp_path, delta):
    """Both plateaus moved by the same small amount (a symmetric well's Gibbs-Thomson shift, Cahn & Hilliard
    1958): the note, no warning, and the standing check names the note."""
    path, _, _ = _drop(tmp_path / "run", 80, np.sqrt(2) * 0.02, lambda b: b + delta)
    result = measure(path, field="c", analyses=("conservation", "interface"))
    kinds = [f.kind for f in result.findings]
    assert "bulk_plateaus" in kinds and "indicator_overshoot" not in kinds
    note = result.findings[kinds.index("bulk_plateaus")]
    assert note.figures["bulk_c_low"] == pytest.approx(delta, abs=1e-4)  # the matrix: far from the drop
    assert note.figures["bulk_c_high"] == pytest.approx(1 + delta, abs=1e-3)  # the drop's plateau: its tail
    assert _checks(result)["indicator_bounds"]["passed_as"] == "bulk off 0 and 1 (note)"


def _tables(low, high):
    """c reaches a little beyond a plateau off its well (within the plateaus' range), and to a plateau within [0, 1]."""
    return pd.DataFrame({"step": [0], "time": [0.0], "bulk_c_low": [low], "bulk_c_high": [high],
                         "c_min": [low - 1e-4 if low < 0 else 0.0], "c_max": [high + 1e-4 if high > 1 else 1.0],
                         "overshoot_volume": [1e-3], "domain_volume": [1.0]})


@pytest.mark.parametrize("low, high, found", [
    (0.002, 1.009, "indicator_overshoot"),  # 4.5 times apart: more than SHIFT_FACTOR (3, our threshold)
    (0.006, 1.009, "bulk_plateaus"),  # 1.5 times apart
    (-0.02, 1.0, "indicator_overshoot"),  # one bulk on its well
    (MAX_SHIFT + 0.005, 1 + MAX_SHIFT + 0.005, "indicator_overshoot"),  # beyond the cap, without a model
    (MAX_SHIFT - 0.005, 1 + MAX_SHIFT - 0.005, "bulk_plateaus")])
def test_shifts_not_alike_or_beyond_the_cap_are_overshoot(low, high, found):
    """Without a free energy: the two shifts of one sign, within SHIFT_FACTOR of each other and at most
    MAX_SHIFT (0.03 of the gap, our threshold) each."""
    kinds = [f.kind for f in findings(_tables(low, high), pd.DataFrame(), {"interface_kind": "diffuse"},
                                      MeasureOptions(field="c"), [], dimension=2)]
    assert found in kinds and {"indicator_overshoot", "bulk_plateaus"} - {found} - set(kinds)
