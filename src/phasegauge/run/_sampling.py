"""Probes, lines and measured points in a measure run: the options, the per-step values, the tables.

Every point a run samples (probes, then the points of each line, then each
distinct measured position) is located once per mesh
(:func:`phasegauge.analysis.probes.point_sampler`, cached on the mesh); a step
keeps only the values there (:attr:`StepResult.samples`, 16 bytes a point) and
the run assembles ``probes.csv``, ``lines.csv`` and ``validation.csv`` from them.
"""

from __future__ import annotations

import math
import warnings

import numpy as np

from ..errors import MeshWarning, OptionError, PhasegaugeWarning

__all__ = ["normalize_probes", "normalize_lines", "normalize_measured", "sample_layout", "sample_step",
           "sample_tables", "PROBE_COLUMNS", "LINE_COLUMNS"]

#: columns of probes.csv
PROBE_COLUMNS = ("step", "time", "probe", "x", "y", "z", "value", "c")
#: columns of lines.csv
LINE_COLUMNS = ("step", "time", "line", "distance", "x", "y", "z", "value", "c")

_MAX_POINTS = 1_000_000


def _finite(values, what):
    try:
        out = tuple(float(v) for v in values)
    except (TypeError, ValueError):
        raise OptionError(f"{what} must be numbers, found {values!r}", fix="check the file or option") from None
    if not all(math.isfinite(v) for v in out):
        raise OptionError(f"{what} must be finite numbers, found {out}", fix="check the file or option")
    return out


def _unique_names(names, what):
    seen = set()
    for n in names:
        if not n:
            raise OptionError(f"every {what} needs a name", fix="fill the name column")
        if n in seen:
            raise OptionError(f"{what} name '{n}' repeats", fix="give every entry its own name")
        seen.add(n)


def _z_or_nan(value, what):
    """A z coordinate: a finite number, or NaN for "not given" (a 2D file's; see :func:`check_z`)."""
    try:
        z = float(value)
    except (TypeError, ValueError):
        raise OptionError(f"{what} must be numbers, found {value!r}", fix="check the file or option") from None
    if math.isinf(z):
        raise OptionError(f"{what} must be finite numbers, found {z}", fix="check the file or option")
    return z


def normalize_probes(probes) -> tuple:
    """Probes as a tuple of (name, x, y, z); (name, x, y) entries get z NaN (not given)."""
    out = []
    for entry in probes or ():
        entry = tuple(entry)
        if len(entry) not in (3, 4):
            raise OptionError(f"a probe is (name, x, y[, z]), found {entry!r}", fix="see read_probe_file")
        what = f"probe '{entry[0]}' coordinates"
        x, y = _finite(entry[1:3], what)
        z = _z_or_nan(entry[3], what) if len(entry) == 4 else math.nan
        out.append((str(entry[0]), x, y, z))
    _unique_names([p[0] for p in out], "probe")
    return tuple(out)


def normalize_lines(lines) -> tuple:
    """Lines as a tuple of (name, x0, y0, z0, x1, y1, z1, points)."""
    out = []
    total = 0
    for entry in lines or ():
        entry = tuple(entry)
        if len(entry) not in (6, 8):
            raise OptionError(f"a line is (name, x0, y0[, z0], x1, y1[, z1], points), found {entry!r}",
                              fix="see read_line_file")
        what = f"line '{entry[0]}' ends"
        if len(entry) == 6:
            x0, y0, x1, y1 = _finite(entry[1:-1], what)
            coords = (x0, y0, math.nan, x1, y1, math.nan)
        else:
            x0, y0, x1, y1 = _finite(entry[1:3] + entry[4:6], what)
            coords = (x0, y0, _z_or_nan(entry[3], what), x1, y1, _z_or_nan(entry[6], what))
        points = entry[-1]
        if isinstance(points, bool) or int(points) != points or int(points) < 2:
            raise OptionError(f"line '{entry[0]}' needs a whole number of at least 2 points, found {points!r}",
                              fix="for example 50")
        total += int(points)
        out.append((str(entry[0]),) + coords + (int(points),))
    if total > _MAX_POINTS:
        raise OptionError(f"the lines hold {total} points, more than {_MAX_POINTS}", fix="use fewer points per line")
    _unique_names([p[0] for p in out], "line")
    return tuple(out)


def normalize_measured(measured) -> tuple:
    """Measured values as a tuple of (x, y, z, value, time, uncertainty); time and uncertainty may be NaN."""
    out = []
    for entry in measured or ():
        entry = tuple(float(v) for v in entry)
        if len(entry) != 6:
            raise OptionError(f"a measured value is (x, y, z, value, time, uncertainty), found {entry!r}",
                              fix="read the file with read_measured_file")
        if not all(math.isfinite(v) for v in entry[:2] + entry[3:4]) or math.isinf(entry[2]) or (entry[5] < 0):
            raise OptionError(f"measured position and value must be finite and the uncertainty >= 0, found {entry}",
                              fix="check the measured file")
        out.append(entry)
    return tuple(out)


def sample_layout(options) -> tuple:
    """Every point a run samples, and where each group starts.

    Returns
    -------
    points : ndarray of shape (n, 3)
        Probes, then each line's points, then each distinct measured position.
    parts : dict
        ``probes`` (slice), ``lines`` (list of (name, slice, distance array)),
        ``measured`` (slice, and ``measured_index``: per measured row, the index of its position).
    """
    from ..analysis.probes import line_points

    chunks = []
    parts = {}
    start = 0
    probes = np.array([p[1:4] for p in options.probes], dtype=float).reshape(-1, 3)
    chunks.append(probes)
    parts["probes"] = slice(0, len(probes))
    start = len(probes)
    parts["lines"] = []
    for name, x0, y0, z0, x1, y1, z1, count in options.lines:
        P, distance = line_points((x0, y0, z0), (x1, y1, z1), count)
        chunks.append(P)
        parts["lines"].append((name, slice(start, start + count), distance))
        start += count
    positions = np.array([m[:3] for m in options.measured], dtype=float).reshape(-1, 3)
    unique, index = np.unique(positions, axis=0, return_inverse=True)
    chunks.append(unique)
    parts["measured"] = slice(start, start + len(unique))
    parts["measured_index"] = np.asarray(index).ravel()
    return np.concatenate(chunks), parts


def sample_step(mesh, indicator, options, *, where: str = ""):
    """The field and c at every sampled point of one step (None when the run samples none).

    Returns
    -------
    ndarray of shape (n, 2) or None
        Column 0 the field value (from c by the inverse of the range mapping, so
        data on cells goes through the indicator's point values), column 1 c; NaN
        outside the mesh. Points outside are named in one :class:`MeshWarning`.
    """
    from ..analysis.probes import point_sampler

    if not (options.probes or options.lines or options.measured):
        return None
    points, parts = sample_layout(options)
    check_z(mesh, points, options, parts)
    sampler = point_sampler(mesh, points)
    c = sampler(indicator.point)
    if indicator.location == "cell":  # a point in a cell the solver wrote no finite value for has none
        held = np.flatnonzero(sampler.cells >= 0)
        empty = held[~np.isfinite(np.asarray(indicator.cell)[sampler.cells[held]])]
        if empty.size:
            c[empty] = np.nan
            none = np.ones(c.size, dtype=bool)
            none[empty] = False
            warnings.warn(MeshWarning(f"points in cells with no finite value (their values are empty): "
                                      f"{_outside_names(none, options, parts)}", where=where), stacklevel=2)
    lo, hi = options.range
    value = lo + (hi - lo) * (c if options.phase == "upper" else 1.0 - c)
    if not sampler.inside.all():
        warnings.warn(MeshWarning(f"points outside the mesh (their values are empty): "
                                  f"{_outside_names(sampler.inside, options, parts)}", where=where), stacklevel=2)
    return np.column_stack([value, c])


def check_z(mesh, points, options, parts) -> None:
    """Refuse points with z not given (NaN, a file without z columns) on a mesh that is not 2D in the x-y
    plane (:func:`phasegauge.analysis.probes.plane_needing_z`, whose sampler then takes z = 0), naming
    the probes, lines and measured values: two columns would be read as x and y where the mesh's plane
    is x-z or y-z, or sit on z = 0 in a 3D mesh."""
    from ..analysis._probes import plane_needing_z

    missing = np.isnan(points[:, 2])
    plane = plane_needing_z(mesh) if missing.any() else None
    if plane is None:
        return
    names = [options.probes[i][0] for i in np.flatnonzero(missing[parts["probes"]])]
    names += [f"line {name}" for name, sl, _ in parts["lines"] if missing[sl].any()]
    if missing[parts["measured"]].any():
        names.append("measured values")
    raise OptionError(f"{', '.join(names[:6])}{' and more' if len(names) > 6 else ''} give no z, but the mesh lies "
                      f"in {plane}: only a mesh in the x-y plane takes a file without z columns (as z = 0)",
                      fix="give the probe, line and measured files x, y and z columns (z0 and z1 for lines)")


def _outside_names(inside, options, parts) -> str:
    names = [options.probes[i][0] for i in np.flatnonzero(~inside[parts["probes"]])]
    for name, sl, _ in parts["lines"]:
        out = int(np.count_nonzero(~inside[sl]))
        if out:
            names.append(f"line {name} ({out} of {sl.stop - sl.start} points)")
    measured = int(np.count_nonzero(~inside[parts["measured"]]))
    if measured:
        names.append(f"{measured} measured position{'s' if measured != 1 else ''}")
    text = ", ".join(names[:12])
    return text + (f" and {len(names) - 12} more" if len(names) > 12 else "")


def sample_tables(results, options) -> tuple:
    """``probes``, ``lines`` and the simulated values at the measured positions, from the steps' samples.

    Returns
    -------
    probes, lines : DataFrame or None
        The tables of probes.csv and lines.csv (None when the run has none).
    measured_values : tuple (times (n_steps,), values (n_steps, n_positions), step numbers (n_steps,)) or None
    """
    import pandas as pd

    done = [r for r in results if r.skipped is None and getattr(r, "samples", None) is not None]
    if not done or not (options.probes or options.lines or options.measured):
        return None, None, None
    points, parts = sample_layout(options)
    steps = np.array([r.index for r in done])
    times = np.array([r.time for r in done], dtype=float)
    values = np.stack([r.samples for r in done])  # (n_steps, n_points, 2)
    probes = lines = None

    def block(sl, label_column, labels, extra=None):
        n = sl.stop - sl.start
        frame = {"step": np.repeat(steps, n), "time": np.repeat(times, n), label_column: np.tile(labels, len(done))}
        if extra is not None:
            frame.update(extra)
        P = np.nan_to_num(np.tile(points[sl], (len(done), 1)), nan=0.0)  # z not given: 0 (an x-y mesh's)
        frame.update({"x": P[:, 0], "y": P[:, 1], "z": P[:, 2], "value": values[:, sl, 0].ravel(),
                      "c": values[:, sl, 1].ravel()})
        return pd.DataFrame(frame)

    if options.probes:
        probes = block(parts["probes"], "probe", np.array([p[0] for p in options.probes], dtype=object))
        probes = probes[list(PROBE_COLUMNS)]
    if options.lines:
        frames = []
        for name, sl, distance in parts["lines"]:
            n = sl.stop - sl.start
            frames.append(block(sl, "line", np.full(n, name, dtype=object),
                                {"distance": np.tile(distance, len(done))}))
        lines = pd.concat(frames, ignore_index=True)
        lines = lines.sort_values("step", kind="stable", ignore_index=True)[list(LINE_COLUMNS)]
    measured = None
    if options.measured:
        measured = (times, values[:, parts["measured"], 0][:, parts["measured_index"]], steps)
    return probes, lines, measured


def _gaps(results, steps) -> np.ndarray:
    """Per interval between two read steps, True where a skipped step of the run lies between them."""
    skipped = np.array(sorted(r.index for r in results if r.skipped is not None), dtype=float)
    if len(steps) < 2:
        return np.zeros(0, dtype=bool)
    lo = np.searchsorted(skipped, steps[:-1], side="right")
    return np.searchsorted(skipped, steps[1:], side="left") > lo


def _named(rows, limit=3) -> str:
    """Measured values as ``(x, y, z) at t``, the first ``limit`` of them, then how many more."""
    text = ", ".join(f"({x:.6g}, {y:.6g}, {z:.6g})" + (f" at t = {t:.9g}" if np.isfinite(t) else "")
                     for x, y, z, t in rows[:limit])
    return text + (f" and {len(rows) - limit} more" if len(rows) > limit else "")


def _not_compared_notes(table, times, steps, gaps, outside) -> list:
    """Warning records naming the measured values the run gives no simulated value for: with a time
    between two steps across a skipped one, with a time where the run is empty (a point outside the
    mesh or in a cell with no finite value at a step around it), without a time where the last step is
    empty (the overall row counts it not compared; its last step with a value and difference there given)."""
    notes = []
    empty = table["simulated"].isna().to_numpy()
    every = table["every_step"].to_numpy(dtype=bool)
    time = table["time"].to_numpy(dtype=float)
    xyzt = table[["x", "y", "z", "time"]].to_numpy(dtype=float)
    timed = empty & ~every & ~np.isin(time, outside)
    if timed.any() and len(times) > 1:
        j = np.clip(np.searchsorted(times, time, side="right") - 1, 0, len(times) - 2)
        across = timed & gaps[j] & table["step"].isna().to_numpy()
        if across.any():
            pairs = sorted({(int(steps[i]), int(steps[i + 1])) for i in j[across]})
            between = ", ".join(f"steps {a} and {b}" for a, b in pairs[:3]) + (" ..." if len(pairs) > 3 else "")
            notes.append((PhasegaugeWarning, f"{int(across.sum())} measured value(s) between {between}, across a "
                          f"skipped step, not compared (their simulated values are empty): {_named(xyzt[across])}; "
                          "repair or rewrite the skipped step's file to compare them", ""))
        timed &= ~across
    if timed.any():
        notes.append((PhasegaugeWarning, f"{int(timed.sum())} measured value(s) with times have no simulated value "
                      f"(outside the mesh or in a cell with no finite value at a step around the time), not compared: "
                      f"{_named(xyzt[timed])}; see the warnings of those steps", ""))
    last = time[every].max(initial=-np.inf)
    final = np.flatnonzero(empty & every & (time == last))
    if final.size:
        step = table["step"].iloc[final[0]]
        parts = []
        for i in final[:2]:  # (the warning stays one line under the message's length limit)
            x, y, z, _ = xyzt[i]
            same = every & (xyzt[:, 0] == x) & (xyzt[:, 1] == y) & (xyzt[:, 2] == z) & \
                (table["measured"].to_numpy() == table["measured"].iloc[i]) & ~empty
            seen = np.flatnonzero(same)
            parts.append(f"({x:.6g}, {y:.6g}, {z:.6g})" + (
                f" (last value at step {table['step'].iloc[seen[-1]]}, difference "
                f"{table['difference'].iloc[seen[-1]]:.3g})" if seen.size else " (no step has a value)"))
        more = f" and {final.size - 2} more" if final.size > 2 else ""
        notes.append((PhasegaugeWarning, f"{final.size} measured value(s) without a time have no simulated value at "
                      f"the last step {step} (t = {last:.6g}), not compared in the overall row: "
                      f"{', '.join(parts)}{more}; see that step's warnings", ""))
    return notes


def run_sample_tables(results, options, numbered: bool = False):
    """probes.csv, lines.csv, validation.csv and its summary (None where the run has none), and warning
    records: measured times outside the steps' times (their rows empty: other units?), measured times
    left out against steps ``numbered`` by their index (measure refuses those before reading; a guard),
    and measured values not compared (:func:`_not_compared_notes`). ``results`` are the run's steps, the
    skipped ones included: a measured time between two read steps across a skipped one is not compared."""
    probes, lines, measured = sample_tables(results, options)
    if measured is None:
        return probes, lines, None, None, []
    from ..analysis.probes import validation_summary, validation_table

    times, simulated, steps = measured
    rows = tuple((x, y, 0.0 if np.isnan(z) else z, *rest) for x, y, z, *rest in options.measured)  # z not given: 0
    notes = []
    outside = np.zeros(0)
    timed = np.array([np.isfinite(entry[4]) for entry in rows])
    if timed.any() and numbered:
        rows = tuple(entry for entry, t in zip(rows, timed) if not t)
        simulated = simulated[:, ~timed]
        notes.append((PhasegaugeWarning, f"{int(timed.sum())} measured value(s) with times left out: the steps store "
                      "no times (numbered 0, 1, 2 ...); give a 'time,path' listing of the steps", ""))
    elif timed.any():
        t = np.array([entry[4] for entry in rows])[timed]
        from ..analysis._grid_convergence import covered_span, span_reach

        first, last = covered_span(times, span_reach(times))
        outside = t[(t < first) | (t > last)]
        if outside.size:
            notes.append((PhasegaugeWarning, f"{outside.size} of {t.size} measured value(s) with times lie "
                          f"outside the steps' times ({times.min():.6g} to {times.max():.6g}; measured "
                          f"{outside.min():.6g} to {outside.max():.6g}): their simulated values are empty "
                          "(times in other units, or steps left out?)", ""))
    gaps = _gaps(results, steps)
    table = validation_table(rows, times, simulated, steps=steps, gaps=gaps)
    notes += _not_compared_notes(table, times, steps, gaps, outside)
    return probes, lines, table, validation_summary(table), notes
