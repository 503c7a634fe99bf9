"""Fast paths of the per-step figures against their plain definitions (with and without NaN)."""

import numpy as np
import pytest

from phasegauge.analysis import conservation, mixing
from phasegauge.meshgen import grid_mesh


@pytest.mark.parametrize("kind", ["triangle", "tetra", "mixed"])
@pytest.mark.parametrize("holes", [False, True])
def test_boundedness_and_volumes_match_their_definitions(kind, holes):
    # the definitions written out with plain numpy (sums over the finite cells); tolerance 1e-12
    # relative: the fast paths sum the same terms, only in other groupings
    dim = 2 if kind == "triangle" else 3
    mesh = grid_mesh((12,) * dim, kind=kind, jitter=0.2, seed=3)
    rng = np.random.default_rng(5)
    c = rng.uniform(-0.2, 1.2, mesh.n_cells)
    if holes:
        c[rng.integers(0, c.size, 7)] = np.nan
    good = np.isfinite(c)
    dV = mesh.cell_measures
    excess = np.maximum(0.0, np.maximum(c[good] - 1.0, -c[good]))
    got = conservation.boundedness(mesh, c)
    assert got["overshoot_volume"] == pytest.approx(float(np.sum(excess * dV[good])), rel=1e-12)
    assert got["c_min"] == np.nanmin(c) and got["c_max"] == np.nanmax(c)
    assert got["nonfinite_values"] == int((~good).sum())
    vols = conservation.conservation_metrics(mesh, c, densities=(2.0, 1.0))
    assert vols["phase_volume"] == pytest.approx(float(np.sum(c[good] * dV[good])), rel=1e-12)
    assert vols["nonfinite_volume"] == pytest.approx(float(dV[~good].sum()), rel=1e-12, abs=0)
    assert vols["other_mass"] == pytest.approx(float(np.sum((1 - c[good]) * dV[good])), rel=1e-12)
    # Danckwerts (1952): I = var(c) / (m (1 - m)), volume-weighted
    m = np.sum(c[good] * dV[good]) / dV[good].sum()
    var = np.sum((c[good] - m) ** 2 * dV[good]) / dV[good].sum()
    mix = mixing.mixing_metrics(mesh, c)
    assert mix["segregation_intensity"] == pytest.approx(var / (m * (1 - m)), rel=1e-12)


def test_bounded_field_has_no_overshoot():
    mesh = grid_mesh((6, 6, 6), kind="hexahedron")
    c = np.linspace(0.0, 1.0, mesh.n_cells)
    # analytic: c within [0, 1] everywhere has no excess, so the overshoot integral is exactly 0
    assert conservation.boundedness(mesh, c)["overshoot_volume"] == 0.0


@pytest.mark.parametrize("workers", [3, 4])
def test_this_process_and_forked_workers_give_the_serial_tables(tmp_path, workers):
    # this process takes steps beside workers - 1 forks (4 workers: more than the 3 steps after
    # the first); the tables equal the serial run's exactly, droplet tracks included
    import os

    import pandas as pd

    from phasegauge import measure
    from phasegauge.meshgen import to_meshio

    mesh = grid_mesh((20, 20), kind="triangle")
    x, y = mesh.cell_centroids[:, 0], mesh.cell_centroids[:, 1]
    lines = []
    for k in range(4):
        c = np.zeros(mesh.n_cells)
        for cx in (0.25 + 0.05 * k, 0.75 - 0.05 * k):
            c = np.maximum(c, 0.5 * (1 + np.tanh((0.15 - np.hypot(x - cx, y - 0.5)) / 0.03)))
        to_meshio(mesh, cell_data={"alpha": c}).write(os.path.join(tmp_path, f"s_{k}.vtu"))
        lines.append(f"{0.1 * k},s_{k}.vtu")
    listing = os.path.join(tmp_path, "run.steps")
    with open(listing, "w") as f:
        f.write("\n".join(lines) + "\n")
    serial = measure(listing, "alpha", analyses=("droplets", "conservation"))
    parallel = measure(listing, "alpha", analyses=("droplets", "conservation"), workers=workers)
    pd.testing.assert_frame_equal(serial.steps, parallel.steps, check_exact=True)
    pd.testing.assert_frame_equal(serial.droplets, parallel.droplets, check_exact=True)
    pd.testing.assert_frame_equal(serial.events, parallel.events, check_exact=True)
