"""The one figure factory of the report: a matplotlib Figure on the Agg canvas.

No pyplot and no window: figures are safe in worker processes and on machines
without a display; the caller saves them (:func:`._files.atomic_save_figure`).
"""

from __future__ import annotations

__all__ = ["new_figure"]


def new_figure(width: float = 6.4, height: float = 4.0):
    """A Figure of ``width`` x ``height`` inches with constrained layout, drawn on the Agg canvas.

    Returns
    -------
    matplotlib.figure.Figure
    """
    from matplotlib.backends.backend_agg import FigureCanvasAgg
    from matplotlib.figure import Figure

    figure = Figure(figsize=(width, height), layout="constrained")
    FigureCanvasAgg(figure)
    return figure
