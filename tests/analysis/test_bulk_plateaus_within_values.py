"""A phase's bulk value never lies beyond its side's own values when the side holds a plateau.

Outside checks: numpy on the raw values (the side's minimum and median; for the quick-start sample, the
phi arrays of filament_breakup.h5 read with h5py and mapped as --range -1,1 maps them, c = (phi + 1) / 2),
and the analytic tanh profile c = (1 + tanh((R - r) / (2 eps))) / 2, whose values reach 0 and 1 within
1e-3 in the boxes below (Cahn & Hilliard 1958; REFERENCES.md [calc]).
"""

import os

import numpy as np
import pytest

from phasegauge.analysis._bulk_plateaus import bulk_plateaus
from phasegauge.meshgen import grid_mesh

ROOT = os.path.dirname(os.path.dirname(os.path.dirname(os.path.abspath(__file__))))
SAMPLE = os.path.join(ROOT, "sample_fields", "filament_breakup.xdmf")


def _low_side(c):
    side = c[c < 0.5]
    return float(side.min()), float(np.median(side))


def test_a_matrix_with_a_one_sided_halo_keeps_its_bulk_within_its_values():
    # a matrix at 0.0135 and above with a one-sided halo (0.015 |N(0, 1)|, numpy's seeded generator) around a
    # tanh drop: its spread passes a third of its distance from 0, yet no value lies below 0.0135 (before: the
    # low bulk fell back to 0, below every value of the field)
    mesh = grid_mesh((160, 160), kind="triangle")
    r = np.linalg.norm(mesh.coordinates[:, :2] - 0.5, axis=1)
    drop = 0.5 * (1 + np.tanh((0.2 - r) / 0.02))
    matrix = 0.0135 + 0.015 * np.abs(np.random.default_rng(1).standard_normal(r.size))
    c = matrix + (1.0 - matrix) * drop
    low, high, _ = bulk_plateaus(c, 0.5, mesh)
    smallest, median = _low_side(c)  # numpy: 0.0135 and 0.0247
    assert smallest <= low <= median
    assert high == 1.0


@pytest.mark.parametrize("step", [29, 30, 31])
def test_the_quick_start_matrix_at_step_30_reads_its_own_bulk(step):
    # the quick-start sample at steps 29-31 (time 0.0215, 0.0234, 0.0254 ... see the XDMF): the halo of the
    # drop that vanishes at step 31 widens the matrix's spread at step 30 (before: the low bulk read 0 there
    # although no value lies below 0.0135, while steps 29 and 31 read 0.019 and 0.021)
    h5py = pytest.importorskip("h5py")
    with h5py.File(SAMPLE[:-len(".xdmf")] + ".h5") as f:
        c = (f[f"data{step + 2}"][:].astype(np.float64) + 1.0) / 2.0  # the XDMF's step k is /data{k+2}
    low, high, _ = bulk_plateaus(c, 0.5)
    smallest, median = _low_side(c)
    assert smallest <= low <= median
    assert low == pytest.approx(0.0205, abs=0.0025)  # steps 29 and 31: 0.0192 and 0.0210 (our threshold)
    # numpy on the same raw values: the median of c > 0.5 within 0.05 of its 99.5th percentile (the plateau
    # rule's first pass) is 1.0095-1.0100 over steps 29-31; 5e-4: our tolerance
    assert high == pytest.approx(1.0097, abs=5e-4)


def test_the_quick_start_widths_and_drop_at_step_30_follow_their_neighbours(tmp_path):
    # the widths and the largest drop's volume at step 30 against steps 29 and 31 (before: the widths were
    # 1.4 and 2.8 times theirs, the drop's volume 0.1763 above both 0.1501 and 0.1654, its circularity 1.062)
    import phasegauge

    result = phasegauge.measure(SAMPLE, "phi", range=(-1.0, 1.0), periodic=("x", "y"), steps="29:32")
    steps = result.steps.set_index("step")
    for key in ("interface_width", "width_threshold_free", "interface_eps"):
        around = 0.5 * (steps.loc[29, key] + steps.loc[31, key])
        assert steps.loc[30, key] / around == pytest.approx(1.0, abs=0.15), key  # our threshold (now +11 to +13 %)
    drops = result.droplets
    largest = drops.loc[drops.groupby("step").volume.idxmax()].set_index("step")
    assert largest.loc[29, "volume"] < largest.loc[30, "volume"] < largest.loc[31, "volume"]
    # a circle's circularity is 1 (perimeter of the equal-area circle over the perimeter); 0.01: our threshold
    assert largest.loc[30, "circularity"] == pytest.approx(1.0, abs=0.01)


def test_a_tanh_drop_a_wide_profiles_crest_and_a_sharp_field_keep_their_bulk_values():
    mesh = grid_mesh((128, 128), kind="quad")
    r = np.linalg.norm(mesh.coordinates[:, :2] - 0.5, axis=1)
    # a tanh drop reaching 0 and 1 within 1e-3: no rescaling
    assert bulk_plateaus(0.5 * (1 + np.tanh((0.25 - r) / 0.02)), 0.5, mesh) == (0.0, 1.0, 1e-6)
    # a wide profile whose crest stops 0.002 short of 1 (less than half its side near it): the ideal 1
    wide = 0.5 * (1 + np.tanh((0.25 - r) / 0.08))
    assert 1e-3 < 1.0 - wide.max() < 3e-3
    assert bulk_plateaus(wide, 0.5, mesh)[:2] == (0.0, 1.0)
    # a sharp (volume-of-fluid) field: each cell's area fraction of a disc of radius 0.3 (numpy, 8 x 8
    # samples a cell), 0 and 1 away from the interface cells
    n, k = 128, 8
    s = (np.arange(n * k) + 0.5) / (n * k)
    inside = np.hypot(*np.meshgrid(s - 0.5, s - 0.5, indexing="ij")) < 0.3
    fraction = inside.reshape(n, k, n, k).mean(axis=(1, 3)).ravel()
    assert np.count_nonzero((fraction > 0) & (fraction < 1)) < 0.05 * fraction.size
    assert bulk_plateaus(fraction, 0.5) == (0.0, 1.0, 1e-6)


@pytest.mark.parametrize("location", ["point", "cell"])
def test_a_packed_matrix_keeps_its_bulk_and_its_widths_end_to_end(tmp_path, location):
    # 100 logistic drops (radius 0.03, w = 0.004) on a jittered lattice of spacing 0.1 on 300 x 300 quads, gaps
    # about 10 eps, matrix 0.02 + 0.004 N(0, 1) (numpy's seeded generator), on the points or as cell means; analytic:
    # bulk 0.02 and the 5-95 % width 2 w ln 19 = 0.02356 (before: bulk 0, widths +13.5 % on points, +19 % on cells)
    meshio = pytest.importorskip("meshio")
    import phasegauge

    n, w = 300, 0.004
    xs = np.linspace(0.0, 1.0, n + 1)
    x, y = np.meshgrid(xs, xs, indexing="xy")
    points = np.c_[x.ravel(), y.ravel(), np.zeros(x.size)]
    index = np.arange((n + 1) ** 2).reshape(n + 1, n + 1)
    quads = np.c_[index[:-1, :-1].ravel(), index[:-1, 1:].ravel(), index[1:, 1:].ravel(), index[1:, :-1].ravel()]
    rng = np.random.default_rng(1)
    centres = np.arange(0.0, 1.0, 0.1) + 0.05
    cx, cy = np.meshgrid(centres, centres)
    centres = np.c_[cx.ravel(), cy.ravel()] + rng.uniform(-0.01, 0.01, (cx.size, 2))
    r = np.min(np.linalg.norm(points[:, None, :2] - centres[None], axis=2), axis=1)
    c = 0.02 + 0.004 * rng.standard_normal(r.size) + 0.98 / (1.0 + np.exp(-(0.03 - r) / w))
    data = {"point_data": {"c": c}} if location == "point" else {"cell_data": {"c": [c[quads].mean(axis=1)]}}
    for k in range(2):
        meshio.write(str(tmp_path / f"s_{k:03d}.vtu"), meshio.Mesh(points, [("quad", quads)], **data))
    result = phasegauge.measure(str(tmp_path / "s_*.vtu"), "c", analyses=("interface",))
    step = result.steps.iloc[0]
    assert step["bulk_c_low"] == pytest.approx(0.02, abs=0.01)  # the matrix's mean, set above; our threshold
    # 2 w ln 19: the logistic's 5-95 % thickness; 5 % on points, 8 % on cells: our threshold, on cells with the
    # cell averaging's bias 0.063 (h / eps)^2 = 4.4 % (now +1.3 % on points, +6.8 % on cells, the matrix read at
    # 0.020; before, at 0.028 from values still on the drops' tails: -2.1 % and +3.3 %)
    assert step["interface_width"] == pytest.approx(2 * w * np.log(19.0), rel=0.05 if location == "point" else 0.08)
