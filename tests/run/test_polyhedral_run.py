"""A measure run on polyhedral cells against the same mesh written as hexahedra.

Outside checks: both files are written by VTK itself (pyvista), one with VTK hexahedra, one
with the same cells as VTK polyhedra [lib]; the droplets are two balls of known radius (their
volumes 4/3 pi r^3 within the stated tolerance, elementary geometry).
"""

import numpy as np
import pytest

pv = pytest.importorskip("pyvista")

from phasegauge.meshgen import grid_mesh, to_polyhedral_grid  # noqa: E402
from phasegauge.run.measure import measure  # noqa: E402

# hexahedra written as polyhedra, split as polyhedra of other shapes are (conftest)
pytestmark = pytest.mark.usefixtures("every_polyhedron_split")

RADII = (0.2, 0.15)
WIDTH = 0.05


def _ball_volume(R, a=WIDTH / 2):
    return 4 / 3 * np.pi * (R ** 3 + np.pi ** 2 * a ** 2 * R)  # Sommerfeld expansion
CENTRES = ((0.3, 0.3, 0.5), (0.72, 0.7, 0.5))


def _drops(X):
    c = [0.5 * (1 - np.tanh((np.linalg.norm(X - centre, axis=1) - r) / WIDTH)) for centre, r in zip(CENTRES, RADII)]
    return np.maximum(*c)


@pytest.fixture(scope="module")
def files(tmp_path_factory):
    folder = tmp_path_factory.mktemp("poly")
    m = grid_mesh((14, 14, 14), kind="hexahedron", jitter=0.2, seed=1)
    c, cc = _drops(m.points), _drops(m.cell_centroids)
    poly = to_polyhedral_grid(m, point_data={"c": c}, cell_data={"cc": cc})
    poly.save(str(folder / "poly.vtu"))
    hexa = pv.UnstructuredGrid({pv.CellType.HEXAHEDRON: m.blocks[0].connectivity}, m.points)
    hexa.point_data["c"] = c
    hexa.cell_data["cc"] = cc
    hexa.save(str(folder / "hex.vtu"))
    return folder


@pytest.mark.parametrize("field", ["c", "cc"])
def test_polyhedra_measure_like_the_hexahedra(files, field):
    poly = measure(str(files / "poly.vtu"), field).steps.iloc[0]
    hexa = measure(str(files / "hex.vtu"), field).steps.iloc[0]
    assert poly["droplet_count"] == hexa["droplet_count"] == 2
    if field == "cc":  # cell data: every tetrahedron carries its polyhedron's value; the split's cell
        # volumes against the hexahedra's trilinear ones (bent faces cut along a diagonal move volume
        # between the cells on their sides: O(jitter^2) a cell; 9.7e-4 measured, 24 tetrahedra: 1e-12)
        assert poly["phase_volume"] == pytest.approx(hexa["phase_volume"], rel=2e-3)
    else:  # point data: the corner mean of each tetrahedron against that of each hexahedron
        assert poly["phase_volume"] == pytest.approx(hexa["phase_volume"], rel=1e-3)
        # one piecewise-linear interpolant: the polyhedra's quad faces and the hexahedra's bent faces
        # are cut along the same shorter diagonals (the same tetrahedra, the same contour; measured:
        # the area -3.5 % of the spheres' 4 pi sum(r^2) at this coarse resolution, widths 2e-6 apart;
        # about face centres the polyhedra's area was 1 % below the hexahedra's, the widths 1.6 %)
        area = 4 * np.pi * sum(r * r for r in RADII)
        assert poly["interface_size"] == pytest.approx(hexa["interface_size"], rel=1e-12)
        for row in (poly, hexa):
            assert row["interface_size"] == pytest.approx(area, rel=0.06)
        assert poly["interface_width"] == pytest.approx(hexa["interface_width"], rel=1e-4)
        # widths in cells count whole polyhedra, not their tetrahedra (their sizes from the split's
        # volumes, the hexahedra's trilinear: 1.4e-3 apart measured)
        assert poly["interface_width_cells"] == pytest.approx(hexa["interface_width_cells"], rel=5e-3)
    exact = sum(_ball_volume(r) for r in RADII)
    assert poly["phase_volume"] == pytest.approx(exact, rel=0.01)


def test_droplet_table_on_polyhedra(files):
    poly = measure(str(files / "poly.vtu"), "c").droplets.sort_values("volume")
    hexa = measure(str(files / "hex.vtu"), "c").droplets.sort_values("volume")
    np.testing.assert_allclose(poly["volume"], hexa["volume"], rtol=2e-3)
    np.testing.assert_allclose(poly["volume"], [_ball_volume(r) for r in sorted(RADII)], rtol=0.01)
    assert list(poly["under_resolved"]) == list(hexa["under_resolved"])
