"""Cells the reader splits (convex point sets, polyhedra) beside hexahedra, wedges and pyramids in one file.

A split cell cuts its quad faces about face centres; the ordinary cell on the other side of such a
face must be cut the same way, or the two sides do not meet in the mesh (droplets lose the link
across the face, the faces count as boundary inside the cube).

Outside checks: the files are written by VTK itself (pyvista) [lib]; the droplet count against
scikit-image's ``label`` of the same field sampled on a fine grid [lib]; the phase volume against the
analytic volume of two tanh-profiled balls (Sommerfeld expansion, 4/3 pi (R^3 + pi^2 a^2 R)); the
unit cube's volume and surface (elementary geometry); with cell data, the same cells written as
ordinary VTK cells, read by meshio [lib], as a second way to the same phase volume.
"""

import warnings

import numpy as np
import pytest

pv = pytest.importorskip("pyvista")
measure_module = pytest.importorskip("skimage.measure")

from phasegauge import measure  # noqa: E402
from phasegauge.io import Series  # noqa: E402
from phasegauge.meshgen import grid_mesh  # noqa: E402
from phasegauge.model.cells import FACES  # noqa: E402

N = 10
WIDTH = 0.04
BALLS = (((0.5, 0.5, 0.5), 0.22), ((0.2, 0.2, 0.22), 0.12))  # the first across x = 0.5, where the kinds meet
VTK = {"hexahedron": 12, "wedge": 13, "pyramid": 14, "convex": 41}


def _field(X):
    c = [0.5 * (1 - np.tanh((np.linalg.norm(X - centre, axis=1) - r) / WIDTH)) for centre, r in BALLS]
    return np.maximum(*c)


def _ball_volume(R, a=WIDTH / 2):
    return 4 / 3 * np.pi * (R ** 3 + np.pi ** 2 * a ** 2 * R)  # Sommerfeld expansion of the tanh profile


def _wedges(h):
    return np.concatenate([h[:, [0, 2, 1, 4, 6, 5]], h[:, [0, 3, 2, 4, 7, 6]]])  # along the face 0-2-6-4


def _pyramids(points, h):
    """Each hexahedron as six pyramids about its centre (quad bases towards every neighbour)."""
    centre = len(points) + np.arange(len(h))
    faces = [(0, 1, 2, 3), (4, 7, 6, 5), (0, 4, 5, 1), (1, 5, 6, 2), (2, 6, 7, 3), (3, 7, 4, 0)]
    pyramids = np.concatenate([np.column_stack([h[:, list(f)], centre]) for f in faces])
    return np.vstack([points, points[h].mean(axis=1)]), pyramids


def _write(path, points, parts, *, cell_data=False):
    """``parts``: (kind, connectivity) with kind a VTK cell name, 'convex' (corners shuffled) or
    'poly-<kind>' (the cells as VTK polyhedra, faces of ``FACES``)."""
    flat, types = [], []
    rng = np.random.default_rng(3)
    for kind, conn in parts:
        for row in conn:
            if kind == "convex":
                flat.append([len(row), *rng.permutation(row)])
                types.append(VTK["convex"])
            elif kind.startswith("poly-"):
                stream = [len(FACES[kind[5:]])]
                for face in FACES[kind[5:]]:
                    stream += [len(face), *row[list(face)]]
                flat.append([len(stream), *stream])
                types.append(42)
            else:  # VTK lists a wedge's first triangle the other way round (meshio swaps it on reading)
                flat.append([len(row), *(row[[0, 2, 1, 3, 5, 4]] if kind == "wedge" else row)])
                types.append(VTK[kind])
    cells, types = np.concatenate(flat).astype(np.int64), np.array(types, np.uint8)
    grid = pv.UnstructuredGrid(cells, types, np.array(points, dtype=np.float64), deep=True)
    grid.point_data["c"] = _field(points)
    if cell_data:
        # corner means, the same whichever way the cells are written
        grid.cell_data["cc"] = np.concatenate([_field(points[conn].mean(axis=1)) for _, conn in parts])
    grid.save(str(path))
    return str(path)


def _halves(kinds):
    """The unit cube's N^3 hexahedra, the left half (x < 0.5) as ``kinds[0]``, the right as ``kinds[1]``."""
    mesh = grid_mesh((N, N, N))
    points, h = mesh.points, mesh.blocks[0].connectivity
    left = points[h].mean(axis=1)[:, 0] < 0.5
    parts, whole = [], 0
    for kind, rows in zip(kinds, (h[left], h[~left])):
        base = kind.replace("poly-", "").replace("convex-", "")
        if base == "wedge":
            rows = _wedges(rows)
        elif base == "pyramid":
            points, rows = _pyramids(points, rows)
        parts.append(("convex" if kind.startswith("convex-") else
                      kind if kind.startswith("poly-") else base, rows))
        whole += len(rows)
    return points, parts, whole


def _grid_count():
    """Droplets of the field sampled on a 101^3 grid, scikit-image's label (face connectivity) [lib]."""
    axis = np.linspace(0, 1, 101)
    X = np.stack(np.meshgrid(axis, axis, axis, indexing="ij"), axis=-1).reshape(-1, 3)
    inside = (_field(X) > 0.5).reshape(101, 101, 101)
    return int(measure_module.label(inside, connectivity=1).max())


MIXES = [
    ("hexahedron", "convex-wedge"),  # hexahedra beside wedges written as convex point sets (split)
    ("wedge", "convex-wedge"),  # the same cells as ordinary wedges and as convex point sets
    ("pyramid", "convex-wedge"),
    ("convex-hexahedron", "convex-wedge"),  # convex point sets recognised as hexahedra beside split ones
    ("hexahedron", "poly-hexahedron"),  # hexahedra beside the same cells as polyhedra
    ("hexahedron", "poly-wedge"),
    ("wedge", "poly-hexahedron"),  # a wedge beside a polyhedron
    ("poly-hexahedron", "convex-wedge"),  # polyhedra beside convex point sets: one face centre for both
    ("convex-hexahedron", "poly-hexahedron"),  # recognised hexahedra beside polyhedra
]


@pytest.fixture(scope="module")
def grid_count():
    count = _grid_count()
    assert count == 2
    return count


@pytest.mark.parametrize("kinds", MIXES, ids="+".join)
def test_split_cells_beside_whole_cells_are_measured_as_one_mesh(tmp_path, kinds, grid_count):
    # regression: a hexahedron or wedge kept whole beside a convex point set cut about its face
    # centres did not share the face with it: the ball across x = 0.5 counted as two droplets;
    # beside polyhedra, the convex cells' face centres were other points than the polyhedra's:
    # measure refused the mesh as overlapping (and counted every piece as a cell)
    points, parts, whole = _halves(kinds)
    path = _write(tmp_path / "mixed.vtu", points, parts)
    mesh = Series(path).read(0).mesh
    np.testing.assert_allclose(mesh.total_measure, 1.0, rtol=1e-12)  # the unit cube
    assert mesh.n_whole_cells == whole
    corners = mesh.boundary_faces[0]
    middle = np.array([mesh.points[row[row >= 0]].mean(axis=0) for row in corners])
    on_surface = np.any(np.isclose(middle, 0.0, atol=1e-12) | np.isclose(middle, 1.0, atol=1e-12), axis=1)
    assert on_surface.all(), f"{np.count_nonzero(~on_surface)} faces inside the cube are unmatched"
    row = measure(path, field="c").steps.iloc[0]  # no overlap refusal
    assert row["droplet_count"] == grid_count  # scikit-image's label of the same field [lib]
    exact = sum(_ball_volume(r) for _, r in BALLS)
    assert row["phase_volume"] == pytest.approx(exact, rel=0.03)  # point data on a 10^3 grid


@pytest.mark.parametrize("kinds", MIXES[:1] + MIXES[4:5], ids="+".join)
def test_cell_data_phase_volume_equals_that_of_the_whole_cells(tmp_path, kinds):
    points, parts, _ = _halves(kinds)
    split = _write(tmp_path / "split.vtu", points, parts, cell_data=True)
    ordinary = [(kind.replace("poly-", "").replace("convex", "wedge"), rows) for kind, rows in parts]
    plain = _write(tmp_path / "plain.vtu", points, ordinary, cell_data=True)
    assert Series(plain).read(0).mesh.cell_parents is None  # read as they are, nothing split
    rows = [measure(path, field="cc").steps.iloc[0] for path in (split, plain)]
    # every piece carries its cell's value and the pieces fill the cell: the same sums
    assert rows[0]["phase_volume"] == pytest.approx(rows[1]["phase_volume"], rel=1e-12)
    assert rows[0]["droplet_count"] == rows[1]["droplet_count"] == 2


def test_mesh_without_split_cells_is_kept_as_it_is(tmp_path):
    # convex point sets all recognised as hexahedra: nothing split, the hexahedra beside them stay whole
    points, parts, whole = _halves(("hexahedron", "convex-hexahedron"))
    mesh = Series(_write(tmp_path / "whole.vtu", points, parts)).read(0).mesh
    assert mesh.cell_type_counts == {"hexahedron": whole}
    assert mesh.cell_parents is None


def test_hexahedra_no_quad_face_joins_to_split_cells_stay_whole(tmp_path):
    points, parts, whole = _halves(("hexahedron", "convex-wedge"))
    far = grid_mesh((2, 2, 2), bounds=[(2, 3), (0, 1), (0, 1)])  # a block apart from the cube
    hexahedra = far.blocks[0].connectivity + len(points)
    path = _write(tmp_path / "apart.vtu", np.vstack([points, far.points]), parts + [("hexahedron", hexahedra)])
    mesh = Series(path).read(0).mesh
    assert mesh.cell_type_counts["hexahedron"] == 8  # the block apart is kept as it is
    assert mesh.n_whole_cells == whole + 8
    np.testing.assert_allclose(mesh.total_measure, 2.0, rtol=1e-12)  # the cube and the block apart


def test_cells_of_three_kinds_written_with_their_own_copies_of_their_corners(tmp_path):
    # hexahedra (12), convex point sets (41) and polyhedra (42) in turn, each cell with its own copies of
    # its corners in its own order: read as the same cells written with shared corners (found by review:
    # the faces met by point number, so the hexahedra beside the polyhedra's centred quads stayed whole,
    # 756 boundary faces instead of 384 on 4^3 cells). Boundary faces of the unit cube's split, 4 x 6 n^2
    # triangles, every quad coned from its centre (elementary counting); the point field x + 2 y - z, linear,
    # exact at every point and
    # face centre (a mean of corners of a linear field; elementary); the cell's number on each cell's
    # copies: at a face centre the mean of its cells' numbers (each copy of the face its own centre, the
    # mean of its own corners, merged with the other; found by review: the first copy's alone)
    from scipy.spatial import cKDTree

    n = 4
    mesh = grid_mesh((n, n, n), kind="hexahedron", jitter=0.3, seed=11)
    X, conn = mesh.points, mesh.blocks[0].connectivity
    files = {}
    for own in (False, True):
        stream, types, copies = [], [], []
        for c, row in enumerate(conn):
            row = [int(r) for r in row]
            local = {}
            if own:
                for t in np.random.default_rng(c).permutation(8):
                    local[row[t]] = len(copies)
                    copies.append(X[row[t]])
            at = local.get if own else int
            kind = c % 3
            if kind < 2:
                stream += [8, *[at(p) for p in (row if kind == 0 else row[::-1])]]
                types.append(VTK["hexahedron"] if kind == 0 else VTK["convex"])
            else:
                faces = [[at(row[i]) for i in f] for f in FACES["hexahedron"]]
                whole = [len(faces)] + [x for f in faces for x in [len(f), *f]]
                stream += [len(whole), *whole]
                types.append(42)
        P = np.array(copies if own else X, dtype=float)
        grid = pv.UnstructuredGrid(np.array(stream), np.array(types, np.uint8), P)
        grid.point_data["f"] = P[:, 0] + 2 * P[:, 1] - P[:, 2]
        if own:
            grid.point_data["cell"] = np.repeat(np.arange(len(conn), dtype=float), 8)
        files[own] = str(tmp_path / f"own_{own}.vtu")
        grid.save(files[own])
    reference = Series(files[False]).read(0).mesh
    with pytest.warns(Warning, match="duplicate points merged"):
        step = Series(files[True]).read(0)
    read = step.mesh
    assert len(reference.boundary_faces[1]) == len(read.boundary_faces[1]) == 4 * 6 * n * n
    assert read.n_points == reference.n_points and read.total_measure == pytest.approx(1.0, rel=1e-12)
    assert not cKDTree(read.points).query_pairs(1e-12)  # no two points at one place [lib]
    x = read.points
    np.testing.assert_allclose(step.fields.point_data["f"], x[:, 0] + 2 * x[:, 1] - x[:, 2], atol=1e-12)
    faces = {}  # each quad's centre (its corners' mean, to rounding) -> the cells that have it
    for c, row in enumerate(conn):
        for f in FACES["hexahedron"]:
            faces.setdefault(tuple(sorted(int(row[i]) for i in f)), []).append(c)
    centres = np.array([X[list(key)].mean(axis=0) for key in faces])
    distance, at = cKDTree(x).query(centres)
    assert distance.max() < 1e-12
    expected = np.array([np.mean(cells) for cells in faces.values()])
    np.testing.assert_allclose(step.fields.point_data["cell"][at], expected, rtol=0, atol=1e-12)


def test_convex_cells_split_about_their_centre_with_their_own_copies_of_their_corners(tmp_path):
    # a roofed cube (9 corners) and two prisms (6) as convex point sets, split about their centres, and
    # two hexahedra beside the cube: written with shared corners and with each cell's own copies, read
    # alike (the same points, boundary faces and volume), and at a face between two cells the cell
    # numbers' mean (each copy of a hull face its own centre; found by review: untested, the first copy's
    # value before). Volumes: the unit cube, a roof of height 0.6 (pyramid: base x height / 3), two
    # half-unit prisms, two unit cubes (elementary geometry)
    cube = [(0, 0, 0), (1, 0, 0), (1, 1, 0), (0, 1, 0), (0, 0, 1), (1, 0, 1), (1, 1, 1), (0, 1, 1), (0.5, 0.5, 1.6)]
    prism = [(1, 0, 0), (1, 1, 0), (1, 0, 1), (1, 1, 1), (2, 0.5, 0), (2, 0.5, 1)]
    hex_a = [(-1, 0, 0), (0, 0, 0), (0, 1, 0), (-1, 1, 0), (-1, 0, 1), (0, 0, 1), (0, 1, 1), (-1, 1, 1)]
    hex_b = [(0, -1, 0), (1, -1, 0), (1, 0, 0), (0, 0, 0), (0, -1, 1), (1, -1, 1), (1, 0, 1), (0, 0, 1)]
    cells = [(cube, 41), (prism, 41), (hex_a, 12), (hex_b, 12), ([(x, y + 1, z) for x, y, z in prism], 41)]
    read = {}
    for own in (False, True):
        points, stream, types, number, at = [], [], [], [], {}
        for c, (corners, kind) in enumerate(cells):
            ids = []
            for p in corners:
                if own or p not in at:
                    at[p] = len(points)
                    points.append(p)
                    number.append(c)
                ids.append(at[p])
            stream += [len(ids), *ids]
            types.append(kind)
        grid = pv.UnstructuredGrid(np.array(stream), np.array(types, np.uint8), np.array(points, float))
        grid.point_data["cell"] = np.array(number, float)
        path = str(tmp_path / f"own_{own}.vtu")
        grid.save(path)
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            read[own] = Series(path).read(0)
    shared, apart = read[False].mesh, read[True].mesh
    assert apart.n_points == shared.n_points
    assert len(apart.boundary_faces[1]) == len(shared.boundary_faces[1])
    assert apart.total_measure == pytest.approx(1 + 0.6 / 3 + 2 * 0.5 + 2, rel=1e-12)
    assert shared.total_measure == pytest.approx(apart.total_measure, rel=1e-12)
    from scipy.spatial import cKDTree

    # the cube's faces with the first prism and the two hexahedra, and its own outer face at y = 1
    faces = {(1, 0.5, 0.5): (0 + 1) / 2, (0, 0.5, 0.5): (0 + 2) / 2, (0.5, 0, 0.5): (0 + 3) / 2, (0.5, 1, 0.5): 0.0}
    distance, where = cKDTree(apart.points).query(np.array(list(faces)))
    assert distance.max() < 1e-12
    np.testing.assert_allclose(read[True].fields.point_data["cell"][where], list(faces.values()), atol=1e-12)
