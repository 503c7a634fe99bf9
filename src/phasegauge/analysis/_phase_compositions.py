"""Measured phase compositions against a thermodynamic model: bulk values, mixture state, a solute.

Pure functions of cell values: the caller hands the composition of each cell, its signed
distance to the interface contour and the measured interface width.

References
----------
Cahn, J. W. and Hilliard, J. E. (1958). Free energy of a nonuniform system. I. Interfacial
free energy. J. Chem. Phys. 28, 258 (the tanh profile; its tail off the plateau decays as
exp(-sqrt2 d / eps), so bulk values are read beyond 4 to 5 widths of the contour).
Porter, D. A. and Easterling, K. E. (1992). Phase Transformations in Metals and Alloys,
2nd ed., section 1.5 (the Gibbs-Thomson effect).
"""

from __future__ import annotations

import math

import numpy as np

from ..errors import OptionError
from ..model._statistics import weighted_quantile
from ..model.axes import AXIS_INDEX
from ..model.contour import Contour
from ..model.corners import corner_mean
from ..model.mixture_models import DoubleWellModel
from ._binodal import _stability, binodal, other_regions, spinodal
from ._labelling import _normalize_periodic
from ._signed_distance import _ContourGeometry, _maybe_near_cells, _search_sets, _signed_distance
from ._sums import dot

__all__ = ["interface_distance", "bulk_compositions", "between_class_share", "mixture_state", "solute_distribution",
           "equilibrium_gap", "gibbs_thomson_shift", "MIXTURE_STATES"]

MIXTURE_STATES = ("stable", "metastable", "unstable")


def _cell_arrays(mesh, composition, distance):
    values = np.asarray(composition, dtype=float)
    dist = np.asarray(distance, dtype=float)
    weights = np.asarray(mesh.cell_measures, dtype=float)
    n = weights.size
    if values.shape != (n,) or dist.shape != (n,):
        raise OptionError(f"composition and distance need one value per cell ({n}), found {values.shape} and "
                          f"{dist.shape}", fix="pass cell values")
    return values, dist, weights


def interface_distance(mesh, c_cell, contour, *, level=0.5, reach=np.inf, measured=None, periodic=()):
    """Signed distance of every cell centroid to the interface contour, positive where c > level.

    Cells farther than ``reach`` get ``+-2 reach`` (by their side; +-inf without a contour),
    which is all the bulk selection of :func:`bulk_compositions` needs and spares the search.
    Along ``periodic`` axes the distance wraps the boundary: the contour's copies a period away
    (those within ``reach`` of the mesh) are searched too.

    Parameters
    ----------
    mesh : Mesh
    c_cell : ndarray of shape (n_cells,), dimensionless
        The indicator on the cells (its side of ``level`` gives the sign).
    contour : Contour
        The interface at ``level`` (from :func:`phasegauge.analysis.interface.find_interface`).
    level : float
    reach : float, in mesh length units
    periodic : sequence of {'x', 'y', 'z'}
        Axes along which the mesh is periodic (its extent along the axis is the period).
    measured : MeasuredDistances, optional
        The point distances the width estimators measured on this mesh and contour
        (``interface_metrics(..., return_distances=True)``). A cell whose corners were all
        searched gets the mean of their distance magnitudes (a corner beyond the search's
        ``bound`` counts as ``bound``, a lower bound: such a cell is settled only as bulk, and
        searched when the mean is within ``reach``). A cell the contour crosses is searched
        when that mean lies beyond ``reach``: the magnitude bends at the contour, so there the
        mean exceeds the centroid's distance (by up to about half a cell). Across any other
        cell the distance is linear up to O(h^2 / R) on an interface of curvature radius R, and
        both the corners' and a centroid's own distances are these second-order nearest-plane
        estimates, so a cell can fall on the other side of ``reach`` than its centroid's own
        search would put it only within O(h^2 / R) of ``reach``. The other cells are searched as without it.
        Cells with ``c`` below 0.01 that the search calls bulk through its thinned element set
        (see ``_signed_distance``) can come out nearer.

    Returns
    -------
    ndarray of shape (n_cells,), in mesh length units

    Notes
    -----
    Cells that a grid of buckets and a tree test show to be farther than ``reach`` from every
    contour element centroid are not searched (a search bounded by ``reach`` finds nothing for
    them). The search trees have their nodes shrunk to their points (2-3x faster from cells far
    off the contour); equidistant elements may resolve to another one than in the width
    estimators' search.
    """
    c = np.asarray(c_cell, dtype=float)
    positive = c > level
    if contour is None or contour.n_elements == 0:
        return np.where(positive, np.inf, -np.inf)
    reach = float(reach)
    geometry = measured.geometry if measured is not None and measured.geometry.contour is contour else None
    geometry = _ContourGeometry(contour) if geometry is None else geometry
    points = np.asarray(mesh.cell_centroids, dtype=float)
    limited = bool(np.isfinite(reach) and reach > 0)
    if measured is None:
        dist = np.full(c.size, np.nan)
        unknown = np.arange(c.size)
        rows = np.zeros(0, dtype=np.int64)
    else:
        corners = np.asarray(measured.point, dtype=float)
        if corners.shape != (mesh.n_points,):
            raise OptionError(f"measured distances need one value per mesh point ({mesh.n_points}), found "
                              f"{corners.shape}", fix="pass what interface_metrics(..., return_distances=True) "
                              "gave on this mesh")
        magnitude = np.minimum(np.abs(corners), measured.bound)  # NaN stays: a corner not searched
        dist = np.empty(c.size)
        for block, start in zip(mesh.blocks, mesh.block_offsets[:-1]):
            dist[start:start + len(block)] = corner_mean(magnitude, block.connectivity)
        # settled by the corners (NaN where a corner was not searched: those are searched)
        unknown = np.flatnonzero(np.isnan(dist))
        rows = np.zeros(0, dtype=np.int64)
        beyond = np.isinf(corners)
        if beyond.any():  # a corner beyond the bound only bounds the mean from below: search if not past reach
            nearer = np.flatnonzero(dist <= reach)
            rows = nearer[_any_corner(mesh, beyond, nearer)]
        # a cell the contour crosses that its corners would settle beyond reach is searched: |d| bends
        # at the contour, so there the corners' mean magnitude exceeds its centroid's distance
        crossed = contour.cells[dist[contour.cells] > reach]  # (usually none: no sort of every element's cell)
        rows = np.concatenate([rows, np.unique(crossed)])
    if limited:  # cells with no element centroid within reach: nothing to search
        unknown = unknown[_maybe_near_cells(mesh, unknown, geometry.centroids[:, list(contour.plane_axes)], reach)]
    rows = np.concatenate([rows, unknown])
    if rows.size:
        dist[rows] = np.abs(_signed_distance(points[rows], c[rows], geometry, contour.plane_axes, level,
                                             bound=reach, compact=True))
    names, columns = _normalize_periodic(mesh, periodic)
    copies = _periodic_images(mesh, contour, names, reach)
    if copies is not None:  # across a periodic boundary: the nearer of the contour and its copies
        copied = _ContourGeometry(copies)
        # the copies lie beyond a periodic face: no centroid of theirs is nearer a cell than the face
        bounds = mesh.bounds  # in x, y, z; the centroids in the mesh's own axes (columns)
        face = np.full(c.size, np.inf)
        for name, column in zip(names, columns):
            axis = AXIS_INDEX[name]
            x = points[:, column]
            np.minimum(face, np.minimum(x - bounds[0, axis], bounds[1, axis] - x), out=face)
        # a plane's distance is at least its element's centroid distance less its half-size: a cell
        # whose distance is below that for every copy keeps it (fmin below), and is not searched
        halves = [half for _, _, half in _search_sets(copied, contour.plane_axes)]
        slack = max(float(half.max(initial=0.0)) for half in halves)
        # (a margin above round-off in the coordinates; NaN, not searched, is searched)
        margin = 1e-9 * float(np.abs(bounds).max())
        keeps = face - slack > dist + margin  # (dist >= 0 here, or NaN)
        rows = np.flatnonzero(~keeps)
        if limited:  # only cells within reach of a copy can be near
            rows = rows[face[rows] <= reach]
            rows = rows[_maybe_near_cells(mesh, rows, copied.centroids[:, list(contour.plane_axes)], reach)]
        if rows.size:
            across = np.abs(_signed_distance(points[rows], c[rows], copied, contour.plane_axes, level,
                                             bound=reach, compact=True))
            dist[rows] = np.fmin(dist[rows], across)  # NaN (not searched, or beyond reach) yields
    np.copyto(dist, 2.0 * reach, where=~np.isfinite(dist))
    np.negative(dist, out=dist, where=~positive)
    return dist


def _periodic_images(mesh, contour, names, reach: float):
    """The copies of ``contour`` shifted by a period along the periodic axes ``names`` (each shift
    and their combinations) that come within ``reach`` of the mesh's bounds, as one contour; None
    when there are none."""
    if not names:
        return None
    bounds = mesh.bounds
    shifts = [np.zeros(3)]
    for name in names:
        axis = AXIS_INDEX[name]
        period = np.zeros(3)
        period[axis] = bounds[1, axis] - bounds[0, axis]
        shifts = [shift + k * period for shift in shifts for k in (0, -1, 1)]
    corners = contour.points[contour.elements]  # (k, corners, 3)
    low, high = corners.min(axis=1), corners.max(axis=1)
    points, elements, cells, count = [], [], [], 0
    for shift in shifts[1:]:
        near = np.flatnonzero(np.all((high + shift >= bounds[0] - reach) & (low + shift <= bounds[1] + reach), axis=1))
        if near.size == 0:
            continue
        used = np.unique(contour.elements[near])
        number = np.empty(len(contour.points), dtype=np.int64)
        number[used] = count + np.arange(used.size)
        points.append(contour.points[used] + shift)
        elements.append(number[contour.elements[near]])
        cells.append(contour.cells[near])
        count += used.size
    if not points:
        return None
    return Contour(np.concatenate(points), np.concatenate(elements), np.concatenate(cells), contour.dimension,
                   contour.plane_axes)


def _any_corner(mesh, flags, cells):
    """For each of ``cells`` (increasing cell ids), whether any of its corners is flagged."""
    out = np.zeros(cells.size, dtype=bool)
    for block, start in zip(mesh.blocks, mesh.block_offsets[:-1]):
        lo, hi = np.searchsorted(cells, [start, start + len(block)])
        if hi > lo:
            out[lo:hi] = flags[block.connectivity[cells[lo:hi] - start]].any(axis=1)
    return out


def _bulk_masks(dist, width, multiple):
    if not (np.isfinite(width) and width > 0):
        raise OptionError(f"the interface width must be > 0, found {width!r}", fix="measure the width first")
    if not (np.isfinite(multiple) and multiple > 0):
        raise OptionError(f"multiple must be > 0, found {multiple!r}", fix="use 4 to 5 widths")
    reach = multiple * width
    return dist > reach, dist < -reach


def bulk_compositions(mesh, composition, distance, *, width, multiple=4.0):
    """The bulk composition of each phase, away from the interface.

    Cells farther than ``multiple * width`` from the contour are the bulk; on each side the
    volume-weighted median is the phase's composition and half the interquartile range its spread.
    The phase with the lower median is ``lean``; when only one side has bulk cells, the
    positive side counts as rich.

    Parameters
    ----------
    mesh : Mesh
        Supplies ``cell_measures`` (the weights).
    composition : ndarray of shape (n_cells,), mole fraction
    distance : ndarray of shape (n_cells,), in mesh length units
        Signed distance of each cell to the interface contour, positive on the side of the higher
        composition (NaN: unknown). With bulk cells on both sides either sign convention gives the
        same result; with one side only, the sign names it (a measure run with ``--phase lower``
        negates :func:`interface_distance`, whose sign follows the indicator).
    width : float, in mesh length units
        The measured interface width.
    multiple : float
        How many widths from the contour the bulk starts (4 to 5 for a tanh profile).

    Returns
    -------
    dict
        ``bulk_composition_lean``, ``bulk_composition_rich``, ``bulk_spread_lean``, ``bulk_spread_rich``,
        ``bulk_cells_lean``, ``bulk_cells_rich`` (NaN and 0 where a side has no bulk cells).
    """
    values, dist, weights = _cell_arrays(mesh, composition, distance)
    sides = []
    finite = np.isfinite(values)
    for mask in _bulk_masks(dist, float(width), float(multiple)):
        mask &= finite
        v, w = values[mask], weights[mask]
        if v.size == 0:
            sides.append((np.nan, np.nan, 0))
            continue
        q1, median, q3 = weighted_quantile(v, w, (0.25, 0.5, 0.75))
        count = v.size if mesh.cell_parents is None else np.unique(mesh.cell_parents[mask]).size  # cells, not pieces
        sides.append((median, 0.5 * (q3 - q1), int(count)))
    if np.isfinite(sides[0][0]) and np.isfinite(sides[1][0]) and sides[0][0] < sides[1][0]:
        sides.reverse()                  # the phase with the higher median is the rich one
    (rich, rich_spread, n_rich), (lean, lean_spread, n_lean) = sides
    return {"bulk_composition_lean": lean, "bulk_composition_rich": rich, "bulk_spread_lean": lean_spread,
            "bulk_spread_rich": rich_spread, "bulk_cells_lean": n_lean, "bulk_cells_rich": n_rich}


def equilibrium_gap(bulk_lean, bulk_rich, binodal_lean, binodal_rich):
    """The larger distance of the measured bulk compositions from the binodal pair (NaN if any is NaN)."""
    return float(np.max(np.abs([bulk_lean - binodal_lean, bulk_rich - binodal_rich])))


def mixture_state(model, temperature, composition, *, equilibrium=None):
    """Whether a mixture of this overall composition is stable, metastable or unstable.

    Parameters
    ----------
    model : NrtlModel, RegularSolutionModel or DoubleWellModel
    temperature : float, in K
    composition : float or array_like, mole fraction
    equilibrium : BinaryEquilibrium, optional
        ``equilibrium_at(model, temperature)`` when already computed (its binodal and spinodal
        are the same numbers; saves the work).

    Returns
    -------
    str or ndarray of str
        ``'stable'`` outside the binodal (or where one phase is stable), ``'unstable'`` where the
        mixing free energy is concave (inside the spinodal), ``'metastable'`` between. A model with
        two two-phase regions at the temperature has both counted (the second on the composition
        grid's convex hull), and the stable gap between them stays stable.
    """
    if equilibrium is None:
        pair = spinodal(model, temperature)
        lean, rich, _ = binodal(model, temperature, spinodal_pair=pair)
        s_lean, s_rich, b_lean, b_rich = pair[0][0], pair[1][0], lean[0], rich[0]
    elif equilibrium.temperature != float(temperature):
        raise OptionError(f"the equilibrium is at {equilibrium.temperature:g} K, not at {float(temperature):g} K",
                          fix="pass equilibrium_at(model, temperature) of the same temperature")
    else:
        s_lean, s_rich = equilibrium.spinodal_lean, equilibrium.spinodal_rich
        b_lean, b_rich = equilibrium.binodal_lean, equilibrium.binodal_rich
    x = np.asarray(composition, dtype=float)
    state = np.full(x.shape, "stable", dtype=object)
    if np.isfinite(b_lean):
        state[(x > b_lean) & (x < b_rich)] = "metastable"
        if isinstance(model, DoubleWellModel):
            unstable = (x > s_lean) & (x < s_rich)
        else:  # the curvature itself: a model may have two unstable ranges at one temperature, with a
            # stable gap between them inside the outermost spinodal pair; and a two-phase region beside
            # the widest (the binodal's), found on the grid's convex hull
            for low, high in other_regions(model, float(temperature), b_lean, b_rich):
                state[(x > low) & (x < high)] = "metastable"
            inner = (x > 0) & (x < 1)
            unstable = np.zeros(x.shape, dtype=bool)
            unstable[inner] = _stability(model, x[inner], float(temperature)) < 0
        state[unstable] = "unstable"
    return str(state) if state.ndim == 0 else state.astype(str)


def solute_distribution(mesh, solute, distance, *, width, multiple=4.0, receiving="positive", composition=None):
    """How a solute (a second composition field) is distributed between the two phases.

    Parameters
    ----------
    mesh : Mesh
    solute : ndarray of shape (n_cells,), mole fraction of the solute
    distance : ndarray of shape (n_cells,), signed distance to the contour
    width, multiple : float
        As in :func:`bulk_compositions`: the bulk of each phase.
    receiving : {'positive', 'negative'}
        The side of the contour (sign of ``distance``) of the phase that takes the solute up.
    composition : ndarray of shape (n_cells,), optional
        The main composition field; with it the lever-rule residual is computed.

    Returns
    -------
    dict
        ``solute_receiving``, ``solute_other`` (bulk means), ``partition_coefficient``
        (receiving / other), ``extraction_progress`` (share of the solute amount in cells on the
        receiving side, volume-weighted), and with ``composition`` ``lever_rule_residual``: the
        overall solute content minus the lever rule through the two bulk states (phase fraction
        from the main composition).
    """
    if receiving not in ("positive", "negative"):
        raise OptionError(f"receiving must be 'positive' or 'negative', found {receiving!r}",
                          fix="name the side of the contour the solute moves to")
    values, dist, weights = _cell_arrays(mesh, solute, distance)
    positive, negative = _bulk_masks(dist, float(width), float(multiple))
    take, other = (positive, negative) if receiving == "positive" else (negative, positive)
    side = (dist > 0) if receiving == "positive" else (dist < 0)
    finite = np.isfinite(values) & np.isfinite(dist)

    def mean(mask, v):
        m = mask & finite
        total = weights[m].sum()
        return dot(weights[m], v[m]) / float(total) if total > 0 else float("nan")

    amount = dot(weights[finite], values[finite])  # (no BLAS: see _sums.dot)
    out = {"solute_receiving": mean(take, values), "solute_other": mean(other, values),
           "extraction_progress": dot(weights[side & finite], values[side & finite]) / amount
           if amount > 0 else float("nan")}
    out["partition_coefficient"] = (out["solute_receiving"] / out["solute_other"]
                                    if out["solute_other"] > 0 else float("nan"))
    if composition is not None:
        main = np.asarray(composition, dtype=float)
        c_take, c_other = mean(take, main), mean(other, main)
        overall_main = mean(np.ones_like(take), main)
        overall_solute = mean(np.ones_like(take), values)
        fraction = (overall_main - c_other) / (c_take - c_other) if c_take != c_other else float("nan")
        out["lever_rule_residual"] = float(overall_solute - (fraction * out["solute_receiving"]
                                                             + (1 - fraction) * out["solute_other"]))
    return out


def gibbs_thomson_shift(model, temperature, radius, *, capillary_length, dimension=3, drop="rich"):
    """Leading-order shift of the coexisting compositions around a drop of radius ``radius``.

    The pressure jump across a curved interface, ``(d - 1) sigma / R``, adds
    ``delta = (d - 1) l / R`` to both chemical potentials (over RT) inside the drop, with the
    capillary length ``l = sigma v_m / (R_gas T)`` (equal molar volumes). Equal exchange
    potentials ``g'(x)`` and the second component's potential then shift the exchange potential by
    ``delta / (x_rich - x_lean)`` (linearised about the planar binodal), and each composition by
    that over ``g''(x)``: both up for a rich drop, both down for a lean one.

    Parameters
    ----------
    model : NrtlModel, RegularSolutionModel or DoubleWellModel
    temperature : float, in K
    radius : float, in the length unit of ``capillary_length``
    capillary_length : float
        ``sigma v_m / (R_gas T)``; for the double well, ``sigma / h`` in its units.
    dimension : {2, 3}
        2: a circular drop (one curvature), 3: a sphere.
    drop : {'rich', 'lean'}
        Which phase forms the drop.

    Returns
    -------
    (float, float)
        Shifts of the lean and rich binodal compositions (NaN without a split).
    """
    if dimension not in (2, 3):
        raise OptionError(f"dimension must be 2 or 3, found {dimension!r}", fix="give the mesh dimension")
    if drop not in ("rich", "lean"):
        raise OptionError(f"drop must be 'rich' or 'lean', found {drop!r}", fix="name the phase inside the drop")
    if not (np.isfinite(radius) and radius > 0):
        raise OptionError(f"the drop radius must be > 0, found {radius!r}", fix="give a measured radius")
    lean, rich, _ = binodal(model, temperature)
    lean, rich = float(lean[0]), float(rich[0])
    if not np.isfinite(lean):
        return float("nan"), float("nan")
    sign = 1.0 if drop == "rich" else -1.0
    delta = sign * (dimension - 1) * float(capillary_length) / (float(radius) * (rich - lean))
    shifts = []
    for x in (lean, rich):
        if isinstance(model, DoubleWellModel):
            a, b = model.lean, model.rich
            curvature = 2 * model.height * ((x - b) ** 2 + 4 * (x - a) * (x - b) + (x - a) ** 2)
        else:
            curvature = float(_stability(model, np.array([x]), np.array([float(temperature)]))[0]) / (x * (1 - x))
        shifts.append(delta / curvature)
    return shifts[0], shifts[1]


def between_class_share(x: np.ndarray, weights: np.ndarray, bins: int = 256) -> float:
    """The share of the measure-weighted variance of ``x`` between the two classes of Otsu's threshold (the
    threshold that makes it largest, over a histogram of ``bins`` bins): 1 for a field of two values, about
    2/pi for a Gaussian scatter (split at its mean); NaN for a constant field.

    References
    ----------
    Otsu, N. (1979), "A threshold selection method from gray-level histograms", IEEE Trans. Systems, Man,
    and Cybernetics 9(1), 62-66.
    """
    hist, edges = np.histogram(x, bins=bins, weights=weights)
    centres = 0.5 * (edges[1:] + edges[:-1])
    total = float(hist.sum())
    if not total > 0:
        return math.nan
    below = np.cumsum(hist)[:-1]
    moment = np.cumsum(hist * centres)[:-1]
    mean = float(np.dot(hist, centres)) / total
    variance = float(np.dot(hist, (centres - mean) ** 2)) / total
    above = total - below
    with np.errstate(invalid="ignore", divide="ignore"):
        between = below * above * (moment / below - (mean * total - moment) / above) ** 2 / total ** 2
    best = np.nanmax(np.where((below > 0) & (above > 0), between, np.nan)) if bins > 1 else math.nan
    return float(best / variance) if variance > 0 and np.isfinite(best) else math.nan
