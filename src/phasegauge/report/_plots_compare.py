"""Figures of a comparison between two runs (matplotlib, Agg backend).

Every function returns a :class:`matplotlib.figure.Figure`; the caller saves
and closes it. Nothing here computes a metric that the analysis layer does
not: interfaces are the same marching-squares contours the shape comparison
measures.
"""

from __future__ import annotations

import numpy as np

from ..analysis._resample import SamplingGrid, common_grid, resample_to_grid
from ..analysis._shape_compare import interface_elements
from ..errors import OptionError

__all__ = ["plot_interface_overlay", "plot_metric_curves", "plot_metric_differences",
           "plot_shape_history", "plot_reference_check"]

_AXIS_NAMES = "xyz"


def _figure(**kwargs):
    import matplotlib

    matplotlib.use("Agg", force=False)
    from matplotlib.figure import Figure

    return Figure(**kwargs)


def _slice_grid(grid: SamplingGrid, normal: int, position: float | None) -> SamplingGrid:
    """A one-layer 3D grid on the plane ``axis[normal] = position`` (default the middle)."""
    lo, hi = grid.bounds[normal]
    pos = 0.5 * (lo + hi) if position is None else float(position)
    if not lo <= pos <= hi:
        raise OptionError(f"slice position {pos} lies outside the grid ({lo}, {hi})",
                          fix="give a position inside both runs' domains")
    h = grid.spacing[normal]
    bounds = list(grid.bounds)
    bounds[normal] = (pos - 0.5 * h, pos + 0.5 * h)
    shape = list(grid.shape)
    shape[normal] = 1
    return SamplingGrid(tuple(bounds), tuple(shape))


def plot_interface_overlay(mesh_a, c_point_a, mesh_b, c_point_b, *, level: float = 0.5,
                           grid: SamplingGrid | None = None, labels=("A", "B"), title: str = "",
                           slice_normal: int = 2, slice_position: float | None = None):
    """Both runs' interfaces ``c = level`` overlaid, with the mismatch region shaded.

    Parameters
    ----------
    mesh_a, c_point_a, mesh_b, c_point_b
        As for :func:`phasegauge.analysis.compare.shape_comparison`.
    level : float
    grid : SamplingGrid, optional
        Default :func:`common_grid` of the two meshes.
    labels : pair of str
    title : str
        E.g. the time shown.
    slice_normal : {0, 1, 2}
        3D only: the axis normal to the plotted slice (default z).
    slice_position : float, optional
        3D only: where the slice cuts that axis; default the middle.

    Returns
    -------
    matplotlib.figure.Figure
    """
    if grid is None:
        grid = common_grid(mesh_a, mesh_b)
    in_plane = [0, 1]
    plane_names = [_AXIS_NAMES[i] for i in mesh_a.plane_axes[:2]] if mesh_a.dimension == 2 else None
    if grid.dimension == 3:
        if slice_normal not in (0, 1, 2):
            raise OptionError(f"slice_normal must be 0, 1 or 2, found {slice_normal!r}", fix="2 cuts normal to z")
        grid = _slice_grid(grid, slice_normal, slice_position)
        in_plane = [d for d in range(3) if d != slice_normal]
        plane_names = [_AXIS_NAMES[d] for d in in_plane]
    a = resample_to_grid(mesh_a, c_point_a, grid)
    b = resample_to_grid(mesh_b, c_point_b, grid)
    plane_shape = tuple(grid.shape[d] for d in in_plane)
    plane = SamplingGrid(tuple(grid.bounds[d] for d in in_plane), plane_shape)
    a2, b2 = a.reshape(plane_shape), b.reshape(plane_shape)
    fig = _figure(figsize=(6.0, 5.5))
    ax = fig.add_subplot(1, 1, 1)
    valid = np.isfinite(a2) & np.isfinite(b2)
    mismatch = np.where(valid & ((a2 > level) ^ (b2 > level)), 1.0, np.nan)
    (x0, x1), (y0, y1) = plane.bounds
    ax.imshow(mismatch.T, origin="lower", extent=(x0, x1, y0, y1), cmap="Greys", vmin=0, vmax=2.5,
              interpolation="nearest", aspect="equal")
    for values, label, colour, style in ((a2, labels[0], "tab:blue", "-"), (b2, labels[1], "tab:red", "--")):
        seg = interface_elements(values, plane, level, valid=valid)
        if len(seg):
            xs = np.column_stack([seg[:, 0, 0], seg[:, 1, 0], np.full(len(seg), np.nan)]).ravel()
            ys = np.column_stack([seg[:, 0, 1], seg[:, 1, 1], np.full(len(seg), np.nan)]).ravel()
            ax.plot(xs, ys, style, color=colour, lw=1.4, label=label)
        else:
            ax.plot([], [], style, color=colour, label=f"{label} (no interface)")
    ax.set_xlim(x0, x1)
    ax.set_ylim(y0, y1)
    ax.set_xlabel(plane_names[0])
    ax.set_ylabel(plane_names[1])
    ax.legend(loc="upper right", fontsize=8)
    heading = title or f"interfaces c = {level:g}"
    ax.set_title(heading + " (shaded: phases differ)", fontsize=10)
    return fig


def _metrics_of(comparison, metrics) -> list[str]:
    available = [c[:-2] for c in comparison.columns if c.endswith("_a") and f"{c[:-2]}_b" in comparison.columns
                 and c not in ("step_a", "time_a")]
    if metrics is None:
        return available
    missing = [m for m in metrics if m not in available]
    if missing:
        raise OptionError(f"metrics {missing} are not in the comparison table",
                          fix=f"choose from {', '.join(available)}")
    return list(metrics)


def _grid_axes(fig, n: int):
    cols = min(3, max(n, 1))
    rows = int(np.ceil(max(n, 1) / cols))
    fig.set_size_inches(4.2 * cols, 3.0 * rows)
    return [fig.add_subplot(rows, cols, i + 1) for i in range(n)]


def plot_metric_curves(comparison, *, metrics=None, labels=("A", "B")):
    """Each metric of both runs over time (one panel per metric).

    Parameters
    ----------
    comparison : DataFrame
        From :func:`phasegauge.analysis.compare.compare_metrics`.
    metrics : list of str, optional
        Metric names (without suffix); default all.
    labels : pair of str

    Returns
    -------
    matplotlib.figure.Figure
    """
    names = _metrics_of(comparison, metrics)
    fig = _figure()
    t = comparison["time"].to_numpy(dtype=float)
    for ax, name in zip(_grid_axes(fig, len(names)), names):
        ax.plot(t, comparison[f"{name}_a"], "-o", ms=2.5, color="tab:blue", label=labels[0])
        ax.plot(t, comparison[f"{name}_b"], "--s", ms=2.5, color="tab:red", label=labels[1])
        ax.set_title(name, fontsize=9)
        ax.set_xlabel("time")
        ax.legend(fontsize=7)
    fig.tight_layout()
    return fig


def plot_metric_differences(comparison, *, metrics=None, relative: bool = True):
    """Differences A - B of each metric over time (relative to |B| by default).

    Returns
    -------
    matplotlib.figure.Figure
    """
    names = _metrics_of(comparison, metrics)
    suffix = "_rel_diff" if relative else "_diff"
    fig = _figure()
    t = comparison["time"].to_numpy(dtype=float)
    for ax, name in zip(_grid_axes(fig, len(names)), names):
        ax.axhline(0.0, color="0.6", lw=0.8)
        ax.plot(t, comparison[f"{name}{suffix}"], "-o", ms=2.5, color="tab:purple")
        ax.set_title(f"{name}: {'(A - B) / |B|' if relative else 'A - B'}", fontsize=9)
        ax.set_xlabel("time")
    fig.tight_layout()
    return fig


def plot_shape_history(shapes, *, columns=("mismatch_volume", "dice", "hausdorff", "mean_distance")):
    """Shape metrics over the paired times (one panel each).

    Parameters
    ----------
    shapes : DataFrame
        One row per paired time with ``time`` and the shape metric columns.

    Returns
    -------
    matplotlib.figure.Figure
    """
    cols = [c for c in columns if c in shapes.columns]
    if not cols:
        raise OptionError(f"none of {list(columns)} is in the shape table", fix="pass comparison.csv")
    fig = _figure()
    t = shapes["time"].to_numpy(dtype=float)
    for ax, name in zip(_grid_axes(fig, len(cols)), cols):
        ax.plot(t, shapes[name], "-o", ms=2.5, color="tab:green")
        ax.set_title(name, fontsize=9)
        ax.set_xlabel("time")
    fig.tight_layout()
    return fig


def plot_reference_check(run, checks, *, columns=None):
    """A run's history with the reference bands of a check drawn on it.

    Parameters
    ----------
    run : DataFrame
        The checked run table (``time`` and the checked columns).
    checks : DataFrame
        From :func:`phasegauge.analysis.references.check_against_table`.
    columns : list of str, optional
        Columns to draw; default those the checks name.

    Returns
    -------
    matplotlib.figure.Figure
    """
    named = [q.rpartition(":")[2] for q in checks["quantity"]]
    cols = list(dict.fromkeys(named)) if columns is None else list(columns)
    fig = _figure()
    for ax, col in zip(_grid_axes(fig, len(cols)), cols):
        ax.plot(run["time"], run[col], "-", color="tab:blue", lw=1.2)
        for _, row in checks[[n == col for n in named]].iterrows():
            kind = row["quantity"].rpartition(":")[0]
            colour = "tab:green" if row["verdict"] == "pass" else "tab:red"
            if kind.startswith("time_of_"):
                ax.axvspan(row["reference_low"], row["reference_high"], color=colour, alpha=0.15)
            elif np.isfinite(row["time"]):
                ax.errorbar([row["time"]], [row["reference"]],
                            yerr=[[row["reference"] - row["reference_low"]],
                                  [row["reference_high"] - row["reference"]]],
                            fmt="o", color=colour, ms=4, capsize=3)
            else:
                ax.axhspan(row["reference_low"], row["reference_high"], color=colour, alpha=0.15)
        ax.set_title(col, fontsize=9)
        ax.set_xlabel("time")
    fig.tight_layout()
    return fig
