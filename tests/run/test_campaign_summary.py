"""campaign.csv names the time of its figures and the steps each run skipped, carries the closed drift of open
runs and the significance of D_num; campaign.png draws them as such."""

import json
import os
import warnings

import numpy as np
import pandas as pd
import pytest
import pyvista
from scipy import stats
from scipy.special import erfc

from phasegauge.errors import SeriesWarning
from phasegauge.meshgen import grid_mesh, to_meshio
from phasegauge.recipes import run_recipe
from phasegauge.report._campaign_report import plot_campaign
from phasegauge.run.campaign import campaign_warning

LENGTH, HEIGHT = 10.0, 1.0


def _channel(nx, ny):
    return grid_mesh((nx, ny), bounds=[(0.0, LENGTH), (0.0, HEIGHT)], kind="quad")


def _dye(mesh, flow_rate, diffusivity, k):
    """The dye stream at t = k: c = erfc((y - H/2) / sqrt(4 D_k x / U)) / 2, plug flow U = Q / H, D_k = D (k + 1) / 3
    (transverse diffusion from a step at the inlet: Crank, The Mathematics of Diffusion, 2nd ed., eq. 2.8, with
    x / U for the time; from memory)."""
    x, y = mesh.cell_centroids[:, 0], mesh.cell_centroids[:, 1]
    return 0.5 * erfc((y - 0.5 * HEIGHT) / np.sqrt(4 * diffusivity * (k + 1) / 3 * x / (flow_rate / HEIGHT)))


def _write_steps(folder, mesh, fields, flow_rate):
    os.makedirs(folder)
    velocity = np.zeros((mesh.n_cells, 3))
    velocity[:, 0] = flow_rate / HEIGHT
    for k, c in enumerate(fields):  # the time in each file's TimeValue (VTK's field data, which meshio leaves out)
        grid = pyvista.from_meshio(to_meshio(mesh, cell_data={"c": c, "U": velocity}))
        grid.field_data["TimeValue"] = np.array([float(k)])
        grid.save(os.path.join(folder, f"chan_{k:03d}.vtu"))


def _recipe(folder, flow_rates, tables):
    runs = "".join(f'[[runs]]\npath = "q{q:g}"\nparameter = {q}\nlabel = "q{q:g}"\n\n' for q in flow_rates)
    path = os.path.join(folder, "camp.toml")
    with open(path, "w") as f:
        f.write('[input]\nfield = "c"\nvelocity = "U"\n\n' + tables + '[interface]\ncontours = false\n\n'
                '[campaign]\nparameter = "flow_rate"\n\n' + runs + '[output]\nfolder = "out"\n')
    return path


def _mixing_index(c):
    """Danckwerts' mixing index 1 - sqrt(I), I = var(c) / (m (1 - m)) over equal cells (Danckwerts 1952,
    Appl. Sci. Res. A3, 279), in numpy."""
    m = c.mean()
    return 1 - np.sqrt(((c - m) ** 2).mean() / (m * (1 - m)))


def _axis(figure, title):
    """The panel whose title starts with ``title`` (its y label adds the unit)."""
    return next(ax for ax in figure.axes if ax.get_visible() and ax.get_title().startswith(title))


def test_a_run_with_skipped_last_steps_names_its_time_and_the_campaign_warns(tmp_path):
    # four dye streams listed out of order; q1.5's last file is cut short, q1 diverged after t = 0 (NaN)
    mesh = _channel(100, 10)
    flow_rates = (2.0, 0.5, 1.5, 1.0)
    for q in flow_rates:
        fields = [_dye(mesh, q, 0.04, k) for k in range(3)]
        if q == 1.0:
            fields[1] = fields[2] = np.full(mesh.n_cells, np.nan)
        _write_steps(str(tmp_path / f"q{q:g}"), mesh, fields, q)
    last = tmp_path / "q1.5" / "chan_002.vtu"
    data = last.read_bytes()
    last.write_bytes(data[: len(data) // 2])
    recipe = _recipe(str(tmp_path), flow_rates, '[mixing]\nsection_axis = "x"\n\n[run]\nanalyses = ["mixing", '
                                                '"conservation"]\n\n')
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        run_recipe(recipe, threads=1)
    table = pd.read_csv(tmp_path / "out" / "campaign.csv")
    assert list(table["run"]) == ["q0.5", "q1", "q1.5", "q2"]
    assert list(table["time"]) == [2.0, 0.0, 1.0, 2.0]
    assert list(table["skipped_steps"]) == [0, 2, 1, 0] and list(table["steps"]) == [3, 1, 2, 3]
    for q, t, value in zip(table["parameter"], table["time"], table["mixing_index"]):
        assert value == pytest.approx(_mixing_index(_dye(mesh, q, 0.04, int(t))), abs=1e-9)
    texts = [str(w.message) for w in caught]
    found = [str(w.message) for w in caught if w.category is SeriesWarning and "skipped steps" in str(w.message)]
    assert len(found) == 1, texts
    assert "2 runs skipped steps (q1: 2, q1.5: 1)" in found[0] and "(q1: 0.0, q1.5: 1.0)" in found[0]
    assert "time_to" in found[0]
    # each run's own warnings name the run: every run's files have the same names
    assert any(t.startswith("run q1.5: chan_002.vtu, step 2: step skipped") for t in texts), texts
    assert any(t.startswith("run q1: chan_001.vtu, step 1: step skipped") for t in texts), texts
    manifest = json.loads((tmp_path / "out" / "manifest.json").read_text())
    assert manifest["warnings"] == found


def test_runs_ending_at_one_time_to_round_off_give_no_warning():
    def table(last_times, steps=(3, 3), skipped=(0, 0)):
        return pd.DataFrame({"run": ["a", "b"], "time": last_times, "steps": steps, "skipped_steps": skipped})

    times = [np.array([0.0, 1.0, 2.0]), np.array([0.0, 1.0, 2.0])]
    # within 1e-6 of the median output interval (1): the span reach of the convergence command (our threshold)
    assert campaign_warning(table([2.0, 2.0 - 1e-7]), times) is None
    said = campaign_warning(table([2.0, 2.0 - 1e-5]), times)
    assert "1 run ends before t = 2.0, the latest run's last time (b: 1.99999)" in said
    # a steady result (one step, none skipped) is not compared; a run that skipped a middle step is named
    assert campaign_warning(table([2.0, 7.0], steps=(3, 1)), [times[0], np.array([7.0])]) is None
    said = campaign_warning(table([2.0, 2.0], steps=(3, 2), skipped=(0, 1)), times)
    assert "1 run skipped steps (b: 1)" in said and "leave those steps out" in said


def test_the_campaign_warning_writes_times_as_the_csv_tables_do():
    # outputs 1e-8 apart at t = 1000: to 10 digits both last times would read "1000"
    times = [np.array([1000.0 - 2e-8, 1000.0 - 1e-8, 1000.0])] * 2
    early = 1000.0 - 1e-8
    table = pd.DataFrame({"run": ["a", "b"], "time": [1000.0, early], "steps": [3, 3], "skipped_steps": [0, 0]})
    said = campaign_warning(table, times)
    # outside reference: pandas' to_csv writes the float as the text that reads back as the same float
    written = pd.DataFrame({"time": [early]}).to_csv(index=False).split()[1]
    assert float(written) == early
    assert f"(b: {written})" in said, said
    assert "before t = 1000.0," in said, said


def _filling(mesh, flow_rate, t):
    """A channel filling with dye in its lower half behind a front at x_f = 2 + U t (logistic, width 0.1)."""
    x, y = mesh.cell_centroids[:, 0], mesh.cell_centroids[:, 1]
    front = 2.0 + flow_rate / HEIGHT * t
    return np.where(y < 0.5 * HEIGHT, 1.0 / (1.0 + np.exp((x - front) / 0.1)), 0.0)


def test_an_open_channel_reports_the_drift_its_boundary_flow_leaves_unexplained(tmp_path):
    mesh = _channel(100, 10)
    for q in (1.0, 2.0):
        _write_steps(str(tmp_path / f"q{q:g}"), mesh, [_filling(mesh, q, t) for t in range(3)], q)
    recipe = _recipe(str(tmp_path), (1.0, 2.0), '[run]\nanalyses = ["mixing", "conservation"]\n\n')
    run_recipe(recipe, threads=1)
    table = pd.read_csv(tmp_path / "out" / "campaign.csv")
    assert list(table["open_boundary"]) == [True, True]
    # the phase volume H/2 x_f grows from H/2 * 2 to H/2 (2 + 2 U): a drift of U, all of it the inflow H/2 U
    # (analytic; the front's logistic tails lie inside the channel to exp(-20))
    assert np.allclose(table["phase_volume_drift"], table["parameter"] / HEIGHT, rtol=1e-6)
    assert np.allclose(table["phase_volume_drift_closed"], 0.0, atol=1e-6)  # our threshold
    figure = plot_campaign(table, parameter="flow_rate")
    ax = _axis(figure, "final phase-volume drift")
    assert "boundary flow added back" in ax.get_title()
    assert np.allclose(ax.lines[0].get_ydata(), table["phase_volume_drift_closed"])
    # a closed run beside an open one keeps its own drift, and the title says which runs are which
    mixed = table.assign(open_boundary=[True, False], phase_volume_drift_closed=[0.0, np.nan])
    ax = _axis(plot_campaign(mixed), "final phase-volume drift")
    assert np.allclose(ax.lines[0].get_ydata(), [0.0, table["phase_volume_drift"][1]])
    assert "open runs" in ax.get_title()


def test_d_num_carries_its_significance_and_an_unreached_mixing_length_stays_on_the_axis(tmp_path):
    # D = 0.4: the mixing length (about 6.5 Q) is not reached in the channel at Q = 2
    mesh = _channel(100, 10)
    flow_rates = (1.0, 2.0)
    for q in flow_rates:
        _write_steps(str(tmp_path / f"q{q:g}"), mesh, [_dye(mesh, q, 0.4, k) for k in range(3)], q)
    recipe = _recipe(str(tmp_path), flow_rates, '[mixing]\nsection_axis = "x"\nsection_count = 41\n\n')
    run_recipe(recipe, threads=1)
    table = pd.read_csv(tmp_path / "out" / "campaign.csv")
    for _, row in table.iterrows():
        audit = json.loads((tmp_path / "out" / row["folder"] / "diffusion_audit.json").read_text())
        assert row["D_num"] == pytest.approx(audit["D_num"], rel=1e-9)
        assert row["D_num_stderr"] == pytest.approx(audit["D_num_stderr"], rel=1e-9)
        assert bool(row["D_num_significant"]) is audit["significant"]
        # significant: the slope's two-sided 95 % interval (Student's t, n - 2 degrees of freedom; scipy)
        # lies above 0
        half = stats.t.ppf(0.975, audit["n_fit"] - 2) * audit["D_num_stderr"]
        assert audit["significant"] is bool(audit["D_num"] - half > 0)
    assert np.isfinite(table["mixing_length"][0]) and np.isnan(table["mixing_length"][1])
    assert (tmp_path / "out" / "campaign.png").exists()
    figure = plot_campaign(table, parameter="flow_rate", sections=True)
    ax = _axis(figure, "mixing length")
    (missed,) = [line for line in ax.lines if line.get_label() == "not reached"]
    assert list(missed.get_xdata()) == [2.0] and missed.get_markerfacecolor() == "none"
    low, high = ax.get_xlim()
    assert low < 1.0 and high > 2.0  # every flow rate on the axis
    ax = _axis(figure, "D_num")
    hollow = [line for line in ax.lines if line.get_label() == "not significant"]
    filled = [line for line in ax.lines if line.get_label() == "significant"]
    shown = np.concatenate([line.get_xdata() for line in hollow + filled])
    assert sorted(shown) == list(table["parameter"])
    assert all(line.get_markerfacecolor() == "none" for line in hollow)
    assert len(hollow) == int((~table["D_num_significant"].astype(bool)).any())


def test_the_command_line_shows_each_runs_warning_of_one_kind(tmp_path):
    # both runs' last files are cut short: the same warning, once per run (their files have the same names)
    from click.testing import CliRunner

    from phasegauge.cli import main

    mesh = _channel(40, 5)
    for q in (1.0, 2.0):
        _write_steps(str(tmp_path / f"q{q:g}"), mesh, [_dye(mesh, q, 0.04, k) for k in range(3)], q)
        last = tmp_path / f"q{q:g}" / "chan_002.vtu"
        last.write_bytes(last.read_bytes()[:1000])
    recipe = _recipe(str(tmp_path), (1.0, 2.0), '[run]\nanalyses = ["mixing"]\n\n')
    result = CliRunner().invoke(main, ["run", recipe, "-q", "--threads", "1"])
    assert result.exit_code == 0, result.output
    for run in ("q1", "q2"):
        assert f"phasegauge: warning: run {run}: chan_002.vtu, step 2: step skipped" in result.output, result.output
    assert result.output.count("2 runs skipped steps (q1: 1, q2: 1)") == 1
