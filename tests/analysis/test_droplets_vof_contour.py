"""Droplet perimeters and surfaces on volume-of-fluid cell data: every contour element counts.

The c = 0.5 contour of the point values rebuilt from cell fractions crosses empty cells beside full
ones; those elements belong to the droplet beside them. Outside checks: the ellipse perimeter
4 a E(1 - b^2/a^2) (scipy.special.ellipe) and circularity 2 pi sqrt(A / pi) / P (Hysing et al. 2009),
the circle 2 pi R, sphericity 1 of a sphere (Wadell 1935), and the element-by-element owner known
from the analytic shapes (each element lies nearer the centre of the drop it bounds).
"""

import numpy as np
import pytest
from scipy.special import ellipe

from phasegauge.analysis.droplets import label_droplets
from phasegauge.analysis.interface import find_interface
from phasegauge.errors import OptionError
from phasegauge.meshgen import grid_mesh
from phasegauge.model.mesh import Mesh

N = 64  # cells across the unit square: a radius of 16 cells is 0.25
MESHES = [("quad", 0.0), ("triangle", 0.0), ("quad", 0.25)]


def _lattice(n):
    """Centroids of the n * n equal sub-triangles of a triangle, as barycentric (l1, l2)."""
    out = []
    for i in range(n):
        for j in range(n - i):
            out.append(((i + 1 / 3) / n, (j + 1 / 3) / n))
            if i + j < n - 1:
                out.append(((i + 2 / 3) / n, (j + 2 / 3) / n))
    return np.array(out)


def vof_fractions(mesh, inside, n=16):
    """Exact volume-of-fluid cell fractions by sub-sampling: each cell cut into triangles from its
    first corner, each triangle sampled at the centroids of n * n equal sub-triangles."""
    X, lattice = mesh.coordinates, _lattice(n)
    out = np.zeros(mesh.n_cells)
    for block, start in zip(mesh.blocks, mesh.block_offsets[:-1]):
        conn = block.connectivity
        area, inner = np.zeros(len(conn)), np.zeros(len(conn))
        for t in range(1, conn.shape[1] - 1):
            a, b, c = X[conn[:, 0]], X[conn[:, t]], X[conn[:, t + 1]]
            part = 0.5 * np.abs((b[:, 0] - a[:, 0]) * (c[:, 1] - a[:, 1]) - (b[:, 1] - a[:, 1]) * (c[:, 0] - a[:, 0]))
            P = a[:, None] + lattice[None, :, :1] * (b - a)[:, None] + lattice[None, :, 1:] * (c - a)[:, None]
            area += part
            inner += part * inside(P[..., 0], P[..., 1]).mean(axis=1)
        out[int(start):int(start) + len(conn)] = inner / area
    return out


def ellipse(a, b, centre=(0.503, 0.4981)):
    return lambda x, y: ((x - centre[0]) / a) ** 2 + ((y - centre[1]) / b) ** 2 < 1.0


def measured(mesh, c, centres=True):
    """The droplet table and the contour of the point values rebuilt from the cells (as a measure run)."""
    contour = find_interface(mesh, mesh.cell_to_point(c), level=0.5)
    more = {"interface_centres": contour.centroids, "interface_normals": contour.normals} if centres else {}
    found = label_droplets(mesh, c, interface_cells=contour.cells, interface_sizes=contour.element_sizes, **more)
    return found.table, contour


def perimeter(table):
    """P = pi d / circularity per droplet."""
    return np.pi * table["equivalent_diameter"].to_numpy() / table["circularity"].to_numpy()


@pytest.mark.parametrize("a, b", [(0.25, 0.25), (0.25 * 1.3, 0.25 / 1.3)])
def test_vof_circularity_on_quads_matches_the_ellipse(a, b):
    """Circle and ellipse of area pi 0.25^2, 16 cells in radius: the contour in empty cells counted."""
    mesh = grid_mesh((N, N))
    table, contour = measured(mesh, vof_fractions(mesh, ellipse(a, b)))
    assert len(table) == 1
    # Hysing et al. 2009: C = 2 pi sqrt(A / pi) / P, P = 4 a E(1 - b^2 / a^2) [scipy.special.ellipe]
    exact = 2 * np.pi * np.sqrt(a * b) / (4 * a * ellipe(1 - (b / a) ** 2))
    assert abs(table["circularity"].iloc[0] - exact) < 2e-3  # our threshold; it read up to +0.0023 here
    assert perimeter(table)[0] == pytest.approx(contour.size, rel=1e-12)


@pytest.mark.parametrize("kind, jitter", MESHES)
@pytest.mark.parametrize("centres", [True, False])
def test_vof_drop_perimeter_is_the_whole_contour(kind, jitter, centres):
    """One drop: its perimeter is the step's interface size, every element counted (with the
    elements' centres or, without them, by their cells alone)."""
    mesh = grid_mesh((N, N), kind=kind, jitter=jitter, seed=4)
    a, b = 0.25 * 1.3, 0.25 / 1.3
    c = vof_fractions(mesh, ellipse(a, b))
    table, contour = measured(mesh, c, centres)
    lost = contour.element_sizes[c[contour.cells] <= 1e-3].sum()
    assert lost > 1e-4 * contour.size  # the case: elements in empty cells (0.1 to 0.4 % of the length)
    assert perimeter(table)[0] == pytest.approx(contour.size, rel=1e-12)
    # the contour of the rebuilt point values on triangles and jittered quads is itself longer than
    # the ellipse [scipy.special.ellipe] by up to 0.9 % (measured at 16 cells in radius; not
    # converging with resolution): our threshold 1.2e-2 on the circularity there, 2e-3 on quads
    exact = 2 * np.pi * np.sqrt(a * b) / (4 * a * ellipe(1 - (b / a) ** 2))
    assert abs(table["circularity"].iloc[0] - exact) < (2e-3 if (kind, jitter) == ("quad", 0.0) else 1.2e-2)


@pytest.mark.parametrize("kind, jitter", MESHES)
@pytest.mark.parametrize("gap", [1, 2])
def test_vof_drops_a_cell_or_two_apart_keep_their_own_elements(kind, jitter, gap):
    """Two circles of 12 cells in radius, ``gap`` cells apart: each keeps the elements that lie
    nearer its own circle (the analytic owner), none is dropped or swapped. Elements within a tenth
    of a cell of both circles' distance bridge the gap (jittered quads a cell apart: two of 466) and
    may go to either."""
    mesh = grid_mesh((N, N), kind=kind, jitter=jitter, seed=7)
    h, r = 1.0 / N, 12.0 / N
    left = (0.5 - gap * h / 2 - r, 0.5)
    right = (0.5 + gap * h / 2 + r, 0.5)
    c = np.maximum(vof_fractions(mesh, ellipse(r, r, left)), vof_fractions(mesh, ellipse(r, r, right)))
    table, contour = measured(mesh, c)
    assert len(table) == 2
    mid, sizes = contour.centroids[:, :2], contour.element_sizes
    to_left, to_right = np.hypot(*(mid - left).T) - r, np.hypot(*(mid - right).T) - r
    either = np.abs(np.abs(to_left) - np.abs(to_right)) < 0.1 * h
    own = np.array([sizes[~either & (np.abs(to_left) < np.abs(to_right))].sum(),
                    sizes[~either & (np.abs(to_left) > np.abs(to_right))].sum()])
    assert sizes[either].sum() < (0.03 * own.min() if (kind, jitter) == ("quad", 0.25) and gap == 1 else 1e-12)
    found = perimeter(table)[np.argsort(table["centroid_x"].to_numpy())]
    assert found.sum() == pytest.approx(contour.size, rel=1e-12)  # nothing dropped
    assert np.all(found >= own * (1 - 1e-12)) and np.all(found <= (own + sizes[either].sum()) * (1 + 1e-12))
    np.testing.assert_allclose(found, 2 * np.pi * r, rtol=1.5e-2)  # circle 2 pi R; our threshold as above


def test_vof_perimeters_do_not_depend_on_cell_numbering():
    """The same two drops a cell apart on the quads numbered at random: the same perimeters."""
    mesh = grid_mesh((N, N), kind="triangle", jitter=0.25, seed=2)
    h, r = 1.0 / N, 12.0 / N
    shapes = [ellipse(r, r, (0.5 - h / 2 - r, 0.5)), ellipse(r, r, (0.5 + h / 2 + r, 0.5))]
    c = np.maximum(*(vof_fractions(mesh, s) for s in shapes))
    order = np.random.default_rng(1).permutation(mesh.n_cells)
    shuffled = Mesh(mesh.points, [("triangle", mesh.blocks[0].connectivity[order])])
    one, _ = measured(mesh, c)
    two, _ = measured(shuffled, c[order])
    first, second = (t.sort_values("centroid_x") for t in (one, two))
    np.testing.assert_allclose(perimeter(first), perimeter(second), rtol=1e-12)
    np.testing.assert_allclose(first["volume"], second["volume"], rtol=1e-12)


def test_vof_sphere_surface_is_the_whole_contour():
    """Sphere of 12 cells in radius as volume-of-fluid fractions (8^3 sub-samples a cell): the surface
    is the whole contour's area (0.02 % of it lay in empty cells), and sphericity 1 (Wadell 1935)
    read from above: the contour's vertices lie on the level set, so its area is a little short
    (0.74 % here; scikit-image notes the same of marching cubes)."""
    n, R, sub = 36, 12.0 / 36, 8
    mesh = grid_mesh((n, n, n))
    s = (np.arange(sub) + 0.5) / sub / n
    lo = mesh.cell_centroids - 0.5 / n
    inside = np.zeros(mesh.n_cells)
    for dx in s:
        for dy in s:
            z = lo[:, 2:3] + s[None, :]
            inside += (((lo[:, 0:1] + dx - 0.5) ** 2 + (lo[:, 1:2] + dy - 0.5) ** 2 + (z - 0.5) ** 2) < R * R).sum(1)
    c = inside / sub ** 3
    table, contour = measured(mesh, c)
    row = table.iloc[0]
    surface = np.pi ** (1 / 3) * (6 * row["volume"]) ** (2 / 3) / row["sphericity"]
    assert surface == pytest.approx(contour.size, rel=1e-12)
    assert 1.0 <= row["sphericity"] <= 1.01  # our threshold: it reads 1.0075 at 12 cells in radius


def test_interface_centres_are_checked():
    mesh = grid_mesh((8, 8))
    c = np.zeros(mesh.n_cells)
    c[27] = 1.0
    with pytest.raises(OptionError, match="interface_centres must have shape"):
        label_droplets(mesh, c, interface_cells=np.array([27]), interface_sizes=np.array([0.1]),
                       interface_centres=np.zeros((2, 2)))
    with pytest.raises(OptionError, match="interface_centres needs interface_cells"):
        label_droplets(mesh, c, interface_centres=np.zeros((1, 2)))
    with pytest.raises(OptionError, match="interface_normals needs interface_cells, interface_sizes and interface_c"):
        label_droplets(mesh, c, interface_cells=np.array([27]), interface_sizes=np.array([0.1]),
                       interface_normals=np.zeros((1, 2)))


def test_measure_run_counts_the_whole_contour(tmp_path):
    """Through a measure run (the step passes the contour's centres and normals): the ellipse's
    circularity within 2e-3 of 2 pi sqrt(ab) / (4 a E(1 - b^2/a^2)) [scipy.special.ellipe], its
    perimeter the step's interface_size."""
    from conftest import write_listing
    from phasegauge import measure

    mesh = grid_mesh((N, N))
    a, b = 0.25 * 1.3, 0.25 / 1.3
    listing = write_listing(str(tmp_path), [(0.0, "drop_0.vtu", mesh, {"alpha": vof_fractions(mesh, ellipse(a, b))})])
    res = measure(listing, field="alpha", out=str(tmp_path / "out"))
    assert len(res.droplets) == 1
    exact = 2 * np.pi * np.sqrt(a * b) / (4 * a * ellipe(1 - (b / a) ** 2))
    assert abs(res.droplets["circularity"].iloc[0] - exact) < 2e-3  # our threshold; +0.0023 before
    assert perimeter(res.droplets)[0] == pytest.approx(res.steps["interface_size"].iloc[0], rel=1e-12)
