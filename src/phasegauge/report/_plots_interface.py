"""Plots of the interface: width over time and contour snapshots.

Figures are built on matplotlib's Agg canvas directly (no pyplot, no window),
so they work in worker processes and on machines without a display.
"""

from __future__ import annotations

import numpy as np

from ..errors import OptionError
from ._canvas import in_mesh_units, legend_outside, new_figure, time_label

__all__ = ["plot_interface_width", "plot_interface_snapshots", "plot_coarsening", "coarsened_surface"]


def plot_interface_width(steps_df, *, time_column: str = "time", title: str | None = None,
                         time_origin: str | None = None):
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
    time_origin : str, optional
        Where the series' times come from; ``index`` (no stored times) labels the axis ``step``.

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
    fig = new_figure(7.0, 5.0)
    top, bottom = fig.subplots(2, 1, sharex=True)
    labels = {"interface_width": "band 5-95 %", "width_threshold_free": "threshold-free",
              "width_second_moment": "second moment", "width_profile_median": "profile fit, median",
              "width_profile_p90": "profile fit, 90th pct."}
    styles = {"interface_width": "-o", "width_profile_p90": ":"}
    for name, label in labels.items():
        if name in steps_df.columns:
            top.plot(t, steps_df[name].to_numpy(dtype=float), styles.get(name, "--"), label=label,
                     markersize=3)
    top.set_ylabel(in_mesh_units("interface width"))
    legend_outside(top)
    top.grid(alpha=0.3)
    if "interface_width_cells" in steps_df.columns:
        bottom.plot(t, steps_df["interface_width_cells"].to_numpy(dtype=float), "-o", markersize=3,
                    color="C3")
    bottom.axhline(4.0 * np.log(19.0) / np.log(9.0), color="0.5", linestyle=":",
                   label="4 cells across 0.1 < c < 0.9")
    bottom.set_ylabel("width (cells)")
    bottom.set_xlabel(time_label(time_origin) if column == "time" else "step")
    legend_outside(bottom)
    bottom.grid(alpha=0.3)
    if title:
        fig.suptitle(title)
    return fig


def plot_interface_snapshots(interfaces_by_step, *, bounds, axis_names=("x", "y", "z"), times=None,
                             max_panels: int = 6, max_triangles: int = 2500, title: str | None = None,
                             time_origin: str | None = None):
    """Interfaces of several steps: overlaid in 2D; in 3D one panel per step, the surface in an orthographic view.

    Parameters
    ----------
    interfaces_by_step : dict of int to (points, elements)
        Per step the interface's points, shape (m, 2) in the mesh plane or
        (m, 3), and its elements, shape (k, 2) segments or (k, 3) triangles
        as indices into the points (see
        :func:`phasegauge.run._report_data.interface_snapshots`).
    bounds : array_like of shape (2, 2) or (2, 3)
        Lower and upper corner of the drawn region, in the points' axes.
    axis_names : sequence of str
        Names of the drawn axes.
    times : dict of int to float, optional
        Time of each step, for the labels (left out where ``time_origin`` is ``index``: the series
        stores no times, and a step's time is its number).
    max_panels : int
        At most this many steps are drawn, evenly chosen (first and last kept).
    max_triangles : int
        3D: triangles drawn per panel at most; a larger surface is drawn coarsened by vertex
        clustering (:func:`coarsened_surface`), closed as it was. The faces are one flat colour,
        so only the silhouette shows: 2500 (a clustering grid of about 50 cells per side, under 8
        pixels on a panel at 110 dpi) draws it as smooth as more, in about half the time of 5000.
    title : str, optional

    Returns
    -------
    matplotlib.figure.Figure

    Raises
    ------
    OptionError
        No interfaces, or ``max_panels`` < 1.
    """
    from matplotlib import colormaps
    from matplotlib.collections import LineCollection

    if not interfaces_by_step:
        raise OptionError("no interfaces to plot", fix="pass a dict of step -> (points, elements)")
    if int(max_panels) < 1:
        raise OptionError(f"max_panels must be at least 1, found {max_panels}", fix="for example 6")
    steps = sorted(interfaces_by_step)
    if len(steps) > max_panels:
        pick = np.unique(np.round(np.linspace(0, len(steps) - 1, int(max_panels))).astype(int))
        steps = [steps[i] for i in pick]
    times = times or {}

    def label(step):
        return f"step {step}" + (f", t = {times[step]:.4g}" if step in times and time_origin != "index" else "")

    lo, hi = np.asarray(bounds, dtype=float)
    if lo.size == 2:
        fig = new_figure(6.5, 6.0)
        ax = fig.subplots()
        # viridis from dark blue to teal (0.55): its greens and yellow are too light to read on white
        colours = [colormaps["viridis"](x) for x in np.linspace(0, 0.55, len(steps))]
        for colour, step in zip(colours, steps):
            points, elements = interfaces_by_step[step]
            ax.add_collection(LineCollection(np.asarray(points)[np.asarray(elements)], colors=[colour],
                                             linewidths=1.2, label=label(step)))
        ax.set_xlim(lo[0], hi[0])
        ax.set_ylim(lo[1], hi[1])
        ax.set_aspect("equal")
        ax.set_xlabel(in_mesh_units(axis_names[0]))
        ax.set_ylabel(in_mesh_units(axis_names[1]))
        legend_outside(ax)
    else:
        from ._plots_surface import draw_surface_in_box

        cols = 2 if len(steps) == 4 else min(3, len(steps))  # no empty panel for the usual 4 snapshots
        rows = int(np.ceil(len(steps) / cols))
        # one fixed orthographic view per panel on a plain axes (matplotlib's 3D axes cost more than
        # the surface), on fixed margins: each panel keeps its labels inside its own box
        fig = new_figure(3.8 * cols, 3.6 * rows, constrained=False)
        fig.subplots_adjust(left=0.01, right=0.99, bottom=0.01, top=0.95 if not title else 0.9, wspace=0.04,
                            hspace=0.1)
        for i, step in enumerate(steps):
            ax = fig.add_subplot(rows, cols, i + 1)
            points, elements = interfaces_by_step[step]
            if len(elements):
                points, elements = coarsened_surface(points, elements, max_triangles, bounds=(lo, hi))
            draw_surface_in_box(ax, points, elements, bounds=(lo, hi), axis_names=axis_names)
            ax.set_title(label(step), fontsize="small")
    if title:
        fig.suptitle(title)
    return fig


def plot_coarsening(steps_df, fit: dict | None = None, *, time_origin: str | None = None):
    """Characteristic lengths over time on log-log axes, with the fitted power law.

    Parameters
    ----------
    steps_df : pandas.DataFrame
        ``time`` and ``coarsening_length`` per step, and ``interface_spacing`` where measured.
    fit : dict, optional
        ``exponent``, ``exponent_stderr``, ``prefactor`` of L = a t^n and ``length``, the column it was
        fitted to (drawn as a line through that column's points; ``coarsening_length`` when not given).
    time_origin : str, optional
        ``index``: the steps store no times; the lengths are drawn against the step number on a
        linear axis, with no fit.

    Returns
    -------
    matplotlib.figure.Figure
    """
    if "coarsening_length" not in getattr(steps_df, "columns", ()):
        raise OptionError("the steps table has no 'coarsening_length' column", fix="measure with --coarsening")
    t = steps_df["time"].to_numpy(dtype=float)
    fig = new_figure()
    ax = fig.add_subplot(1, 1, 1)
    lengths = (("interface_spacing", "interface spacing, V / A", "full"),
               ("coarsening_length", "L = 2 pi / k1 (structure factor)", "none"))
    numbered = time_origin == "index"  # step numbers are no times: no log axis of them, no fit
    for column, label, fill in lengths:
        if column in steps_df.columns:
            L = steps_df[column].to_numpy(dtype=float)
            use = np.isfinite(t) & np.isfinite(L) & (t >= 0 if numbered else t > 0) & (L > 0)
            (ax.semilogy if numbered else ax.loglog)(t[use], L[use], "o", fillstyle=fill, label=label)
    fitted = (fit or {}).get("length") or "coarsening_length"
    L = steps_df[fitted].to_numpy(dtype=float) if fitted in steps_df.columns else np.zeros(0)
    use = np.isfinite(t) & np.isfinite(L) & (t > 0) & (L > 0) if L.size else np.zeros(0, dtype=bool)
    if fit and np.isfinite(fit.get("exponent", np.nan)) and use.any() and not numbered:
        tt = np.geomspace(t[use].min(), t[use].max(), 50)
        err = fit.get("exponent_stderr", np.nan)
        label = f"fit: n = {fit['exponent']:.3f}" + (f" ± {err:.3f}" if np.isfinite(err) else "")
        ax.loglog(tt, fit["prefactor"] * tt ** fit["exponent"], "-", label=label)
        ax.loglog(tt, fit["prefactor"] * tt[0] ** fit["exponent"] * (tt / tt[0]) ** (1 / 3), ":",
                  color="grey", label="n = 1/3 (Lifshitz-Slyozov)")
    ax.set_xlabel(time_label(time_origin))
    ax.set_ylabel(in_mesh_units("characteristic length"))
    ax.legend()
    return fig


def coarsened_surface(points, elements, max_triangles: int, *, bounds):
    """A triangulated surface with at most ``max_triangles`` triangles, by vertex clustering.

    The points are snapped to the cells of a grid over ``bounds`` (each cluster becomes the mean
    of its points), triangles whose corners fall in fewer than three cells are dropped, and
    repeated triangles kept once; the grid is made coarser until the count fits. The surface stays
    closed where it was (no holes, unlike dropping every k-th triangle); features smaller than a
    grid cell are lost, which at the drawn size is below a few pixels.

    Parameters
    ----------
    points : array_like of shape (m, 3)
    elements : array_like of shape (k, 3), int
    max_triangles : int
    bounds : (array_like of shape (3,), array_like of shape (3,))
        Lower and upper corner of the drawn region.

    Returns
    -------
    points : ndarray of shape (m', 3)
    elements : ndarray of shape (k', 3), k' <= max_triangles (the input when it already fits)

    References
    ----------
    Rossignac, J. and Borrel, P. (1993), Multi-resolution 3D approximations for rendering complex
    scenes, in Modeling in Computer Graphics, Springer, pp. 455-465.
    """
    points, elements = np.asarray(points, dtype=float), np.asarray(elements)
    if len(elements) <= max_triangles:
        return points, elements
    lo, hi = (np.asarray(b, dtype=float) for b in bounds)
    extent = np.maximum(hi - lo, 1e-300)
    # a surface of k triangles on a grid of n cells per side has about k ~ n^2: start near the target
    n = max(2, int(np.sqrt(max_triangles)))
    while True:
        cell = np.clip(((points - lo) / extent * n).astype(np.int64), 0, n - 1)
        key = (cell[:, 0] * n + cell[:, 1]) * n + cell[:, 2]
        which, clusters = _ranks(key, n ** 3)
        tris = which[elements]
        keep = (tris[:, 0] != tris[:, 1]) & (tris[:, 1] != tris[:, 2]) & (tris[:, 0] != tris[:, 2])
        tris = _unique_rows(np.sort(tris[keep], axis=1), clusters)
        if len(tris) <= max_triangles or n <= 2:
            break
        n = max(2, int(n * 0.8))
    count = np.bincount(which, minlength=clusters).astype(float)
    centres = np.stack([np.bincount(which, weights=points[:, j], minlength=clusters)
                        for j in range(points.shape[1])], axis=1) / count[:, None]
    return centres, tris[:max_triangles]


def _ranks(key, size: int):
    """The rank of each of ``key`` (integers in [0, size)) among its distinct values, and their number.

    As ``np.unique(key, return_inverse=True)``; by counting over the ``size`` possible values, without
    a sort, when they are not many more than the keys.
    """
    if size > 4 * key.size + (1 << 16):
        clusters, which = np.unique(key, return_inverse=True)
        return which.reshape(-1), clusters.size
    present = np.bincount(key, minlength=size) > 0
    rank = np.cumsum(present) - 1
    return rank[key], int(present.sum())


def _unique_rows(tris, count: int):
    """The distinct rows of ``tris`` (k, 3) of integers in [0, count), in lexicographic order.

    As ``np.unique(tris, axis=0)``: each row packed into one integer (base ``count``) while that fits
    in 63 bits, whose order is the rows' lexicographic order.
    """
    if len(tris) == 0 or count ** 3 >= 1 << 62:
        return np.unique(tris, axis=0)
    base = np.int64(count)
    packed = np.unique((tris[:, 0].astype(np.int64) * base + tris[:, 1]) * base + tris[:, 2])
    return np.stack([packed // (base * base), packed // base % base, packed % base], axis=1).astype(tris.dtype)
