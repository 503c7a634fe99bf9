"""Every figure a run saves has words on both axes, with units where the mesh gives them.

The figures are caught where matplotlib saves them (``Figure.savefig``), so the check covers every
plot of a measure, compare and convergence run without listing them.
"""

import numpy as np
import pytest
from matplotlib.figure import Figure

from conftest import write_listing
from phasegauge import measure
from phasegauge.meshgen import grid_mesh, to_meshio
from phasegauge.report._canvas import STEP_LABEL, TIME_LABEL
from phasegauge.run.compare import RunSpec, compare_runs
from phasegauge.run.convergence import grid_convergence_run
from phasegauge.run.options import MeasureOptions


@pytest.fixture
def saved_axes(monkeypatch):
    """(file name or buffer, axes) of every figure saved while the test runs."""
    seen = []
    save = Figure.savefig

    def recording(figure, fname, *args, **kwargs):
        seen.append((str(fname), list(figure.axes)))
        return save(figure, fname, *args, **kwargs)

    monkeypatch.setattr(Figure, "savefig", recording)
    return seen


def _unlabelled(seen):
    """Axes drawn without an x label (on them or on an axis sharing their x) or without a y label."""
    missing = []
    for name, axes in seen:
        for ax in axes:
            if not ax.get_visible() or not ax.axison:
                continue
            colorbar = getattr(ax, "_colorbar", None)  # a colorbar's one axis carries its label
            if colorbar is not None:
                if not (ax.get_xlabel() or ax.get_ylabel()):
                    missing.append((name, "colorbar", "label"))
                continue
            shared = ax.get_shared_x_axes().get_siblings(ax)
            if not any(other.get_xlabel() for other in shared):
                missing.append((name, ax.get_title(), "x"))
            if not ax.get_ylabel():
                missing.append((name, ax.get_title(), "y"))
    return missing


def _discs(folder, prefix, kind, steps=3):
    mesh = grid_mesh((16, 16), kind=kind)
    x, y = mesh.cell_centroids[:, 0], mesh.cell_centroids[:, 1]
    for k in range(steps):
        c = 0.5 * (1 + np.tanh((0.2 - np.hypot(x - 0.3 - 0.1 * k, y - 0.5)) / 0.04))
        to_meshio(mesh, cell_data={"alpha": c}, field_data={"TimeValue": np.array([0.1 * k])}).write(
            folder / f"{prefix}_{k}.vtu")
    return str(folder / f"{prefix}_*.vtu")


def _labels(seen):
    return {label for _, axes in seen for ax in axes for label in (ax.get_xlabel(), ax.get_ylabel())}


def test_measure_figures_have_both_labels_and_units(tmp_path, saved_axes):
    _discs(tmp_path, "a", "quad", steps=4)
    # the steps' times in a listing (the files store none): a measured value with a time needs them
    (tmp_path / "a.steps").write_text("".join(f"{0.1 * k},a_{k}.vtu\n" for k in range(4)))
    measure(str(tmp_path / "a.steps"), "alpha", out=tmp_path / "m", section_axis="x", section_count=4,
            probes=(("mid", 0.5, 0.5, 0.0),), lines=(("across", 0.0, 0.5, 0.0, 1.0, 0.5, 0.0, 9),),
            measured=((0.5, 0.5, 0.0, 0.5, float("nan"), 0.1), (0.3, 0.5, 0.0, 1.0, 0.15, float("nan"))))
    assert len(saved_axes) >= 5
    assert _unlabelled(saved_axes) == []
    labels = _labels(saved_axes)
    assert {TIME_LABEL, "x (mesh units)", "y (mesh units)", "interface width (mesh units)",
            "distance along the line (mesh units)", "simulated", "position along x (mesh units)"} <= labels


def test_compare_figures_have_both_labels_and_units(tmp_path, saved_axes):
    a, b = _discs(tmp_path, "a", "quad"), _discs(tmp_path, "b", "triangle")
    compare_runs(RunSpec(a, "alpha", label="quads"), RunSpec(b, "alpha", label="triangles"), out=tmp_path / "c")
    assert len(saved_axes) >= 3
    assert _unlabelled(saved_axes) == []
    # the files store no times (meshio's VTU writer leaves the field data out): plotted against the step
    assert {STEP_LABEL, "x (mesh units)", "phase volume (mesh units)"} <= _labels(saved_axes)
    assert TIME_LABEL not in _labels(saved_axes)


def test_convergence_figure_has_both_labels(tmp_path, saved_axes):
    series = []
    for n in (24, 16, 10):
        mesh = grid_mesh((n, n), kind="quad")
        x = mesh.cell_centroids[:, 0]
        (tmp_path / f"n{n}").mkdir()
        series.append(write_listing(str(tmp_path / f"n{n}"), ((t, f"s_{k}.vtu", mesh, {"c": x ** 2 * (1 - t / 2)})
                                                             for k, t in enumerate((0.0, 0.1, 0.2)))))
    grid_convergence_run(*series, options=MeasureOptions(field="c", analyses=("conservation",)), out=tmp_path / "g")
    assert (tmp_path / "g" / "convergence.png").exists() and saved_axes
    assert _unlabelled(saved_axes) == []
    assert TIME_LABEL in _labels(saved_axes)
