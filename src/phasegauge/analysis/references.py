"""Published benchmark values and checks of a run against them.

Reference tables have one row per checked quantity with the columns

``quantity``
    What is checked, read from the run table (one row per output time, with a
    ``time`` column):

    * ``NAME``: column NAME at ``time`` (linear interpolation between outputs);
    * ``min:NAME`` / ``max:NAME``: the smallest / largest value of NAME over
      the run;
    * ``time_of_min:NAME`` / ``time_of_max:NAME``: the time at which it occurs.

    Extrema are refined by a parabola through the discrete extremum and its two
    neighbours (common practice), so they do not snap to the output times. An
    extremum the run may not hold is not checked: one at the run's first or last
    output (the run may start or end before the true one; the value there is
    checked with a ``NAME`` row at that time), or one whose ``time_of_`` row's band
    the run's outputs do not cover. Nor is a value across a lost output (a skipped
    step, or an output where the column is not finite): a ``NAME`` value between two
    outputs with a lost one between them, an extremum whose three outputs straddle
    one or whose ``time_of_`` band holds one.
``time``
    Time of a ``NAME`` check (the run covers it to :data:`~._grid_convergence.SPAN_REACH_SHARE` of its
    median output interval, for round-off in accumulated times); empty for extrema
    (a time there is refused).
``value``
    The reference value.
``tolerance``
    Half-width of the accepted band: ``value +- tolerance``.
``low``, ``high`` (optional)
    Explicit band limits instead of ``value +- tolerance``, both or neither
    (``inf`` or ``-inf`` for a one-sided band); widened by ``tolerance`` when
    that is given.
``source`` (optional)
    Where the value comes from; carried to the result.

The result of a check has the columns ``quantity, value, time, reference,
reference_low, reference_high, verdict`` (``pass`` inside the band, ``fail``
outside, ``not_applicable`` when the run does not cover the quantity, e.g. it ends
before the checked time), ``note`` (why a check is not applicable) and ``source``.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from ..errors import OptionError
from ._grid_convergence import covered_span, span_reach

__all__ = ["RISING_BUBBLE_CASE1", "RISING_BUBBLE_CASE1_SOURCE", "check_rising_bubble",
           "check_against_table", "check_reference_table", "bubble_history", "largest_droplet",
           "reference_columns", "circularity_bias", "CHECK_COLUMNS", "NOT_APPLICABLE"]

#: columns of every check result
CHECK_COLUMNS = ("quantity", "value", "time", "reference", "reference_low", "reference_high",
                 "verdict", "note", "source")

#: the verdict of a check the run does not cover (a word pandas reads back as text, not as NaN)
NOT_APPLICABLE = "not_applicable"

RISING_BUBBLE_CASE1_SOURCE = (
    "Hysing et al. 2009, Quantitative benchmark computations of two-dimensional bubble dynamics, "
    "Int. J. Numer. Meth. Fluids 60:1259, case 1 (values from memory)")

# Hysing et al. (2009), test case 1 (rho 1000/100, mu 10/1, g 0.98, sigma 24.5; domain 1 x 2,
# bubble r = 0.25 at (0.5, 0.5)). The values below are FROM MEMORY (as quoted in secondary
# sources), not re-read from the paper; see REFERENCES.md. The bands are this project's choice:
# - minimum circularity 0.9013 at t ~ 1.90: band +- 0.002 (about the spread one expects between
#   converged codes plus the uncertainty of recalled digits), its time +- 0.1;
# - maximum rise velocity 0.2417 at t ~ 0.92: band +- 0.002 (about 1 %), its time +- 0.1 (the
#   velocity peak is flat, so its time is poorly defined);
# - centroid height at t = 3: the groups span 1.0799 to 1.0817; band that spread +- 0.002.
RISING_BUBBLE_CASE1 = pd.DataFrame(
    [
        ("min:circularity", np.nan, 0.9013, 0.002, np.nan, np.nan),
        ("time_of_min:circularity", np.nan, 1.90, 0.1, np.nan, np.nan),
        ("max:velocity_y", np.nan, 0.2417, 0.002, np.nan, np.nan),
        ("time_of_max:velocity_y", np.nan, 0.92, 0.1, np.nan, np.nan),
        ("centroid_y", 3.0, 1.081, 0.002, 1.0799, 1.0817),
    ],
    columns=["quantity", "time", "value", "tolerance", "low", "high"],
).assign(source=RISING_BUBBLE_CASE1_SOURCE)
RISING_BUBBLE_CASE1.attrs["note"] = "reference values recalled from memory; see REFERENCES.md"

_PREFIXES = ("min", "max", "time_of_min", "time_of_max")


def check_reference_table(reference: pd.DataFrame) -> pd.DataFrame:
    """Check a reference table and bring it to its full form (a copy; read a CSV file with
    :func:`phasegauge.io.read_reference_table`).

    Returns
    -------
    DataFrame
        Lower-case columns ``quantity, time, value, tolerance, low, high, source`` (missing
        optional columns filled: NaN, and '' for ``source``), numbers as float64.

    Raises
    ------
    OptionError
        Not a table; missing columns, non-numeric values, a negative tolerance, an unknown
        prefix, only one of low and high, a band with low > high, a ``NAME`` row without a
        time or an extremum's row with one. Rows are named by their number among the table's
        rows (1 the first under the header) and their quantity.
    """
    if not isinstance(reference, pd.DataFrame):
        raise OptionError(f"a reference table must be a DataFrame, found {type(reference).__name__}",
                          fix="read a CSV file with phasegauge.io.read_reference_table")
    table = reference.copy()
    where = str(reference.attrs.get("path", "reference table"))
    table.columns = [str(c).strip().lower() for c in table.columns]
    missing = [c for c in ("quantity", "value") if c not in table.columns]
    if missing:
        raise OptionError(f"reference table lacks columns {missing}; found {', '.join(table.columns)}",
                          where=where, fix="give columns quantity, time, value, tolerance (low, high optional)")
    for c in ("time", "tolerance", "low", "high"):
        if c not in table.columns:
            table[c] = np.nan
    if "source" not in table.columns:
        table["source"] = ""
    for c in ("time", "value", "tolerance", "low", "high"):
        try:
            table[c] = pd.to_numeric(table[c]).astype(np.float64)
        except (TypeError, ValueError):
            raise OptionError(f"reference column '{c}' must hold numbers", where=where,
                              fix="leave a cell empty instead of writing text") from None
    table["quantity"] = table["quantity"].astype(str).str.strip()
    table["source"] = ["" if pd.isna(x) else str(x) for x in table["source"]]
    def refuse(bad, what, fix):
        rows = [f"{k + 1} ({q})" for k, q in enumerate(table["quantity"]) if bad.iloc[k]]
        raise OptionError(f"reference row{'s' if len(rows) > 1 else ''} {', '.join(rows)}: {what}", where=where,
                          fix=fix)

    kind = table["quantity"].str.rpartition(":")[0]
    unknown = (kind != "") & ~kind.isin(_PREFIXES)
    if np.any(unknown):
        refuse(unknown, "unknown kind of quantity",
               fix="use NAME, min:NAME, max:NAME, time_of_min:NAME or time_of_max:NAME")
    if np.any(table["tolerance"] < 0):
        refuse(table["tolerance"] < 0, "negative tolerance", fix="give the half-width of the accepted band")
    one_limit = table["low"].isna() != table["high"].isna()
    if np.any(one_limit):
        refuse(one_limit, "only one of low and high given",
               fix="give both limits (inf or -inf for a one-sided band), or neither for value +- tolerance")
    no_band = table["tolerance"].isna() & table["low"].isna()
    if np.any(no_band):
        refuse(no_band, "neither a tolerance nor low and high given", fix="give a tolerance (0 for an exact value)")
    if np.any(table["low"] > table["high"]):
        refuse(table["low"] > table["high"], "low > high", fix="swap low and high")
    if np.any((kind == "") & table["time"].isna()):
        refuse((kind == "") & table["time"].isna(), "no time (a NAME row needs one)",
               fix="give the time, or use min:NAME / max:NAME for extrema")
    if np.any((kind != "") & table["time"].notna()):
        refuse((kind != "") & table["time"].notna(), "a time given, but an extremum is taken over the whole run",
               fix="leave the time empty, or check NAME at that time with a plain row")
    if np.any(table["value"].isna()):
        refuse(table["value"].isna(), "no value", fix="fill the value column")
    return table


def reference_columns(reference: pd.DataFrame) -> list:
    """The run columns a checked reference table names (``NAME`` of every row), in order."""
    return list(dict.fromkeys(q.rpartition(":")[2] for q in reference["quantity"]))


def _finite(t: np.ndarray, v: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """The outputs where both the time and the value are finite, in time order."""
    ok = np.isfinite(t) & np.isfinite(v)
    order = np.argsort(t[ok], kind="stable")
    return t[ok][order], v[ok][order]


def _reach(t: np.ndarray) -> tuple[float, float]:
    """The time span the outputs ``t`` (sorted, finite, not empty) cover: their first and last time widened
    by the span reach of the median output interval (:func:`._grid_convergence.covered_span`)."""
    return covered_span(t, span_reach(t))


def _extremum(t: np.ndarray, v: np.ndarray, kind: str) -> tuple[float, float, str, tuple]:
    """Extremum value and time, refined by a parabola through the three samples around it (its vertex
    kept within their two intervals), ``'first'`` or ``'last'`` when the extreme output is the run's first
    or last one ('' inside), and the times of the outputs the value was taken from."""
    t, v = _finite(t, v)
    if v.size == 0:
        return np.nan, np.nan, "", ()
    i = int(np.argmin(v) if kind == "min" else np.argmax(v))
    if 0 < i < v.size - 1:
        t0, t1, t2 = t[i - 1:i + 2]
        v0, v1, v2 = v[i - 1:i + 2]
        # parabola through the three points, Newton form p(t) = v0 + d1 (t - t0) + a (t - t0)(t - t1)
        d1 = (v1 - v0) / (t1 - t0)
        a = ((v2 - v1) / (t2 - t1) - d1) / (t2 - t0)
        if a != 0 and (a > 0) == (kind == "min"):
            ts = 0.5 * (t0 + t1) - d1 / (2 * a)
            if t0 <= ts <= t2:
                return float(v0 + d1 * (ts - t0) + a * (ts - t0) * (ts - t1)), float(ts), "", (t0, t1, t2)
    edge = "first" if i == 0 else "last" if i == v.size - 1 else ""
    return float(v[i]), float(t[i]), edge, tuple(t[max(i - 1, 0):i + 2])


def _lost_outputs(t_all: np.ndarray, v_all: np.ndarray, skipped_times) -> np.ndarray:
    """Times of the outputs a column lacks, sorted: the skipped steps' (finite) times and the outputs whose
    value is not finite."""
    skipped = np.asarray(list(skipped_times), dtype=np.float64).ravel()
    lost = np.concatenate([skipped, t_all[np.isfinite(t_all) & ~np.isfinite(v_all)]])
    return np.sort(lost[np.isfinite(lost)])


def _lost_between(lost: np.ndarray, start: float, stop: float) -> float:
    """The first lost output strictly between ``start`` and ``stop``, or NaN."""
    inside = lost[(lost > start) & (lost < stop)]
    return float(inside[0]) if inside.size else np.nan


def _lost_words(at: float, skipped_times, column: str) -> str:
    """Why the output at ``at`` is lost: its step skipped, or the column not finite there."""
    skipped = np.asarray(list(skipped_times), dtype=np.float64).ravel()
    return "its step skipped" if np.any(skipped == at) else f"{column} not finite there"


def _gap_note(t: np.ndarray, at: float, lost: np.ndarray, column: str, skipped_times) -> str:
    """Why a value interpolated at ``at`` is not the run's: the two outputs around it have a lost output
    between them ('' when they have none, or ``at`` is an output's own time)."""
    j = int(np.searchsorted(t, at))
    if lost.size == 0 or j == 0 or j >= t.size or t[j] == at:
        return ""
    gap = _lost_between(lost, t[j - 1], t[j])
    if np.isnan(gap):
        return ""
    return (f"t = {at:g} lies between the outputs at t = {t[j - 1]:g} and {t[j]:g}, with an output lost between "
            f"them (t = {gap:g}, {_lost_words(gap, skipped_times, column)}): a value interpolated across the gap "
            "is not the run's")


def _band(ref) -> tuple[float, float]:
    """The accepted band of a checked reference row: low/high widened by the tolerance, or value +- tolerance."""
    tol = 0.0 if np.isnan(ref["tolerance"]) else float(ref["tolerance"])
    if np.isnan(ref["low"]):
        return float(ref["value"] - tol), float(ref["value"] + tol)
    return float(ref["low"] - tol), float(ref["high"] + tol)


def check_against_table(run: pd.DataFrame, reference, *, skipped_times=()) -> pd.DataFrame:
    """Check a run's history against a reference table.

    Parameters
    ----------
    run : DataFrame
        One row per output time with a ``time`` column and the columns the
        reference names (e.g. a steps table, or :func:`bubble_history`).
    reference : DataFrame
        The reference table (format in the module notes): columns
        ``quantity, time, value, tolerance`` and optional ``low, high, source``
        (:func:`phasegauge.io.read_reference_table` reads one from a CSV file).
    skipped_times : sequence of float, optional
        Times of the run's outputs that were not read (steps skipped as damaged); NaN times are
        left out. With the outputs where a column is not finite they are the run's lost outputs.

    Returns
    -------
    DataFrame with columns ``quantity, value, time, reference, reference_low,
    reference_high, verdict, note, source``
        ``value`` is the run's value, ``time`` the time it belongs to (the
        checked time, or the time of the extremum), ``verdict`` ``pass``,
        ``fail`` or ``not_applicable`` (:data:`NOT_APPLICABLE`: the run does not
        cover the time, its extremum lies at its first or last output, its outputs
        do not cover the band of the extremum's time, or the column is all NaN; a
        ``NAME`` check between two outputs with a lost output between them, an
        extremum whose three outputs straddle a lost output or whose time band holds
        one; ``value`` is then NaN and ``note`` says which).

    Raises
    ------
    OptionError
        A run without ``time``, a reference that is not a valid table (see
        :func:`check_reference_table`), or a reference naming a column the run lacks.
    """
    if not isinstance(run, pd.DataFrame) or "time" not in run.columns:
        raise OptionError("the run table needs a 'time' column",
                          fix="pass a table with one row per output time")
    table = check_reference_table(reference)
    missing = [c for c in reference_columns(table) if c not in run.columns]
    if missing:
        raise OptionError(f"reference quantities need column{'s' if len(missing) > 1 else ''} "
                          f"{', '.join(repr(c) for c in missing)}, which the run lacks; columns: "
                          f"{', '.join(map(str, run.columns))}",
                          fix="pass a run table with that column or drop the row")
    t_all = run["time"].to_numpy(dtype=np.float64)
    time_bands = {ref["quantity"][len("time_of_"):]: _band(ref) for _, ref in table.iterrows()
                  if ref["quantity"].startswith("time_of_")}  # 'min:NAME' -> the band of its time
    rows = []
    for _, ref in table.iterrows():
        quantity = ref["quantity"]
        kind, _, column = quantity.rpartition(":")
        v_all = run[column].to_numpy(dtype=np.float64)
        t, v = _finite(t_all, v_all)
        lost = _lost_outputs(t_all, v_all, skipped_times)
        low, high = _band(ref)
        note = "" if t.size else f"{column} is not finite at any output"
        if not kind:
            value, at = _value_at(t, v, float(ref["time"])), float(ref["time"])
            if t.size and np.isnan(value):
                note = f"the run's outputs of {column} (t = {t[0]:g} to {t[-1]:g}) do not reach t = {at:g}"
            elif t.size:
                note = _gap_note(t, at, lost, column, skipped_times)
        else:
            extreme = kind.rsplit("_", 1)[-1]
            value, at, edge, used = _extremum(t, v, extreme)
            band = time_bands.get(f"{extreme}:{column}")
            word = "smallest" if extreme == "min" else "largest"
            straddled = _lost_between(lost, used[0], used[-1]) if used else np.nan
            in_band = _lost_between(lost, band[0], band[1]) if band is not None else np.nan
            if edge:
                note = (f"the {word} {column} ({value:.6g}) is at the run's {edge} output, t = {at:g}: the run may "
                        f"not hold its {extreme}imum (check the value there with a plain {column} row at t = {at:g})")
            elif t.size and band is not None and not (_reach(t)[0] <= band[0] and band[1] <= _reach(t)[1]):
                note = (f"the run's outputs of {column} (t = {t[0]:g} to {t[-1]:g}) do not cover the band of the "
                        f"{extreme}imum's time, {band[0]:g} to {band[1]:g}")
            elif not np.isnan(straddled):
                lost_why = _lost_words(straddled, skipped_times, column)
                note = (f"the outputs around the {word} {column} (t = {', '.join(f'{x:g}' for x in used)}) have an "
                        f"output lost between them (t = {straddled:g}, {lost_why}): a parabola across the gap is "
                        "not the run's")
            elif not np.isnan(in_band):
                lost_why = _lost_words(in_band, skipped_times, column)
                note = (f"the run lost its output of {column} at t = {in_band:g} ({lost_why}), inside the band of "
                        f"the {extreme}imum's time, {band[0]:g} to {band[1]:g}: the run may not hold its {extreme}imum")
            if kind.startswith("time_of_"):
                value = at
        if note:
            value, verdict = np.nan, NOT_APPLICABLE
        else:
            finite = [abs(x) for x in (low, high) if np.isfinite(x)]
            slack = 1e-12 * max(finite + [1.0])
            verdict = "pass" if low - slack <= value <= high + slack else "fail"
        rows.append((quantity, value, at, float(ref["value"]), low, high, verdict, note, ref["source"]))
    return pd.DataFrame(rows, columns=list(CHECK_COLUMNS))


def _value_at(t: np.ndarray, v: np.ndarray, at: float) -> float:
    """The value at time ``at`` interpolated linearly between the outputs ``t`` (sorted, finite); NaN
    outside the span they cover (:func:`_reach`: the last output's value a round-off beyond it)."""
    if t.size == 0:
        return np.nan
    low, high = _reach(t)
    if not low <= at <= high:
        return np.nan
    return float(np.interp(at, t, v))


def check_rising_bubble(bubble: pd.DataFrame, *, reference: pd.DataFrame | None = None,
                        cell_size: float | None = None, quad_grid: bool = True, skipped_times=()) -> pd.DataFrame:
    """Check a rising-bubble run against Hysing et al. (2009), test case 1.

    Parameters
    ----------
    bubble : DataFrame with columns ``time``, ``circularity``, ``centroid_y``, ``velocity_y``
        The bubble's history (one row per output time): circularity = perimeter
        of the equal-area circle / perimeter, height of the centroid along the rise
        and mean rise velocity (int u dV / V over the bubble), in the benchmark's units
        (:func:`bubble_history`; an optional ``volume``, the bubble's area, gives its radius).
    reference : DataFrame, optional
        A table in the format of :data:`RISING_BUBBLE_CASE1` (default that table).
    cell_size : float, optional
        The cell size h of a run of volume-of-fluid cell fractions (a sharp interface on
        cells): the circularity of such a run reads a perimeter bias of its own, and
        ``min:circularity`` is not applicable where that bias exceeds a quarter of the
        band's width (:func:`circularity_bias`). None (a diffuse run, a level set, or h
        unknown): no such rule.
    quad_grid : bool
        The cells the interface crosses are axis-aligned squares: a regular grid of quads, or a quadtree's
        leaves (else triangles, polygons or distorted quads).
    skipped_times : sequence of float, optional
        Times of the run's skipped outputs (:func:`check_against_table`).

    Returns
    -------
    DataFrame
        As :func:`check_against_table`: rows ``min:circularity``,
        ``time_of_min:circularity``, ``max:velocity_y``,
        ``time_of_max:velocity_y`` and ``centroid_y`` (at t = 3).

    Notes
    -----
    The reference values are recalled from memory (REFERENCES.md marks them
    so): minimum circularity 0.9013 at t ~ 1.90, maximum rise velocity 0.2417
    at t ~ 0.92, centroid height 1.081 at t = 3 (groups 1.0799 to 1.0817).
    Bands: +- 0.002 on the circularity and velocity values, +- 0.1 on the
    times of the extrema, and the groups' spread +- 0.002 on the centroid.
    An extremum at the run's first or last output, or whose time band (0.82 to
    1.02, 1.8 to 2.0) the run does not cover, is not applicable: a restarted
    run, or one that ends early, does not hold it.

    References
    ----------
    Hysing, Turek, Kuzmin, Parolini, Burman, Ganesan & Tobiska (2009),
    "Quantitative benchmark computations of two-dimensional bubble dynamics",
    Int. J. Numer. Meth. Fluids 60:1259-1288.
    """
    need = [c for c in ("time", "circularity", "centroid_y", "velocity_y")
            if not isinstance(bubble, pd.DataFrame) or c not in bubble.columns]
    if need:
        raise OptionError(f"the bubble table lacks columns {need}",
                          fix="give time, circularity, centroid_y and velocity_y (see bubble_history)")
    checks = check_against_table(bubble, RISING_BUBBLE_CASE1 if reference is None else reference,
                                 skipped_times=skipped_times)
    if cell_size is not None and np.isfinite(cell_size) and cell_size > 0:
        _resolution_rule(checks, bubble, float(cell_size), quad_grid)
    return checks


#: the perimeter bias of circularity from cell fractions on a regular grid of quads, as B (h/R)^2
QUAD_BIAS_FACTOR = 0.34
#: the relative bias on triangles and other meshes (the contour reads 0.6 to 0.9 % long): its upper end
OTHER_CELLS_BIAS = 0.009


def circularity_bias(radius_cells: float, circularity: float, quad_grid: bool = True) -> float:
    """The perimeter bias of a drop's circularity measured from exact volume-of-fluid cell fractions
    (README, droplets.csv): what the measured circularity reads above the shape's (negative: below).

    On a regular grid of quads the c = 0.5 contour of the point values rebuilt from the cells is
    short by a second-order amount, so circularity reads high by about ``QUAD_BIAS_FACTOR (h / R)**2``
    (``radius_cells`` = R / h, h the size of the cells the interface crosses); a quadtree refined about the
    interface takes the same rule (measured: -0.0001 to -0.0010 at 20 to 40 of its finest cells in radius, no
    more than the rule's 0.00085 at 20); on triangles, polygons and distorted quads the contour is long and
    circularity reads low by 0.6 to 0.9 % of ``circularity`` at any resolution (``OTHER_CELLS_BIAS``,
    its upper end).
    """
    if not quad_grid:
        return -OTHER_CELLS_BIAS * circularity
    return QUAD_BIAS_FACTOR / radius_cells ** 2


def _resolution_rule(checks: pd.DataFrame, bubble: pd.DataFrame, h: float, quad_grid: bool) -> None:
    """``min:circularity`` not applicable (in place) where the perimeter bias of the bubble's cell fractions
    exceeds a quarter of the band's width (our threshold), with a note naming the resolution, the bias and
    the fix."""
    rows = np.flatnonzero((checks["quantity"] == "min:circularity") & (checks["verdict"] != NOT_APPLICABLE))
    for k in rows:
        at = float(checks.at[k, "time"])
        value = float(checks.at[k, "value"])
        times = bubble["time"].to_numpy(dtype=np.float64)
        area = bubble["volume"].to_numpy(dtype=np.float64) if "volume" in bubble.columns else np.full(times.size,
                                                                                                      np.nan)
        ok = np.isfinite(times) & np.isfinite(area) & (area > 0)
        # the bubble's radius at the output nearest the minimum; the benchmark's 0.25 without its area
        radius = np.sqrt(area[ok][np.argmin(np.abs(times[ok] - at))] / np.pi) if np.any(ok) else 0.25
        cells = radius / h
        bias = circularity_bias(cells, value, quad_grid)
        width = float(checks.at[k, "reference_high"] - checks.at[k, "reference_low"])
        if not np.isfinite(width) or abs(bias) <= 0.25 * width:  # a quarter of the band: our threshold
            continue
        if quad_grid:
            need = np.sqrt(QUAD_BIAS_FACTOR / (0.25 * width))
            why = (f"the bubble is {cells:.1f} cells in radius at t = {at:g}, where circularity from cell fractions "
                   f"on a grid of quads reads about {bias:+.4f} ({QUAD_BIAS_FACTOR:g} (h/R)^2), more than a quarter "
                   f"of the band's width {width:g}: measure on a finer mesh, at least {np.ceil(need):.0f} cells "
                   "in radius")
        else:
            why = (f"circularity from cell fractions on triangles, polygons or distorted quads reads about {bias:+.4f} "
                   f"(0.6 to 0.9 % low, not less on finer meshes; the bubble is {cells:.1f} cells in radius at "
                   f"t = {at:g}), more than a quarter of the band's width {width:g}: measure on square cells "
                   "along the axes (a regular grid or a quadtree)")
        checks.loc[k, ["value", "verdict", "note"]] = [np.nan, NOT_APPLICABLE, why]


def bubble_history(droplets: pd.DataFrame, *, rise_axis: str = "y") -> pd.DataFrame:
    """The largest droplet of each step as a bubble history.

    Parameters
    ----------
    droplets : DataFrame
        A droplets table (droplets.csv) with ``step``, ``time``, ``volume``,
        ``centroid_<rise_axis>``, ``circularity`` and, when a velocity was given,
        ``velocity_<rise_axis>``.
    rise_axis : str
        The axis the bubble rises along, ``x``, ``y`` or ``z``: the 2D mesh's second plane axis
        (a run in the x-z plane rises along z). Its centroid and velocity are the history's
        ``centroid_y`` and ``velocity_y``, the benchmark's names.

    Returns
    -------
    DataFrame with columns ``step, time, volume, circularity, centroid_y, velocity_y``
        One row per step (``velocity_y`` NaN when the table has none).
    """
    if rise_axis not in ("x", "y", "z"):
        raise OptionError(f"the rise axis must be x, y or z, found {rise_axis!r}",
                          fix="give the 2D mesh's second plane axis")
    centroid, velocity = f"centroid_{rise_axis}", f"velocity_{rise_axis}"
    need = [c for c in ("step", "time", "volume", centroid, "circularity") if c not in droplets.columns]
    if need:
        raise OptionError(f"the droplet table lacks columns {need}", fix="pass a 2D droplets.csv table")
    if len(droplets) == 0:
        return pd.DataFrame(columns=["step", "time", "volume", "circularity", "centroid_y", "velocity_y"])
    largest = largest_droplet(droplets)
    out = largest[["step", "time", "volume", "circularity"]].copy()
    out["centroid_y"] = largest[centroid]
    out["velocity_y"] = largest[velocity] if velocity in largest.columns else np.nan
    return out.reset_index(drop=True)


def largest_droplet(droplets: pd.DataFrame) -> pd.DataFrame:
    """Every column of the largest droplet (by ``volume``) of each step, one row per step in time order.

    Parameters
    ----------
    droplets : DataFrame
        A droplets table (droplets.csv) with at least ``step``, ``time`` and ``volume``.
    """
    need = [c for c in ("step", "time", "volume") if c not in droplets.columns]
    if need:
        raise OptionError(f"the droplet table lacks columns {need}", fix="pass a droplets.csv table")
    if len(droplets) == 0:
        return droplets.copy()
    largest = droplets.loc[droplets.groupby("step")["volume"].idxmax()]
    return largest.sort_values("time", kind="stable").reset_index(drop=True)
