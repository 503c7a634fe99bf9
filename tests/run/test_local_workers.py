"""Forked workers: a failure in a fork ends the run with the step named; a fork that dies is reported."""

import os

import numpy as np
import pytest

from phasegauge import measure
from phasegauge.errors import AnalysisError
from phasegauge.meshgen import grid_mesh

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
