"""Checks of fields: a field named in a step, and arrays handed to an analysis.

Every analysis and the run check their field arguments here, so a wrong field
gets the same message wherever it is passed:

* :func:`named_field` and :func:`vector_field` find a field of a step by name
  (``fields`` is any object with ``point_data`` and ``cell_data`` dicts, such as
  :class:`phasegauge.io.StepFields`);
* :func:`field_location`, :func:`cell_values` and :func:`vector_values` check an
  array against a mesh and say where it lives (points or cells).
"""

from __future__ import annotations

import numpy as np

from ..errors import FieldNotFoundError, FieldShapeError, OptionError

__all__ = ["named_field", "vector_field", "field_location", "cell_values", "vector_values"]


def named_field(fields, name: str, *, where: str = "", role: str = "field", fix: str = "",
                order: tuple = ("point", "cell")) -> tuple[np.ndarray, str]:
    """A step's field by name, and where it lives.

    Parameters
    ----------
    fields : StepFields
        Any object with ``point_data`` and ``cell_data`` dicts of arrays.
    name : str
    where : str
        The file and step, for the message.
    role : str
        What the field is, for the message (``'field'``, ``'velocity field'``).
    fix : str
        What to do when the field is missing.
    order : tuple of {'point', 'cell'}
        Where to look first when both hold the name. Reading the point copy where cells come first and
        the cell copy was left out (``fields.cell_copies_left_out``: not every block of a multiblock file holds
        it) gives a :class:`~phasegauge.errors.MeshWarning`.

    Returns
    -------
    values : ndarray (as stored)
    location : {'point', 'cell'}

    Raises
    ------
    FieldNotFoundError
        No field of that name; the message lists the fields there.
    """
    for location in order:
        data = fields.point_data if location == "point" else fields.cell_data
        if name in data:
            swapped = (getattr(fields, "cell_copies_left_out", None) or {}).get(name)
            if swapped and location == "point" and order[0] == "cell":  # the cell copy it prefers was lost
                import warnings

                from ..errors import MeshWarning

                choose = ", or give --field-location point to choose that copy" if role == "field" else ""
                warnings.warn(MeshWarning(f"{role} '{name}': its copy on cells is left out, as {swapped}; the copy "
                                          f"on points is read; write it on cells in every block{choose}",
                                          where=where), stacklevel=3)
            return np.asarray(data[name]), location
    names = sorted(set(fields.point_data) | set(fields.cell_data))
    left_out = getattr(fields, "fields_left_out", None) or {}
    if name in left_out:  # a field the file holds in part (a multiblock file's field some blocks lack)
        why, fix = left_out[name]
        raise FieldNotFoundError(f"{role} '{name}' is not read: {why}", where=where, fix=fix)
    others = f" (not read, held by some blocks only: {', '.join(sorted(left_out))})" if left_out else ""
    raise FieldNotFoundError(f"{role} '{name}' not found; fields there: " + (", ".join(names) or "none") + others,
                             where=where, fix=fix)


def vector_field(fields, name: str, *, where: str = "", role: str = "velocity field",
                 fix: str = "", plane_axes=(0, 1)) -> tuple[np.ndarray, str]:
    """A step's vector field by name, with three components, and where it lives (cell data first).

    ``plane_axes``: the axes two-component vectors lie along (a 2D mesh's plane: a solver writing a
    case in the x-z plane writes (u_x, u_z)); default x and y.

    Returns
    -------
    values : ndarray of shape (n, 3), float64
        Two-component vectors placed on ``plane_axes``, zero along the third axis.
    location : {'point', 'cell'}

    Raises
    ------
    FieldNotFoundError
        No field of that name.
    FieldShapeError
        The field does not have 2 or 3 components.
    """
    values, location = named_field(fields, name, where=where, role=role, fix=fix, order=("cell", "point"))
    values = np.asarray(values, dtype=np.float64)
    if values.ndim != 2 or values.shape[1] not in (2, 3):
        raise FieldShapeError(f"{role} '{name}' must have 2 or 3 components, found shape {values.shape}",
                              where=where, fix="name a vector field")
    if values.shape[1] == 2:
        placed = np.zeros((values.shape[0], 3))
        placed[:, list(plane_axes)] = values
        values = placed
    return values, location


def _is_indicator(values) -> bool:
    return hasattr(values, "cell") and hasattr(values, "point") and hasattr(values, "location")


def field_location(mesh, values, name: str, location: str | None = None) -> tuple[np.ndarray, str]:
    """An array on ``mesh`` and where it lives: told by ``location``, by an Indicator, or by its length.

    Parameters
    ----------
    mesh : Mesh
    values : Indicator or array_like of shape (n_points, ...) or (n_cells, ...)
    name : str
        The argument's name, for the message.
    location : {'point', 'cell'}, optional
        Where the array lives; needed only when the mesh has as many points as cells.

    Returns
    -------
    array : ndarray, float64
    location : {'point', 'cell'}

    Raises
    ------
    OptionError
        A length that fits neither the points nor the cells, or a location that is not
        'point' or 'cell'.
    """
    if _is_indicator(values):
        if values.location == "point":
            return np.asarray(values.point, dtype=np.float64), "point"
        return np.asarray(values.cell, dtype=np.float64), "cell"
    array = np.asarray(values, dtype=np.float64)
    n = array.shape[0] if array.ndim else -1
    sizes = {"point": mesh.n_points, "cell": mesh.n_cells}
    if location is not None:
        if location not in sizes:
            raise OptionError(f"{name} location must be 'point' or 'cell', found {location!r}",
                              fix="say where the field lives")
        if n != sizes[location]:
            raise OptionError(f"{name} on {location}s must have {sizes[location]} values, found shape "
                              f"{array.shape}", fix="pass the field of the same step as the mesh")
        return array, location
    if n == mesh.n_points and n == mesh.n_cells:
        raise OptionError(f"{name} has {n} values and the mesh has as many points as cells",
                          fix=f"say where it lives ({name}_location='point' or 'cell'), or pass an Indicator")
    if n == mesh.n_points:
        return array, "point"
    if n == mesh.n_cells:
        return array, "cell"
    raise OptionError(f"{name} must have one value per point ({mesh.n_points}) or per cell "
                      f"({mesh.n_cells}), found shape {array.shape}",
                      fix="pass the field of the same step as the mesh")


def cell_values(mesh, values, name: str = "c") -> np.ndarray:
    """One value per cell, float64: ``values.cell`` of an Indicator, or an array of shape (n_cells,).

    Raises
    ------
    OptionError
        Another shape.
    """
    array = np.asarray(values.cell if _is_indicator(values) else values, dtype=np.float64)
    if array.shape != (mesh.n_cells,):
        raise OptionError(f"{name} must have shape ({mesh.n_cells},): one value per cell ({mesh.n_cells}), "
                          f"found shape {array.shape}",
                          fix=f"give {name} as one value per cell (an Indicator's .cell, or the Indicator)")
    return array


def vector_values(mesh, values, name: str = "velocity", location: str | None = None) -> tuple[np.ndarray, str]:
    """Vectors on points or cells, with ``mesh.dimension`` or 3 components, float64, and where they live.

    Parameters
    ----------
    mesh : Mesh
    values : array_like of shape (n, dimension) or (n, 3)
        ``n`` the number of points or cells of ``mesh``.
    name : str
        The argument's name, for the message.
    location : {'point', 'cell'}, optional
        Where the vectors live (see :func:`field_location`).

    Raises
    ------
    OptionError
        Another shape.
    """
    array, location = field_location(mesh, values, name, location)
    dim = mesh.dimension
    if array.ndim != 2 or array.shape[1] not in (dim, 3):
        n = mesh.n_points if location == "point" else mesh.n_cells
        raise OptionError(f"{name} must have shape ({n}, {dim}) or ({n}, 3), found {array.shape}",
                          fix=f"give {name} as one vector per {location}")
    return array, location
