"""Droplets: labelling of the dispersed phase on any mesh and the per-droplet table.

See :func:`label_droplets`; the algorithm lives in ``analysis/_labelling.py``.
"""

from ._labelling import TABLE_COLUMNS, DropletLabels, label_droplets
from ._periodic_look import PeriodicLook, cells_look_periodic, looks_periodic, points_look_periodic

__all__ = ["label_droplets", "DropletLabels", "TABLE_COLUMNS", "looks_periodic", "cells_look_periodic",
           "points_look_periodic", "PeriodicLook"]
