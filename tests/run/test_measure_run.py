"""The measure pipeline: identical tables across executors and after resume, outputs, recipes."""

import json
import os
import signal
import subprocess
import sys
import threading
import time
import warnings

import numpy as np
import pandas as pd
import pytest
from click.testing import CliRunner

from conftest import write_listing
from phasegauge import measure
from phasegauge.cli import main
from phasegauge.errors import OptionError, OutputError, SeriesError
from phasegauge.meshgen import grid_mesh, to_meshio
from phasegauge.run.measure import MeasureOptions
from phasegauge.recipes import load_recipe

ROOT = os.path.dirname(os.path.dirname(os.path.dirname(os.path.abspath(__file__))))
SAMPLES = os.path.join(ROOT, "sample_fields")


def _moving_disc_series(folder, steps=6, n=24, kind="triangle"):
    """Two discs drifting together on a fixed mesh, volume fraction on cells, time in a listing."""
    mesh = grid_mesh((n, n), kind=kind)
    x, y = mesh.cell_centroids[:, 0], mesh.cell_centroids[:, 1]

    def alpha(k):
        d = 0.3 - 0.05 * k
        c = np.zeros(mesh.n_cells)
        for cx in (0.5 - d, 0.5 + d):
            r = np.hypot(x - cx, y - 0.5)
            c = np.maximum(c, 0.5 * (1 + np.tanh((0.15 - r) / 0.02)))
        return c

    return write_listing(folder, ((0.1 * k, f"disc_{k}.vtu", mesh, {"alpha": alpha(k)}) for k in range(steps)))


def _tables(out):
    return {name: pd.read_csv(os.path.join(out, name)) for name in ("steps.csv", "droplets.csv", "events.csv")}


def test_measure_writes_every_output(tmp_path):
    listing = _moving_disc_series(str(tmp_path))
    out = tmp_path / "out"
    result = measure(listing, "alpha", out=out)
    for name in ("steps.csv", "droplets.csv", "events.csv", "report.html", "manifest.json",
                 "phase_volume_drift.png", "interface_width.png", "droplet_count.png"):
        assert (out / name).exists(), name
    assert len([f for f in os.listdir(out / "contours") if f.endswith(".vtu")]) == 6
    assert (out / "contours" / "interface.steps").exists() and not (out / ".cache").exists()
    steps = pd.read_csv(out / "steps.csv")
    assert list(steps.columns[:4]) == ["step", "time", "phase_volume", "phase_volume_drift"]
    assert list(steps["time"]) == pytest.approx([0.1 * k for k in range(6)])
    # two discs approach and merge: a coalescence event (generated history)
    assert list(steps["droplet_count"])[0] == 2 and list(steps["droplet_count"])[-1] == 1
    assert "coalescence" in set(result.events["kind"])
    manifest = json.loads((out / "manifest.json").read_text())
    assert len(manifest["inputs"]) == 7 and all(len(i["sha256"]) == 64 for i in manifest["inputs"])
    assert manifest["options"]["field"] == "alpha"
    html = (out / "report.html").read_text()
    assert "data:image/png;base64," in html and "describe the simulation" in html
    assert isinstance(result.steps, pd.DataFrame)


def test_existing_output_is_never_overwritten(tmp_path):
    listing = _moving_disc_series(str(tmp_path), steps=2)
    out = tmp_path / "out"
    measure(listing, "alpha", out=out, analyses=("conservation",))
    before = (out / "steps.csv").read_bytes()
    with pytest.raises(OutputError, match="--overwrite"):
        measure(listing, "alpha", out=out, analyses=("conservation",))
    assert (out / "steps.csv").read_bytes() == before
    measure(listing, "alpha", out=out, analyses=("conservation", "mixing"), overwrite=True)
    assert "mixing_index" in pd.read_csv(out / "steps.csv")
    foreign = tmp_path / "foreign"
    foreign.mkdir()
    (foreign / "notes.txt").write_text("mine")
    with pytest.raises(OutputError, match="did not write"):
        measure(listing, "alpha", out=foreign, overwrite=True)
    assert (foreign / "notes.txt").read_text() == "mine"


def test_serial_local_parallel_and_dask_give_identical_tables(tmp_path):
    listing = _moving_disc_series(str(tmp_path), steps=5)
    measure(listing, "alpha", out=tmp_path / "serial", contours=False)
    measure(listing, "alpha", out=tmp_path / "local", workers=2, contours=False)
    measure(listing, "alpha", out=tmp_path / "dask", scheduler="local", contours=False)
    ref = _tables(tmp_path / "serial")
    for other in ("local", "dask"):
        got = _tables(tmp_path / other)
        for name in ref:
            pd.testing.assert_frame_equal(ref[name], got[name], check_exact=True)


def test_resume_after_kill_gives_identical_tables(tmp_path):
    from conftest import subprocess_env

    listing = _moving_disc_series(str(tmp_path), steps=12, n=40)
    measure(listing, "alpha", out=tmp_path / "whole", contours=False)
    out = tmp_path / "killed"
    cmd = [sys.executable, "-m", "phasegauge", "measure", listing, "-f", "alpha", "-o", str(out),
           "--no-contours", "--quiet"]
    proc = subprocess.Popen(cmd, env=subprocess_env(), stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
    cache = out / ".cache"
    deadline = time.time() + 120
    while time.time() < deadline:
        if cache.is_dir() and len([f for f in os.listdir(cache) if f.endswith(".pkl")]) >= 3:
            break
        if proc.poll() is not None:
            break
        time.sleep(0.05)
    if proc.poll() is None:
        proc.send_signal(signal.SIGKILL)
    proc.wait()
    cached = len([f for f in os.listdir(cache) if f.endswith(".pkl")])
    assert cached >= 1
    if not (out / "steps.csv").exists():
        with pytest.raises(OutputError, match="--resume"):
            measure(listing, "alpha", out=out, contours=False)
    result = measure(listing, "alpha", out=out, resume=True, contours=False)
    assert sum(r.reused for r in result.results) >= min(cached, 12)
    ref, got = _tables(tmp_path / "whole"), _tables(out)
    for name in ref:
        pd.testing.assert_frame_equal(ref[name], got[name], check_exact=True)


def test_resume_refuses_other_options(tmp_path):
    listing = _moving_disc_series(str(tmp_path), steps=2)
    out = tmp_path / "out"
    measure(listing, "alpha", out=out, analyses=("conservation",))
    with pytest.raises(OutputError, match="other inputs or options"):
        measure(listing, "alpha", out=out, resume=True, level=0.4, analyses=("conservation",))


def test_resume_refuses_a_run_another_version_measured(tmp_path, monkeypatch):
    """A step cached by other code could differ in method: the run is not finished by this code."""
    from phasegauge.run import cache

    listing = _moving_disc_series(str(tmp_path), steps=2)
    out = tmp_path / "out"
    measure(listing, "alpha", out=out, analyses=("conservation",))
    measure(listing, "alpha", out=out, resume=True, analyses=("conservation",))  # the same code: fine
    monkeypatch.setattr(cache, "code_digest", lambda: "0123456789abcdef")
    with pytest.raises(OutputError, match="another version of phasegauge") as caught:
        measure(listing, "alpha", out=out, resume=True, analyses=("conservation",))
    assert "--overwrite" in caught.value.fix
    measure(listing, "alpha", out=out, overwrite=True, analyses=("conservation",))


def test_options_are_checked_first():
    with pytest.raises(OptionError, match="level must lie"):
        MeasureOptions(field="c", level=1.5)
    with pytest.raises(OptionError, match="unknown analyses"):
        MeasureOptions(field="c", analyses=("vortices",))
    with pytest.raises(OptionError, match="periodic axes"):
        MeasureOptions(field="c", periodic=("w",))


def test_times_must_increase(tmp_path):
    m = grid_mesh((3, 3), kind="triangle")
    for i in range(2):
        to_meshio(m, cell_data={"alpha": np.zeros(m.n_cells)}).write(tmp_path / f"f{i}.vtu")
    (tmp_path / "run.steps").write_text("0.5,f0.vtu\n0.5,f1.vtu\n")
    with pytest.raises(SeriesError, match="times do not increase"):
        measure(tmp_path / "run.steps", "alpha")


def test_cross_sections_in_pipeline(tmp_path):
    # a linear field c = y with plug flow u = (1, 0): every section has I = 1/3 (Danckwerts 1952;
    # REFERENCES.md check value for c = y)
    m = grid_mesh((10, 6), [(0, 2), (0, 1)], "mixed")
    u = np.tile([1.0, 0.0, 0.0], (m.n_points, 1))
    to_meshio(m, point_data={"c": m.points[:, 1], "u": u}).write(tmp_path / "ch.vtu")
    res = measure(tmp_path / "ch.vtu", "c", velocity="u", section_axis="x", section_count=5,
                  analyses=("mixing",))
    assert len(res.profiles) == 5
    assert np.allclose(res.profiles["segregation_intensity"], 1 / 3, atol=1e-9)
    assert np.isnan(res.steps["mixing_length"][0])  # never reaches 0.9


# ------------------------------------------------------------------ recipes
def test_recipe_unknown_key_suggests_nearest(tmp_path):
    recipe = tmp_path / "r.toml"
    recipe.write_text('[input]\npath = "x.vtu"\nfeild = "c"\n[output]\nfolder = "o"\n')
    with pytest.raises(OptionError, match="unknown key 'feild' in \\[input\\]; did you mean 'field'"):
        load_recipe(recipe)
    recipe.write_text('[inputs]\npath = "x.vtu"\n')
    with pytest.raises(OptionError, match="did you mean 'input'"):
        load_recipe(recipe)
    recipe.write_text('[input]\npath = "x.vtu"\nfield = "c"\nrange = "0,1"\n[output]\nfolder = "o"\n')
    with pytest.raises(OptionError, match="range must be a list"):
        load_recipe(recipe)
    recipe.write_text('[input]\npath = "x.vtu"\n[output]\nfolder = "o"\n')
    with pytest.raises(OptionError, match="needs 'field'"):
        load_recipe(recipe)


def _local_recipe(name, tmp_path):
    """A shipped recipe with its sample paths made absolute and its output in ``tmp_path``."""
    import re

    text = open(os.path.join(ROOT, "recipes", f"{name}.toml")).read()
    text = text.replace('"../sample_fields/', f'"{SAMPLES}/')
    text = re.sub(r'folder = "[^"]*"', f'folder = "{tmp_path}/o"', text)
    (tmp_path / "r.toml").write_text(text)
    return tmp_path / "r.toml"


@pytest.mark.parametrize("name", ["diffusion_audit", "breakup_tracking", "smeared_vs_sharp", "miscibility"])
def test_every_shipped_recipe_runs_end_to_end(name, tmp_path):
    """Each shipped recipe runs from the command line on the shipped samples (the quickstart and the
    channel campaign are run with their own checks in tests/test_quickstart.py and test_campaign_run.py)."""
    recipe = load_recipe(os.path.join(ROOT, "recipes", f"{name}.toml"))
    path = recipe["input"]["path"] if "input" in recipe else recipe["first"]["path"]
    assert os.path.exists(path)
    res = CliRunner().invoke(main, ["run", str(_local_recipe(name, tmp_path)), "--quiet"])
    assert res.exit_code == 0, res.output
    assert (tmp_path / "o" / "report.html").exists() and (tmp_path / "o" / "manifest.json").exists()


def test_recipe_values_are_checked_before_any_work_with_the_recipe_names(tmp_path):
    """A bad value is refused when the recipe is read, naming [table] key as the user wrote it."""
    base = '[input]\npath = "x.vtu"\nfield = "c"\n[output]\nfolder = "o"\n'
    cases = {'[droplets]\nadjacency = "edge"\n': r"\[droplets\] adjacency must be 'face' or 'point'",
             '[interface]\ndiffusivity = -1.0\n': r"\[interface\] diffusivity must be non-negative",
             '[mixing]\nmixing_target = 2.0\n': r"\[mixing\] mixing_target must lie in",
             '[mixing]\nsection_axis = "w"\n': r"\[mixing\] section_axis must be x, y or z",
             '[run]\nworkers = 0\n': r"\[run\] workers must be at least 1",
             '[run]\nthreads = 0\n': r"\[run\] threads must be a whole number of at least 1"}
    for extra, message in cases.items():
        recipe = tmp_path / "r.toml"
        recipe.write_text(base + extra)
        with pytest.raises(OptionError, match=message):
            load_recipe(recipe)
    recipe.write_text(base + "[interface]\ndiffusivity = 0.0\n")
    assert load_recipe(recipe)["interface"]["diffusivity"] == 0.0


def test_cli_measure_and_errors(tmp_path):
    listing = _moving_disc_series(str(tmp_path), steps=2)
    out = tmp_path / "o"
    res = CliRunner().invoke(main, ["measure", listing, "-f", "alpha", "--range", "0,1", "-o", str(out)])
    assert res.exit_code == 0, res.output
    assert "report:" in res.output
    res = CliRunner().invoke(main, ["measure", listing, "-f", "alpha", "-o", str(out)])
    assert res.exit_code == 2 and "--overwrite" in res.output
    res = CliRunner().invoke(main, ["measure", listing, "-f", "nope", "-o", str(tmp_path / "o2"), "--strict"])
    assert res.exit_code == 2 and "field 'nope' not found; fields there: alpha" in res.output
    res = CliRunner().invoke(main, ["measure", listing, "-f", "alpha", "--range", "-1,1", "-o", str(tmp_path / "o3")])
    assert res.exit_code == 0, res.output


def test_bad_step_skipped_and_recorded(tmp_path):
    listing = _moving_disc_series(str(tmp_path), steps=3)
    with open(tmp_path / "disc_1.vtu", "wb") as f:
        f.write(b"<VTKFile broken")
    out = tmp_path / "o"
    with pytest.warns(Warning, match="skipped"):
        result = measure(listing, "alpha", out=out, analyses=("conservation",))
    assert list(result.steps["step"]) == [0, 2] and len(result.skipped) == 1
    manifest = json.loads((out / "manifest.json").read_text())
    assert "disc_1.vtu" in manifest["skipped_steps"][0]
    assert "Skipped steps" in (out / "report.html").read_text()
    with pytest.raises(Exception, match="disc_1.vtu"):
        measure(listing, "alpha", analyses=("conservation",), strict=True)


def test_segregation_scale_option(tmp_path):
    listing = _moving_disc_series(str(tmp_path), steps=2)
    res = CliRunner().invoke(main, ["measure", listing, "-f", "alpha", "--analyses", "mixing", "--segregation-scale",
                                    "-o", str(tmp_path / "o"), "--quiet"])
    assert res.exit_code == 0, res.output
    steps = pd.read_csv(tmp_path / "o" / "steps.csv")
    # two discs of radius 0.15: the scale of segregation is a fraction of the disc size, well above the cell size
    assert ((steps["segregation_scale"] > 1 / 24) & (steps["segregation_scale"] < 0.3)).all()


def test_forked_workers_reuse_a_mesh_this_process_built(tmp_path):
    # forks start before the first step and build their own mesh caches; a mesh an earlier run
    # kept in the pool it was given is inherited by the forks of a later run with its caches
    from phasegauge.io import MeshPool, Series

    listing = _moving_disc_series(str(tmp_path), steps=3)
    pool = MeshPool()
    measure(listing, "alpha", analyses=("conservation",), mesh_pool=pool)  # serial: the mesh is kept
    (kept,) = list(pool)
    # the pooled mesh carries the measures the earlier run computed (nothing to rebuild in a fork)
    assert "cell_measures" in vars(kept)
    measure(listing, "alpha", workers=2, analyses=("conservation",), mesh_pool=pool)
    assert list(pool) == [kept]  # this process's steps of the second run reused it too
    assert kept.signature == Series(listing).read(0).mesh.signature


def test_wrong_field_stops_a_parallel_run_after_the_first_step(tmp_path):
    # the forks start with the first step, but a field name that is wrong still ends the run
    # with the first step's one-line error, and a new output folder is not left behind
    from phasegauge.errors import FieldNotFoundError

    listing = _moving_disc_series(str(tmp_path), steps=4)
    with pytest.raises(FieldNotFoundError, match="field 'nope' not found; fields there: alpha"):
        measure(listing, "nope", out=tmp_path / "o", workers=2, analyses=("conservation",))
    assert not (tmp_path / "o").exists()


def test_threads_give_the_same_tables_and_are_recorded(tmp_path, monkeypatch):
    """A run on 3 threads (its small mesh let onto them): profiles.csv and steps.csv equal to one thread's; in 3D
    too."""
    from phasegauge.run import step

    monkeypatch.setattr(step, "THREADED_CELLS", 0)
    listing = _moving_disc_series(str(tmp_path), steps=2)
    tables = {}
    for threads in (1, 3):
        out = tmp_path / f"o{threads}"
        measure(listing, "alpha", section_axis="x", section_count=7, threads=threads, out=str(out))
        tables[threads] = [pd.read_csv(out / name) for name in ("steps.csv", "profiles.csv")]
        assert json.loads((out / "manifest.json").read_text())["execution"]["threads"] == threads
    for one, three in zip(tables[1], tables[3]):
        pd.testing.assert_frame_equal(one, three, check_exact=True)
    # in 3D, jittered hexahedra (coned cells, the section operator built beside the interface)
    mesh = grid_mesh((10, 10, 10), kind="hexahedron", jitter=0.2, seed=2)

    def ball(k):
        r = np.linalg.norm(mesh.coordinates - [0.4 + 0.05 * k, 0.5, 0.5], axis=1)
        return 0.5 * (1 + np.tanh((0.25 - r) / 0.04))

    (tmp_path / "ball").mkdir()
    listing = write_listing(str(tmp_path / "ball"), ((0.1 * k, f"b_{k}.vtu", mesh, {"alpha": ball(k)})
                                                     for k in range(2)))
    tables = {}
    for threads in (1, 4):
        out = tmp_path / f"b{threads}"
        measure(listing, "alpha", section_axis="y", section_count=7, threads=threads, out=str(out))
        tables[threads] = [pd.read_csv(out / name) for name in ("steps.csv", "profiles.csv")]
    for one, four in zip(tables[1], tables[4]):
        pd.testing.assert_frame_equal(one, four, check_exact=True)
    res = CliRunner().invoke(main, ["measure", listing, "-f", "alpha", "--threads", "0", "-o", str(tmp_path / "b")])
    assert res.exit_code == 2 and "threads must be a whole number of at least 1" in res.output


def test_sections_and_droplets_beside_give_one_threads_tables_and_warnings_in_order(tmp_path, monkeypatch):
    """Sections, contour and droplets measured on threads beside the widths (the sections every step,
    the first building the section operator on half the threads, later ones on one): the steps,
    profiles and droplets of one thread bit for bit on 2 and 4, the same warnings in the same order,
    none of ours given on a thread beside; the sections' no-net-flow warning given by the run, not
    lost on the thread."""
    from phasegauge.analysis import _interface_width, droplets, mixing
    from phasegauge.run import step

    monkeypatch.setattr(step, "THREADED_CELLS", 0)
    mesh = grid_mesh((24, 24))
    x, y = mesh.cell_centroids[:, 0], mesh.cell_centroids[:, 1]
    # a closed box's circulation: no net flow through any y plane [analytic: int_0^1 sin(2 pi x) dx = 0]
    u = np.stack([np.sin(np.pi * x) ** 2 * np.sin(2 * np.pi * y), -np.sin(2 * np.pi * x) * np.sin(np.pi * y) ** 2,
                  np.zeros_like(x)], axis=1)
    steps = []
    for k in range(3):
        c = np.zeros(mesh.n_cells)
        for cx in (0.3 + 0.03 * k, 0.7 - 0.03 * k):
            c = np.maximum(c, 0.5 * (1 + np.tanh((0.12 - np.hypot(x - cx, y - 0.5)) / 0.02)))
        steps.append((0.1 * k, f"box_{k}.vtu", mesh, {"alpha": c, "velocity": u}))
    listing = write_listing(str(tmp_path), steps)
    seen = []  # (what, on the beside thread, its threads): every call, in order
    real_label, real_sections, real_warn = droplets.label_droplets, mixing.cross_sections_noted, warnings.warn
    real_contour = _interface_width.find_interface

    def beside():
        return threading.current_thread().name == "phasegauge-beside"

    def warn(message, *args, **kwargs):  # a warning of ours given on a thread beside: its order would vary
        if isinstance(message, Warning) and beside():
            seen.append(("warned beside", True, None))
        return real_warn(message, *args, **kwargs)

    monkeypatch.setattr(droplets, "label_droplets",
                        lambda *a, **k: seen.append(("droplets", beside(), None)) or real_label(*a, **k))
    monkeypatch.setattr(mixing, "cross_sections_noted",
                        lambda *a, **k: seen.append(("sections", beside(), k["threads"])) or real_sections(*a, **k))
    monkeypatch.setattr(_interface_width, "find_interface",
                        lambda *a, **k: seen.append(("contour", beside(), None)) or real_contour(*a, **k))
    monkeypatch.setattr(warnings, "warn", warn)
    runs = {}
    for threads in (1, 2, 4):
        seen.clear()
        out = tmp_path / f"o{threads}"
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            res = measure(listing, "alpha", velocity="velocity", section_axis="y", section_count=5,
                          threads=threads, out=str(out))
        runs[threads] = ([pd.read_csv(out / name) for name in ("steps.csv", "profiles.csv", "droplets.csv")],
                         list(res.warnings))
        if threads == 1:  # everything on the caller's thread (the sections through cross_sections)
            assert seen == [("contour", False, None), ("droplets", False, None)] * 3
        else:  # the sections beside every step (the first building the operator on half the threads);
            # the contour beside the band integrals and the droplets beside the widths where the
            # analyses keep two threads or more
            assert [x for x in seen if x[0] == "sections"] == [("sections", True, threads // 2)] + [
                ("sections", True, 1)] * 2
            assert [x[1] for x in seen if x[0] == "droplets"] == [threads == 4, True, True]
            assert [x[1] for x in seen if x[0] == "contour"] == [threads == 4, True, True]
        assert ("warned beside", True, None) not in seen
    for one, two, four in zip(runs[1][0], runs[2][0], runs[4][0]):
        pd.testing.assert_frame_equal(one, two, check_exact=True)
        pd.testing.assert_frame_equal(one, four, check_exact=True)
    assert runs[1][1] == runs[2][1] == runs[4][1]
    assert any("no net flow through the section" in text for text in runs[2][1])
    assert (runs[2][0][2]["step"].value_counts() == 2).all()  # two droplets a step


def test_sections_built_beside_stop_the_run_as_on_one_thread(tmp_path, monkeypatch):
    """A section position outside the mesh: the operator built on a thread of its own gives the
    one-thread run's error, with the step named."""
    from phasegauge.errors import OptionError
    from phasegauge.run import step

    monkeypatch.setattr(step, "THREADED_CELLS", 0)
    listing = _moving_disc_series(str(tmp_path), steps=2)
    messages = []
    for threads in (1, 3):
        with pytest.raises(OptionError, match="section positions 99 lie outside the mesh") as caught:
            measure(listing, "alpha", section_axis="x", section_positions=[99.0], threads=threads,
                    out=str(tmp_path / f"o{threads}"))
        messages.append(str(caught.value))
        # with the box wrong too, the box's error comes first on any number of threads (found by review)
        with pytest.raises(OptionError, match="the box lies outside the mesh"):
            measure(listing, "alpha", section_axis="x", section_positions=[99.0], box=((5, 6), (0, 1)),
                    threads=threads, out=str(tmp_path / f"b{threads}"))
    assert messages[0] == messages[1]


def test_threads_are_checked_first_by_every_command(tmp_path):
    """A wrong thread count is refused before any work, by each command that measures."""
    listing = _moving_disc_series(str(tmp_path), steps=2)
    for args in (["compare", listing, listing, "--field-a", "alpha", "--field-b", "alpha"],
                 ["convergence", listing, listing, listing, "-f", "alpha"]):
        res = CliRunner().invoke(main, args + ["--threads", "0", "-o", str(tmp_path / args[0])])
        assert res.exit_code == 2 and "threads must be a whole number of at least 1" in res.output, res.output
        assert not (tmp_path / args[0]).exists()
    recipe = tmp_path / "r.toml"
    recipe.write_text(f'[input]\npath = "{listing}"\nfield = "alpha"\n[output]\nfolder = "{tmp_path / "r"}"\n')
    res = CliRunner().invoke(main, ["run", str(recipe), "--threads", "2", "--quiet"])
    assert res.exit_code == 0, res.output
    assert json.loads((tmp_path / "r" / "manifest.json").read_text())["execution"]["threads"] == 2


def test_the_run_reads_the_mixing_length_against_the_inflow(tmp_path):
    # a dye stream (y < 0.3) reaching x = 1 only, carrier (c = 1e-3) beyond: no section is mixed.
    # Against the inflow (Danckwerts 1952) the carrier beyond the front reads unmixed, so the run's
    # mixing length is NaN; against each section's own mean it would read "mixed" at the front
    from phasegauge.analysis.mixing import mixing_length

    m = grid_mesh((20, 10), [(0, 2), (0, 1)])
    x, y = m.cell_centroids[:, 0], m.cell_centroids[:, 1]
    u = np.stack([6 * y * (1 - y), np.zeros_like(y), np.zeros_like(y)], axis=1)
    c = np.where((x < 1) & (y < 0.3), 1.0, 1e-3)
    to_meshio(m, cell_data={"c": c, "u": u}).write(tmp_path / "front.vtu")
    res = measure(tmp_path / "front.vtu", "c", velocity="u", section_axis="x",
                  section_positions=(0.25, 0.75, 1.25, 1.75), analyses=("mixing",))
    assert np.isnan(res.steps["mixing_length"][0])
    assert np.isfinite(mixing_length(res.profiles, reference="section"))  # the old reading


@pytest.mark.parametrize("towards", [1.0, -1.0])
def test_the_run_measures_the_mixing_length_from_the_end_the_flow_enters_by(tmp_path, towards):
    # audit 9: the run's mixing_length was the position along the axis, so a channel from x = 2 to 6, or one
    # flowing towards -x, read a position as its length. Outside check: the profile's own crossing of the
    # target, by linear interpolation (mixing_length without ends), less the inlet end's coordinate
    from phasegauge.analysis.mixing import mixing_length

    m = grid_mesh((40, 10), [(2, 6), (0, 1)])
    x, y = m.cell_centroids[:, 0], m.cell_centroids[:, 1]
    u = np.stack([np.full_like(x, towards), np.zeros_like(x), np.zeros_like(x)], axis=1)
    blend = np.clip((x - 2) / 4 if towards > 0 else (6 - x) / 4, 0, 1)  # two streams blending downstream
    c = np.where(y < 0.5, 0.5 + 0.5 * (1 - blend), 0.5 - 0.5 * (1 - blend))
    to_meshio(m, cell_data={"c": c, "u": u}).write(tmp_path / "blend.vtu")
    res = measure(tmp_path / "blend.vtu", "c", velocity="u", section_axis="x", section_count=8,
                  mixing_target=0.6, analyses=("mixing",))
    at = mixing_length(res.profiles, target=0.6)
    expected = at - 2 if towards > 0 else 6 - at
    assert res.steps["mixing_length"][0] == pytest.approx(expected, rel=1e-12) and 0 < expected < 4
