"""The sampled first look of the regular-grid search: grids are never turned away by it, jittered meshes are
turned away without sorting every coordinate.

Outside check: the grids are built here from known axes (numpy's meshgrid through ``meshgen``), and the
search must give back those axes and shapes; a jittered mesh is no rectilinear grid by construction.
"""

import numpy as np
import pytest

from phasegauge.meshgen import grid_mesh
from phasegauge.model import _regular_grid
from phasegauge.model.mesh import Mesh


@pytest.mark.parametrize("shape", [(2, 2, 3000), (3000, 2, 2), (40, 30, 20), (200, 150), (2, 5000)])
def test_grids_of_any_shape_are_found_after_the_sample(shape):
    mesh = grid_mesh(shape, kind="hexahedron" if len(shape) == 3 else "quad")
    # graded spacing and round-off noise far within the search's tolerance (1e-9 of the extent)
    X = mesh.coordinates.copy()
    X = X ** 1.5 + 1e-13 * np.random.default_rng(0).standard_normal(X.shape)
    mesh = Mesh(X, [(b.cell_type, b.connectivity) for b in mesh.blocks])
    grid = mesh.regular_grid
    assert grid is not None and grid.cell_shape == shape
    for axis, n in zip(grid.axes, shape):
        assert axis.size == n + 1


@pytest.mark.parametrize("plane", [(0, 1), (0, 2)])
def test_grids_with_noise_just_within_the_tolerance_are_found(plane):
    # one-sided noise up to 0.9 of the search's tolerance (1e-9 of the extent), on meshes whose
    # sample skips points: a sample that split values more finely than the search would turn them away
    shape = (40, 30, 20) if plane == (0, 1) else (120, 90)
    mesh = grid_mesh(shape, kind="hexahedron" if len(shape) == 3 else "quad")
    X = mesh.points if len(shape) == 3 else mesh.points[:, [0, 2, 1]]  # a 2D grid moved to the xz plane
    assert mesh.n_points > 2 * _regular_grid._SAMPLE
    scale = float(np.ptp(X, axis=0).max())
    noise = np.random.default_rng(1).uniform(0.0, 0.9e-9 * scale, X.shape)
    if len(shape) == 2:
        noise[:, 1] = 0.0  # the plane stays y = 0
    X = X + noise
    noisy = Mesh(X, [(b.cell_type, b.connectivity) for b in mesh.blocks])
    grid = noisy.regular_grid
    assert grid is not None and grid.cell_shape == shape


def test_jittered_mesh_is_turned_away_before_the_full_sort(monkeypatch):
    mesh = grid_mesh((30, 30, 30), kind="hexahedron", jitter=0.2, seed=2)
    sizes = []
    real = np.sort
    monkeypatch.setattr(_regular_grid.np, "sort", lambda a, *k, **kw: sizes.append(np.size(a)) or real(a, *k, **kw))
    assert _regular_grid.find_regular_grid(mesh) is None
    assert sizes and max(sizes) < mesh.n_points  # the sample only
