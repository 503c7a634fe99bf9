"""Cahn-Hilliard output of a general PDE package: legacy VTK or VTU files per step, times in a listing.

Such packages write one file per step with their own writer (legacy VTK with the iteration number
as the stored time, or VTU with none) and the user keeps the physical times in a plain listing. The
files are read as they are; the listing's times win over the files' own (the README says so and
this test checks it). Field: the planar Cahn-Hilliard equilibrium phi = tanh(x / (sqrt2 eps))
(Cahn & Hilliard 1958); the phase volume is checked against numpy's sum of (phi + 1)/2 times the
cell areas of the file as meshio reads it.
"""

import contextlib
import os
import warnings

import meshio
import numpy as np
import pytest

import phasegauge as pg
from phasegauge.io import Series
from phasegauge.io.describe import describe_series
from phasegauge.meshgen import grid_mesh, to_meshio

EPS = 0.04
LISTING_TIMES = [0.0, 0.25, 0.5]
ITERATIONS = [0, 500, 1000]  # what the package stores as the files' own time


def _phi(x, centre):
    return np.tanh((x - centre) / (np.sqrt(2) * EPS))  # Cahn & Hilliard (1958) planar profile


def _write_legacy_with_time(path, mesh, cell_data, time):
    """A legacy VTK file with a TimeValue field, where VTK's own writers put it (after DATASET)."""
    to_meshio(mesh, None, cell_data).write(path, binary=False)
    text = open(path).read().replace("DATASET UNSTRUCTURED_GRID\n",
                                     f"DATASET UNSTRUCTURED_GRID\nFIELD FieldData 1\nTimeValue 1 1 double\n{time}\n")
    open(path, "w").write(text)


@pytest.fixture(params=["vtk", "vtu"])
def pde_run(request, tmp_path):
    fmt = request.param
    mesh = grid_mesh((40, 10), kind="quad")
    lines = ["time,path"]
    for k, (t, it) in enumerate(zip(LISTING_TIMES, ITERATIONS)):
        name = f"ch_{k}.{fmt}"
        if fmt == "vtk":  # cell data, the iteration as the file's own time
            phi = _phi(mesh.cell_centroids[:, 0], 0.4 + 0.1 * k)
            with _quiet():  # meshio warns that ASCII VTK is meant for debugging
                _write_legacy_with_time(tmp_path / name, mesh, {"phi": phi}, it)
        else:  # point data, no stored time
            to_meshio(mesh, {"phi": _phi(mesh.points[:, 0], 0.4 + 0.1 * k)}, None).write(tmp_path / name)
        lines.append(f"{t},{name}")
    (tmp_path / "run.steps").write_text("\n".join(lines) + "\n")
    return tmp_path, fmt


@contextlib.contextmanager
def _quiet():
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        yield


def test_the_files_hold_their_own_time_or_none(pde_run):
    folder, fmt = pde_run
    series = Series(str(folder / f"ch_*.{fmt}"))  # the files alone: their own times (or the step index)
    expected = [float(i) for i in ITERATIONS] if fmt == "vtk" else [0.0, 1.0, 2.0]
    assert series.times.tolist() == expected
    assert series.time_origins == (["file"] if fmt == "vtk" else ["index"])
    # the folder holds the listing beside the files: it is used (issue 22)
    assert Series(folder).times.tolist() == LISTING_TIMES


def test_the_listing_wins_over_the_files_own_times(pde_run):
    folder, fmt = pde_run
    series = Series(folder / "run.steps")
    assert series.times.tolist() == LISTING_TIMES and series.time_origins == ["listing"]
    for k in range(len(LISTING_TIMES)):  # reading a step keeps the listing's time
        assert series.read(k).time == LISTING_TIMES[k]
    assert describe_series(folder / "run.steps")["time_origin"] == "listing"


def test_measure_reads_the_files_without_conversion(pde_run):
    folder, fmt = pde_run
    result = pg.measure(folder / "run.steps", "phi", range=(-1, 1), analyses=("conservation",))
    assert result.steps["time"].tolist() == LISTING_TIMES
    for k in range(len(LISTING_TIMES)):
        with _quiet():
            raw = meshio.read(folder / f"ch_{k}.{fmt}")  # meshio, the outside reader
        quads = raw.cells[0].data
        corners = raw.points[quads]
        area = np.prod((corners.max(axis=1) - corners.min(axis=1))[:, :2], axis=1)  # axis-aligned quads
        if fmt == "vtk":
            c = (raw.cell_data["phi"][0] + 1) / 2
        else:  # data on points: the cell value is the mean of the corners (README, "Indicator")
            c = ((raw.point_data["phi"] + 1) / 2)[quads].mean(axis=1)
        assert result.steps["phase_volume"][k] == pytest.approx(np.sum(c * area), rel=1e-12)


def test_the_readme_states_the_order_the_code_follows():
    readme = os.path.join(os.path.dirname(__file__), "..", "..", "README.md")
    text = " ".join(open(readme, encoding="utf-8").read().split())
    assert "a listing's times win over the times stored in the files it names" in text
