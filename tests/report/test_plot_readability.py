"""Every report plot has a y label, its legend beside the data, and snapshot colours readable on white."""

import numpy as np

from phasegauge import measure
from phasegauge.meshgen import grid_mesh, to_meshio
from phasegauge.report._plots import measure_figures
from phasegauge.report._plots_interface import plot_interface_snapshots


def _contrast_on_white(rgba):
    """WCAG 2.1 contrast ratio of a colour against white (relative luminance, sRGB)."""
    channel = [c / 12.92 if c <= 0.03928 else ((c + 0.055) / 1.055) ** 2.4 for c in rgba[:3]]
    luminance = 0.2126 * channel[0] + 0.7152 * channel[1] + 0.0722 * channel[2]
    return 1.05 / (luminance + 0.05)


def test_every_plot_has_a_y_label_and_a_legend_off_the_data(tmp_path):
    mesh = grid_mesh((16, 16), kind="quad")
    x, y = mesh.cell_centroids[:, 0], mesh.cell_centroids[:, 1]
    lines = []
    for k in range(4):
        c = 0.5 * (1 + np.tanh((0.2 - np.hypot(x - 0.3 - 0.1 * k, y - 0.5)) / 0.04))
        to_meshio(mesh, cell_data={"alpha": c}).write(tmp_path / f"s_{k}.vtu")
        lines.append(f"{0.5 * k},s_{k}.vtu")
    (tmp_path / "run.steps").write_text("\n".join(lines) + "\n")
    result = measure(str(tmp_path / "run.steps"), "alpha", section_axis="x", section_count=4)
    figures = measure_figures(result, None)
    assert len(figures) >= 5
    for stem, _, figure in figures:
        figure.canvas.draw()
        for ax in figure.axes:
            if not ax.has_data():
                continue
            assert ax.get_ylabel(), f"{stem}: no y label"
            legend = ax.get_legend()
            if legend is not None:
                box, area = legend.get_window_extent(), ax.get_window_extent()
                assert box.x0 >= area.x1 or not box.overlaps(area), f"{stem}: legend over the data"


def test_last_snapshot_colour_is_readable_on_white():
    square = (np.array([[0, 0], [1, 0], [1, 1], [0, 1.0]]), np.array([[0, 1], [1, 2], [2, 3], [3, 0]]))
    figure = plot_interface_snapshots({0: square, 1: square, 2: square, 3: square}, bounds=((0, 0), (1, 1)))
    colours = [collection.get_edgecolor()[0] for collection in figure.axes[0].collections]
    # WCAG 2.1 asks 3:1 for graphical objects against their background
    assert min(_contrast_on_white(c) for c in colours) >= 3.0


def test_3d_snapshots_have_axis_labels_and_no_empty_panel():
    tetra = (np.array([[0, 0, 0], [1, 0, 0], [0, 1, 0], [0, 0, 1.0]]), np.array([[0, 1, 2], [0, 1, 3]]))
    figure = plot_interface_snapshots({k: tetra for k in range(4)}, bounds=((0, 0, 0), (1, 1, 1)))
    assert len(figure.axes) == 4
    rows, cols = figure.axes[0].get_subplotspec().get_gridspec().get_geometry()
    assert rows * cols == 4
    # the panels are plain axes showing a fixed view: each names the three axes with their unit
    for ax in figure.axes:
        texts = {text.get_text() for text in ax.texts}
        assert {"x (mesh units)", "y (mesh units)", "z (mesh units)"} <= texts
