"""Small mesh builders for tests, samples and benchmarks.

Every builder returns a :class:`phasegauge.Mesh`. Grids are built in index
order with numpy only; unstructured triangle and tetrahedron meshes come from
``scipy.spatial.Delaunay`` on jittered points, so they are truly irregular.

Cell kinds of :func:`grid_mesh`:

* 2D: ``quad``, ``triangle`` (each quad split in two), ``mixed`` (quads and
  triangles in alternate columns), ``polygon`` (quads written as 4-gons);
* 3D: ``hexahedron``, ``tetra`` (each hexahedron split in six), ``wedge``
  (each hexahedron split in two prisms), ``pyramid`` (each hexahedron split
  into six pyramids about an added centre point), ``mixed`` (columns of
  hexahedra, wedges and pyramids, conforming).

:func:`to_polyhedral_grid` writes the 3D cells of a mesh as VTK polyhedra (pyvista).
"""

from __future__ import annotations

import numpy as np

from .model.mesh import Mesh

__all__ = ["grid_mesh", "delaunay_mesh", "to_meshio", "jitter_points", "to_polyhedral_grid"]


def _axes(shape, bounds):
    return [np.linspace(lo, hi, n + 1) for n, (lo, hi) in zip(shape, bounds)]


def grid_mesh(shape, bounds=None, kind: str | None = None, *, jitter: float = 0.0,
              seed: int = 0) -> Mesh:
    """A grid of ``shape`` cells over ``bounds``, split into cells of ``kind``.

    Parameters
    ----------
    shape : tuple of int
        Cells per axis, 2 or 3 entries.
    bounds : sequence of (lo, hi), optional
        Extent per axis; default the unit square or cube.
    kind : str, optional
        Cell kind (see the module notes); default ``quad`` / ``hexahedron``.
    jitter : float
        Interior points moved at random by up to this fraction of the spacing
        (boundary points stay, so the domain is unchanged).
    seed : int

    Returns
    -------
    Mesh
    """
    shape = tuple(int(n) for n in shape)
    dim = len(shape)
    if bounds is None:
        bounds = [(0.0, 1.0)] * dim
    axes = _axes(shape, bounds)
    grids = np.meshgrid(*axes, indexing="ij")
    points = np.stack([g.ravel() for g in grids], axis=1)
    pshape = tuple(n + 1 for n in shape)
    if jitter:
        points = jitter_points(points, axes, jitter, seed)
    if dim == 2:
        kind = kind or "quad"
        i, j = np.meshgrid(np.arange(shape[0]), np.arange(shape[1]), indexing="ij")
        i, j = i.ravel(), j.ravel()
        p = lambda a, b: np.ravel_multi_index((a, b), pshape)  # noqa: E731
        q = np.stack([p(i, j), p(i + 1, j), p(i + 1, j + 1), p(i, j + 1)], axis=1)
        if kind == "quad":
            return Mesh(points, [("quad", q)])
        if kind == "polygon":
            return Mesh(points, [("polygon", q)])
        tris = np.concatenate([q[:, [0, 1, 2]], q[:, [0, 2, 3]]])
        if kind == "triangle":
            return Mesh(points, [("triangle", tris)])
        if kind == "mixed":
            odd = (i % 2) == 1
            t = np.concatenate([q[odd][:, [0, 1, 2]], q[odd][:, [0, 2, 3]]])
            return Mesh(points, [("quad", q[~odd]), ("triangle", t)])
        raise ValueError(f"unknown 2D cell kind {kind!r}")
    kind = kind or "hexahedron"
    i, j, k = (a.ravel() for a in np.meshgrid(*[np.arange(n) for n in shape], indexing="ij"))
    p = lambda a, b, c: np.ravel_multi_index((a, b, c), pshape)  # noqa: E731
    h = np.stack([p(i, j, k), p(i + 1, j, k), p(i + 1, j + 1, k), p(i, j + 1, k),
                  p(i, j, k + 1), p(i + 1, j, k + 1), p(i + 1, j + 1, k + 1), p(i, j + 1, k + 1)], axis=1)
    if kind == "hexahedron":
        return Mesh(points, [("hexahedron", h)])
    if kind == "tetra":
        return Mesh(points, [("tetra", _hex_to_tets(h))])
    if kind == "wedge":
        return Mesh(points, [("wedge", _hex_to_wedges(h))])
    if kind == "pyramid":
        pyr, centres = _hex_to_pyramids(points, h, len(points))
        return Mesh(np.vstack([points, centres]), [("pyramid", pyr)])
    if kind == "mixed":
        # conforming: hexahedra, wedge columns (quad faces towards x and y) and hexahedra
        # split into six pyramids about their centre (quad bases towards every neighbour)
        column = i % 3
        pyr, centres = _hex_to_pyramids(points, h[column == 2], len(points))
        return Mesh(np.vstack([points, centres]),
                    [("hexahedron", h[column == 0]), ("wedge", _hex_to_wedges(h[column == 1])),
                     ("pyramid", pyr)])
    raise ValueError(f"unknown 3D cell kind {kind!r}")


def _hex_to_tets(h: np.ndarray) -> np.ndarray:
    # six tetrahedra around the diagonal 0-6, positively oriented, conforming between neighbours
    split = [(0, 1, 2, 6), (0, 2, 3, 6), (0, 3, 7, 6), (0, 7, 4, 6), (0, 4, 5, 6), (0, 5, 1, 6)]
    return np.concatenate([h[:, list(t)] for t in split])


def _hex_to_pyramids(points: np.ndarray, h: np.ndarray, first: int):
    centres = points[h].mean(axis=1)
    cidx = np.arange(len(h)) + first
    # each hexahedron face (outward normal) becomes a base, reversed so that it faces the apex
    faces = [(0, 1, 2, 3), (4, 7, 6, 5), (0, 4, 5, 1), (1, 5, 6, 2), (2, 6, 7, 3), (3, 7, 4, 0)]
    pyr = np.concatenate([np.column_stack([h[:, list(f)], cidx]) for f in faces])
    return pyr, centres


def _hex_to_wedges(h: np.ndarray) -> np.ndarray:
    # two prisms split along the vertical diagonal face 0-2-6-4; VTK wedge base faces away from top
    return np.concatenate([h[:, [0, 2, 1, 4, 6, 5]], h[:, [0, 3, 2, 4, 7, 6]]])


def jitter_points(points: np.ndarray, axes, fraction: float, seed: int = 0) -> np.ndarray:
    """Move interior points at random by up to ``fraction`` of the local spacing."""
    rng = np.random.default_rng(seed)
    out = points.copy()
    for d, ax in enumerate(axes):
        h = float(np.min(np.diff(ax)))
        interior = (points[:, d] > ax[0] + 1e-12) & (points[:, d] < ax[-1] - 1e-12)
        out[interior, d] += rng.uniform(-fraction, fraction, interior.sum()) * h
    return out


def delaunay_mesh(n_points: int, bounds=None, *, dim: int = 2, seed: int = 0) -> Mesh:
    """An irregular triangle (2D) or tetrahedron (3D) mesh of a box.

    The box corners and a regular boundary layer of points are included so the
    domain is exactly the box; interior points are random.

    Parameters
    ----------
    n_points : int
        Approximate number of points.
    bounds : sequence of (lo, hi), optional
    dim : {2, 3}
    seed : int
    """
    from scipy.spatial import Delaunay

    rng = np.random.default_rng(seed)
    if bounds is None:
        bounds = [(0.0, 1.0)] * dim
    lo = np.array([b[0] for b in bounds], float)
    hi = np.array([b[1] for b in bounds], float)
    per_side = max(3, int(round(n_points ** (1.0 / dim))))
    axes = [np.linspace(a, b, per_side) for a, b in zip(lo, hi)]
    grid = np.stack([g.ravel() for g in np.meshgrid(*axes, indexing="ij")], axis=1)
    on_boundary = np.any(np.isclose(grid, lo) | np.isclose(grid, hi), axis=1)
    boundary = grid[on_boundary]
    n_inner = max(1, n_points - len(boundary))
    margin = 0.5 * (hi - lo) / per_side
    inner = lo + margin + rng.random((n_inner, dim)) * (hi - lo - 2 * margin)
    pts = np.vstack([boundary, inner])
    tri = Delaunay(pts)
    cells = tri.simplices.astype(np.int64)
    # orient positively
    X = pts[cells]
    E = X[:, 1:] - X[:, :1]
    det = np.linalg.det(np.swapaxes(E, 1, 2))
    flip = det < 0
    cells[flip, 0], cells[flip, 1] = cells[flip, 1].copy(), cells[flip, 0].copy()
    keep = np.abs(det) > 1e-14 * float(np.prod(hi - lo))
    return Mesh(pts, [("triangle" if dim == 2 else "tetra", cells[keep])])


def to_meshio(mesh: Mesh, point_data=None, cell_data=None, field_data=None):
    """A meshio.Mesh of ``mesh`` (cell data given joined is split per block)."""
    import meshio

    cells = [(b.cell_type, b.connectivity) for b in mesh.blocks]
    split = {}
    for name, values in (cell_data or {}).items():
        values = np.asarray(values)
        split[name] = [values[a:b] for a, b in zip(mesh.block_offsets[:-1], mesh.block_offsets[1:])]
    return meshio.Mesh(mesh.points, cells, point_data=point_data or {}, cell_data=split,
                       field_data=field_data or {})


def to_polyhedral_grid(mesh: Mesh, *, point_data=None, cell_data=None, reverse: bool = False):
    """A pyvista UnstructuredGrid with every 3D cell of ``mesh`` written as a VTK polyhedron (42).

    Each cell's faces are listed in the order of :data:`phasegauge.model.cells.FACES`, as loops
    that run one way round the cell (:data:`phasegauge.model._polyhedron_shapes.LOOPS`): outward
    normals, a wedge's inward (meshio's corner order); the other way with ``reverse``. Point and
    cell data (joined over the blocks) are attached as given.
    """
    import pyvista

    from .model._polyhedron_shapes import LOOPS

    parts = []
    for block in mesh.blocks:
        conn = block.connectivity
        faces = LOOPS[block.cell_type]
        columns = [np.full(len(block), sum(len(f) + 1 for f in faces) + 1), np.full(len(block), len(faces))]
        for face in faces:
            face = face[::-1] if reverse else face
            columns.append(np.full(len(block), len(face)))
            columns += [conn[:, i] for i in face]
        parts.append(np.stack(columns, axis=1).ravel())
    types = np.full(mesh.n_cells, pyvista.CellType.POLYHEDRON, dtype=np.uint8)
    grid = pyvista.UnstructuredGrid(np.concatenate(parts).astype(np.int64), types, mesh.points)
    for name, values in (point_data or {}).items():
        grid.point_data[name] = values
    for name, values in (cell_data or {}).items():
        grid.cell_data[name] = values
    return grid
