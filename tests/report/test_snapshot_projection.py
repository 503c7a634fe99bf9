"""3D interface snapshots drawn as a fixed orthographic view on a plain axes (no matplotlib 3D axes)."""

import io

import numpy as np
import pytest

from phasegauge.report._plots_interface import plot_interface_snapshots
from phasegauge.report._plots_surface import project, view_basis


def _sphere(radius=0.25, centre=(0.5, 0.5, 0.5), n=48):
    # reference surface: scikit-image's marching cubes of a sphere's distance field
    from skimage.measure import marching_cubes

    axis = np.linspace(0.0, 1.0, n)
    x, y, z = np.meshgrid(axis, axis, axis, indexing="ij")
    field = np.sqrt((x - centre[0]) ** 2 + (y - centre[1]) ** 2 + (z - centre[2]) ** 2)
    verts, faces, _, _ = marching_cubes(field, radius, spacing=(axis[1],) * 3)
    return verts, faces


def test_view_is_matplotlibs_default_orthographic_view():
    # reference: matplotlib's own 3D projection (mplot3d, orthographic, equal box aspect, default
    # elevation 30 and azimuth -60): ours must be the same picture up to one scale and a shift
    from matplotlib.figure import Figure
    from mpl_toolkits.mplot3d import proj3d

    ax = Figure().add_subplot(projection="3d")
    ax.set_proj_type("ortho")
    ax.set_box_aspect((1, 1, 1))
    ax.set_xlim(0, 1), ax.set_ylim(0, 1), ax.set_zlim(0, 1)
    points = np.random.default_rng(1).random((50, 3))
    x, y, depth = proj3d.proj_transform(points[:, 0], points[:, 1], points[:, 2], ax.get_proj())
    ours = project(points, bounds=((0, 0, 0), (1, 1, 1)))
    design = np.c_[ours[:, :2], np.ones(len(points))]
    coef, *_ = np.linalg.lstsq(design, np.c_[x, y], rcond=None)
    assert np.abs(design @ coef - np.c_[x, y]).max() < 1e-12
    scale = coef[0, 0]
    assert scale > 0 and np.allclose(coef[:2, :2], scale * np.eye(2), atol=1e-12)  # no rotation, no shear
    # matplotlib's depth grows away from the viewer, ours towards: the orders are opposite
    assert np.corrcoef(ours[:, 2], depth)[0, 1] == pytest.approx(-1.0, abs=1e-12)


def test_view_basis_is_orthonormal_and_right_handed():
    basis = view_basis(20.0, 35.0)
    assert np.allclose(basis @ basis.T, np.eye(3), atol=1e-12)
    assert np.linalg.det(basis) == pytest.approx(1.0, abs=1e-12)


def test_snapshot_of_a_sphere_shows_its_disc():
    # analytic: the orthographic picture of a sphere of radius r is a disc of radius r (in the view's
    # scale); the marching-cubes sphere lies within a grid cell of it, so the area is checked to 8 %
    from PIL import Image

    points, tris = _sphere()
    figure = plot_interface_snapshots({0: (points, tris)}, bounds=((0, 0, 0), (1, 1, 1)))
    figure.set_dpi(110)
    buffer = io.BytesIO()
    figure.savefig(buffer, format="png", dpi=110)
    pixels = np.asarray(Image.open(io.BytesIO(buffer.getvalue())).convert("RGB")).astype(int)
    assert pixels.std() > 0  # not blank
    # the surface is shades of C0 (blue over red and green); the box, labels and background are grey
    surface = (pixels[..., 2] - pixels[..., 0] > 40)
    ax = figure.axes[0]
    centre = project(np.array([[0.5, 0.5, 0.5]]), bounds=((0, 0, 0), (1, 1, 1)))[0, :2]
    (cx, cy), (ex, _) = ax.transData.transform([centre, centre + [0.25, 0.0]])
    radius = ex - cx
    assert surface.sum() == pytest.approx(np.pi * radius ** 2, rel=0.08)
    rows, cols = np.nonzero(surface)
    height = pixels.shape[0]
    # the silhouette sits where the projection puts the sphere's centre (image rows run downwards)
    assert cols.mean() == pytest.approx(cx, abs=2) and (height - rows).mean() == pytest.approx(cy, abs=2)
    # a disc: every lit pixel within the radius (plus a pixel); with the area above, the disc is filled
    assert np.hypot(cols + 0.5 - cx, height - rows - 0.5 - cy).max() < radius + 2


def test_a_thin_slab_keeps_a_visible_depth():
    # a box 10 x 1 x 0.1: the short sides are drawn at a quarter of the longest, so the box does not collapse
    lo, hi = np.zeros(3), np.array([10.0, 1.0, 0.1])
    corners = np.array([[hi[j] if (k >> j) & 1 else lo[j] for j in range(3)] for k in range(8)])
    screen = project(corners, bounds=(lo, hi))
    assert np.ptp(screen[:, 1]) > 0.2
