"""Gaps in a series: steps that may be missing, from the stored times or else the file numbers.

:class:`~phasegauge.io.Series` warns through :func:`warn_series_gaps` after discovery. With stored times, a gap is
a step of a whole multiple (two or more) of the most common output interval; without them, a jump
of a whole multiple of the smallest difference between file numbers.
"""

from __future__ import annotations

import os
import re
import warnings

import numpy as np

from ..errors import SeriesError, SeriesWarning
from ._series_names import INTERVAL_TOLERANCE, NAME_NUMBER, first_three, name_number

__all__ = ["numbering_gaps", "output_interval", "time_gaps", "warn_series_gaps", "warn_time_resolution", "two_times",
           "coarse_time_share", "restart_problem", "repeated_times_fix", "INTERVAL_TOLERANCE", "RESOLUTION_SHARE"]

#: steps within this share of the output interval count as that interval where a series must have one
#: (a solver writes at the first time step past each output time: the steps scatter by a few parts in
#: a thousand)
_NEAR = 0.05
#: a gap differs from a step beside it by at least this share of the interval (:func:`time_gaps`)
_JUMP = 0.5

#: times stored to a resolution of this share of the step interval or more are warned of: the
#: intervals, and every rate per time, may be off by that share (our threshold)
RESOLUTION_SHARE = 0.01


def restart_problem(known: list, k: int) -> SeriesError | None:
    """The error for times that go back after step ``known[k]`` to times the run had written (a restart
    wrote those steps again), or None where no later time repeats an earlier one (names out of order).
    ``known``: the steps with known times, in the series' order."""
    before, after = known[k], known[k + 1]
    again = [after]  # the steps written again: from the step after the drop while they rise to the drop
    for s in known[k + 2:]:
        if s.time > before.time or s.time <= again[-1].time:
            break
        again.append(s)
    seen = np.array([s.time for s in known[:k + 1]])
    slack = 1e-9 * max(float(np.max(np.abs(seen))), 1e-300)
    if not any(np.any(np.abs(seen - s.time) <= slack) for s in again):
        return None
    shown = two_times(before.time, after.time)
    span = two_times(again[0].time, again[-1].time)
    n = after.index
    return SeriesError(
        f"times go back at step {n} (t = {shown[1]} after {shown[0]} at step {before.index}): a restart "
        f"wrote {len(again)} step{'s' if len(again) > 1 else ''} again (t = {span[0]} to {span[1]}), and a run "
        "measures one copy of each time", where=f"{after.path}, step {n}",
        fix=f"measure one run's steps (--steps :{n} up to the restart, --steps {n}: from it; recipe: "
            f"steps = \":{n}\"), or give a 'time,path' listing of the first run's steps before t = {shown[1]} "
            "and the restart's (compare: --steps-a, --steps-b)")


def repeated_times_fix(known: list) -> str:
    """The fix for a time written twice in a row: how many times repeat, and the ways to keep one copy."""
    _, counts = np.unique([s.time for s in known], return_counts=True)
    repeated = int(np.count_nonzero(counts > 1))
    head = f"{repeated} times occur twice or more (a restart writes steps again): " if repeated > 1 else ""
    return head + ("remove the repeated step, choose the steps (--steps, --time-from, --time-to) or give a 'time,path' "
                   "listing of those to keep; a parallel run's pieces: one file or .vtm")


def two_times(a: float, b: float) -> tuple:
    """``a`` and ``b`` as text, with the fewest significant digits (six or more) that tell them apart."""
    for digits in range(6, 18):
        shown = (f"{a:.{digits}g}", f"{b:.{digits}g}")
        told = shown[0] != shown[1] if a != b else float(shown[0]) == a  # equal times: shown exactly
        if told:
            return shown
    return repr(float(a)), repr(float(b))


def _coarse_times(steps: list):
    """``(step, share, interval)``: the step whose stored time's resolution is the largest share of
    its own interval (the shorter of those to its neighbours in time), that share and that interval;
    None when no time is stored coarsely or the times do not increase anywhere."""
    known = [s for s in steps if np.isfinite(s.time)]
    if not any(s.time_resolution > 0 for s in known) or len(known) < 2:
        return None
    times = np.array([s.time for s in known])
    gaps = np.diff(times)
    gaps = np.where(gaps > 0, gaps, np.nan)  # repeated or reversed times are reported, with their cause
    local = np.fmin(np.r_[np.nan, gaps], np.r_[gaps, np.nan])  # each step's shorter neighbouring interval
    share = np.array([s.time_resolution for s in known]) / local
    if not np.isfinite(share).any():
        return None
    worst = int(np.nanargmax(share))
    return known[worst], float(share[worst]), float(local[worst])


def coarse_time_share(steps: list) -> float:
    """The largest share of a step's own interval that its stored time's resolution is (0: none)."""
    found = _coarse_times(steps)
    return 0.0 if found is None else found[1]


def warn_time_resolution(steps: list, where: str) -> None:
    """Warn (:class:`SeriesWarning`) when the files store the times too coarsely for the step interval:
    single precision tells 1.0000001 from 1 but not 1.00000005 (about 7 digits), so at t = 1 s steps of
    1e-7 s read as 1, 1.0000001, 1.0000002, 1.0000004."""
    found = _coarse_times(steps)
    if found is None:
        return
    worst, share, interval = found
    if share >= RESOLUTION_SHARE:
        warnings.warn(SeriesWarning(
            f"the files store the times in single precision, which tells times near {worst.time:.8g} apart only "
            f"to {worst.time_resolution:.2g}, {share:.0%} of the step interval ({interval:.2g}): the intervals and "
            "every rate per time may be off by that share; write the times in double precision, or give a "
            "'time,path' listing", where=where), stacklevel=4)


def _number_of(name: str):
    """The last number in a file name and the name with it masked, or None."""
    stem = os.path.basename(name)
    matches = list(re.finditer(NAME_NUMBER, stem))
    if not matches:
        return None
    last = matches[-1]
    return stem[:last.start()] + "#" + stem[last.end():], name_number(last.group())


def numbering_gaps(files: list) -> list:
    """Gaps in the numbering of ``files`` (natural order): ``[(before, after), ...]`` file numbers.

    Files named alike (same text around their last number) are compared; the
    usual output interval is the smallest difference between consecutive
    numbers, and a gap is a jump of a whole multiple (two or more) of it (for
    decimal numbers, ``t_0.05.vtu``, to a part in a thousand).
    A change of interval (0, 10, 20, 40, 60) reads as one gap, at the change.
    """
    groups: dict = {}
    for f in files:
        parsed = _number_of(f)
        if parsed is not None:
            groups.setdefault(parsed[0], []).append(parsed[1])
    gaps = []
    for numbers in groups.values():
        numbers = sorted(set(numbers))
        if len(numbers) < 3:
            continue
        diffs = np.diff(numbers)
        stride = diffs.min()
        exact = all(isinstance(n, int) for n in numbers)
        for a, b, d in zip(numbers[:-1], numbers[1:], diffs):
            ratio = d / stride
            whole = d % stride == 0 if exact else abs(ratio - round(ratio)) <= INTERVAL_TOLERANCE * ratio
            if ratio >= 2 - (0 if exact else INTERVAL_TOLERANCE) and whole:
                gaps.append((a, b))
    return gaps


def output_interval(steps) -> float:
    """The most common of ``steps`` (positive time steps), equal to a part in a thousand.

    The steps are sorted and cut where one differs from the next by more than
    :data:`INTERVAL_TOLERANCE` of it; the largest group wins (the smaller interval on a tie),
    and its median is the interval. One short step (an extra output at a restart) or a few
    adaptive steps do not move it.
    """
    steps = np.sort(np.asarray(steps, dtype=np.float64))
    cuts = np.flatnonzero(np.diff(steps) > INTERVAL_TOLERANCE * steps[1:]) + 1
    bounds = np.concatenate([[0], cuts, [steps.size]])
    largest = int(np.argmax(np.diff(bounds)))  # the first (smallest) group on a tie
    return float(np.median(steps[bounds[largest]:bounds[largest + 1]]))


def time_gaps(times) -> tuple[list, float]:
    """Gaps in a series' own times: ``([(before, after), ...], interval)``.

    The output interval is the most common step between consecutive (finite, increasing) times
    (:func:`output_interval`, then the median of every step within 5 % of it), and a gap is a step of
    a whole multiple of it (two or more). Solver files numbered by time-step index (0, 13, 26, 55, ...) with a
    steady output interval in time show no gap; irregular output times that are no multiple of
    the interval (an extra output at a restart, adaptive steps) are no gap either, and where no
    interval holds half the steps (outputs at irregular times) there is none. A step within 5 % of one
    interval of a whole multiple counts as one (a solver writes at the first time step past each
    output time), widened by the interval's own standard error times the multiple. A gap also differs
    by half an interval or more from a step beside it: an adaptive time step written every step that
    grows smoothly past two intervals is none (the steps beside it are as long).
    """
    times = np.asarray([t for t in times if np.isfinite(t)], dtype=np.float64)
    if times.size < 3:
        return [], float("nan")
    diffs = np.diff(times)
    steps = diffs[diffs > 0]
    if steps.size == 0:
        return [], float("nan")
    interval = output_interval(steps)
    near = np.abs(steps - interval) <= _NEAR * interval
    if 2 * np.count_nonzero(near) < steps.size:
        return [], interval  # no interval holds half the steps (adaptive output times): nothing to miss
    # the median of every step near it (the cluster of a part in a thousand may be a handful of steps
    # of jittered outputs, off by a few per cent: ten intervals would then be off by a third of one)
    interval = float(np.median(steps[near]))
    ratio = diffs / interval
    # outputs a little late or early: 5 % of one interval, and the interval's own error (two standard
    # errors of that median) times the multiple; never half an interval
    error = 1.2533 * float(np.std(steps[near])) / np.sqrt(np.count_nonzero(near)) / interval
    slack = np.minimum(_NEAR + 2.0 * error * ratio, 0.45)
    whole = np.abs(ratio - np.round(ratio)) <= slack
    jumps = np.flatnonzero((ratio >= 2 - slack) & whole)
    # a missing output is a jump from the steps beside it; an adaptive time step that grows smoothly
    # through two intervals (1.96, 2.0, 2.04 of it, written every step) is none
    apart = np.abs(np.diff(ratio)) >= _JUMP
    lone = np.zeros(ratio.size, dtype=bool)
    lone[1:] |= apart
    lone[:-1] |= apart
    jumps = jumps[lone[jumps]]
    return [(float(times[i]), float(times[i + 1])) for i in jumps], interval


def warn_series_gaps(files: list, where: str, steps: list) -> None:
    """Warn (:class:`SeriesWarning`) of steps that may be missing: from the stored times, else the file numbers."""
    if steps and all(s.time_origin in ("file", "xdmf", "listing", "folder_name", "unknown") for s in steps) and \
            any(s.time_origin != "unknown" for s in steps):
        # the files store their times: those, not the file numbers, say whether outputs are missing
        known = np.array([s.time for s in steps if np.isfinite(s.time)])
        if np.any(np.diff(known) <= 0):
            return  # times out of order: the order is reported (or sorted) instead
        if coarse_time_share(steps) >= RESOLUTION_SHARE:
            return  # the times' storage is warned of: their jumps are its rounding
        gaps, interval = time_gaps(known)
        # a jump across steps whose files could not be read is those steps, not missing ones (their
        # own errors name them), when it spans as many intervals as they fill
        bridged, last, unread = {}, None, 0
        for s in steps:
            if np.isfinite(s.time):
                if unread and last is not None:
                    bridged[(float(last), float(s.time))] = unread
                last, unread = s.time, 0
            else:
                unread += 1
        gaps = [g for g in gaps if round((g[1] - g[0]) / interval) - 1 > bridged.get(g, 0)]
        if gaps:
            shown = first_three(["{} to {}".format(*two_times(a, b)) for a, b in gaps])
            warnings.warn(SeriesWarning(f"the step times jump ({shown}) against the series' most common output "
                                        f"interval {interval:.4g}: steps may be missing or the output interval changed",
                                        where=where), stacklevel=3)
        return
    gaps = numbering_gaps(files)
    if not gaps:
        return
    shown = first_three([f"{a} to {b}" for a, b in gaps])
    if any(s.time_origin == "index" for s in steps):
        then = ("the times are step indices, so steps after a gap get too early a time: give a 'time,path' "
                "listing if steps are missing")
    else:
        then = "the times stored in the files are used, so the history stays right"
    warnings.warn(SeriesWarning(f"the file numbers jump ({shown}): steps may be missing or the output interval "
                                f"changed; {then}", where=where), stacklevel=3)
