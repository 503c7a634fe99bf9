"""Cells written each with their own copies of their corners: an info line where the copies agree, a finding
where they do not.

Outside references: the files are written by meshio; VTK's own merge of coincident points (pyvista's
``clean``) gives the points the copies make, so the count of copies merged; the figures are checked against
the same cells written with shared points (the layout every other writer uses).
"""

import warnings

import meshio
import numpy as np
import pyvista
from click.testing import CliRunner

import phasegauge
from phasegauge.cli import main
from phasegauge.errors import MeshWarning

pyvista.OFF_SCREEN = True
N = 6


def _hexes():
    """Points of an N^3 grid of the unit box and its hexahedra (VTK's corner order)."""
    x = np.arange(N + 1) / N
    points = np.stack(np.meshgrid(x, x, x, indexing="ij"), axis=-1).reshape(-1, 3)
    i, j, k = (a.ravel() for a in np.meshgrid(np.arange(N), np.arange(N), np.arange(N), indexing="ij"))

    def at(di, dj, dk):
        return (i + di) * (N + 1) ** 2 + (j + dj) * (N + 1) + (k + dk)

    cells = np.c_[at(0, 0, 0), at(1, 0, 0), at(1, 1, 0), at(0, 1, 0), at(0, 0, 1), at(1, 0, 1), at(1, 1, 1),
                  at(0, 1, 1)]
    return points, cells


def _files(folder, *, jump=False, some=False):
    points, cells = _hexes()
    phi = 0.5 * (1 - np.tanh((np.linalg.norm(points - 0.5, axis=1) - 0.3) / 0.1))
    meshio.Mesh(points, [("hexahedron", cells)], point_data={"phi": phi}).write(folder / "shared.vtu")
    copies = cells.ravel()
    values = phi[copies].copy()
    if jump:  # a field discontinuous at the corners: each cell's copies shifted by the cell's own amount
        values += np.repeat(0.01 * (np.arange(len(cells)) % 3), 8)
    own = np.arange(copies.size).reshape(-1, 8)
    if some:  # the first cell's corners written twice, the others shared: duplicate points, not a layout
        extra = points[cells[0]]
        meshio.Mesh(np.r_[points, extra], [("hexahedron", np.r_[[np.arange(8) + len(points)], cells[1:]])],
                    point_data={"phi": np.r_[phi, phi[cells[0]]]}).write(folder / "own.vtu")
        return
    meshio.Mesh(points[copies], [("hexahedron", own)], point_data={"phi": values}).write(folder / "own.vtu")


def _measure(path):
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        result = phasegauge.measure(str(path), "phi", analyses=("conservation", "interface"))
    return result, [str(w.message) for w in caught if issubclass(w.category, MeshWarning)]


def test_own_copies_that_agree_are_an_info_line_with_the_shared_figures(tmp_path):
    _files(tmp_path)
    merged = pyvista.read(tmp_path / "own.vtu").clean()  # VTK's merge of coincident points
    copies = (N ** 3) * 8 - merged.n_points
    assert merged.n_points == (N + 1) ** 3
    own, said = _measure(tmp_path / "own.vtu")
    shared, _ = _measure(tmp_path / "shared.vtu")
    assert not any("duplicate points" in text for text in said)
    for column in ("phase_volume", "interface_size"):
        assert np.isclose(own.steps[column].iloc[0], shared.steps[column].iloc[0], rtol=1e-12)
    code = CliRunner().invoke(main, ["measure", str(tmp_path / "own.vtu"), "--field", "phi", "-q",
                                     "-o", str(tmp_path / "out")])
    assert code.exit_code == 0
    assert f"cells written with their own copies of their corners: {copies} copies merged" in code.output
    assert "duplicate points" not in code.output


def test_own_copies_that_disagree_or_points_repeated_by_some_cells_are_a_finding(tmp_path):
    _files(tmp_path, jump=True)
    _, said = _measure(tmp_path / "own.vtu")
    assert any("duplicate points merged" in text for text in said)
    (tmp_path / "own.vtu").unlink()
    _files(tmp_path, some=True)
    _, said = _measure(tmp_path / "own.vtu")
    assert any("8 duplicate points merged" in text for text in said)


def test_own_copies_of_a_single_precision_field_far_from_zero_agree(tmp_path):
    # a temperature near 300 K written in single precision, each cell's copies rounded on their own (a step of
    # float32 at 300 is 3.05e-5 [IEEE 754], 3e-5 of a range of 1): still the layout, an info line, not a finding
    points, cells = _hexes()
    temperature = (300.0 + points[:, 0]).astype(np.float32)[cells.ravel()]
    temperature[::2] = np.nextafter(temperature[::2], np.float32(np.inf))
    own = np.arange(cells.size).reshape(-1, 8)
    meshio.Mesh(points[cells.ravel()], [("hexahedron", own)],
                point_data={"T": temperature, "phi": points[cells.ravel(), 0]}).write(tmp_path / "own.vtu")
    _, said = _measure(tmp_path / "own.vtu")
    assert not any("duplicate points" in text for text in said)
