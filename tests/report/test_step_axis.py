"""A series that stores no times is plotted against the step number, and says so on every axis.

The files carry no time (meshio reads no field data from them: the reference that they hold none), so
the run numbers the steps 0, 1, 2 ... (time origin ``index``): an axis or legend that says "time (run's
time units)" or "t = 1" gives a step number a unit it does not have.
"""

import json

import meshio
import numpy as np
import pytest
from matplotlib.figure import Figure

from conftest import write_listing
from phasegauge import measure
from phasegauge.meshgen import grid_mesh
from phasegauge.report._canvas import STEP_LABEL, TIME_LABEL, with_units
from phasegauge.report._plots_interface import plot_interface_snapshots


@pytest.fixture
def saved_axes(monkeypatch):
    """The axes of every figure saved while the test runs."""
    seen = []
    save = Figure.savefig

    def recording(figure, fname, *args, **kwargs):
        seen.append(list(figure.axes))
        return save(figure, fname, *args, **kwargs)

    monkeypatch.setattr(Figure, "savefig", recording)
    return seen


def _numbered_drop(folder, *, times=False):
    """A drop over 4 steps, its files with no time; ``times``: a 'time,path' listing gives them times."""
    mesh = grid_mesh((40, 40))
    p = mesh.points
    r = np.hypot(p[:, 0] - 0.5, p[:, 1] - 0.5)
    steps = [(0.5 * k, f"s_{k}.vtu", mesh, None, {"c": 0.5 * (1 - np.tanh((r - 0.2 - 0.01 * k) / (2 * 0.02)))})
             for k in range(4)]
    listing = write_listing(str(folder), steps)
    return listing if times else str(folder / "s_*.vtu")


def _time_labels(seen):
    """Every x label and colour-bar label of the saved figures, and every legend entry."""
    labels, legends = [], []
    for axes in seen:
        for ax in axes:
            labels += [ax.get_xlabel(), ax.get_ylabel()]
            if ax.get_legend() is not None:
                legends += [t.get_text() for t in ax.get_legend().get_texts()]
    return [label for label in labels if label], legends


def test_series_without_times_is_plotted_against_the_step(tmp_path, saved_axes):
    path = _numbered_drop(tmp_path)
    assert all(not meshio.read(tmp_path / f"s_{k}.vtu").field_data for k in range(4))  # no stored time
    measure(path, "c", out=tmp_path / "out", contours=False)
    assert json.load(open(tmp_path / "out" / "manifest.json"))["series"]["time_origin"] == "index"
    labels, legends = _time_labels(saved_axes)
    assert STEP_LABEL in labels and TIME_LABEL not in labels
    assert not any(text.startswith("t = ") or ", t = " in text for text in legends)
    page = (tmp_path / "out" / "report.html").read_text(encoding="utf-8")
    assert "step number, first" in page and "time, first" not in page


def test_series_with_times_keeps_the_time_axis(tmp_path, saved_axes):
    measure(_numbered_drop(tmp_path, times=True), "c", out=tmp_path / "out", contours=False)
    labels, _ = _time_labels(saved_axes)
    assert TIME_LABEL in labels and STEP_LABEL not in labels


def test_snapshot_legend_and_column_label_of_a_numbered_series():
    segment = (np.array([[0.1, 0.1], [0.9, 0.9]]), np.array([[0, 1]]))
    figure = plot_interface_snapshots({0: segment, 3: segment}, bounds=np.array([[0, 0], [1, 1]]),
                                      times={0: 0.0, 3: 3.0}, time_origin="index")
    texts = [t.get_text() for ax in figure.axes if ax.get_legend() for t in ax.get_legend().get_texts()]
    assert texts == ["step 0", "step 3"]
    assert with_units("time", "time", "index") == STEP_LABEL
    assert with_units("time", "time", "file") == TIME_LABEL


def test_compare_of_numbered_series_plots_against_the_step(tmp_path, saved_axes):
    from phasegauge.run.compare import RunSpec, compare_runs

    path = _numbered_drop(tmp_path)
    compare_runs(RunSpec(path, "c", label="one"), RunSpec(path, "c", label="two"), out=tmp_path / "c")
    labels, _ = _time_labels(saved_axes)
    assert STEP_LABEL in labels and TIME_LABEL not in labels
