"""Quasi-2D meshes: a 3D mesh one cell thick, measured per unit depth as 2D.

Finite-volume solvers run 2D cases on a 3D mesh one cell thick (hexahedra and
wedges between two planes, with "empty" or symmetry patches front and back).
Measured as 3D, the interface is an area, droplets have a sphericity and the
resolution rules see 3D cell sizes. :func:`one_cell_thick` recognises such a
mesh and builds the 2D mesh of its lower face plane (quads from hexahedra,
triangles from wedges, in the same cell order), so cell data carries over
unchanged and every analysis sees a 2D mesh: lengths, areas and circularities
per unit depth.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .cells import FACES
from .mesh import Mesh

__all__ = ["Quasi2D", "one_cell_thick", "as_measured", "flat_mesh_if_built", "tilted_slab", "tilted_slab_words",
           "PLANE_TOLERANCE", "TILTED_PLANE_TOLERANCE",
           "TILTED_FLOAT32_SPACINGS"]

#: points lie on a plane when within this fraction of the mesh's largest extent of it
PLANE_TOLERANCE = 1e-9

#: points lie on one of two planes of any direction (:func:`tilted_slab`) when within this fraction of the
#: mesh's largest extent of it (our threshold: loose against the rounding of turned coordinates, 1e-16, and
#: far below a cell of any mesh this reads, so a mesh two cells thick is never taken for one)
TILTED_PLANE_TOLERANCE = 1e-6

#: points that are all single-precision numbers (a float32 file's) are on a tilted plane within this many
#: float32 spacings at their largest |x| when that is looser (our threshold: the rounding of each coordinate,
#: half a spacing, moves a height along a turned normal by up to sqrt(3) / 2 spacing, and the lowest and
#: highest heights are rounded too; 7.6e-6 a spacing at |x| = 100, still far below a cell's depth)
TILTED_FLOAT32_SPACINGS = 4

#: the 2D cell of each prism cell type, and the corner count of its face on a plane
_PRISMS = {"hexahedron": ("quad", 4), "wedge": ("triangle", 3)}


@dataclass(frozen=True)
class Quasi2D:
    """The 2D mesh of a mesh one cell thick.

    Attributes
    ----------
    mesh : Mesh
        The 2D mesh on the lower plane; its cells are the 3D cells, in order.
    axis : int
        The thin axis (0, 1, 2 for x, y, z).
    depth : float
        Distance between the two planes, in mesh length units.
    points : ndarray of shape (n_points_2d,), int64
        Index of each 2D point among the 3D mesh's points (point data of the
        3D mesh restricted to the lower plane: ``values[points]``).
    """

    mesh: Mesh
    axis: int
    depth: float
    points: np.ndarray

    @property
    def axis_name(self) -> str:
        return "xyz"[self.axis]

    def record(self) -> dict:
        """A plain record for tables, the manifest and the report."""
        return {"dimension": 2, "quasi_2d": True, "thin_axis": self.axis_name, "depth": float(self.depth)}


def as_measured(mesh: Mesh, *, keep_3d: bool = False, where: str = "") -> Quasi2D | None:
    """The :class:`Quasi2D` record of a mesh as measure reads it: a 3D mesh one cell thick is measured
    on the 2D mesh of its lower plane, per unit depth, unless ``keep_3d``; None where it is read as it
    is (2D, thicker, or ``keep_3d``). The one rule for measure, compare, the convergence sizes and
    ``inspect``; a slab one cell thick between turned planes (:func:`tilted_slab`) is warned of
    (:class:`~phasegauge.errors.MeshWarning` naming ``where``, the file and step)."""
    if keep_3d or mesh.dimension != 3:
        return None
    flat = one_cell_thick(mesh)
    if flat is None:
        tilted = tilted_slab(mesh)
        if tilted is not None:
            import warnings

            from ..errors import MeshWarning

            warnings.warn(MeshWarning(tilted_slab_words(tilted), where=where), stacklevel=2)
    return flat


def tilted_slab_words(tilted: tuple) -> str:
    """The warning on a :func:`tilted_slab` ``(normal, depth)``: what is measured, and the fix."""
    normal = ", ".join(f"{v:.3g}" for v in np.round(tilted[0], 12) + 0.0)
    return (f"the mesh is one cell thick (depth {tilted[1]:.4g}) but its two planes are not normal to x, y or z "
            f"(normal {normal}): it is measured as 3D, the interface kind and cells across with the cell size "
            "V^(1/3); write it with its planes normal to an axis to measure it per unit depth as 2D")


def tilted_slab(mesh: Mesh) -> tuple | None:
    """``(normal, depth)`` of a mesh one cell thick between two parallel planes that are not normal to an
    axis (:func:`one_cell_thick` takes axis planes only), else None (cached on the mesh).

    The planes' normal is the direction of least spread of the used points (the smallest eigenvector of
    their covariance: exact for a straight extrusion, whose two planes hold the same points shifted); the
    mesh is such a slab when every cell is a hexahedron or a wedge, every used point lies on one of the two
    planes (within :data:`TILTED_PLANE_TOLERANCE` of the largest extent), and every cell has half its corners
    on each."""
    return mesh.memo("tilted_slab", lambda: _tilted(mesh))


def _tilted(mesh: Mesh) -> tuple | None:
    if mesh.dimension != 3 or any(b.cell_type not in _PRISMS for b in mesh.blocks) or one_cell_thick(mesh):
        return None
    used = mesh.used_points
    if used.size < 6:
        return None
    # about one of them: the second moments below lose no digits to an offset
    points = (mesh.points if used.size == mesh.n_points else mesh.points[used]) - mesh.points[used[0]]
    mean = np.einsum("ij->j", points) / len(points)  # (a fifth of the time of numpy's sum over the long axis)
    scatter = points.T @ points - len(points) * np.outer(mean, mean)
    normal = np.linalg.eigh(scatter)[1][:, 0]  # eigenvalues ascending: the least spread
    if np.max(np.abs(normal)) > 1 - 1e-12:
        return None  # normal to an axis: one_cell_thick's case (not one cell thick there)
    height = points @ normal
    tolerance = _tilted_tolerance(mesh, used)
    lo, hi = float(height.min()), float(height.max())
    # a few heights spread over the numbering first, as one_cell_thick probes: a thick mesh has some between
    if hi - lo <= tolerance or not _on_planes(height[::max(1, height.size // _PROBE)], lo, hi, tolerance):
        return None
    if not _on_planes(height, lo, hi, tolerance):
        return None
    on_lo = np.zeros(mesh.n_points, dtype=bool)
    on_lo[used] = np.abs(height - lo) <= tolerance
    for block in mesh.blocks:
        if not np.all(on_lo[block.connectivity].sum(axis=1) == _PRISMS[block.cell_type][1]):
            return None
    if normal[np.argmax(np.abs(normal))] < 0:
        normal = -normal
    return tuple(float(v) for v in normal), hi - lo


def _tilted_tolerance(mesh: Mesh, used: np.ndarray) -> float:
    """:data:`TILTED_PLANE_TOLERANCE` of the used points' extent, floored at :data:`TILTED_FLOAT32_SPACINGS`
    float32 spacings of their largest |x| when every used coordinate is a single-precision number."""
    tolerance = TILTED_PLANE_TOLERANCE * float(np.ptp(mesh.bounds, axis=0).max())
    points = mesh.points if used.size == mesh.n_points else mesh.points[used]
    if np.array_equal(points.astype(np.float32), points):  # (float32 points read into float64: exactly so)
        far = float(np.abs(points).max())
        tolerance = max(tolerance, TILTED_FLOAT32_SPACINGS * float(np.spacing(np.float32(far))))
    return tolerance


def one_cell_thick(mesh: Mesh) -> Quasi2D | None:
    """The 2D mesh of ``mesh`` when it is one cell thick, else None (cached on the mesh).

    Parameters
    ----------
    mesh : Mesh

    Returns
    -------
    Quasi2D or None
        None unless: the mesh is 3D, every cell is a hexahedron or a wedge,
        all used points lie on two planes normal to x, y or z (within
        :data:`PLANE_TOLERANCE` of the largest extent), every cell has one face
        on each plane (its corners split half and half), and each cell's volume
        is its lower face's area times the depth (a straight extrusion, to
        1e-6 relative).

    Notes
    -----
    Point data of the 2D mesh is the lower plane's (a 2D solver writes the
    same values on both planes). A lower face whose corners run clockwise in
    the plane's axes is reversed (first corner kept), so all 2D cells are
    counter-clockwise.
    """
    return mesh.memo("quasi_2d", lambda: _build(mesh))


def flat_mesh_if_built(mesh: Mesh) -> Mesh | None:
    """The 2D mesh :func:`one_cell_thick` already built for ``mesh``, or None (builds nothing)."""
    flat = mesh.memo("quasi_2d", lambda: None, keep=False)
    return None if flat is None else flat.mesh


def _build(mesh: Mesh) -> Quasi2D | None:
    if mesh.dimension != 3 or any(b.cell_type not in _PRISMS for b in mesh.blocks):
        return None
    used = mesh.used_points
    if used.size == 0:
        return None
    low, high = mesh.bounds  # of the used points
    extent = high - low
    tolerance = PLANE_TOLERANCE * max(float(extent.max()), 1e-300)
    for axis in np.argsort(extent, kind="stable"):  # the thinnest axis first
        lo, hi = float(low[axis]), float(high[axis])
        if hi - lo <= tolerance:
            return None
        # a few points spread over the numbering first: on a mesh that is not one cell thick
        # some of them lie between the planes
        if not _on_planes(mesh.points[used[::max(1, used.size // _PROBE)], axis], lo, hi, tolerance):
            continue
        if not _on_planes(mesh.points[used, axis], lo, hi, tolerance):
            continue
        built = _lower_faces(mesh, int(axis), lo, hi, tolerance)
        if built is not None:
            built.mesh.file_cells = mesh.file_cells  # the cells keep their order: and their file's numbers
            return built
    return None


#: used points checked first for lying on the two planes (then all of them)
_PROBE = 4096


def _on_planes(values: np.ndarray, lo: float, hi: float, tolerance: float) -> bool:
    """True when every value lies within ``tolerance`` of ``lo`` or of ``hi``."""
    return bool(np.all((np.abs(values - lo) <= tolerance) | (np.abs(values - hi) <= tolerance)))


def _lower_faces(mesh: Mesh, axis: int, lo: float, hi: float, tolerance: float) -> Quasi2D | None:
    """The 2D mesh of the faces on the plane at ``lo``, or None when a cell has none."""
    plane = [a for a in range(3) if a != axis]
    blocks = []
    for block in mesh.blocks:
        cell_type, k = _PRISMS[block.cell_type]
        conn = block.connectivity
        on_lo = np.abs(mesh.points[conn, axis] - lo) <= tolerance
        if not np.all(on_lo.sum(axis=1) == k):
            return None
        lower = np.full((len(conn), k), -1, dtype=np.int64)
        for face in FACES[block.cell_type]:
            if len(face) != k:
                continue
            here = np.all(on_lo[:, list(face)], axis=1) & (lower[:, 0] < 0)
            lower[here] = conn[here][:, list(face)]
        if np.any(lower[:, 0] < 0):
            return None
        # counter-clockwise in the plane's axes: reverse the others, keep the first corner
        xy = mesh.points[lower][:, :, plane]
        twice_area = np.sum(xy[:, :, 0] * np.roll(xy[:, :, 1], -1, axis=1)
                            - np.roll(xy[:, :, 0], -1, axis=1) * xy[:, :, 1], axis=1)
        flip = twice_area < 0
        lower[flip] = lower[flip][:, [0] + list(range(k - 1, 0, -1))]
        blocks.append((cell_type, lower))
    keep = np.unique(np.concatenate([b[1].ravel() for b in blocks]))
    number = np.full(mesh.n_points, -1, dtype=np.int64)
    number[keep] = np.arange(keep.size)
    points = mesh.points[keep].copy()
    points[:, axis] = lo
    flat = Mesh(points, [(t, number[c]) for t, c in blocks])
    depth = hi - lo
    volumes = mesh.cell_measures
    if not np.allclose(flat.cell_measures * depth, volumes, rtol=1e-6, atol=0.0):
        return None
    return Quasi2D(flat, axis, depth, keep)
