"""Shared test set-up: no display, quiet plotting, small fixtures built in code."""

import os

import numpy as np
import pytest

os.environ.setdefault("MPLBACKEND", "Agg")
os.environ.setdefault("PYVISTA_OFF_SCREEN", "true")

import matplotlib  # noqa: E402

matplotlib.use("Agg")

try:  # pragma: no cover - pyvista is a dependency, but keep collection working without it
    import pyvista

    pyvista.OFF_SCREEN = True
except Exception:  # pragma: no cover
    pass


@pytest.fixture(autouse=True)
def _reports_draw_in_one_process(monkeypatch):
    """A report written in a test draws all its figures in the test's process whatever the machine's
    load, so a test that watches matplotlib (figures saved, calls made) sees every figure;
    ``tests/report/test_drawing_fork.py`` forces the drawing fork on and off itself."""
    from phasegauge.report import _drawing

    monkeypatch.setattr(_drawing, "fork_helps", lambda count: False)


def subprocess_env(*, malloc_defaults: bool = False):
    """Environment for running ``python -m phasegauge`` on the source under test; with
    ``malloc_defaults``, without the user's settings of the C library's allocator (``MALLOC_*``,
    ``GLIBC_TUNABLES``, ``LD_PRELOAD``)."""
    import phasegauge

    env = dict(os.environ)
    if malloc_defaults:
        env = {k: v for k, v in env.items()
               if not k.startswith("MALLOC_") and k not in ("GLIBC_TUNABLES", "LD_PRELOAD")}
    src = os.path.dirname(os.path.dirname(os.path.abspath(phasegauge.__file__)))
    env["PYTHONPATH"] = src + os.pathsep + env.get("PYTHONPATH", "")
    env["MPLBACKEND"] = "Agg"
    return env


def write_listing(folder, steps) -> str:
    """Write a series of VTU files and the ``run.steps`` listing that names them; return its path.

    ``steps`` yields ``(time, file name, mesh, cell data)`` or ``(..., cell data, point data)`` (either
    may be None); each step is written with ``phasegauge.meshgen.to_meshio``.
    """
    from phasegauge.meshgen import to_meshio

    lines = []
    for time, name, mesh, cell_data, *point_data in steps:
        to_meshio(mesh, cell_data=cell_data, point_data=point_data[0] if point_data else None).write(
            os.path.join(folder, name))
        lines.append(f"{time},{name}")
    listing = os.path.join(folder, "run.steps")
    with open(listing, "w") as handle:
        handle.write("\n".join(lines) + "\n")
    return listing


def check_sphere_widths(r, measured, coordinates, c, *, radius, h, cells_across, eps, rms, largest):
    """The width estimators' distances and widths of a logistic drop of ``radius`` about (0.5, 0.5, 0.5).

    Outside checks (Olsson & Kreiss 2005; REFERENCES.md [calc]): the distance to the interface is
    |r - R|; the band volume per area over 0.05 < c < 0.95 is w (1 + w^2 / (12 R^2)); dc/dn is a
    logistic density of variance pi^2 eps^2 / 3. ``r`` and ``measured`` are
    ``interface_metrics(mesh, c, return_distances=True)``; the distance errors, in cells ``h``,
    must stay under ``rms`` (root mean square) and ``largest``.
    """
    import numpy as np
    import pytest

    width = cells_across * h
    r_point = np.linalg.norm(coordinates - 0.5, axis=1)
    found = np.isfinite(measured.point)
    assert found.sum() > 0.5 * ((c > 0.01) & (c < 0.99)).sum()
    error = (measured.point[found] - (radius - r_point[found])) / h
    assert np.sqrt(np.mean(error ** 2)) < rms and np.abs(error).max() < largest
    curved = width ** 2 / (12 * radius ** 2)
    high = (0.08 if cells_across == 4 else 0.03) + curved
    assert r["interface_width"] / width - 1 == pytest.approx(curved, abs=0.07 if cells_across == 4 else 0.03)
    for key in ("interface_width", "width_threshold_free", "width_second_moment", "width_profile_median"):
        assert -0.02 < r[key] / width - 1 < high, key
    assert 0.96 < r["interface_variance"] / (np.pi ** 2 * eps ** 2 / 3) < (1 + high) ** 2


@pytest.fixture(scope="module")
def every_polyhedron_split():
    """Polyhedra split as polyhedra even where their faces make an ordinary cell.

    The reader takes a file whose polyhedra are all hexahedra, wedges, pyramids or tetrahedra
    written as faces as those cells (``io/_polyhedra._ordinary_cells``); the tests of the
    polyhedra's split build such files (hexahedra written as polyhedra) and ask for the split,
    as a file with one polyhedron of any other shape gets it.
    """
    from phasegauge.io import _polyhedra

    with pytest.MonkeyPatch.context() as patch:
        patch.setattr(_polyhedra, "_ordinary_cells", lambda points, made, **_: None)
        yield


def fixed_width_pattern(n: int, periods, width_cells: float):
    """Cell values of a periodic n x n pattern at each of ``periods`` (periods per unit side), its
    interface a tanh of a FIXED width in cells, as in a Cahn-Hilliard run (the width set by kappa
    while the domains grow); returns ``(mesh, [c per period])``.

    The domains are those of four cosines (``cos kx + cos ky + 0.7 cos k(x + y) + 0.3 sin k(x - y) > 0``,
    so the pattern at every period is the same one scaled); c = (1 + tanh(d / width)) / 2 of the
    periodic signed distance d to their boundary in cells (scipy's ``distance_transform_edt`` on the
    pattern tiled 3 x 3).
    """
    import numpy as np
    from scipy import ndimage

    from phasegauge.meshgen import grid_mesh

    mesh = grid_mesh((n, n))
    x, y = mesh.cell_centroids[:, 0], mesh.cell_centroids[:, 1]
    ix, iy = np.floor(x * n).astype(int), np.floor(y * n).astype(int)
    axis = (np.arange(n) + 0.5) / n
    X, Y = np.meshgrid(axis, axis, indexing="ij")
    fields = []
    for m in periods:
        k = 2 * np.pi * m
        inside = np.tile(np.cos(k * X) + np.cos(k * Y) + 0.7 * np.cos(k * (X + Y)) + 0.3 * np.sin(k * (X - Y)) > 0,
                         (3, 3))
        d = np.where(inside, ndimage.distance_transform_edt(inside), -ndimage.distance_transform_edt(~inside))
        d = (d - 0.5 * np.sign(d))[n:2 * n, n:2 * n]  # cell centres half a cell off the boundary: at +-0.5
        fields.append(0.5 * (1 + np.tanh(d / width_cells))[ix, iy])
    return mesh, fields


def hexahedron_faces_split_in_x(points, row):
    """The faces of hexahedron ``row`` (outward, :data:`phasegauge.model.cells.FACES`), its two x-normal faces as
    two triangles each (the diagonal from the face's lowest point number, the same from both sides): a cell a
    reader must split (``points``: the mesh's)."""
    import numpy as np

    from phasegauge.model.cells import FACES

    faces = []
    for f in FACES["hexahedron"]:
        face = [int(p) for p in row[list(f)]]
        if np.ptp(points[face, 0]) < 1e-12:  # an x-normal face
            i = face.index(min(face))
            a, b, c, d = face[i:] + face[:i]
            faces += [[a, b, c], [a, c, d]]
        else:
            faces.append(face)
    return faces


def hexahedra_as_polyhedra(mesh, chosen):
    """The hexahedra of ``mesh`` as a pyvista grid: the cells ``chosen`` (a mask) as VTK polyhedra whose faces are
    :func:`hexahedron_faces_split_in_x`, the others as VTK hexahedra."""
    import numpy as np
    import pyvista as pv

    stream, types = [], []
    for k, row in enumerate(mesh.blocks[0].connectivity):
        if not chosen[k]:
            stream += [8, *row]
            types.append(pv.CellType.HEXAHEDRON)
            continue
        faces = hexahedron_faces_split_in_x(mesh.points, row)
        cell = [len(faces)] + [x for f in faces for x in [len(f), *f]]
        stream += [len(cell), *cell]
        types.append(pv.CellType.POLYHEDRON)
    return pv.UnstructuredGrid(np.array(stream), np.array(types, np.uint8), mesh.points)


# An analytic rising bubble with Hysing et al. (2009) case-1 figures as the reference checks cite them (0.2417 at
# t = 0.92, circularity 0.9013 at t = 1.9, centroid 1.081 at t = 3): an ellipse of area pi R^2, R = 0.25, in the
# 1 x 2 box, rising at V(t) = 0.2417 (t / 0.92)^p exp(p (1 - t / 0.92)); p chosen (scipy brentq, quad) so that
# y_c(3) = 0.5 + int_0^3 V = 1.081; aspect k(t) = 1 + (k1 - 1) exp(-((t - 1.9) / 0.7)^2) with k1 chosen so that
# the ellipse's circularity 2 pi R / (4 a E(1 - b^2 / a^2)) (scipy ellipe) is 0.9013 at t = 1.9.
BUBBLE_RADIUS, BUBBLE_PEAK_VELOCITY, BUBBLE_PEAK_TIME = 0.25, 0.2417, 0.92


def _bubble_velocity(t, p):
    return BUBBLE_PEAK_VELOCITY * (t / BUBBLE_PEAK_TIME) ** p * np.exp(p * (1 - t / BUBBLE_PEAK_TIME)) if t > 0 else 0.0


def ellipse_circularity(k):
    """2 pi R / perimeter of the ellipse of area pi R^2 and aspect k (scipy's ellipe)."""
    from scipy.special import ellipe

    a, b = BUBBLE_RADIUS * np.sqrt(k), BUBBLE_RADIUS / np.sqrt(k)
    return 2 * np.pi * BUBBLE_RADIUS / (4 * a * ellipe(1 - b * b / (a * a)))


def _bubble_constants():
    from scipy.integrate import quad
    from scipy.optimize import brentq

    p = brentq(lambda p: 0.5 + quad(lambda s: _bubble_velocity(s, p), 0, 3)[0] - 1.081, 0.05, 5)
    k1 = brentq(lambda k: ellipse_circularity(k) - 0.9013, 1.0001, 5)
    return p, k1


BUBBLE_EXPONENT, BUBBLE_PEAK_ASPECT = _bubble_constants()


def bubble_velocity(t):
    """The analytic bubble's rise velocity at time t."""
    return _bubble_velocity(t, BUBBLE_EXPONENT)


def bubble_aspect(t):
    """The analytic bubble's aspect k(t) (its axes R sqrt(k) across, R / sqrt(k) along the rise)."""
    return 1 + (BUBBLE_PEAK_ASPECT - 1) * np.exp(-((t - 1.9) / 0.7) ** 2)


def bubble_centre(t):
    """The analytic bubble's centroid height at time t (scipy quad of the velocity)."""
    from scipy.integrate import quad

    return 0.5 + quad(bubble_velocity, 0, t)[0]


def analytic_bubble(times):
    """The analytic bubble's history at the given output times (one row per output)."""
    import pandas as pd

    times = np.asarray(times, dtype=float)
    return pd.DataFrame({"time": times, "circularity": [ellipse_circularity(bubble_aspect(t)) for t in times],
                         "centroid_y": [bubble_centre(t) for t in times],
                         "velocity_y": [bubble_velocity(t) for t in times]})
