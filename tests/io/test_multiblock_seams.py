"""A decomposed step's blocks joined at their seams, where each rank rounded its coordinates its own way.

Outside references: the blocks are pyvista's (VTK's) rectilinear grids written by VTK's multiblock
writer, as a box-wise decomposition of a micro-channel writes them (rank 0 computes x = i h, rank 1
x = x0 + j h: the seam differs in the last place); the volume expected is numpy's sum of the cell
fractions times the cell areas, the droplets scipy's connected components of the cells.
"""

import warnings

import numpy as np
import pytest
import pyvista

import phasegauge
from phasegauge.io._multiblock import SEAM_TOLERANCE, seams_made_equal

pyvista.OFF_SCREEN = True

H = 1e-6  # cell size (m)


def _block(xs, ny=60):
    grid = pyvista.RectilinearGrid(xs, np.arange(ny + 1) * H, np.array([0.0])).cast_to_unstructured_grid()
    c = grid.cell_centers().points
    grid.cell_data["alpha"] = (np.hypot(c[:, 0] - 30 * H, c[:, 1] - 30 * H) < 12 * H).astype(float)
    return grid


def _two_ranks(path, exact):
    x0 = np.arange(31) * H
    # rank 1 from its own origin
    x1 = 3e-5 + np.arange(31) * H if not exact else np.r_[x0[-1], 3e-5 + np.arange(1, 31) * H]
    assert (x0[-1] == x1[0]) == exact  # 2.9999999999999997e-05 against 3e-05 when not exact
    pyvista.MultiBlock([_block(x0), _block(x1)]).save(path)
    return str(path)


def test_a_seam_rounded_apart_joins_as_one_domain(tmp_path):
    results = {}
    for exact in (True, False):
        path = _two_ranks(tmp_path / f"step_{exact}.vtm", exact)
        with warnings.catch_warnings(record=True) as caught:
            warnings.simplefilter("always")
            results[exact] = phasegauge.measure(path, "alpha", analyses=("conservation", "droplets"))
        assert not [w for w in caught if "duplicate points" in str(w.message)]  # the join, not duplicates
    # the drop straddles the seam: one droplet whether the seam's coordinates were equal or not
    for result in results.values():
        assert int(result.steps["droplet_count"].iloc[0]) == 1
    fractions = np.concatenate([_block(np.arange(31) * H).cell_data["alpha"]] * 2)
    assert np.isclose(results[False].steps["phase_volume"].iloc[0], fractions.sum() * H * H, rtol=1e-12)


def test_seam_points_made_equal_and_no_others():
    # block 0 ends at x = 1, block 1 starts a unit in the last place beyond it; a point inside a
    # block, and two points of a seam a millionth of a cell apart, stay as they are
    ulp = np.spacing(1.0)
    a = np.array([[0.0, 0.0, 0.0], [1.0, 0.0, 0.0], [1.0, 1.0, 0.0], [0.0, 1.0, 0.0], [0.5, 0.5, 0.0]])
    b = np.array([[1.0 + ulp, 0.0, 0.0], [2.0, 0.0, 0.0], [2.0, 1.0, 0.0], [1.0 + 1e-6, 1.0, 0.0]])
    joined = seams_made_equal([a, b])
    assert joined[5].tolist() == [1.0, 0.0, 0.0]  # took block 0's coordinates
    assert joined[8].tolist() == [1.0 + 1e-6, 1.0, 0.0]  # 1e-6 of a side-2 domain: beyond the tolerance
    assert 1e-6 > SEAM_TOLERANCE * 2.0
    assert np.array_equal(joined[:5], a) and np.array_equal(joined[6:8], b[1:3])


def test_a_seam_one_single_precision_spacing_apart_joins(tmp_path):
    # blocks written in single precision (as many converters do): rank 1's seam lies one float32
    # spacing beyond rank 0's (numpy's nextafter), over twenty times 1e-9 of the domain's size
    blocks = []
    for xs in (np.arange(31) * H, 3e-5 + np.arange(31) * H):
        block = _block(xs)
        block.points = block.points.astype(np.float32)
        blocks.append(block)
    seam = np.float32(blocks[0].points[:, 0].max())
    x = blocks[1].points[:, 0]
    x[x == x.min()] = np.nextafter(seam, np.float32(1.0))
    blocks[1].points[:, 0] = x
    assert blocks[1].points[:, 0].min() - seam > 20 * SEAM_TOLERANCE * 60 * H
    pyvista.MultiBlock(blocks).save(tmp_path / "f32.vtm")
    result = phasegauge.measure(str(tmp_path / "f32.vtm"), "alpha", analyses=("conservation", "droplets"))
    assert int(result.steps["droplet_count"].iloc[0]) == 1


def test_duplicates_inside_a_block_still_warned_of(tmp_path):
    # block 0 stores every cell's corners apart (VTK's separate_cells); only its own copies are
    # counted, not the seam's points that block 1 shares
    first = _block(np.arange(31) * H).separate_cells()
    second = _block(3e-5 + np.arange(31) * H)
    pyvista.MultiBlock([first, second]).save(tmp_path / "apart.vtm")
    own = first.n_points - 31 * 61  # VTK's copies beyond the 31 x 61 grid points of block 0
    with pytest.warns(phasegauge.errors.MeshWarning, match=f"^.*: {own} duplicate points merged"):
        phasegauge.measure(str(tmp_path / "apart.vtm"), "alpha", analyses=("conservation",))
