"""VTK files holding polyhedral cells (type 42): read with VTK's own reader, as ordinary cells or pieces.

meshio reads polyhedra from VTK XML files of format 2.2 and before only, and only when every cell
of the file is one (its reader refuses them mixed with other cells and lists their faces one
cell at a time in Python); it reads neither the face arrays of format 2.3 (``face_connectivity``,
``face_offsets``, ``polyhedron_to_faces``, ``polyhedron_offsets``, which VTK 9.4 and later
write) nor legacy files with polyhedra. So a file that holds polyhedra is read with VTK's
reader (through pyvista, as the structured datasets are) and handed over as a meshio mesh:

* when every polyhedron of the file is a tetrahedron, pyramid, wedge or hexahedron written as
  faces (:func:`phasegauge.model._polyhedron_shapes.ordinary_shapes`), the file is read as those
  cells: nothing is split and no point is added (:class:`OrdinaryCells`);
* when some are and some are not, or the file has hexahedra, wedges or pyramids of its own beside
  polyhedra of other shapes, those cells stay whole and the other polyhedra become pyramids (their
  quad faces) and tetrahedra (their triangles, larger faces cut about a face centre) joined to their
  cell centres (:attr:`OrdinaryCells.coned`, ``split_polyhedra(..., pyramids=True)``): a quad face shared with
  a whole cell is a quad on both sides, which the mesh groups as one face and cuts once; otherwise
* polyhedra become the tetrahedra of :func:`phasegauge.model.polyhedra.split_polyhedra`
  (about their cell centres; quad faces cut along their shorter diagonal, larger faces about
  a face centre) when no cell is kept whole, or when convex point sets are beside them: then
  hexahedra, wedges and pyramids of the same file are split the same way, so that a face they share
  with a polyhedron is cut alike from both sides (tetrahedra and every other cell are kept as they
  are), and the quad faces are centred, as the convex point sets centre every hull face of four or
  more corners (``diagonals=False``);
* the added centres become points; point fields there are the mean of the corners' values;
* every tetrahedron keeps the cell values of the cell it comes from, so integrals of cell
  data are unchanged, and is marked as a piece of it (``raw.cell_pieces``, which the mesh
  keeps as :attr:`Mesh.cell_parents`): cell sizes, and the widths and resolutions measured in
  cells, are those of the whole cells.

The read is noted as ``raw.convex_point_sets`` (how cells were read; ``inspect`` shows it).
The split depends on the points and faces only: :class:`PolyhedralRead` takes it from a mesh
of the series' :class:`MeshPool` built from the same ones, so a series splits its mesh once.
"""

from __future__ import annotations

import contextlib
import hashlib
import io
import mmap
import re
import warnings
from dataclasses import dataclass
from functools import cached_property, partial
from types import MappingProxyType

import numpy as np

from ..errors import MeshWarning, UnreadableFileError, UnsupportedMeshError, short_text
from ..model._grouping import ranges
from ..model._places import first_copies
from ..model._threads import heap_back_to_system
from ._meshio_adapter import (CONVEX_POINT_SET, convex_point_sets, ensure_vtk_extras, new_mesh,
                              read_with_meshio)

__all__ = ["xml_holds_polyhedra", "legacy_holds_polyhedra", "read_polyhedral", "PolyhedralRead"]

#: VTK cell type of a polyhedron
VTK_POLYHEDRON = 42
#: VTK cell types of variable size, grouped by their number of points
_VARIABLE = (7, 41)
#: ordinary 3D cells split like the polyhedra beside them (their faces may be shared with one)
_QUAD_FACED = ("hexahedron", "wedge", "pyramid")


def xml_holds_polyhedra(path: str) -> bool:
    """True when a VTK XML file names polyhedron face arrays (of format 2.3 or before) in its XML."""
    with open(path, "rb") as handle:
        try:
            view = mmap.mmap(handle.fileno(), 0, access=mmap.ACCESS_READ)
        except ValueError:  # an empty file
            return False
        with view:
            end = view.find(b"<AppendedData")
            end = len(view) if end < 0 else end
            return any(view.find(name, 0, end) >= 0 for name in (b'Name="faceoffsets"', b'Name="face_offsets"'))


def legacy_holds_polyhedra(path: str) -> bool:
    """True when a legacy VTK unstructured grid lists cell type 42 in its ``CELL_TYPES``."""
    with open(path, "rb") as handle:
        try:
            view = mmap.mmap(handle.fileno(), 0, access=mmap.ACCESS_READ)
        except ValueError:
            return False
        with view:
            if b"UNSTRUCTURED_GRID" not in view[:1024].upper():
                return False
            match = re.search(rb"\nCELL_TYPES[ \t]+(\d+)[ \t\r]*\n", view)
            if match is None:
                return False
            count = int(match.group(1))
            binary = b"\nBINARY" in view[:1024].upper()
            if binary:
                types = np.frombuffer(view[match.end():match.end() + 4 * count], dtype=">i4")
            else:
                types = np.array(view[match.end():match.end() + 12 * count].split()[:count], dtype=np.int64)
            return bool(np.any(types == VTK_POLYHEDRON))


def _read_grid(path: str):
    import pyvista

    heap_back_to_system()  # VTK maps the file's arrays beside the heap: what it kept free goes back first
    catcher = pyvista.VtkErrorCatcher(raise_errors=False)
    try:
        with warnings.catch_warnings(), catcher, contextlib.redirect_stderr(io.StringIO()):
            warnings.simplefilter("ignore")
            grid = pyvista.read(path)
    except Exception as exc:
        raise UnreadableFileError(f"cannot be read as a VTK file with polyhedra ({short_text(exc)})", where=path,
                                  fix="check that the file is complete and was fully written") from None
    if catcher.events:
        first = catcher.events[0].alert.splitlines()[-1].strip()
        raise UnreadableFileError(f"VTK's reader reports the data is damaged or ends early ({first})", where=path,
                                  fix="the solver may have stopped while writing it: write the step again")
    if type(grid).__name__ != "UnstructuredGrid" or grid.n_cells == 0:
        raise UnreadableFileError("holds no unstructured cells", where=path,
                                  fix="the file may be truncated; write it again")
    return grid


def _cell_array(cell_array) -> tuple[np.ndarray, np.ndarray]:
    """Connectivity and offsets (int64) of a vtkCellArray."""
    from vtkmodules.util.numpy_support import vtk_to_numpy

    return (vtk_to_numpy(cell_array.GetConnectivityArray()).astype(np.int64, copy=False),
            vtk_to_numpy(cell_array.GetOffsetsArray()).astype(np.int64, copy=False))


def _face_arrays(grid, path: str = "") -> tuple:
    """VTK's face arrays of the polyhedra (VTK 9.4 and later: ``GetPolyhedronFaces``,
    ``GetPolyhedronFaceLocations``, whatever the file's format version): face corners and
    offsets, each cell's faces and their offsets."""
    if not hasattr(grid, "GetPolyhedronFaceLocations"):
        import vtkmodules

        raise UnreadableFileError(f"reading polyhedra needs VTK 9.4 or later (found {vtkmodules.__version__})",
                                  where=path, fix="install a newer VTK: pip install 'vtk>=9.4'")
    return _cell_array(grid.GetPolyhedronFaces()) + _cell_array(grid.GetPolyhedronFaceLocations())


def _polyhedron_faces(face_arrays: tuple, cells: np.ndarray):
    """Face stream of the polyhedra ``cells``: corners, offsets and the polyhedron (0..) of each face,
    from VTK's face arrays (:func:`_face_arrays`)."""
    face_conn, face_offs, loc_conn, loc_offs = face_arrays
    per_cell = np.diff(loc_offs)[cells]
    # every cell a polyhedron (``cells`` increasing), their face list whole: all of it
    every = cells.size == loc_offs.size - 1 and loc_offs[0] == 0 and loc_conn.size == loc_offs[-1]
    face_ids = loc_conn if every else loc_conn[ranges(loc_offs, cells)]
    if face_ids.size == face_offs.size - 1 and face_ids.size and face_ids[0] == 0 and np.all(np.diff(face_ids) == 1):
        # every face of the file, in order (the usual layout): VTK's own arrays are the stream
        return face_conn, face_offs, np.repeat(np.arange(cells.size, dtype=np.int64), per_cell)
    sizes = face_offs[face_ids + 1] - face_offs[face_ids]
    offsets = np.concatenate([[0], np.cumsum(sizes)]).astype(np.int64)
    return face_conn[ranges(face_offs, face_ids)], offsets, np.repeat(np.arange(cells.size, dtype=np.int64), per_cell)


def read_polyhedral(path: str):
    """Read a VTK file holding polyhedra as a meshio mesh (see the module notes)."""
    import meshio._vtk_common as vtk_common

    from ..model.cells import LINEAR_CORNERS
    from ..model.polyhedra import cell_face_stream

    ensure_vtk_extras()
    grid = _read_grid(path)
    points = np.asarray(grid.points, dtype=np.float64)
    types = np.asarray(grid.celltypes, dtype=np.int64)
    n_polyhedra = int(np.count_nonzero(types == VTK_POLYHEDRON))
    if n_polyhedra == 0:  # face arrays named, but no polyhedron among the cells
        return read_with_meshio(path, "vtu" if path.lower().endswith(".vtu") else "vtk")
    conn, offs = _cell_array(grid.GetCells())
    sizes = np.diff(offs)
    blocks, rows_of = [], []  # kept cells: (meshio type, connectivity), input rows
    # cells split with the polyhedra: (how to make their face stream, input rows); the streams are
    # made only if the split is (a kept one of the same arrays needs none)
    streams = []
    face_arrays = _face_arrays(grid, path)
    for t in np.unique(types):
        rows_t = np.flatnonzero(types == t)
        if t == VTK_POLYHEDRON:
            streams.append((partial(_polyhedron_faces, face_arrays, rows_t), rows_t, None))
            continue
        name = vtk_common.vtk_to_meshio_type.get(int(t))
        if name is None:
            raise UnsupportedMeshError(f"VTK cell type {int(t)} is not supported", where=path,
                                       fix="write the mesh with linear cells or polyhedra")
        for k in (np.unique(sizes[rows_t]) if t in _VARIABLE else [None]):
            rows = rows_t if k is None else rows_t[sizes[rows_t] == k]
            cells = conn[offs[rows][:, None] + np.arange(int(sizes[rows[0]]))]
            linear = LINEAR_CORNERS.get(str(name), (str(name), None))
            if linear[0] in _QUAD_FACED:
                local = cells if linear[1] is None else cells[:, linear[1]]
                # kept whole (all polyhedra ordinary cells): the linear corners; a wedge's first triangle
                # the other way round, as meshio reads VTK's wedges (found by review: VTK 26/27/32, quadratic)
                whole = local[:, [0, 2, 1, 3, 5, 4]] if linear[0] == "wedge" else local
                streams.append((partial(cell_face_stream, linear[0], local), rows, (linear[0], whole)))
                continue
            blocks.append((name, cells))
            rows_of.append(rows)
    point_data = {name: np.asarray(grid.point_data[name]) for name in grid.point_data.keys()}
    cell_data = {name: np.asarray(grid.cell_data[name]) for name in grid.cell_data.keys()}
    field_data = {name: np.asarray(grid.field_data[name]) for name in grid.field_data.keys()}
    # what the streams are made from: equal arrays split alike (the polyhedra's own rows of the cell
    # arrays list their points only, which the split does not read: not hashed when all cells are)
    made_from = (types,) + ((conn, offs) if n_polyhedra < types.size else ()) + face_arrays
    return PolyhedralRead(path, points, blocks, rows_of, streams, made_from, point_data, cell_data, field_data,
                          n_polyhedra)


class PolyhedralRead:
    """A file with polyhedra as read, before and after the split (a meshio-style mesh).

    The split (:func:`phasegauge.model.polyhedra.split_polyhedra`) is made on first use of the
    mesh's attributes (``points``, ``cells``, ``point_data``, ``cell_data``, ...), or taken from
    a kept mesh of a :class:`MeshPool` that was built from the same points and faces
    (:meth:`use_pool`; :meth:`keep_split` keeps it with the mesh): a series whose mesh stays
    the same splits it once.
    """

    _KEY = "polyhedra_split"

    def __init__(self, path, points, blocks, rows_of, streams, made_from, point_data, cell_data, field_data, n_poly):
        self.path, self._points, self._blocks, self._rows_of = path, points, blocks, rows_of
        self._streams, self._made_from = streams, made_from
        self._rows = np.concatenate([rows for _, rows, _ in streams]).astype(np.int64)  # input rows of the split cells
        self._point_data, self._cell_data = point_data, cell_data
        self.field_data, self.n_poly = field_data, n_poly
        self._split = None

    @cached_property
    def signature(self) -> str:
        """Hash of the points and of the cell and face arrays the split cells' faces are made from:
        equal signatures split alike."""
        h = hashlib.sha256()
        h.update(np.ascontiguousarray(self._points))
        for array in self._made_from:
            h.update(np.ascontiguousarray(array))
        return h.hexdigest()[:32]

    def use_pool(self, pool) -> None:
        """Take the split of a kept mesh of ``pool`` built from the same points and faces."""
        for mesh in pool or ():
            kept = mesh.memo(self._KEY, lambda: None, keep=False)
            if kept is not None and kept[0] == self.signature:
                self._split = kept[1]
                self._drop_faces()
                return

    def keep_split(self, mesh) -> None:
        """Keep the split with ``mesh`` (for the next steps of a series), and give the mesh the
        tetrahedra's face neighbours when its cells are the split's tetrahedra themselves (the added
        centres' corner lists go as ``raw.split_centres``, :func:`_split_centres`)."""
        from ..model._faces import SPLIT_FACES

        kept = self.split
        mesh.memo(self._KEY, lambda: (self.signature, kept))
        split = kept.coned if isinstance(kept, OrdinaryCells) else kept
        if split is None:
            return
        if (split.neighbours is not None and len(mesh.blocks) == 1
                and mesh.blocks[0].connectivity is split.tetra):
            mesh.memo(SPLIT_FACES, lambda: split.neighbours)

    @property
    def split(self):
        """The polyhedra's split (:class:`~phasegauge.model.polyhedra.PolyhedraSplit`), or the
        ordinary cells they are (:class:`OrdinaryCells`) when every one is a tetrahedron, pyramid,
        wedge or hexahedron written as faces (:mod:`phasegauge.model._polyhedron_shapes`), or some
        are and the others are coned beside them (:attr:`OrdinaryCells.coned`)."""
        from ..model.polyhedra import split_polyhedra

        if self._split is None:
            self.signature  # noqa: B018  (hashed from the arrays, not the streams)
            # convex point sets beside them centre every hull face of 4+ corners: so do the polyhedra's quads
            convex = any(isinstance(name, type(CONVEX_POINT_SET)) for name, _ in self._blocks)
            # the polyhedra's face streams first: the file's own hexahedra, wedges and pyramids need theirs
            # only if the cells are split
            made = [(make() if block is None else make, rows, block) for make, rows, block in self._streams]
            self._split = None if convex else _ordinary_cells(self._points, made, where=self.path)
            if self._split is None:
                face_points, face_offsets, face_cell = _join_streams(
                    [(stream if block is None else stream(), rows) for stream, rows, block in made])
                del made
                self._split = split_polyhedra(self._points, face_points, face_offsets, face_cell, self._rows.size,
                                              where=self.path, cell_ids=self._rows, diagonals=not convex,
                                              same_points=first_copies(self._points))
            self._drop_faces()
        return self._split

    def _drop_faces(self) -> None:
        """Let the cell and face arrays go (hashed as :attr:`signature`) once split or matched."""
        self.signature  # noqa: B018  (hashed before the arrays go)
        self._streams = self._made_from = ()

    def __getattr__(self, name):
        if name.startswith("_"):
            raise AttributeError(name)
        return getattr(self._raw, name)

    @cached_property
    def _raw(self):
        split = self.split
        if isinstance(split, OrdinaryCells):
            return self._ordinary_raw(split)
        self._warn_inverted(split, stacklevel=4)
        rows = self._rows
        blocks = self._blocks + [("tetra", split.tetra)]
        points, point_data = self._with_centres(split)
        # 8 bytes a tetrahedron: only if used
        rows_of = self._rows_of + [rows[split.source]] if self._numeric_cell_data() else []
        raw = new_mesh(points, blocks, point_data=point_data, cell_data=self._cell_data_of(rows_of),
                       field_data=self.field_data)
        raw.cell_rows = self._rows_of + [rows[split.source]]  # the file's number of each cell (io: file_rows)
        raw.split_centres = _split_centres(split)
        note = None
        if any(isinstance(name, type(CONVEX_POINT_SET)) for name, _ in blocks):
            # convex cells split about their faces share the polyhedra's face centres
            bounds = split.centre_offsets[:split.n_face_centres + 1]
            raw.face_centres = {tuple(sorted(split.centre_points[a:b].tolist())): split.n_points + j
                                for j, (a, b) in enumerate(zip(bounds[:-1], bounds[1:]))}
            note = convex_point_sets(raw).convex_point_sets  # the split's block stays the last
        # the split cells' tetrahedra are pieces of them (cell sizes are the whole cells'), as are the
        # pieces of convex point sets split beside them (marked by convex_point_sets)
        earlier = getattr(raw, "cell_pieces", None) or [None] * len(raw.cells)
        raw.cell_pieces = list(earlier[:-1]) + [split.source]
        words = f"{self.n_poly} polyhedral cells (VTK 42)"
        others = int(rows.size) - self.n_poly
        if others:
            words += f" and the {others} hexahedra, wedges and pyramids beside them"
        words += f" read as {len(split.tetra)} tetrahedra about their cell centres"
        raw.convex_point_sets = words if not note else f"{words}; {note}"
        return raw

    def _warn_inverted(self, split, stacklevel: int) -> None:
        """Warn when pieces of the split have negative volume (``stacklevel`` as ``warnings.warn`` takes it,
        counted from here: the same caller from either path)."""
        pieces = [f"{n} {name}" for n, name in ((split.inverted_tetra, "tetrahedra"),
                                                (split.inverted_pyramids, "pyramids")) if n]
        if pieces:
            warnings.warn(MeshWarning(f"{' and '.join(pieces)} of the polyhedra's split have negative volume "
                                      "(cells not star-shaped from their corner mean: their volumes and centroids "
                                      "are the pieces' signed sums, exact, as are cell-field integrals; contours, "
                                      "widths and point-field integrals in them are not: the overlap counts twice)",
                                      where=self.path),
                          stacklevel=stacklevel)

    def _with_centres(self, split) -> tuple:
        """The points and the numeric point fields with the split's added centres after the points."""
        point_data, points = dict(self._point_data), self._points
        if split.n_centres:
            for name, values in list(point_data.items()):
                if np.issubdtype(values.dtype, np.number):
                    point_data[name] = np.concatenate([values.astype(np.float64), split.centre_values(values)])
                else:
                    del point_data[name]
            # the split's own copy (same points: the signature matched), shared by the steps
            points = split.points if split.points is not None else np.concatenate([points,
                                                                                    split.centre_values(points)])
        return points, point_data

    def _ordinary_raw(self, ordinary: "OrdinaryCells"):
        """The file as read when its polyhedra are ordinary cells (no split, no added point), or some are:
        those and the file's own cells whole, the other polyhedra as the pyramids and tetrahedra about
        their centres."""
        from ..model.cells import JoinedPieces

        whole = self._blocks + [(name, cells) for name, cells, _ in ordinary.blocks]
        rows_of = self._rows_of + [rows for _, _, rows in ordinary.blocks]
        split = ordinary.coned
        if split is None:
            raw = new_mesh(self._points, whole, point_data=self._point_data, cell_data=self._cell_data_of(rows_of),
                           field_data=self.field_data)
            raw.cell_rows = rows_of  # the file's number of each cell (io: file_rows)
            raw.convex_point_sets = ordinary.words
            return raw
        self._warn_inverted(split, stacklevel=5)
        pieces = (("pyramid", split.pyramids, split.pyramid_source), ("tetra", split.tetra, split.source))
        coned = [(name, cells, source) for name, cells, source in pieces if len(cells)]
        # 8 bytes a piece: only if used
        all_rows = rows_of + [ordinary.coned_rows[source] for *_, source in coned]
        rows_of = all_rows if self._numeric_cell_data() else []
        points, point_data = self._with_centres(split)
        raw = new_mesh(points, whole + [(name, cells) for name, cells, _ in coned], point_data=point_data,
                       cell_data=self._cell_data_of(rows_of), field_data=self.field_data)
        raw.cell_rows = all_rows  # the file's number of each cell (io: file_rows)
        raw.split_centres = _split_centres(split)  # coned beside whole cells: centres after the points too
        # a polyhedron's pyramids and tetrahedra are pieces of it: numbered alike across their two blocks
        raw.cell_pieces = [None] * len(whole) + [source if k == 0 else JoinedPieces(source)
                                                 for k, (*_, source) in enumerate(coned)]
        raw.convex_point_sets = ordinary.words
        return raw

    def _numeric_cell_data(self) -> dict:
        return {name: values for name, values in self._cell_data.items() if np.issubdtype(values.dtype, np.number)}

    def _cell_data_of(self, rows_of: list) -> dict:
        """The numeric cell fields per block, block ``k`` taking the input rows ``rows_of[k]``."""
        return {name: [values[r] for r in rows_of] for name, values in self._numeric_cell_data().items()}


def _split_centres(split):
    """The centres ``split`` added after the points (:class:`~phasegauge.model.polyhedra.SplitCentres`), or
    None; the mesh takes them through its merge of coincident points (``mesh_and_fields``)."""
    from ..model.polyhedra import SplitCentres

    if not split.n_centres:
        return None
    return SplitCentres(np.arange(split.n_points, split.n_points + split.n_centres, dtype=np.int64),
                        split.centre_points, split.centre_offsets)


@dataclass(frozen=True, eq=False)
class OrdinaryCells:
    """The cells of a file whose polyhedra are ordinary cells written as faces, all or some.

    Attributes
    ----------
    blocks : list of (str, ndarray, ndarray)
        ``(cell type, connectivity, input rows)``: the hexahedra, wedges and pyramids of the file (their
        linear corners; a wedge's in meshio's order), then the polyhedra as the cells they are
        (:func:`~phasegauge.model._polyhedron_shapes.ordinary_shapes`); kept whole.
    words : str
        How the polyhedra were read (``inspect`` shows it).
    coned : PolyhedraSplit or None
        The polyhedra of other shapes (None: there are none) as pyramids (their quad faces) and
        tetrahedra (their triangles, and the triangles about the centres of larger faces) joined to
        their cell centres (:func:`~phasegauge.model.polyhedra.split_polyhedra` with
        ``pyramids=True``): a quad face they share with a whole cell is a quad on both sides, so the
        mesh groups and cuts it once.
    coned_rows : ndarray of shape (m,), int64, or None
        The input rows of those polyhedra (``coned.source`` and ``coned.pyramid_source`` number them).
    """

    blocks: list
    words: str
    coned: object = None
    coned_rows: np.ndarray | None = None


_NAMES = MappingProxyType({"tetra": "tetrahedra", "pyramid": "pyramids", "wedge": "wedges", "hexahedron": "hexahedra"})


def _ordinary_cells(points, made: list, *, where: str = ""):
    """The file's split cells read as ordinary cells where they are ones (``made``: per part, the
    polyhedra's face stream or, for the file's own hexahedra, wedges and pyramids, anything; the input
    rows; None or those cells' block).

    Returns :class:`OrdinaryCells`: every polyhedron an ordinary cell, or some cells kept whole (those,
    or the file's own hexahedra, wedges or pyramids) and the other polyhedra coned; None when no cell
    is kept whole (every polyhedron of another shape: the tetrahedra's split).
    """
    from ..model._polyhedron_shapes import ordinary_shapes
    from ..model.polyhedra import split_polyhedra

    blocks, counts, rest = [], {}, []
    for stream, rows, block in made:
        if block is not None:
            blocks.append((block[0], block[1], rows))
            continue
        found = np.zeros(rows.size, dtype=bool)
        for shape in ordinary_shapes(points, *stream, rows.size, every=False) or ():
            blocks.append((shape.cell_type, shape.connectivity, rows[shape.cells]))
            counts[shape.cell_type] = counts.get(shape.cell_type, 0) + int(shape.cells.size)
            found[shape.cells] = True
        if not found.all():
            rest.append((stream, rows, found))
    listed = ", ".join(f"{n} {_NAMES[t]}" for t, n in counts.items())
    if not rest:
        return OrdinaryCells(blocks, f"{sum(counts.values())} polyhedral cells (VTK 42) read as the ordinary cells "
                                     f"their faces make: {listed}")
    if not blocks:
        return None
    # the other polyhedra's faces (a stream of which none is an ordinary cell taken as it is)
    rest = [(stream if not found.any() else _cells_of_stream(stream, ~found), rows[~found])
            for stream, rows, found in rest]
    rows = np.concatenate([r for _, r in rest]).astype(np.int64)
    split = split_polyhedra(points, *_join_streams(rest), rows.size, where=where, cell_ids=rows, pyramids=True)
    coned = f"{len(split.pyramids)} pyramids and {len(split.tetra)} tetrahedra about their cell centres"
    if counts:
        words = (f"{sum(counts.values()) + rows.size} polyhedral cells (VTK 42): {listed} read as the ordinary cells "
                 f"their faces make, the other {rows.size} as {coned}")
    else:
        words = f"{rows.size} polyhedral cells (VTK 42) read as {coned}"
    own = sum(len(block[1]) for _, _, block in made if block is not None)
    if own:
        words += f"; the file's {own} hexahedra, wedges and pyramids kept whole"
    return OrdinaryCells(blocks, words, split, rows)


def _cells_of_stream(stream, keep: np.ndarray) -> tuple:
    """The face stream of the cells ``keep`` (a mask) of a face stream, the cells numbered anew."""
    face_points, face_offsets, face_cell = stream
    faces = np.flatnonzero(keep[face_cell])
    sizes = (face_offsets[faces + 1] - face_offsets[faces]).astype(np.int64)
    number = np.cumsum(keep) - 1
    return (face_points[ranges(face_offsets, faces)], np.concatenate([[0], np.cumsum(sizes)]).astype(np.int64),
            number[face_cell[faces]])


def _join_streams(streams: list):
    """One face stream of every split cell (cells numbered 0.. in the order of ``streams``)."""
    points, offsets, cells = [], [], []
    base, n_cells = 0, 0
    for (face_points, face_offsets, face_cell), source in streams:
        points.append(face_points)
        offsets.append(face_offsets[:-1] + base)
        cells.append(face_cell + n_cells)
        base += int(face_offsets[-1])
        n_cells += int(source.size)
    offsets.append(np.array([base], dtype=np.int64))
    return np.concatenate(points), np.concatenate(offsets), np.concatenate(cells)
