"""Tracks that link different drops are warned of: drops moving about their own size between outputs.

Outside reference: the drops are written where they are (numpy discs on a grid), so which drop is
which is known: each moves +20 cells a step; scipy.ndimage.label counts them on every step.
"""

import numpy as np
import pytest
from scipy import ndimage

from conftest import write_listing
from phasegauge import measure
from phasegauge.meshgen import grid_mesh

N = 100


def _row_of_drops(folder, *, shift, velocity=False, steps=3, drops=((10, 4), (30, 6), (50, 8), (70, 5))):
    mesh = grid_mesh((N, N), kind="quad")
    i = np.floor(mesh.cell_centroids[:, 0] * N)
    j = np.floor(mesh.cell_centroids[:, 1] * N)
    series, counts = [], []
    for k in range(steps):
        inside = np.zeros(mesh.n_cells, dtype=bool)
        for x0, r in drops:
            inside |= (i + 0.5 - x0 - shift * k) ** 2 + (j + 0.5 - 50) ** 2 < r * r
        data = {"c": inside.astype(float)}
        if velocity:
            u = np.zeros((mesh.n_cells, 3))
            u[:, 0] = shift / N / 0.5
            data["U"] = u
        series.append((0.5 * k, f"s_{k}.vtu", mesh, data))
        counts.append(ndimage.label(inside.reshape(N, N))[1])  # scipy's count of the drops written
    return write_listing(folder, series), counts


def test_drops_moving_their_spacing_without_a_velocity_are_warned_of(tmp_path):
    # four drops 20 cells apart moving 20 cells a step: each drop's cells land on the drop behind it
    path, counts = _row_of_drops(tmp_path, shift=20)
    res = measure(path, "c", analyses=("droplets",))
    assert list(res.steps["droplet_count"]) == counts  # counts are right either way
    finding = next(f for f in res.findings if f.kind == "tracking_unreliable")
    assert finding.severity == "warning" and "--velocity" in finding.text
    assert finding.figures["jumps"] >= 2  # the tracks that land on a larger drop


def test_the_same_drops_with_their_velocity_are_tracked(tmp_path):
    path, _ = _row_of_drops(tmp_path, shift=20, velocity=True)
    res = measure(path, "c", analyses=("droplets",), velocity="U")
    assert "tracking_unreliable" not in [f.kind for f in res.findings]
    drops = res.droplets
    # each track keeps one drop's volume from step to step (the rightmost leaves through x = 1)
    for _, track in drops.groupby("track"):
        assert track["volume"].max() / track["volume"].min() < 1.2


def test_slow_drops_and_a_drop_leaving_through_the_boundary_are_not_warned_of(tmp_path):
    # moving 2 cells a step: overlap tracks them; the last drop runs out through x = 1 and shrinks
    path, counts = _row_of_drops(tmp_path, shift=2, steps=6, drops=((20, 5), (45, 6), (96, 6)))
    res = measure(path, "c", analyses=("droplets",))
    assert list(res.steps["droplet_count"]) == counts
    assert "tracking_unreliable" not in [f.kind for f in res.findings]


@pytest.mark.parametrize("shift", [30])
def test_a_drop_that_jumps_beyond_the_gate_is_a_disappearance_and_an_appearance(tmp_path, shift):
    # one drop of radius 6 moving 30 cells (2.5 diameters) a step: gone and new, with the same volume
    path, _ = _row_of_drops(tmp_path, shift=shift, steps=2, drops=((30, 6),))
    res = measure(path, "c", analyses=("droplets",))
    finding = next(f for f in res.findings if f.kind == "tracking_unreliable")
    assert finding.figures["vanished_and_appeared"] == 1


def test_a_dissolving_drop_is_not_warned_of(tmp_path):
    # a drop that halves its volume from step to step where it stands (as in coarsening) beside a
    # steady one: a shrinking track is no jump
    mesh = grid_mesh((N, N), kind="quad")
    i = np.floor(mesh.cell_centroids[:, 0] * N)
    j = np.floor(mesh.cell_centroids[:, 1] * N)
    series = []
    for k, radius in enumerate((8.0, 5.6, 4.0)):
        shrinking = (i + 0.5 - 30) ** 2 + (j + 0.5 - 50) ** 2 < radius ** 2
        inside = shrinking | ((i + 0.5 - 70) ** 2 + (j + 0.5 - 50) ** 2 < 64)
        series.append((0.5 * k, f"d_{k}.vtu", mesh, {"c": inside.astype(float)}))
    folder = tmp_path / "dissolving"
    folder.mkdir()
    res = measure(write_listing(folder, series), "c", analyses=("droplets",))
    assert "tracking_unreliable" not in [f.kind for f in res.findings]


def test_drops_growing_by_condensation_are_not_warned_of(tmp_path):
    # diffusion-limited growth, R^2 ~ t in 2D (outputs at t = 1, 2, 3, 4: volumes x2, x1.5, x1.33):
    # tracks that grow without handing volume over are no swap
    mesh = grid_mesh((N, N), kind="quad")
    i = np.floor(mesh.cell_centroids[:, 0] * N)
    j = np.floor(mesh.cell_centroids[:, 1] * N)
    series = []
    for k, t in enumerate((1.0, 2.0, 3.0, 4.0)):
        r = 4.0 * np.sqrt(t)
        left = (i + 0.5 - 30) ** 2 + (j + 0.5 - 50) ** 2 < r * r
        inside = left | ((i + 0.5 - 70) ** 2 + (j + 0.5 - 50) ** 2 < (0.8 * r) ** 2)
        series.append((t, f"g_{k}.vtu", mesh, {"c": inside.astype(float)}))
    res = measure(write_listing(tmp_path, series), "c", analyses=("droplets",))
    assert res.droplets.groupby("track")["volume"].agg(lambda v: v.iloc[1] / v.iloc[0]).min() > 1.8
    assert "tracking_unreliable" not in [f.kind for f in res.findings]


def test_a_track_that_takes_a_smaller_drop_while_its_own_appears_anew(tmp_path):
    # drops of radius 4 and 8 cells 20 apart, both moving 20 cells a step: the big drop's track lands on
    # the small drop (4x smaller) and the big drop comes out as a new track with the volume it had
    path, counts = _row_of_drops(tmp_path, shift=20, steps=2, drops=((30, 4), (50, 8)))
    res = measure(path, "c", analyses=("droplets",))
    assert list(res.steps["droplet_count"]) == counts
    finding = next(f for f in res.findings if f.kind == "tracking_unreliable")
    assert finding.figures["largest_factor"] == pytest.approx(4.0, rel=0.1)


def test_event_track_lists_read_back_from_csv_are_ids():
    # pandas reads a column of single ids (and empty cells) as floats: "2.0" is track 2
    import io

    import pandas as pd

    from phasegauge.run._tracking_findings import _track_ids

    events = pd.read_csv(io.StringIO("step,after\n1,2\n2,\n"))
    assert [_track_ids(a) for a in events["after"]] == [[2], []]
    assert _track_ids("3 12") == [3, 12]


def test_drops_mixed_up_that_differ_in_volume_are_warned_of(tmp_path):
    # drops of radius 5 and 4.4 cells (volumes 29 % apart) 20 cells apart moving 16 cells a step with no
    # velocity: each drop's cells land nearer the drop ahead's new place, so tracks pass down the train, a
    # drop vanishes at the back and one appears mid-domain (scipy counts 4 drops on every step)
    path, counts = _row_of_drops(tmp_path, shift=16, steps=3, drops=((10, 5), (30, 4.4), (50, 5), (70, 4.4)))
    res = measure(path, "c", analyses=("droplets",))
    assert counts == [4, 4, 4] and list(res.steps["droplet_count"]) == counts
    finding = next(f for f in res.findings if f.kind == "tracking_unreliable")
    assert finding.figures["vanished_and_appeared"] >= 1


def test_a_velocity_of_the_wrong_sign_moves_tracks_against_it(tmp_path):
    # drops of radius 6 moving +3 cells a step with the velocity written as -3 cells a step (as with a
    # velocity of the wrong sign): the cells moved back still overlap the drop, so each track is linked,
    # and moves 3 cells against its velocity
    mesh = grid_mesh((N, N), kind="quad")
    i = np.floor(mesh.cell_centroids[:, 0] * N)
    j = np.floor(mesh.cell_centroids[:, 1] * N)
    series = []
    for k in range(3):
        inside = ((i + 0.5 - 30 - 3 * k) ** 2 + (j + 0.5 - 50) ** 2 < 36) | \
                 ((i + 0.5 - 60 - 3 * k) ** 2 + (j + 0.5 - 50) ** 2 < 36)
        u = np.zeros((mesh.n_cells, 3))
        u[:, 0] = -3 / N / 0.5
        series.append((0.5 * k, f"w_{k}.vtu", mesh, {"c": inside.astype(float), "U": u}))
    res = measure(write_listing(tmp_path, series), "c", analyses=("droplets",), velocity="U")
    assert res.droplets["track"].nunique() == 2 and len(res.events) == 0
    finding = next(f for f in res.findings if f.kind == "tracking_unreliable")
    assert finding.figures["backwards"] == 4


def test_an_exchange_of_volume_between_drops_is_not_warned_of():
    # blocks 10 and 12 cells long, 2 cells apart, become blocks 6 and 16 cells long (the first's tail pinches off
    # into the second): 2 -> 2 with the same total volume (22 cells long), as any incompressible exchange keeps,
    # whose drops pair one to one neither way within 10 %: one complex event, right, and no warning
    from types import SimpleNamespace

    from phasegauge.analysis.droplets import label_droplets
    from phasegauge.analysis.tracking import track_droplets
    from phasegauge.run._tracking_findings import tracking_findings

    mesh = grid_mesh((40, 40))
    X = mesh.cell_centroids
    row = np.abs(X[:, 1] - 0.5) < 3 / 40
    a0, b0 = row & (X[:, 0] > 0.2) & (X[:, 0] < 0.45), row & (X[:, 0] > 0.5) & (X[:, 0] < 0.8)
    a1, b1 = row & (X[:, 0] > 0.2) & (X[:, 0] < 0.35), row & (X[:, 0] > 0.4) & (X[:, 0] < 0.8)
    masks = [a0 | b0, a1 | b1]
    # scipy.ndimage.label's drops and cells: 60 + 72 cells, then 36 + 96
    image = np.zeros((2, 40, 40), dtype=bool)
    i, j = np.floor(X[:, 0] * 40).astype(int), np.floor(X[:, 1] * 40).astype(int)
    for k, m in enumerate(masks):
        image[k][j, i] = m
    sizes = [sorted(np.bincount(ndimage.label(a)[0].ravel())[1:].tolist()) for a in image]
    assert sizes == [[60, 72], [36, 96]]
    steps = [(k, float(k), mesh, label_droplets(mesh, m.astype(float))) for k, m in enumerate(masks)]
    droplets, events = track_droplets(steps)
    assert events["kind"].tolist() == ["complex"]
    assert events["volume_after"].iloc[0] == pytest.approx(events["volume_before"].iloc[0], rel=1e-12)
    assert tracking_findings(droplets, events, SimpleNamespace(velocity=None, periodic=())) == []


def test_drops_following_each_other_fused_into_a_complex_event_are_warned_of():
    # blocks 3, 5 and 3 cells long, 1 cell apart, move 3 cells along the row with no velocity given: each lands
    # on the old place of the one ahead, and the tracker fuses two of them into a 2 -> 2 complex event whose
    # drops pair one to one in volume (a rigid move: scipy.ndimage.label gives the same drops before and after)
    from types import SimpleNamespace

    from phasegauge.analysis.droplets import label_droplets
    from phasegauge.analysis.tracking import track_droplets
    from phasegauge.run._tracking_findings import tracking_findings

    mesh = grid_mesh((40, 40))
    X = mesh.cell_centroids
    i, j = np.floor(X[:, 0] * 40).astype(int), np.floor(X[:, 1] * 40).astype(int)
    masks = []
    for shift in (0, 3):
        inside, x = np.zeros(mesh.n_cells, dtype=bool), 5 + shift
        for length in (3, 5, 3):
            inside |= (i >= x) & (i < x + length) & (j >= 18) & (j < 21)
            x += length + 1
        masks.append(inside)
    image = np.zeros((2, 40, 40), dtype=bool)
    for k, m in enumerate(masks):
        image[k][j, i] = m
    sizes = [sorted(np.bincount(ndimage.label(a)[0].ravel())[1:].tolist()) for a in image]
    assert sizes == [[9, 9, 15], [9, 9, 15]]
    steps = [(k, float(k), mesh, label_droplets(mesh, m.astype(float))) for k, m in enumerate(masks)]
    droplets, events = track_droplets(steps)
    assert events["kind"].tolist().count("complex") == 1
    found = tracking_findings(droplets, events, SimpleNamespace(velocity=None, periodic=()))
    assert [f.kind for f in found] == ["tracking_unreliable"] and found[0].figures["fused"] == 1
