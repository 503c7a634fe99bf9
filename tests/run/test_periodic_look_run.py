"""A run's "looks periodic" warnings: the droplets' on a periodic run's points written as N points, and one
answer per step for the droplets' and the free energy's warnings.

Outside references: the count of droplets a periodic box holds (one disc across the boundary is one
droplet, two halves without the period joined: elementary); a spectral code's layout of a period, N points
0..N-1 with the period one spacing beyond the last (numpy's FFT grid, ``np.fft.fftfreq``'s sampling).
"""

import warnings

import numpy as np
import pytest

from phasegauge import measure
from phasegauge.meshgen import grid_mesh, to_meshio

N = 64


def _n_point_run(folder, centre_x=0.0):
    """A periodic run's tanh drop (radius 0.2) across x = 0 of the unit square, written as N x N points
    0..N-1 (the period one spacing beyond the last plane, as an FFT code's array)."""
    h = 1.0 / N
    mesh = grid_mesh((N - 1, N - 1), bounds=[(0.0, (N - 1) * h), (0.0, (N - 1) * h)])
    x, y = mesh.points[:, 0], mesh.points[:, 1]
    dx = (x - centre_x + 0.5) % 1.0 - 0.5
    c = 0.5 * (1 - np.tanh((np.hypot(dx, y - 0.5) - 0.2) / (2 * 0.02)))
    folder.mkdir()
    for k in range(2):
        to_meshio(mesh, point_data={"c": c}, field_data={"TimeValue": np.array([float(k)])}).write(
            str(folder / f"s_{k}.vtu"))
    return str(folder)


def test_droplets_on_a_periodic_run_written_as_n_points_are_warned_of(tmp_path):
    # before, no word: the droplets' rule needed the boundary plane written twice
    run = _n_point_run(tmp_path / "run")
    plain = measure(run, "c", analyses=("droplets",))
    texts = [str(w) for w in plain.warnings if "looks periodic" in str(w)]
    assert len(texts) == 1 and "plane of points along x joins" in texts[0] and "give --periodic x " in texts[0]
    assert (plain.steps["droplet_count"] == 2).all()  # the one drop split in two without --periodic
    with warnings.catch_warnings():
        warnings.filterwarnings("error", message=".*looks periodic.*")
        joined = measure(run, "c", analyses=("droplets",), periodic="x")
    assert (joined.steps["droplet_count"] == 1).all()


def test_a_walled_run_on_points_is_not_warned(tmp_path):
    # the same drop moved inside a closed box (its tail below the level on both walls)
    run = _n_point_run(tmp_path / "run", centre_x=0.5)
    with warnings.catch_warnings():
        warnings.filterwarnings("error", message=".*looks periodic.*")
        result = measure(run, "c", analyses=("droplets",))
    assert (result.steps["droplet_count"] == 1).all()


def _well(path):
    path.write_text('[model]\nkind = "double-well"\nlean = 0.0\nrich = 1.0\nheight = 4.0\nkappa = 0.001\n')
    return str(path)


@pytest.mark.parametrize("location", ["cell", "point"])
def test_the_periodic_look_is_worked_out_once_a_step(tmp_path, location, monkeypatch):
    # the droplets' and the free energy's warnings both read it (before: twice a step on cells), each
    # in its own words
    from phasegauge.analysis import _periodic_look

    h = 1.0 / N
    mesh = grid_mesh((N, N)) if location == "cell" else grid_mesh((N - 1, N - 1), bounds=[(0, 1 - h), (0, 1 - h)])
    where = mesh.cell_centroids if location == "cell" else mesh.points
    dx = (where[:, 0] - 0.05 + 0.5) % 1.0 - 0.5  # off the boundary: centred on it, the field is mirrored
    c = 0.5 * (1 - np.tanh((np.hypot(dx, where[:, 1] - 0.5) - 0.2) / (2 * 0.02)))
    folder = tmp_path / "run"
    folder.mkdir()
    for k in range(2):
        to_meshio(mesh, **{f"{location}_data": {"c": c}}, field_data={"TimeValue": np.array([float(k)])}).write(
            str(folder / f"s_{k}.vtu"))
    calls = []
    real = _periodic_look._layers_look_periodic
    monkeypatch.setattr(_periodic_look, "_layers_look_periodic", lambda *a: calls.append(1) or real(*a))
    result = measure(str(folder), "c", analyses=("droplets",), free_energy=_well(tmp_path / "well.toml"))
    assert len(calls) == 2  # one a step
    texts = [str(w) for w in result.warnings if "periodic" in str(w)]
    assert len(texts) == 2 and any("droplets crossing" in t for t in texts) and any("free energy" in t for t in texts)


@pytest.mark.parametrize("name", ["vortex_upwind", "vortex_sharp"])
def test_the_shipped_walled_samples_do_not_look_periodic(name):
    # a dye blob in a closed stirred cell (LeVeque's reversed vortex in the unit square, walls all round):
    # no step looks periodic to either warning (the mesh is a regular grid, so the layers are looked at)
    import os

    from phasegauge.analysis.droplets import PeriodicLook
    from phasegauge.io import Series
    from phasegauge.model.indicator import make_indicator

    series = Series(os.path.join(os.path.dirname(__file__), os.pardir, os.pardir, "sample_fields", name))
    for index in range(0, len(series), 4):
        step = series.read(index)
        assert step.mesh.regular_grid is not None
        look = PeriodicLook(step.mesh, make_indicator(step.mesh, step.fields, "c"), level=0.5)
        assert look.axes == [] and look.droplet_axes == []
