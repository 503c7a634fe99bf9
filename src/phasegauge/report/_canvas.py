"""The one figure factory of the report: a matplotlib Figure on the Agg canvas.

No pyplot and no window: figures are safe in worker processes and on machines
without a display; the caller saves them (:func:`._files.atomic_save_figure`).
"""

from __future__ import annotations

__all__ = ["new_figure", "legend_outside"]


def new_figure(width: float = 6.4, height: float = 4.0, *, constrained: bool = True):
    """A Figure of ``width`` x ``height`` inches with constrained layout, drawn on the Agg canvas.

    With ``constrained=False`` the figure has no layout engine: the caller places the axes
    (``subplots_adjust``), as for 3D panels, whose layout matplotlib computes slowly.

    Returns
    -------
    matplotlib.figure.Figure
    """
    from matplotlib.backends.backend_agg import FigureCanvasAgg
    from matplotlib.figure import Figure

    figure = Figure(figsize=(width, height), layout="constrained" if constrained else None)
    FigureCanvasAgg(figure)
    return figure


def legend_outside(ax, **options):
    """The legend of ``ax`` to the right of its plotting area, where it covers no data."""
    return ax.legend(fontsize="small", loc="upper left", bbox_to_anchor=(1.02, 1.0), borderaxespad=0.0, **options)
