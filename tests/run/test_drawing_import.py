"""A run with plots imports its plotting on a background thread once the first step is done."""

import threading

import numpy as np
import pytest

import phasegauge.report._plots as plots
from phasegauge import measure
from phasegauge.meshgen import grid_mesh, to_meshio


def _discs(folder, steps):
    mesh = grid_mesh((12, 12), kind="quad")
    x, y = mesh.cell_centroids[:, 0], mesh.cell_centroids[:, 1]
    lines = []
    for k in range(steps):
        c = 0.5 * (1 + np.tanh((0.2 - np.hypot(x - 0.3 - 0.1 * k, y - 0.5)) / 0.04))
        to_meshio(mesh, cell_data={"alpha": c}).write(folder / f"s_{k}.vtu")
        lines.append(f"{0.5 * k},s_{k}.vtu")
    (folder / "run.steps").write_text("\n".join(lines) + "\n")
    return str(folder / "run.steps")


@pytest.fixture
def imports(monkeypatch):
    """The names of the threads that called ``import_drawing`` while the test ran."""
    seen = []
    real = plots.import_drawing

    def recording():
        seen.append(threading.current_thread().name)
        real()

    monkeypatch.setattr(plots, "import_drawing", recording)
    return seen


@pytest.mark.parametrize("workers", [1, 2])
def test_a_run_with_plots_imports_them_on_a_background_thread(tmp_path, imports, workers, monkeypatch):
    import phasegauge.run.measure as run_measure

    monkeypatch.setattr(run_measure, "_spare_core", lambda workers, scheduler: True)  # as on a machine of many cores
    measure(_discs(tmp_path, 4), "alpha", out=tmp_path / "out", workers=workers)
    assert imports == ["import-plotting"]  # once, off the run's own thread
    assert (tmp_path / "out" / "interface_width.png").exists()
    assert not any(t.name == "import-plotting" for t in threading.enumerate())  # joined before the report


def test_no_import_without_plots_or_without_an_output_folder(tmp_path, imports):
    path = _discs(tmp_path, 3)
    measure(path, "alpha")  # no output folder: no report
    measure(path, "alpha", out=tmp_path / "one", steps="0", snapshots=0)  # one step, no snapshot: no plot
    assert imports == []


def test_the_import_waits_for_a_spare_core(monkeypatch):
    import multiprocessing
    import os

    from phasegauge.run.measure import _spare_core

    monkeypatch.setattr(os, "getloadavg", lambda: (0.0, 0.0, 0.0))  # an idle machine

    cores = len(os.sched_getaffinity(0)) if hasattr(os, "sched_getaffinity") else os.cpu_count()
    assert _spare_core(cores, None) is False  # every core runs steps
    assert _spare_core(1, "local") is False  # a local Dask cluster takes every core
    assert _spare_core(cores, "tcp://127.0.0.1:8786") is True  # the steps run elsewhere
    assert _spare_core(1, None) is (cores > 1)
    # a forked child (as a campaign's runs side by side) shares the cores with its siblings
    ctx = multiprocessing.get_context("fork")
    receive, send = ctx.Pipe(duplex=False)
    child = ctx.Process(target=lambda: send.send(_spare_core(1, None)))
    child.start()
    assert receive.recv() is False
    child.join()
    monkeypatch.setattr(os, "getloadavg", lambda: (cores - 0.5, 0.0, 0.0))  # other programs keep the cores busy
    assert _spare_core(1, None) is False


def test_a_run_goes_on_where_the_load_average_is_unobtainable(tmp_path, imports, monkeypatch):
    # Python's documentation of os.getloadavg: "Raises OSError if the load average was unobtainable"
    # (glibc's getloadavg fails where /proc is not mounted, as in some build sandboxes). The plotting
    # import is only a speed-up: without a load figure the run counts no other programs' work.
    import os

    from phasegauge.run.measure import _spare_core

    def unobtainable():
        raise OSError("Load averages are unobtainable")

    monkeypatch.setattr(os, "getloadavg", unobtainable)
    cores = len(os.sched_getaffinity(0)) if hasattr(os, "sched_getaffinity") else os.cpu_count()
    assert _spare_core(1, None) is (cores > 1)
    measure(_discs(tmp_path, 3), "alpha", out=tmp_path / "out")
    assert (tmp_path / "out" / "interface_width.png").exists()
