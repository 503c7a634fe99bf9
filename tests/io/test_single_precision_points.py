"""Points stored in single precision far from the origin against the cell size are warned of.

Outside references: the files are written by VTK (through pyvista) with float32 or float64 points;
the placement expected is numpy's ``np.spacing`` of the float32 coordinate (IEEE 754 single
precision: 2**-14 = 6.1e-5 at 1000).
"""

import warnings

import numpy as np
import pytest
import pyvista

from phasegauge.errors import MeshWarning
from phasegauge.io import Series

pyvista.OFF_SCREEN = True


def _file(path, origin, dtype, z=0.0):
    grid = pyvista.ImageData(dimensions=(21, 21, 1), spacing=(1e-3, 1e-3, 1), origin=(origin, origin, z))
    grid = grid.cast_to_unstructured_grid()
    grid.points = grid.points.astype(dtype)
    grid.cell_data["c"] = np.full(grid.n_cells, 0.5)
    grid.save(path)
    assert pyvista.read(path).points.dtype == dtype  # VTK kept the precision written
    return str(path)


def _warnings(path):
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        Series(path).read(0)
    return [str(w.message) for w in caught if issubclass(w.category, MeshWarning)]


def test_single_precision_points_far_off_warned(tmp_path):
    (line,) = _warnings(_file(tmp_path / "far.vtu", 1000.0, np.float32))
    assert np.spacing(np.float32(1000.0)) == 2.0 ** -14
    assert "single precision" in line and "6.1e-05" in line and "6.1%" in line


@pytest.mark.parametrize("origin, dtype, z", [(0.0, np.float32, 0.0), (1000.0, np.float64, 0.0),
                                              (0.0, np.float32, 500.0)])
def test_near_origin_or_double_precision_not_warned(tmp_path, origin, dtype, z):
    # (a 2D mesh in the plane z = 500: its cells' sizes do not depend on z)
    assert _warnings(_file(tmp_path / "ok.vtu", origin, dtype, z)) == []
