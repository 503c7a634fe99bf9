"""Droplet tracking across steps by volume overlap, with events.

Each call of :meth:`DropletTracker.add` links the droplets of the new step to
those of the previous one, so only one step's labels are held at a time:

1. *Overlap.* Every core cell of a previous droplet is moved by that
   droplet's velocity times the time step (when velocities are known), and
   the moved point is looked up in the new step: the same cell when the mesh
   is the same and nothing moved, otherwise the cell with the nearest
   centroid (a KD-tree of the new step's centroids, so the mesh may change).
   On a mesh whose cells a reader split into pieces (polyhedra into tetrahedra) the
   search is over the whole cells (one centroid kept a whole cell, not one a piece),
   and :func:`label_droplets` labels the whole cells: a labelled whole cell moves from
   its centroid and lands in the whole cell with the nearest centroid. Labels given
   per piece (``whole_cells=False`` on a split mesh) are read per whole cell too: a
   piece moves from its whole cell's centroid, and a whole cell counts for the
   droplet of its labelled piece of largest ``c dV``.
   A moved point beyond the box along an axis not periodic, or farther than
   :data:`REACH` cell sizes from the nearest centroid, is outside the mesh and lands
   nowhere (a drop carried out through an outlet disappears; it would otherwise land
   on the outlet's cells, on the drop behind it).
   The overlap of previous droplet p with new droplet q is the sum of ``c dV``
   of p's cells that land in q. A pair is linked when the overlap is at least
   ``min_overlap`` times the smaller of the two core volumes. A connected group of as
   many previous as new droplets (two or more) whose volumes pair one to one within
   :data:`SAME_VOLUME` keeps those pairs' links alone (drops following each other closer
   than they move per output overlap the old place of the drop ahead).
2. *Gate.* Droplets left without any link on both sides are paired one to one
   (minimum total distance, ``scipy.optimize.linear_sum_assignment``) when the
   predicted centroid of the previous droplet lies within ``gate`` equivalent
   diameters of the new one.
3. *Events.* Connected groups of the link graph give the events: 1 -> 1
   continues a track, 1 -> n breakup, n -> 1 coalescence, n -> m complex,
   0 -> 1 appearance, 1 -> 0 disappearance. In every group the largest new
   droplet takes the track of the largest previous one (Silver & Wang 1997);
   the others get new track ids.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
from scipy import sparse
from scipy.sparse import csgraph
from scipy.spatial import cKDTree

from ..errors import OptionError
from ..model.axes import AXIS_NAMES
from ..model.mesh import Mesh
from ..model.outline import MeshOutline
from ..model._whole_cells import whole_cell_count, whole_cells as whole_cells_of
from ._labelling import DropletLabels, _at_cells, _normalize_periodic
from ._remerges import drop_remerges, track_string as _track_string

__all__ = ["DropletTracker", "track_droplets", "EVENT_COLUMNS", "EVENT_KINDS"]

#: columns of the events table, in order
EVENT_COLUMNS = ("step", "time", "kind", "before", "after", "volume_before", "volume_after", "closure_error")

#: the kinds of event
EVENT_KINDS = ("breakup", "coalescence", "complex", "appearance", "disappearance")

#: a moved point whose nearest cell centroid is farther than this many times that cell's size (the distance
#: to the nearest other centroid) lies outside the mesh (our threshold: a point inside a cell of a regular
#: mesh is within about one size of the nearest centroid, on triangles and tetrahedra a little more)
REACH = 2.0

#: drops of an n -> n group whose volumes pair one to one within this share are n drops carried on
#: (our threshold)
SAME_VOLUME = 0.1


class DropletTracker:
    """Link droplets from step to step and record breakup and coalescence events.

    Feed the steps in order with :meth:`add`; read the tables with :meth:`result`.

    Parameters
    ----------
    min_overlap : float
        A previous and a new droplet are linked when their overlap (``c dV``
        of shared cells) is at least this fraction of the smaller core volume.
        0.1 to 0.4 are used in the feature-tracking literature (Silver & Wang 1997).
    gate : float
        Droplets that overlap nothing are paired with the nearest predicted
        centroid within ``gate`` times the previous droplet's equivalent diameter.
    ignore_remerge_within : int
        A breakup whose fragments all merge back into one droplet within this
        many steps (step numbers: ``add``'s ``step``, not the count of steps
        added) is not reported: its fragments keep the parent's track id
        (the track then has several rows in the steps between). Nor is a
        coalescence whose droplet breaks up again into as many within this many
        steps: the droplets after it take the tracks of those before it, largest
        to largest. 0 reports all.
    periodic : sequence of {'x', 'y', 'z'}
        Periodic axes: moved points and centroid distances wrap around them.

    References
    ----------
    Silver, D., Wang, X. (1997). Tracking and visualizing turbulent 3D
    features. IEEE Transactions on Visualization and Computer Graphics 3(2).

    Examples
    --------
    >>> tracker = DropletTracker(min_overlap=0.2)          # doctest: +SKIP
    >>> for step, time, mesh, c in steps:                  # doctest: +SKIP
    ...     tracker.add(step, time, mesh, label_droplets(mesh, c))
    >>> droplets, events = tracker.result()                # doctest: +SKIP
    """

    def __init__(self, *, min_overlap: float = 0.1, gate: float = 1.0, ignore_remerge_within: int = 0,
                 periodic=()):
        min_overlap = float(min_overlap)
        if not 0.0 < min_overlap <= 1.0:
            raise OptionError(f"min_overlap must be in (0, 1], found {min_overlap}",
                              fix="use a fraction such as 0.1")
        gate = float(gate)
        if not (np.isfinite(gate) and gate >= 0.0):
            raise OptionError(f"gate must be a finite number >= 0, found {gate}",
                              fix="use a multiple of the equivalent diameter such as 1.0 (0 turns it off)")
        if int(ignore_remerge_within) != ignore_remerge_within or ignore_remerge_within < 0:
            raise OptionError(f"ignore_remerge_within must be a whole number >= 0, found {ignore_remerge_within}",
                              fix="give a number of steps, 0 to report every split")
        self.min_overlap = min_overlap
        self.gate = gate
        self.ignore_remerge_within = int(ignore_remerge_within)
        self.periodic = periodic
        self._previous = None
        self._tree = (None, None, None, None)
        self._next_track = 0
        self._count = 0
        self._droplets: list = []
        self._events: list = []

    # ------------------------------------------------------------------ feeding
    def add(self, step, time, mesh: Mesh, labels, table=None, *, velocity_known=None, weights=None,
            whole_cells=None, cell_velocity=None):
        """Add the next step.

        Parameters
        ----------
        step : int
            Step index (steps must come in increasing order).
        time : float
        mesh : Mesh
        labels : DropletLabels or ndarray of shape (n_cells,), int
            The step's droplet labels (-1: no droplet). A :class:`DropletLabels`
            also supplies ``table``, ``weights`` and ``whole_cells``. Per whole cell of a
            split mesh (``whole_cells``): shape ``(mesh.cell_parents.max() + 1,)``.
        table : pandas.DataFrame, optional
            The droplet table of :func:`label_droplets` (row i = droplet i).
        velocity_known : bool, optional
            Move droplets by their ``velocity_*`` columns before the overlap.
            Default: when those columns hold finite values.
        weights : ndarray shaped as ``labels``, optional
            ``c dV`` per cell for the overlap; default the cell (or whole-cell) measures.
        whole_cells : bool, optional
            ``labels`` and ``weights`` are numbered per whole cell of a split mesh
            (:attr:`Mesh.cell_parents`). Default: as the :class:`DropletLabels` says, else False.
        cell_velocity : ndarray of shape (n_cells, 3) or (n_cells, dimension), optional
            The velocity on the cells (shaped as ``labels``): drops of the next step that overlap
            nothing when the cells are moved by their drop's mean velocity are looked for with each
            cell moved by its own (:meth:`add_cells`); without it, by the mean alone.

        Returns
        -------
        ndarray of shape (n_droplets,), int
            The track id of each droplet of this step.
        """
        if isinstance(labels, DropletLabels):
            table = labels.table if table is None else table
            weights = labels.weights if weights is None else weights
            whole_cells = labels.whole_cells if whole_cells is None else whole_cells
            labels = labels.labels
        if table is None:
            raise OptionError("a droplet table is needed beside the labels",
                              fix="pass the DropletLabels of label_droplets, or its .table")
        whole_cells = bool(whole_cells) and mesh.cell_parents is not None
        labels = np.asarray(labels)
        n_cells = whole_cell_count(mesh) if whole_cells else mesh.n_cells
        if labels.shape != (n_cells,):
            raise OptionError(f"labels must have shape ({n_cells},), found {labels.shape}",
                              fix="pass the labels of this step's mesh")
        n_drop = len(table)
        if labels.size and labels.max() >= n_drop:
            raise OptionError(f"labels refer to droplet {int(labels.max())} but the table has {n_drop} rows",
                              fix="pass the table made with these labels")
        if weights is None:
            weights = whole_cells_of(mesh).cell_measures if whole_cells else mesh.cell_measures
        weights = np.asarray(weights, dtype=np.float64)
        core = np.flatnonzero(labels >= 0)
        own = None
        if cell_velocity is not None:
            own = np.asarray(cell_velocity, dtype=np.float64)[core]
            if own.ndim == 2 and own.shape[1] == 3 and mesh.dimension == 2:
                own = own[:, list(mesh.plane_axes[:2])]
        return self.add_cells(step, time, mesh, table, core, labels[core], weights[core],
                              velocity_known=velocity_known, whole_cells=whole_cells, cell_velocity=own)

    def add_cells(self, step, time, mesh, table, cells, labels, weights, *, velocity_known=None,
                  whole_cells: bool = False, cell_velocity=None):
        """Add the next step from its labelled cells only (no array over every cell).

        Parameters
        ----------
        step : int
            Step index (steps must come in increasing order).
        time : float
        mesh : Mesh or MeshOutline
            The step's mesh, or its outline with cell centroids
            (:meth:`phasegauge.model.outline.MeshOutline.of` with ``centroids=True``): tracking
            uses ``signature``, ``n_cells``, ``dimension``, ``plane_axes``, ``bounds`` and
            ``cell_centroids``.
        table : pandas.DataFrame
            The droplet table of :func:`label_droplets` (row i = droplet i).
        cells : ndarray of shape (k,), int
            The labelled cells, sorted increasing, within ``[0, mesh.n_cells)``; with
            ``whole_cells``, whole cells of a split mesh (numbers of :attr:`Mesh.cell_parents`).
        labels : ndarray of shape (k,), int
            Their droplet numbers (rows of ``table``).
        weights : ndarray of shape (k,), float
            Their ``c dV``, for the overlap.
        velocity_known : bool, optional
            As in :meth:`add`.
        whole_cells : bool
            ``cells`` are whole cells of a split mesh (as :func:`label_droplets` labels one);
            False: cells of the mesh as analysed (the pieces of a split mesh).
        cell_velocity : ndarray of shape (k, dimension), optional
            The velocity of each labelled cell (in the mesh's plane axes in 2D). With a known
            velocity the cells are first moved by their drop's mean velocity; the drops of the next
            step that overlap nothing so are then looked for with each cell moved by its own, so a
            satellite that lags its drop at pinch-off lands on itself (a breakup, not an
            appearance), while drops side by side in a shear flow are not smeared onto each other.

        Returns
        -------
        ndarray of shape (n_droplets,), int
            The track id of each droplet of this step.

        Notes
        -----
        A run keeps each step's labels in this form until the step is linked (then lets
        them go), so the series-level tracking needs neither the step's fields nor its
        whole mesh. The arrays are trusted as given
        (:meth:`add` checks full label arrays first).
        """
        n_drop = len(table)
        if isinstance(mesh, Mesh):  # what tracking reads of it (a split mesh's whole-cell centroids)
            mesh = MeshOutline.of(mesh, centroids=True)
        if self._previous is not None and not step > self._previous["step"]:
            raise OptionError(f"steps must come in increasing order: {step} after {self._previous['step']}",
                              fix="add the steps in order")
        names, axes = _normalize_periodic(mesh, self.periodic)
        dim = mesh.dimension
        plane = list(mesh.plane_axes[:dim])
        centroid = table[[f"centroid_{AXIS_NAMES[a]}" for a in plane]].to_numpy(dtype=float)
        vcols = [f"velocity_{AXIS_NAMES[a]}" for a in plane]
        velocity = (table[vcols].to_numpy(dtype=float) if all(c in table for c in vcols)
                    else np.full((n_drop, dim), np.nan))
        if velocity_known is None:
            velocity_known = bool(n_drop) and bool(np.isfinite(velocity).any())
        velocity = np.nan_to_num(velocity) if velocity_known else np.zeros((n_drop, dim))
        core_volume = np.bincount(labels, weights=weights, minlength=n_drop)
        volume = table["volume"].to_numpy(dtype=float) if "volume" in table else core_volume
        diameter = (table["equivalent_diameter"].to_numpy(dtype=float) if "equivalent_diameter" in table
                    else np.full(n_drop, np.nan))
        box = (mesh.bounds[0, plane], mesh.bounds[1, plane])
        whole_cells = bool(whole_cells) and mesh.cell_parents is not None
        own = None
        if velocity_known and cell_velocity is not None:
            own = np.asarray(cell_velocity, dtype=float).reshape(len(cells), dim)
            own = np.where(np.isfinite(own), own, velocity[labels])  # a cell without one: its drop's
        current = {"step": step, "time": float(time), "mesh": mesh, "cells": cells, "whole": whole_cells,
                   "labels": labels.astype(np.int64), "weights": weights, "cell_velocity": own,
                   "core_volume": core_volume,
                   "volume": volume, "centroid": centroid, "velocity": velocity,
                   "diameter": diameter, "n": n_drop, "axes": axes, "box": box}

        if self._previous is None:
            tracks = self._next_track + np.arange(n_drop)
            self._next_track += n_drop
        else:
            tracks = self._link(self._previous, current)
        current["tracks"] = tracks
        rows = table.copy()
        rows.insert(0, "track", tracks.astype(np.int64))
        rows.insert(0, "time", float(time))
        rows.insert(0, "step", step)
        rows["_order"] = self._count
        self._droplets.append(rows)
        self._previous = current
        self._count += 1
        return tracks

    def _overlaps(self, prev: dict, cur: dict, shift, only=None) -> tuple:
        """The (previous, current) drop pairs whose overlap, the previous cores' cells moved by ``shift``
        (per labelled cell), is at least ``min_overlap`` of the smaller core volume; with ``only``, pairs
        with those current drops alone."""
        n_prev, n_cur = prev["n"], cur["n"]
        lo, hi = cur["box"]
        mesh_p, mesh_c = prev["mesh"], cur["mesh"]
        moved = bool(np.any(shift != 0))
        same_mesh = mesh_p is mesh_c or (mesh_p.n_cells == mesh_c.n_cells
                                         and mesh_p.signature == mesh_c.signature)
        if same_mesh and not moved and prev["whole"] == cur["whole"]:  # cells in the same numbering
            landed = _at_cells(cur["cells"], cur["labels"], prev["cells"])
        else:
            parents = None if prev["whole"] else mesh_p.cell_parents
            points = mesh_p.cell_centroids[prev["cells"] if parents is None else parents[prev["cells"]]]
            points = points + shift
            inside = np.ones(len(points), dtype=bool)
            for ax in range(points.shape[1]):
                if ax in cur["axes"]:
                    period = hi[ax] - lo[ax]
                    points[:, ax] = lo[ax] + np.mod(points[:, ax] - lo[ax], period)
                else:  # carried out through an outlet: gone, not onto the cells at the outlet
                    inside &= (points[:, ax] >= lo[ax]) & (points[:, ax] <= hi[ax])
            found, near = self._locate(mesh_c, points[inside])
            inside[inside] = near  # beyond the mesh's edge where it is not the box's (a curved wall)
            landed = np.full(len(points), -1, dtype=np.int64)
            if mesh_c.cell_parents is None or cur["whole"]:  # found: cells in the labels' own numbering
                landed[inside] = _at_cells(cur["cells"], cur["labels"], found[near])
            else:
                landed[inside] = _whole_labels(cur, mesh_c)[found[near]]
        hit = landed >= 0
        if only is not None:
            hit &= np.isin(landed, only)
        overlap = sparse.coo_matrix((prev["weights"][hit], (prev["labels"][hit], landed[hit])),
                                    shape=(n_prev, n_cur)).tocsr()
        overlap.sum_duplicates()
        ov = overlap.tocoo()
        smaller = np.minimum(prev["core_volume"][ov.row], cur["core_volume"][ov.col])
        keep = ov.data >= self.min_overlap * smaller
        return ov.row[keep], ov.col[keep], ov.data[keep]

    def _locate(self, mesh: MeshOutline, points: np.ndarray) -> tuple:
        """Cell of ``mesh`` whose centroid is nearest to each point (a whole cell of a split mesh), and
        whether the point lies within :data:`REACH` times a cell size of it: that cell's (the distance from its
        centroid to the nearest other one) or, past that, the mesh's largest (so a point inside a long thin
        cell, far from its centroid but farther from the next, still counts). Farther: outside the mesh."""
        if self._tree[0] is not mesh:
            # a split mesh's whole cells numbered with gaps (a block split in part keeps its rows'
            # numbers) have no pieces and no centroid: the tree holds the whole cells that have
            numbers = None if mesh.cell_parents is None else np.flatnonzero(
                np.bincount(mesh.cell_parents, minlength=mesh.cell_centroids.shape[0]))
            if numbers is not None and numbers.size == mesh.cell_centroids.shape[0]:
                numbers = None
            tree = cKDTree(mesh.cell_centroids if numbers is None else mesh.cell_centroids[numbers])
            # the smallest cell size of up to 1000 cells drawn at random: points nearer their centroid than
            # REACH times it are inside (most of them; the sizes of the others' cells alone are looked up)
            sample = np.random.default_rng(0).choice(tree.n, size=min(tree.n, 1000), replace=False)
            small = float(tree.query(tree.data[sample], k=2)[0][:, 1].min()) if tree.n > 1 else np.inf
            self._tree = (mesh, tree, numbers, small)
        tree = self._tree[1]
        distance, found = tree.query(points)
        near = distance <= REACH * self._tree[3]
        if not near.all():
            cells, back = np.unique(found[~near], return_inverse=True)
            far = distance[~near] > REACH * tree.query(tree.data[cells], k=2)[0][:, 1][back.reshape(-1)]
            if far.any():  # beyond the cell found; within the mesh's largest cell size still counts (long cells)
                if len(self._tree) < 5:
                    self._tree = (*self._tree, float(tree.query(tree.data, k=2)[0][:, 1].max()))
                near[~near] = ~(far & (distance[~near] > REACH * self._tree[4]))
            else:
                near[:] = True
        return (found if self._tree[2] is None else self._tree[2][found]), near

    def _link(self, prev: dict, cur: dict) -> np.ndarray:
        dt = cur["time"] - prev["time"]
        n_prev, n_cur = prev["n"], cur["n"]
        lo, hi = cur["box"]
        axes = cur["axes"]
        # ------------------------------------------------ overlap of moved previous cores
        # each drop's cells moved by its mean velocity; then, for the drops of this step that overlap
        # nothing so, each cell by its own (a satellite lagging its drop at pinch-off lands on itself;
        # moving every cell by its own first would smear a drop in shear onto its neighbour)
        link_p, link_c, shared = self._overlaps(prev, cur, prev["velocity"][prev["labels"]] * dt)
        own = prev.get("cell_velocity")
        free_c = np.setdiff1d(np.arange(n_cur), link_c)
        if own is not None and free_c.size and dt != 0:
            more_p, more_c, more = self._overlaps(prev, cur, own * dt, only=free_c)
            link_p, link_c = np.concatenate([link_p, more_p]), np.concatenate([link_c, more_c])
            shared = np.concatenate([shared, more])
        link_p, link_c = _pair_followers(prev, cur, link_p, link_c, shared, dt)

        # ------------------------------------------------ gate for droplets overlapping nothing
        free_p = np.setdiff1d(np.arange(n_prev), link_p)
        free_c = np.setdiff1d(np.arange(n_cur), link_c)
        if self.gate > 0 and free_p.size and free_c.size:
            predicted = prev["centroid"][free_p] + prev["velocity"][free_p] * dt
            delta = predicted[:, None, :] - cur["centroid"][free_c][None, :, :]
            for ax in axes:
                period = hi[ax] - lo[ax]
                delta[..., ax] -= period * np.round(delta[..., ax] / period)
            distance = np.linalg.norm(delta, axis=2)
            reach = self.gate * np.nan_to_num(prev["diameter"][free_p], nan=0.0)[:, None]
            allowed = np.isfinite(distance) & (distance <= reach)
            if allowed.any():
                # imported here: scipy.optimize costs about 0.1 s beyond the rest of the run's
                # imports, and only droplets left unmatched by overlap within the gate need it
                from scipy.optimize import linear_sum_assignment

                cost = np.where(allowed, distance, 1e300)
                rows, cols = linear_sum_assignment(cost)
                ok = allowed[rows, cols]
                link_p = np.concatenate([link_p, free_p[rows[ok]]])
                link_c = np.concatenate([link_c, free_c[cols[ok]]])

        # ------------------------------------------------ groups, track ids, events
        n = n_prev + n_cur
        graph = sparse.coo_matrix((np.ones(link_p.size), (link_p, n_prev + link_c)), shape=(n, n))
        _, group = csgraph.connected_components(graph, directed=False)
        group_p, group_c = group[:n_prev], group[n_prev:]
        n_group = int(group.max()) + 1 if n else 0
        count_p = np.bincount(group_p, minlength=n_group)
        count_c = np.bincount(group_c, minlength=n_group)
        vol_p, vol_c = prev["volume"], cur["volume"]
        # largest previous droplet of each group hands its track to the largest new one
        heir_track = np.full(n_group, -1, dtype=np.int64)
        order = np.lexsort((-vol_p, group_p))
        firsts = order[np.concatenate([[True], group_p[order][1:] != group_p[order][:-1]])] if n_prev else order
        heir_track[group_p[firsts]] = prev["tracks"][firsts]
        tracks = np.full(n_cur, -1, dtype=np.int64)
        if n_cur:
            order = np.lexsort((-vol_c, group_c))
            firsts = order[np.concatenate([[True], group_c[order][1:] != group_c[order][:-1]])]
            tracks[firsts] = heir_track[group_c[firsts]]
        new = np.flatnonzero(tracks < 0)
        tracks[new] = self._next_track + np.arange(new.size)
        self._next_track += new.size

        kind = np.full(n_group, "", dtype=object)
        kind[(count_p == 1) & (count_c > 1)] = "breakup"
        kind[(count_p > 1) & (count_c == 1)] = "coalescence"
        kind[(count_p > 1) & (count_c > 1)] = "complex"
        kind[(count_p == 0) & (count_c > 0)] = "appearance"
        kind[(count_p > 0) & (count_c == 0)] = "disappearance"
        events = np.flatnonzero(kind != "")
        if events.size:
            side_p = pd.DataFrame({"group": group_p, "track": prev["tracks"], "volume": vol_p})
            side_c = pd.DataFrame({"group": group_c, "track": tracks, "volume": vol_c})
            before = side_p.groupby("group").agg(before=("track", _track_string), volume_before=("volume", "sum"))
            after = side_c.groupby("group").agg(after=("track", _track_string), volume_after=("volume", "sum"))
            table = pd.DataFrame({"group": events, "kind": kind[events]}).set_index("group")
            table = table.join(before).join(after)
            for column in ("before", "after"):  # a side with no droplets joins as NaN
                table[column] = table[column].where(table[column].notna(), _track_string(())).astype(str)
            table["volume_before"] = table["volume_before"].fillna(0.0)
            table["volume_after"] = table["volume_after"].fillna(0.0)
            with np.errstate(invalid="ignore", divide="ignore"):
                table["closure_error"] = np.where(
                    table["volume_before"] > 0,
                    (table["volume_after"] - table["volume_before"]) / table["volume_before"], np.nan)
            table["time"] = cur["time"]
            table["step"] = cur["step"]
            table["_order"] = self._count
            self._events.append(table.reset_index(drop=True))
        return tracks

    # ------------------------------------------------------------------ results
    def result(self) -> tuple[pd.DataFrame, pd.DataFrame]:
        """The droplets and events tables.

        Returns
        -------
        droplets : pandas.DataFrame
            One row per droplet per step: ``step, time, track`` and the
            columns of the droplet table.
        events : pandas.DataFrame
            One row per event, columns :data:`EVENT_COLUMNS`: ``kind`` is
            one of ``breakup, coalescence, complex, appearance,
            disappearance``; ``before`` and ``after`` list the track ids
            (text, space-separated in brackets: ``[0 1]``, ``[]`` for none);
            ``volume_before`` and ``volume_after`` sum the
            droplets' volumes; ``closure_error`` is
            ``(volume_after - volume_before) / volume_before`` (NaN for an
            appearance, -1 for a disappearance).
        """
        droplets = (pd.concat(self._droplets, ignore_index=True) if self._droplets
                    else pd.DataFrame(columns=["step", "time", "track", "_order"]))
        events = (pd.concat(self._events, ignore_index=True) if self._events
                  else pd.DataFrame(columns=[*EVENT_COLUMNS, "_order"]))
        if self.ignore_remerge_within and len(events):
            droplets, events = drop_remerges(droplets, events, self.ignore_remerge_within)
        droplets = droplets.drop(columns="_order").reset_index(drop=True)
        events = events[list(EVENT_COLUMNS)].reset_index(drop=True)
        events["step"] = events["step"].astype(droplets["step"].dtype if len(droplets) else np.int64)
        return droplets, events


def _pair_followers(prev: dict, cur: dict, link_p, link_c, shared, dt) -> tuple:
    """The links with every n -> n group (n >= 2) whose drops pair one to one, each pair linked and of
    volumes within :data:`SAME_VOLUME`, cut to those pairs: drops following each other closer than they
    move per output overlap the one ahead's old place, which alone would fuse them into a complex event.
    The pairs: largest total overlap (``scipy.optimize.linear_sum_assignment``), else nearest predicted
    centroids."""
    n_prev, n_cur = prev["n"], cur["n"]
    n = n_prev + n_cur
    if link_p.size < 3:
        return link_p, link_c
    graph = sparse.coo_matrix((np.ones(link_p.size), (link_p, n_prev + link_c)), shape=(n, n))
    _, group = csgraph.connected_components(graph, directed=False)
    group_p, group_c = group[:n_prev], group[n_prev:]
    count_p = np.bincount(group_p, minlength=n)
    count_c = np.bincount(group_c, minlength=n)
    cut = np.zeros(link_p.size, dtype=bool)
    for g in np.flatnonzero((count_p >= 2) & (count_p == count_c)):
        from scipy.optimize import linear_sum_assignment  # as in the gate: only where needed

        rows, cols = np.flatnonzero(group_p == g), np.flatnonzero(group_c == g)
        mine = group_p[link_p] == g
        weight = sparse.coo_matrix((shared[mine], (np.searchsorted(rows, link_p[mine]),
                                                   np.searchsorted(cols, link_c[mine]))),
                                   shape=(rows.size, cols.size)).toarray()
        delta = (prev["centroid"][rows] + prev["velocity"][rows] * dt)[:, None, :] - cur["centroid"][cols][None]
        lo, hi = cur["box"]
        for ax in cur["axes"]:
            delta[..., ax] -= (hi[ax] - lo[ax]) * np.round(delta[..., ax] / (hi[ax] - lo[ax]))
        for cost in (-weight, np.linalg.norm(delta, axis=2)):
            i, j = linear_sum_assignment(cost)
            v_p, v_c = prev["volume"][rows[i]], cur["volume"][cols[j]]
            if np.all(weight[i, j] > 0) and np.all(np.abs(v_c - v_p) <= SAME_VOLUME * v_p):
                pairs = set(zip(rows[i].tolist(), cols[j].tolist()))
                cut |= mine & np.fromiter(((p, c) not in pairs for p, c in zip(link_p, link_c)), dtype=bool,
                                          count=link_p.size)
                break
    return link_p[~cut], link_c[~cut]


def _whole_labels(step: dict, outline: MeshOutline) -> np.ndarray:
    """Droplet of each whole cell of a split mesh (-1: none): that of its labelled piece with the
    largest ``c dV`` (the lowest piece number on a tie)."""
    out = np.full(outline.cell_centroids.shape[0], -1, dtype=np.int64)
    whole = outline.cell_parents[step["cells"]]
    order = np.lexsort((-step["weights"], whole))  # by whole cell, heaviest piece first (stable)
    first = order[np.concatenate([[True], whole[order][1:] != whole[order][:-1]])] if order.size else order
    out[whole[first]] = step["labels"][first]
    return out


def track_droplets(sequence, *, min_overlap: float = 0.1, gate: float = 1.0,
                   ignore_remerge_within: int = 0, periodic=()) -> tuple[pd.DataFrame, pd.DataFrame]:
    """Track droplets through a sequence of labelled steps.

    Parameters
    ----------
    sequence : iterable of tuples
        ``(step, time, mesh, labels)`` with ``labels`` a :class:`DropletLabels`,
        or ``(step, time, mesh, labels, table)``, in step order.
    min_overlap, gate, ignore_remerge_within, periodic
        As for :class:`DropletTracker`.

    Returns
    -------
    droplets, events : pandas.DataFrame
        See :meth:`DropletTracker.result`.

    References
    ----------
    Silver, D., Wang, X. (1997). Tracking and visualizing turbulent 3D
    features. IEEE Transactions on Visualization and Computer Graphics 3(2).
    """
    tracker = DropletTracker(min_overlap=min_overlap, gate=gate,
                             ignore_remerge_within=ignore_remerge_within, periodic=periodic)
    for item in sequence:
        tracker.add(*item)
    return tracker.result()
