"""The ``phasegauge`` command line.

Only this module turns errors into one line on stderr and an exit status:
2 for bad input, 1 for a failure inside. ``--debug`` shows the traceback.
Heavy libraries are imported inside the commands, so ``--help`` starts fast.
"""

from __future__ import annotations

import json
import os
import sys
import warnings

import click

from . import __version__
from ._cli_options import (_add, _box, _command_line, _floats, _measure_options, _mixture_options, _mixture_values,
                           _old_flags, _point_options, _reading_options)
from .errors import PhasegaugeError, PhasegaugeWarning, numbers_masked


class _Group(click.Group):
    """Click group that reports errors as one line."""

    def parse_args(self, ctx, args):
        ctx.meta["phasegauge.argv"] = list(args)  # the command line as typed, for the manifest
        if "--debug" in args[1:]:  # accepted after the subcommand too
            args = ["--debug"] + [a for a in args if a != "--debug"]
        return super().parse_args(ctx, args)

    def invoke(self, ctx):
        debug = bool(ctx.params.get("debug"))
        previous = _stop_on_sigterm()
        try:
            return super().invoke(ctx)
        except PhasegaugeError as err:
            if debug:
                raise
            click.echo(f"phasegauge: error: {err.one_line()}", err=True)
            ctx.exit(err.exit_status)
        except (click.exceptions.Exit, click.exceptions.Abort, click.ClickException):
            raise
        except BrokenPipeError:
            # the reader of the output went away (``| head``): nothing more can be shown; stdout is
            # pointed at the null device so Python's own flush at exit does not fail again (the
            # way the Python documentation's note on SIGPIPE gives), and the status is a failure
            devnull = os.open(os.devnull, os.O_WRONLY)
            os.dup2(devnull, sys.stdout.fileno())
            ctx.exit(1)
        except KeyboardInterrupt:
            hint = "; rerun with --resume to finish" if ctx.invoked_subcommand in ("measure", "run") else ""
            click.echo(f"phasegauge: interrupted{hint}", err=True)
            ctx.exit(130)
        except Exception as exc:  # a failure inside the tool
            if debug:
                raise
            text = " ".join(str(exc).split())[:300]
            click.echo(f"phasegauge: internal error: {type(exc).__name__}: {text}; rerun with --debug "
                       "for the traceback and report it", err=True)
            ctx.exit(1)
        finally:
            _restore_sigterm(previous)


def _interrupt(signum, frame):
    raise KeyboardInterrupt(f"signal {signum}")


def _stop_on_sigterm():
    """SIGTERM (what ``timeout``, batch schedulers and service managers send) stops a run as Ctrl-C
    does: workers are ended, finished steps stay cached, and the exit status and ``--resume`` hint
    are those of an interrupt."""
    import signal
    import threading

    if threading.current_thread() is threading.main_thread():
        return signal.signal(signal.SIGTERM, _interrupt)
    return None


def _restore_sigterm(previous) -> None:
    import signal

    if previous is not None:
        signal.signal(signal.SIGTERM, previous)


class _WarningPrinter:
    """Print warnings as one line each on stderr; a repeat of the same kind is printed once.

    Warnings from other libraries (numpy's "invalid value" and the like) are
    not actionable for the user and only shown with ``--debug``.
    """

    def __init__(self, debug: bool):
        self.debug = debug
        self.seen = set()

    def __call__(self, message, category, filename, lineno, file=None, line=None):
        text = " ".join(str(message).split())
        if not issubclass(category, PhasegaugeWarning):
            if not self.debug:
                return
            text = f"{category.__name__}: {text} ({os.path.basename(filename)}:{lineno})"
        # numbers masked, but not in a campaign run's label (``run q0.5`` and ``run q2`` are two runs; the
        # files after it are masked with the text, so one warning from several files of a run is said once)
        where = message.where if isinstance(message, PhasegaugeWarning) else ""
        label = where.partition(",")[0] if where.startswith("run ") else ""
        key = (category, label, numbers_masked(text))
        if key in self.seen:
            return
        self.seen.add(key)
        click.echo(f"phasegauge: warning: {text}", err=True)


@click.group(cls=_Group, context_settings={"help_option_names": ["-h", "--help"]})
@click.version_option(__version__, prog_name="phasegauge")
@click.option("--debug", is_flag=True, help="Show the full traceback of an error.")
@click.pass_context
def main(ctx, debug):
    """Measure interfaces, droplets, mixing and conservation in two-phase simulation output."""
    # numpy's madvise of huge pages (its documented switch NUMPY_MADVISE_HUGEPAGE, read when numpy is
    # imported, in the commands) is off for this command unless the user set it: where the
    # kernel compacts memory to hand out huge pages on request (Linux transparent hugepages "madvise"
    # with defrag "madvise", a common server setting), a run's fresh arrays stalled in the kernel (the
    # first step on 1M jittered hexahedra 10.1-10.9 s with it, 6.6-7.6 s without: benchmarks/RESULTS.md,
    # tenth round). Worker processes inherit it.
    os.environ.setdefault("NUMPY_MADVISE_HUGEPAGE", "0")
    ctx.ensure_object(dict)
    ctx.obj["debug"] = debug
    warnings.showwarning = _WarningPrinter(debug)


@main.command()
@click.argument("path")
@click.option("--json", "as_json", is_flag=True, help="Print one JSON object instead of text.")
@click.option("--scan", type=click.Choice(["auto", "all", "first"]), default="auto", show_default=True,
              help="Which steps the field statistics come from (auto: all steps of a small series, "
                   "first and last of a large one).")
@click.option("--sort-by-time", is_flag=True,
              help="Order the steps by the times stored in their files, not by their names.")
def inspect(path, as_json, scan, sort_by_time):
    """Describe a series: steps, times, mesh and fields.

    PATH is a mesh file (.vtu, .vtk, .xdmf, .xmf; structured .vti, .vtr, .vts
    and legacy structured .vtk through VTK's readers; VTK multiblock .vtm and
    parallel .pvtu, .pvti, .pvtr, .pvts files), an XDMF time series, a folder of
    numbered files, a folder of step folders, a quoted glob or a 'time,path'
    step listing (.steps, .txt, .csv, .list).
    """
    from .io.describe import describe_series, format_description

    desc = describe_series(path, scan=scan, sort_by_time=sort_by_time)
    if as_json:
        from .report._files import strict_json

        click.echo(json.dumps(strict_json(desc), indent=2, allow_nan=False, default=str))
    else:
        click.echo(format_description(desc))


@main.command()
@click.argument("path")
@_add(_measure_options)
@click.option("--out", "-o", "out", required=True, help="Output folder.")
@click.option("--steps", default=None,
              help="Step numbers to measure: START:STOP:STRIDE (STOP excluded, as a Python slice) or one number.")
@click.option("--time-from", type=float, default=None, help="Measure only steps at this time or later.")
@click.option("--time-to", type=float, default=None, help="Measure only steps at this time or earlier.")
@click.option("--every", type=int, default=1, show_default=True, help="Of the chosen steps, measure every k-th.")
@click.option("--analyses", default=",".join(("interface", "droplets", "mixing", "conservation")),
              show_default=True, help="Comma-separated subset of the analyses to run.")
@click.option("--adjacency", type=click.Choice(["face", "point"]), default="face", show_default=True,
              help="Cells that share a face (or an edge in 2D), or any point, belong to one droplet.")
@click.option("--periodic", default="",
              help="Periodic axes, e.g. x,y: droplets, widths and bulk distances join across them, their boundary "
                   "planes are never open, and the free energy's stencil and the segregation scale's autocorrelation "
                   "wrap there (closed walls elsewhere).")
@click.option("--ignore-remerge-within", "ignore_remerge_within", type=int, default=0, show_default=True,
              help="A breakup that merges again, or a coalescence that breaks up again into as many drops, within "
                   "this many steps (step numbers) is no event.")
@click.option("--densities", default=None, help="Densities of the measured and the other phase, RHO1,RHO2.")
@click.option("--diffusivity", type=float, default=None,
              help="Physical diffusivity or mobility to compare the numerical one with.")
@click.option("--interface-kind", "interface_kind", type=click.Choice(["sharp", "diffuse"]),
              help="The run's interface kind as you know it (volume-of-fluid: sharp; phase-field: diffuse), in "
                   "place of the kind read from its thickness.")
@click.option("--box", default=None, help="Region for the mixing figures: xmin,xmax,ymin,ymax[,zmin,zmax].")
@click.option("--section-axis", "section_axis", type=click.Choice(["x", "y", "z"]), default=None,
              help="Cross-section profiles along this axis (mixing length).")
@click.option("--section-count", type=int, default=20, show_default=True, help="Number of cross sections.")
@click.option("--section-positions", default=None,
              help="Cross-section positions, comma-separated (instead of a count).")
@click.option("--mixing-target", type=float, default=0.9, show_default=True,
              help="Mixing index that defines the mixing length.")
@click.option("--inflow-mean", type=float, default=None,
              help="Mean of c over the whole inflow, the sections' reference (default: the first section's).")
@click.option("--segregation-scale", is_flag=True,
              help="Also compute Danckwerts' scale of segregation (an FFT of the domain per step).")
@click.option("--drift-tolerance", type=float, default=1e-3, show_default=True,
              help="Relative phase-volume drift that is flagged.")
@click.option("--workers", "-j", type=int, default=1, show_default=True, help="Local worker processes.")
@click.option("--threads", type=int, default=None,
              help="Threads of each process for mesh work [default: the CPUs it may use, shared among the "
                   "workers; PHASEGAUGE_THREADS caps them; one on a Dask cluster's workers].")
@click.option("--scheduler", default=None, help="Dask scheduler address (tcp://host:8786), or 'local'.")
@click.option("--resume", is_flag=True, help="Finish an interrupted run in OUT, reusing finished steps.")
@click.option("--overwrite", is_flag=True, help="Replace an existing output folder.")
@click.option("--strict", is_flag=True, help="Stop at a bad step instead of skipping it.")
@_add(_reading_options)  # --sort-by-time, --keep-3d, --level-set: the same as convergence's
@click.option("--contours/--no-contours", default=True, show_default=True,
              help="Write the interface geometry of every step (contours/).")
@click.option("--snapshots", type=int, default=4, show_default=True, help="Steps whose interface the report draws.")
@click.option("--plot-format", type=click.Choice(["png", "svg", "pdf"]), default="png", show_default=True,
              help="File format of the plots.")
@click.option("--keep-cache", is_flag=True, help="Keep OUT/.cache (the finished steps) after a complete run.")
@click.option("--quiet", "-q", is_flag=True, help="No progress display.")
@click.option("--probes", "probe_file", default=None, help="CSV of probe points, 'name,x,y[,z]' (probes.csv).")
@click.option("--lines", "line_file", default=None,
              help="CSV of sample lines, 'name,x0,y0[,z0],x1,y1[,z1],points' (lines.csv).")
@click.option("--measured", "measured_file", default=None,
              help="CSV of measured values, 'x,y[,z],value[,time][,uncertainty]' (validation.csv).")
@_add(_mixture_options)
@click.option("--free-energy", "free_energy", default=None,
              help="Model file with kappa (a double well, or an activity model at --temperature), read as --model "
                   "reads it: on the field mapped through --range (0 to 1). Chemical potential spread, free energy "
                   "and interfacial tension per step (uniform regular grids; the stencil wraps along --periodic "
                   "axes only).")
@click.option("--coarsening", is_flag=True,
              help="Characteristic lengths of the pattern per step (interface spacing, structure factor) and "
                   "L ~ t^n fitted to the interface spacing (the steps' times needed).")
@_old_flags(("--ignore-remerge", "ignore_remerge_within", int), ("--sections", "section_axis", click.Choice("xyz")),
            ("--section-at", "section_positions", str))
def measure(path, field, value_range, phase, level, velocity, field_location, sort_by_time, out, steps, time_from,
            time_to, every, analyses,
            adjacency, periodic,
            ignore_remerge_within, densities, diffusivity, interface_kind, box, section_axis, section_count,
            section_positions,
            mixing_target, inflow_mean, segregation_scale, drift_tolerance, workers, threads, scheduler, resume,
            overwrite, strict,
            keep_3d, level_set,
            contours, snapshots, plot_format, keep_cache, quiet, probe_file, line_file, measured_file,
            free_energy=None, coarsening=False, **mixture):
    """Measure interface, droplets, mixing and conservation on every step of PATH.

    PATH is a mesh file, an XDMF time series, a folder of numbered files, a
    quoted glob or a 'time,path' step listing. Writes steps.csv, droplets.csv,
    events.csv, plots, contours/, report.html and manifest.json into OUT.
    """
    from .run.measure import MeasureOptions, measure as run_measure

    options = MeasureOptions(
        field=field, range=value_range, phase=phase, level=level, velocity=velocity,
        analyses=tuple(a.strip() for a in analyses.split(",") if a.strip()), adjacency=adjacency,
        periodic=tuple(a.strip() for a in periodic.split(",") if a.strip()),
        ignore_remerge_within=ignore_remerge_within, densities=_floats(densities, "--densities", 2),
        diffusivity=diffusivity, interface_kind=interface_kind, box=_box(box), section_axis=section_axis,
        section_count=section_count,
        section_positions=_floats(section_positions, "--section-positions"), mixing_target=mixing_target,
        inflow_mean=inflow_mean, segregation_scale=segregation_scale,
        drift_tolerance=drift_tolerance, strict=strict, field_location=field_location or "auto",
        sort_by_time=sort_by_time, keep_3d=keep_3d, level_set=level_set, steps=steps, time_from=time_from,
        time_to=time_to, every=every,
        free_energy=free_energy, coarsening=coarsening,
        **_point_options(probe_file, line_file, measured_file), **_mixture_values(**mixture))
    result = run_measure(path, options=options, out=out, workers=workers, threads=threads, scheduler=scheduler,
                         overwrite=overwrite, resume=resume, progress=None if not quiet else False,
                         contours=contours, snapshots=snapshots, invocation=_command_line(),
                         plot_format=plot_format, keep_cache=keep_cache)
    _summary(result, out, quiet)


def _mole_fraction(x) -> str:
    """A mole fraction in six significant digits, and its distance from 1 where that is below 1e-4
    (``0.999997`` alone would hide 2.6e-6 of water in a hydrocarbon, as ``0.000000`` hid 1e-8)."""
    text = f"{x:.6g}"
    return f"{text} (1 - {1 - x:.3g})" if 0.5 < x < 1 and 1 - x < 1e-4 else text


def _summary(result, out, quiet):
    """What the run found, on stdout (``-q`` hides the progress display, not this)."""
    if hasattr(result, "pairs"):
        click.echo(f"compared {len(result.pairs)} paired times; report: {os.path.join(out, 'report.html')}")
        return
    if hasattr(result, "runs") and not hasattr(result, "steps"):
        click.echo(f"measured {len(result.table)} runs; table: {os.path.join(out, 'campaign.csv')}")
        return
    n = len(result.steps)
    results = getattr(result, "results", [])
    if results and all(r.reused for r in results):
        click.echo(f"every step was finished before, nothing was computed again; the tables and report were "
                   f"written from the {n} cached step{'s' if n != 1 else ''}")
    click.echo(f"measured {n} step{'s' if n != 1 else ''}; report: {os.path.join(out, 'report.html')}")
    for line in getattr(result, "reading", ()):
        click.echo(f"  {line}")
    for flag in result.flags:
        click.echo(f"  flag: {flag}")
    from .report._measure_report import verdict_lines

    for line in verdict_lines(getattr(result, "standing_checks", None) or [], bool(result.flags)):
        click.echo(f"  {line}")


@main.command()
@click.argument("recipe")
@click.option("--overwrite", is_flag=True, default=None, help="Replace an existing output folder.")
@click.option("--resume", is_flag=True, help="Finish an interrupted run.")
@click.option("--workers", "-j", type=int, default=None,
              help="Local worker processes (overrides the recipe); a campaign measures its runs side by side on them.")
@click.option("--threads", type=int, default=None,
              help="Threads of each process for mesh work (overrides the recipe).")
@click.option("--strict/--no-strict", default=None,
              help="Stop at a bad step instead of skipping it, or skip it (either overrides the recipe).")
@click.option("--quiet", "-q", is_flag=True, help="No progress display.")
def run(recipe, overwrite, resume, workers, threads, strict, quiet):
    """Run a recipe file (TOML): a whole measure, compare or campaign run kept beside the case."""
    from .recipes import load_recipe, run_recipe
    from .report._files import output_transaction

    if os.path.isdir(recipe):
        from .errors import OptionError

        raise OptionError("is a folder, not a recipe file", where=recipe, fix="give the .toml file itself")
    loaded = load_recipe(recipe)
    with output_transaction(loaded["output"]["folder"]):
        result = run_recipe(recipe, overwrite=overwrite or None, resume=resume, workers=workers, threads=threads,
                            strict=strict, progress=None if not quiet else False)
    _summary(result, loaded["output"]["folder"], quiet)




@main.command()
@click.argument("model_file")
@click.option("--temperature", "-T", type=float, default=None,
              help="Temperature in K: binodal, spinodal, critical point.")
@click.option("--temperatures", default=None, help="LO,HI in K: the phase diagram over this range (needs -o).")
@click.option("--count", type=int, default=200, show_default=True, help="Temperatures in the phase diagram.")
@click.option("--json", "as_json", is_flag=True, help="Print one JSON object instead of text.")
@click.option("--out", "-o", "out", default=None, help="Output folder of the phase diagram (CSV and PNG).")
@click.option("--overwrite", is_flag=True, help="Replace an existing output folder.")
def equilibrium(model_file, temperature, temperatures, count, as_json, out, overwrite):
    """Coexisting compositions of a mixture model file (TOML): binodal, spinodal, critical point.

    With --temperature T: the binodal pair (binodal_lean, binodal_rich), the spinodal pair and the
    critical temperature and composition (UCST or LCST). With --temperatures LO,HI -o OUT: the
    phase diagram as OUT/phase_diagram.csv and OUT/phase_diagram.png.
    """
    from .errors import OptionError
    from .io import read_mixture_model
    from .report._files import strict_json
    from .run.equilibrium import equilibrium_record, phase_diagram_run

    if (temperature is None) == (temperatures is None):
        raise OptionError("give either --temperature T or --temperatures LO,HI", fix="for example --temperature 298.15")
    if temperatures is not None and out is None:
        raise OptionError("--temperatures writes a phase diagram and needs an output folder",
                          fix="add -o OUT (a new folder)")
    model = read_mixture_model(model_file)
    if temperature is not None:
        record = equilibrium_record(model, temperature, path=model_file)
        if as_json:
            click.echo(json.dumps(strict_json(record), indent=2, allow_nan=False))
            return
        click.echo(f"model: {record['kind_of_model']}" + (f", x = mole fraction of {model.component}"
                                                          if model.component else ""))
        if record["state"] == "two phases":
            lean, rich = _mole_fraction(record["binodal_lean"]), _mole_fraction(record["binodal_rich"])
            click.echo(f"at {record['temperature']:g} K: two phases, binodal_lean {lean}, binodal_rich {rich}")
            lean, rich = _mole_fraction(record["spinodal_lean"]), _mole_fraction(record["spinodal_rich"])
            click.echo(f"spinodal: {lean} to {rich}")
            if len(record["two_phase_regions"]) > 1:  # the pairs above are the widest and the outermost
                shown = ", ".join(f"{_mole_fraction(a)} to {_mole_fraction(b)}" for a, b in record["two_phase_regions"])
                click.echo(f"  note: {len(record['two_phase_regions'])} two-phase regions: {shown} (the binodal "
                           "above is the widest; a run's steps are measured against the one their mean composition "
                           "lies in)")
                shown = ", ".join(f"{_mole_fraction(a)} to {_mole_fraction(b)}" for a, b in record["unstable_ranges"])
                click.echo(f"  note: unstable ranges: {shown} (the spinodal above spans them and the stable gap "
                           "between)")
        else:
            click.echo(f"at {record['temperature']:g} K: one stable phase (no binodal)")
        lo, hi = record["critical_search"]
        if record["critical_points"]:
            for point in record["critical_points"]:
                click.echo(f"critical point: {point['temperature']:.2f} K at x = {point['composition']:.4f} "
                           f"({point['kind']})")
        else:
            click.echo(f"critical point: none between {lo:g} and {hi:g} K")
        return
    bounds = _floats(temperatures, "--temperatures", 2)
    record = phase_diagram_run(model, bounds, out=out, count=count, overwrite=overwrite, path=model_file)
    if as_json:
        click.echo(json.dumps(strict_json(record), indent=2, allow_nan=False))
        return
    click.echo(f"phase diagram of {record['count']} temperatures: {os.path.join(out, 'phase_diagram.csv')}, "
               f"{os.path.join(out, 'phase_diagram.png')}")
    for point in record["critical_points"]:
        click.echo(f"critical point: {point['temperature']:.2f} K at x = {point['composition']:.4f} ({point['kind']})")
    for finding in record["findings"]:
        click.echo(f"  note: {finding}")


@main.command()
@click.argument("directory", required=False)
@click.option("--only", default=None, help="Comma-separated names of the series to write (default: all).")
@click.option("--overwrite", is_flag=True, help="Replace series already in DIRECTORY.")
@click.option("--list", "list_names", is_flag=True, help="Print the names of the series and write nothing.")
def samples(directory, only, overwrite, list_names):
    """Write the demo series (computed by the generators, seeded) into DIRECTORY."""
    from .errors import OptionError, OutputError
    from .samples import SAMPLE_NAMES, write_samples

    if list_names:
        for name in SAMPLE_NAMES:
            click.echo(name)
        return
    if directory is None:
        raise OptionError("no folder to write the series into", fix="give a folder: phasegauge samples DIR "
                          "(or --list for the names)")

    names = [n.strip() for n in only.split(",")] if only else list(SAMPLE_NAMES)
    unknown = [n for n in names if n not in SAMPLE_NAMES]
    if unknown:
        from .errors import OptionError

        raise OptionError(f"unknown sample series {unknown}", fix="choose from " + ", ".join(SAMPLE_NAMES))
    if os.path.exists(directory) and not os.path.isdir(directory):
        raise OutputError("exists and is not a folder", where=directory, fix="choose another folder")
    existing = [n for n in names if any(os.path.exists(os.path.join(directory, n + suffix))
                                        for suffix in ("", ".xdmf", ".h5"))]
    if existing and not overwrite:
        raise OutputError(f"series already there: {', '.join(existing)}", where=directory,
                          fix="give --overwrite to replace them, or another folder")
    try:
        os.makedirs(directory, exist_ok=True)
    except OSError as exc:
        raise OutputError(f"cannot be created ({exc.strerror or exc})", where=directory,
                          fix="choose a folder you can write to") from None
    written = write_samples(directory, names=names)
    for name, path in written.items():
        click.echo(f"{name}: {path}")


@main.command()
@click.argument("path_a")
@click.argument("path_b")
@click.option("--field-a", required=True, help="Field of the first run mapped to the indicator.")
@click.option("--field-b", required=True, help="Field of the second run.")
@click.option("--range-a", default="0,1", show_default=True, help="LO,HI of the first run's field.")
@click.option("--range-b", default="0,1", show_default=True, help="LO,HI of the second run's field.")
@click.option("--phase-a", type=click.Choice(["upper", "lower"]), default="upper", show_default=True)
@click.option("--phase-b", type=click.Choice(["upper", "lower"]), default="upper", show_default=True)
@click.option("--velocity-a", default=None, help="Velocity field of the first run (rise velocity), or its "
              "scalar components, as for measure.")
@click.option("--velocity-b", default=None, help="Velocity field of the second run, as --velocity-a.")
@click.option("--label-a", default="first", show_default=True, help="Name of the first run in tables.")
@click.option("--label-b", default="second", show_default=True, help="Name of the second run in tables.")
@click.option("--level", type=float, default=0.5, show_default=True, help="Indicator level of the interfaces.")
@click.option("--time-tolerance", type=float, default=None,
              help="Pair steps whose times differ by at most this (default: a quarter of the output interval "
                   "around each time).")
@click.option("--spacing", type=float, default=None,
              help="Spacing of the common sampling grid (default: finer than both meshes).")
@click.option("--rising-bubble", is_flag=True,
              help="Check the first run against the rising-bubble benchmark, case 1 (Hysing et al. 2009).")
@click.option("--reference-table", type=click.Path(dir_okay=False), default=None,
              help="CSV of reference values to check the first run against.")
@click.option("--field-location", type=click.Choice(["cell", "point"]), default=None,
              help="Which copy of a field written on cells and on points to read, in both runs "
                   "(default: the cell copy).")
@click.option("--sort-by-time", is_flag=True,
              help="Order each run's steps by the times stored in their files, not by their names.")
@click.option("--level-set-a", "level_set_a", is_flag=True, help="The first run's field is a level set (as measure's "
              "--level-set).")
@click.option("--level-set-b", "level_set_b", is_flag=True, help="The second run's field is a level set.")
@click.option("--interface-kind-a", "interface_kind_a", type=click.Choice(["sharp", "diffuse"]),
              help="The first run's interface kind as you know it (as measure's --interface-kind).")
@click.option("--interface-kind-b", "interface_kind_b", type=click.Choice(["sharp", "diffuse"]),
              help="The second run's interface kind as you know it.")
@click.option("--steps-a", "steps_a", default=None,
              help="The first run's steps compared, START:STOP:STRIDE (as measure's --steps: one run of a restart).")
@click.option("--steps-b", "steps_b", default=None, help="The second run's steps compared, START:STOP:STRIDE.")
@click.option("--periodic", default="",
              help="Periodic axes of both runs, e.g. x,y (as measure's --periodic): droplets join across them and "
                   "the interface distances wrap there.")
@click.option("--out", "-o", "out", required=True, help="Output folder.")
@click.option("--overwrite", is_flag=True, help="Replace an existing output folder.")
@click.option("--workers", "-j", type=int, default=1, show_default=True, help="Local worker processes.")
@click.option("--threads", type=int, default=None,
              help="Threads of each process for mesh work [default: the CPUs it may use, shared among the "
                   "workers].")
@click.option("--quiet", "-q", is_flag=True, help="No progress display.")
def compare(path_a, path_b, field_a, field_b, range_a, range_b, phase_a, phase_b, velocity_a, velocity_b,
            label_a, label_b, level, time_tolerance, spacing, rising_bubble, reference_table, field_location,
            sort_by_time, level_set_a, level_set_b, interface_kind_a, interface_kind_b, steps_a, steps_b, periodic,
            out, overwrite, workers, threads, quiet):
    """Compare two runs of the same case (for example diffuse versus sharp interface)."""
    from .errors import OptionError
    from .run.compare import RunSpec, compare_runs
    from .model.indicator import parse_range
    from .report._files import output_transaction

    where = field_location or "auto"
    runs = []
    for flag, values in (("a", (path_a, field_a, parse_range(range_a), phase_a, velocity_a, label_a, where,
                                sort_by_time, level_set_a, interface_kind_a, steps_a)),
                         ("b", (path_b, field_b, parse_range(range_b), phase_b, velocity_b, label_b, where,
                                sort_by_time, level_set_b, interface_kind_b, steps_b))):
        try:
            runs.append(RunSpec(*values))
        except OptionError as err:  # named by the run's own options
            raise OptionError(f"the {'first' if flag == 'a' else 'second'} run (its options ending in -{flag}: "
                              f"--range-{flag}, --phase-{flag}, --steps-{flag}, --interface-kind-{flag}, "
                              f"--level-set-{flag}): {err.what}", where=err.where, fix=err.fix) from None
    first, second = runs
    with output_transaction(out):
        result = compare_runs(first, second, out=out, overwrite=overwrite, level=level,
                              time_tolerance=time_tolerance, spacing=spacing, reference_table=reference_table,
                              rising_bubble=rising_bubble, workers=workers, threads=threads,
                              progress=None if not quiet else False,
                              periodic=tuple(a.strip() for a in periodic.split(",") if a.strip()))
    if not quiet:
        click.echo(f"compared {len(result.pairs)} paired times; report: {os.path.join(out, 'report.html')}")


@main.command()
@click.argument("fine")
@click.argument("medium")
@click.argument("coarse")
@click.option("--field", "-f", default=None, help="Field mapped to c (needed when an input is a series).")
@_add(_measure_options[1:] + _reading_options)
@click.option("--analyses", default=",".join(("interface", "droplets", "mixing", "conservation")),
              show_default=True, help="Analyses run on inputs that are series.")
@click.option("--cell-sizes", default=None,
              help="Representative cell sizes H_FINE,H_MEDIUM,H_COARSE (default: (measure / cells)^(1/dim)).")
@click.option("--safety-factor", type=float, default=1.25, show_default=True, help="Safety factor of the GCI.")
@click.option("--formal-order", type=float, default=None,
              help="Order of accuracy of the scheme: the asymptotic ratio is taken with it [default: none, ratio NaN].")
@click.option("--out", "-o", "out", required=True, help="Output folder.")
@click.option("--overwrite", is_flag=True, help="Replace an existing output folder.")
@click.option("--workers", "-j", type=int, default=1, show_default=True, help="Local worker processes.")
@click.option("--threads", type=int, default=None,
              help="Threads of each process for mesh work [default: the CPUs it may use, shared among the "
                   "workers].")
@click.option("--quiet", "-q", is_flag=True, help="No progress display.")
def convergence(fine, medium, coarse, field, value_range, phase, level, velocity, field_location, sort_by_time,
                keep_3d, level_set, analyses, cell_sizes, safety_factor, formal_order, out, overwrite, workers,
                threads, quiet):
    """Grid convergence of one case run on three meshes (Celik et al. 2008).

    FINE, MEDIUM and COARSE are each a series or the output folder of a
    finished measure run. Writes convergence.csv (apparent order, extrapolated
    value, relative errors and the Grid Convergence Index of every steps.csv
    quantity at paired times), convergence.png and manifest.json into OUT.
    """
    from .run.convergence import grid_convergence_run
    from .run.options import MeasureOptions

    typed = {"field": field, "range": value_range, "phase": phase, "level": level, "velocity": velocity,
             "field_location": field_location or "auto", "keep_3d": keep_3d, "level_set": level_set}
    ctx = click.get_current_context()
    given = [key for key, param in (("range", "value_range"), *((k, k) for k in typed if k != "range"))
             if ctx.get_parameter_source(param) not in (None, click.core.ParameterSource.DEFAULT)]
    measuring = MeasureOptions(**{**typed, "field": field or "c"}, sort_by_time=sort_by_time,
                               analyses=tuple(a.strip() for a in analyses.split(",") if a.strip()))
    options = measuring if field is not None else None
    result = grid_convergence_run(fine, medium, coarse, options=options, formal_order=formal_order,
                                  given_options={key: getattr(measuring, key) for key in given},
                                  cell_sizes=_floats(cell_sizes, "--cell-sizes", 3), safety_factor=safety_factor,
                                  out=out, overwrite=overwrite, workers=workers, threads=threads,
                                  progress=None if not quiet else False)
    if not quiet:
        sizes = ", ".join(f"{s.cell_size:.4g}" for s in result.sources)
        click.echo(f"{len(result.table)} rows (cell sizes {sizes}); table: {os.path.join(out, 'convergence.csv')}")
