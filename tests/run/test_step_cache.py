"""StepCache: finished steps keyed by file content, XDMF grid, HDF5 stamps and options; outlines once per mesh."""

import os
import pickle
import shutil

import numpy as np
import pytest

from phasegauge.io import Series
from phasegauge.meshgen import grid_mesh, to_meshio
from phasegauge.run.cache import StepCache
from phasegauge.run.options import MeasureOptions
from phasegauge.run.step import StepRunner

ROOT = os.path.dirname(os.path.dirname(os.path.dirname(os.path.abspath(__file__))))
SAMPLES = os.path.join(ROOT, "sample_fields")


def _step(folder, value=0.5, name="s_0.vtu"):
    mesh = grid_mesh((4, 4), kind="triangle")
    x = mesh.cell_centroids[:, 0]
    to_meshio(mesh, cell_data={"alpha": np.where(x < value, 1.0, 0.0)}).write(os.path.join(folder, name))
    return os.path.join(folder, name)


def test_the_key_follows_the_file_content_and_the_options(tmp_path):
    path = _step(tmp_path)
    info = Series(path).steps[0]
    options = MeasureOptions(field="alpha")
    cache = StepCache(tmp_path / "cache", options.key())
    entry = cache.entry(info)
    assert entry == cache.entry(info) and len(entry.file_sha256) == 64
    assert StepCache(tmp_path / "cache", MeasureOptions(field="alpha", level=0.4).key()).entry(info) != entry
    _step(tmp_path, value=0.25)  # the same file, other content
    assert cache.entry(Series(path).steps[0]).path != entry.path
    os.remove(path)
    assert cache.entry(info) is None  # a missing file: nothing to key by


def test_a_time_from_outside_the_file_is_part_of_the_key(tmp_path):
    # review 43: a listing's time, or a time folder's name, is not in the file's content: a changed one
    # must not bring back a result with the old time
    path = _step(tmp_path)
    cache = StepCache(tmp_path / "cache", MeasureOptions(field="alpha").key())
    keys = []
    for t in (0.5, 0.75):
        (tmp_path / "run.steps").write_text(f"time,path\n{t},s_0.vtu\n")
        keys.append(cache.entry(Series(str(tmp_path / "run.steps")).steps[0]).path)
    assert keys[0] != keys[1]
    index = cache.entry(Series(path).steps[0]).path  # a time the file itself gives keeps its key
    assert index == cache.entry(Series(path).steps[0]).path


def test_a_stored_result_comes_back_reused_and_a_damaged_one_is_a_miss(tmp_path):
    path = _step(tmp_path)
    options = MeasureOptions(field="alpha", analyses=("conservation",))
    cache = StepCache(tmp_path / "cache", options.key())
    assert not cache.holds_finished_steps()
    runner = StepRunner(path, options, cache=cache)
    first = runner.run(0)
    assert not first.reused and cache.holds_finished_steps()
    again = runner.run(0)
    assert again.reused and again.metrics == first.metrics
    entry = cache.entry(runner.series().steps[0])
    with open(entry.path, "wb") as handle:
        handle.write(b"not a pickle")
    assert cache.load(entry) is None
    assert not runner.run(0).reused  # recomputed, and cached again
    assert runner.run(0).reused
    runner.close()


def test_outlines_are_kept_once_per_mesh_without_centroids_in_the_step_files(tmp_path):
    folder = tmp_path / "in"
    folder.mkdir()
    for k in range(3):
        _step(str(folder), value=0.3 + 0.1 * k, name=f"s_{k}.vtu")
    options = MeasureOptions(field="alpha", analyses=("droplets",))
    cache = StepCache(tmp_path / "cache", options.key())
    runner = StepRunner(str(folder), options, cache=cache)
    results = [runner.run(k) for k in range(3)]
    runner.close()
    signature = results[0].outline.signature
    assert {r.outline.signature for r in results} == {signature}
    outlines = [f for f in os.listdir(cache.folder) if f.startswith("outline_")]
    assert outlines == [f"outline_{signature}.pickle"]
    kept = cache.load_outline(signature)
    np.testing.assert_array_equal(kept.cell_centroids, results[0].outline.cell_centroids)
    for f in os.listdir(cache.folder):
        if f.startswith("step_"):
            with open(os.path.join(cache.folder, f), "rb") as handle:
                assert pickle.load(handle).outline.cell_centroids is None
    # a cached droplet step whose outline is gone is computed again (tracking would need the step)
    os.remove(os.path.join(cache.folder, outlines[0]))
    fresh = StepRunner(str(folder), options, cache=cache)
    assert not fresh.run(1).reused and cache.has_outline(signature)
    fresh.close()


def test_rewritten_hdf5_data_changes_the_key_of_xdmf_steps(tmp_path):
    for name in ("filament_breakup.xdmf", "filament_breakup.h5"):
        shutil.copy(os.path.join(SAMPLES, name), tmp_path / name)
    info = Series(str(tmp_path / "filament_breakup.xdmf")).steps[1]
    cache = StepCache(tmp_path / "cache", MeasureOptions(field="c").key())
    entry = cache.entry(info)
    os.utime(tmp_path / "filament_breakup.h5", ns=(1, 1))
    assert StepCache(tmp_path / "cache", MeasureOptions(field="c").key()).entry(info) != entry


@pytest.mark.parametrize("form", ["folder", "listing", "collection"])
def test_rewritten_hdf5_data_changes_the_key_of_one_step_xdmf_files(tmp_path, form):
    # regression: a one-step XDMF file (info.grid None) was keyed by its text alone
    from test_resume_inputs import _write_series

    path = _write_series(str(tmp_path / "in"), 0.0, form)
    info = Series(path).steps[2]
    assert info.grid is None
    cache = StepCache(tmp_path / "cache", MeasureOptions(field="c").key())
    entry = cache.entry(info)
    os.utime(tmp_path / "in" / "out_0002.h5", ns=(1, 1))
    assert StepCache(tmp_path / "cache", MeasureOptions(field="c").key()).entry(info) != entry
    assert cache.entry(Series(path).steps[1]) == StepCache(tmp_path / "cache", cache.options_key).entry(
        Series(path).steps[1])  # another step's data unchanged: its key stays


def test_a_cache_pickles_to_its_folder_and_key(tmp_path):
    cache = StepCache(tmp_path / "c", "abc")
    copy = pickle.loads(pickle.dumps(cache))
    assert (copy.folder, copy.options_key) == (cache.folder, "abc")


@pytest.mark.parametrize("analyses", [("conservation",), ("droplets",)])
def test_a_runner_pickles_without_its_open_series(tmp_path, analyses):
    path = _step(tmp_path)
    runner = StepRunner(path, MeasureOptions(field="alpha", analyses=analyses))
    first = runner.run(0)
    copy = pickle.loads(pickle.dumps(runner))
    assert copy._series is None and len(copy.mesh_pool) == 0
    assert copy.run(0).metrics == first.metrics
    runner.close()
    copy.close()
