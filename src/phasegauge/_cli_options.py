"""Options shared by the ``phasegauge`` commands and the helpers that turn their text into values.

``cli`` holds the commands; this module the option groups (measure, mixture), the hidden old
flags that still work with a warning, and the parsing of number lists, boxes and point files.
"""

from __future__ import annotations

import warnings

import click

from .errors import OldNameWarning


def _floats(text, what, count=None):
    from .errors import OptionError

    if text is None:
        return None
    try:
        values = tuple(float(v) for v in str(text).replace(";", ",").split(",") if v.strip())
    except ValueError:
        raise OptionError(f"{what} must be numbers separated by commas, found {text!r}",
                          fix="for example 0.1,0.2") from None
    if count is not None and len(values) != count:
        raise OptionError(f"{what} needs {count} numbers, found {len(values)}", fix="separate them with commas")
    return values


def _box(text):
    values = _floats(text, "--box")
    if values is None:
        return None
    from .errors import OptionError

    if len(values) not in (4, 6):
        raise OptionError(f"--box needs 4 (2D) or 6 (3D) numbers xmin,xmax,ymin,ymax[,zmin,zmax], found "
                          f"{len(values)}", fix="for example --box 0,1,0,0.5")
    return tuple(tuple(values[i:i + 2]) for i in range(0, len(values), 2))


_measure_options = (
    click.option("--field", "-f", required=True, help="Field mapped to the phase indicator c."),
    click.option("--range", "value_range", default="0,1", show_default=True,
                 help="Field values mapped to c = 0 and c = 1, as LO,HI (an order parameter: -1,1)."),
    click.option("--phase", type=click.Choice(["upper", "lower"]), default="upper", show_default=True,
                 help="Measure the phase where the field is high (upper) or low (lower)."),
    click.option("--level", type=float, default=0.5, show_default=True,
                 help="Indicator level of the interface and of droplets."),
    click.option("--velocity", default=None,
                 help="Velocity field (droplet velocities, tracking, flow-weighted sections, boundary flow), "
                      "or its 2 or 3 scalar components in x, y(, z) order: u.x,u.y."),
    click.option("--field-location", type=click.Choice(["cell", "point"]), default=None,
                 help="Which copy of a field written on cells and on points under one name to read "
                      "(default: the cell copy, the solver's own values)."),
)


#: options of a partially miscible mixture (measure)
_mixture_options = (
    click.option("--model", "model_file", default=None,
                 help="Mixture model file (TOML, see 'phasegauge equilibrium'): bulk compositions against its "
                      "binodal."),
    click.option("--temperature", type=float, default=None, help="Temperature of the run in K (with --model)."),
    click.option("--temperature-field", default=None, help="Field holding the temperature (instead of --temperature)."),
    click.option("--solute", default=None, help="Field of a solute's mole fraction distributed between the phases."),
    click.option("--solute-receiving", type=click.Choice(["rich", "lean"]), default="rich", show_default=True,
                 help="The phase the solute moves into."),
    click.option("--bulk-widths", type=float, default=1.0, show_default=True,
                 help="Bulk cells lie farther than this many interface widths from the contour."),
    click.option("--equilibrium-tolerance", type=float, default=0.01, show_default=True,
                 help="Gap to the binodal (mole fraction) below which the run is at equilibrium."),
    click.option("--capillary-length", type=float, default=None,
                 help="sigma v_m / (R T) in mesh length units: the Gibbs-Thomson shift of drops."),
)


#: how a series is read (measure and convergence alike)
_reading_options = (
    click.option("--sort-by-time", is_flag=True,
                 help="Order the steps by the times stored in their files, not by their names (default: refuse "
                      "a series whose times do not increase)."),
    click.option("--keep-3d", is_flag=True, help="Measure a mesh one cell thick as 3D (by default: per unit depth, "
                                                 "as 2D)."),
    click.option("--level-set", "level_set", is_flag=True,
                 help="The field is a level set (a signed distance, 0 on the interface; --phase picks the side "
                      "measured): volumes from the cut cells, its slope in place of widths."),
)


def _mixture_values(model_file=None, temperature=None, temperature_field=None, solute=None,
                    solute_receiving="rich", bulk_widths=1.0, equilibrium_tolerance=0.01,
                    capillary_length=None) -> dict:
    """MeasureOptions entries of a mixture run (none without --model, unless others are given alone)."""
    given = {"temperature": temperature, "temperature_field": temperature_field, "solute": solute,
             "capillary_length": capillary_length}
    values = {k: v for k, v in given.items() if v is not None}
    if model_file is None:
        return values  # a value without a model is refused by MeasureOptions
    return {"model": model_file, **values, "solute_receiving": solute_receiving, "bulk_widths": bulk_widths,
            "equilibrium_tolerance": equilibrium_tolerance}


def _old_flags(*flags):
    """Hidden old flags, each read as its new option with a warning.

    Each entry is ``(old flag, parameter of the new option, click type)``; put the
    decorator right above the command function.
    """
    import functools

    def wrap(f):
        @functools.wraps(f)
        def command(**kwargs):
            for flag, name, _ in flags:
                value = kwargs.pop("old_" + name)
                if value is not None:
                    new = "--" + name.replace("_", "-")
                    warnings.warn(OldNameWarning(f"{flag} is the old name of {new}; write {new} (the old name "
                                                 "will be removed)"), stacklevel=2)
                    kwargs[name] = value
            return f(**kwargs)

        for flag, name, kind in reversed(flags):
            command = click.option(flag, "old_" + name, type=kind, default=None, hidden=True)(command)
        return command
    return wrap


def _add(options):
    def wrap(f):
        for opt in reversed(options):
            f = opt(f)
        return f
    return wrap


def _command_line() -> dict:
    """The command line as typed (for the manifest)."""
    import shlex

    argv = click.get_current_context().meta.get("phasegauge.argv", [])
    return {"command_line": " ".join(shlex.quote(a) for a in ["phasegauge", *argv])}


def _point_options(probe_file, line_file, measured_file) -> dict:
    """MeasureOptions entries read from the probe, line and measured files that are given."""
    from .recipes import _point_options as read_point_files

    files = {"probes": probe_file, "lines": line_file, "measured": measured_file}
    return read_point_files({key: path for key, path in files.items() if path})
