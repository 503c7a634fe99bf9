"""steps.csv and campaign.csv say what each mixing length is (``mixing_length_status``), and campaign.png draws
an upper bound as a bound, a length not reached beyond the panel and an undefined one at no value.

Outside reference: the erf solution of two streams entering a channel 0 < y < 1 in plug flow, walls without
flux (Crank 1975, The Mathematics of Diffusion, method of images), whose intensity of segregation is
I(x) = sum_{n odd} 8 / (n pi)^2 exp(-2 n^2 pi^2 kappa x) (Parseval; Danckwerts 1952), kappa = D / U; the
mixing length (1 - sqrt(I) = 0.9) solved with scipy's brentq.
"""

import os

import numpy as np
import pandas as pd
import pytest
from scipy import optimize, special

from phasegauge.meshgen import grid_mesh, to_meshio
from phasegauge.recipes import run_recipe
from phasegauge.report._campaign_report import plot_campaign

LENGTH = 6.0
SECTIONS = [0.5 + 0.5 * k for k in range(11)]  # 0.5 to 5.5
#: (label, kappa = D / U, where the streams meet): mixed by the first section, reached, undefined (pure carrier
#: at the first section), not reached within the channel
RUNS = (("fast", 0.6, 0.0), ("middle", 0.05, 0.0), ("late", 0.1, 1.0), ("slow", 0.02, 0.0))


def _two_streams(x, y, kappa, images=6):
    scale = 2 * np.sqrt(kappa * np.maximum(x, 1e-300))
    c = np.zeros_like(y)
    for k in range(-images, images + 1):
        c += 0.5 * (special.erf((y - 0.5 + 2 * k) / scale) - special.erf((y - 1.5 + 2 * k) / scale))
    return c


def _exact_length(kappa, target=0.9, terms=200):
    n = np.arange(1, 2 * terms, 2)
    def index(x):
        return 1 - np.sqrt(np.sum(8 / (n * np.pi) ** 2 * np.exp(-2 * (n * np.pi) ** 2 * kappa * x)))

    return optimize.brentq(lambda x: index(x) - target, 1e-3, 100.0)


def _campaign(folder):
    mesh = grid_mesh((120, 40), [(0.0, LENGTH), (0.0, 1.0)])
    x, y = mesh.cell_centroids[:, 0], mesh.cell_centroids[:, 1]
    u = np.zeros((mesh.n_cells, 3))
    u[:, 0] = 1.0
    runs = ""
    for label, kappa, meet in RUNS:
        c = np.where(x < meet, 0.0, _two_streams(x - meet, y, kappa))
        to_meshio(mesh, cell_data={"c": c, "U": u}).write(os.path.join(folder, f"{label}.vtu"))
        runs += f'[[runs]]\npath = "{label}.vtu"\nparameter = {kappa}\nlabel = "{label}"\n\n'
    recipe = os.path.join(folder, "camp.toml")
    with open(recipe, "w") as f:
        f.write('[input]\nfield = "c"\nvelocity = "U"\n\n[mixing]\nsection_axis = "x"\n'
                f'section_positions = {SECTIONS}\n\n[run]\nanalyses = ["mixing"]\n\n'
                '[campaign]\nparameter = "kappa"\n\n' + runs + '[output]\nfolder = "out"\n')
    with pytest.warns():
        run_recipe(recipe, threads=1)
    return pd.read_csv(os.path.join(folder, "out", "campaign.csv")).set_index("run")


@pytest.fixture(scope="module")
def campaign(tmp_path_factory):
    folder = tmp_path_factory.mktemp("status")
    return folder, _campaign(str(folder))


def test_each_runs_steps_and_the_campaign_carry_the_status_beside_the_length(campaign):
    folder, table = campaign
    assert list(table.columns).index("mixing_length_status") == list(table.columns).index("mixing_length") + 1
    status = table["mixing_length_status"].to_dict()
    assert status == {"fast": "upper_bound", "middle": "reached", "late": "undefined", "slow": "not_reached"}
    for label, _, _ in RUNS:
        steps = pd.read_csv(folder / "out" / f"run_{label}" / "steps.csv")
        assert steps["mixing_length_status"][0] == status[label]
        columns = list(steps.columns)
        assert columns.index("mixing_length_status") == columns.index("mixing_length") + 1
    # reached: the analytic length 4.45 within 0.05 (our tolerance: sections 0.5 apart, cell data)
    assert table.loc["middle", "mixing_length"] == pytest.approx(_exact_length(0.05), abs=0.05)
    # mixed before the first section (analytic 0.37): its distance, an upper bound
    assert _exact_length(0.6) < table.loc["fast", "mixing_length"] == SECTIONS[0]
    assert _exact_length(0.02) > LENGTH and np.isnan(table.loc["slow", "mixing_length"])
    assert np.isnan(table.loc["late", "mixing_length"])


def test_the_campaign_plot_draws_each_status_as_what_it_is(campaign):
    _, table = campaign
    figure = plot_campaign(table.reset_index(), parameter="kappa", sections=True)
    ax = next(a for a in figure.axes if a.get_title() == "mixing length")
    lines = {line.get_label(): line for line in ax.lines}
    reached = lines["reached"]
    assert list(reached.get_xdata()) == [0.05] and reached.get_marker() == "o"
    assert list(reached.get_ydata()) == [table.loc["middle", "mixing_length"]]
    (bound,) = [line for label, line in lines.items() if label.startswith("upper bound")]
    assert bound.get_marker() == "v" and list(bound.get_xdata()) == [0.6]  # a downward triangle: a bound
    assert list(bound.get_ydata()) == [SECTIONS[0]] and bound.get_linestyle() == "None"
    missed = lines["not reached"]
    assert missed.get_marker() == "^" and list(missed.get_xdata()) == [0.02]
    assert missed.get_ydata()[0] > table["mixing_length"].max() and missed.get_markerfacecolor() == "none"
    # undefined: at no value anywhere on the panel, named in the legend
    assert all(0.1 not in np.asarray(line.get_xdata(), dtype=float) for line in ax.lines)
    texts = [t.get_text() for t in ax.get_legend().get_texts()]
    assert "undefined (inflow refused): late" in texts
    assert ax.get_ylim()[0] == 0.0


def test_a_table_without_the_status_reads_a_length_as_reached_and_nan_as_not_reached():
    # a campaign.csv from runs measured before the column: as it was drawn then
    table = pd.DataFrame({"run": ["a", "b"], "parameter": [1.0, 2.0], "mixing_length": [1.5, np.nan]})
    ax = next(a for a in plot_campaign(table, sections=True).axes if a.get_title() == "mixing length")
    lines = {line.get_label(): line for line in ax.lines}
    assert list(lines["reached"].get_xdata()) == [1.0] and list(lines["not reached"].get_xdata()) == [2.0]
    assert not any(label.startswith(("upper bound", "undefined")) for label in lines)



def test_the_reached_line_breaks_at_a_run_not_reached_and_has_no_entry_when_none_reached():
    # runs 1 and 3 reached, run 2 (between them in the parameter) undefined: the line is not drawn across it
    table = pd.DataFrame({"run": ["a", "b", "c"], "parameter": [3.0, 1.0, 2.0], "mixing_length": [2.0, 1.0, np.nan],
                          "mixing_length_status": ["reached", "reached", "undefined"]})
    ax = next(a for a in plot_campaign(table, sections=True).axes if a.get_title() == "mixing length")
    lines = {line.get_label(): line for line in ax.lines}
    xs = np.asarray(lines["reached"].get_xdata(), dtype=float)
    assert xs[0] == 1.0 and np.isnan(xs[1]) and xs[2] == 3.0 and xs.size == 3
    table["mixing_length_status"] = ["upper_bound", "upper_bound", "undefined"]
    ax = next(a for a in plot_campaign(table, sections=True).axes if a.get_title() == "mixing length")
    assert "reached" not in [t.get_text() for t in ax.get_legend().get_texts()]

def test_a_resumed_campaign_reads_the_status_back_from_each_runs_steps_csv():
    # campaign_summary takes the word as steps.csv holds it; an empty cell (read back as NaN) is no status
    import io

    from phasegauge.run.campaign import campaign_summary

    steps = pd.read_csv(io.StringIO("step,time,mixing_length,mixing_length_status\n0,0.0,0.5,upper_bound\n"))
    assert campaign_summary(steps, {})["mixing_length_status"] == "upper_bound"
    empty = pd.read_csv(io.StringIO("step,time,mixing_length,mixing_length_status\n0,0.0,,\n"))
    assert campaign_summary(empty, {})["mixing_length_status"] is None
    assert campaign_summary(steps.drop(columns="mixing_length_status"), {})["mixing_length_status"] is None
