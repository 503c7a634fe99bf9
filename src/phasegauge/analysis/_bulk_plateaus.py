"""The bulk values of the two phases an interface's widths are taken between (:func:`bulk_plateaus`)."""

from __future__ import annotations

import numpy as np

from ..model.corners import corner_extremes, incidence_matrix
from ._bulk_noise import SPREAD_SAMPLE, spread_of
from ._width_integrals import _TAIL

__all__ = ["bulk_plateaus", "point_volumes", "PLATEAU_TOLERANCE", "PLATEAU_SHARE", "PLATEAU_BAND"]

#: bulk values within this of 0 and 1 are taken as 0 and 1 (no rescaling)
PLATEAU_TOLERANCE = 1e-3
#: a plateau beyond 0.25 of its ideal value counts when this share of its side's values lies within
#: :data:`PLATEAU_BAND` of it (see :func:`bulk_plateaus`)
PLATEAU_SHARE = 0.2
PLATEAU_BAND = 0.01
#: a side whose values never reach its ideal keeps its own bulk only beyond the interface's reach, at least this
#: many cells from the contour (with a mesh; :func:`_beyond_reach`; our threshold), or with this share of it within
#: PLATEAU_BAND of the bulk (without; our threshold)
REACH_CELLS = 4.0
UNREACHED_SHARE = 0.6
#: the points within this of a bulk inside 0.1 < c < 0.9 are its own, not the profile's, where the other bulk lies
#: outside (:func:`_contour_reach`; our threshold: five spreads of noise of 1 % of a jump of 1)
_OWN_POINTS = 0.05
#: a side's bulk and spread are read beyond its profile's tail where it holds at least this many values there
#: (:func:`_far_bulks`; our threshold: the median of n normal values scatters by about 1.25 / sqrt(n) spreads,
#: 0.4 at 10, within the 3 spreads of the tail cut-off; from memory)
FAR_VALUES = 10
#: at most this many of a side's values are read for :func:`_far_bulks`, evenly spaced (the median of 4096 normal
#: values scatters by 2 % of a spread, their scaled MAD by 1.8 % of itself, by the 1.25 and 1.17 / sqrt(n) above; a
#: search from inside a closed contour visits much of its tree: 32 768 values took 0.77 s on 96^3 cubes of 6
#: tetrahedra, against 2.2 s for the rest of :func:`bulk_plateaus`)
_FAR_SAMPLE = 1 << 12
#: the tail cut-off's spread is read where a logistic's tail lies within this share of the jump of its bulk
#: (:func:`_far_bulks`; our threshold: a cut-off of three spreads of what is left of it there takes out under 0.6 %
#: of the variance, the logistic density's share beyond 9.2 eps)
_QUIET = 1e-4


def bulk_plateaus(c_point: np.ndarray, level: float, mesh=None, *, extremes=None) -> tuple[float, float, float]:
    """Bulk values of the two phases and the tail cut-off of the width integrals.

    Parameters
    ----------
    c_point : ndarray of shape (n_points,)
        Point values of the indicator (not clipped).
    level : float
        The contour level: values below belong to the low phase.
    mesh : Mesh, optional
        The mesh of the points: a plateau's share of its side is then of the points'
        volumes (:func:`point_volumes`), so a mesh refined towards the interface does
        not hide it; without it, of the points' count.
    extremes : CornerExtremes, optional
        :func:`.corners.corner_extremes` of ``c_point`` on ``mesh`` where the caller has them (the
        widths do): the cells the level crosses are read from them, not formed again.

    Returns
    -------
    low, high : float
        The bulk value of each phase: starting from the side's extreme
        (0.5th or 99.5th percentile), three times the median of the side's
        values within 0.05. A side keeps its ideal value (0 or 1) when the
        result moves more than 0.01 from its extreme (no plateau: the
        inside of a thin filament), lies beyond 0.25 of the ideal with
        less than a fifth of the side (by volume, given the mesh) within 0.01 of it (the top
        of a drop that never reached its bulk, not the bulk of a partially
        miscible phase at 0.3), or lies
        within three scaled MADs of those values of it (a smooth profile
        still approaching its ideal, not a bulk sitting off it); a noisy bulk
        is kept all the same where half its side lies within 0.05 of it, it
        lies more than three spreads off the ideal and moved at most three
        spreads (a Cahn-Hilliard matrix at 0.03 +- 0.005 while coarsening).
        A side whose values all stay more than ``PLATEAU_TOLERANCE`` short of
        its ideal keeps its bulk where half the side lies within 0.05 of it,
        a fifth (by volume) within 0.01 and a fifth (by volume) beyond the
        interface's reach, max(eps ln(|g - other ideal| / 0.01), 4 cells)
        from its contour (our thresholds; 4.6 eps for a matrix at 0.02), not
        counting points within eps ln 1000 + 1 cell - reach of the domain's
        boundary (:func:`_beyond_reach`): a plateau's bulk never lies beyond
        its side's own values, however wide its spread, and a matrix packed
        between drops 10 eps apart keeps its bulk; the crest of a filament or
        a bump lies within that reach, a profile's tail cut off by the
        domain (ending within eps ln 999 = 6.9 eps of its contour) against
        its boundary, and both still read the ideal. Without the mesh, such a side
        must hold 0.6 of its values within 0.01 of the bulk (a cut logistic
        tail holds at most 0.42) and the bulk lie nearer its ideal than the
        level (a crest just above the level holds all its values near it).
        With a mesh, a plateau so found is then read again as the median of
        its side's values beyond the profile's own tail, eps ln 1000 + 1 cell
        from the contour, where at least ``FAR_VALUES`` lie there
        (:func:`_far_bulks`: the inside at 0.98 of a drop 13 eps across read
        0.977 from values still on its tail); where fewer do, as its extreme
        (the crest of a film under about 15 eps thick, whose near median lay
        below the crest).
        ``(0.0, 1.0)`` when both lie within ``PLATEAU_TOLERANCE`` (1e-3) of
        0 and 1.
    tail : float
        Cells whose rescaled corner values all lie within ``tail`` of 0 or
        of 1 are left out of the width integrals: 1e-6 with bulk values at
        0 and 1; else three scaled MADs of the bulk values about their
        median (the bulk's noise, and the spread of bulk values between
        droplets, as the Gibbs-Thomson shift of a Cahn-Hilliard run gives),
        at most 0.02, at least 1e-6. With a mesh the values are read beyond
        the profile's tail (:func:`_far_bulks`), so a clean profile cuts
        nothing, and a side holding too few values that far out (a film
        under about 15 eps thick) reads its crest (its extreme) and takes
        no cut-off; without a mesh they are the side's values within 0.05
        of its plateau, which take a profile's own tail in too.

    Notes
    -----
    A Cahn-Hilliard run relaxes to bulk values off +-1 (curvature shifts
    them; a bulk of 0.01 in c over the whole domain adds 0.01 x volume to
    int c (1 - c) dV, which the threshold-free estimator reads as width).
    The estimators then work on (c - low) / (high - low): the logistic
    profile between any two plateaus gives its 5-95 % thickness between them.
    """
    c = np.asarray(c_point, dtype=np.float64)
    finite = np.isfinite(c)
    if not finite.all():  # (no copy of the values when all are finite)
        c = c[finite]
    plateaus, spreads = [], []
    sides = [_side_bulk(c, level, below, q) for below, q in ((True, 0.5), (False, 99.5))]
    made = {}  # the contour's reach, made once for both sides when a side asks

    def contour():
        if "reach" not in made:  # the profile read between the two sides' bulks as found so far
            bulks = tuple(ideal if found is None else found[2] for found, ideal in zip(sides, (0.0, 1.0)))
            made["reach"] = _contour_reach(c_point, level, mesh, extremes, bulks=bulks)
        return made["reach"]

    for (below, ideal), found in zip(((True, 0.0), (False, 1.0)), sides):
        if found is None:
            plateaus.append(ideal)
            spreads.append(0.0)
            continue
        mask, side, g, extreme, near, spread = found
        # flat (moved little from the extreme) and clear of the ideal by three spreads
        strict = abs(g - extreme) <= 0.01 and abs(g - ideal) > 3.0 * spread
        # a noisy bulk holding most of its side, off its ideal by more than three spreads, is a plateau
        # even where it moved more (a Cahn-Hilliard matrix at 0.03 +- 0.005 while coarsening)
        noisy = (near.size >= 0.5 * side.size and abs(g - ideal) > max(3.0 * spread, PLATEAU_TOLERANCE)
                 and abs(g - extreme) <= max(0.01, 3.0 * spread))
        # a plateau (half its side within 0.05 of g, a fifth within PLATEAU_BAND) whose side's values all stay
        # more than PLATEAU_TOLERANCE short of the ideal never reads the ideal: its bulk lies within its own
        # values (a matrix at 0.02, whose spread the halo of a vanishing drop widened past a third of its
        # distance from 0, is not at 0 when no value of it lies below 0.0135); the crest of a profile, or the
        # tail of one cut off by the domain, holds too little of its side near g and still reads the ideal
        short = (float(side.min()) - ideal if below else ideal - float(side.max())) > PLATEAU_TOLERANCE
        # a crest or a cut tail piles its values near its contour: with a mesh a fifth of the side must lie beyond
        # the interface's reach and clear of the boundary that cuts a tail (:func:`_beyond_reach`); without one,
        # UNREACHED_SHARE of it within PLATEAU_BAND of g and g nearer its ideal than the level (a logistic tail cut
        # short of 1e-3 holds at most 0.42 of its side within 0.01 of g, a matrix 0.83 and more; a crest 0.05 above
        # the level holds all of it)
        unreached = (short and near.size >= 0.5 * side.size
                     and (_holds(side, g, mesh, mask, finite)
                          and _beyond_reach(mesh, mask, finite, g, ideal, contour())
                          if mesh is not None else _holds(side, g, None, mask, finite, UNREACHED_SHARE)
                          and abs(g - ideal) < abs(g - level)))
        # beyond 0.25 of the ideal, a plateau must hold a fifth of its side (a bulk, as a partially
        # miscible pair's phases sit at 0.3 and 0.7; not the top of a drop that never reached its bulk)
        held = abs(g - ideal) <= 0.25 or unreached or (strict and _holds(side, g, mesh, mask, finite))
        if not (held and (strict or noisy or unreached)):
            # no plateau on this side (the inside of a thin filament, a profile still
            # approaching its ideal value): the ideal value
            plateaus.append(ideal)
            spreads.append(0.0)
            continue
        plateaus.append(g)
        spreads.append(spread)
    off = any(found is not None and p != ideal for found, p, ideal in zip(sides, plateaus, (0.0, 1.0)))
    if mesh is not None and off:
        reach = contour()
        if reach is not None:  # each bulk and its spread read where the profile's own tail has died out
            plateaus, spread = _far_bulks(c, mesh, finite, sides, plateaus, reach)
            spreads = spreads if spread is None else [spread]
    low, high = plateaus
    if abs(low) <= PLATEAU_TOLERANCE and abs(high - 1.0) <= PLATEAU_TOLERANCE:
        return 0.0, 1.0, _TAIL
    tail = float(np.clip(3.0 * max(spreads) / (high - low), _TAIL, 0.02))
    return low, high, tail


def _far_bulks(c: np.ndarray, mesh, finite: np.ndarray, sides: list, plateaus: list, contour):
    """The plateaus of :func:`bulk_plateaus` read again over the values beyond the profile's own tail, and the
    spread of those values (0 where no side holds enough of them).

    - A side's plateau ``g`` off its ideal becomes the median of its values within 0.05 of ``g`` farther than
      eps ln(1 / PLATEAU_TOLERANCE) + 1 cell from the centroids of the cells the level crosses (``contour``:
      :func:`_contour_reach`'s; a logistic tail there lies within 1e-3 of its bulk), where it holds at least
      :data:`FAR_VALUES` of them. Nearer in, those values are the profile itself: a logistic's tail within 0.05
      of its bulk (beyond 2.9 eps) drew their median towards the level (0.977 for the inside at 0.98 of a drop
      of radius 13 eps). A side holding fewer has no bulk that can be told from its tail (a film under about
      15 eps thick: its near median 0.991 lay below its own crest at 0.9985): it reads its extreme (the 0.5th or
      99.5th percentile of its values: the crest, nearer its bulk than any value of its tail), and its spread
      makes no cut-off.
    - The spread is :func:`._bulk_noise.spread_of` the deviations from their own median of a side's values
      farther than eps ln(1 / :data:`_QUIET`) + 1 cell (a logistic tail there lies within 1e-4 of its bulk), the
      sides holding :data:`._bulk_noise.SPREAD_SAMPLE` of them counting; where none does, of those beyond the
      first distance, alike; where none holds as many there either, of all those together (a matrix packed
      between drops about 10 eps apart holds few values beyond either distance); a side read at its crest
      counts in none (with no side read so far out, the spread is 0: the tail cut-off's floor). Nearer in, a
      clean profile's tail within 0.05 gave a spread of a third of the distance of 0.977 from 0.98, and the
      cut-off of three such spreads took about 30 % of the variance out of the width integrals; a cut-off at 1e-3
      still takes 4 % (the logistic density's share beyond 6.9 eps), at 1e-4 0.6 %.

    A side of more than :data:`_FAR_SAMPLE` values within 0.05 of ``g`` is read at that many, evenly spaced.
    """
    tree, eps, cell = contour
    far, quiet = (eps * np.log(1.0 / share) + cell for share in (PLATEAU_TOLERANCE, _QUIET))
    points = np.flatnonzero(finite)
    plateaus, beyond, past = list(plateaus), [], []
    for k, (found, ideal) in enumerate(zip(sides, (0.0, 1.0))):
        if found is None or plateaus[k] == ideal:
            continue
        near = np.flatnonzero(found[0] & (np.abs(c - plateaus[k]) < 0.05))
        stride = -(-near.size // _FAR_SAMPLE)
        near = near[::stride]  # evenly spaced
        distance = tree.query(mesh.coordinates[points[near]], distance_upper_bound=quiet)[0]  # inf beyond quiet
        away = c[near[distance > far]]
        if away.size * stride < FAR_VALUES:  # no bulk to tell from the profile's tail: the crest, no cut-off
            plateaus[k] = found[3]
            continue
        plateaus[k] = float(np.median(away))
        for found_there, values in ((beyond, away), (past, c[near[np.isinf(distance)]])):
            if values.size:  # with the number of the side's values they stand for
                found_there.append((values - np.median(values), values.size * stride))
    if not beyond:  # every side off its ideal read at its crest: no cut-off from their tails' spreads
        return plateaus, 0.0
    # the sides standing for SPREAD_SAMPLE values count, beyond the second distance where any does, else beyond the
    # first; where none does, all beyond the first together (as _bulk_noise.spread_of reads them)
    counted = ([d for d, n in past if n >= SPREAD_SAMPLE] or [d for d, n in beyond if n >= SPREAD_SAMPLE]
               or [np.concatenate([d for d, _ in beyond])])
    return plateaus, spread_of(counted, least=1)


def _side_bulk(c: np.ndarray, level: float, below: bool, q: float):
    """``(mask, side, g, extreme, near, spread)`` of one side of ``level`` (None where it holds no value): starting
    from the side's ``q``-th percentile, three times the median of the side's values within 0.05, and the scaled MAD
    of those values about it."""
    mask = c < level if below else c > level
    side = c[mask]
    if side.size == 0:
        return None
    extreme = float(np.percentile(side, q))
    g, near = extreme, side
    for _ in range(3):
        near = side[np.abs(side - g) < 0.05]
        # never empty: the extreme has neighbours within 0.05 (partitioned in place: only its size is read after)
        median = float(np.median(near, overwrite_input=True))
        if median == g:  # the same g would select the same values again: settled
            break
        g = median
    return mask, side, g, extreme, near, 1.4826 * float(np.median(np.abs(near - g), overwrite_input=True))


def _holds(side: np.ndarray, g: float, mesh, mask: np.ndarray, finite: np.ndarray,
           share: float = PLATEAU_SHARE) -> bool:
    """Whether ``share`` of a side (its values ``side``, where ``mask`` holds among the finite points) lies
    within :data:`PLATEAU_BAND` of ``g``: by the points' volumes given the mesh, else by count."""
    near = np.abs(side - g) <= PLATEAU_BAND
    if mesh is None:
        return np.count_nonzero(near) >= share * side.size
    volume = point_volumes(mesh)
    volume = (volume if finite.all() else volume[finite])[mask]
    return float(volume[near].sum()) >= share * float(volume.sum())


def _contour_reach(c_point: np.ndarray, level: float, mesh, extremes=None, *, bulks=(0.0, 1.0)):
    """What :func:`_beyond_reach` reads of the contour, the same for both sides: ``(tree, eps, cell)``, the
    search tree of the centroids of the cells the level crosses, the logistic scale eps and those cells'
    median size; None where the level crosses no cell.

    eps is the median of d / |logit c - logit level| over the points at 0.1 < c < 0.9 clear of the level (d their
    distance to those centroids, logit c = ln(c / (1 - c))): the logistic profile c = 1 / (1 + exp(-d / eps)) read
    back (cells and centroids stand for the contour: half a cell of error, within the REACH_CELLS floor). Where
    both ``bulks`` (the two sides' bulk values as found so far) lie within 0.1 < c < 0.9 (a partially miscible
    pair at 0.32 and 0.66), c and the level are first taken as (c - low) / (high - low): else the bulks' own points
    are read as profile, and their distance to the contour as eps (0.15 for 0.01). With one bulk outside (0.08 or
    0.95 beside 0.6 or 0.3) the other may be the crest of a bump that never reached its bulk, which that scale would
    read as a bulk: c stays raw, and only the points within 0.05 of either bulk (their own values and their
    noise) are left out of the profile. A crest holds few points that near it and stays within reach.
    """
    from scipy.spatial import cKDTree

    c = np.asarray(c_point, dtype=np.float64)
    ext = corner_extremes(mesh, c) if extremes is None else extremes  # (no mesh-wide incidence made for it)
    # crossed as find_interface crosses them: a corner above the level and one at or below it (a contour through a
    # line of points, as a symmetric film's, crosses the cells beside it)
    crossed = np.flatnonzero((ext.low <= level) & (ext.high > level))
    del ext
    if crossed.size == 0:
        return None
    tree = cKDTree(mesh.cell_centroids[crossed])
    low, high = bulks
    raw = c
    if 0.1 < low < high < 0.9:  # both bulks inside the ramp: read between them
        c, level = (c - low) / (high - low), (level - low) / (high - low)
    with np.errstate(divide="ignore", invalid="ignore"):
        logit = np.log(c / (1.0 - c)) - np.log(np.clip(level, 0.01, 0.99) / (1.0 - np.clip(level, 0.01, 0.99)))
    ramp = (c > 0.1) & (c < 0.9) & (np.abs(logit) > 0.4)  # 0.4: c 0.1 off the level at 0.5
    if not 0.1 < low < high < 0.9:  # each bulk's own points and their noise are no profile (0.6 beside 0.08,
        for bulk in (low, high):  # and 0.08's noise past 0.1)
            ramp &= np.abs(raw - bulk) >= _OWN_POINTS
    ramp = np.flatnonzero(ramp)
    eps = 0.0
    if ramp.size:
        eps = float(np.median(tree.query(mesh.coordinates[ramp])[0] / np.abs(logit[ramp])))
    return tree, eps, float(np.median(mesh.cell_sizes_of(crossed)))


def _beyond_reach(mesh, mask: np.ndarray, finite: np.ndarray, g: float, ideal: float, contour) -> bool:
    """Whether :data:`PLATEAU_SHARE` of a side (by the points' volumes) lies beyond the interface's reach from the
    centroids of the cells the level crosses, on points whose profile could not be a logistic tail cut by the domain
    (``contour``: :func:`_contour_reach`'s; None, no contour: nothing reaches the side).

    - The reach is max(eps ln(|g - other ideal| / PLATEAU_BAND), REACH_CELLS cells): where a logistic from bulk
      ``g`` to the other phase's ideal comes within PLATEAU_BAND of ``g`` (4.6 eps for a matrix at 0.02). A crest
      between two fronts lies nearer its contour than that: a strip whose crest is 0.99 holds 16 % of its side
      beyond it, a bump none.
    - A point beyond the reach counts only when it lies farther than eps ln(1 / PLATEAU_TOLERANCE) + 1 cell - reach
      (2.7 eps for a matrix at 0.02) from the centroids of the boundary faces (edges in 2D): a logistic tail whose
      values all stay PLATEAU_TOLERANCE short of its ideal ends within 6.9 eps of its contour, so its points
      beyond the reach lie within that of the domain's boundary that cut it (the cell: face centroids and cell
      centroids stand for the boundary and the contour). The planes of periodic axes count as boundary here:
      that only sets points aside.
    """
    from ._boundary_reach import boundary_face_tree

    if contour is None:
        return True
    tree, eps, cell = contour
    at = mesh.coordinates
    span = max(abs(1.0 - ideal - g), PLATEAU_BAND)  # from g to the other phase's ideal
    reach = max(eps * np.log(span / PLATEAU_BAND), REACH_CELLS * cell)
    points = np.flatnonzero(finite)[mask]
    far = np.flatnonzero(np.isinf(tree.query(at[points], distance_upper_bound=reach)[0]))
    volume = point_volumes(mesh)[points]
    needed = PLATEAU_SHARE * float(volume.sum())
    if float(volume[far].sum()) < needed:
        return False
    faces = boundary_face_tree(mesh)  # (every boundary face, kept on the mesh)
    if faces is not None:  # a cut tail's far points lie within 6.9 eps of its contour and a cell less the reach
        wall = eps * np.log(1.0 / PLATEAU_TOLERANCE) + cell - reach  # of the boundary that cut it
        if wall > 0:
            far = far[np.isinf(faces[0].query(at[points[far]], distance_upper_bound=wall)[0])]
    return float(volume[far].sum()) >= needed


def point_volumes(mesh) -> np.ndarray:
    """Each point's share of the mesh's volume: every cell's measure split evenly among its corners
    (made once a mesh)."""
    def compute():
        a = incidence_matrix(mesh)  # made for this and not kept on the mesh (12 bytes a corner)
        corners = np.asarray(a.sum(axis=1)).ravel()
        return a.T @ (mesh.cell_measures / np.maximum(corners, 1))

    return mesh.memo("point_volumes", compute)
