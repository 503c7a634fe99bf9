"""Which steps of a series a run measures: a slice of step numbers, a time window, every k-th.

The choice is part of :class:`~phasegauge.run.options.MeasureOptions` (``steps``, ``time_from``,
``time_to``, ``every``); :func:`chosen_steps` applies it to a series' step times. Step numbers stay
those of the whole series, so a table of a chosen run lines up with one of the whole run.
"""

from __future__ import annotations

import math

from ..errors import OptionError
from ..model._numbers import finite_number

__all__ = ["normalize_steps", "normalize_selection", "chosen_steps"]


def normalize_steps(text) -> str | None:
    """``START:STOP:STRIDE`` (parts may be left empty, STOP excluded as in a Python slice) or one step number.

    Returns the text as given, once checked; None for every step.
    """
    if text is None:
        return None
    text = str(text).strip()
    parts = text.split(":")
    try:
        values = [int(p) if p.strip() else None for p in parts]
    except ValueError:
        values = None
    if not text or values is None or len(parts) > 3 or (len(parts) == 1 and values[0] is None):
        raise OptionError(f"steps must be START:STOP:STRIDE or one step number, found {text!r}",
                          fix="for example 0:100:5 (every 5th step from 0, stopping before 100) or 20:")
    if any(v is not None and v < 0 for v in values):
        raise OptionError(f"steps must not be negative, found {text!r}", fix="step numbers count from 0")
    if len(values) == 3 and values[2] is not None and values[2] < 1:
        raise OptionError(f"the stride of steps must be at least 1, found {text!r}", fix="for example 0:100:5")
    return text


def normalize_selection(time_from, time_to, every) -> tuple:
    """``time_from``, ``time_to`` as floats or None, ``every`` as a whole number of at least 1."""
    bounds = []
    for name, value in (("time_from", time_from), ("time_to", time_to)):
        if value is None:
            bounds.append(None)
            continue
        bounds.append(finite_number(name, value, fix="a time in the solver's units, or leave it out for no bound"))
    if bounds[0] is not None and bounds[1] is not None and bounds[0] > bounds[1]:
        raise OptionError(f"time_from {bounds[0]:g} lies after time_to {bounds[1]:g}", fix="swap the two times")
    if isinstance(every, bool) or not isinstance(every, int) or every < 1:
        raise OptionError(f"every must be a whole number of at least 1, found {every!r}",
                          fix="every 2 keeps every second chosen step")
    return bounds[0], bounds[1], every


def chosen_steps(times, *, steps=None, time_from=None, time_to=None, every=1, where: str = "") -> list:
    """The step numbers a run measures, in order.

    Parameters
    ----------
    times : sequence of float
        Time of each step of the series (NaN where unknown: such a step is kept by a time window
        only when no window is given).
    steps : str or None
        ``START:STOP:STRIDE`` over the step numbers (see :func:`normalize_steps`).
    time_from, time_to : float or None
        Keep steps whose time lies within [time_from, time_to] (inclusive, to a round-off
        slack of 1e-9 of the largest time).
    every : int
        Then keep every ``every``-th of the steps left, starting with the first.

    Raises
    ------
    OptionError
        No step left (with the series' step count and time span).
    """
    n = len(times)
    chosen = list(range(n))
    if steps is not None:
        parts = [int(p) if p.strip() else None for p in str(steps).split(":")]
        if len(parts) == 1:
            chosen = [parts[0]] if parts[0] < n else []
        else:
            chosen = list(range(n))[slice(*parts)]
    finite = [abs(t) for t in times if math.isfinite(t)]
    slack = 1e-9 * max(finite, default=0.0)  # a time written as 0.30000000000000004 is still "0.3"
    if time_from is not None:
        chosen = [i for i in chosen if times[i] >= time_from - slack]
    if time_to is not None:
        chosen = [i for i in chosen if times[i] <= time_to + slack]
    chosen = chosen[::every]
    if not chosen:
        finite = [t for t in times if math.isfinite(t)]
        span = f", times {min(finite):g} to {max(finite):g}" if finite else ""
        raise OptionError(f"the step choice leaves no step (the series has {n} step{'s' if n != 1 else ''}"
                          f" numbered from 0{span})", where=where,
                          fix="widen --steps, --time-from or --time-to (see 'phasegauge inspect')")
    return chosen


def numbered_steps(series, indices) -> bool:
    """True when the chosen steps are numbered 0, 1, 2 ... because their files store no time: each
    takes its time from its step number, and the first chosen file, read whole (not an XDMF file's,
    whose times the collection holds), stores none beyond its head either."""
    from ..io._formats import stores_time

    if not all(series.steps[i].time_origin == "index" for i in indices):
        return False
    step = series.steps[indices[0]]
    return step.path.lower().endswith((".xdmf", ".xmf")) or stores_time(step.path) is False
