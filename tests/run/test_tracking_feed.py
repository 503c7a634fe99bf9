"""Droplet tracking in step order from results that arrive in any order, from any process, or from the cache.

Tracking needs each step's labelled cells and its mesh's cell centroids, never the step itself:
the reference is :class:`DropletTracker` fed in order with each step's own Mesh and full label
arrays (its public ``add``), and every way of running the steps must give its tables exactly.
"""

import random

import numpy as np
import pandas as pd
import pytest

from phasegauge import measure
from phasegauge.meshgen import grid_mesh

from conftest import write_listing

# every step has a mesh of its own: the run says so once, which is not what these tests check
pytestmark = pytest.mark.filterwarnings("ignore:.*the mesh changes between steps")


def _changing_mesh_series(folder, steps=5, n=22):
    """Two discs moving together with a cell velocity field, on a different (jittered) mesh every step."""
    frames = []
    for k in range(steps):
        mesh = grid_mesh((n, n), kind="triangle", jitter=0.2, seed=k + 1)
        x, y = mesh.cell_centroids[:, 0], mesh.cell_centroids[:, 1]
        d = 0.28 - 0.045 * k
        c = np.zeros(mesh.n_cells)
        u = np.zeros((mesh.n_cells, 2))
        for cx, ux in ((0.5 - d, 0.45), (0.5 + d, -0.45)):
            r = np.hypot(x - cx, y - 0.5)
            c = np.maximum(c, 0.5 * (1 + np.tanh((0.14 - r) / 0.02)))
            u[r < 0.25, 0] = ux
        frames.append((0.1 * k, f"moving_{k}.vtu", mesh, {"alpha": c, "U": u}))
    return write_listing(folder, frames)


def _reference_tables(listing, options):
    """DropletTracker.add fed in order with each step's own Mesh and full labels (no outlines)."""
    from phasegauge.analysis.droplets import label_droplets
    from phasegauge.analysis.interface import find_interface
    from phasegauge.analysis.tracking import DropletTracker
    from phasegauge.io import Series
    from phasegauge.model.indicator import make_indicator

    tracker = DropletTracker(periodic=options.periodic)
    with Series(listing) as series:
        for step in series:
            ind = make_indicator(step.mesh, step.fields, options.field)
            contour = find_interface(step.mesh, ind.point, level=options.level)
            velocity = np.hstack([step.fields.cell_data["U"], np.zeros((step.mesh.n_cells, 1))])
            found = label_droplets(step.mesh, ind.cell, level=options.level, velocity=velocity,
                                   interface_cells=contour.cells, interface_sizes=contour.element_sizes)
            tracker.add(step.index, step.time, step.mesh, found)
    return tracker.result()


@pytest.fixture(scope="module")
def series_dir(tmp_path_factory):
    folder = tmp_path_factory.mktemp("moving")
    return _changing_mesh_series(str(folder))


@pytest.fixture(scope="module")
def serial(series_dir):
    return measure(series_dir, "alpha", velocity="U", analyses=("droplets",))


def test_serial_tracking_equals_the_tracker_fed_with_whole_meshes(series_dir, serial):
    droplets, events = _reference_tables(series_dir, serial.options)
    assert serial.steps["step"].tolist() == [0, 1, 2, 3, 4]
    assert len({r.mesh_signature for r in serial.results}) == 5  # a new mesh every step
    pd.testing.assert_frame_equal(serial.droplets, droplets, check_exact=True)
    pd.testing.assert_frame_equal(serial.events, events, check_exact=True)
    assert "coalescence" in set(serial.events["kind"])
    # the results keep no mesh arrays once tracked, nor the labelled cells (the run's memory stays
    # flat in its steps)
    assert all(r.outline is not None and r.outline.cell_centroids is None for r in serial.results)
    assert all(r.label_cells is None and r.label_values is None and r.label_weights is None for r in serial.results)


@pytest.mark.parametrize("workers", [2, 3])
def test_forked_workers_send_the_outlines_of_meshes_this_process_lacks(series_dir, serial, workers):
    parallel = measure(series_dir, "alpha", velocity="U", analyses=("droplets",), workers=workers)
    for name in ("steps", "droplets", "events"):
        pd.testing.assert_frame_equal(getattr(serial, name), getattr(parallel, name), check_exact=True)


def test_dask_workers_ship_outlines_of_other_meshes(series_dir, serial):
    pytest.importorskip("distributed")
    remote = measure(series_dir, "alpha", velocity="U", analyses=("droplets",), scheduler="local")
    for name in ("steps", "droplets", "events"):
        pd.testing.assert_frame_equal(getattr(serial, name), getattr(remote, name), check_exact=True)


@pytest.mark.parametrize("workers", [1, 2])
def test_resume_tracks_from_the_cache_without_reading_a_step(series_dir, serial, tmp_path, monkeypatch, workers):
    from phasegauge.io import Series

    out = tmp_path / "out"
    measure(series_dir, "alpha", velocity="U", analyses=("droplets",), out=out, contours=False, keep_cache=True)

    def no_reading(self, index):
        raise AssertionError(f"step {index} was read again")

    monkeypatch.setattr(Series, "read", no_reading)
    resumed = measure(series_dir, "alpha", velocity="U", analyses=("droplets",), out=out, resume=True,
                      contours=False, workers=workers)
    assert all(r.reused for r in resumed.results)
    for name in ("steps", "droplets", "events"):
        pd.testing.assert_frame_equal(getattr(serial, name), getattr(resumed, name), check_exact=True)


def test_results_in_any_order_are_tracked_in_step_order(series_dir, serial):
    from phasegauge.model.outline import MeshOutline
    from phasegauge.run.assemble import TrackingFeed
    from phasegauge.run.step import StepRunner

    runner = StepRunner(series_dir, serial.options)
    results = [runner.run(i) for i in range(5)]
    outlines = {r.index: r.outline for r in results}
    runner.close()
    feed = TrackingFeed(serial.options, range(5))
    order = [3, 1, 4, 0, 2]
    random.Random(7).shuffle(order)
    for i in order:  # results arrive without centroids; the outlines come on their own
        result = results[i]
        result.outline = outlines[i].without_centroids()
        feed.add(result)
        assert not feed.complete
    for i in reversed(range(5)):
        assert isinstance(outlines[i], MeshOutline) and outlines[i].has_centroids
        feed.add_outline(outlines[i])
    assert feed.complete
    droplets, events = feed.tables()
    pd.testing.assert_frame_equal(serial.droplets, droplets, check_exact=True)
    pd.testing.assert_frame_equal(serial.events, events, check_exact=True)


def test_feed_names_the_step_it_waits_for(serial, series_dir):
    from phasegauge.errors import AnalysisError
    from phasegauge.run.assemble import TrackingFeed
    from phasegauge.run.step import StepRunner

    runner = StepRunner(series_dir, serial.options)
    first = runner.run(0)
    first.outline = first.outline.without_centroids()
    runner.close()
    feed = TrackingFeed(serial.options, range(2))
    feed.add(first)
    with pytest.raises(AnalysisError, match="stopped at step 0: its mesh outline never arrived"):
        feed.tables()


def test_an_outline_said_to_be_held_stays_until_its_step_is_linked(tmp_path):
    # meshes A, B, A: step 2 (mesh A) arrives first and is told A is at hand (the step linked last
    # has it); linking step 1 (mesh B) in between must not lose A
    from phasegauge.run.assemble import TrackingFeed
    from phasegauge.run.options import MeasureOptions
    from phasegauge.run.step import StepRunner

    frames = []
    for k, seed in enumerate((1, 2, 1)):
        mesh = grid_mesh((12, 12), kind="triangle", jitter=0.2, seed=seed)
        x, y = mesh.cell_centroids[:, 0], mesh.cell_centroids[:, 1]
        c = 0.5 * (1 + np.tanh((0.2 - np.hypot(x - 0.4 - 0.05 * k, y - 0.5)) / 0.03))
        frames.append((0.1 * k, f"m_{k}.vtu", mesh, {"alpha": c}))
    listing = write_listing(str(tmp_path), frames)
    options = MeasureOptions(field="alpha", analyses=("droplets",))
    runner = StepRunner(listing, options)
    results = [runner.run(k) for k in range(3)]
    runner.close()
    assert results[0].mesh_signature == results[2].mesh_signature != results[1].mesh_signature
    feed = TrackingFeed(options, range(3))
    feed.add(results[0])
    late = results[2]
    late.outline = late.outline.without_centroids()
    feed.add(late, link=False)
    assert feed.holds(late.outline.signature)
    feed.add(results[1])
    assert feed.complete
    reference = measure(listing, "alpha", analyses=("droplets",))
    droplets, events = feed.tables()
    pd.testing.assert_frame_equal(reference.droplets, droplets, check_exact=True)
