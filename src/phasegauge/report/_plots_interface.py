"""Plots of the interface: width over time and contour snapshots.

Figures are built on matplotlib's Agg canvas directly (no pyplot, no window),
so they work in worker processes and on machines without a display.
"""

from __future__ import annotations

import numpy as np

from ..errors import OptionError

__all__ = ["plot_interface_width", "plot_interface_snapshots"]


def _figure(width: float, height: float):
    from matplotlib.backends.backend_agg import FigureCanvasAgg
    from matplotlib.figure import Figure

    fig = Figure(figsize=(width, height), layout="constrained")
    FigureCanvasAgg(fig)
    return fig


def plot_interface_width(steps_df, *, time_column: str = "time", title: str | None = None):
    """Interface width over time, in length units and in cells.

    Parameters
    ----------
    steps_df : pandas.DataFrame
        One row per step with ``interface_width`` (length) and
        ``interface_width_cells``; optional ``width_threshold_free``,
        ``width_second_moment``, ``width_profile_median`` and
        ``width_profile_p90`` are drawn beside it.
    time_column : str
        Column for the horizontal axis (``time``, else ``step`` is used).
    title : str, optional

    Returns
    -------
    matplotlib.figure.Figure
        Two panels sharing the time axis.

    Raises
    ------
    OptionError
        No ``interface_width`` column.
    """
    if "interface_width" not in getattr(steps_df, "columns", ()):
        raise OptionError("the steps table has no 'interface_width' column",
                          fix="pass the table of interface_metrics results per step")
    column = time_column if time_column in steps_df.columns else (
        "step" if "step" in steps_df.columns else None)
    t = steps_df[column].to_numpy(dtype=float) if column else np.arange(len(steps_df), dtype=float)
    fig = _figure(7.0, 5.0)
    top, bottom = fig.subplots(2, 1, sharex=True)
    labels = {"interface_width": "band 5-95 %", "width_threshold_free": "threshold-free",
              "width_second_moment": "second moment", "width_profile_median": "profile fit, median",
              "width_profile_p90": "profile fit, 90th pct."}
    styles = {"interface_width": "-o", "width_profile_p90": ":"}
    for name, label in labels.items():
        if name in steps_df.columns:
            top.plot(t, steps_df[name].to_numpy(dtype=float), styles.get(name, "--"), label=label,
                     markersize=3)
    top.set_ylabel("width (length)")
    top.legend(fontsize="small")
    top.grid(alpha=0.3)
    if "interface_width_cells" in steps_df.columns:
        bottom.plot(t, steps_df["interface_width_cells"].to_numpy(dtype=float), "-o", markersize=3,
                    color="C3")
    bottom.axhline(4.0 * np.log(19.0) / np.log(9.0), color="0.5", linestyle=":",
                   label="4 cells across 0.1 < c < 0.9")
    bottom.set_ylabel("width (cells)")
    bottom.set_xlabel(column or "step")
    bottom.legend(fontsize="small")
    bottom.grid(alpha=0.3)
    if title:
        fig.suptitle(title)
    return fig


def plot_interface_snapshots(mesh, contours_by_step, *, times=None, max_panels: int = 6,
                             max_triangles: int = 20000, title: str | None = None):
    """Contours of several steps: overlaid in 2D, one 3D panel per step in 3D.

    Parameters
    ----------
    mesh : Mesh
        The mesh (its bounds frame the plot).
    contours_by_step : dict of int to Contour
        Contours keyed by step.
    times : dict of int to float, optional
        Time of each step, for the labels.
    max_panels : int
        At most this many steps are drawn, evenly chosen (first and last kept).
    max_triangles : int
        3D: triangles drawn per panel at most (evenly strided).
    title : str, optional

    Returns
    -------
    matplotlib.figure.Figure

    Raises
    ------
    OptionError
        No contours, or ``max_panels`` < 1.
    """
    from matplotlib import colormaps
    from matplotlib.collections import LineCollection

    if not contours_by_step:
        raise OptionError("no contours to plot", fix="pass a dict of step -> Contour")
    if int(max_panels) < 1:
        raise OptionError(f"max_panels must be at least 1, found {max_panels}", fix="for example 6")
    steps = sorted(contours_by_step)
    if len(steps) > max_panels:
        pick = np.unique(np.round(np.linspace(0, len(steps) - 1, int(max_panels))).astype(int))
        steps = [steps[i] for i in pick]
    times = times or {}

    def label(step):
        return f"step {step}" + (f", t = {times[step]:.4g}" if step in times else "")

    lo, hi = mesh.bounds
    if mesh.dimension == 2:
        a, b = mesh.plane_axes
        fig = _figure(6.5, 6.0)
        ax = fig.subplots()
        colours = [colormaps["viridis"](x) for x in np.linspace(0, 1, len(steps))]
        for colour, step in zip(colours, steps):
            contour = contours_by_step[step]
            segs = contour.points[contour.elements][:, :, [a, b]] if contour.n_elements else np.zeros((0, 2, 2))
            ax.add_collection(LineCollection(segs, colors=[colour], linewidths=1.2, label=label(step)))
        ax.set_xlim(lo[a], hi[a])
        ax.set_ylim(lo[b], hi[b])
        ax.set_aspect("equal")
        ax.set_xlabel("xyz"[a])
        ax.set_ylabel("xyz"[b])
        ax.legend(fontsize="small", loc="upper right")
    else:
        from mpl_toolkits.mplot3d.art3d import Poly3DCollection

        cols = min(3, len(steps))
        rows = int(np.ceil(len(steps) / cols))
        fig = _figure(4.0 * cols, 3.8 * rows)
        for i, step in enumerate(steps):
            ax = fig.add_subplot(rows, cols, i + 1, projection="3d")
            contour = contours_by_step[step]
            if contour.n_elements:
                stride = max(1, int(np.ceil(contour.n_elements / max_triangles)))
                tris = contour.points[contour.elements[::stride]]
                ax.add_collection3d(Poly3DCollection(tris, facecolor="C0", edgecolor="none", alpha=0.8))
            ax.set_xlim(lo[0], hi[0])
            ax.set_ylim(lo[1], hi[1])
            ax.set_zlim(lo[2], hi[2])
            ax.set_title(label(step), fontsize="small")
    if title:
        fig.suptitle(title)
    return fig
