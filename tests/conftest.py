"""Shared test set-up: no display, quiet plotting, small fixtures built in code."""

import os

os.environ.setdefault("MPLBACKEND", "Agg")
os.environ.setdefault("PYVISTA_OFF_SCREEN", "true")

import matplotlib  # noqa: E402

matplotlib.use("Agg")

try:  # pragma: no cover - pyvista is a dependency, but keep collection working without it
    import pyvista

    pyvista.OFF_SCREEN = True
except Exception:  # pragma: no cover
    pass


def subprocess_env():
    """Environment for running ``python -m phasegauge`` on the source under test."""
    import phasegauge

    env = dict(os.environ)
    src = os.path.dirname(os.path.dirname(os.path.abspath(phasegauge.__file__)))
    env["PYTHONPATH"] = src + os.pathsep + env.get("PYTHONPATH", "")
    env["MPLBACKEND"] = "Agg"
    return env
