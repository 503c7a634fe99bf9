"""The coordinate axes by name: one table for options, column names and messages.

``Mesh.points`` always has three columns, x, y and z, in that order; a 2D mesh
spans two of them (``Mesh.plane_axes``).
"""

from __future__ import annotations

from types import MappingProxyType

__all__ = ["AXIS_NAMES", "AXIS_INDEX"]

#: the axis names, in the order of the columns of ``Mesh.points``
AXIS_NAMES = ("x", "y", "z")

#: axis name -> column of ``Mesh.points`` (read-only)
AXIS_INDEX = MappingProxyType({name: column for column, name in enumerate(AXIS_NAMES)})
