"""Reading the plain CSV files that name probe points, sample lines and measured values.

Each file has a header line naming its columns; ``#`` starts a comment; a 2D
file leaves out the z columns (z is then NaN, "not given": a 2D mesh in the x-y plane
takes z = 0, any other mesh refuses the file). The files are the project's own plain
formats (see the README): ``name,x,y[,z]`` (probes),
``name,x0,y0[,z0],x1,y1[,z1],points`` (lines) and
``x,y[,z],value[,time][,uncertainty]`` (measured values).
"""

from __future__ import annotations

import os
import warnings

import numpy as np

from ..errors import InputError, PhasegaugeWarning

__all__ = ["read_probe_file", "read_line_file", "read_measured_file"]


def _read(path, what: str, example: str):
    import pandas as pd

    path = os.fspath(path)
    if not os.path.isfile(path):
        from ..errors import InputFileNotFound

        raise InputFileNotFound(f"{what} file not found", where=path, fix=f"give a CSV file like '{example}'")
    try:
        table = pd.read_csv(path, skipinitialspace=True, comment="#")
    except (OSError, pd.errors.ParserError, pd.errors.EmptyDataError, UnicodeDecodeError) as err:
        raise InputError(f"cannot read the {what} file: {' '.join(str(err).split())}", where=path,
                         fix=f"give a CSV file with a header line, like '{example}'") from None
    table.columns = [str(c).strip().lower() for c in table.columns]
    if not len(table):
        raise InputError(f"the {what} file has no rows", where=path, fix=f"add rows below the header '{example}'")
    return table, path


def _columns(table, path, what, required, optional=(), example=""):
    missing = [c for c in required if c not in table]
    unknown = [c for c in table.columns if c not in required and c not in optional]
    if missing or unknown:
        found = ", ".join(table.columns)
        raise InputError(f"the {what} file's header must name {', '.join(required)}"
                         f"{' [' + ', '.join(optional) + ']' if optional else ''}, found {found}",
                         where=path, fix=f"write the header as '{example}'")


def _line_numbers(path, rows) -> list:
    """The file's line numbers (from 1) of the table's ``rows`` (from 0): blank and comment lines do not count."""
    with open(path, encoding="utf-8", errors="replace") as handle:
        kept = [n for n, text in enumerate(handle, start=1) if text.split("#", 1)[0].strip()]
    return [kept[r + 1] if r + 1 < len(kept) else r + 2 for r in rows]  # kept[0] is the header


def _numbers(table, columns, path, what, *, optional=()):
    out = {}
    for c in columns:
        if c not in table:
            continue
        try:
            values = table[c].astype(float).to_numpy()
        except (TypeError, ValueError):
            raise InputError(f"column '{c}' of the {what} file holds a value that is not a number", where=path,
                             fix="write plain numbers, one row per entry") from None
        bad = ~np.isfinite(values)
        if c in optional:
            bad &= table[c].notna().to_numpy()
        if bad.any():
            row = _line_numbers(path, [int(np.flatnonzero(bad)[0])])[0]
            raise InputError(f"column '{c}' of the {what} file is not a finite number on line {row}", where=path,
                             fix="write a number there")
        out[c] = values
    return out


def _names(table, path, what):
    names = table["name"].astype(str).str.strip().to_numpy()
    if any(n in ("", "nan") for n in names):
        raise InputError(f"every {what} needs a name", where=path, fix="fill the name column")
    seen, dup = set(), []
    for n in names:
        if n in seen:
            dup.append(n)
        seen.add(n)
    if dup:
        raise InputError(f"{what} names repeat: {', '.join(sorted(set(dup)))}", where=path,
                         fix="give every row its own name")
    return names


def read_probe_file(path) -> tuple:
    """Probe points from a CSV file with a header ``name,x,y[,z]``.

    Returns
    -------
    tuple of (name, x, y, z)
        One entry per probe, z NaN when the file has no z column (not given).

    Raises
    ------
    InputError
        Unreadable file, wrong header, a coordinate that is not a finite number, repeated names.
    """
    example = "name,x,y,z"
    table, path = _read(path, "probe", example)
    _columns(table, path, "probe", ("name", "x", "y"), ("z",), example)
    xyz = _numbers(table, ("x", "y", "z"), path, "probe")
    z = xyz.get("z", np.full(len(table), np.nan))  # not given: a 2D mesh in the x-y plane takes 0
    names = _names(table, path, "probe")
    return tuple((str(n), float(a), float(b), float(c)) for n, a, b, c in zip(names, xyz["x"], xyz["y"], z))


def read_line_file(path) -> tuple:
    """Sample lines from a CSV file with a header ``name,x0,y0[,z0],x1,y1[,z1],points``.

    Returns
    -------
    tuple of (name, x0, y0, z0, x1, y1, z1, points)
        z0 and z1 NaN when the file has no such column (not given).

    Raises
    ------
    InputError
        Unreadable file, wrong header, bad numbers, fewer than 2 points on a line, repeated names.
    """
    example = "name,x0,y0,z0,x1,y1,z1,points"
    table, path = _read(path, "line", example)
    _columns(table, path, "line", ("name", "x0", "y0", "x1", "y1", "points"), ("z0", "z1"), example)
    v = _numbers(table, ("x0", "y0", "z0", "x1", "y1", "z1", "points"), path, "line")
    zero = np.full(len(table), np.nan)  # not given
    points = v["points"]
    if (points < 2).any() or (points != np.round(points)).any():
        raise InputError("every line needs a whole number of at least 2 points", where=path,
                         fix="for example points = 50")
    names = _names(table, path, "line")
    return tuple((str(n), float(a), float(b), float(c), float(d), float(e), float(f), int(p)) for n, a, b, c, d, e, f, p
                 in zip(names, v["x0"], v["y0"], v.get("z0", zero), v["x1"], v["y1"], v.get("z1", zero), points))


def read_measured_file(path) -> tuple:
    """Measured values from a CSV file with a header ``x,y[,z],value[,time][,uncertainty]``.

    Returns
    -------
    tuple of (x, y, z, value, time, uncertainty)
        z NaN without a z column (not given); time NaN when the file gives none (the value
        then stands for every step); uncertainty NaN when not given.

    Raises
    ------
    InputError
        Unreadable file, wrong header, bad numbers, a negative uncertainty.

    Warns
    -----
    PhasegaugeWarning
        Some rows of a file with times leave the time blank (read as values for every step, which
        is more often a time left out), naming the lines.
    """
    example = "x,y,z,value,time,uncertainty"
    table, path = _read(path, "measured", example)
    _columns(table, path, "measured", ("x", "y", "value"), ("z", "time", "uncertainty"), example)
    v = _numbers(table, ("x", "y", "z", "value", "time", "uncertainty"), path, "measured",
                 optional=("time", "uncertainty"))
    nan = np.full(len(table), np.nan)
    unc = v.get("uncertainty", nan)
    if (unc < 0).any():
        raise InputError("an uncertainty is negative", where=path, fix="give the half-width of the interval (>= 0)")
    z = v.get("z", nan)
    blank = np.flatnonzero(np.isnan(v["time"])) if "time" in v else np.zeros(0, dtype=int)
    if 0 < blank.size < len(table):
        lines = _line_numbers(path, blank.tolist())
        named = ", ".join(str(n) for n in lines[:8]) + (f" and {len(lines) - 8} more" if len(lines) > 8 else "")
        warnings.warn(PhasegaugeWarning(f"{blank.size} of {len(table)} measured values have no time (line "
                                        f"{named}): each is compared at every step, the initial state included; "
                                        "write its time if it was measured at one", where=path), stacklevel=2)
    return tuple((float(a), float(b), float(c), float(d), float(t), float(u)) for a, b, c, d, t, u
                 in zip(v["x"], v["y"], z, v["value"], v.get("time", nan), unc))
