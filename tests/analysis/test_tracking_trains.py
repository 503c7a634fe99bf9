"""Trains of drops: drops leaving through an outlet, drops following each other closely.

Outside reference: the drops are written where they are (whole cells of a uniform grid inside circles),
so no drop ever touches another; ``scipy.ndimage.label`` counts the drops on each step, and every drop
that leaves is a disappearance at the step where that count falls.
"""

import numpy as np
import pytest
from scipy import ndimage

from phasegauge.analysis.droplets import label_droplets
from phasegauge.analysis.tracking import DropletTracker, track_droplets
from phasegauge.meshgen import grid_mesh

N = 40  # cells per unit length
H = 1.0 / N


def _train(centres, radius, *, nx=80, ny=20):
    """The mesh and, per step, the inside mask and scipy's count of the drops, for circles of ``radius`` (one for
    all, or one per drop) centred at ``centres[k]`` (a list of (x, y) per step) on an ``nx`` x ``ny`` grid of
    cells H wide."""
    mesh = grid_mesh((nx, ny), bounds=[(0, nx * H), (0, ny * H)])
    X = mesh.cell_centroids
    i, j = np.floor(X[:, 0] / H).astype(int), np.floor(X[:, 1] / H).astype(int)
    masks, counts = [], []
    for step in centres:
        inside = np.zeros(mesh.n_cells, dtype=bool)
        for (x, y), r in zip(step, np.broadcast_to(radius, len(step))):
            inside |= np.hypot(X[:, 0] - x, X[:, 1] - y) < r
        image = np.zeros((ny, nx), dtype=bool)
        image[j, i] = inside
        masks.append(inside)
        counts.append(ndimage.label(image)[1])  # scipy's count of the drops written
    return mesh, masks, counts


@pytest.mark.parametrize("per_cell", [False, True])
def test_drops_leaving_through_the_outlet_disappear(per_cell):
    """Five drops 4 cells in radius, 10 cells apart (a gap of 2 cells), move 12 cells per output with their
    velocity given: each drop that leaves is a disappearance at the step scipy's count falls, never a
    coalescence with the drop behind it (whose cells reach the outlet as the leader's are carried past it)."""
    shift = 12 * H
    centres = [[(1.55 - 10 * H * m + shift * k, 0.25) for m in range(5)] for k in range(6)]
    mesh, masks, counts = _train(centres, 4 * H)
    tracker = DropletTracker()
    u = np.tile([shift, 0.0], (mesh.n_cells, 1))
    for k, inside in enumerate(masks):
        tracker.add(k, float(k), mesh, label_droplets(mesh, inside.astype(float), velocity=u),
                    cell_velocity=u if per_cell else None)
    droplets, events = tracker.result()
    assert droplets.groupby("step").size().tolist() == counts
    assert set(events["kind"]) == {"disappearance"}
    falls = -np.diff(counts)
    assert events.groupby("step").size().to_dict() == {k + 1: int(f) for k, f in enumerate(falls) if f}
    assert (events["closure_error"] == -1.0).all()


@pytest.mark.parametrize("radii", [(4.5, 4.5), (6.5, 3.5)])
def test_drops_following_closer_than_they_move_keep_their_tracks(radii):
    """A drop followed by another with a gap of 1.5 cells, both moving 3 cells per output with no velocity
    given (more than the gap, under half their spacing): scipy counts 2 drops of unchanged volume on every
    step, so no event and two tracks (the follower's cells land in the leader's old place too)."""
    lead, tail = radii
    shift, gap = 3 * H, 1.5 * H
    centres = [[(0.6 + shift * k, 0.25), (0.6 + shift * k - (lead + gap + tail) * H, 0.25)] for k in range(6)]
    mesh, masks, image_counts = _train(centres, (lead * H, tail * H))  # the written cells, not the tool's labels
    steps = [(k, float(k), mesh, label_droplets(mesh, inside.astype(float))) for k, inside in enumerate(masks)]
    assert image_counts == [2] * 6  # scipy: two drops apart on every step
    droplets, events = track_droplets(steps)
    assert len(events) == 0
    assert droplets["track"].nunique() == 2
    for _, track in droplets.groupby("track"):  # each track keeps one drop's volume
        assert np.ptp(track["volume"]) == pytest.approx(0.0, abs=1e-12)


def test_drops_leaving_through_an_outlet_inside_the_box_disappear():
    """The same train in a channel (y < 0.5) that ends at x = 1.5 while the domain goes on to x = 2 above it
    (the cells beyond the outlet are not in the mesh, but inside its box): the cells carried past the outlet lie
    farther than two cell sizes from every centroid, so each drop leaving is a disappearance at the step
    scipy's count falls (on the grid image of the kept cells)."""
    from phasegauge.model.mesh import Mesh

    full = grid_mesh((80, 40), bounds=[(0, 2), (0, 1)])
    X = full.cell_centroids
    keep = ~((X[:, 0] > 1.5) & (X[:, 1] < 0.5))
    block = full.blocks[0]
    mesh = Mesh(full.points, [(block.cell_type, block.connectivity[keep])])
    Y = mesh.cell_centroids
    i, j = np.floor(Y[:, 0] / H).astype(int), np.floor(Y[:, 1] / H).astype(int)
    shift = 12 * H
    u = np.tile([shift, 0.0], (mesh.n_cells, 1))
    tracker, counts = DropletTracker(), []
    for k in range(6):
        inside = np.zeros(mesh.n_cells, dtype=bool)
        for m in range(5):
            inside |= np.hypot(Y[:, 0] - (1.05 - 10 * H * m + shift * k), Y[:, 1] - 0.25) < 4 * H
        image = np.zeros((40, 80), dtype=bool)
        image[j, i] = inside
        counts.append(ndimage.label(image)[1])
        tracker.add(k, float(k), mesh, label_droplets(mesh, inside.astype(float), velocity=u))
    droplets, events = tracker.result()
    assert droplets.groupby("step").size().tolist() == counts
    assert set(events["kind"]) == {"disappearance"}
    falls = -np.diff(counts)
    assert events.groupby("step").size().to_dict() == {k + 1: int(f) for k, f in enumerate(falls) if f}
