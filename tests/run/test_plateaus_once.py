"""The bulk plateaus of a step's indicator are computed once and shared by the widths and the droplets.

Outside check: the tables themselves are guarded bit for bit by tests/run/test_table_fingerprints.py;
here the droplets' and widths' bulk values of a Cahn-Hilliard-like drop with bulk values off 0 and 1
(0.02 and 0.97, written by hand) are the same plateaus, measured once.
"""

import numpy as np

from phasegauge import measure
from phasegauge.analysis import _interface_width
from phasegauge.meshgen import grid_mesh, to_meshio


def test_bulk_plateaus_are_computed_once_per_step(tmp_path, monkeypatch):
    mesh = grid_mesh((48, 48))
    r = np.hypot(mesh.points[:, 0] - 0.5, mesh.points[:, 1] - 0.5)
    c = 0.02 + 0.95 * 0.5 * (1 - np.tanh((r - 0.25) / 0.03))  # plateaus at 0.02 and 0.97
    folder = tmp_path / "run"
    folder.mkdir()
    for k in range(2):
        to_meshio(mesh, point_data={"c": c}).write(str(folder / f"s_{k}.vtu"))
    calls = []
    real = _interface_width.bulk_plateaus

    def counted(c_point, level, mesh=None, **given):
        calls.append(level)
        return real(c_point, level, mesh, **given)

    monkeypatch.setattr(_interface_width, "bulk_plateaus", counted)
    monkeypatch.setattr("phasegauge.analysis.interface.bulk_plateaus", counted)
    steps = measure(str(folder), field="c").steps
    assert len(calls) == 2  # regression: the widths and the droplets each computed them (4 calls)
    assert np.allclose(steps["bulk_c_low"], 0.02, atol=2e-3) and np.allclose(steps["bulk_c_high"], 0.97, atol=2e-3)
    assert (steps["droplet_count"] == 1).all()


def test_plateaus_passed_in_are_checked():
    import pytest

    from phasegauge.analysis.interface import interface_metrics
    from phasegauge.errors import OptionError

    mesh = grid_mesh((8, 8))
    with pytest.raises(OptionError, match="plateaus must be finite with low < high"):
        interface_metrics(mesh, mesh.points[:, 0], plateaus=(1.0, 0.0, 1e-6))
    with pytest.raises(OptionError, match=r"plateaus must be \(low, high, tail\)"):
        interface_metrics(mesh, mesh.points[:, 0], plateaus="low")
