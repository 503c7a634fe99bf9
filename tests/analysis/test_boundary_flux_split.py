"""Boundary flux on meshes whose cells the reader splits: polyhedra split about their centres, and
polyhedra coned beside whole hexahedra.

The wall test reads whole cells there: a boundary piece's face neighbours are mostly pieces of its
own polyhedron, with its velocity, and the fall of u.n to zero at a wall is not seen among them.

Outside references: the cellular flow u = (sin pi x cos pi y, -2 cos pi x sin pi y, 0) and the no-slip
field u = (sin^2 pi x sin 2 pi y, -sin 2 pi x sin^2 pi y, 0) have u.n = 0 on every wall of the unit
cube [analytic]; a plug flow u = (U, 0, 0) carries U times the outlet's area out [analytic]; the duct
flow u = (36 y (1 - y) z (1 - z), 0, 0) has flow rate 1 [analytic], midpoint-type cell values within
O(h^2) of it (6 int_0^a y (1 - y) dy = 3 a^2 - 2 a^3 of it below y = a). The files are written by VTK
itself (pyvista) [lib], the same cells also as VTK hexahedra, which the reader keeps whole.
"""

import numpy as np
import pytest

pv = pytest.importorskip("pyvista")

from conftest import hexahedra_as_polyhedra  # noqa: E402
from phasegauge.analysis.conservation import open_boundary_flux  # noqa: E402
from phasegauge.io import Series  # noqa: E402
from phasegauge.meshgen import grid_mesh  # noqa: E402
from phasegauge.model._centroids import whole_cell_centroids  # noqa: E402

N = 8


def _cellular(x, y, z):
    return np.stack([np.sin(np.pi * x) * np.cos(np.pi * y), -2 * np.cos(np.pi * x) * np.sin(np.pi * y),
                     0 * x], axis=1)


def _no_slip(x, y, z):
    return np.stack([np.sin(np.pi * x) ** 2 * np.sin(2 * np.pi * y),
                     -np.sin(2 * np.pi * x) * np.sin(np.pi * y) ** 2, 0 * x], axis=1)


def _plug(x, y, z):
    return np.stack([0.7 + 0 * x, 0 * x, 0 * x], axis=1)


def _duct(x, y, z):
    return np.stack([36 * y * (1 - y) * z * (1 - z), 0 * x, 0 * x], axis=1)


@pytest.fixture(scope="module")
def meshes(tmp_path_factory):
    """The read steps of the same N^3 cells: every cell a polyhedron, a band of them among hexahedra,
    every cell a hexahedron; each with the four velocities and c = 1 where x > 0.6 and y < 0.4."""
    folder = tmp_path_factory.mktemp("split_flux")
    mesh = grid_mesh((N, N, N), kind="hexahedron")
    x, y, z = mesh.cell_centroids.T
    band = (z > 0.35) & (z < 0.65)
    read = {}
    for name, polyhedra in (("polyhedra", np.ones(mesh.n_cells, bool)), ("band", band),
                            ("hexahedra", np.zeros(mesh.n_cells, bool))):
        grid = hexahedra_as_polyhedra(mesh, polyhedra)
        for flow in (_cellular, _no_slip, _plug, _duct):
            grid.cell_data[flow.__name__] = flow(x, y, z)
        grid.cell_data["c"] = ((x > 0.6) & (y < 0.4)).astype(float)
        path = folder / f"{name}.vtu"
        grid.save(str(path))
        read[name] = Series(str(path)).read(0)
    return read


def _flux(step, flow):
    return open_boundary_flux(step.mesh, step.fields.cell_data[flow], step.fields.cell_data["c"],
                              velocity_location="cell", c_location="cell")


def test_the_reader_splits_the_polyhedra(meshes):
    # the case this file is about: pieces of whole cells, and the hexahedral twin kept whole
    assert meshes["polyhedra"].mesh.cell_parents is not None
    assert meshes["band"].mesh.cell_parents is not None
    assert meshes["hexahedra"].mesh.cell_parents is None
    assert meshes["polyhedra"].mesh.n_cells > meshes["polyhedra"].mesh.n_whole_cells == N ** 3


@pytest.mark.parametrize("name", ["polyhedra", "band", "hexahedra"])
@pytest.mark.parametrize("flow", ["_cellular", "_no_slip"])
def test_a_closed_box_of_split_cells_is_closed(meshes, name, flow):
    # u.n = 0 on every wall [analytic]: no open face, no flow, no phase through the boundary
    out = _flux(meshes[name], flow)
    assert out["open_boundary"] is False and out["open_boundary_area"] == 0.0
    assert out["boundary_outflow"] == 0.0 and out["boundary_phase_outflow"] == 0.0


@pytest.mark.parametrize("name", ["polyhedra", "band", "hexahedra"])
def test_a_plug_flow_through_split_cells_reads_its_outflow(meshes, name):
    # u = (0.7, 0, 0): inlet and outlet open (area 2), the walls along the flow closed; net flow 0,
    # and the phase (c = 1 on the outlet's cells below y = 3/8, 0 on the inlet) leaves at 0.7 * 3/8 [analytic]
    out = _flux(meshes[name], "_plug")
    assert out["open_boundary"] is True
    assert out["open_boundary_area"] == pytest.approx(2.0, rel=1e-12)
    assert out["boundary_outflow"] == pytest.approx(0.0, abs=1e-12)
    assert out["boundary_phase_outflow"] == pytest.approx(0.7 * 3 / 8, rel=1e-12)


@pytest.mark.parametrize("name", ["polyhedra", "band", "hexahedra"])
def test_a_duct_flow_through_split_cells_reads_its_outflow(meshes, name):
    # flow rate 1 in and out [analytic]: net 0; inlet and outlet open, less at most a ring of faces at
    # their edges, where u.n falls to the wall within one cell (our threshold, as the hexahedra's duct test)
    out = _flux(meshes[name], "_duct")
    h = 1 / N
    assert 2 - 8 * h - 1e-12 <= out["open_boundary_area"] <= 2 + 1e-12
    assert out["boundary_outflow"] == pytest.approx(0.0, abs=1e-12)
    # c = 1 on the outlet's cells below y = 3/8: int_0^(3/8) 6 y (1 - y) dy = 0.31640625 of the flow rate
    # [analytic], within O(h^2) (our threshold: 2 h^2, as the hexahedra's duct test)
    assert out["boundary_phase_outflow"] == pytest.approx(0.31640625, abs=2 * h ** 2)


def test_a_closed_box_of_polyhedra_gives_no_open_boundary_finding(tmp_path):
    # end to end, as the audit's case: three steps of a constant phase in the cellular flow; the drift is
    # 0 and nothing crossed the walls [analytic]: no outflow columns, no finding
    from phasegauge import measure

    mesh = grid_mesh((N, N, N), kind="hexahedron")
    x, y, z = mesh.cell_centroids.T
    grid = hexahedra_as_polyhedra(mesh, np.ones(mesh.n_cells, bool))
    grid.cell_data["U"] = _cellular(x, y, z)
    grid.cell_data["alpha"] = ((x > 0.6) & (y < 0.4)).astype(float)
    for k in range(3):
        grid.field_data["TimeValue"] = np.array([0.1 * k])
        grid.save(str(tmp_path / f"box_{k}.vtu"))
    res = measure(tmp_path, "alpha", velocity="U", analyses=("conservation",))
    assert not res.steps["open_boundary"].any()
    assert (res.steps["boundary_outflow"] == 0.0).all() and (res.steps["boundary_phase_outflow"] == 0.0).all()
    assert "phase_volume_drift_closed" not in res.steps
    assert not any(f.kind == "open_boundary" for f in res.findings)
    assert not any("lost" in f.message for f in res.findings)


@pytest.mark.parametrize("name", ["polyhedra", "band", "hexahedra"])
def test_the_cell_values_offset_bound_covers_a_linear_phase_on_split_cells(meshes, name):
    # c = x on the cells (their centroids' x) in the plug flow: the faces carry c = 1 out at the outlet and
    # c = 0 in at the inlet, 0.7 net [analytic]; the cells' values give 0.7 (1 - h), and the bound of what the
    # cell values may be off at the faces (the least-squares gradient over the whole cells' neighbours,
    # exact for a linear field) must cover the difference, 0.7 h [analytic]
    step = meshes[name]
    split = step.mesh.cell_parents is not None
    c = whole_cell_centroids(step.mesh)[step.mesh.cell_parents if split else slice(None), 0]
    out = open_boundary_flux(step.mesh, step.fields.cell_data["_plug"], c, velocity_location="cell",
                             c_location="cell")
    h = 1 / N
    assert out["boundary_phase_outflow"] == pytest.approx(0.7 * (1 - h), rel=1e-9)
    assert out["boundary_phase_outflow"] + out["boundary_phase_outflow_unknown"] >= 0.7 * (1 - 1e-9)
