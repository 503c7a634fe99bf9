"""The verdicts of a measure run with a mixture model on runs whose truth is built in: a binodal pair off 0.5,
plateaus quenched deeper, lean drops and --phase lower. The coexisting compositions are checked against
isoactivity solved here with scipy on the binary NRTL of Renon & Prausnitz (1968), written out below."""

import numpy as np
import pytest
from scipy.optimize import fsolve

from conftest import write_listing
from phasegauge import measure
from phasegauge.analysis.thermo import NrtlModel, RegularSolutionModel, gibbs_thomson_shift
from phasegauge.meshgen import grid_mesh

# the shipped solvent pair (sample_fields/solvent_pair.toml): tau_ij = a_ij + b_ij / T, alpha 0.3
PAIR = dict(tau_a=(-1.6, -1.0), tau_b=(1000.0, 820.0), alpha=0.3)
# a pair shaped like 1-butanol + water: tau = b / T fitted (scipy fsolve on the isoactivity below) to the
# binodal x = 0.019 / 0.49 at 298.15 K
BUTANOL = dict(tau_a=(0.0, 0.0), tau_b=(-54.16630273, 1223.83104002), alpha=0.3)
N, EPS = 120, 0.012


def _mu(pair, x, t):
    """Chemical potentials over RT of the binary NRTL (Renon & Prausnitz 1968, AIChE J. 14, 135)."""
    t12, t21 = (a + b / t for a, b in zip(pair["tau_a"], pair["tau_b"]))
    g12, g21 = np.exp(-pair["alpha"] * t12), np.exp(-pair["alpha"] * t21)
    x1, x2 = x, 1 - x
    ln1 = x2 ** 2 * (t21 * (g21 / (x1 + x2 * g21)) ** 2 + t12 * g12 / (x2 + x1 * g12) ** 2)
    ln2 = x1 ** 2 * (t12 * (g12 / (x2 + x1 * g12)) ** 2 + t21 * g21 / (x1 + x2 * g21) ** 2)
    return np.array([np.log(x1) + ln1, np.log(x2) + ln2])


def _coexisting(pair, t, guess, delta=0.0):
    """The pair (drop, matrix) with mu(drop) + delta = mu(matrix) for both components (isoactivity for
    delta = 0; a drop under the pressure jump (d - 1) sigma / R otherwise), by scipy's fsolve in logits."""
    def residual(u):
        drop, matrix = 1 / (1 + np.exp(-u))
        return _mu(pair, drop, t) + delta - _mu(pair, matrix, t)

    u = fsolve(residual, np.log(np.asarray(guess) / (1 - np.asarray(guess))), xtol=1e-13)
    return tuple(1 / (1 + np.exp(-u)))


def _drops(centres, radius):
    """Signed distance (positive inside) of the cells of an N x N unit grid to the nearest of round drops."""
    mesh = grid_mesh((N, N), kind="quad")
    xy = mesh.cell_centroids[:, :2]
    return mesh, np.max([radius - np.hypot(*(xy - c).T) for c in centres], axis=0)


def _profile(distance, outside, inside, eps=EPS):
    """Cahn & Hilliard's (1958) tanh profile from ``outside`` to ``inside`` across distance 0."""
    return outside + (inside - outside) * 0.5 * (1 + np.tanh(distance / (np.sqrt(2) * eps)))


def test_a_binodal_pair_below_the_level_is_measured_with_its_middle_and_warned_of_without(tmp_path):
    # a butanol-rich drop (0.49) in water (0.019) at 298.15 K: the field never crosses 0.5, but spans the
    # binodal's whole gap; without --level it is not "still mixed" and the level to give is named
    lean, rich = _coexisting(BUTANOL, 298.15, (0.02, 0.5))
    assert (lean, rich) == pytest.approx((0.019, 0.49), abs=1e-6)
    mesh, distance = _drops([(0.5, 0.5)], 0.25)
    comp = _profile(distance, lean, rich)
    path = write_listing(tmp_path, [(float(k), f"b_{k}.vtu", mesh, {"x": comp}) for k in range(2)])
    model = NrtlModel(**BUTANOL)
    common = dict(model=model, temperature=298.15, analyses=("interface", "droplets"))
    res = measure(path, "x", level=0.25, **common)
    steps = res.steps
    assert steps["binodal_lean"].iat[0] == pytest.approx(lean, abs=1e-6)
    assert steps["binodal_rich"].iat[0] == pytest.approx(rich, abs=1e-6)
    assert steps["bulk_composition_lean"].iat[-1] == pytest.approx(lean, abs=2e-3)
    assert steps["bulk_composition_rich"].iat[-1] == pytest.approx(rich, abs=2e-3)
    assert steps["separated"].all()
    kinds = [f.kind for f in res.findings]
    assert "binodal_reached" in kinds and "level_outside_binodal" not in kinds
    plain = measure(path, "x", **common)
    kinds = [f.kind for f in plain.findings]
    assert "mixed_inside_spinodal" not in kinds and "bulk_not_measured" not in kinds
    warned = [f for f in plain.findings if f.kind == "level_outside_binodal"]
    assert len(warned) == 1 and warned[0].severity == "warning"
    assert f"--level {0.5 * (lean + rich):.4g}" in warned[0].text
    assert warned[0].figures["suggested_level"] == pytest.approx(0.2545, abs=1e-6)


def test_plateaus_quenched_deeper_are_separated_and_judged_at_the_last_step(tmp_path):
    # a slab with its bulks on the 351.5 K binodal, read at 351.5 K and then (the same field) at 298.15 K:
    # both steps are separated (flat plateaus 0.134 apart), and the run ends off the 298.15 K binodal
    hot = _coexisting(PAIR, 351.5, (0.42, 0.56))
    cold = _coexisting(PAIR, 298.15, (0.12, 0.88))
    assert cold == pytest.approx((0.118633, 0.881763), abs=1e-6)
    mesh = grid_mesh((100, 100), kind="quad")
    comp = _profile(0.25 - np.abs(mesh.cell_centroids[:, 1] - 0.5), *hot)
    path = write_listing(tmp_path, [(float(k), f"q_{k}.vtu", mesh, {"x": comp, "T": np.full(mesh.n_cells, t)})
                                    for k, t in enumerate((351.5, 298.15))])
    res = measure(path, "x", model=NrtlModel(**PAIR), temperature_field="T", periodic=("x", "y"),
                  analyses=("interface",))
    steps = res.steps
    assert steps["separated"].all()
    assert steps["equilibrium_gap"].iat[0] < 1e-6
    assert steps["equilibrium_gap"].iat[1] == pytest.approx(max(hot[0] - cold[0], cold[1] - hot[1]), abs=1e-5)
    kinds = [f.kind for f in res.findings]
    assert "mixed_inside_spinodal" not in kinds and "binodal_reached" not in kinds
    verdict = next(f for f in res.findings if f.kind == "binodal_gap")
    assert verdict.figures["time"] == 1.0 and verdict.figures["at_last_step"]


def test_a_verdict_of_an_earlier_step_says_the_last_steps_were_not_separated(tmp_path):
    # a slab on the analytic binodal of the regular solution A = 3 (0.070720 / 0.929280, REFERENCES.md), then
    # the field mixed (uniform 0.5, inside the spinodal): the verdict at t = 0 says so
    mesh = grid_mesh((80, 8), bounds=[(0.0, 1.0), (0.0, 0.1)], kind="quad")
    comp = _profile(0.25 - np.abs(mesh.cell_centroids[:, 0] - 0.5), 0.070720, 0.929280)
    path = write_listing(tmp_path, [(0.0, "m_0.vtu", mesh, {"x": comp}),
                                    (1.0, "m_1.vtu", mesh, {"x": np.full(mesh.n_cells, 0.5)})])
    res = measure(path, "x", model=RegularSolutionModel(A_a=3.0), temperature=300.0, analyses=("interface",))
    assert list(res.steps["separated"]) == [True, False]
    verdict = next(f for f in res.findings if f.kind == "binodal_reached")
    assert verdict.text.endswith("; not separated at the last 1 step(s), from t = 1")
    assert not verdict.figures["at_last_step"]


@pytest.mark.parametrize("phase", ["upper", "lower"])
def test_the_drop_radius_and_shift_are_those_of_the_drops(tmp_path, phase):
    # upper: a lean drop (R = 0.25) in a rich matrix, l = 0.011; lower: a rich drop written as phi = 2x - 1,
    # the indicator's phase being the lean matrix, l = 0.001. The bulks sit at the exact shifted equilibrium
    # (scipy's fsolve on mu_i(drop) + l / R = mu_i(matrix), 2D); the drop radius is the built 0.25 within a
    # cell, the shift the leading-order one (Porter & Easterling 1992, section 1.5) at R = 0.25: the exact
    # shift's slope in l / R times l / R (the exact shift at l / R = 0.044 is 19 % larger: 0.0197), and a
    # gap within tolerance + that shift is a note (before: the matrix's radius 0.505, half the shift, a warning)
    radius, length = 0.25, (0.011 if phase == "upper" else 0.001)
    lean, rich = _coexisting(PAIR, 298.15, (0.12, 0.88))
    drop_phase = "lean" if phase == "upper" else "rich"
    guess = (lean, rich) if drop_phase == "lean" else (rich, lean)
    drop, matrix = _coexisting(PAIR, 298.15, guess, delta=length / radius)
    mesh, distance = _drops([(0.5, 0.5)], radius)
    comp = _profile(distance, matrix, drop)
    field = {"x": comp} if phase == "upper" else {"x": 2 * comp - 1}
    path = write_listing(tmp_path, [(0.0, "d_0.vtu", mesh, field)])
    model = NrtlModel(**PAIR)
    res = measure(path, "x", range=(0, 1) if phase == "upper" else (-1, 1), phase=phase, model=model,
                  temperature=298.15, capillary_length=length, analyses=("interface", "droplets"))
    step = res.steps.iloc[0]
    assert step["drop_radius"] == pytest.approx(radius, abs=1.0 / N)
    formula = np.abs(gibbs_thomson_shift(model, 298.15, radius, capillary_length=length, dimension=2,
                                         drop=drop_phase))
    assert step["gibbs_thomson_shift"] == pytest.approx(formula.max(), rel=1.0 / (N * radius))
    planar = (lean, rich) if drop_phase == "lean" else (rich, lean)  # (drop's, matrix's)
    exact = max(abs(drop - planar[0]), abs(matrix - planar[1]))
    assert step["equilibrium_gap"] == pytest.approx(exact, abs=1e-4)
    # the leading order in delta = l / R: the exact shift's slope at delta = 1e-5, scaled to l / R
    slope = max(np.abs(np.subtract(_coexisting(PAIR, 298.15, guess, delta=1e-5), planar))) / 1e-5
    assert formula.max() == pytest.approx(slope * length / radius, rel=0.01)
    kinds = [f.kind for f in res.findings]
    assert "binodal_gap" not in kinds
    assert ("binodal_gibbs_thomson" if exact > 0.01 else "binodal_reached") in kinds


def test_a_bulk_on_one_side_is_named_by_its_composition_whatever_the_phase(tmp_path):
    # nine rich drops (R = 0.03, under one measured width: no bulk inside) in a lean matrix at the 298.15 K
    # binodal 0.118633, written as phi = 2x - 1: the matrix is the lean bulk with either phase
    lean, rich = _coexisting(PAIR, 298.15, (0.12, 0.88))
    mesh, distance = _drops([(a, b) for a in (0.2, 0.5, 0.8) for b in (0.2, 0.5, 0.8)], 0.03)
    comp = _profile(distance, lean, rich, eps=0.006)
    path = write_listing(tmp_path, [(0.0, "n_0.vtu", mesh, {"phi": 2 * comp - 1})])
    rows = [measure(path, "phi", range=(-1, 1), phase=phase, model=NrtlModel(**PAIR), temperature=298.15,
                    analyses=("interface", "droplets")).steps.iloc[0] for phase in ("upper", "lower")]
    for row in rows:
        assert row["bulk_composition_lean"] == pytest.approx(lean, abs=1e-6)
        assert np.isnan(row["bulk_composition_rich"])
        assert row["drop_radius"] == pytest.approx(0.03, abs=1.0 / N)
    assert rows[0]["bulk_composition_lean"] == rows[1]["bulk_composition_lean"]


@pytest.mark.parametrize("cells", [64, 100, 128])
def test_a_long_wave_at_the_first_stage_of_a_quench_is_still_mixed(tmp_path, cells):
    # x = 0.5 + a cos(2 pi x), a = 0.01 then 0.025 (the linear stage of spinodal decomposition from one
    # cosine, a common verification start), at 298.15 K inside the spinodal (0.247 to 0.754): the field
    # spans a few per cent of the binodal's gap (0.763, isoactivity above): still mixed, not separated.
    # The crests hold bulk cells beyond one measured width, flat against their distance, but none beyond
    # two widths at the same composition (a plateau does)
    mesh = grid_mesh((cells, cells), kind="quad")
    x = mesh.cell_centroids[:, 0]
    path = write_listing(tmp_path, [(float(k), f"w_{k}.vtu", mesh, {"x": 0.5 + a * np.cos(2 * np.pi * x)})
                                    for k, a in enumerate((0.01, 0.025))])
    res = measure(path, "x", model=NrtlModel(**PAIR), temperature=298.15, periodic=("x", "y"))
    assert not res.steps["separated"].any()
    kinds = [f.kind for f in res.findings]
    assert "mixed_inside_spinodal" in kinds and "binodal_gap" not in kinds


def test_drops_packed_over_half_the_box_are_still_the_drops(tmp_path):
    # 16 rich drops of radius 0.105 (55 % of the box) at the exact shifted equilibrium for l = 0.004 (2D,
    # fsolve above): the drops are the phase of more regions, so drop_radius is theirs (0.105 within a
    # cell), not the lean matrix's equivalent radius (0.375)
    radius, length = 0.105, 0.004
    lean, rich = _coexisting(PAIR, 298.15, (0.12, 0.88))
    drop, matrix = _coexisting(PAIR, 298.15, (rich, lean), delta=length / radius)
    centres = [(0.125 + 0.25 * i, 0.125 + 0.25 * j) for i in range(4) for j in range(4)]
    mesh, distance = _drops(centres, radius)
    path = write_listing(tmp_path, [(0.0, "p_0.vtu", mesh, {"x": _profile(distance, matrix, drop, eps=0.004)})])
    res = measure(path, "x", model=NrtlModel(**PAIR), temperature=298.15, capillary_length=length,
                  analyses=("interface", "droplets"))
    step = res.steps.iloc[0]
    assert step["droplet_count"] == 16
    assert step["drop_radius"] == pytest.approx(radius, abs=1.0 / N)


def test_a_run_that_never_separated_is_not_said_to_separate_later(tmp_path):
    # uniform 0.5 inside the spinodal, then a field of one phase beyond the binodal (x = 0.05, outside the
    # two-phase region: 'stable'): the still-mixed note of the first step must not claim a separation later
    mesh = grid_mesh((40, 40), kind="quad")
    path = write_listing(tmp_path, [(0.0, "u_0.vtu", mesh, {"x": np.full(mesh.n_cells, 0.5)}),
                                    (1.0, "u_1.vtu", mesh, {"x": np.full(mesh.n_cells, 0.05)})])
    res = measure(path, "x", model=NrtlModel(**PAIR), temperature=298.15)
    mixed = next(f for f in res.findings if f.kind == "mixed_inside_spinodal")
    assert "separated later" not in mixed.text and not res.steps["separated"].any()


@pytest.mark.parametrize("radius", [0.07, 0.10])
def test_small_drops_on_flat_plateaus_quenched_deeper_are_separated(tmp_path, radius):
    # nine rich drops with their bulks on the 351.5 K binodal (isoactivity above), read at 298.15 K: flat
    # plateaus (a tanh profile) though the drops are under two measured widths across their radius, so
    # separated and off the 298.15 K binodal (0.325: the analytic distance of the two pairs), not mixed
    hot = _coexisting(PAIR, 351.5, (0.42, 0.56))
    cold = _coexisting(PAIR, 298.15, (0.12, 0.88))
    mesh, distance = _drops([(a, b) for a in (0.2, 0.5, 0.8) for b in (0.2, 0.5, 0.8)], radius)
    comp = _profile(distance, *hot)
    path = write_listing(tmp_path, [(0.0, "s_0.vtu", mesh, {"x": comp, "T": np.full(mesh.n_cells, 298.15)})])
    res = measure(path, "x", model=NrtlModel(**PAIR), temperature_field="T", analyses=("interface", "droplets"))
    step = res.steps.iloc[0]
    assert step["separated"]
    assert step["equilibrium_gap"] == pytest.approx(max(hot[0] - cold[0], cold[1] - hot[1]), abs=1e-3)
    kinds = [f.kind for f in res.findings]
    assert "binodal_gap" in kinds and "mixed_inside_spinodal" not in kinds


def test_a_layer_between_walls_is_no_drop_and_excuses_no_gap(tmp_path):
    # a rich slab from wall to wall (0.25 < y < 0.75, no periodic axis) between two lean layers, the lean
    # bulk 0.014 off the 298.15 K binodal: flat interfaces have no Gibbs-Thomson shift, so the gap over the
    # tolerance is a warning, and no layer is a drop (drop_radius empty)
    lean, rich = _coexisting(PAIR, 298.15, (0.12, 0.88))
    mesh = grid_mesh((N, N), kind="quad")
    comp = _profile(0.25 - np.abs(mesh.cell_centroids[:, 1] - 0.5), lean + 0.014, rich)
    path = write_listing(tmp_path, [(0.0, "l_0.vtu", mesh, {"x": comp})])
    res = measure(path, "x", model=NrtlModel(**PAIR), temperature=298.15, capillary_length=0.004,
                  analyses=("interface", "droplets"))
    assert np.isnan(res.steps["drop_radius"].iat[0])
    kinds = [f.kind for f in res.findings]
    assert "binodal_gap" in kinds and "binodal_gibbs_thomson" not in kinds


def test_a_mixture_heated_above_its_critical_point_is_not_said_to_separate(tmp_path):
    # 0.5 with small noise, at 298.15 K then 360 K (above the pair's critical point, 352.68 K): still mixed
    # inside the spinodal at the first step, and at the last one stable phase, not 'separated later'
    mesh = grid_mesh((40, 40), kind="quad")
    noise = 0.5 + 0.002 * np.random.default_rng(3).standard_normal(mesh.n_cells)
    path = write_listing(tmp_path, [(float(k), f"h_{k}.vtu", mesh, {"x": noise, "T": np.full(mesh.n_cells, t)})
                                    for k, t in enumerate((298.15, 360.0))])
    res = measure(path, "x", model=NrtlModel(**PAIR), temperature_field="T")
    mixed = next(f for f in res.findings if f.kind == "mixed_inside_spinodal")
    assert mixed.text.endswith("; not so at the last step")
