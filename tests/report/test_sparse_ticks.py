"""Fixed sparse ticks (``_canvas.sparse_ticks``): the locations matplotlib's own MaxNLocator picks
for the axis's final limits, only those inside them, and whole numbers where the axis asked for them."""

import numpy as np
from matplotlib.ticker import FixedLocator, LogLocator, MaxNLocator

from phasegauge.report._canvas import new_figure, sparse_ticks
from phasegauge.report._files import atomic_save_figure


def test_ticks_are_matplotlibs_locations_inside_the_limits(tmp_path):
    fig = new_figure(4.0, 3.0)
    ax = fig.add_subplot()
    ax.plot([0.0, 19.0], [-0.168, 0.0])
    low, high = ax.get_ylim()
    sparse_ticks(fig)
    locator = ax.yaxis.get_major_locator()
    assert isinstance(locator, FixedLocator)
    # matplotlib's MaxNLocator at the same settings, then clipped to the limits by hand
    expected = MaxNLocator(nbins=5, steps=[1, 2, 2.5, 5, 10]).tick_values(low, high)
    expected = expected[(expected >= low) & (expected <= high)]
    np.testing.assert_allclose(locator(), expected)
    assert len(ax.yaxis.get_major_ticks()) == len(expected)  # no tick built beyond the ends
    atomic_save_figure(tmp_path / "plot.png", fig)
    assert ax.get_ylim() == (low, high)  # fixing the ticks leaves the limits alone


def test_an_axis_asked_for_whole_numbers_keeps_them():
    fig = new_figure(4.0, 3.0)
    ax = fig.add_subplot()
    ax.step([0, 6, 19], [3, 2, 2], where="post")  # a droplet count: 2 and 3 only
    ax.yaxis.get_major_locator().set_params(integer=True)
    sparse_ticks(fig)
    locations = ax.yaxis.get_major_locator()()
    assert len(locations) and np.all(locations == np.round(locations))


def test_shared_and_logarithmic_axes():
    fig = new_figure(4.0, 4.0)
    top, bottom = fig.subplots(2, 1, sharex=True)
    top.plot([0, 10], [1, 2])
    bottom.plot([0, 10], [1, 1000])
    bottom.set_yscale("log")
    low, high = top.get_xlim()
    automatic = top.get_xticks()  # matplotlib's own ticks before: more, and one beyond each end
    sparse_ticks(fig)
    # the shared x axis: matplotlib's MaxNLocator at the same settings for the shared limits, clipped
    # by hand, on both axes (the second one's locator is the first's, set once)
    expected = MaxNLocator(nbins=5, steps=[1, 2, 2.5, 5, 10]).tick_values(low, high)
    expected = expected[(expected >= low) & (expected <= high)]
    assert len(expected) < len(automatic)
    for ax in (top, bottom):
        assert isinstance(ax.xaxis.get_major_locator(), FixedLocator)
        np.testing.assert_allclose(ax.get_xticks(), expected)
        assert ax.get_xlim() == (low, high)
    assert isinstance(bottom.yaxis.get_major_locator(), LogLocator)
