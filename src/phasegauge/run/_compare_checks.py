"""What a comparison's times and shape measures say about the comparison itself: findings and notes.

The time axes: runs in other time units (seconds against milliseconds), steps that could pair but do
not, runs that start at other times, and pairs whose times differ. The shape measures: a pair compared
over part of the domain (cells not finite in one run), and runs that measure opposite phases. Each
check is a pure function of the times, the pairs and comparison.csv; the run warns of each finding.
"""

from __future__ import annotations

import numpy as np

__all__ = ["time_checks", "shape_checks", "flipped_dice"]

#: time spans that differ by this factor or more suggest different time units (our threshold, as the
#: lengths' factor of 5 in the report's domain check)
TIME_UNITS_FACTOR = 5.0
#: pairs whose times differ by more than this share of the output interval there (the longer of the two runs')
#: are named (our threshold: a tenth of the motion between two compared outputs; outputs at the first adaptive
#: solver step past each output time differ by a few per cent of the interval)
GAP_SHARE = 0.1
#: opposite phases: Dice below this (our threshold) ...
OPPOSITE_DICE = 0.5
#: ... while the interfaces lie within this many spacings of the common grid (mean distance; our threshold:
#: three cells of the finer mesh, the grid's default spacing being half its median cell size) ...
OPPOSITE_SPACINGS = 6.0
#: ... and the two phase volumes sum to the compared volume within this share (our threshold) ...
OPPOSITE_SHARE = 0.01
#: ... and taking either run's other phase makes the runs agree better: the flipped Dice at least this, and at
#: least :data:`OPPOSITE_GAIN` above the pair's own (our thresholds; two uncorrelated 50/50 patterns read about 0.5
#: either way, gaining at most 0.14; phases taken the wrong way round gain 0.48-0.92: a drop a third of its radius
#: off its twin flips from 0.013 to 0.775, correlated quench patterns from 0.23 to 0.77, an exact twin to about 1)
OPPOSITE_FLIPPED_DICE = 0.6
OPPOSITE_GAIN = 0.3


def time_checks(times_a, times_b, pairs, labels, tolerance) -> tuple[list, list]:
    """(findings, notes) on the two runs' time axes and their pairs.

    Parameters
    ----------
    times_a, times_b : array_like
        Each run's measured steps' times.
    pairs : DataFrame
        The pairs (``time_a``, ``time_b``), as :func:`phasegauge.analysis.compare.pair_times` gives them.
    labels : pair of str
    tolerance : float or None
        The pairing's time tolerance (None: the default, a quarter of the smaller of the two runs' output
        intervals around each time).

    Returns
    -------
    findings : list of str
        Time spans that differ by :data:`TIME_UNITS_FACTOR` or more (other time units) where fewer than two
        of the longer-span run's outputs lie within the shorter run's span (so fewer than two steps could pair),
        and most steps that could pair left unpaired.
    notes : list of str
        Time spans that differ by that factor where two or more of the longer-span run's outputs lie within
        the shorter run's span (a short run; whether its steps pair is the check above);
        median output intervals that differ by that factor while the spans agree; runs that start more
        than the tolerance apart; paired times that differ by more than :data:`GAP_SHARE` of the interval there
        (the longer of the two runs').
    """
    from ..analysis.compare import PAIR_SHARE, _local_intervals, _median_interval

    ta = np.sort(np.asarray(times_a, dtype=float))
    tb = np.sort(np.asarray(times_b, dtype=float))
    ta, tb = ta[np.isfinite(ta)], tb[np.isfinite(tb)]
    a, b = labels
    if not ta.size or not tb.size:
        return [], []
    intervals = (_median_interval(ta), _median_interval(tb))
    finite = [v for v in intervals if np.isfinite(v) and v > 0]
    local = (_local_intervals(ta), _local_intervals(tb))  # the intervals around each time, as the pairing takes them

    def tol(k):  # the tolerance at the runs' first (k = 0) or last (k = -1) times
        if tolerance is not None:
            return tolerance
        there = np.fmin(local[0][k], local[1][k])
        return PAIR_SHARE * there if np.isfinite(there) else 0.0

    said_tol = (f"the time tolerance {tolerance:.3g}" if tolerance is not None
                else "the time tolerance (a quarter of the output interval there)")
    findings, notes = [], []
    spans = (ta[-1] - ta[0], tb[-1] - tb[0])
    said_units = False
    # the steps that could pair: the longer-span run's outputs within the shorter run's span (with the time
    # tolerance); seconds against milliseconds leave the first alone there, a short run against a long one many
    k = int(spans[1] < spans[0])
    shorter, longer = (ta, tb)[k], (ta, tb)[1 - k]
    end = tolerance if tolerance is not None else PAIR_SHARE * local[k][-1]
    within = np.count_nonzero((longer >= shorter[0] - tol(0)) & (longer <= shorter[-1] + np.nan_to_num(end)))
    if min(spans) > 0 and max(spans) / min(spans) >= TIME_UNITS_FACTOR and within >= 2:
        notes.append(
            f"the runs' time spans differ by a factor of {max(spans) / min(spans):.4g} ({a} t = {ta[0]:.6g} to "
            f"{ta[-1]:.6g}, {b} t = {tb[0]:.6g} to {tb[-1]:.6g}): the comparison covers the shorter run's span")
    elif min(spans) > 0 and max(spans) / min(spans) >= TIME_UNITS_FACTOR:
        said_units = True
        findings.append(
            f"the runs' time spans differ by a factor of {max(spans) / min(spans):.4g} ({a} t = {ta[0]:.6g} to "
            f"{ta[-1]:.6g}, {b} t = {tb[0]:.6g} to {tb[-1]:.6g}) and {len(pairs)} of their steps pair: the runs "
            "may be in different time units (seconds against milliseconds); give one run as a 'time,path' listing "
            "with its times converted to the other's units")
    elif len(finite) == 2 and max(finite) / min(finite) >= TIME_UNITS_FACTOR:
        notes.append(
            f"the runs' median output intervals differ by a factor of {max(finite) / min(finite):.4g} ({a} "
            f"{intervals[0]:.4g}, {b} {intervals[1]:.4g}) over like spans: only the coarser run's outputs can pair; "
            "if the runs should write alike, they may be in different time units: give one run as a 'time,path' "
            "listing with its times converted to the other's units")
    lo, hi = max(ta[0], tb[0]) - tol(0), min(ta[-1], tb[-1]) + tol(-1)
    could = min(np.count_nonzero((ta >= lo) & (ta <= hi)), np.count_nonzero((tb >= lo) & (tb <= hi)))
    if not said_units and could >= 2 and len(pairs) < 0.5 * could:
        findings.append(
            f"most steps that could pair do not: over t = {max(ta[0], tb[0]):.6g} to {min(ta[-1], tb[-1]):.6g}, "
            f"which both runs cover, the run with fewer steps has {could} and {len(pairs)} pair within {said_tol}: "
            "the runs write at other times, clocks or units; give --time-tolerance, or 'time,path' listings with "
            "the times converted")
    if abs(ta[0] - tb[0]) > tol(0):
        notes.append(
            f"the runs start at different times ({a} at t = {ta[0]:.6g}, {b} at t = {tb[0]:.6g}, more than the "
            f"time tolerance {tol(0):.3g} apart): a run started from a later state, or a clock offset; pairs "
            "compare equal times, so if one run's clock is offset give it as a 'time,path' listing with its times "
            "shifted")
    notes += _gap_note(pairs, ta, tb, local, labels)
    return findings, notes


def _gap_note(pairs, ta, tb, local, labels) -> list:
    """The note on paired times that differ by more than :data:`GAP_SHARE` of the longer of the two runs'
    output intervals around them, the interval between two compared outputs (``local``: each sorted run's ``ta``,
    ``tb`` intervals around its times)."""
    if not len(pairs):
        return []
    time_a, time_b = (pairs[c].to_numpy(dtype=float) for c in ("time_a", "time_b"))
    interval = np.fmax(local[0][np.clip(np.searchsorted(ta, time_a), 0, ta.size - 1)],
                       local[1][np.clip(np.searchsorted(tb, time_b), 0, tb.size - 1)])
    gap = np.abs(time_a - time_b)
    apart = np.isfinite(interval) & (gap > GAP_SHARE * interval)
    if not apart.any():
        return []
    k = int(np.argmax(np.where(apart, gap, -1.0)))
    return [f"{int(apart.sum())} of {len(pairs)} pairs join times more than {100 * GAP_SHARE:g} % of the output "
            f"interval apart, the largest {gap[k]:.4g} ({labels[0]} t = {time_a[k]:.6g} against {labels[1]} "
            f"t = {time_b[k]:.6g}: {100 * gap[k] / interval[k]:.2g} % of the interval there {interval[k]:.4g}, the "
            "longer of the two runs'): the shape measures of those pairs include "
            "the flow's motion over that gap (time_b is in the shape table and comparison.csv)"]


def _when(row) -> str:
    return f"t = {row['time_a']:.6g}, steps {int(row['step_a'])} and {int(row['step_b'])}"


def flipped_dice(dice, volume_a, volume_b, compared_volume):
    """The Dice a pair would read with one run's other phase, the smaller of the two flips, from the pair's
    own figures: the overlap I = dice (va + vb) / 2; taking B's other phase (volume V - vb) leaves the
    overlap va - I, so Dice 2 (va - I) / (va + V - vb); taking A's, 2 (vb - I) / (vb + V - va)."""
    dice, va, vb, whole = (np.asarray(v, dtype=float) for v in (dice, volume_a, volume_b, compared_volume))
    overlap = 0.5 * dice * (va + vb)
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.fmin(2 * (va - overlap) / (va + whole - vb), 2 * (vb - overlap) / (vb + whole - va))


def shape_checks(comparison, labels) -> list:
    """Findings on the shape measures of comparison.csv: pairs compared over part of the domain, and
    pairs whose phases look opposite (Dice below :data:`OPPOSITE_DICE` while the interfaces lie within
    :data:`OPPOSITE_SPACINGS` grid spacings, the two phase volumes fill the compared volume, and either
    run's other phase would give a Dice of :data:`OPPOSITE_FLIPPED_DICE` or more, :data:`OPPOSITE_GAIN` above the
    pair's own)."""
    if comparison is None or not len(comparison) or "time_a" not in comparison:
        return []
    from ..report._compare_report import partial_pairs

    found = []
    partial = partial_pairs(comparison)
    if partial.any():
        volume = comparison["compared_volume"].to_numpy(dtype=float)
        largest = np.nanmax(volume)
        rows = [f"{_when(comparison.iloc[k])}: {100 * (1 - volume[k] / largest):.3g} % left out"
                for k in np.flatnonzero(partial)[:3]]
        more = f" and {int(partial.sum()) - 3} more" if partial.sum() > 3 else ""
        found.append(
            f"{int(partial.sum())} pair(s) compared over part of the domain ({'; '.join(rows)}{more}; the largest "
            f"pair's compared_volume {largest:.4g}): cells not finite in one run are left out, so their "
            "mismatch_volume and dice miss part of the interfaces (the report's shape table marks them 'partial'); "
            "see each run's warnings on values not finite")
    needed = ("dice", "mean_distance", "grid_spacing", "volume_a", "volume_b", "compared_volume")
    if all(c in comparison for c in needed):
        t = {c: comparison[c].to_numpy(dtype=float) for c in needed}
        flipped = flipped_dice(t["dice"], t["volume_a"], t["volume_b"], t["compared_volume"])
        opposite = ((t["dice"] < OPPOSITE_DICE) & (t["mean_distance"] <= OPPOSITE_SPACINGS * t["grid_spacing"])
                    & (np.abs(t["volume_a"] + t["volume_b"] - t["compared_volume"])
                       <= OPPOSITE_SHARE * t["compared_volume"]) & (flipped >= OPPOSITE_FLIPPED_DICE)
                    & (flipped - t["dice"] >= OPPOSITE_GAIN))
        if opposite.any():
            k = int(np.flatnonzero(opposite)[0])
            found.append(
                f"the runs appear to measure opposite phases at {int(opposite.sum())} of {len(comparison)} pairs "
                f"({_when(comparison.iloc[k])}: dice {t['dice'][k]:.3g}, {flipped[k]:.3g} with one run's phase "
                f"flipped; interfaces {t['mean_distance'][k] / t['grid_spacing'][k]:.2g} grid spacings apart on "
                f"average, phase volumes {t['volume_a'][k]:.4g} + {t['volume_b'][k]:.4g} filling the compared volume "
                f"{t['compared_volume'][k]:.4g}): check --phase-a, --phase-b (recipe: phase) and the ranges; a phase "
                "field's drop at -1 is --phase-a lower")
    return found
