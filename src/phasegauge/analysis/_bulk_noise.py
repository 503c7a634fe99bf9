"""Cell noise in the bulk the width estimators leave out (:func:`bulk_spread`, :func:`beyond_reach_points`).

A stochastic or particle-averaged solver writes its bulk values with a spread of a few per cent of the
jump. Every point the noise pushes past the band edge (0.05 of the jump) counts in the band volume of
``interface_width``, wherever it lies: with a spread of 3 % of the jump 4.8 % of the bulk's points do
(the normal tail beyond 1.67 spreads), which over a domain of many interface widths is more band than
the interface's own. The width estimators then see only the points within reach of the contour.
"""

from __future__ import annotations

import numpy as np

from ..model.corners import corner_extremes
from ..model.mesh import Mesh
from ._width_integrals import _HIGH, _LOW

__all__ = ["bulk_spread", "side_deviations", "spread_of", "beyond_reach_points", "between_bulks", "leave_out_noise",
           "NOISE_EDGE_SPREADS", "TOO_NOISY", "SPREAD_SAMPLE"]

#: the band's own points are told from the bulk's noise where the band edge lies within this many bulk
#: spreads of the bulk (a spread above 1.25 % of the jump; below it, fewer than 3e-5 of the bulk's points
#: reach the band edge, the normal tail beyond 4 spreads; our threshold)
NOISE_EDGE_SPREADS = 4.0
#: a bulk spread of the point values the widths read beyond this share of the jump is too large to tell the
#: interface's band from the noise (our threshold: on tanh drops with noise on points the band width reads within
#: 2.3 % of its noise-free value at 3 %, 4-5 % wide in 3D at 3.5 % and 10-15 % at 4 %)
TOO_NOISY = 0.03
#: a side's spread counts with at least this many values (our threshold: the scaled MAD of n normal values
#: scatters by about 1.17 / sqrt(n) of itself, 4 % at 1000, from its 37 % efficiency, Rousseeuw & Croux 1993,
#: from memory); where neither side holds as many, both sides' deviations from their own medians are pooled
SPREAD_SAMPLE = 1000
#: the bulk's values are read within this of their bulk (0 or 1, rescaled)
_BULK_REACH = 0.25
#: a side of more values is read at this many, evenly spaced through it (the scaled MAD of 65 536 normal values
#: scatters by about 0.5 % of itself, by the 1.17 / sqrt(n) above; the whole side's medians took 50-80 ms a step
#: of 1M points, a quarter of a later step's time)
_SIDE_VALUES = 1 << 16


def bulk_spread(u: np.ndarray, level: float, *, least: int = SPREAD_SAMPLE) -> float:
    """The larger of the two phases' spreads about their bulk, as a share of the jump.

    Parameters
    ----------
    u : ndarray
        Values rescaled to the bulk values, (c - low) / (high - low), not clipped.
    level : float
        The contour level on that scale.
    least : int
        The fewest values a side's spread counts with (1: the larger side's, however few).

    Returns
    -------
    float
        1.4826 times the median absolute deviation about their median of the values below
        ``level`` within 0.25 of 0, and of those above within 0.25 of 1 (the scaled MAD: the
        standard deviation of normal noise; a side of more than 65 536 values read at that many,
        evenly spaced), of the sides holding at least ``least`` such values
        (:data:`SPREAD_SAMPLE`); where neither does, of both sides' deviations from their own medians
        together (a few dozen points inside a small drop read their profile's tail and their
        own sampling scatter, not the noise); 0 where no side holds such a value.
    """
    return spread_of(side_deviations(u, level), least)


def side_deviations(u: np.ndarray, level: float) -> list:
    """The deviations from their own median of each side's values near its bulk (:func:`bulk_spread`), a side of
    more than 65 536 such values read at that many, evenly spaced; one array a side holding any."""
    u = np.asarray(u)  # NaN fails every comparison: no finite copy is needed
    sides = (u[(u > -_BULK_REACH) & (u < min(level, _BULK_REACH))],
             u[(u > max(level, 1.0 - _BULK_REACH)) & (u < 1.0 + _BULK_REACH)])
    sides = [side[::-(-side.size // _SIDE_VALUES)] for side in sides if side.size]  # evenly spaced
    return [side - np.median(side) for side in sides]


def spread_of(deviations: list, least: int = SPREAD_SAMPLE) -> float:
    """:func:`bulk_spread` of the sides' ``deviations`` (:func:`side_deviations`)."""
    if not deviations:
        return 0.0
    sampled = [d for d in deviations if d.size >= least] or [np.concatenate(deviations)]
    return max(1.4826 * float(np.median(np.abs(d))) for d in sampled)


def beyond_reach_points(mesh: Mesh, u: np.ndarray, level: float, *,
                        extremes=None) -> tuple[np.ndarray, np.ndarray]:
    """The points beyond the contour's reach, and the cells within it.

    A point lies within reach when it is a corner of a cell the level crosses (a corner below it, one
    at or above), or of a cell with
    a corner in the band (0.05 < u < 0.95) joined to such a cell through band points of cells
    that share them: the interface's own band and its edge. A band point of a patch of noise
    apart from every crossing is beyond reach, as is the bulk beyond the band's edge cells.

    Parameters
    ----------
    mesh : Mesh
    u : ndarray of shape (n_points,)
        Point values rescaled to the bulk values (clipped or not).
    level : float
        The contour level on that scale.
    extremes : CornerExtremes, optional
        ``corner_extremes(mesh, u)``, where the caller has them (read only where every value is finite).

    Returns
    -------
    beyond : ndarray of bool, shape (n_points,)
        The points beyond reach.
    near : ndarray of bool, shape (n_cells,)
        The cells within reach (crossed, or with a corner in a band patch that a crossing joins).
    """
    from scipy import sparse
    from scipy.sparse.csgraph import connected_components

    # from the blocks' corners, a block at a time: no incidence matrix is made (nor kept on the mesh: 52 MB
    # at 1M tetrahedra); the graph holds the cells that have a band corner and the band points only
    finite = np.isfinite(u)
    band = finite & (u > _LOW) & (u < _HIGH)
    if finite.all():  # one pass over the corners, or none
        extremes = corner_extremes(mesh, u) if extremes is None else extremes
        low, high = extremes.low, extremes.high
        del extremes
    else:  # over the finite corners
        high = corner_extremes(mesh, np.where(finite, u, -np.inf)).high
        low = corner_extremes(mesh, np.where(finite, u, np.inf)).low
    crossed = (high >= level) & (low < level)  # a finite corner at or above the level, and one below it
    maybe = np.flatnonzero((low < _HIGH) & (high > _LOW))  # the cells that can have a band corner
    del low, high
    rows, cols = [], []
    for block, start in zip(mesh.blocks, mesh.block_offsets[:-1]):
        start, n = int(start), block.connectivity.shape[0]
        picked = maybe[np.searchsorted(maybe, start):np.searchsorted(maybe, start + n)] - start
        corners = block.connectivity[picked]
        cell, corner = np.nonzero(band[corners])
        rows.append(picked[cell] + start)
        cols.append(corners[cell, corner])
    rows, cols = np.concatenate(rows), np.concatenate(cols)
    near = crossed.copy()  # a crossed cell is within reach
    if rows.size:  # cells and band points as the nodes of one graph: a cell joins its band corners
        # rows come in increasing order (cells in order, corners by np.nonzero's row-major order): each cell's
        # corners are one run of them, so the graph's rows are made as they lie (no sort, no array per cell)
        starts = np.flatnonzero(np.concatenate(([True], rows[1:] != rows[:-1])))
        cells_in = rows[starts]
        point_node = np.cumsum(band, dtype=np.int64) + (cells_in.size - 1)  # a band point's node, after the cells
        size = int(point_node[-1]) + 1
        rows_at = np.concatenate((starts, np.full(size - cells_in.size + 1, rows.size)))  # point nodes: no rows
        graph = sparse.csr_matrix((np.ones(rows.size), point_node[cols], rows_at), shape=(size, size))
        _, label = connected_components(graph, directed=False)
        reached = np.zeros(int(label.max()) + 1, dtype=bool)
        reached[label[:cells_in.size][crossed[cells_in]]] = True  # the patches a crossing joins
        near[cells_in] |= reached[label[:cells_in.size]]
    within = np.zeros(mesh.n_points, dtype=bool)
    for block, start in zip(mesh.blocks, mesh.block_offsets[:-1]):
        within[block.connectivity[near[int(start):int(start) + block.connectivity.shape[0]]].ravel()] = True
    return finite & ~within, near


def between_bulks(values: np.ndarray, low: float, high: float) -> np.ndarray:
    """``values`` between the bulk values ``low`` and ``high``, clipped to [0, 1] (monotone: the cells' corner
    extremes of the values map to those of the result, with the same rounding)."""
    if (low, high) == (0.0, 1.0):
        return np.clip(values, 0.0, 1.0)
    return np.clip((values - low) / (high - low), 0.0, 1.0)


def leave_out_noise(mesh: Mesh, indicator, c_point: np.ndarray, clipped: np.ndarray, plateaus, level: float,
                    extremes=None):
    """With bulk noise that reaches the band edge, ``clipped`` (the point values between the bulks, clipped) with
    the points beyond the contour's reach set to their side's bulk (:func:`beyond_reach_points`), and the cells
    within reach; else ``clipped`` itself and None.

    The spread is read first over every value near a bulk (a smooth profile's own values count in
    it too: a small drop with no bulk inside), and where that reaches the band edge again over the
    values beyond reach alone, which must reach it as well. It warns where the spread of the point values
    beyond reach, which the widths read (a cell's noise reaches the points averaged over its neighbours:
    about half of it in 2D), exceeds :data:`TOO_NOISY` of the jump; the cells' spread only leaves out.
    ``plateaus`` are :func:`._bulk_plateaus.bulk_plateaus`' ``(low, high, tail)``, ``level`` the contour level
    between them, ``extremes`` the cells' corner extremes of ``c_point`` where the caller has them.
    """
    import warnings

    from ..errors import PhasegaugeWarning
    from ..model.corners import CornerExtremes

    low, high, _ = plateaus
    u = (c_point - low) / (high - low)
    cells = None
    if getattr(indicator, "location", None) == "cell":  # the solver's own values: their noise in full
        cells = (np.asarray(indicator.cell, dtype=np.float64) - low) / (high - low)
    # the leave-out reads every side, however few its values (leaving out does no harm); the warning the
    # sides with enough of them
    spread = max(bulk_spread(u, level, least=1), 0.0 if cells is None else bulk_spread(cells, level, least=1))
    if not NOISE_EDGE_SPREADS * spread > _LOW:
        return clipped, None
    if extremes is not None:  # those of c: the clipped values' are theirs mapped (monotone, the same rounding)
        extremes = CornerExtremes(*(between_bulks(part, low, high) for part in extremes))
    beyond, near = beyond_reach_points(mesh, clipped, level, extremes=extremes)
    if not near.any():  # no crossing to reach from
        return clipped, None
    deviations = side_deviations(u[beyond], level)
    read = spread_of(deviations)  # the point values the widths read: the warning's
    spread = max(spread_of(deviations, least=1),
                 0.0 if cells is None else bulk_spread(cells[~near], level, least=1))
    if read > TOO_NOISY:
        warnings.warn(PhasegaugeWarning(
            f"the bulk values scatter by {100 * read:.1f} % of the jump between the phases "
            f"({high - low:.3g}; sd as scaled MAD), beyond the {100 * TOO_NOISY:.0f} % up to which the "
            "interface widths are told from such noise: they read high; average the field (over time, "
            "or over more particles) before measuring, or read no width before the phases separate"), stacklevel=3)
    if not NOISE_EDGE_SPREADS * spread > _LOW:
        return clipped, None
    return np.where(beyond, np.where(clipped < level, 0.0, 1.0), clipped), near
