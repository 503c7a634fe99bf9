"""From a solver field to the phase indicator c in [0, 1].

Every analysis works on one indicator ``c``: 0 in one phase, 1 in the phase
being measured. A volume fraction is already such a field; an order parameter
in [-1, 1] is mapped with ``range=(-1, 1)``; ``phase='lower'`` measures the
phase where the field is low.

Point and cell values are used consistently by every analysis:

* data on points: ``c.point`` is the data; ``c.cell`` is the mean of each cell's
  corner values (:meth:`Mesh.point_to_cell`);
* data on cells: ``c.cell`` is the data; ``c.point`` is a least-squares linear
  fit through the cells around each point, limited to their range
  (:meth:`Mesh.cell_to_point`).

A field written twice under one name, on cells and on points (as the VTK
converters of finite-volume solvers write it), is read from its cell copy by
default: those are the solver's own values, and the point copy is an
interpolation that moves volumes, bounds and droplet counts. ``c.point`` is then
the reconstruction from the cells. ``field_location='point'`` reads the point
copy instead.

Integrals (volumes, moments) use ``c.cell`` with the cell measures; contours use
``c.point``. Values are not clipped: overshoots stay visible to the
boundedness check. NaN and Inf are counted, reported and left out of integrals.
"""

from __future__ import annotations

import difflib
import re
import math
import warnings
from dataclasses import dataclass

import numpy as np

from ..errors import (FieldNotFoundError, FieldShapeError, NonFiniteWarning, OldNameWarning, OptionError,
                      RangeWarning)
from .fields import named_field
from .mesh import Mesh

__all__ = ["Indicator", "make_indicator", "map_to_indicator", "parse_range", "normalize_phase",
           "select_field", "normalize_field_location", "FIELD_LOCATIONS"]

#: where the indicator's field may be read from (``'auto'``: the cell copy when there is one)
FIELD_LOCATIONS = ("auto", "cell", "point")

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
    range : tuple of float
        The field values mapped to 0 and 1 (before the phase side is applied).
    phase : {'upper', 'lower'}
    copies : tuple of str
        Where the step holds a field of that name (``('cell', 'point')`` when it is
        written twice); ``location`` is the copy read.
    level_set : ndarray of shape (n_points,) or None
        The field's values at the points when it is a level set (:mod:`.level_set`:
        ``cell`` and ``point`` are then built from it); None otherwise.
    """

    cell: np.ndarray
    point: np.ndarray
    location: str
    nonfinite: int
    field: str = ""
    range: tuple = (0.0, 1.0)
    phase: str = "upper"
    copies: tuple = ()
    level_set: np.ndarray | None = None

    @property
    def value_range(self) -> tuple:
        """The old name of :attr:`range` (with an :class:`OldNameWarning`)."""
        warnings.warn(OldNameWarning("'value_range' is the old name of 'range'"), stacklevel=2)
        return self.range

    @property
    def source(self) -> str:
        """Which copy of the field was read, in words (for ``inspect``, the report and the manifest)."""
        return field_source(self.field, self.location, self.copies)

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


def _old_range_keyword(range, old: dict, where: str):
    """``range``, or the value given under its old name ``value_range`` (with an :class:`OldNameWarning`).

    Raises
    ------
    OptionError
        A keyword that is neither (with the nearest name), or both names given.
    """
    for key in old:
        if key != "value_range":
            close = difflib.get_close_matches(key, ["range", "phase", "value_range"], n=1, cutoff=0.5)
            hint = f"did you mean '{'range' if close == ['value_range'] else close[0]}'?" if close else ""
            raise OptionError(f"{where} has no option '{key}'; {hint}".rstrip("; "),
                              fix="see the README's table of option names")
    if "value_range" not in old:
        return range
    if range is not None:
        raise OptionError(f"{where} got 'range' and its old name 'value_range'", fix="give only range=...")
    warnings.warn(OldNameWarning(f"{where}: 'value_range' is the old name of 'range'; write range=... "
                                 "(the old name will be removed)"), stacklevel=3)
    return old["value_range"]


def map_to_indicator(values, range=None, phase: str = "upper", **old) -> np.ndarray:
    """Map field values linearly to c: LO -> 0, HI -> 1 (or reversed for ``phase='lower'``).

    Parameters
    ----------
    values : array_like
    range : tuple of float or str, optional
        Field values mapped to 0 and 1; default (0, 1). The old keyword
        ``value_range`` still works, with an :class:`OldNameWarning`.
    phase : {'upper', 'lower'}

    Returns
    -------
    ndarray of float64, same shape; not clipped.
    """
    lo, hi = parse_range(_old_range_keyword(range, old, "map_to_indicator()"))
    c = (np.asarray(values, dtype=np.float64) - lo) / (hi - lo)
    if normalize_phase(phase) == "lower":
        c = 1.0 - c
    return c


def normalize_field_location(value) -> str:
    """Check a field location: ``'auto'`` (None), ``'cell'`` or ``'point'``."""
    text = "auto" if value is None else str(value).lower()
    if text not in FIELD_LOCATIONS:
        raise OptionError(f"field location must be 'cell' or 'point', found {value!r}",
                          fix="'cell' reads the solver's cell values, 'point' the copy on the points; "
                              "leave it out to read the cell copy when there is one")
    return text


def field_source(name: str, location: str, copies=()) -> str:
    """One line saying which copy of field ``name`` is read."""
    if location == "cell" and "point" in copies:
        return (f"'{name}': cell data, the solver's own values (a point copy exists too and is left out; "
                "contours use a reconstruction from the cells)")
    if location == "point" and "cell" in copies:
        return (f"'{name}': point data, as chosen (a cell copy with the solver's own values exists too and "
                "is left out; cell values are the means of the corners)")
    return f"'{name}': {location} data"


def field_copies(fields, name: str) -> tuple:
    """Where a step holds a field of that name: a subset of ``('cell', 'point')``."""
    base = name
    match = _COMPONENT.match(name)
    if match and name not in fields.point_data and name not in fields.cell_data:
        base = match.group("name")
    return tuple(loc for loc, data in (("cell", fields.cell_data), ("point", fields.point_data)) if base in data)


def select_field(fields, name: str, *, where: str = "", location: str | None = None) -> tuple[np.ndarray, str]:
    """Find a scalar field by name in a step's fields.

    Parameters
    ----------
    fields : StepFields
    name : str
        Field name; ``NAME[k]`` selects component k of a vector field.
    location : {'auto', 'cell', 'point'}, optional
        Which copy to read when the field is on both (``'auto'``, None: the cell copy).

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
    wanted = normalize_field_location(location)
    if wanted != "auto" and (base in fields.point_data or base in fields.cell_data):
        data = fields.cell_data if wanted == "cell" else fields.point_data
        if base not in data:
            other = "point" if wanted == "cell" else "cell"
            raise FieldNotFoundError(f"field '{base}' has no {wanted} data here (it is on the {other}s only)",
                                     where=where, fix=f"give --field-location {other}, or leave it out")
    order = ("point", "cell") if wanted == "point" else ("cell", "point")
    values, location = named_field(fields, base, where=where, fix="name one of those fields with --field",
                                   order=order)
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


def make_indicator(mesh: Mesh, fields, name: str, *, range=None, phase: str = "upper",
                   where: str = "", warn: bool = True, field_location: str | None = None,
                   level_set: bool = False, threads: int = 1, **old) -> Indicator:
    """Build the indicator of one step.

    Parameters
    ----------
    mesh : Mesh
    fields : StepFields
        The step's fields (or any object with ``point_data`` and ``cell_data`` dicts).
    name : str
        The field to map.
    range : tuple of float or str, optional
        Field values mapped to 0 and 1; default (0, 1). The old keyword
        ``value_range`` still works, with an :class:`OldNameWarning`.
    phase : {'upper', 'lower'}
    where : str
        File and step, for messages.
    warn : bool
        Emit :class:`RangeWarning` and :class:`NonFiniteWarning`.
    field_location : {'auto', 'cell', 'point'}, optional
        Which copy to read when the field is written on cells and on points
        under one name: ``'auto'`` (None) reads the cell copy, the solver's own
        values.
    level_set : bool
        The field is a level set (a signed distance, zero on the interface): the
        indicator is its cut-cell fractions on cells and a ramp whose 0.5 contour
        is its zero contour on points (:func:`.level_set.level_set_indicator`);
        ``range`` is not used. Data on cells goes to the points first
        (:func:`.level_set.level_set_points`: exact for a linear field, at
        boundary points too).
    threads : int
        Threads for a new mesh's point fit of a field on cells (the same values on any number).

    Returns
    -------
    Indicator

    Raises
    ------
    FieldNotFoundError
        No such field, or none at the location asked for.
    OptionError
        A keyword that is not an option (with the nearest name), or ``range``
        given under both names.
    """
    value_range = parse_range(_old_range_keyword(range, old, "make_indicator()"))
    phase = normalize_phase(phase)
    values, location = select_field(fields, name, where=where, location=field_location)
    copies = field_copies(fields, name)
    finite = np.isfinite(values)
    nonfinite = int(values.size - np.count_nonzero(finite))
    if warn and nonfinite:
        warnings.warn(NonFiniteWarning(f"field '{name}' has {nonfinite} NaN or Inf values; they are left "
                                       "out of every integral", where=where), stacklevel=2)
    if level_set:
        from .level_set import level_set_indicator, level_set_points

        phi = np.where(finite, values, np.nan)
        phi = phi if location == "point" else level_set_points(mesh, phi)  # continued to the boundary
        cell, point = level_set_indicator(mesh, phi, phase)
        return Indicator(cell, point, location, nonfinite, name, value_range, phase, copies, level_set=phi)
    if warn and nonfinite < values.size:
        check_range(values[finite], value_range, name=name, where=where)
    c = map_to_indicator(values, value_range, phase)
    c[~finite] = np.nan
    if location == "point":
        return Indicator(mesh.point_to_cell(c), c, "point", nonfinite, name, value_range, phase, copies)
    return Indicator(c, mesh.cell_to_point(c, threads=threads), "cell", nonfinite, name, value_range, phase, copies)


def check_range(values: np.ndarray, value_range, *, name: str = "", where: str = "") -> None:
    """Warn (:class:`RangeWarning`) when finite values leave the range by more than 10 % of its span."""
    lo, hi = sorted(value_range)
    if values.size == 0:
        return
    vmin, vmax = float(values.min()), float(values.max())
    span = hi - lo
    if vmin < lo - 0.1 * span or vmax > hi + 0.1 * span:
        signed = (", or --level-set if it is a signed distance to the interface (a level set)"
                  if vmin < 0 < vmax else "")
        warnings.warn(RangeWarning(
            f"field '{name}' spans [{vmin:.4g}, {vmax:.4g}] but the range is [{lo:g}, {hi:g}]; "
            f"give the field's own range (for example --range {_round_range(vmin, vmax)}; to compare, "
            f"--range-a or --range-b for the run it is){signed}", where=where),
            stacklevel=3)


def _round_range(vmin: float, vmax: float) -> str:
    """A range to suggest for values spanning [vmin, vmax]: [-1, 1] for an order parameter, else each
    end rounded outward to a hundredth of the span's order of magnitude, the low end to 0 within 5 %
    of the span of it (round-off below 0 included), the high end up to the next power of ten within
    5 % of the span (a percentage in [1.7e-8, 99.9] is suggested as 0,100, not its own extremes)."""
    if vmin >= -1.1 and vmin < -0.5 and vmax <= 1.1:
        return "-1,1"
    span = vmax - vmin
    if not span > 0:
        return f"{vmin:.3g},{vmax:.3g}"
    step = 10.0 ** (math.floor(math.log10(span)) - 2)
    low = 0.0 if abs(vmin) <= 0.05 * span else math.floor(vmin / step) * step
    high = math.ceil(vmax / step) * step
    if vmax > 0:
        power = 10.0 ** math.ceil(math.log10(vmax))
        if power - vmax <= 0.05 * span:
            high = power
    return f"{low:.6g},{high:.6g}"
