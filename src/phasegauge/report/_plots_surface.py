"""A triangulated surface in a box, drawn as a fixed orthographic view on a plain 2D axes.

matplotlib's 3D axes re-project, sort and lay out their panes, grids and ticks at every draw, and
made the 3D interface snapshots the costliest figure of a report. A snapshot needs one fixed view:
this module projects the surface once (orthographic, seen from the same direction as matplotlib's
default 3D view: elevation 30 degrees, azimuth -60 degrees), sorts the triangles back to front
(painter's algorithm) and shades each by the angle of its normal to a light, so the shape reads
without a depth buffer. The box of the drawn region is outlined, three of its edges carry the axis
name with its unit and a few tick values.
"""

from __future__ import annotations

import numpy as np

__all__ = ["view_basis", "project", "draw_surface_in_box"]

#: the view of matplotlib's default 3D axes, in degrees
ELEVATION, AZIMUTH = 30.0, -60.0
#: the light: from the viewer's upper left, in (screen right, screen up, towards the viewer)
_LIGHT = np.array([-0.4, 0.6, 0.7]) / np.linalg.norm([-0.4, 0.6, 0.7])
#: a box side is drawn at least this fraction of the longest, so a thin slab still shows its depth
_MIN_SIDE = 0.25


def view_basis(elevation: float = ELEVATION, azimuth: float = AZIMUTH) -> np.ndarray:
    """The rows (screen right, screen up, towards the viewer) of an orthographic view, as unit vectors.

    Parameters
    ----------
    elevation, azimuth : float, in degrees
        The viewing direction as matplotlib's 3D axes give it: the viewer sits at ``azimuth`` around
        the z axis from the x axis and ``elevation`` above the x-y plane.

    Returns
    -------
    ndarray of shape (3, 3)
        An orthonormal, right-handed basis (screen right x screen up = towards the viewer).
    """
    e, a = np.radians(elevation), np.radians(azimuth)
    towards = np.array([np.cos(e) * np.cos(a), np.cos(e) * np.sin(a), np.sin(e)])
    right = np.array([-np.sin(a), np.cos(a), 0.0])
    up = np.cross(towards, right)
    return np.stack([right, up, towards])


def _box_scale(lo, hi) -> np.ndarray:
    """The factor each axis is drawn at: equal in all three, except a side shorter than
    ``_MIN_SIDE`` of the longest, which is stretched to that (a thin slab keeps a visible depth)."""
    extent = np.maximum(hi - lo, 1e-300)
    return np.maximum(extent, _MIN_SIDE * extent.max()) / extent / extent.max()


def project(points, *, bounds, basis=None) -> np.ndarray:
    """Points of the box ``bounds`` in the view's coordinates (screen right, screen up, depth).

    The box is scaled to a longest side of 1 (see :func:`_box_scale`) and centred on the origin.

    Parameters
    ----------
    points : array_like of shape (m, 3), in mesh units
    bounds : (array_like of shape (3,), array_like of shape (3,))
    basis : ndarray of shape (3, 3), optional
        :func:`view_basis` (the default view when None).

    Returns
    -------
    ndarray of shape (m, 3)
        Screen right, screen up and the distance towards the viewer, dimensionless.
    """
    lo, hi = (np.asarray(b, dtype=float) for b in bounds)
    basis = view_basis() if basis is None else basis
    scaled = (np.asarray(points, dtype=float) - 0.5 * (lo + hi)) * _box_scale(lo, hi)
    return scaled @ basis.T


def draw_surface_in_box(ax, points, elements, *, bounds, axis_names=("x", "y", "z"), colour="C0") -> None:
    """Draw a triangulated surface and the outline of its box on the 2D axes ``ax``, seen from the default view.

    Parameters
    ----------
    ax : matplotlib.axes.Axes
        A plain (rectilinear) axes; its own axis lines are switched off.
    points : array_like of shape (m, 3), in mesh units
    elements : array_like of shape (k, 3), int
        Triangles as indices into ``points`` (any orientation: shading uses the normal's angle to
        the light either way).
    bounds : (array_like of shape (3,), array_like of shape (3,))
        Lower and upper corner of the drawn region, in mesh units.
    axis_names : sequence of 3 str
        Names of the three axes; each is labelled ``'<name> (mesh units)'``.
    colour : matplotlib colour
        The surface's colour where it faces the light.
    """
    from matplotlib.collections import LineCollection, PolyCollection
    from matplotlib.colors import to_rgb
    from matplotlib.ticker import MaxNLocator

    from ._canvas import in_mesh_units

    lo, hi = (np.asarray(b, dtype=float) for b in bounds)
    basis = view_basis()
    corners = np.array([[hi[j] if (k >> j) & 1 else lo[j] for j in range(3)] for k in range(8)])
    screen_corners = project(corners, bounds=(lo, hi), basis=basis)
    # the box: its twelve edges (corner k and corner k with one axis flipped), behind the surface
    edges = [(k, k | (1 << j)) for k in range(8) for j in range(3) if not (k >> j) & 1]
    # autolim=False: the limits are set from the box and the labels below; matplotlib would otherwise
    # measure the extent of every triangle's path for nothing
    ax.add_collection(LineCollection(screen_corners[np.array(edges)][:, :, :2], colors="0.75", linewidths=0.6,
                                     zorder=1), autolim=False)
    points, elements = np.asarray(points, dtype=float), np.asarray(elements, dtype=np.int64)
    if len(elements):
        screen = project(points, bounds=(lo, hi), basis=basis)
        corner = screen[elements]  # (k, 3 corners, 3)
        normal = np.cross(corner[:, 1] - corner[:, 0], corner[:, 2] - corner[:, 0])
        length = np.linalg.norm(normal, axis=1)
        keep = length > 0
        corner, normal = corner[keep], normal[keep] / length[keep, None]
        order = np.argsort(corner[:, :, 2].mean(axis=1), kind="stable")  # far first: nearer ones paint over
        light = np.abs(normal[order] @ _LIGHT)
        shade = (0.45 + 0.55 * light)[:, None] * np.asarray(to_rgb(colour))[None, :]
        ax.add_collection(PolyCollection(corner[order][:, :, :2], facecolors=np.clip(shade, 0, 1),
                                         edgecolors="none", antialiaseds=False, zorder=2), autolim=False)
    centre = screen_corners[:, :2].mean(axis=0)
    size = np.ptp(screen_corners[:, :2], axis=0).max()
    # the labelled edges: x along the front bottom edge, y along the right bottom edge (as matplotlib's
    # default view places them), z up the left front edge (away from the y label, which a short z edge
    # on the right would meet)
    labelled = ((0, 0b000, 0b001), (1, 0b001, 0b011), (2, 0b000, 0b100))
    anchors = [tuple(point) for point in screen_corners[:, :2]]
    for axis, start, stop in labelled:
        a, b = screen_corners[start, :2], screen_corners[stop, :2]
        mid = 0.5 * (a + b)
        along = (b - a) / max(np.linalg.norm(b - a), 1e-300)
        out = np.array([along[1], -along[0]])
        if np.dot(out, mid - centre) < 0:
            out = -out
        # three values on a long edge, the two ends on a short one (a thin side of a channel)
        bins = 2 if np.linalg.norm(b - a) >= 0.4 * size else 1
        for value in MaxNLocator(nbins=bins).tick_values(lo[axis], hi[axis]):
            if lo[axis] - 1e-9 * (hi[axis] - lo[axis]) <= value <= hi[axis] + 1e-9 * (hi[axis] - lo[axis]):
                f = (value - lo[axis]) / max(hi[axis] - lo[axis], 1e-300)
                x, y = a + f * (b - a) + 0.06 * size * out - 0.05 * size * (2 * f - 1) * along
                anchors.append((x, y))
                ax.text(x, y, f"{value:g}", fontsize="x-small", ha="center", va="center", color="0.3")
        angle = np.degrees(np.arctan2(along[1], along[0]))
        if angle > 90:
            angle -= 180
        elif angle < -90:
            angle += 180
        x, y = mid + 0.14 * size * out
        anchors.append((x, y))
        name = axis_names[axis] if len(axis_names) > axis else "xyz"[axis]
        ax.text(x, y, in_mesh_units(name), fontsize="small", ha="center", va="center",
                rotation=angle if axis != 2 else 90, rotation_mode="anchor")
    # the box and every label's anchor inside the panel, with room for the text around the anchors
    anchors = np.array(anchors)
    margin = 0.06 * size
    ax.set_xlim(anchors[:, 0].min() - margin, anchors[:, 0].max() + 1.6 * margin)  # a slanted y label reaches right
    ax.set_ylim(anchors[:, 1].min() - margin, anchors[:, 1].max() + margin)
    ax.set_aspect("equal")
    ax.set_axis_off()
    # no ticks at all: an axes that is off still builds them to place its title above them
    ax.set_xticks([])
    ax.set_yticks([])
