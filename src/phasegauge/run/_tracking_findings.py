"""Whether a run's droplet tracks can be trusted: links that jump between drops, drops that vanish and appear.

Tracks link each step's droplets to the previous step's by the overlap of their cells (moved by the
velocity where one is given) and, for those overlapping nothing, by the nearest centroid within a
diameter. When drops move about the gap to the drop ahead or more between outputs (half the spacing
between drops, whatever their own size), without a velocity, a drop's cells overlap the drop ahead's
old place instead: a track hands its drop over (it shrinks by a large factor, with no event, while the
volume it held turns up on another track that grew as much, or as a new drop: drops growing by
condensation or coarsening, or dissolving, change volume too, but do not hand it over); a drop is written
as a disappearance while another appears in one step, away from the domain's sides; drops are fused into
a complex event of as many drops on each side whose volumes pair one to one; or, with a velocity, a track moves
against it.
"""

from __future__ import annotations

import numpy as np

from ..analysis import _tracking
from ..model.axes import AXIS_INDEX

__all__ = ["tracking_findings", "JUMP_FACTOR", "SAME_VOLUME", "BACKWARDS"]

#: a one-to-one link whose volume shrinks by this factor or more, with no event, while what it held
#: turns up on a track that grew as much or as an appearance, looks like a drop handed over (our threshold)
JUMP_FACTOR = 1.5
#: volumes that agree within this share are one drop's (our threshold; the tracker pairs drops so too)
SAME_VOLUME = _tracking.SAME_VOLUME
#: a track moving against its velocity by more than this share of the displacement the velocity gives, where
#: that is at least this share of its diameter, looks like one linked to another drop (our threshold)
BACKWARDS = 0.25


def tracking_findings(droplets, events, options, bounds=None, steps=None, numbered: bool = False) -> list:
    """A warning when tracks look unreliable (see the module notes), naming the fix: a velocity field
    (``--velocity``), or output written more often. Drops flagged under-resolved, and with ``bounds``
    (the domain's, shape (2, 3)) drops whose box touches the domain's (one leaving through an outlet
    shrinks), are left out of the jumps; with ``steps`` (steps.csv), so are links across which the bulk
    values the droplets are measured between (``bulk_c_low``, ``bulk_c_high``) moved by more than 0.005.
    ``numbered``: the steps store no times, so a velocity given could not be used (the fix names the times)."""
    from .assemble import Finding

    if droplets is None or not len(droplets) or "track" not in droplets:
        return []
    edge = _edge_tracks(droplets, bounds)
    appeared = _appearances(events, edge)
    written = np.unique(droplets["step"].to_numpy())  # the steps holding drops, in order
    jumps = _jumps(droplets, events, edge, _rescaled(steps), appeared, written)
    pairs = _vanished_and_appeared(droplets, events, edge, appeared, written)
    fused = _fused(droplets, events, written)
    backwards = _backwards(droplets, events, edge, bounds, getattr(options, "periodic", ()) or (), written)
    if not jumps and not pairs and not fused and not backwards:
        return []
    parts = []
    if jumps:
        factor, time = max(jumps)
        parts.append(f"{len(jumps)} track(s) shrink by a factor of {JUMP_FACTOR:g} or more while the volume they "
                     f"held (within {100 * SAME_VOLUME:g} %) turns up on another track or as a new drop, with no "
                     f"event (largest factor {factor:.3g} at t = {time:g})")
    if pairs:
        parts.append(f"{len(pairs)} drop(s) disappear while another appears in the same step, neither at the "
                     f"domain's sides (first at t = {min(pairs):g})")
    if fused:
        parts.append(f"{len(fused)} complex event(s) join as many drops on each side whose volumes pair one to "
                     f"one (within {100 * SAME_VOLUME:g} %), as drops following each other do (first at "
                     f"t = {min(fused):g})")
    if backwards:
        parts.append(f"{len(backwards)} track(s) move against their velocity from one step to the next "
                     f"(first at t = {min(backwards):g})")
    if options.velocity is None:
        fix = "give the velocity field (--velocity) so cells are moved before they are matched"
    elif numbered:
        fix = "give the steps' times (a 'time,path' listing) so the velocity moves the drops"
    else:
        fix = "write output more often"
    fix += ", or write output more often" if options.velocity is None or numbered else ""
    text = ("droplet tracks may link different drops: " + "; ".join(parts) + ", as when drops move about "
            f"the gap to the drop ahead or more between outputs; {fix} (counts and volumes per step are not "
            "affected)")
    return [Finding("tracking_unreliable", "warning", text,
                    {"jumps": len(jumps), "largest_factor": float(max(jumps)[0]) if jumps else None,
                     "vanished_and_appeared": len(pairs), "fused": len(fused), "backwards": len(backwards),
                     "factor_limit": JUMP_FACTOR})]


def _in_events(events) -> set:
    """(step, track) of every track named after an event of that step."""
    named = set()
    if events is None or not len(events):
        return named
    for step, after in zip(events["step"], events["after"]):
        named.update((int(step), track) for track in _track_ids(after))
    return named


def _track_ids(text) -> list:
    """The track ids of an event's ``before`` or ``after`` (space-separated in brackets, ``[0 1]``; also
    without them, as older tables wrote them; empty or NaN: none; a single id read back from CSV as a
    float, ``2.0``, is id 2)."""
    ids = []
    for token in str(text).replace("[", " ").replace("]", " ").split():
        try:
            value = float(token)
        except ValueError:
            continue
        if np.isfinite(value) and value == int(value):
            ids.append(int(value))
    return ids


def _rescaled(steps) -> set:
    """Steps whose bulk values moved by more than 0.005 from the previous step's (droplet volumes are
    measured between them, so a volume ratio across such a link says nothing of the tracks)."""
    if steps is None or not len(steps) or "bulk_c_low" not in steps or "bulk_c_high" not in steps:
        return set()
    low = steps["bulk_c_low"].to_numpy(dtype=float)
    high = steps["bulk_c_high"].to_numpy(dtype=float)
    moved = (np.abs(np.diff(low)) > 0.005) | (np.abs(np.diff(high)) > 0.005)
    return {int(k) for k in steps["step"].to_numpy()[1:][moved]}


def _jumps(droplets, events, edge: set, rescaled: set, appeared: dict, steps) -> list:
    """(factor, time) of each one-to-one link between consecutive steps whose volume shrinks by
    :data:`JUMP_FACTOR` or more while what it held turns up (within :data:`SAME_VOLUME`) on a track
    growing as much or as one of ``appeared`` (step -> appearance volumes); the drop named in no event
    of the later step and in neither step among ``edge`` (:func:`_edge_tracks`)."""
    following = dict(zip(steps[:-1], steps[1:]))
    table = droplets[["step", "time", "track", "volume"]]
    left_out = np.fromiter(((s, t) in edge for s, t in zip(table["step"], table["track"])), dtype=bool,
                           count=len(table))
    table = table[~left_out].groupby(["step", "track"], as_index=False).agg(time=("time", "first"),
                                                                            volume=("volume", "sum"))
    table["next_step"] = table["step"].map(following)
    later = table[["step", "track", "volume", "time"]].rename(
        columns={"step": "next_step", "volume": "next_volume", "time": "next_time"})
    linked = table.merge(later, on=["next_step", "track"])
    named = _in_events(events) | edge
    keep = [not ((int(r.next_step), int(r.track)) in named or int(r.next_step) in rescaled)
            and r.volume > 0 and r.next_volume > 0 for r in linked.itertuples(index=False)]
    linked = linked[np.asarray(keep, dtype=bool)] if len(linked) else linked
    out = []
    for (step, time), links in linked.groupby(["next_step", "next_time"]):
        ratio = links["next_volume"].to_numpy() / links["volume"].to_numpy()
        handed = links["volume"].to_numpy()[ratio <= 1.0 / JUMP_FACTOR]  # what the shrinking tracks held
        # where the shrinking tracks' drops went: another track, or a new one (an appearance)
        taken = np.concatenate([links["next_volume"].to_numpy()[ratio >= JUMP_FACTOR],
                                np.asarray(appeared.get(int(step), []), dtype=float)])
        for held, factor in zip(handed, ratio[ratio <= 1.0 / JUMP_FACTOR]):
            if taken.size and np.min(np.abs(taken - held)) <= SAME_VOLUME * held:
                out.append((float(1.0 / factor), float(time)))
    return out


def _appearances(events, edge: set) -> dict:
    """Step -> the volumes of that step's appearances of drops not among ``edge`` (:func:`_edge_tracks`)."""
    if events is None or not len(events):
        return {}
    out = {}
    for kind, step, after, volume in zip(events["kind"], events["step"], events["after"], events["volume_after"]):
        if kind == "appearance" and not any((int(step), t) in edge for t in _track_ids(after)):
            out.setdefault(int(step), []).append(float(volume))
    return out


def _edge_tracks(droplets, bounds=None) -> set:
    """(step, track) of the drops flagged under-resolved and, with ``bounds``, those touching one side of the
    domain's box (:func:`_touches`)."""
    edge = np.zeros(len(droplets), dtype=bool)
    if bounds is not None:
        edge |= _touches(droplets, np.asarray(bounds, dtype=float))
    if "under_resolved" in droplets:  # specks of a few cells come and go with equal volumes
        edge |= droplets["under_resolved"].astype(bool).to_numpy()
    return set(zip(droplets["step"].to_numpy()[edge], droplets["track"].to_numpy()[edge]))


def _touches(droplets, bounds: np.ndarray) -> np.ndarray:
    """Whether each droplet's box reaches the domain's box on one side of an axis the domain spans (as a
    drop leaving through an outlet does). A drop reaching both sides of an axis spans the domain there (a
    drop confined between a channel's walls, as in a microchannel or a slab): not leaving along it."""
    from ..analysis._droplet_measures import box_contacts

    touches = np.zeros(len(droplets), dtype=bool)
    for low, high in box_contacts(droplets, bounds).values():
        touches |= low ^ high
    return touches


def _vanished_and_appeared(droplets, events, edge: set, appeared: dict, steps) -> list:
    """Times of the disappearances in a step with one of ``appeared`` (:func:`_appearances`), whatever the
    volumes (drops mixed up differ in volume too), the drops among ``edge`` left out (a drop leaving through
    an outlet as another enters; specks of a few cells)."""
    if events is None or not len(events):
        return []
    before = dict(zip(steps[1:], steps[:-1]))
    times = []
    for (step, time), group in events.groupby(["step", "time"]):
        last = before.get(step)
        gone = [v for kind, b, v in zip(group["kind"], group["before"], group["volume_before"])
                if kind == "disappearance" and not any((last, t) in edge for t in _track_ids(b))]
        new = np.asarray(appeared.get(int(step), []), dtype=float)
        times += [float(time) for volume in gone if volume > 0 and new.size]
    return times


def _fused(droplets, events, steps) -> list:
    """Times of the complex events with as many drops on each side whose volumes pair one to one within
    :data:`SAME_VOLUME`, largest to largest (each drop after with one before, at the previous step): drops
    carried on that the tracker could not pair by their overlap. Not the totals: an incompressible exchange
    (a tail pinching off into the drop ahead) keeps the total while its drops change volume."""
    if events is None or not len(events):
        return []
    previous = {int(b): int(a) for a, b in zip(steps[:-1], steps[1:])}
    sums = droplets.groupby(["step", "track"])["volume"].sum()
    volume = {(int(k), int(t)): float(v) for (k, t), v in sums.items()}
    times = []
    for kind, step, time, before, after in zip(events["kind"], events["step"], events["time"], events["before"],
                                               events["after"]):
        ids_before, ids_after = _track_ids(before), _track_ids(after)
        if kind != "complex" or len(ids_before) != len(ids_after) or int(step) not in previous:
            continue
        v_before = np.sort([volume.get((previous[int(step)], t), np.nan) for t in ids_before])
        v_after = np.sort([volume.get((int(step), t), np.nan) for t in ids_after])
        if np.all(np.abs(v_after - v_before) <= SAME_VOLUME * v_before):  # NaN (a drop not found): not flagged
            times.append(float(time))
    return times


def _backwards(droplets, events, edge: set, bounds, periodic, steps) -> list:
    """Times of the one-to-one links (named in no event of the later step, neither drop among ``edge``) whose
    centroid moves against the drop's velocity (the mean of both steps' ``velocity_*`` times the time
    between them) by more than :data:`BACKWARDS` of that expected displacement, where that is at least
    :data:`BACKWARDS` of the drop's equivalent diameter; along ``periodic`` axes, wrapped with ``bounds``."""
    names = [a for a in "xyz" if f"velocity_{a}" in droplets and f"centroid_{a}" in droplets]
    if not names or "equivalent_diameter" not in droplets:
        return []
    table = droplets.sort_values(["track", "step"])
    table = table[[(s, t) not in edge for s, t in zip(table["step"], table["track"])]]
    table = table[~table.duplicated(["step", "track"], keep=False)]
    named = _in_events(events)
    following = dict(zip(steps[:-1], steps[1:]))
    first, second = table.iloc[:-1], table.iloc[1:]
    same = ((first["track"].to_numpy() == second["track"].to_numpy())
            & (second["step"].to_numpy() == first["step"].map(following).to_numpy()))
    dt = second["time"].to_numpy() - first["time"].to_numpy()
    move = np.stack([second[f"centroid_{a}"].to_numpy() - first[f"centroid_{a}"].to_numpy() for a in names], 1)
    if bounds is not None:
        for k, a in enumerate(names):
            if a in periodic:
                period = float(bounds[1][AXIS_INDEX[a]] - bounds[0][AXIS_INDEX[a]])
                move[:, k] -= period * np.round(move[:, k] / period) if period > 0 else 0.0
    expected = 0.5 * np.stack([first[f"velocity_{a}"].to_numpy() + second[f"velocity_{a}"].to_numpy()
                               for a in names], 1) * dt[:, None]
    along = np.sum(move * expected, axis=1)
    size = np.sum(expected * expected, axis=1)
    diameter = first["equivalent_diameter"].to_numpy()
    with np.errstate(invalid="ignore"):
        against = same & (size >= (BACKWARDS * diameter) ** 2) & (along < -BACKWARDS * size)
    return [float(t) for t, s, k in zip(second["time"].to_numpy()[against], second["step"].to_numpy()[against],
                                        second["track"].to_numpy()[against]) if (int(s), int(k)) not in named]
