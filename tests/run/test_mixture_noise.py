"""Mixed fields carrying noise are no separation, whatever the binodal's gap, and drops too small to hold a bulk
are not judged, whatever the mean composition's state. The fields are numpy's noise and the linear stage of
Cahn-Hilliard relaxation (Cahn 1961: each Fourier mode grows as exp(-k^2 (g'' + kappa k^2) t)); the model's
stability and coexistence are checked on the binary NRTL of Renon & Prausnitz (1968), written out in
test_mixture_verdicts."""

import numpy as np
import pytest

from conftest import write_listing
from phasegauge import measure
from phasegauge.analysis.thermo import NrtlModel
from phasegauge.meshgen import grid_mesh
from test_mixture_verdicts import EPS, N, PAIR, _coexisting, _mu


def _g2(x, t, h=1e-6):
    """d(mu_1 - mu_2)/dx over RT: the second derivative of the molar Gibbs energy of mixing (central
    differences of Renon & Prausnitz's chemical potentials); positive where the mixture is stable."""
    up, down = _mu(PAIR, np.asarray(x, float) + h, t), _mu(PAIR, np.asarray(x, float) - h, t)
    return ((up[0] - up[1]) - (down[0] - down[1])) / (2 * h)


def _kinds(res):
    return [f.kind for f in res.findings]


def test_white_noise_above_the_critical_temperature_is_no_separation(tmp_path):
    # x = 0.5 + numpy's white noise of sd 0.005 then 0.02 at 370 K: g'' > 0 at every composition (Renon &
    # Prausnitz above), so one stable phase and a mixed field; the bulks either side of the contour were
    # 0.03 apart against spreads a fifth of that, once read as "separated although ... one stable phase"
    assert (_g2(np.linspace(0.01, 0.99, 99), 370.0) > 0).all()
    mesh = grid_mesh((100, 100), kind="quad")
    rng = np.random.default_rng(1)
    path = write_listing(tmp_path, [(float(k), f"n_{k}.vtu", mesh, {"x": 0.5 + sd * rng.standard_normal(mesh.n_cells)})
                                    for k, sd in enumerate((0.005, 0.02))])
    res = measure(path, "x", model=NrtlModel(**PAIR), temperature=370.0)
    assert not res.steps["separated"].any()
    assert "separated_one_phase" not in _kinds(res)


def test_a_run_relaxing_above_the_critical_temperature_is_no_separation(tmp_path):
    # the linear stage of a Cahn-Hilliard run at 370 K from x = 0.5 +- 0.05 uniform noise (periodic 128^2,
    # kappa 4e-4, unit mobility): every mode decays (Cahn 1961), the variance falls, no step is separated
    n, kappa, t = 128, 4e-4, 370.0
    g2 = float(_g2(0.5, t))
    assert g2 > 0
    k = 2 * np.pi * np.fft.fftfreq(n, d=1.0 / n)
    k2 = k[:, None] ** 2 + k[None, :] ** 2
    noise = np.fft.fft2(0.05 * np.random.default_rng(3).uniform(-1, 1, (n, n)))
    mesh = grid_mesh((n, n), kind="quad")
    ij = np.floor(mesh.cell_centroids[:, :2] * n).astype(int)
    fields = [0.5 + np.real(np.fft.ifft2(noise * np.exp(-k2 * (g2 + kappa * k2) * time)))[ij[:, 0], ij[:, 1]]
              for time in (0.0, 2e-5, 1e-4)]
    assert np.all(np.diff([f.std() for f in fields]) < 0)
    path = write_listing(tmp_path, [(time, f"r_{j}.vtu", mesh, {"x": f})
                                    for j, (time, f) in enumerate(zip((0.0, 2e-5, 1e-4), fields))])
    res = measure(path, "x", model=NrtlModel(**PAIR), temperature=t, periodic=("x", "y"))
    assert not res.steps["separated"].any()
    assert "separated_one_phase" not in _kinds(res)


def test_noise_across_a_narrow_gap_near_the_critical_point_is_still_mixed(tmp_path):
    # x = 0.49 + uniform noise of +-0.05 then +-0.1 at 352 K, just under the critical point (352.68 K):
    # the binodal (isoactivity, scipy's fsolve) is 0.1018 wide, so the noise's bulks lie half its gap apart
    # and more; a mixed field inside the spinodal (g'' < 0 at 0.49), no binodal verdict on noise
    lean, rich = _coexisting(PAIR, 352.0, (0.44, 0.54))
    assert rich - lean == pytest.approx(0.1018, abs=1e-3) and _g2(0.49, 352.0) < 0
    mesh = grid_mesh((100, 100), kind="quad")
    rng = np.random.default_rng(2)
    path = write_listing(tmp_path, [(float(k), f"q_{k}.vtu", mesh, {"x": 0.49 + a * rng.uniform(-1, 1, mesh.n_cells)})
                                    for k, a in enumerate((0.05, 0.1))])
    res = measure(path, "x", model=NrtlModel(**PAIR), temperature=352.0)
    assert not res.steps["separated"].any()
    kinds = _kinds(res)
    assert "mixed_inside_spinodal" in kinds
    assert not {"binodal_reached", "binodal_gap", "bulk_not_measured"} & set(kinds)


def _small_drops(tmp_path, radius, width=0.01, n=150):
    """Nine rich drops (tanh profile, Cahn & Hilliard 1958) of the 298.15 K binodal in its lean matrix."""
    lean, rich = _coexisting(PAIR, 298.15, (0.12, 0.88))
    mesh = grid_mesh((n, n), kind="quad")
    xy = mesh.cell_centroids[:, :2]
    r = np.min([np.hypot(*(xy - c).T) for c in [(a, b) for a in (0.2, 0.5, 0.8) for b in (0.2, 0.5, 0.8)]], axis=0)
    x = lean + (rich - lean) * 0.5 * (1 - np.tanh((r - radius) / width))
    return write_listing(tmp_path, [(0.0, "d_0.vtu", mesh, {"x": x})]), lean, x.mean()


def test_drops_too_small_for_a_bulk_at_a_metastable_composition_are_not_judged(tmp_path):
    # drops of radius 0.03, three widths: no rich bulk beyond one measured width; the mean composition (0.14)
    # lies between the binodal and the spinodal (g'' > 0 there: metastable), where no finding was made
    path, lean, mean = _small_drops(tmp_path, 0.03)
    assert mean > lean and _g2(mean, 298.15) > 0
    res = measure(path, "x", model=NrtlModel(**PAIR), temperature=298.15)
    step = res.steps.iloc[0]
    assert step["mixture_state"] == "metastable" and np.isnan(step["bulk_composition_rich"])
    found = next(f for f in res.findings if f.kind == "bulk_not_measured")
    assert found.severity == "warning" and "--bulk-widths" in found.text and "spinodal" not in found.text
    # the fix it names: bulk cells from half a width measure the drops' cores, separated, nothing left to judge
    res = measure(path, "x", model=NrtlModel(**PAIR), temperature=298.15, bulk_widths=0.5)
    assert res.steps["separated"].all() and "bulk_not_measured" not in _kinds(res)


def test_drops_holding_a_bulk_at_a_metastable_composition_are_separated_without_that_finding(tmp_path):
    path, lean, mean = _small_drops(tmp_path, 0.1)
    res = measure(path, "x", model=NrtlModel(**PAIR), temperature=298.15)
    assert res.steps["separated"].all() and "bulk_not_measured" not in _kinds(res)


def test_the_between_class_share_is_otsus_at_skimages_threshold():
    # skimage's threshold_otsu (the reference) on equal weights: the share of the variance between the two
    # classes it splits, by numpy on the raw values, against ours from the weighted histogram (Otsu 1979)
    from skimage.filters import threshold_otsu

    from phasegauge.analysis._phase_compositions import between_class_share

    rng = np.random.default_rng(5)
    for x in (rng.standard_normal(20000), np.concatenate([0.1 + 0.01 * rng.standard_normal(15000),
                                                          0.9 + 0.02 * rng.standard_normal(5000)])):
        cut = threshold_otsu(x)
        lo, hi = x[x <= cut], x[x > cut]
        share = lo.size * hi.size * (lo.mean() - hi.mean()) ** 2 / x.size ** 2 / x.var()
        assert between_class_share(x, np.ones_like(x)) == pytest.approx(share, abs=5e-3)
    # a Gaussian split at its mean: (E|X|)^2 = 2 sigma^2 / pi between the classes [analytic]
    assert between_class_share(rng.standard_normal(20000), np.ones(20000)) == pytest.approx(2 / np.pi, abs=0.01)


def test_a_drop_at_the_binodal_with_cell_noise_stays_separated(tmp_path):
    # a rich drop at the binodal pair (scipy's fsolve on the isoactivity of Renon & Prausnitz 1968 at 298.15 K)
    # plus numpy's Gaussian noise of sd 0.005 to 0.03 (1.3 % of the jump at 0.01, as a Cahn-Hilliard-Cook
    # solver writes): its bulks' spreads grow with the noise (apart 37 to 19 times them), and the run read
    # "still mixed inside the spinodal"; two phases by Otsu's criterion (0.96 and more), still separated
    t = 298.15
    matrix, drop = _coexisting(PAIR, t, (0.12, 0.88))
    mesh = grid_mesh((N, N), kind="quad")
    r = np.hypot(*(mesh.cell_centroids[:, :2] - 0.5).T)
    x = matrix + (drop - matrix) * 0.5 * (1 + np.tanh((0.25 - r) / EPS))
    rng = np.random.default_rng(1)
    path = write_listing(tmp_path, [(float(k), f"d_{k}.vtu", mesh, {"x": x + sd * rng.standard_normal(x.size)})
                                    for k, sd in enumerate((0.0, 0.01, 0.02, 0.03))])
    res = measure(path, "x", model=NrtlModel(**PAIR), temperature=t)
    assert res.steps["separated"].all()
    assert "still_mixed" not in " ".join(_kinds(res))


def test_a_drop_dissolving_into_a_stable_mixture_is_not_left_unjudged(tmp_path):
    # a rich drop at the binodal's rich side (scipy fsolve, Renon & Prausnitz 1968, 298.15 K) shrinking in a
    # matrix at x = 0.03, under the lean binodal: the mean composition is one stable phase, the drop dissolves
    # as the model says; its last steps hold no bulk inside, and were warned "not judged"
    t = 298.15
    lean, rich = _coexisting(PAIR, t, (0.12, 0.88))
    assert 0.03 < lean
    mesh = grid_mesh((N, N), kind="quad")
    r = np.hypot(*(mesh.cell_centroids[:, :2] - 0.5).T)
    path = write_listing(tmp_path, [(float(k), f"s_{k}.vtu", mesh,
                                     {"x": 0.03 + (rich - 0.03) * 0.5 * (1 + np.tanh((radius - r) / EPS))})
                                    for k, radius in enumerate((0.25, 0.15, 0.08, 0.05, 0.03))])
    res = measure(path, "x", model=NrtlModel(**PAIR), temperature=t)
    assert (res.steps["mixture_state"].iloc[1:] == "stable").all()  # (the first, the largest drop: metastable)
    assert "bulk_not_measured" not in _kinds(res)
