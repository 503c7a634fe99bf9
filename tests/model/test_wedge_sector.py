"""Axisymmetric wedge sectors recognised (a mesh one cell thick in angle about an axis) and warned of.

Reference: the sectors are built here from their angle and axis (analytic), as finite-volume solvers
mesh axisymmetric cases: hexahedra across the sector, wedges where the cells meet the axis.
"""

import json

import meshio
import numpy as np
import pytest
from click.testing import CliRunner

import phasegauge
from phasegauge.cli import main
from phasegauge.meshgen import grid_mesh
from phasegauge.model._wedge_sector import wedge_sector
from phasegauge.model.mesh import Mesh


def _sector(angle, *, axis=0, through=(0.0, 0.0), layers=1, n_axial=12, n_radial=8, dtype=float):
    """Points and cells of a sector of ``angle`` degrees about a line along ``axis`` through ``through``
    (the other two coordinates), ``layers`` cells across the angle."""
    half = np.radians(angle) / 2
    phis = np.linspace(-half, half, layers + 1)
    xs, rs = np.linspace(0, 1, n_axial + 1), np.linspace(0, 0.5, n_radial + 1)
    ids, points = {}, []
    for i, x in enumerate(xs):
        for j, r in enumerate(rs):
            for k, phi in enumerate(phis):
                if j == 0 and k > 0:
                    ids[i, j, k] = ids[i, j, 0]  # one point on the axis
                    continue
                ids[i, j, k] = len(points)
                points.append((x, r * np.cos(phi), r * np.sin(phi)))
    hexes, wedges = [], []
    for i in range(n_axial):
        for j in range(n_radial):
            for k in range(layers):
                if j == 0:
                    wedges.append([ids[i, 0, 0], ids[i, 1, k + 1], ids[i, 1, k],
                                   ids[i + 1, 0, 0], ids[i + 1, 1, k + 1], ids[i + 1, 1, k]])
                else:
                    hexes.append([ids[i, j, k], ids[i + 1, j, k], ids[i + 1, j + 1, k], ids[i, j + 1, k],
                                  ids[i, j, k + 1], ids[i + 1, j, k + 1], ids[i + 1, j + 1, k + 1],
                                  ids[i, j + 1, k + 1]])
    local = np.array(points)  # (axial, radial 1, radial 2)
    others = [a for a in range(3) if a != axis]
    out = np.empty_like(local)
    out[:, axis] = local[:, 0]
    out[:, others[0]] = local[:, 1] + through[0]
    out[:, others[1]] = local[:, 2] + through[1]
    return out.astype(dtype), [("wedge", np.array(wedges)), ("hexahedron", np.array(hexes))]


@pytest.mark.parametrize("angle, axis, through", [(5.0, 0, (0.0, 0.0)), (1.0, 0, (0.0, 0.0)),
                                                  (10.0, 2, (0.3, -0.2)), (2.5, 1, (-1.0, 4.0))])
def test_a_sector_is_recognised_with_its_angle_and_axis(angle, axis, through):
    points, cells = _sector(angle, axis=axis, through=through)
    mesh = Mesh(points, cells)
    assert mesh.inverted_cells == 0
    sector = wedge_sector(mesh)
    assert sector is not None and sector.axis == axis
    assert sector.angle == pytest.approx(angle, rel=1e-9)
    np.testing.assert_allclose(sector.through, through, atol=1e-12)


def test_a_sector_written_in_single_precision_is_recognised():
    points, cells = _sector(5.0, through=(0.25, 0.0), dtype=np.float32)
    sector = wedge_sector(Mesh(points, cells))
    assert sector is not None and sector.angle == pytest.approx(5.0, rel=1e-5)


def _flat_slab():
    # three cells thick, 2e-6 of its extent: its jittered faces are out of parallel by a millionth
    mesh = grid_mesh((8, 8, 3), kind="hexahedron", jitter=0.2, seed=5)
    return Mesh(mesh.points * [1.0, 1.0, 2e-6], [("hexahedron", mesh.blocks[0].connectivity)])


@pytest.mark.parametrize("make", [
    lambda: grid_mesh((6, 5, 4), kind="hexahedron", jitter=0.2, seed=1),
    lambda: grid_mesh((6, 5, 4), kind="tetra", jitter=0.2, seed=2),
    lambda: grid_mesh((6, 5, 4), kind="wedge", seed=3),
    lambda: grid_mesh((6, 5, 1), kind="hexahedron"),  # one cell thick between parallel planes: a slab
    lambda: Mesh(*_sector(5.0, layers=3)),  # three cells across the angle: a 3D sector
    lambda: grid_mesh((6, 5), kind="quad"),
    lambda: _flat_slab()])
def test_other_meshes_are_no_sector(make):
    assert wedge_sector(make()) is None


def test_a_run_on_a_sector_warns_and_inspect_names_it(tmp_path):
    points, cells = _sector(5.0)
    mesh = Mesh(points, cells)
    centre = mesh.cell_centroids
    c = (np.linalg.norm(centre - [0.5, 0, 0], axis=1) < 0.3).astype(float)  # a drop on the axis
    split = [c[:len(cells[0][1])], c[len(cells[0][1]):]]
    meshio.Mesh(points, cells, cell_data={"alpha": split}).write(tmp_path / "drop.vtu")
    with pytest.warns(Warning, match="5-degree wedge about a line along x .*an axisymmetric run"):
        phasegauge.measure(str(tmp_path / "drop.vtu"), "alpha")
    shown = CliRunner().invoke(main, ["inspect", str(tmp_path / "drop.vtu"), "--json"])
    assert shown.exit_code == 0, shown.output
    record = json.loads(shown.output)["wedge_sector"]
    assert record["axis"] == "x" and record["angle_degrees"] == pytest.approx(5.0)
