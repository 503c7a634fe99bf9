"""Contour files (round trip, atomic writes), interface plots and the public names."""

import os

import numpy as np
import pandas as pd
import pytest

import phasegauge.analysis.interface as interface_module
from phasegauge.errors import OptionError, OutputError
from phasegauge.meshgen import grid_mesh
from phasegauge.analysis.interface import find_interface
from phasegauge.io._contour_writer import read_contour, write_contour
from phasegauge.report._plots_interface import plot_interface_snapshots, plot_interface_width
from phasegauge.run._report_data import interface_snapshots


def test_every_public_name_imports():
    for name in interface_module.__all__:
        assert getattr(interface_module, name) is not None


def _contour(dim, kind=None, shift=0.0):
    mesh = grid_mesh((10,) * dim, kind=kind)
    d2 = ((mesh.coordinates - 0.5) ** 2).sum(axis=1)
    return mesh, find_interface(mesh, 0.5 + 2 * (0.09 + shift - d2))


# round trip through meshio's own readers
@pytest.mark.parametrize("suffix", [".vtu", ".vtk"])
@pytest.mark.parametrize("dim,kind", [(2, "triangle"), (2, "quad"), (3, "tetra"), (3, "hexahedron")])
def test_contour_round_trip(tmp_path, suffix, dim, kind):
    _, contour = _contour(dim, kind)
    path = write_contour(contour, tmp_path / f"interface{suffix}")
    back = read_contour(path)
    assert back.dimension == dim
    assert np.allclose(back.points, contour.points)
    assert np.array_equal(back.elements, contour.elements)
    assert np.array_equal(back.cells, contour.cells)
    assert back.size == pytest.approx(contour.size)
    assert os.listdir(tmp_path) == [f"interface{suffix}"]  # no temporary file left


@pytest.mark.parametrize("suffix", [".vtu", ".vtk"])
def test_empty_contour_round_trip_and_vtk_reads_it(tmp_path, suffix):
    import pyvista

    mesh = grid_mesh((3, 3, 3), kind="tetra")
    empty = find_interface(mesh, np.zeros(mesh.n_points))
    path = write_contour(empty, tmp_path / f"none{suffix}")
    assert read_contour(path).n_elements == 0
    assert pyvista.read(path).n_points == 0  # VTK's reader, a library outside the project


def test_write_replaces_an_existing_file(tmp_path):
    _, small = _contour(2, "quad", shift=-0.05)
    _, large = _contour(2, "quad")
    path = tmp_path / "c.vtu"
    write_contour(small, path)
    write_contour(large, path)
    assert read_contour(path).size == pytest.approx(large.size)


def test_pyvista_reads_sizes_and_cells(tmp_path):
    import pyvista

    _, contour = _contour(3, "tetra")
    grid = pyvista.read(write_contour(contour, tmp_path / "c.vtu"))
    assert grid.n_cells == contour.n_elements
    assert np.allclose(grid.cell_data["size"], contour.element_sizes)
    assert float(grid.compute_cell_sizes(length=False, volume=False).cell_data["Area"].sum()) == \
        pytest.approx(contour.size)


def test_writer_errors(tmp_path):
    _, contour = _contour(2)
    with pytest.raises(OptionError, match="must end in .vtu or .vtk"):
        write_contour(contour, tmp_path / "c.stl")
    with pytest.raises(OutputError, match="does not exist"):
        write_contour(contour, tmp_path / "missing" / "c.vtu")


def test_width_plot():
    steps = pd.DataFrame({"step": [0, 1, 2], "time": [0.0, 0.5, 1.0],
                          "interface_width": [0.1, 0.11, 0.12], "interface_width_cells": [4, 4.4, 4.8],
                          "width_threshold_free": [0.1, 0.1, 0.1]})
    fig = plot_interface_width(steps, title="demo")
    assert len(fig.axes) == 2
    assert fig.axes[1].get_ylabel() == "width (cells)"
    with pytest.raises(OptionError, match="no 'interface_width' column"):
        plot_interface_width(pd.DataFrame({"time": [0.0]}))


@pytest.mark.parametrize("dim", [2, 3])
def test_snapshot_plot(tmp_path, dim):
    contours = {}
    for step in range(8):
        mesh, contours[step] = _contour(dim, None, shift=0.01 * step)
    drawn = interface_snapshots(mesh, contours, times={0: 0.0})
    fig = plot_interface_snapshots(drawn["steps"], bounds=drawn["bounds"], axis_names=drawn["axis_names"],
                                   times=drawn["times"], max_panels=4)
    fig.savefig(tmp_path / "s.png")
    assert (tmp_path / "s.png").stat().st_size > 0
    assert len(fig.axes) == (1 if dim == 2 else 4)
    with pytest.raises(OptionError, match="no interfaces"):
        plot_interface_snapshots({}, bounds=drawn["bounds"])


@pytest.mark.parametrize("binary", [True, False])
@pytest.mark.parametrize("empty", [False, True])
def test_legacy_vtk_carries_time_and_step(tmp_path, monkeypatch, binary, empty):
    """A legacy .vtk contour holds TimeValue and step as dataset field data where VTK's legacy writer
    puts it (after the DATASET line), read back by VTK's own legacy reader (pyvista, outside the
    project); meshio still reads the geometry (its legacy reader leaves dataset field data out)."""
    import meshio
    import pyvista

    if not binary:  # the ASCII flavour of meshio's legacy writer
        write = meshio.write
        monkeypatch.setattr(meshio, "write", lambda *a, **k: write(*a, binary=False, **k))
    mesh, contour = _contour(2, "quad")
    if empty:
        contour = find_interface(mesh, np.zeros(mesh.n_points))
    path = write_contour(contour, tmp_path / "c.vtk", time=0.125, step=7)
    grid = pyvista.read(path)
    assert float(grid.field_data["TimeValue"][0]) == 0.125 and int(grid.field_data["step"][0]) == 7
    assert grid.n_cells == contour.n_elements
    if not empty:
        assert np.allclose(grid.cell_data["size"], contour.element_sizes)
        assert meshio.read(path).cells[0].data.shape == (contour.n_elements, 2)
        assert read_contour(path).size == pytest.approx(contour.size)
