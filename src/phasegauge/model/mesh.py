"""The one in-memory mesh model every reader converts to.

A :class:`Mesh` holds points (always with three coordinates) and the cells of
its highest topological dimension, grouped in blocks of one cell type. Cells of
lower dimension written beside the volume cells (boundary lines or faces) are
kept apart in :attr:`Mesh.boundary_blocks`: shown by ``inspect``, never used by
an analysis.

Everything that depends on the mesh alone (cell measures, centroids, face
adjacency, edges, the regular-grid layout) is computed on first use and cached
on the object, so a series whose topology does not change pays for it once.

Cell numbering: cells are numbered block after block in the order the file
gives them; cell data of every analysis is an array of shape ``(n_cells,)`` in
that order.
"""

from __future__ import annotations

import hashlib
from dataclasses import dataclass
from functools import cached_property, partial

import numpy as np

from ..errors import UnsupportedMeshError
from ._centroids import cell_centroids_of, mesh_geometry, piece_measures, whole_cell_sizes, zero_measures
from ._conversions import PointCells, corner_sums, linear_point_values, weighted_point_means, with_centre_means
from ._faces import cell_adjacency, face_pairs, face_topology, grid_face_numbers, grouped_faces, unique_edges
from ._grouping import unique_ints
from ._regular_grid import RegularGrid, find_regular_grid
from .cells import CELL_DIMENSION, LINEAR_CORNERS, JoinedPieces
from .corners import incidence_matrix

__all__ = ["Mesh", "CellBlock", "RegularGrid"]


@dataclass(frozen=True)
class CellBlock:
    """Cells of one type.

    Parameters
    ----------
    cell_type : str
        One of ``triangle, quad, polygon, tetra, hexahedron, wedge, pyramid``
        (or ``line``/``vertex`` for boundary blocks).
    connectivity : ndarray of shape (n, k), int64
        Point indices of each cell in VTK corner order.
    """

    cell_type: str
    connectivity: np.ndarray

    def __len__(self) -> int:
        return int(self.connectivity.shape[0])


def _type_counts(blocks) -> dict:
    """Number of cells of each type in ``blocks``, in the order the types first appear."""
    counts: dict = {}
    for b in blocks:
        counts[b.cell_type] = counts.get(b.cell_type, 0) + len(b)
    return counts


def _as_blocks(cells) -> list[CellBlock]:
    blocks = []
    for item in cells:
        if isinstance(item, CellBlock):
            blocks.append(item)
            continue
        if hasattr(item, "type") and hasattr(item, "data"):
            cell_type, data = item.type, item.data
        else:
            cell_type, data = item
        blocks.append(CellBlock(str(cell_type), data))
    return blocks


class Mesh:
    """Points and cells of one mesh, with cached geometry and topology.

    Parameters
    ----------
    points : array_like of shape (n_points, 2) or (n_points, 3)
        Point coordinates, in mesh length units. 2D points get z = 0.
    cells : sequence of CellBlock, meshio CellBlock or (type, connectivity)
        All cell blocks of the file. Blocks of the highest topological
        dimension become the analysed cells; lower-dimensional blocks are kept
        as :attr:`boundary_blocks`.
    point_merge : array_like of shape (n_source_points,), int, optional
        For a mesh whose coincident points a reader merged: the index of each
        point of the source file among ``points``. Kept as :attr:`point_merge`
        (None otherwise), so the file's point data can be averaged onto the
        merged points.

    Raises
    ------
    UnsupportedMeshError
        No cells, a cell type the model does not handle, a 2D mesh that is not
        flat, or connectivity that points outside the point array.

    Notes
    -----
    Quadratic cells are reduced to their corner nodes (their curved geometry is
    made straight); VTK pixels and voxels become quads and hexahedra. The
    attribute :attr:`kept_blocks` records which of the input blocks became
    analysed cells, in order, so per-block cell data can be joined the same way.

    Examples
    --------
    >>> import numpy as np
    >>> m = Mesh(np.array([[0, 0], [1, 0], [0, 1]]), [("triangle", np.array([[0, 1, 2]]))])
    >>> float(m.cell_measures[0])
    0.5
    """

    def __init__(self, points, cells, *, point_merge=None, pieces=None):
        pts = np.asarray(points, dtype=np.float64)
        if pts.ndim != 2 or pts.shape[1] not in (1, 2, 3):
            raise UnsupportedMeshError(
                f"points must have shape (n, 2) or (n, 3), found {pts.shape}",
                fix="check the file's point coordinates")
        if pts.shape[1] < 3:
            pts = np.hstack([pts, np.zeros((pts.shape[0], 3 - pts.shape[1]))])
        self.points = np.ascontiguousarray(pts)
        raw = _as_blocks(cells)
        converted = []
        for index, block in enumerate(raw):
            cell_type = block.cell_type
            data = block.connectivity
            if cell_type in LINEAR_CORNERS:
                cell_type, corners = LINEAR_CORNERS[cell_type]
                data = np.asarray(data)[:, corners]
            if cell_type.startswith("polygon"):
                cell_type = "polygon"
            if cell_type not in CELL_DIMENSION:
                raise UnsupportedMeshError(
                    f"cell type '{block.cell_type}' is not supported",
                    fix="write the mesh with linear cells (triangle, quad, polygon, tetra, "
                        "hexahedron, wedge, pyramid)")
            data = np.asarray(data, dtype=np.int64)
            if data.ndim != 2:
                raise UnsupportedMeshError(f"cells of type '{cell_type}' have ragged connectivity",
                                           fix="split them into blocks of equal size")
            converted.append((index, CellBlock(cell_type, np.ascontiguousarray(data))))
        converted = [(i, b) for i, b in converted if len(b) > 0]
        if not converted:
            raise UnsupportedMeshError("the mesh has no cells",
                                       fix="write the cells with the points (a point cloud cannot be analysed)")
        self.dimension = max(CELL_DIMENSION[b.cell_type] for _, b in converted)
        if self.dimension < 2:
            raise UnsupportedMeshError(
                f"the mesh has only {self.dimension}D cells (lines or vertices)",
                fix="write the 2D or 3D cells of the domain")
        self.blocks = [b for _, b in converted if CELL_DIMENSION[b.cell_type] == self.dimension]
        self.kept_blocks = [i for i, b in converted if CELL_DIMENSION[b.cell_type] == self.dimension]
        self.boundary_blocks = [b for _, b in converted if CELL_DIMENSION[b.cell_type] < self.dimension]
        self.n_input_blocks = len(raw)
        n_points = self.points.shape[0]
        for block in self.blocks + self.boundary_blocks:
            conn = block.connectivity
            if conn.size and conn.min() < 0:
                negative = int(np.count_nonzero(conn < 0))
                raise UnsupportedMeshError(
                    f"{block.cell_type} cells have {negative} negative corner point "
                    f"number{'s' if negative > 1 else ''} (the lowest {int(conn.min())}); point numbers start at 0",
                    fix="the file is damaged or was written with another numbering; write it again")
            if conn.size and conn.max() >= n_points:
                raise UnsupportedMeshError(
                    f"{block.cell_type} cells refer to point {int(conn.max())} but the mesh has "
                    f"{n_points} points", fix="the file is damaged; write it again")
        sizes = [len(b) for b in self.blocks]
        self.block_offsets = np.concatenate([[0], np.cumsum(sizes)]).astype(np.int64)
        self.n_cells = int(self.block_offsets[-1])
        self.n_points = n_points
        self.point_merge = None if point_merge is None else np.asarray(point_merge, dtype=np.int64)
        self.cell_parents = None  # the whole cell of each analysed cell, when a reader split cells
        self.file_cells = None  # the file's number of each analysed cell, where not cell_parents' (io: file_cells)
        if pieces is not None and any(pieces[i] is not None for i in self.kept_blocks):
            parts, top, base = [], 0, 0
            for i, block in zip(self.kept_blocks, self.blocks):
                mark = pieces[i]
                # pieces numbered with the block before (one cell's pieces of two types), else after it
                base = base if isinstance(mark, JoinedPieces) else top
                own = np.arange(len(block)) if mark is None else np.asarray(getattr(mark, "parents", mark))
                if own.dtype.kind not in "iu" or len(self.blocks) > 1:  # one block: the reader's type (int32)
                    own = own.astype(np.int64, copy=False)
                parts.append(own + base if base else own)
                top = max(top, base + (int(own.max()) + 1 if own.size else 0))
            self.cell_parents = np.concatenate(parts) if len(parts) > 1 else parts[0]  # one block: the reader's

    # ------------------------------------------------------------------ basics
    def __repr__(self) -> str:
        types = ", ".join(f"{k}: {v}" for k, v in self.cell_type_counts.items())
        return f"Mesh({self.dimension}D, {self.n_points} points, {self.n_cells} cells; {types})"

    def memo(self, key, compute, keep: bool = True):
        """Result of ``compute()`` cached on this mesh under ``key`` (mesh-only work of analyses).

        Parameters
        ----------
        key : hashable
            Names the quantity (and its parameters, e.g. ``("cell_extent", 0)``).
        compute : callable
            Called once, without arguments; its result must depend on the mesh only.
        keep : bool
            False: a result kept before is still returned, but a new one is not kept (for
            inputs of work that is itself cached).
        """
        cache = self.__dict__.setdefault("_memo", {})
        if key in cache:
            return cache[key]
        result = compute()
        if keep:
            cache[key] = result
        return result

    @cached_property
    def cell_type_counts(self) -> dict:
        """Number of analysed cells of each type."""
        return _type_counts(self.blocks)

    @cached_property
    def boundary_type_counts(self) -> dict:
        """Number of lower-dimensional (boundary) cells of each type, not analysed."""
        return _type_counts(self.boundary_blocks)

    @cached_property
    def signature(self) -> str:
        """Hash of points and connectivity: equal signatures mean the same mesh.

        SHA-256 (32 hex digits kept): with the processor's SHA instructions about 2.5x
        faster than BLAKE2b here (0.03 s against 0.07 s for 1M tetrahedra).
        """
        h = hashlib.sha256()
        # the arrays' own buffers (C order, as tobytes() gives them) are hashed without a copy
        h.update(np.ascontiguousarray(self.points))
        for b in self.blocks + self.boundary_blocks:
            h.update(b.cell_type.encode())
            h.update(np.ascontiguousarray(b.connectivity))
        return h.hexdigest()[:32]

    @cached_property
    def cells_signature(self) -> str:
        """Hash of the cells alone, whatever their and their points' numbering (:func:`numbering_free_signature`)."""
        from ._places import numbering_free_signature

        return numbering_free_signature(self.points, self.blocks + self.boundary_blocks)

    def same_topology(self, points, blocks) -> bool:
        """True when ``points`` and ``blocks`` (converted) describe this mesh."""
        pts = np.asarray(points, dtype=np.float64)
        if pts.shape[1] < 3:
            pts = np.hstack([pts, np.zeros((pts.shape[0], 3 - pts.shape[1]))])
        if pts is not self.points and (pts.shape != self.points.shape or not np.array_equal(pts, self.points)):
            return False
        if len(blocks) != len(self.blocks):
            return False
        return all(a.cell_type == b.cell_type and (a.connectivity is b.connectivity  # a kept split's arrays
                                                   or np.array_equal(a.connectivity, b.connectivity))
                   for a, b in zip(blocks, self.blocks))

    @cached_property
    def bounds(self) -> np.ndarray:
        """``[[xmin, ymin, zmin], [xmax, ymax, zmax]]`` of the points used by cells."""
        used = self.points if self.used_points.size == self.n_points else self.points[self.used_points]
        # column by column: a reduction over the long axis of each coordinate
        return np.array([[used[:, d].min() for d in range(3)], [used[:, d].max() for d in range(3)]])

    @cached_property
    def used_points(self) -> np.ndarray:
        """Indices of the points that belong to at least one analysed cell."""
        used = np.zeros(self.n_points, dtype=bool)
        for b in self.blocks:
            used[b.connectivity.ravel()] = True
        return np.flatnonzero(used)

    @cached_property
    def cell_types(self) -> np.ndarray:
        """Cell type name of every cell, shape (n_cells,)."""
        return np.concatenate([np.full(len(b), b.cell_type, dtype=object) for b in self.blocks])

    # ------------------------------------------------------------ plane of 2D
    @cached_property
    def plane_axes(self) -> tuple:
        """For a 2D mesh, the two coordinate axes its plane spans (e.g. ``(0, 1)``).

        Raises
        ------
        UnsupportedMeshError
            When the 2D cells do not lie in a plane normal to x, y or z.
        """
        if self.dimension != 2:
            return (0, 1, 2)
        lo, hi = self.bounds
        extent = hi - lo
        scale = max(float(extent.max()), 1e-300)
        flat = [ax for ax in range(3) if extent[ax] <= 1e-9 * scale]
        if not flat:
            raise UnsupportedMeshError(
                "the 2D cells do not lie in a plane normal to x, y or z: this is a surface in 3D (such as a "
                "boundary patch), not a volume mesh",
                fix="give the step's volume (internal) mesh, or write 2D results in a coordinate plane "
                    "(for example z = 0)")
        normal = flat[-1] if len(flat) > 1 else flat[0]
        if len(flat) > 1:
            normal = 2 if 2 in flat else flat[0]
        return tuple(ax for ax in range(3) if ax != normal)

    @cached_property
    def coordinates(self) -> np.ndarray:
        """Point coordinates in the analysis space: (n_points, 2) in 2D, (n_points, 3) in 3D.

        In 3D this is :attr:`points` itself (not a copy).
        """
        if self.dimension == 3:
            return self.points
        return np.ascontiguousarray(self.points[:, list(self.plane_axes)])

    # --------------------------------------------------------------- geometry
    @cached_property
    def _geometry(self):
        """Signed measures and centroids (None for a split mesh: :func:`._centroids.mesh_geometry`)."""
        return mesh_geometry(self)

    @property
    def signed_measures(self) -> np.ndarray:
        """Signed cell areas (2D) or volumes (3D): negative for inverted cells."""
        return self._geometry[0]

    @cached_property
    def cell_measures(self) -> np.ndarray:
        """Cell areas (2D) or volumes (3D), shape (n_cells,), in length units squared or cubed.

        Notes
        -----
        Exact for linear simplices and polygons; quads and hexahedra take the
        closed forms of the bilinear and trilinear maps' integrals (exact, as the
        2-point Gauss rule per direction is, so non-planar hexahedron faces are
        handled); wedges use a degree-4 triangle rule times a 2-point
        Gauss rule (exact); pyramids are integrated as hexahedra whose top face
        collapses to the apex (exact for a bilinear base). 2D meshes whose cells are all
        wound clockwise are accepted: measures are magnitudes. Hexahedra and wedges that are
        affine (parallelepipeds, prisms with parallel equal ends) take the triple product,
        exact to rounding. When no cell is inverted this is the array of
        :attr:`signed_measures` itself (not a copy).
        """
        return piece_measures(self, self._geometry[0])

    @cached_property
    def inverted_cells(self) -> int:
        """Number of cells whose orientation is opposite to the majority (whole cells of a split mesh)."""
        s = self.signed_measures if self.cell_parents is None else np.bincount(self.cell_parents, self.signed_measures)
        majority = 1.0 if np.sum(s > 0) >= np.sum(s < 0) else -1.0
        return int(np.sum(s * majority < 0))

    @cached_property
    def degenerate_cells(self) -> int:
        """Number of cells with zero measure (to round-off; whole cells of a split mesh that have pieces)."""
        return zero_measures(self.cell_measures, self.cell_parents)

    @cached_property
    def _flat_cells(self) -> int:  # cells or pieces of zero measure (a corner twice, as the corner sums read it)
        return zero_measures(self.cell_measures)

    @property
    def cell_centroids(self) -> np.ndarray:
        """Centroids (centres of area or volume), shape (n_cells, dimension).

        A mesh of split cells (:attr:`cell_parents`) keeps none: they are made on each read
        (:func:`._centroids.cell_centroids_of` gives some cells' alone).
        """
        kept = self._geometry[1]
        return kept if kept is not None else cell_centroids_of(self)

    @property
    def cell_sizes(self) -> np.ndarray:
        """Characteristic cell length, shape (n_cells,): the side of the square or cube that
        :data:`.cells.CELLS_PER_CUBE` such cells fill, (count x measure) ** (1 / dimension); the
        measure's root alone for quads, hexahedra, polygons and polyhedra.

        So a grid of spacing h has cells of size h, split into simplices or not (measure ** (1/3)
        of its Kuhn tetrahedra is 0.55 h). Pieces of a cell a reader split (:attr:`cell_parents`) take
        the whole cell's measure; only the whole cells' sizes are kept (:meth:`cell_sizes_of`: some).
        """
        return self._whole_cell_sizes if self.cell_parents is None else self._whole_cell_sizes[self.cell_parents]

    def cell_sizes_of(self, cells) -> np.ndarray:
        """:attr:`cell_sizes` of ``cells`` (indices or a mask), without the mesh-wide array."""
        return self._whole_cell_sizes[cells if self.cell_parents is None else self.cell_parents[cells]]

    @cached_property
    def _whole_cell_sizes(self) -> np.ndarray:
        """The size (:attr:`cell_sizes`) of each whole cell (numbered by :attr:`cell_parents`), or cell."""
        return whole_cell_sizes(self)

    @cached_property
    def n_whole_cells(self) -> int:
        """Number of cells as the file has them: the pieces of a split cell (:attr:`cell_parents`) count once."""
        return self.n_cells if self.cell_parents is None else int(unique_ints(self.cell_parents).size)

    @cached_property
    def total_measure(self) -> float:
        """Domain area (2D) or volume (3D)."""
        return float(self.cell_measures.sum())

    # --------------------------------------------------------------- topology
    @cached_property
    def incidence(self):
        """Sparse (n_cells, n_points) matrix, 1 where a point is a corner of a cell
        (:func:`.corners.incidence_matrix`)."""
        return incidence_matrix(self)

    @cached_property
    def _face_topology(self) -> dict:
        """Face grouping, done once (see :func:`._faces.face_topology`)."""
        return face_topology(self)

    def face_numbers(self) -> list:
        """Per block, the number of each local face of each cell, shape (n, faces per cell).

        Faces shared by two cells get one number. Kept (int32 where it fits) for
        blocks of hexahedra, wedges and pyramids only; None for other blocks.
        Faces are numbered in the lexicographic order of their sorted corners,
        except on a regular grid of hexahedra, where they are numbered by their
        normal axis and grid position (no grouping needed); the numbers need
        not run without gaps.
        """
        if self.dimension == 3 and self.regular_grid is not None:
            numbers = self._grid_face_numbers
            if numbers is not None:
                return numbers
        return self._face_topology["numbers"]

    @cached_property
    def _grid_face_numbers(self) -> list | None:
        """Face numbers of a regular grid of hexahedra from grid positions, or None
        (:func:`._faces.grid_face_numbers`)."""
        return grid_face_numbers(self)

    @property
    def _faces(self):
        """All cell faces grouped: ``(faces, owners, order, starts)``, built on every call
        (see :func:`._faces.grouped_faces`)."""
        return grouped_faces(self)

    @property
    def face_pairs(self) -> np.ndarray:
        """Pairs of cells sharing a face (3D) or an edge (2D), shape (n_pairs, 2), sorted.

        Faces are matched by their corner points; a face lying on part of a larger face (hanging
        nodes of a refined mesh: :attr:`hanging_faces`) joins the two cells too. Read from the face
        neighbours a reader gave with the cells it split, when it did (not kept).
        """
        return face_pairs(self)

    @property
    def hanging_faces(self) -> int:
        """Faces (edges in 2D) on parts of larger faces, joined to them (:mod:`._hanging_faces`); 0 on a grid."""
        return 0 if self.regular_grid is not None else int(self._face_topology.get("hanging_faces", 0))

    @property
    def boundary_faces(self) -> tuple:
        """Faces (3D) or edges (2D) owned by one cell only: ``(corners, cell)``.

        ``corners`` has shape (n, 4) in 3D (triangles padded with -1 in front)
        or (n, 2) in 2D, sorted; the faces come in the lexicographic order of
        their corners.
        """
        return self._face_topology["boundary"]

    def adjacency(self, kind: str = "face"):
        """Sparse symmetric (n_cells, n_cells) cell adjacency matrix.

        Parameters
        ----------
        kind : {'face', 'point'}
            ``face``: cells sharing an edge (2D) or a face (3D);
            ``point``: cells sharing at least one point.
        """
        return cell_adjacency(self, kind)

    @cached_property
    def edges(self) -> np.ndarray:
        """Unique edges of all cells as point pairs (lower index first), shape (n_edges, 2)."""
        return unique_edges(self)

    # ---------------------------------------------------------- regular grids
    @cached_property
    def regular_grid(self) -> RegularGrid | None:
        """The grid layout when the mesh is a full rectilinear grid of quads or hexahedra, else None."""
        return find_regular_grid(self)

    # ----------------------------------------------------- data conversions
    def point_to_cell(self, values: np.ndarray) -> np.ndarray:
        """Cell values as the mean of their corner values.

        Parameters
        ----------
        values : ndarray of shape (n_points,) or (n_points, k)

        Returns
        -------
        ndarray of shape (n_cells,) or (n_cells, k)
            NaN and Inf corners are left out of the mean; a cell whose corners
            are all non-finite gets NaN.

        Notes
        -----
        For simplices the corner mean equals the cell mean of the linear
        interpolant; for quads and hexahedra it is the value of the bilinear /
        trilinear interpolant at the cell centre.
        """
        v = np.asarray(values, dtype=np.float64)
        if v.shape[0] != self.n_points:
            raise ValueError(f"expected {self.n_points} point values, found {v.shape[0]}")
        flat = v.reshape(self.n_points, -1)
        finite = np.isfinite(flat)
        if self._corner_sums_direct:
            total, count = corner_sums(self, np.where(finite, flat, 0.0), finite)
        else:
            a = self.incidence
            total = a @ np.where(finite, flat, 0.0)
            count = a @ finite.astype(np.float64)
        # in place (the sums are this call's own arrays): no more mesh-wide temporaries than the two
        valid = count > 0
        np.maximum(count, 1, out=count)
        with np.errstate(invalid="ignore", divide="ignore"):
            np.divide(total, count, out=total)
        del count
        total[~valid] = np.nan
        return total.reshape((self.n_cells,) + v.shape[1:])

    @cached_property
    def _corner_sums_direct(self) -> bool:
        """True when every cell lists each corner once in a fixed-size block (no polygons, no
        degenerate cells): the incidence product is then a sum over connectivity columns."""
        return not any(b.cell_type == "polygon" for b in self.blocks) and not self._flat_cells

    def cell_to_point(self, values: np.ndarray, *, method: str = "linear", threads: int = 1) -> np.ndarray:
        """Point values reconstructed from the cells around each point.

        Parameters
        ----------
        values : ndarray of shape (n_cells,) or (n_cells, k)
        method : {'linear', 'mean'}
            ``linear``: a least-squares linear fit through the centroid values
            of the cells around the point (inverse-distance weights), limited
            to the range of those cell values; exact for linear fields at
            interior points, bounded where the field jumps. ``mean``: the
            measure-weighted mean of those cells (first order on uneven
            stencils). Where a reader split cells (:attr:`cell_parents`) the
            cells are the whole cells: each one sample, its pieces'
            measure-weighted mean at its centroid, weighted by its measure.

        threads : int
            Threads for a new mesh's linear fit (made once; the same values on any number).

        Returns
        -------
        ndarray of shape (n_points,) or (n_points, k)
            Non-finite cells are left out; points of no cell, or only of
            non-finite cells, get NaN. Where the fit is ill-posed (too few
            cells around a point, or cells in a line) the mean is used.

        References
        ----------
        Least-squares reconstruction of point values from cell averages is the
        standard vertex reconstruction of finite-volume schemes (see e.g.
        Barth & Jespersen 1989 for the limiter that keeps it in range).
        """
        v = np.asarray(values, dtype=np.float64)
        if v.shape[0] != self.n_cells:
            raise ValueError(f"expected {self.n_cells} cell values, found {v.shape[0]}")
        if method not in ("linear", "mean"):
            raise ValueError(f"method must be 'linear' or 'mean', not {method!r}")
        flat, target = v.reshape(self.n_cells, -1), self
        if self.cell_parents is not None:  # the pieces of one whole cell are one sample
            from ._whole_points import whole_points, whole_values

            target = whole_points(self)
            flat = whole_values(target, flat)
        finite = np.isfinite(flat)
        means = partial(weighted_point_means, target, flat, finite)
        out = means() if method == "mean" else linear_point_values(target, flat, np.all(finite, axis=1), means,
                                                                   threads=threads)
        out = with_centre_means(self, out)  # centres a reader added: their corners' mean, either method
        return out.reshape((self.n_points,) + v.shape[1:])

    @cached_property
    def _point_cells(self) -> PointCells:  # made without keeping :attr:`incidence` (nor the transpose's ones)
        at = incidence_matrix(self).T.tocsr()
        return PointCells(at.indptr, at.indices)
