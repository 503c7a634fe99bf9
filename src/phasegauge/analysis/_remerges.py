"""Events undone within a few steps, left out of the tracking's tables on request (``ignore_remerge_within``).

A breakup whose fragments all merge back into one drop within K steps (a thread that pinches and
reconnects), and a coalescence whose drop breaks up again within K steps into as many drops of the volumes
the drops had before, paired largest to largest within ``SAME_VOLUME`` (drops that bounce off each other
through a film too thin for the mesh, which reads as contact for a step or two; a partial coalescence, whose
drops merge and pinch off a smaller satellite, is kept), are removed with their undoing event; the tracks
are renamed so that the drops keep the ids they had before.
K counts the series' own step numbers (a run on every other step, or with a step left out, keeps the span).
"""

from __future__ import annotations

import numpy as np
import pandas as pd

__all__ = ["drop_remerges", "track_string", "track_tokens"]


def track_string(tracks) -> str:
    """An event side's track ids as text: space-separated in brackets, ``[0 1]``, ``[2]``, ``[]`` for none
    (never a bare number, so a CSV reader takes the column as text whatever ids a run has)."""
    return "[" + " ".join(str(int(t)) for t in sorted(tracks)) + "]"


def track_tokens(text) -> list:
    """The track ids of an event side's text (:func:`track_string`) as strings."""
    return str(text).replace("[", " ").replace("]", " ").split()


def drop_remerges(droplets: pd.DataFrame, events: pd.DataFrame, within: int):
    """Remove breakups whose fragments all merge back within ``within`` steps (the fragments take the
    parent's track, which then has several rows in the steps between), then coalescences whose drop breaks up
    again into as many drops within ``within`` steps, the volumes after pairing those before largest to
    largest within ``SAME_VOLUME`` (the drops after it take the tracks of those before; the merged drop keeps
    the track it had). Both tables carry ``_order``, the count of
    steps added."""
    droplets = droplets.copy()
    events = events.copy()
    drop = np.zeros(len(events), dtype=bool)
    for first, undoing in (("breakup", "coalescence"), ("coalescence", "breakup")):
        for i in np.flatnonzero(events["kind"].to_numpy() == first):  # loop over events, not cells
            if drop[i]:
                continue
            before, after = set(track_tokens(events.at[i, "before"])), set(track_tokens(events.at[i, "after"]))
            start, step = events.at[i, "_order"], events.at[i, "step"]
            later = events.index[(events["_order"] > start) & (events["step"] <= step + within) & ~drop]
            for j in later:
                j_before = set(track_tokens(events.at[j, "before"]))
                j_after = set(track_tokens(events.at[j, "after"]))
                if not (j_before | j_after) & after:
                    continue
                if events.at[j, "kind"] == undoing and first == "breakup" and j_before == after:
                    renamed = {int(t) for t in j_before | j_after} - {int(t) for t in before}
                    names = dict.fromkeys(renamed, int(next(iter(before))))
                    _rename(droplets, events, names, start, events.at[j, "_order"])
                    drop[[i, j]] = True
                elif events.at[j, "kind"] == undoing and j_before == after and len(j_after) == len(before):
                    names, same = _pairs(droplets, events.at[j, "_order"], sorted(j_after), start - 1,
                                         sorted(before))
                    if same:  # drops that bounce come back as they were; a partial coalescence does not
                        _rename(droplets, events, names, events.at[j, "_order"], events.at[j, "_order"])
                        drop[[i, j]] = True
                break  # the first later event touching the drops after the first event decides
    return droplets, events[~drop]


def _pairs(droplets: pd.DataFrame, order, fragments: list, order_before, parents: list) -> tuple:
    """Fragment track -> parent track, largest volume to largest (the fragments' volumes at ``order``, the
    parents' at ``order_before``), and whether every pair's volumes agree within ``SAME_VOLUME`` (as the
    tracker pairs drops following each other)."""
    from ._tracking import SAME_VOLUME  # here: the tracker imports this module

    def volumes(tracks, at):
        rows = droplets[(droplets["_order"] == at) & droplets["track"].isin([int(t) for t in tracks])]
        got = rows.groupby("track")["volume"].sum() if "volume" in rows else pd.Series(dtype=float)
        ordered = sorted((int(t) for t in tracks), key=lambda t: (-float(got.get(t, 0.0)), t))
        return ordered, np.array([float(got.get(t, np.nan)) for t in ordered])

    (after, v_after), (before, v_before) = volumes(fragments, order), volumes(parents, order_before)
    same = bool(np.all(np.abs(v_after - v_before) <= SAME_VOLUME * v_before))  # NaN (no volume): not the same
    return dict(zip(after, before)), same


def _rename(droplets: pd.DataFrame, events: pd.DataFrame, names: dict, rows_from, events_after) -> None:
    """Rename tracks by ``names`` (old -> new, all at once) in the droplet rows from step ``rows_from``
    (``_order``) on and in the events after ``events_after``."""
    mask = droplets["track"].isin(list(names)) & (droplets["_order"] >= rows_from)
    droplets.loc[mask, "track"] = droplets.loc[mask, "track"].map(names)
    for k in events.index[events["_order"] > events_after]:
        for column in ("before", "after"):
            ids = [names.get(int(t), int(t)) for t in track_tokens(events.at[k, column])]
            events.at[k, column] = track_string(set(ids))
