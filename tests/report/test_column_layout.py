"""One-pass layout of one-column figures: everything each axes draws stays inside the figure.

The check is matplotlib's own measurement of the drawn figure (``Figure.get_tightbbox`` after a draw).
"""

import numpy as np

from phasegauge.report._canvas import legend_outside, lay_out_column, new_figure


def _column(rows):
    fig = new_figure(7.0, 5.0)
    axes = fig.subplots(rows, 1, sharex=True, squeeze=False)[:, 0]
    for k, ax in enumerate(axes):
        ax.plot(np.arange(20.0), 1e4 * np.sqrt(np.arange(20.0) + k), "-o", label=f"a long legend entry {k}")
        ax.set_ylabel("value (mesh units)")
        legend_outside(ax)
    axes[-1].set_xlabel("time (run's time units)")
    return fig, axes


def test_column_figures_fit_inside_the_figure():
    for rows in (1, 2, 3):
        fig, axes = _column(rows)
        assert lay_out_column(fig, 110)
        assert fig.get_layout_engine() is None
        fig.canvas.draw()
        renderer = fig.canvas.get_renderer()
        drawn = fig.get_tightbbox(renderer)  # in inches
        assert drawn.x0 >= 0 and drawn.y0 >= 0 and drawn.x1 <= 7.0 and drawn.y1 <= 5.0
        # rows do not overlap, top to bottom, and share the width
        boxes = [ax.get_tightbbox(renderer) for ax in axes]
        for upper, lower in zip(boxes, boxes[1:]):
            assert upper.y0 >= lower.y1
        assert len({round(ax.get_position().width, 9) for ax in axes}) == 1


def test_other_figures_keep_their_layout_engine():
    fig = new_figure()
    fig.subplots(1, 2)
    assert not lay_out_column(fig, 110) and fig.get_layout_engine() is not None
    fig = new_figure()
    ax = fig.add_subplot()
    ax.set_aspect("equal")
    assert not lay_out_column(fig, 110)
    fig = new_figure()
    fig.add_subplot()
    fig.suptitle("title")
    assert not lay_out_column(fig, 110)
