"""From a solver field to the phase indicator c in [0, 1].

Every analysis works on one indicator ``c``: 0 in one phase, 1 in the phase
being measured. A volume fraction is already such a field; an order parameter
in [-1, 1] is mapped with ``value_range=(-1, 1)``; ``phase='lower'`` measures the
phase where the field is low.

Point and cell values are used consistently by every analysis:

* data on points: ``c.point`` is the data; ``c.cell`` is the mean of each cell's
  corner values (:meth:`Mesh.point_to_cell`);
* data on cells: ``c.cell`` is the data; ``c.point`` is a least-squares linear
  fit through the cells around each point, limited to their range
  (:meth:`Mesh.cell_to_point`).

Integrals (volumes, moments) use ``c.cell`` with the cell measures; contours use
``c.point``. Values are not clipped: overshoots stay visible to the
boundedness check. NaN and Inf are counted, reported and left out of integrals.
"""

from __future__ import annotations

import re
import warnings
from dataclasses import dataclass

import numpy as np

from ..errors import (FieldShapeError, NonFiniteWarning, OptionError,
                      RangeWarning)
from .fields import named_field
from .mesh import Mesh

__all__ = ["Indicator", "make_indicator", "map_to_indicator", "parse_range", "normalize_phase",
           "select_field"]

_COMPONENT = re.compile(r"^(?P<name>.+)\[(?P<k>\d+)\]$")


@dataclass
class Indicator:
    """The phase indicator of one step on points and cells.

    Attributes
    ----------
    cell : ndarray of shape (n_cells,), dimensionless, nominally in [0, 1]
        NaN where the input was not finite.
    point : ndarray of shape (n_points,), dimensionless, nominally in [0, 1]
    location : {'point', 'cell'}
        Where the input field lives.
    nonfinite : int
        Number of NaN or Inf values in the input field.
    field : str
        Name of the input field.
    value_range : tuple of float
        The field values mapped to 0 and 1 (before the phase side is applied).
    phase : {'upper', 'lower'}
    """

    cell: np.ndarray
    point: np.ndarray
    location: str
    nonfinite: int
    field: str = ""
    value_range: tuple = (0.0, 1.0)
    phase: str = "upper"

    @property
    def valid_cells(self) -> np.ndarray:
        """Boolean mask of cells with a finite indicator."""
        return np.isfinite(self.cell)


def parse_range(text) -> tuple[float, float]:
    """Parse ``"LO,HI"`` (or a pair) into two floats with LO != HI.

    Raises
    ------
    OptionError
        Not two numbers, or equal numbers.
    """
    if text is None:
        return (0.0, 1.0)
    if isinstance(text, str):
        parts = [p for p in re.split(r"[,\s]+", text.strip().strip("[]()")) if p]
    else:
        parts = list(text)
    try:
        lo, hi = (float(p) for p in parts)
    except (TypeError, ValueError):
        raise OptionError(f"range must be two numbers 'LO,HI', found {text!r}",
                          fix="for example --range -1,1 for an order parameter") from None
    if not (np.isfinite(lo) and np.isfinite(hi)) or lo == hi:
        raise OptionError(f"range must be two different finite numbers, found {lo},{hi}",
                          fix="for example --range 0,1 for a volume fraction")
    return (lo, hi)


def normalize_phase(phase) -> str:
    """Check the phase side: ``'upper'`` (field high) or ``'lower'`` (field low)."""
    value = str(phase).lower()
    if value not in ("upper", "lower"):
        raise OptionError(f"phase must be 'upper' or 'lower', found {phase!r}",
                          fix="'upper' measures where the field is high, 'lower' where it is low")
    return value


def map_to_indicator(values, value_range=(0.0, 1.0), phase: str = "upper") -> np.ndarray:
    """Map field values linearly to c: LO -> 0, HI -> 1 (or reversed for ``phase='lower'``).

    Parameters
    ----------
    values : array_like
    value_range : tuple of float
    phase : {'upper', 'lower'}

    Returns
    -------
    ndarray of float64, same shape; not clipped.
    """
    lo, hi = parse_range(value_range)
    c = (np.asarray(values, dtype=np.float64) - lo) / (hi - lo)
    if normalize_phase(phase) == "lower":
        c = 1.0 - c
    return c


def select_field(fields, name: str, *, where: str = "") -> tuple[np.ndarray, str]:
    """Find a scalar field by name in a step's fields.

    Parameters
    ----------
    fields : StepFields
    name : str
        Field name; ``NAME[k]`` selects component k of a vector field.

    Returns
    -------
    values : ndarray of shape (n,)
    location : {'point', 'cell'}

    Raises
    ------
    FieldNotFoundError
        No field of that name; the message lists the fields there.
    FieldShapeError
        A vector field named where a scalar is needed.
    """
    component = None
    base = name
    match = _COMPONENT.match(name)
    if match and name not in fields.point_data and name not in fields.cell_data:
        base, component = match.group("name"), int(match.group("k"))
    values, location = named_field(fields, base, where=where, fix="name one of those fields with --field")
    if values.ndim == 2 and values.shape[1] == 1:
        values = values[:, 0]
    if component is not None:
        if values.ndim != 2 or component >= values.shape[1]:
            raise FieldShapeError(f"field '{base}' has no component {component}", where=where,
                                  fix=f"components run from 0 to {values.shape[1] - 1 if values.ndim == 2 else 0}")
        values = values[:, component]
    if values.ndim != 1:
        raise FieldShapeError(
            f"field '{base}' has {values.shape[1]} components where a scalar is needed", where=where,
            fix=f"name a scalar field, or one component as '{base}[0]'")
    if not np.issubdtype(values.dtype, np.number):
        raise FieldShapeError(f"field '{base}' is not numeric", where=where, fix="name a numeric field")
    return values.astype(np.float64, copy=False), location


def make_indicator(mesh: Mesh, fields, name: str, *, value_range=(0.0, 1.0), phase: str = "upper",
                   where: str = "", warn: bool = True) -> Indicator:
    """Build the indicator of one step.

    Parameters
    ----------
    mesh : Mesh
    fields : StepFields
        The step's fields (or any object with ``point_data`` and ``cell_data`` dicts).
    name : str
        The field to map.
    value_range : tuple of float or str
        Field values mapped to 0 and 1.
    phase : {'upper', 'lower'}
    where : str
        File and step, for messages.
    warn : bool
        Emit :class:`RangeWarning` and :class:`NonFiniteWarning`.

    Returns
    -------
    Indicator
    """
    value_range = parse_range(value_range)
    phase = normalize_phase(phase)
    values, location = select_field(fields, name, where=where)
    finite = np.isfinite(values)
    nonfinite = int(values.size - np.count_nonzero(finite))
    if warn and nonfinite:
        warnings.warn(NonFiniteWarning(f"field '{name}' has {nonfinite} NaN or Inf values; they are left "
                                       "out of every integral", where=where), stacklevel=2)
    if warn and nonfinite < values.size:
        check_range(values[finite], value_range, name=name, where=where)
    c = map_to_indicator(values, value_range, phase)
    c[~finite] = np.nan
    if location == "point":
        return Indicator(mesh.point_to_cell(c), c, "point", nonfinite, name, value_range, phase)
    return Indicator(c, mesh.cell_to_point(c), "cell", nonfinite, name, value_range, phase)


def check_range(values: np.ndarray, value_range, *, name: str = "", where: str = "") -> None:
    """Warn (:class:`RangeWarning`) when finite values leave the range by more than 10 % of its span."""
    lo, hi = sorted(value_range)
    if values.size == 0:
        return
    vmin, vmax = float(values.min()), float(values.max())
    span = hi - lo
    if vmin < lo - 0.1 * span or vmax > hi + 0.1 * span:
        warnings.warn(RangeWarning(
            f"field '{name}' spans [{vmin:.4g}, {vmax:.4g}] but the range is [{lo:g}, {hi:g}]; "
            f"give the field's own range (for example --range {_round_range(vmin, vmax)})", where=where),
            stacklevel=3)


def _round_range(vmin: float, vmax: float) -> str:
    if vmin >= -1.1 and vmin < -0.5 and vmax <= 1.1:
        return "-1,1"
    return f"{vmin:.3g},{vmax:.3g}"
