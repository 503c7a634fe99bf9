"""Bulk plateaus off the wells are reported as physics, values beyond them as overshoot.

Outside check: the Cahn-Hilliard drop's bulk values phi = -0.980 and 1.018 of issue 22's run
(a Gibbs-Thomson shift, Cahn & Hilliard 1958 free energy) written as an analytic tanh drop.
"""

import numpy as np
import pytest

from phasegauge import measure
from phasegauge.meshgen import grid_mesh, to_meshio


def _series(folder, spike=0.0):
    folder.mkdir()
    mesh = grid_mesh((80, 80))
    x, y = mesh.points[:, 0], mesh.points[:, 1]
    low, high = -0.980, 1.018
    for k in range(3):
        r = np.hypot(x - 0.5, y - 0.5)
        phi = low + (high - low) * 0.5 * (1 + np.tanh((0.25 - r) / (np.sqrt(2) * 0.02)))
        phi[np.argmin(r)] += spike
        to_meshio(mesh, point_data={"phi": phi}, field_data={"TimeValue": np.array([0.1 * k])}).write(
            str(folder / f"s_{k}.vtu"))
    return str(folder)


@pytest.mark.parametrize("spike, kind", [(0.0, "bulk_plateaus"), (0.3, "indicator_overshoot")])
def test_shifted_bulk_is_physics_and_values_beyond_it_overshoot(tmp_path, spike, kind):
    result = measure(_series(tmp_path / "run", spike), field="phi", value_range=(-1, 1))
    kinds = [f.kind for f in result.findings]
    assert kind in kinds
    other = {"bulk_plateaus": "indicator_overshoot", "indicator_overshoot": "bulk_plateaus"}[kind]
    assert other not in kinds
    if kind == "bulk_plateaus":
        note = result.findings[kinds.index(kind)]
        assert note.severity == "note" and "Gibbs-Thomson" in note.text
        assert note.figures["bulk_c_high"] == pytest.approx((1.018 + 1) / 2, abs=1e-3)
        assert note.figures["bulk_c_low"] == pytest.approx((-0.980 + 1) / 2, abs=1e-3)
