"""Forked workers: a failure in a fork ends the run with the step named; a fork that dies is reported."""

import os
import sys

import numpy as np
import pytest

from phasegauge import measure
from phasegauge.errors import AnalysisError
from phasegauge.meshgen import grid_mesh, to_meshio

from conftest import write_listing


def _listing(folder, steps=5):
    mesh = grid_mesh((10, 10), kind="triangle")
    x = mesh.cell_centroids[:, 0]
    return write_listing(folder, ((0.1 * k, f"s_{k}.vtu", mesh, {"alpha": np.where(x < 0.2 + 0.1 * k, 1.0, 0.0)})
                                  for k in range(steps)))


def test_a_failure_inside_a_fork_names_the_step(tmp_path, monkeypatch):
    import phasegauge.run.step as step_module

    parent = os.getpid()
    real = step_module.analyse_step

    def broken(step, options, **kw):
        if os.getpid() != parent:  # every fork fails, this process does not
            return 1 / 0
        return real(step, options, **kw)

    monkeypatch.setattr(step_module, "analyse_step", broken)
    with pytest.raises(AnalysisError, match=r"s_\d\.vtu, step \d: ZeroDivisionError: division by zero") as info:
        measure(_listing(str(tmp_path)), "alpha", analyses=("conservation",), workers=2)
    assert "ZeroDivisionError" in str(info.value.__cause__)  # the fork's traceback, for --debug


def test_a_fork_that_dies_ends_the_run_with_an_error(tmp_path, monkeypatch):
    from phasegauge.run.step import StepRunner

    parent = os.getpid()
    real = StepRunner.run

    def dying(runner, index):
        if os.getpid() != parent:
            os._exit(3)
        return real(runner, index)

    monkeypatch.setattr(StepRunner, "run", dying)
    with pytest.raises(AnalysisError, match="a worker process ended unexpectedly while running step"):
        measure(_listing(str(tmp_path)), "alpha", analyses=("conservation",), workers=3)


def test_more_workers_than_steps_give_the_serial_tables(tmp_path):
    import pandas as pd

    listing = _listing(str(tmp_path), steps=3)
    serial = measure(listing, "alpha", analyses=("droplets", "conservation"))
    parallel = measure(listing, "alpha", analyses=("droplets", "conservation"), workers=6)
    pd.testing.assert_frame_equal(serial.steps, parallel.steps, check_exact=True)
    pd.testing.assert_frame_equal(serial.droplets, parallel.droplets, check_exact=True)


def _processes_naming(text: str) -> list:
    """Pids of live processes whose command line holds ``text`` (Linux /proc)."""
    found = []
    for entry in os.listdir("/proc"):
        if not entry.isdigit():
            continue
        try:
            with open(f"/proc/{entry}/cmdline", "rb") as handle:
                line = handle.read().replace(b"\0", b" ").decode(errors="replace")
            with open(f"/proc/{entry}/stat") as handle:
                state = handle.read().rsplit(")", 1)[1].split()[0]
        except OSError:
            continue
        if text in line and state != "Z":
            found.append(int(entry))
    return found


@pytest.mark.skipif(not sys.platform.startswith("linux"), reason="reads /proc")
@pytest.mark.parametrize("signal_name", ["SIGTERM", "SIGKILL"])
def test_a_killed_two_worker_run_leaves_no_process(tmp_path, signal_name):
    """SIGTERM or SIGKILL to `measure --workers 2` mid-run (what `timeout` and batch schedulers send)
    leaves no forked worker alive; SIGTERM stops the run as an interrupt does (exit 130, resume hint).
    Checked by the kernel's own process table (/proc), not by our bookkeeping."""
    import signal
    import subprocess
    import time

    from conftest import subprocess_env

    mesh = grid_mesh((120, 120), kind="triangle")
    x, y = mesh.cell_centroids[:, 0], mesh.cell_centroids[:, 1]
    series = tmp_path / "in"
    series.mkdir()
    for k in range(50):
        c = 0.5 * (1 + np.tanh((0.2 - np.hypot(x - 0.3 - 0.005 * k, y - 0.5)) / 0.02))
        to_meshio(mesh, cell_data={"c": c}).write(str(series / f"blob_{k}.vtu"))
    out = tmp_path / f"out_{signal_name}"
    proc = subprocess.Popen([sys.executable, "-m", "phasegauge", "measure", str(series), "-f", "c", "-o", str(out),
                             "--workers", "2", "--quiet"], env=subprocess_env(), stdout=subprocess.PIPE,
                            stderr=subprocess.PIPE)
    deadline = time.monotonic() + 60
    while time.monotonic() < deadline:  # until the run has finished a few steps (and so has forked)
        cached = list((out / ".cache").glob("step_*.pkl")) if (out / ".cache").exists() else []
        if len(cached) >= 3 or proc.poll() is not None:
            break
        time.sleep(0.1)
    assert proc.poll() is None, "the run ended before it could be killed; make the series longer"
    assert len(_processes_naming(str(out))) >= 2  # this process and its forked worker
    proc.send_signal(getattr(signal, signal_name))
    _, err = proc.communicate(timeout=30)
    deadline = time.monotonic() + 10
    while _processes_naming(str(out)) and time.monotonic() < deadline:
        time.sleep(0.1)
    assert _processes_naming(str(out)) == []
    if signal_name == "SIGTERM":
        assert proc.returncode == 130
        assert "interrupted; rerun with --resume to finish" in err.decode()
        assert "Traceback" not in err.decode()


def test_a_mesh_warning_reads_alike_on_one_or_two_workers(tmp_path):
    # one quad listed clockwise in a 10 x 10 grid, the same mesh in all 5 steps: its orientation by the
    # sign of the shoelace area (numpy) is the opposite of the rest; the run says so once, counting every
    # step that holds it (5), whether one process measured them or two forks shared them
    mesh = grid_mesh((10, 10), kind="quad")
    conn = mesh.blocks[0].connectivity.copy()
    conn[17] = conn[17][::-1]
    xy = mesh.points[conn][:, :, :2]
    shoelace = 0.5 * np.sum(xy[:, :, 0] * np.roll(xy[:, :, 1], -1, axis=1) - np.roll(xy[:, :, 0], -1, axis=1)
                            * xy[:, :, 1], axis=1)
    assert np.count_nonzero(shoelace < 0) == 1
    from phasegauge.model.mesh import Mesh

    turned = Mesh(mesh.points, [("quad", conn)])
    x = turned.cell_centroids[:, 0]
    steps = ((0.1 * k, f"s_{k}.vtu", turned, {"alpha": np.where(x < 0.2 + 0.1 * k, 1.0, 0.0)}) for k in range(5))
    path = write_listing(str(tmp_path), steps)
    lines = []
    for workers in (1, 2):
        result = measure(path, "alpha", analyses=("conservation",), workers=workers)
        lines.append([w for w in result.warnings if "inverted" in w])
    assert lines[0] == lines[1] and len(lines[0]) == 1
    assert "1 cell is inverted" in lines[0][0] and lines[0][0].endswith("(and 4 more steps)")
    # the manifest lists the run's warnings as the result does: once each, not once a step
    import json

    result = measure(path, "alpha", analyses=("conservation",), out=str(tmp_path / "out"))
    manifest = json.loads((tmp_path / "out" / "manifest.json").read_text())
    assert manifest["warnings"] == result.warnings and [w for w in manifest["warnings"] if "inverted" in w] == lines[0]


def test_a_read_warning_counts_every_step_of_its_mesh_on_one_or_two_workers(tmp_path):
    # a 10 x 10 quad grid whose file stores each quad's corners apart (400 points for 121 places, as numpy's
    # unique counts them), each copy with a value of its own (a point field the merge averages): the reader
    # merges them and says so; with the same mesh in all 5 steps the line counts the 4 more steps however
    # the steps were shared among processes
    import meshio

    mesh = grid_mesh((10, 10), kind="quad")
    conn = mesh.blocks[0].connectivity
    points = mesh.points[conn.ravel()]
    apart = np.arange(points.shape[0]).reshape(conn.shape)
    duplicates = points.shape[0] - np.unique(points, axis=0).shape[0]
    assert duplicates == 400 - 121
    x = points[apart].mean(axis=1)[:, 0]
    lines = []
    for k in range(5):
        alpha = np.where(x < 0.2 + 0.1 * k, 1.0, 0.0)
        meshio.write(str(tmp_path / f"s_{k}.vtu"), meshio.Mesh(points, [("quad", apart)], cell_data={"alpha": [alpha]},
                                                               point_data={"copy": np.arange(400.0) % 4}))
    for workers in (1, 2):
        result = measure(str(tmp_path), "alpha", analyses=("conservation",), workers=workers)
        lines.append([w for w in result.warnings if "duplicate points merged" in w])
    assert lines[0] == lines[1] and len(lines[0]) == 1
    assert f"{duplicates} duplicate points merged" in lines[0][0] and lines[0][0].endswith("(and 4 more steps)")
