"""Shared test set-up: no display, quiet plotting, small fixtures built in code."""

import os

import pytest

os.environ.setdefault("MPLBACKEND", "Agg")
os.environ.setdefault("PYVISTA_OFF_SCREEN", "true")

import matplotlib  # noqa: E402

matplotlib.use("Agg")

try:  # pragma: no cover - pyvista is a dependency, but keep collection working without it
    import pyvista

    pyvista.OFF_SCREEN = True
except Exception:  # pragma: no cover
    pass


@pytest.fixture(autouse=True)
def _reports_draw_in_one_process(monkeypatch):
    """A report written in a test draws all its figures in the test's process whatever the machine's
    load, so a test that watches matplotlib (figures saved, calls made) sees every figure;
    ``tests/report/test_drawing_fork.py`` forces the drawing fork on and off itself."""
    from phasegauge.report import _drawing

    monkeypatch.setattr(_drawing, "fork_helps", lambda count: False)


def subprocess_env():
    """Environment for running ``python -m phasegauge`` on the source under test."""
    import phasegauge

    env = dict(os.environ)
    src = os.path.dirname(os.path.dirname(os.path.abspath(phasegauge.__file__)))
    env["PYTHONPATH"] = src + os.pathsep + env.get("PYTHONPATH", "")
    env["MPLBACKEND"] = "Agg"
    return env


def write_listing(folder, steps) -> str:
    """Write a series of VTU files and the ``run.steps`` listing that names them; return its path.

    ``steps`` yields ``(time, file name, mesh, cell data)``; each step is written with
    ``phasegauge.meshgen.to_meshio``.
    """
    from phasegauge.meshgen import to_meshio

    lines = []
    for time, name, mesh, cell_data in steps:
        to_meshio(mesh, cell_data=cell_data).write(os.path.join(folder, name))
        lines.append(f"{time},{name}")
    listing = os.path.join(folder, "run.steps")
    with open(listing, "w") as handle:
        handle.write("\n".join(lines) + "\n")
    return listing
