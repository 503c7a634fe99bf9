"""Droplet tracking across steps: persistent track ids and breakup/coalescence events.

See :class:`DropletTracker` and :func:`track_droplets`; the algorithm lives in
``analysis/_tracking.py``.
"""

from ._tracking import EVENT_COLUMNS, EVENT_KINDS, DropletTracker, track_droplets

__all__ = ["DropletTracker", "track_droplets", "EVENT_COLUMNS", "EVENT_KINDS"]
