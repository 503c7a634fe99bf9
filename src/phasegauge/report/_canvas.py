"""The one figure factory of the report: a matplotlib Figure on the Agg canvas.

No pyplot and no window: figures are safe in worker processes and on machines
without a display; the caller saves them (:func:`._files.atomic_save_figure`).

Axis labels name the quantity and its unit. Mesh files carry no units, so lengths, areas and
volumes are "(mesh units)": the unit the mesh coordinates are written in (its square in 2D
areas, its cube in volumes), and times are "(run's time units)": the unit of the times the
series gives (file field data, XDMF or listing), or the step number when it gives none.
"""

from __future__ import annotations

__all__ = ["new_figure", "legend_outside", "lay_out_column", "sparse_ticks", "TIME_LABEL", "STEP_LABEL", "time_label",
           "time_words", "in_mesh_units", "with_units", "shared_time_origin"]

#: the x label of every plot over time
TIME_LABEL = "time (run's time units)"

#: the x label of a plot over the steps of a series that stores no times (its times are step numbers)
STEP_LABEL = "step"


def time_label(time_origin: str | None = None) -> str:
    """The label of a time axis: :data:`STEP_LABEL` for a series whose time origin is ``index`` (it
    stores no times, so its times are the step numbers), both for runs some of which store none
    (``mixed``: :func:`shared_time_origin`), else :data:`TIME_LABEL`."""
    if time_origin == "mixed":
        return f"{TIME_LABEL} or {STEP_LABEL}"
    return STEP_LABEL if time_origin == "index" else TIME_LABEL


def shared_time_origin(origins) -> str:
    """The time origin of several runs drawn on one axis: ``index`` where every run stores no times,
    ``mixed`` where some do and some do not, else "" (every run's times are its own)."""
    parts = [str(o or "").split("+") for o in origins]  # a run's origins joined by '+' (measured_time_origin)
    if parts and all(p == ["index"] for p in parts):
        return "index"
    return "mixed" if any("index" in p for p in parts) else ""


def time_words(value: float, time_origin: str | None = None) -> str:
    """A legend's words for one time: ``t = 0.25``, or ``step 3`` where the series stores no times."""
    return f"step {value:g}" if time_origin == "index" else f"t = {value:g}"


# table columns measured in mesh length units (or their square / cube)
_MESH_UNIT_COLUMNS = frozenset({
    "phase_volume", "interface_size", "interface_width", "mismatch_volume", "hausdorff", "mean_distance",
    "equivalent_diameter", "volume", "characteristic_length", "mixing_length", "width_threshold_free",
    "width_second_moment", "width_profile_median", "width_profile_p90", "overshoot_volume",
})


#: table columns that are diffusivities: length squared per unit time
_DIFFUSIVITY_COLUMNS = frozenset({"D_num", "D_num_stderr"})


def in_mesh_units(quantity: str) -> str:
    """``quantity`` as an axis label in mesh length units: ``'x'`` -> ``'x (mesh units)'``."""
    return f"{quantity} (mesh units)"


def with_units(label: str, column: str, time_origin: str | None = None) -> str:
    """The axis label of table column ``column`` (shown as ``label``), with its unit where it has one.

    ``time`` gives :func:`time_label` of ``time_origin`` (``step`` where the series stores no times);
    lengths, areas and volumes get "(mesh units)"; diffusivities (``D_num``) "(mesh units²/run's time
    units)", per step where the series stores no times (both words for ``mixed`` runs); other columns
    (counts, fractions, indices) are dimensionless and keep ``label``.
    """
    name = str(column).rpartition(":")[2]
    if name == "time":
        return time_label(time_origin)
    if name in _MESH_UNIT_COLUMNS or name.startswith("centroid_"):
        return in_mesh_units(label)
    if name in _DIFFUSIVITY_COLUMNS:
        per = {"index": "step", "mixed": "run's time units or step"}.get(time_origin, "run's time units")
        return f"{label} (mesh units²/{per})"
    return label


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


def sparse_ticks(figure, *, bins: int = 5) -> None:
    """At most about ``bins`` + 1 labelled ticks on every linear axis that has matplotlib's automatic ticks, fixed.

    matplotlib fits as many ticks as the axis length allows (eight or nine on the report's time
    axes); each is a set of lines and a label to build and draw, the largest cost of a plain plot.
    Five intervals at the same round steps (1, 2, 2.5, 5, 10) read as well. The locations are
    chosen once, from the axis's final limits, and only those inside the limits are kept (a
    :class:`~matplotlib.ticker.FixedLocator`): the automatic locator also returns one location
    beyond each end, for which matplotlib builds a tick it never draws. An axis asked for whole
    numbers (``integer=True``) keeps whole-number ticks. Axes with ticks of their own
    (logarithmic, fixed, categories) and 3D axes keep them. Call it when the figure's data and
    limits are final (as :func:`._files.atomic_save_figure` does).
    """
    import numpy as np
    from matplotlib.ticker import AutoLocator, FixedLocator

    for ax in figure.axes:
        if ax.name != "rectilinear":
            continue
        for axis in (ax.xaxis, ax.yaxis):
            locator = axis.get_major_locator()  # shared axes share it: the first sets both
            if type(locator) is not AutoLocator:
                continue
            low, high = sorted(float(v) for v in axis.get_view_interval())
            span = high - low
            if not (np.isfinite(span) and span > 0):
                continue
            locator.set_params(nbins=bins, steps=[1, 2, 2.5, 5, 10])
            locations = np.asarray(locator.tick_values(low, high), dtype=float)
            inside = locations[(locations >= low - 1e-9 * span) & (locations <= high + 1e-9 * span)]
            axis.set_major_locator(FixedLocator(inside))


#: room around the figure's edge and between rows, in inches (constrained layout's default padding)
_PAD_INCHES = 3 / 72


def lay_out_column(figure, dpi: float) -> bool:
    """Place the axes of a one-column figure from one measurement of what each draws outside its box.

    Each axes' tight box (tick labels, axis labels, title, a legend outside) is measured once at
    ``dpi``; the axes are then set so every row's box fits the figure with a padding of 3 points,
    the rows of equal height. Constrained layout does the same measurement twice (its second pass
    refines after the tick labels moved); one pass is enough where the boxes change little when the
    axes grow, as for the report's time plots. Returns False, changing nothing, for any other figure:
    more than one column, fixed aspect, 3D or colour-bar axes, figure-level text or legends, or
    rows that would not fit.

    Parameters
    ----------
    figure : matplotlib.figure.Figure
    dpi : float
        The resolution the figure will be saved at (text sizes in pixels depend on it).

    Returns
    -------
    bool
        True when the axes were placed (the figure's layout engine is then removed).
    """
    axes = list(figure.axes)
    specs = [ax.get_subplotspec() for ax in axes]
    if (not axes or len(axes) > 4 or figure.texts or figure.legends or getattr(figure, "_suptitle", None)
            or any(spec is None for spec in specs)):
        return False
    grid = specs[0].get_gridspec()
    if grid.ncols != 1 or any(spec.get_gridspec() is not grid for spec in specs):
        return False
    if any(ax.name != "rectilinear" or ax.get_aspect() != "auto" or getattr(ax, "_colorbar", None) is not None
           for ax in axes):
        return False
    figure.set_dpi(dpi)
    renderer = figure.canvas.get_renderer()
    width, height = figure.bbox.width, figure.bbox.height
    rows = {}
    for ax, spec in zip(axes, specs):
        rows.setdefault((spec.rowspan.start, spec.rowspan.stop), []).append(ax)
    if len(rows) != len({span[0] for span in rows}):  # two row spans starting on the same row overlap
        return False
    left = right = 0.0
    tops, bottoms = [], []
    from matplotlib.spines import Spine

    for span in sorted(rows):
        top = bottom = 0.0
        for ax in rows[span]:
            # the spines lie on the axes' edge (their ticks inside the tick labels' reach): measuring
            # each (with its ticks) only adds half a line width, well within the padding
            extra = [artist for artist in ax.get_default_bbox_extra_artists() if not isinstance(artist, Spine)]
            tight = ax.get_tightbbox(renderer, bbox_extra_artists=extra)
            box = ax.get_position().transformed(figure.transFigure)
            left, right = max(left, box.x0 - tight.x0), max(right, tight.x1 - box.x1)
            top, bottom = max(top, tight.y1 - box.y1), max(bottom, box.y0 - tight.y0)
        tops.append(top)
        bottoms.append(bottom)
    pad = _PAD_INCHES * dpi
    x0, x1 = left + pad, width - right - pad
    row_height = (height - sum(tops) - sum(bottoms) - 2 * pad * len(rows)) / len(rows)
    if x1 - x0 < 0.3 * width or row_height < 0.15 * height:
        return False
    y = height - pad
    for span, top, bottom in zip(sorted(rows), tops, bottoms):
        y -= top
        for ax in rows[span]:
            ax.set_position([x0 / width, (y - row_height) / height, (x1 - x0) / width, row_height / height])
        y -= row_height + bottom + 2 * pad
    figure.set_layout_engine(None)
    return True
