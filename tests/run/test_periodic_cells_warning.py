"""Droplets on cell data that look periodic: the warning point data had, for a volume-of-fluid run's cells.

Outside references: exact disc fractions of the cells (each cell's covered share by numpy on a 16 x 16
sub-grid, as a volume-of-fluid initialisation gives them); the count of droplets a periodic box holds
(one disc across the boundary is one droplet, elementary).
"""

import warnings

import numpy as np
import pytest

from phasegauge import measure
from phasegauge.errors import MeshWarning
from phasegauge.meshgen import grid_mesh, to_meshio

N = 64


def _samples(mesh):
    """16 x 16 sample points in each cell of an N x N grid of the unit square: (x, y), (n_cells, 256) each."""
    sub = (np.arange(16) + 0.5) / 16 / N
    sx, sy = np.meshgrid(sub, sub, indexing="ij")
    lo = mesh.cell_centroids[:, :2] - 0.5 / N
    return lo[:, 0, None] + sx.ravel()[None, :], lo[:, 1, None] + sy.ravel()[None, :]


def _fractions(centre, radius, periodic_x):
    """Each cell's covered share of a disc (16 x 16 samples a cell), the disc wrapped along x if asked."""
    mesh = grid_mesh((N, N))
    x, y = _samples(mesh)
    dx = x - centre[0]
    if periodic_x:
        dx = (dx + 0.5) % 1.0 - 0.5
    inside = dx ** 2 + (y - centre[1]) ** 2 < radius ** 2
    return mesh, inside.mean(axis=1)


def _run(tmp_path, name, centre, radius, periodic_x):
    mesh, alpha = _fractions(centre, radius, periodic_x)
    folder = tmp_path / name
    folder.mkdir()
    for k in range(2):
        to_meshio(mesh, cell_data={"alpha": alpha}, field_data={"TimeValue": np.array([float(k)])}).write(
            str(folder / f"s_{k}.vtu"))
    return str(folder)


def test_a_drop_across_a_periodic_boundary_on_cells_is_warned_of(tmp_path):
    run = _run(tmp_path, "across", (0.02, 0.5), 0.2, periodic_x=True)
    with pytest.warns(MeshWarning, match=r"along x joins the first.*looks periodic.*--periodic x"):
        plain = measure(run, "alpha", analyses=("droplets",))
    assert (plain.steps["droplet_count"] == 2).all()  # the one disc counted twice without --periodic
    joined = measure(run, "alpha", analyses=("droplets",), periodic="x")
    assert (joined.steps["droplet_count"] == 1).all()  # one disc across the boundary (elementary)


@pytest.mark.parametrize("centre", [(0.5, 0.5), (0.2, 0.5)], ids=["inside", "on-the-left-wall"])
def test_a_walled_box_is_not_warned_periodic(tmp_path, centre):
    # a drop inside the box, and one cut by the left wall only (the right wall's layer holds none of it)
    run = _run(tmp_path, "walled", centre, 0.25, periodic_x=False)
    with warnings.catch_warnings():
        warnings.filterwarnings("error", message=".*looks periodic.*")
        measure(run, "alpha", analyses=("droplets",))


def test_a_plug_spanning_a_walled_channel_is_not_warned_periodic(tmp_path):
    # a slug filling the channel between its walls y = 0 and 1, its ends bulging alike near both walls (a
    # field mirrored about y = 1/2): its wall layers join as well with closed walls as wrapped, no sign
    mesh = grid_mesh((N, N))
    x, y = _samples(mesh)
    alpha = (np.abs(x - 0.5) < 0.15 + 0.05 * np.cos(2 * np.pi * (y - 0.5))).mean(axis=1)
    folder = tmp_path / "plug"
    folder.mkdir()
    for k in range(2):
        to_meshio(mesh, cell_data={"alpha": alpha}, field_data={"TimeValue": np.array([float(k)])}).write(
            str(folder / f"s_{k}.vtu"))
    with warnings.catch_warnings():
        warnings.filterwarnings("error", message=".*looks periodic.*")
        result = measure(str(folder), "alpha", analyses=("droplets",))
    assert (result.steps["droplet_count"] == 1).all()
