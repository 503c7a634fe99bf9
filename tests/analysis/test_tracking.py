"""Droplet tracking across steps: generated series with a known history.

Shapes are made of whole cells of a uniform grid (c = 1 inside, 0 outside) and move by whole cells,
so the motion is incompressible exactly in the discrete sense: volumes before and after an event agree
to round-off, and the step of every event is known from the geometry.
"""

import numpy as np
import pytest

from phasegauge.analysis import tracking as tracking_module
from phasegauge.analysis.droplets import label_droplets
from phasegauge.analysis.tracking import EVENT_COLUMNS, DropletTracker, track_droplets
from phasegauge.errors import OptionError
from phasegauge.meshgen import grid_mesh

N = 40  # cells per unit length
H = 1.0 / N


def disc(X, centre, radius):
    return np.linalg.norm(X - np.asarray(centre), axis=1) < radius


def series(mesh, shapes, *, dt=1.0, velocity=None, periodic=()):
    """(step, time, mesh, DropletLabels) for every inside-mask in ``shapes``."""
    out = []
    for k, inside in enumerate(shapes):
        u = None if velocity is None else velocity[k]
        out.append((k, k * dt, mesh, label_droplets(mesh, inside.astype(float), velocity=u, periodic=periodic)))
    return out


def test_public_names_import():
    for name in tracking_module.__all__:
        assert getattr(tracking_module, name) is not None


@pytest.mark.parametrize("kind", ["quad", "triangle", "hexahedron", "tetra"])
def test_halves_that_separate_break_up_with_exact_closure(kind):
    """A block whose right half moves right by one cell per step from step 3: breakup at step 3
    (the first step with a gap), volumes equal before and after (rigid motion by whole cells)."""
    dim = 2 if kind in ("quad", "triangle") else 3
    n, w = (N, 6) if dim == 2 else (14, 3)  # cells per unit, half width in cells
    mesh = grid_mesh((n,) * dim, kind=kind)
    X = mesh.cell_centroids
    h = 1.0 / n
    shapes = []
    for k in range(6):
        gap = max(0, k - 2) * h
        core = np.all(np.abs(X[:, 1:] - 0.5) < (w - 2) * h, axis=1)
        left = core & (X[:, 0] > 0.5 - w * h) & (X[:, 0] < 0.5)
        right = core & (X[:, 0] - gap > 0.5) & (X[:, 0] - gap < 0.5 + w * h)
        shapes.append(left | right)
    droplets, events = track_droplets(series(mesh, shapes))
    assert list(events.columns) == list(EVENT_COLUMNS)
    assert events["kind"].tolist() == ["breakup"]
    event = events.iloc[0]
    assert event["step"] == 3 and event["time"] == 3.0
    assert event["before"] == "[0]" and event["after"] == "[0 1]"
    assert event["closure_error"] == pytest.approx(0.0, abs=1e-12)
    assert droplets.groupby("step").size().tolist() == [1, 1, 1, 2, 2, 2]


def test_dumbbell_neck_thins_and_breaks():
    """Two discs joined by a neck whose width falls by one cell per step: breakup at the step the neck
    is gone; the volume lost is exactly the last neck's cells (known from the mask)."""
    mesh = grid_mesh((2 * N, N), bounds=[(0, 2), (0, 1)])
    X = mesh.cell_centroids
    discs = disc(X, (0.7, 0.5), 0.2) | disc(X, (1.3, 0.5), 0.2)
    shapes, necks = [], []
    for k in range(6):
        half_width = (3 - k) * H  # cells of the neck: 6, 4, 2, 0, ...
        neck = (np.abs(X[:, 1] - 0.5) < half_width) & (X[:, 0] > 0.7) & (X[:, 0] < 1.3) & ~discs
        shapes.append(discs | neck)
        necks.append(neck)
    droplets, events = track_droplets(series(mesh, shapes))
    assert events["kind"].tolist() == ["breakup"] and events["step"].tolist() == [3]
    event = events.iloc[0]
    lost = np.sum(mesh.cell_measures[necks[2]])
    assert event["volume_before"] - event["volume_after"] == pytest.approx(lost, rel=1e-12)
    # the larger fragment keeps the track (Silver & Wang 1997): equal halves -> ties, either, but one is 0
    assert "0" in event["after"].strip("[]").split()


@pytest.mark.parametrize("use_velocity", [False, True])
def test_two_discs_approach_and_merge(use_velocity):
    """Discs of radius 5.5 cells (11 cells across) with centres 21 cells apart closing by 2 cells per step
    touch (face contact) when 11 cells apart: step 5. Volumes add exactly (no overlap yet)."""
    mesh = grid_mesh((2 * N, N), bounds=[(0, 2), (0, 1)])
    X = mesh.cell_centroids
    shapes, velocity = [], []
    for k in range(8):
        a = 0.5 + (0.5 + k) * H
        b = a + (21 - 2 * k) * H
        shapes.append(disc(X, (a, 0.5 + 0.5 * H), 5.5 * H) | disc(X, (b, 0.5 + 0.5 * H), 5.5 * H))
        u = np.zeros((mesh.n_cells, 2))
        u[X[:, 0] < a + 6 * H, 0] = H
        u[X[:, 0] > b - 6 * H, 0] = -H
        velocity.append(u)
    droplets, events = track_droplets(series(mesh, shapes, velocity=velocity if use_velocity else None))
    assert events["kind"].tolist() == ["coalescence"]
    event = events.iloc[0]
    assert event["step"] == 5 and event["before"] == "[0 1]" and event["after"] in ("[0]", "[1]")
    assert event["closure_error"] == pytest.approx(0.0, abs=1e-12)
    assert droplets.groupby("step").size().tolist() == [2] * 5 + [1] * 3


def test_largest_parent_keeps_its_track():
    """A small droplet (track 0, first cell) merges into a larger one (track 1): the result is track 1."""
    mesh = grid_mesh((N, N))
    X = mesh.cell_centroids
    big = disc(X, (0.6, 0.5), 0.2)
    small_far = disc(X, (0.3, 0.5), 0.08)  # 0.02 from the big disc
    small_near = disc(X, (0.33, 0.5), 0.08)  # reaches into it
    droplets, events = track_droplets(series(mesh, [big | small_far, big | small_near]))
    assert droplets[droplets["step"] == 0].sort_values("centroid_x")["track"].tolist() == [0, 1]
    assert events.iloc[0]["kind"] == "coalescence" and events.iloc[0]["after"] == "[1]"


@pytest.mark.parametrize("kind", ["quad", "triangle", "hexahedron", "tetra"])
def test_droplet_crosses_periodic_boundary(kind):
    """A droplet moving in +x through the periodic boundary keeps one track and causes no event;
    without periodic labelling and tracking it breaks in two and merges again."""
    dim = 2 if kind in ("quad", "triangle") else 3
    n = N if dim == 2 else 12
    h = 1.0 / n
    mesh = grid_mesh((n,) * dim, kind=kind)
    X = mesh.cell_centroids
    shapes = []
    for k in range(8):
        centre = np.full(dim, 0.5 + 0.5 * h)
        centre[0] = (0.7 + 0.5 * h + 2 * k * h) % 1.0  # on a cell centroid: same cells every step
        d = X - centre
        d[:, 0] = (d[:, 0] + 0.5) % 1.0 - 0.5
        shapes.append(np.linalg.norm(d, axis=1) < 3.5 * h)
    droplets, events = track_droplets(series(mesh, shapes, periodic="x"), periodic="x")
    assert len(events) == 0
    assert droplets["track"].unique().tolist() == [0]
    np.testing.assert_allclose(droplets["volume"], droplets["volume"].iloc[0], rtol=1e-12)
    plain, events = track_droplets(series(mesh, shapes))
    # without periodic joins the part entering at x = 0 is a new droplet
    assert "appearance" in set(events["kind"]) and plain["track"].nunique() > 1


def test_split_that_remerges_can_be_ignored():
    """A block splits at step 2 and the halves meet again at step 4: reported as breakup + coalescence,
    or, with ignore_remerge_within=2, as one track without events."""
    mesh = grid_mesh((N, N))
    X = mesh.cell_centroids
    shapes = []
    for gap in [0, 0, 1, 1, 0, 0]:
        core = np.abs(X[:, 1] - 0.5) < 4 * H
        left = core & (X[:, 0] > 0.5 - 6 * H) & (X[:, 0] < 0.5)
        right = core & (X[:, 0] - gap * H > 0.5) & (X[:, 0] - gap * H < 0.5 + 6 * H)
        shapes.append(left | right)
    steps = series(mesh, shapes)
    _, events = track_droplets(steps)
    assert events["kind"].tolist() == ["breakup", "coalescence"]
    assert events["step"].tolist() == [2, 4]
    droplets, events = track_droplets(steps, ignore_remerge_within=2)
    assert len(events) == 0
    assert droplets["track"].unique().tolist() == [0]
    _, events = track_droplets(steps, ignore_remerge_within=1)  # re-merge two steps later: kept
    assert events["kind"].tolist() == ["breakup", "coalescence"]


def test_drops_that_touch_and_separate_again_can_be_ignored():
    """Blocks 6 and 4 cells wide, one cell apart, touch at step 2 and are one cell apart again from step 3
    (drops bouncing through a film the mesh does not resolve): scipy.ndimage.label counts 2, 2, 1, 2, 2
    drops; reported as coalescence + breakup, or, with ignore_remerge_within=1, as two tracks without
    events, each drop keeping its id (the larger one its own through the contact)."""
    from scipy import ndimage

    mesh = grid_mesh((N, N))
    X = mesh.cell_centroids
    shapes = []
    for gap in [1, 1, 0, 1, 1]:
        core = np.abs(X[:, 1] - 0.5) < 4 * H
        left = core & (X[:, 0] > 0.5 - 6 * H) & (X[:, 0] < 0.5)
        right = core & (X[:, 0] - gap * H > 0.5) & (X[:, 0] - gap * H < 0.5 + 4 * H)
        shapes.append(left | right)
    image = [np.zeros((N, N), dtype=bool) for _ in shapes]
    i, j = np.floor(X[:, 0] / H).astype(int), np.floor(X[:, 1] / H).astype(int)
    for k, inside in enumerate(shapes):
        image[k][j, i] = inside
    assert [ndimage.label(a)[1] for a in image] == [2, 2, 1, 2, 2]
    steps = series(mesh, shapes)
    droplets, events = track_droplets(steps)
    assert events["kind"].tolist() == ["coalescence", "breakup"] and events["step"].tolist() == [2, 3]
    droplets, events = track_droplets(steps, ignore_remerge_within=1)
    assert len(events) == 0
    first = droplets[droplets["step"] == 0].set_index("track")["volume"]
    last = droplets[droplets["step"] == 4].set_index("track")["volume"]
    assert sorted(first.index) == sorted(last.index) == [0, 1]
    np.testing.assert_allclose(last.sort_index(), first.sort_index(), rtol=1e-12)
    assert droplets.loc[droplets["step"] == 2, "track"].tolist() == [int(first.idxmax())]
    _, events = track_droplets(steps, ignore_remerge_within=0)
    assert events["kind"].tolist() == ["coalescence", "breakup"]


def test_partial_coalescence_is_kept_when_remerges_are_ignored():
    """Blocks of 48 and 32 cells merge at step 2 and the merged drop pinches off a satellite of 8 cells at step
    3 (a partial coalescence): scipy.ndimage.label counts 2, 2, 1, 2 drops of 48 + 32, then 72 + 8 cells, so
    the drops after do not pair with those before within SAME_VOLUME; the coalescence and the breakup are kept
    with ignore_remerge_within=1 as without it, and the smaller drop's track ends at the contact (the satellite
    is a new drop), while drops that bounce are still dropped (the test above)."""
    from scipy import ndimage

    mesh = grid_mesh((N, N))
    X = mesh.cell_centroids
    core = np.abs(X[:, 1] - 0.5) < 4 * H
    left = core & (X[:, 0] > 0.5 - 6 * H) & (X[:, 0] < 0.5)
    right = core & (X[:, 0] > 0.5 + H) & (X[:, 0] < 0.5 + 5 * H)
    merged = core & (X[:, 0] > 0.5 - 6 * H) & (X[:, 0] < 0.5 + 4 * H)
    big = core & (X[:, 0] > 0.5 - 7 * H) & (X[:, 0] < 0.5 + 2 * H)
    satellite = core & (X[:, 0] > 0.5 + 3 * H) & (X[:, 0] < 0.5 + 4 * H)  # within the merged drop's place
    shapes = [left | right, left | right, merged, big | satellite]
    i, j = np.floor(X[:, 0] / H).astype(int), np.floor(X[:, 1] / H).astype(int)
    sizes = []
    for inside in shapes:
        image = np.zeros((N, N), dtype=bool)
        image[j, i] = inside
        labels, count = ndimage.label(image)  # the outside count of drops and their cells
        sizes.append(sorted(np.bincount(labels.ravel())[1:].tolist()))
    assert sizes == [[32, 48], [32, 48], [80], [8, 72]]
    steps = series(mesh, shapes)
    for within in (0, 1, 3):
        droplets, events = track_droplets(steps, ignore_remerge_within=within)
        assert events["kind"].tolist() == ["coalescence", "breakup"] and events["step"].tolist() == [2, 3]
        first = droplets[droplets["step"] == 0].set_index("track")["volume"]
        last = droplets[droplets["step"] == 3].set_index("track")["volume"]
        assert int(first.idxmin()) not in last.index  # the satellite is a new drop, not the smaller one's
        np.testing.assert_allclose(sorted(last / H ** 2), [8, 72], rtol=1e-9)


def test_remerge_span_counts_step_numbers_not_steps_analysed():
    """The same split and merge seen on every other step (steps 0, 2, 4, ...: a run on ``--steps ::2``) or
    with step 3 left out (a file that could not be read): the breakup at step 2 and the merge at step 6
    are 4 step numbers apart whatever was analysed between, so ``ignore_remerge_within=3`` keeps both
    events as on every step, and 4 drops them (the step numbers of the whole series, as the tables give)."""
    mesh = grid_mesh((N, N))
    X = mesh.cell_centroids
    shapes = []
    for gap in [0, 0, 1, 1, 1, 1, 0, 0, 0]:
        core = np.abs(X[:, 1] - 0.5) < 4 * H
        left = core & (X[:, 0] > 0.5 - 6 * H) & (X[:, 0] < 0.5)
        right = core & (X[:, 0] - gap * H > 0.5) & (X[:, 0] - gap * H < 0.5 + 6 * H)
        shapes.append(left | right)
    every = series(mesh, shapes)
    for steps in (every, every[::2], every[:3] + every[4:]):
        _, events = track_droplets(steps)
        assert events["kind"].tolist() == ["breakup", "coalescence"] and events["step"].tolist() == [2, 6]
        _, events = track_droplets(steps, ignore_remerge_within=3)
        assert events["kind"].tolist() == ["breakup", "coalescence"]
        droplets, events = track_droplets(steps, ignore_remerge_within=4)
        assert len(events) == 0 and droplets["track"].unique().tolist() == [0]


def test_fast_droplet_linked_by_gate_or_velocity():
    """A small droplet jumping 8 cells per output step never overlaps itself: without velocity the gate
    (nearest predicted centroid within gate x diameter) links it; with the velocity the overlap does;
    with the gate off it disappears and a new one appears."""
    mesh = grid_mesh((2 * N, N), bounds=[(0, 2), (0, 1)])
    X = mesh.cell_centroids
    shapes = [disc(X, (0.3 + 8 * k * H, 0.5), 2.5 * H) for k in range(4)]
    u = [np.tile([8 * H, 0.0], (mesh.n_cells, 1)) for _ in range(4)]
    droplets, events = track_droplets(series(mesh, shapes), gate=2.0)
    assert len(events) == 0 and droplets["track"].unique().tolist() == [0]
    droplets, events = track_droplets(series(mesh, shapes, velocity=u), gate=0.0)
    assert len(events) == 0 and droplets["track"].unique().tolist() == [0]
    droplets, events = track_droplets(series(mesh, shapes), gate=0.0)
    assert events["kind"].tolist() == ["disappearance", "appearance"] * 3
    assert events.loc[events["kind"] == "disappearance", "closure_error"].tolist() == [-1.0] * 3
    assert events.loc[events["kind"] == "appearance", "closure_error"].isna().all()


def test_mesh_changes_between_steps():
    """The same disc on a quad grid and then on a finer triangle grid: one track, no event
    (cells are matched through their centroids)."""
    coarse = grid_mesh((30, 30))
    fine = grid_mesh((45, 45), kind="triangle")
    tracker = DropletTracker()
    for step, mesh in enumerate([coarse, fine, coarse]):
        inside = disc(mesh.cell_centroids, (0.4, 0.6), 0.2) | disc(mesh.cell_centroids, (0.8, 0.2), 0.1)
        tracker.add(step, 0.1 * step, mesh, label_droplets(mesh, inside.astype(float)))
    droplets, events = tracker.result()
    assert len(events) == 0
    assert droplets.groupby("track").size().tolist() == [3, 3]


def test_complex_event():
    """Two droplets exchange a piece (2 -> 2 through one connected group): a complex event; the largest
    new droplet takes the track of the largest old one (1), the other gets a new track (2)."""
    mesh = grid_mesh((N, N))
    X = mesh.cell_centroids
    row = np.abs(X[:, 1] - 0.5) < 3 * H
    a0 = row & (X[:, 0] > 0.2) & (X[:, 0] < 0.45)
    b0 = row & (X[:, 0] > 0.5) & (X[:, 0] < 0.8)
    a1 = row & (X[:, 0] > 0.2) & (X[:, 0] < 0.35)
    b1 = row & (X[:, 0] > 0.4) & (X[:, 0] < 0.8)
    _, events = track_droplets(series(mesh, [a0 | b0, a1 | b1]))
    assert events["kind"].tolist() == ["complex"]
    assert events.iloc[0]["before"] == "[0 1]" and events.iloc[0]["after"] == "[1 2]"


def test_tracker_is_incremental_and_returns_track_ids():
    mesh = grid_mesh((20, 20))
    X = mesh.cell_centroids
    tracker = DropletTracker()
    ids = tracker.add(0, 0.0, mesh, label_droplets(mesh, disc(X, (0.5, 0.5), 0.2).astype(float)))
    assert ids.tolist() == [0]
    result = label_droplets(mesh, disc(X, (0.5, 0.5), 0.2).astype(float))
    ids = tracker.add(1, 1.0, mesh, result.labels, result.table, velocity_known=False)
    assert ids.tolist() == [0]
    droplets, events = tracker.result()
    assert droplets.columns[:3].tolist() == ["step", "time", "track"] and len(events) == 0


def test_empty_steps_and_first_step_events():
    mesh = grid_mesh((20, 20))
    X = mesh.cell_centroids
    empty = np.zeros(mesh.n_cells, dtype=bool)
    droplets, events = track_droplets(series(mesh, [empty, disc(X, (0.5, 0.5), 0.2), empty]))
    assert events["kind"].tolist() == ["appearance", "disappearance"]
    assert events["after"].tolist() == ["[0]", "[]"] and events["before"].tolist() == ["[]", "[0]"]
    droplets, events = track_droplets([])
    assert len(droplets) == 0 and list(events.columns) == list(EVENT_COLUMNS)


def test_errors_name_the_problem():
    with pytest.raises(OptionError, match="min_overlap must be in"):
        DropletTracker(min_overlap=0.0)
    with pytest.raises(OptionError, match="gate must be"):
        DropletTracker(gate=-1)
    with pytest.raises(OptionError, match="ignore_remerge_within must be"):
        DropletTracker(ignore_remerge_within=1.5)
    mesh = grid_mesh((10, 10))
    result = label_droplets(mesh, np.zeros(mesh.n_cells))
    tracker = DropletTracker()
    tracker.add(3, 0.0, mesh, result)
    with pytest.raises(OptionError, match="increasing order"):
        tracker.add(2, 1.0, mesh, result)
    with pytest.raises(OptionError, match="a droplet table is needed"):
        tracker.add(4, 1.0, mesh, result.labels)
    with pytest.raises(OptionError, match=r"labels must have shape \(100,\)"):
        tracker.add(4, 1.0, mesh, result.labels[:5], result.table)


def test_moved_points_wrap_around_periodic_axis():
    """A small droplet jumping 8 cells per step through the periodic x boundary, with its velocity known
    and the gate off: the moved cells wrap around and overlap it on the other side (one track)."""
    mesh = grid_mesh((N, N // 2), bounds=[(0, 1), (0, 0.5)])
    X = mesh.cell_centroids
    shapes = []
    for k in range(5):
        d = X - np.array([(0.6 + 0.5 * H + 8 * k * H) % 1.0, 0.25 + 0.5 * H])
        d[:, 0] = (d[:, 0] + 0.5) % 1.0 - 0.5
        shapes.append(np.linalg.norm(d, axis=1) < 2.5 * H)
    u = [np.tile([8 * H, 0.0], (mesh.n_cells, 1)) for _ in range(5)]
    droplets, events = track_droplets(series(mesh, shapes, velocity=u, periodic="x"), gate=0.0, periodic="x")
    assert len(events) == 0 and droplets["track"].unique().tolist() == [0]
