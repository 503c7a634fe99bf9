"""The ``phasegauge`` command line.

Only this module turns errors into one line on stderr and an exit status:
2 for bad input, 1 for a failure inside. ``--debug`` shows the traceback.
Heavy libraries are imported inside the commands, so ``--help`` starts fast.
"""

from __future__ import annotations

import json
import sys
import warnings

import click

from . import __version__
from .errors import PhasegaugeError, PhasegaugeWarning


class _Group(click.Group):
    """Click group that reports errors as one line."""

    def invoke(self, ctx):
        debug = bool(ctx.params.get("debug"))
        try:
            return super().invoke(ctx)
        except PhasegaugeError as err:
            if debug:
                raise
            click.echo(f"phasegauge: error: {err.one_line()}", err=True)
            ctx.exit(err.exit_status)
        except (click.exceptions.Exit, click.exceptions.Abort, click.ClickException):
            raise
        except KeyboardInterrupt:
            click.echo("phasegauge: interrupted; rerun with --resume to finish", err=True)
            ctx.exit(130)
        except Exception as exc:  # a failure inside the tool
            if debug:
                raise
            text = " ".join(str(exc).split())[:300]
            click.echo(f"phasegauge: internal error: {type(exc).__name__}: {text}; rerun with --debug "
                       "for the traceback and report it", err=True)
            ctx.exit(1)


def _show_warning(message, category, filename, lineno, file=None, line=None):
    if issubclass(category, PhasegaugeWarning):
        click.echo(f"phasegauge: warning: {message}", err=True)
    else:
        click.echo(f"phasegauge: warning: {category.__name__}: {message}", err=True)


@click.group(cls=_Group, context_settings={"help_option_names": ["-h", "--help"]})
@click.version_option(__version__, prog_name="phasegauge")
@click.option("--debug", is_flag=True, help="Show the full traceback of an error.")
@click.pass_context
def main(ctx, debug):
    """Measure interfaces, droplets, mixing and conservation in two-phase simulation output."""
    ctx.ensure_object(dict)
    ctx.obj["debug"] = debug
    warnings.showwarning = _show_warning


@main.command()
@click.argument("path")
@click.option("--json", "as_json", is_flag=True, help="Print one JSON object instead of text.")
@click.option("--scan", type=click.Choice(["auto", "all", "first"]), default="auto", show_default=True,
              help="Which steps the field statistics come from (auto: all steps of a small series, "
                   "first and last of a large one).")
def inspect(path, as_json, scan):
    """Describe a series: steps, times, mesh and fields.

    PATH is a mesh file (.vtu, .vtk, .xdmf), an XDMF time series, a folder of
    numbered files, a quoted glob or a 'time,path' step listing.
    """
    from .describe import describe_series, format_description

    desc = describe_series(path, scan=scan)
    if as_json:
        click.echo(json.dumps(desc, indent=2))
    else:
        click.echo(format_description(desc))


def run():  # pragma: no cover - console entry for python -m
    main(prog_name="phasegauge")


if __name__ == "__main__":  # pragma: no cover
    sys.exit(run())
