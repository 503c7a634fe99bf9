"""The one figure factory of the report: a matplotlib Figure on the Agg canvas.

No pyplot and no window: figures are safe in worker processes and on machines
without a display; the caller saves them (:func:`._files.atomic_save_figure`).

Axis labels name the quantity and its unit. Mesh files carry no units, so lengths, areas and
volumes are "(mesh units)": the unit the mesh coordinates are written in (its square in 2D
areas, its cube in volumes), and times are "(run's time units)": the unit of the times the
series gives (file field data, XDMF or listing), or the step number when it gives none.
"""

from __future__ import annotations

__all__ = ["new_figure", "legend_outside", "TIME_LABEL", "in_mesh_units", "with_units"]

#: the x label of every plot over time
TIME_LABEL = "time (run's time units)"

# table columns measured in mesh length units (or their square / cube)
_MESH_UNIT_COLUMNS = frozenset({
    "phase_volume", "interface_size", "interface_width", "mismatch_volume", "hausdorff", "mean_distance",
    "equivalent_diameter", "volume", "characteristic_length", "mixing_length", "width_threshold_free",
    "width_second_moment", "width_profile_median", "width_profile_p90", "overshoot_volume",
})


def in_mesh_units(quantity: str) -> str:
    """``quantity`` as an axis label in mesh length units: ``'x'`` -> ``'x (mesh units)'``."""
    return f"{quantity} (mesh units)"


def with_units(label: str, column: str) -> str:
    """The axis label of table column ``column`` (shown as ``label``), with its unit where it has one.

    ``time`` gives :data:`TIME_LABEL`; lengths, areas and volumes get "(mesh units)"; other columns
    (counts, fractions, indices) are dimensionless and keep ``label``.
    """
    name = str(column).rpartition(":")[2]
    if name == "time":
        return TIME_LABEL
    if name in _MESH_UNIT_COLUMNS or name.startswith("centroid_"):
        return in_mesh_units(label)
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
