"""Droplet tracking on a mesh of split cells (polyhedra read as tetrahedra) searches the whole cells.

The same histories as on the hexahedra the polyhedra are made of: a ball of whole cells that moves
by whole cells with its velocity known (it never overlaps its earlier place), and a mesh that
changes from the hexahedra to their split and back. The polyhedral file is written by VTK itself
(pyvista) [lib]; where the balls are and when they move is set by the construction.
"""

import numpy as np
import pytest

pytest.importorskip("pyvista")

from phasegauge.analysis.droplets import label_droplets  # noqa: E402
from phasegauge.analysis.tracking import DropletTracker  # noqa: E402
from phasegauge.io import Series  # noqa: E402
from phasegauge.meshgen import grid_mesh, to_polyhedral_grid  # noqa: E402

# hexahedra written as polyhedra, split as polyhedra of other shapes are (conftest)
pytestmark = pytest.mark.usefixtures("every_polyhedron_split")

N = 12
H = 1.0 / N


@pytest.fixture(scope="module")
def meshes(tmp_path_factory):
    hexa = grid_mesh((2 * N, N, N), kind="hexahedron", bounds=[(0, 2), (0, 1), (0, 1)])
    path = tmp_path_factory.mktemp("split") / "poly.vtu"
    to_polyhedral_grid(hexa).save(str(path))
    split = Series(str(path)).read(0).mesh
    assert split.cell_parents is not None and split.n_cells == 24 * hexa.n_cells
    return hexa, split


def _ball(hexa, k, jump):
    """Whole hexahedra within 2.5 cells of a centre that moves ``jump`` cells a step along x."""
    centre = np.array([0.4 + jump * k * H, 0.5, 0.5])
    return np.linalg.norm(hexa.cell_centroids - centre, axis=1) < 2.5 * H


def _track(steps, *, gate):
    tracker = DropletTracker(gate=gate)
    for k, (mesh, inside, velocity) in enumerate(steps):
        tracker.add(k, float(k), mesh, label_droplets(mesh, inside.astype(float), velocity=velocity))
    return tracker.result()


@pytest.mark.parametrize("on", ["hexahedra", "split"])
def test_fast_ball_with_its_velocity_keeps_its_track(meshes, on):
    """Eight cells a step (more than the ball's diameter): only the moved overlap links it."""
    hexa, split = meshes
    steps = []
    for k in range(3):
        inside = _ball(hexa, k, 8)
        u = np.tile([8 * H, 0.0, 0.0], (hexa.n_cells, 1))
        steps.append((hexa, inside, u) if on == "hexahedra" else (split, inside[split.cell_parents],
                                                                   u[split.cell_parents]))
    droplets, events = _track(steps, gate=0.0)
    assert len(events) == 0 and droplets["track"].tolist() == [0, 0, 0]
    # without the velocity (and no gate) it leaves and a new one appears
    droplets, events = _track([(m, inside, None) for m, inside, _ in steps], gate=0.0)
    assert events["kind"].tolist() == ["disappearance", "appearance"] * 2


def test_mesh_changes_between_whole_and_split_cells(meshes):
    """The ball on the hexahedra, then on their split (a different mesh: found through the whole
    cells' centroids), then on the hexahedra again, moving one cell a step: one track, no event."""
    hexa, split = meshes
    steps = []
    for k, mesh in enumerate([hexa, split, hexa]):
        inside = _ball(hexa, k, 1)
        steps.append((mesh, inside if mesh is hexa else inside[split.cell_parents], None))
    droplets, events = _track(steps, gate=0.0)
    assert len(events) == 0 and droplets["track"].tolist() == [0, 0, 0]
    volumes = droplets["volume"].to_numpy()
    np.testing.assert_allclose(volumes, volumes[0], rtol=1e-12)  # the same whole cells each step


def test_a_whole_cell_takes_the_droplet_of_its_heaviest_labelled_piece():
    """The rule on its own (as `_whole_labels` states it): pieces of one whole cell in two droplets,
    the piece with the largest c dV decides; on a tie the lowest piece number; a whole cell with no
    labelled piece has none (-1). Taking the lightest piece instead would give 5 for the first."""
    from types import SimpleNamespace

    from phasegauge.analysis._tracking import _whole_labels

    outline = SimpleNamespace(cell_centroids=np.zeros((3, 3)), cell_parents=np.array([0, 0, 0, 1, 1, 2, 2]))
    step = {"cells": np.array([0, 1, 2, 3, 4]), "labels": np.array([5, 7, 7, 2, 9]),
            "weights": np.array([0.2, 0.5, 0.3, 0.4, 0.4])}
    assert _whole_labels(step, outline).tolist() == [7, 2, -1]
    step["weights"] = np.array([0.6, 0.5, 0.3, 0.4, 0.4])
    assert _whole_labels(step, outline).tolist() == [5, 2, -1]


def test_whole_cell_numbers_with_a_gap_are_never_found():
    """A block split in part keeps its rows' numbers, so some whole cells have no pieces (here
    whole cell 1) and no centroid: a point is found in a whole cell that exists, the nearest of
    them (elementary geometry: the three tetrahedra lie far from the origin, where a cell with no
    pieces would have its centroid)."""
    from phasegauge.model.mesh import Mesh
    from phasegauge.model.outline import MeshOutline

    points = np.array([[5.0, 5, 5], [6, 5, 5], [5, 6, 5], [5, 5, 6], [7, 7, 7], [8, 7, 7], [7, 8, 7], [7, 7, 8]])
    tetra = np.array([[0, 1, 2, 3], [1, 2, 3, 0], [4, 5, 6, 7]])
    mesh = Mesh(points, [("tetra", tetra)], pieces=[np.array([0, 0, 2])])
    outline = MeshOutline.of(mesh, centroids=True)
    assert outline.cell_centroids.shape[0] == 3  # whole cells 0, 1 (no pieces), 2
    found, near = DropletTracker()._locate(outline, np.array([[0.0, 0, 0], [5.2, 5.2, 5.2], [7.3, 7.2, 7.2]]))
    assert found.tolist() == [0, 0, 2]
    # the origin lies 9.1 from the nearest centroid, beyond twice the 3.5 between the two centroids
    assert near.tolist() == [False, True, True]
