"""Checks of fields: a field named in a step, and arrays handed to an analysis.

Every analysis and the run check their field arguments here, so a wrong field
gets the same message wherever it is passed:

* :func:`named_field` and :func:`vector_field` find a field of a step by name
  (``fields`` is any object with ``point_data`` and ``cell_data`` dicts, such as
  :class:`phasegauge.io.StepFields`); a vector may be named by its scalar components,
  ``'u.x,u.y'`` (:func:`velocity_name` normalises the option);
* :func:`field_location`, :func:`cell_values` and :func:`vector_values` check an
  array against a mesh and say where it lives (points or cells).
"""

from __future__ import annotations

import numpy as np

from ..errors import FieldNotFoundError, FieldShapeError, OptionError

__all__ = ["named_field", "vector_field", "velocity_name", "field_location", "cell_values", "vector_values"]


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


def velocity_name(velocity) -> str | None:
    """The velocity option as one text: a vector field's name, or its scalar components joined by commas.

    Parameters
    ----------
    velocity : str, sequence of str, or None
        ``'U'``; ``'u.x,u.y'`` or ``('u.x', 'u.y')``: 2 or 3 scalar fields, the components along x, y(, z)
        (along a 2D mesh's plane axes when 2).

    Returns
    -------
    str or None
        The name, or the components as ``'u.x,u.y'`` (spaces around the commas dropped).

    Raises
    ------
    OptionError
        An empty name, or a count of components other than 2 or 3.
    """
    if velocity is None:
        return None
    if isinstance(velocity, str):
        if "," not in velocity:
            return velocity
        parts = [part.strip() for part in velocity.split(",")]
    else:
        parts = list(velocity)
        if not all(isinstance(part, str) for part in parts):
            raise OptionError(f"velocity must be a field name or a list of field names, found {velocity!r}",
                              fix="give the vector field (U) or its scalar components in x, y, z order (u.x,u.y)")
        parts = [part.strip() for part in parts]
        if len(parts) == 1:
            return parts[0]
    if not all(parts) or len(parts) not in (2, 3):
        raise OptionError(f"velocity components must be 2 or 3 field names, found {','.join(parts)!r}",
                          fix="give the scalar components in x, y(, z) order (u.x,u.y or Ux,Uy,Uz), or the vector "
                              "field alone")
    return ",".join(parts)


def _component_groups(names) -> list:
    """Scalar fields named alike but for one letter x, y(, z) at one place (u.x u.y, Ux Uy Uz, x_velocity ...)."""
    groups = {}
    for name in names:
        for i, letter in enumerate(name):
            if letter.lower() in "xyz":
                key = (name[:i], name[i + 1:], letter.isupper())
                groups.setdefault(key, {})[letter.lower()] = name
    found = []
    for group in groups.values():
        if "x" in group and "y" in group:
            found.append(",".join(group[axis] for axis in "xyz" if axis in group))
    return sorted(set(found), key=lambda text: (-text.count(","), text))


def vector_field(fields, name: str, *, where: str = "", role: str = "velocity field",
                 fix: str = "", plane_axes=(0, 1), dimension: int | None = None) -> tuple[np.ndarray, str]:
    """A step's vector field by name, with three components, and where it lives (cell data first).

    ``name`` is a vector field, or 2 or 3 scalar fields joined by commas (``'u.x,u.y'``, as
    :func:`velocity_name` gives them), the components along x, y(, z), all on cells or all on points
    (cells where each has a copy on both). A name the step holds whole is read whole.

    ``plane_axes``: the axes two-component vectors lie along (a 2D mesh's plane: a solver writing a
    case in the x-z plane writes (u_x, u_z)); default x and y. ``dimension``: the mesh's, to refuse two
    components on a 3D mesh (not checked when None).

    Returns
    -------
    values : ndarray of shape (n, 3), float64
        Two-component vectors placed on ``plane_axes``, zero along the third axis.
    location : {'point', 'cell'}

    Raises
    ------
    FieldNotFoundError
        No field of that name (its fix names the components' form, and groups of fields that look
        like components); a component not found.
    FieldShapeError
        The field does not have 2 or 3 components; a component that is not a scalar, components on
        cells and on points, two components on a 3D mesh.
    """
    held = set(fields.point_data) | set(fields.cell_data)
    if "," in name and name not in held:  # a name with ', ' held whole ('U, avg'), as the option normalises it
        name = next((h for h in sorted(held) if "," in h and ",".join(p.strip() for p in h.split(",")) == name),
                    name)
    if "," in name and name not in held:
        values, location = _components(fields, name, where=where, role=role, dimension=dimension)
    else:
        if name not in held and not (getattr(fields, "fields_left_out", None) or {}).get(name):
            groups = _component_groups(sorted(held))
            fix = (fix or "name the vector field") + ("; a vector written as scalar fields is named by its "
                                                      "components in x, y(, z) order, joined by commas")
            fix += f" (here perhaps {groups[0]})" if groups else " (u.x,u.y)"
        values, location = named_field(fields, name, where=where, role=role, fix=fix, order=("cell", "point"))
        values = np.asarray(values, dtype=np.float64)
        if values.ndim != 2 or values.shape[1] not in (2, 3):
            raise FieldShapeError(f"{role} '{name}' must have 2 or 3 components, found shape {values.shape}",
                                  where=where, fix="name a vector field, or its scalar components joined by commas "
                                                   "in x, y(, z) order")
    if values.shape[1] == 2:
        placed = np.zeros((values.shape[0], 3))
        placed[:, list(plane_axes)] = values
        values = placed
    return values, location


def _components(fields, name: str, *, where: str, role: str, dimension) -> tuple[np.ndarray, str]:
    """The vectors of scalar fields ``'u.x,u.y(,u.z)'``: shape (n, 2) or (n, 3), and where they live."""
    parts = velocity_name(name).split(",")
    held = {"cell": set(fields.cell_data), "point": set(fields.point_data)}
    shared = [location for location in ("cell", "point") if all(part in held[location] for part in parts)]
    if not shared:
        for part in parts:  # a component not found: its message lists the fields there
            named_field(fields, part, where=where, role=f"{role} '{name}': component",
                        fix="name the velocity's scalar components in x, y(, z) order, joined by commas")
        places = ", ".join(f"{part} on {'cells' if part in held['cell'] else 'points'}" for part in parts)
        raise FieldShapeError(f"{role} '{name}': its components do not share a location ({places})",
                              where=where, fix="name components written all on cells or all on points")
    if dimension == 3 and len(parts) == 2:
        raise FieldShapeError(f"{role} '{name}' has 2 components on a 3D mesh", where=where,
                              fix=f"name the three components in x, y, z order ({name},...)")
    columns = []
    for part in parts:  # the cell copy where both are held; a point copy read for a lost cell copy warns
        order = (shared[0],) if part in held["cell"] else ("cell", "point")
        values = np.asarray(named_field(fields, part, where=where, role=role, order=order)[0], dtype=np.float64)
        if values.ndim == 2 and values.shape[1] == 1:
            values = values[:, 0]
        if values.ndim != 1:
            raise FieldShapeError(f"{role} '{name}': component '{part}' must be a scalar field, found shape "
                                  f"{values.shape}", where=where,
                                  fix=f"name scalar components, or the vector alone ({part})")
        columns.append(values)
    return np.column_stack(columns), shared[0]


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
