"""The convergence command: three runs of one case, measured here or read from measure folders."""

import os

import numpy as np
import pandas as pd
import pytest
from click.testing import CliRunner

from conftest import write_listing
from phasegauge import measure
from phasegauge.cli import main
from phasegauge.errors import OptionError
from phasegauge.meshgen import grid_mesh
from phasegauge.run.convergence import grid_convergence_run
from phasegauge.run.options import MeasureOptions

CELLS = (40, 25, 16)  # h = 0.025, 0.04, 0.0625: ratios 1.6 and 1.5625 (not constant)


def _series(folder, n, times):
    """c = x^2 (1 - t/2) on cells of an n x n unit-square grid, time in a listing.

    The phase volume is the midpoint rule of the integral: exactly (1/3 - h^2/12)(1 - t/2), h = 1/n
    (midpoint-rule error of x^2 over a cell of width h is h^3/12), so p = 2 and the extrapolated
    value is (1 - t/2)/3, both analytic.
    """
    os.makedirs(folder, exist_ok=True)
    mesh = grid_mesh((n, n), kind="quad")
    x = mesh.cell_centroids[:, 0]
    return write_listing(folder, ((t, f"s_{k}.vtu", mesh, {"c": x ** 2 * (1 - t / 2)})
                                  for k, t in enumerate(times)))


def _three(tmp_path):
    return (_series(str(tmp_path / "fine"), CELLS[0], [0.0, 0.1, 0.2]),
            _series(str(tmp_path / "medium"), CELLS[1], [0.0, 0.05, 0.1, 0.15, 0.2]),
            _series(str(tmp_path / "coarse"), CELLS[2], [0.0, 0.2]))


def test_series_inputs_give_analytic_order_and_extrapolation(tmp_path):
    fine, medium, coarse = _three(tmp_path)
    options = MeasureOptions(field="c", analyses=("conservation",))
    out = tmp_path / "conv"
    result = grid_convergence_run(fine, medium, coarse, options=options, out=out)
    table = pd.read_csv(out / "convergence.csv")
    assert list(table.columns[:12]) == ["quantity", "time", "value_fine", "value_medium", "value_coarse",
                                        "cell_size_fine", "cell_size_medium", "cell_size_coarse",
                                        "apparent_order", "extrapolated", "relative_error_fine", "gci_fine"]
    # h = (area / N)^(1/2) = 1/n on the unit square (Celik et al. 2008, eq. 1)
    assert [s.cell_size for s in result.sources] == pytest.approx([1 / n for n in CELLS], rel=1e-12)
    assert len(table) == len(result.table)
    rows = result.table[result.table["quantity"] == "phase_volume"].sort_values("time")
    assert rows["time"].tolist() == pytest.approx([0.0, 0.1, 0.2])  # the fine run's times, in every span
    t = rows["time"].to_numpy()
    for col, n in zip(("value_fine", "value_medium", "value_coarse"), CELLS):
        # midpoint rule of x^2: 1/3 - h^2/12 (interpolation in time is exact for this linear history)
        assert rows[col].to_numpy() == pytest.approx((1 / 3 - 1 / (12 * n * n)) * (1 - t / 2), rel=1e-10)
    assert rows["apparent_order"].to_numpy() == pytest.approx(2.0, rel=1e-6)
    assert rows["extrapolated"].to_numpy() == pytest.approx((1 - t / 2) / 3, rel=1e-9)
    assert not rows["oscillatory"].any()
    assert (out / "convergence.png").exists() and (out / "manifest.json").exists()


def test_measure_folders_give_the_same_table_as_series(tmp_path):
    paths = _three(tmp_path)
    options = MeasureOptions(field="c", analyses=("conservation",))
    folders = []
    for k, path in enumerate(paths):
        folder = tmp_path / f"m{k}"
        measure(path, options=options, out=folder, contours=False)
        folders.append(folder)
    from_series = grid_convergence_run(*paths, options=options).table
    from_folders = grid_convergence_run(*folders).table
    a = from_series[from_series["quantity"] == "phase_volume"].reset_index(drop=True)
    b = from_folders[from_folders["quantity"] == "phase_volume"].reset_index(drop=True)
    assert np.allclose(a["gci_fine"], b["gci_fine"], rtol=1e-8)
    assert np.allclose(a["extrapolated"], b["extrapolated"], rtol=1e-8)


def test_cli_refuses_existing_folder_and_wrong_order(tmp_path):
    fine, medium, coarse = _three(tmp_path)
    out = str(tmp_path / "conv")
    runner = CliRunner()
    args = ["convergence", fine, medium, coarse, "--field", "c", "--analyses", "conservation", "-o", out, "-q"]
    assert runner.invoke(main, args).exit_code == 0
    again = runner.invoke(main, args)
    assert again.exit_code == 2 and "--overwrite" in again.output
    assert runner.invoke(main, args + ["--overwrite"]).exit_code == 0
    swapped = runner.invoke(main, ["convergence", coarse, medium, fine, "--field", "c", "-o", out + "2"])
    assert swapped.exit_code == 2 and "FINE MEDIUM COARSE" in swapped.output
    assert not os.path.exists(out + "2")
    with pytest.raises(OptionError, match="field to measure"):
        grid_convergence_run(fine, medium, coarse)
