"""Contour files carry their time and step, and a ``time,path`` listing beside them reads as a series."""


import numpy as np
import pytest

from phasegauge import Series, measure
from phasegauge.meshgen import grid_mesh, to_meshio


def test_contours_read_back_as_a_series(tmp_path):
    mesh = grid_mesh((12, 12), kind="triangle")
    x, y = mesh.cell_centroids[:, 0], mesh.cell_centroids[:, 1]
    lines = []
    for k in range(4):
        c = (np.hypot(x - 0.4 - 0.05 * k, y - 0.5) < 0.25).astype(float)
        to_meshio(mesh, cell_data={"alpha": c}).write(tmp_path / f"s_{k}.vtu")
        lines.append(f"{0.25 * k + 1.0},s_{k}.vtu")
    (tmp_path / "run.steps").write_text("\n".join(lines) + "\n")
    out = tmp_path / "out"
    measure(str(tmp_path / "run.steps"), "alpha", out=out, steps="1:", analyses=("interface",))
    folder = out / "contours"
    # outside reader: pyvista (VTK's XML reader) sees the one-value field-data arrays
    pyvista = pytest.importorskip("pyvista")
    grid = pyvista.read(str(folder / "interface_000002.vtu"))
    assert grid.field_data["TimeValue"][0] == pytest.approx(1.5) and grid.field_data["step"][0] == 2
    assert (folder / "interface.steps").read_text().splitlines() == [
        "time,path", "1.25,interface_000001.vtu", "1.5,interface_000002.vtu", "1.75,interface_000003.vtu"]
    # the folder reads through its listing; the files alone carry the same times (TimeValue)
    with Series(str(folder / "interface.steps")) as listing, Series(str(folder)) as in_folder, \
            Series(str(folder / "interface_*.vtu")) as files:
        assert list(listing.times) == list(in_folder.times) == list(files.times) == [1.25, 1.5, 1.75]
        assert in_folder.time_origins == ["listing"] and files.time_origins == ["file"]
    assert "contours/interface.steps" in __import__("json").load(open(out / "manifest.json"))["outputs"]
