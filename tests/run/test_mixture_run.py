"""Measured phase compositions in a measure run, against analytic binodals on fields built with known values."""

import os

import numpy as np
import pandas as pd
import pytest
from click.testing import CliRunner

from conftest import write_listing
from phasegauge import measure
from phasegauge.analysis.thermo import RegularSolutionModel
from phasegauge.cli import main
from phasegauge.errors import OptionError
from phasegauge.meshgen import grid_mesh, to_meshio
from phasegauge.run.measure import MeasureOptions

# Regular solution A = 3: binodal ln(x/(1-x)) = A (2x - 1) -> x = 0.070720 (analytic, REFERENCES.md);
# spinodal x (1 - x) = 1 / (2A) -> 0.211325
LEAN, RICH = 0.070720, 0.929280
EPS = 0.012


def _slab_series(folder, values, *, n=80, solute=None, temperature=None, order_parameter=False, centre=0.5):
    """A rich slab (|x - centre| < 1/4, periodic in x) in a lean matrix, tanh interfaces, one step per
    (lean, rich) pair.

    Bulk values are the truth; written as mole fraction (or as an order parameter in [-1, 1]).
    """
    mesh = grid_mesh((n, 8), bounds=[(0.0, 1.0), (0.0, 0.1)], kind="quad")
    x = mesh.cell_centroids[:, 0]
    across = np.abs((x - centre + 0.5) % 1.0 - 0.5)  # distance to the slab's centre, across x = 0 and 1
    profile = 0.5 * (1 + np.tanh((0.25 - across) / (2 * EPS)))   # logistic, Cahn & Hilliard 1958

    def step(k, lean, rich):
        comp = lean + (rich - lean) * profile
        data = {"x": 2 * comp - 1 if order_parameter else comp}
        if solute is not None:
            data["s"] = solute[k][0] + (solute[k][1] - solute[k][0]) * profile
        if temperature is not None:
            data["T"] = np.full(mesh.n_cells, temperature[k])
        return float(k), f"slab_{k}.vtu", mesh, data

    return write_listing(folder, (step(k, lean, rich) for k, (lean, rich) in enumerate(values)))


def _model_file(tmp_path, chi=3.0):
    path = tmp_path / "regular.toml"
    path.write_text(f'[model]\nkind = "regular"\ncomponent = "A"\nchi = {chi}\n')
    return str(path)


def test_bulk_compositions_of_a_tanh_slab_within_0_002_of_the_truth(tmp_path):
    truth = [(0.20, 0.80), (0.10, 0.90), (LEAN, RICH)]
    path = _slab_series(tmp_path, truth)
    res = measure(path, "x", model=RegularSolutionModel(A_a=3.0), temperature=300.0,
                  analyses=("interface", "conservation"))
    steps = res.steps
    for k, (lean, rich) in enumerate(truth):   # the tolerance: 0.002 of the built values
        assert steps["bulk_composition_lean"].iat[k] == pytest.approx(lean, abs=2e-3)
        assert steps["bulk_composition_rich"].iat[k] == pytest.approx(rich, abs=2e-3)
    # the regular-solution analytic binodal at A = 3
    assert steps["binodal_lean"].iat[0] == pytest.approx(LEAN, abs=1e-6)
    assert steps["binodal_rich"].iat[0] == pytest.approx(RICH, abs=1e-6)
    assert steps["equilibrium_gap"].iat[0] == pytest.approx(0.20 - LEAN, abs=2e-3)
    assert steps["equilibrium_gap"].iat[-1] < 2e-3
    assert steps["separated"].all()
    kinds = [f.kind for f in res.findings]
    assert "binodal_reached" in kinds
    reached = next(f for f in res.findings if f.kind == "binodal_reached")
    assert reached.figures["equilibrium_time"] == 2.0


def test_order_parameter_maps_through_the_range(tmp_path):
    path = _slab_series(tmp_path, [(LEAN, RICH)], order_parameter=True)
    res = measure(path, "x", range=(-1, 1), model=RegularSolutionModel(A_a=3.0), temperature=300.0,
                  analyses=("interface",))
    assert res.steps["bulk_composition_lean"].iat[0] == pytest.approx(LEAN, abs=2e-3)
    assert res.steps["bulk_composition_rich"].iat[0] == pytest.approx(RICH, abs=2e-3)


def test_mixture_state_on_both_sides_of_the_binodal(tmp_path):
    # uniform fields: mean 0.06 (outside the binodal 0.070720: stable), 0.10 (between binodal and spinodal
    # 0.211325: metastable), 0.5 (inside the spinodal: unstable, and still mixed)
    mesh = grid_mesh((10, 10), kind="quad")
    lines = []
    for k, value in enumerate((0.06, 0.10, 0.5)):
        to_meshio(mesh, cell_data={"x": np.full(mesh.n_cells, value)}).write(str(tmp_path / f"u_{k}.vtu"))
        lines.append(f"{float(k)},u_{k}.vtu")
    (tmp_path / "run.steps").write_text("\n".join(lines) + "\n")
    res = measure(str(tmp_path / "run.steps"), "x", model=RegularSolutionModel(A_a=3.0), temperature=300.0,
                  analyses=("interface",))
    assert list(res.steps["mixture_state"]) == ["stable", "metastable", "unstable"]
    assert not res.steps["separated"].any()
    finding = next(f for f in res.findings if f.kind == "mixed_inside_spinodal")
    assert finding.severity == "warning" and "still mixed inside the spinodal" in finding.text


def test_separated_where_the_model_predicts_one_phase(tmp_path):
    # A = 1.5 < 2 (the analytic critical value): one stable phase at every composition
    path = _slab_series(tmp_path, [(0.1, 0.9), (0.12, 0.88)])
    res = measure(path, "x", model=RegularSolutionModel(A_a=1.5), temperature=300.0, analyses=("interface",))
    assert np.isnan(res.steps["binodal_lean"]).all()
    finding = next(f for f in res.findings if f.kind == "separated_one_phase")
    assert "separated although the model predicts one stable phase" in finding.text
    assert finding.severity == "warning"


def test_gap_within_the_gibbs_thomson_shift_is_a_note_not_a_warning(tmp_path):
    # a rich drop of radius 0.2 whose bulk values sit 0.02 off the planar binodal (A = 3)
    mesh = grid_mesh((100, 100), kind="quad")
    c = mesh.cell_centroids[:, :2] - 0.5
    r = np.hypot(c[:, 0], c[:, 1])
    profile = 0.5 * (1 + np.tanh((0.2 - r) / (2 * EPS)))
    comp = (LEAN + 0.02) + (RICH + 0.02 - LEAN - 0.02) * profile
    to_meshio(mesh, cell_data={"x": comp}).write(str(tmp_path / "drop.vtu"))
    common = dict(model=RegularSolutionModel(A_a=3.0), temperature=300.0, analyses=("interface", "droplets"))
    flagged = measure(str(tmp_path / "drop.vtu"), "x", **common)
    assert "binodal_gap" in [f.kind for f in flagged.findings]
    assert flagged.steps["drop_radius"].iat[0] == pytest.approx(0.2, rel=0.02)
    # the leading-order shift (Porter & Easterling 1992, section 1.5) for l = 0.05 is about 0.05 here
    excused = measure(str(tmp_path / "drop.vtu"), "x", capillary_length=0.05, **common)
    kinds = [f.kind for f in excused.findings]
    assert "binodal_gap" not in kinds and "binodal_gibbs_thomson" in kinds
    assert excused.steps["gibbs_thomson_shift"].iat[0] > 0.02


def test_solute_partition_and_extraction_progress(tmp_path):
    # solute 0.01 in the lean matrix, 0.04 in the rich slab (K = 4 built in); the slab is half the domain
    path = _slab_series(tmp_path, [(LEAN, RICH)], solute=[(0.01, 0.04)])
    res = measure(path, "x", model=RegularSolutionModel(A_a=3.0), temperature=300.0, solute="s",
                  analyses=("interface",))
    row = res.steps.iloc[0]
    assert row["solute_lean"] == pytest.approx(0.01, abs=1e-4)
    assert row["solute_rich"] == pytest.approx(0.04, abs=1e-4)
    assert row["partition_coefficient"] == pytest.approx(4.0, rel=0.01)
    # analytic: the solute on the slab's side of the contour over the whole amount; the logistic profile
    # misses int_0^inf (1 - 1/(1 + e^(-u/eps))) du = eps ln 2 at each of the two interfaces
    inside = 0.5 * 0.01 + 0.03 * (0.5 - 2 * EPS * np.log(2))
    assert row["extraction_progress"] == pytest.approx(inside / (0.01 + 0.03 * 0.5), abs=2e-3)
    assert abs(row["lever_rule_residual"]) < 1e-3


def test_temperature_field_and_the_command_line(tmp_path):
    path = _slab_series(tmp_path, [(LEAN, RICH), (LEAN, RICH)], temperature=[300.0, 300.0])
    out = tmp_path / "out"
    res = CliRunner().invoke(main, ["measure", path, "-f", "x", "--model", _model_file(tmp_path),
                                    "--temperature-field", "T", "-o", str(out), "--quiet"])
    assert res.exit_code == 0, res.output
    steps = pd.read_csv(out / "steps.csv")
    for column in ("bulk_composition_lean", "bulk_composition_rich", "binodal_lean", "binodal_rich",
                   "equilibrium_gap", "mixture_state"):
        assert column in steps
    assert steps["temperature"].iat[0] == 300.0
    assert (out / "phase_compositions.png").exists()


def test_mixture_options_are_checked_first(tmp_path):
    with pytest.raises(OptionError, match="one temperature"):
        MeasureOptions(field="x", model=RegularSolutionModel(A_a=3.0))
    with pytest.raises(OptionError, match="without a mixture model"):
        MeasureOptions(field="x", temperature=300.0)
    with pytest.raises(OptionError, match="temperature must be a number > 0"):
        MeasureOptions(field="x", model=RegularSolutionModel(A_a=3.0), temperature=-1.0)
    with pytest.raises(OptionError, match="interface analysis"):
        MeasureOptions(field="x", model=RegularSolutionModel(A_a=3.0), temperature=300.0, analyses=("mixing",))
    opts = MeasureOptions(field="x", model=_model_file(tmp_path), temperature=300.0)
    assert isinstance(opts.model, RegularSolutionModel)
    assert opts.key() != MeasureOptions(field="x", model=_model_file(tmp_path, chi=2.5), temperature=300.0).key()


def test_the_solvent_quench_sample_separates_cold_and_mixes_hot():
    """The demo series against its own model: on the binodal within the tolerance after the quench,
    one stable phase after heating (no critical point below 370 K is crossed back), mean composition
    conserved (Cahn-Hilliard conserves the mean, Cahn & Hilliard 1958)."""
    root = os.path.join(os.path.dirname(__file__), os.pardir, os.pardir, "sample_fields")
    res = measure(os.path.join(root, "solvent_quench.xdmf"), "x", model=os.path.join(root, "solvent_pair.toml"),
                  temperature_field="T", solute="s", analyses=("interface", "droplets"))
    steps = res.steps
    cold, hot = steps[steps["temperature"] < 300], steps[steps["temperature"] > 360]
    assert cold["separated"].iat[-1] and cold["equilibrium_gap"].iat[-1] < 0.01
    assert np.isnan(hot["binodal_lean"]).all() and (hot["mixture_state"] == "stable").all()
    assert not hot["separated"].iat[-1]
    assert np.ptp(steps["mean_composition"]) < 1e-6
    assert cold["partition_coefficient"].iat[-1] > 2     # the solute moves into the rich liquid (K = 3 built in)
    assert "binodal_reached" in [f.kind for f in res.findings]


def test_miscibility_recipe_table_is_checked_before_any_work(tmp_path):
    from phasegauge.recipes import load_recipe

    base = '[input]\npath = "x.vtu"\nfield = "x"\n[output]\nfolder = "o"\n'
    recipe = tmp_path / "r.toml"
    recipe.write_text(base + '[miscibility]\nmodle = "m.toml"\n')
    with pytest.raises(OptionError, match="did you mean 'model'"):
        load_recipe(recipe)
    recipe.write_text(base + '[miscibility]\ntemperature = 300.0\n')
    with pytest.raises(OptionError, match=r"\[miscibility\] needs 'model'"):
        load_recipe(recipe)
    _model_file(tmp_path)
    recipe.write_text(base + '[miscibility]\nmodel = "regular.toml"\n')
    with pytest.raises(OptionError, match=r"\[miscibility\] a mixture model needs one temperature"):
        load_recipe(recipe)
    recipe.write_text(base + '[miscibility]\nmodel = "regular.toml"\ntemperature = 300.0\n')
    assert load_recipe(recipe)["miscibility"]["model"] == str(tmp_path / "regular.toml")


@pytest.mark.parametrize("value, message", [("hot", "temperature must be a number, found 'hot'"),
                                            (float("inf"), "temperature must be finite, found inf"),
                                            (0.0, "temperature must be a number > 0, found 0.0")])
def test_mixture_numbers_take_the_shared_finite_number_check(value, message):
    # the one check of model/_numbers.finite_number (its wording for text and infinities), then > 0
    with pytest.raises(OptionError, match=message) as info:
        MeasureOptions(field="x", model=RegularSolutionModel(A_a=3.0), temperature=value)
    assert info.value.fix == "give it in K, for example 298.15"


def test_bulk_compositions_of_a_slab_measured_periodic(tmp_path, monkeypatch):
    # the rich slab wraps the x boundary (centre 0.22: interfaces at x = 0.47 and 0.97): the rich cells
    # just past x = 0 lie within the bulk reach of the interface at 0.97 only across the boundary.
    # Wrapped, both bulk values are off the built ones by the logistic tail beyond the reach alone
    # (1.25e-6 measured); without the wrap those cells count as bulk and the rich value is 3.2e-6 off
    from phasegauge.analysis import thermo

    asked, distance = [], thermo.interface_distance
    monkeypatch.setattr(thermo, "interface_distance", lambda *a, **k: asked.append(k["periodic"]) or distance(*a, **k))
    truth = [(0.10, 0.90), (LEAN, RICH)]
    res = measure(_slab_series(tmp_path, truth, centre=0.22), "x", model=RegularSolutionModel(A_a=3.0),
                  temperature=300.0, analyses=("interface", "conservation"), periodic=("x",))
    for k, (lean, rich) in enumerate(truth):
        assert res.steps["bulk_composition_lean"].iat[k] == pytest.approx(lean, abs=2e-3)
        assert res.steps["bulk_composition_rich"].iat[k] == pytest.approx(rich, abs=2e-6)
    assert asked == [("x",)] * len(truth)


def test_a_bulk_without_a_plateau_is_not_called_mixed(tmp_path):
    # a separated slab whose lean bulk ramps away from it (0.03 to 0.4, no plateau) and whose rich side
    # is at 0.93 (separated by construction: a jump of 0.5 or more across a tanh of width 4 EPS); the
    # 5-95 % levels fall into the ramp, the measured width grows until no bulk is left beyond it: the run
    # must say the bulk was not measured, not "still mixed inside the spinodal" (the mean, 0.4 or so,
    # lies inside the analytic spinodal 0.21-0.79, so the old verdict was that)
    mesh = grid_mesh((200, 8), bounds=[(0.0, 1.0), (0.0, 0.1)], kind="quad")
    across = np.abs(mesh.cell_centroids[:, 0] - 0.5)
    profile = 0.5 * (1 + np.tanh((0.25 - across) / (2 * EPS)))
    lean = 0.03 + 0.37 * np.clip((across - 0.25) / 0.25, 0.0, 1.0)
    comp = lean + (0.93 - lean) * profile
    path = write_listing(tmp_path, [(0.0, "ramp_0.vtu", mesh, {"x": comp}), (1.0, "ramp_1.vtu", mesh, {"x": comp})])
    res = measure(path, "x", model=RegularSolutionModel(A_a=3.0), temperature=300.0, analyses=("interface",))
    assert (res.steps["mixture_state"] == "unstable").all() and not res.steps["bulk_composition_lean"].notna().any()
    kinds = [f.kind for f in res.findings]
    assert "mixed_inside_spinodal" not in kinds and "bulk_not_measured" in kinds


def test_a_quench_noise_is_mixed_not_separated(tmp_path):
    # mean 0.5 inside the analytic spinodal (0.21-0.79) with noise of +-0.05 (a quench): the bulks on
    # the two sides of the noise's contour lie a few hundredths apart, far under half the binodal's gap
    # (0.86), so the run is mixed inside the spinodal, not separated
    mesh = grid_mesh((60, 60), kind="quad")
    noise = np.random.default_rng(3).uniform(-0.05, 0.05, mesh.n_cells)
    path = write_listing(tmp_path, [(float(k), f"q_{k}.vtu", mesh, {"x": 0.5 + noise}) for k in range(2)])
    res = measure(path, "x", model=RegularSolutionModel(A_a=3.0), temperature=300.0,
                  analyses=("interface", "conservation"))
    assert not res.steps["separated"].any()
    assert "mixed_inside_spinodal" in [f.kind for f in res.findings]


def test_sharp_plateaus_under_half_the_binodal_gap_are_separated(tmp_path):
    # two flat plateaus with a sharp tanh interface between them, at 0.3 / 0.7 and 0.35 / 0.65 (both
    # inside the analytic spinodal 0.21-0.79, apart by less than half the binodal's gap 0.86 but more than
    # a quarter): the bulks are measured within 0.002 of the built values, the run is separated with its
    # bulks off the analytic binodal (0.0707 / 0.9293) by 0.229 and 0.279, not "still mixed" (before: the
    # plateaus were taken as 0 and 1, no bulk was measured, and the narrow span read as a quench's noise)
    truth = [(0.3, 0.7), (0.35, 0.65)]
    res = measure(_slab_series(tmp_path, truth), "x", model=RegularSolutionModel(A_a=3.0), temperature=300.0,
                  analyses=("interface",))
    steps = res.steps
    for k, (lean, rich) in enumerate(truth):
        assert steps["bulk_composition_lean"].iat[k] == pytest.approx(lean, abs=2e-3)
        assert steps["bulk_composition_rich"].iat[k] == pytest.approx(rich, abs=2e-3)
        assert steps["equilibrium_gap"].iat[k] == pytest.approx(max(lean - LEAN, RICH - rich), abs=2e-3)
    assert steps["separated"].all()
    kinds = [f.kind for f in res.findings]
    assert "mixed_inside_spinodal" not in kinds and "binodal_gap" in kinds


@pytest.mark.parametrize("amplitude", [0.05, 0.1])
def test_an_early_spinodal_pattern_is_not_separated(tmp_path, amplitude):
    # Gaussian-smoothed noise (scipy's gaussian_filter, 3 cells) of amplitude 0.05 or 0.1 about 0.5,
    # inside the analytic spinodal: the peaks beyond the measured width are narrow and lie a few
    # hundredths apart, under a quarter of the binodal's gap (0.86 / 4), so no seed reads separated
    from scipy.ndimage import gaussian_filter

    mesh = grid_mesh((96, 96), kind="quad")
    for seed in range(3):
        noise = gaussian_filter(np.random.default_rng(seed).normal(size=(96, 96)), 3, mode="wrap")
        comp = 0.5 + amplitude * noise / np.abs(noise).max()
        folder = tmp_path / f"s{seed}"
        folder.mkdir()
        path = write_listing(folder, [(0.0, "p_0.vtu", mesh, {"x": comp.T.ravel()})])
        res = measure(path, "x", model=RegularSolutionModel(A_a=3.0), temperature=300.0, analyses=("interface",))
        assert not res.steps["separated"].any(), seed


def test_drops_in_a_mixture_whose_mean_composition_is_stable_are_warned_of(tmp_path):
    # a rich drop (radius 0.13, tanh) at the analytic binodal 0.9293 in a matrix at 0.01: the mean
    # composition, 0.01 + 0.9193 pi 0.13^2 = 0.0589, lies below the binodal's lean end 0.0707, so the
    # model predicts one stable phase for this mixture (the drop should dissolve): a warning naming it
    mesh = grid_mesh((300, 300), kind="quad")
    r = np.linalg.norm(mesh.cell_centroids[:, :2] - 0.5, axis=1)
    comp = 0.01 + (RICH - 0.01) * 0.5 * (1 + np.tanh((0.13 - r) / (2 * 0.003)))
    path = write_listing(tmp_path, [(0.0, "d_0.vtu", mesh, {"x": comp})])
    res = measure(path, "x", model=RegularSolutionModel(A_a=3.0), temperature=300.0, analyses=("interface",))
    step = res.steps.iloc[0]
    assert step["mean_composition"] == pytest.approx(0.01 + (RICH - 0.01) * np.pi * 0.13 ** 2, abs=5e-4)
    assert step["separated"] and step["mixture_state"] == "stable"
    finding = next(f for f in res.findings if f.kind == "separated_one_phase")
    assert finding.severity == "warning" and "for the mean composition 0.05889" in finding.text


def test_a_run_in_the_second_two_phase_region_is_measured_against_it(tmp_path):
    # the shipped solvent pair (NRTL) at 100 K has two two-phase regions, about (0.0004, 0.519) and
    # (0.5345, 0.9999) by scipy's convex hull (tests/analysis/test_mixture_state_two_regions.py); a slab
    # with its bulks on the second region's ends is on the binodal (before: measured against the first,
    # widest region, 0.48 off)
    from scipy.spatial import ConvexHull

    from phasegauge.io._model_file import read_mixture_model

    root = os.path.join(os.path.dirname(__file__), "..", "..", "sample_fields")
    model = read_mixture_model(os.path.join(root, "solvent_pair.toml"))
    x = np.linspace(1e-6, 1 - 1e-6, 200001)  # the second region by Qhull's lower hull of the free energy
    hull = ConvexHull(np.c_[x, model.mixing_gibbs(x, 100.0)])
    lower = sorted({int(i) for simplex, eq in zip(hull.simplices, hull.equations) if eq[1] < 0 for i in simplex})
    (_, _), (lean, rich) = [(x[a], x[b]) for a, b in zip(lower[:-1], lower[1:]) if b - a > 1 and x[b] - x[a] > 1e-3]
    path = _slab_series(tmp_path, [(lean, rich)], n=400)
    res = measure(path, "x", model=model, temperature=100.0, analyses=("interface",), level=0.5 * (lean + rich))
    step = res.steps.iloc[0]
    assert step["binodal_lean"] == pytest.approx(lean, abs=1e-5)
    assert step["binodal_rich"] == pytest.approx(rich, abs=1e-5)
    assert step["interface_width"] == pytest.approx(2 * np.log(19.0) * EPS, rel=0.03)  # between the plateaus
    assert step["separated"] and step["equilibrium_gap"] < 2e-3
    assert "binodal_reached" in [f.kind for f in res.findings]


def test_a_double_well_off_the_mapped_scale_is_refused(tmp_path):
    # a double well written on an order parameter's scale (-1, 1): the measured compositions are on the
    # mapped scale 0..1, so its bulk values could never be reached; refused in one line with the fix
    from phasegauge.model.mixture_models import DoubleWellModel

    path = _slab_series(tmp_path, [(LEAN, RICH)], order_parameter=True)
    with pytest.raises(OptionError, match=r"bulk values \(-1, 1\) lie outside \[0, 1\].*lean = 0, rich = 1"):
        measure(path, "x", range=(-1, 1), model=DoubleWellModel(lean=-1.0, rich=1.0), temperature=300.0,
                analyses=("interface",))


def test_a_run_whose_phase_diagram_reaches_an_unsolvable_temperature_finishes_with_its_tables(tmp_path):
    # A = 10500 / T: at 300 K the binodal is 6.3e-16 (the root of ln(x/(1-x)) = A (2x - 1), analytic, by
    # scipy's brentq); the report's diagram spans 255-345 K, and below about 290 K a phase is purer than a
    # float carries: those temperatures are left empty in the report's drawing, without a warning (the
    # run was refused whole; the steps' own temperature solves)
    from scipy.optimize import brentq

    a = 10500.0 / 300.0
    lean = brentq(lambda x: np.log(x) - np.log1p(-x) - a * (2 * x - 1), 1e-300, 0.01, xtol=1e-310, rtol=1e-15)
    path = _slab_series(tmp_path, [(lean, 1 - lean)] * 2)
    model = tmp_path / "immiscible.toml"
    model.write_text('[model]\nkind = "regular"\ncomponent = "oil"\nA_b = 10500.0\n')
    out = tmp_path / "out"
    res = CliRunner().invoke(main, ["measure", path, "-f", "x", "--model", str(model), "--temperature", "300",
                                    "-o", str(out), "--quiet"])
    assert res.exit_code == 0, res.output
    steps = pd.read_csv(out / "steps.csv")
    assert steps["binodal_lean"].iat[0] == pytest.approx(lean, rel=1e-9)
    assert (out / "report.html").exists() and (out / "phase_compositions.png").exists()
    assert "the binodal was not solved at" not in res.output
