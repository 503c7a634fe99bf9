"""Volume mixing figures: intensity of segregation, mixing index, box clipping, scale of segregation."""

import numpy as np
import pandas as pd
import pytest
from scipy import integrate, special
from scipy.spatial import ConvexHull, HalfspaceIntersection

from phasegauge.errors import OptionError
from phasegauge.meshgen import grid_mesh
from phasegauge.analysis import mixing
from phasegauge.model.simplices import clip_simplices, simplex_measures
from phasegauge.analysis.mixing import mixing_length, mixing_metrics, segregation_scale

KINDS = [("triangle", (40, 40)), ("quad", (40, 40)), ("mixed", (40, 40)), ("polygon", (40, 40)),
         ("tetra", (10, 10, 10)), ("hexahedron", (10, 10, 10)), ("wedge", (10, 10, 10)),
         ("pyramid", (8, 8, 8)), ("mixed", (12, 10, 10))]


def _mesh(kind, shape, jitter=0.2):
    # unequal cells: interior points moved by up to 20 % of the spacing
    return grid_mesh(shape, kind=kind, jitter=jitter, seed=3)


def test_public_names_import():
    for name in mixing.__all__:
        assert getattr(mixing, name) is not None


@pytest.mark.parametrize("kind,shape", KINDS)
def test_check_values_danckwerts(kind, shape):
    mesh = _mesh(kind, shape)
    x = mesh.cell_centroids[:, 0]
    y = mesh.cell_centroids[:, 1]
    h = float(np.max(mesh.cell_sizes))
    # Danckwerts (1952) with REFERENCES.md [calc]: sharp 50/50 streams I = 1, M = 0, exact for any
    # cell sizes since c takes only the values 0 and 1
    sharp = mixing_metrics(mesh, (y > 0.5).astype(float))
    assert sharp["segregation_intensity"] == pytest.approx(1.0, abs=1e-12)
    assert sharp["mixing_index"] == pytest.approx(0.0, abs=1e-6)
    assert sharp["mixed_volume_fraction"] == 0.0
    # uniform: I = 0, M = 1 (Danckwerts 1952)
    uniform = mixing_metrics(mesh, np.full(mesh.n_cells, 0.37))
    assert uniform["segregation_intensity"] == pytest.approx(0.0, abs=1e-12)
    assert uniform["mixing_index"] == pytest.approx(1.0, abs=1e-6)
    assert uniform["mixed_volume_fraction"] == pytest.approx(1.0)
    # c = y: I = 1/3, M = 0.422650 (REFERENCES.md [calc]). c is the exact cell mean (the centroid),
    # so the variance inside each cell, about h^2/12, is lost: I is biased low by about h^2/3
    linear = mixing_metrics(mesh, y)
    # exact but for jittered pyramids, whose bases are not flat (mesh volumes: mean of two splits)
    assert linear["mean_indicator"] == pytest.approx(0.5, abs=1e-6)
    assert linear["segregation_intensity"] <= 1 / 3 + 1e-12
    assert linear["segregation_intensity"] == pytest.approx(1 / 3, abs=h * h / 2)
    assert linear["mixing_index"] == pytest.approx(0.422650, abs=2 * h * h)
    # c = 0.5 + 0.5 sin(2 pi x) over whole periods: I = 0.5, M = 0.292893 (REFERENCES.md [calc]);
    # centroid values: midpoint-rule error O((2 pi h)^2 / 24), sign not fixed on jittered cells
    periods = 2 if mesh.dimension == 2 else 1
    sine = mixing_metrics(mesh, 0.5 + 0.5 * np.sin(2 * np.pi * periods * x))
    tolerance = (2 * np.pi * periods * h) ** 2 / 12
    assert sine["segregation_intensity"] == pytest.approx(0.5, abs=tolerance)
    assert sine["mixing_index"] == pytest.approx(0.292893, abs=tolerance)
    # mixed volume fraction: 0.05 < c < 0.95 is |sin(2 pi x)| < 0.9, a share 2 asin(0.9) / pi of x
    # [calc, elementary]; cells counted whole, so the error is a few cells' width
    assert sine["mixed_volume_fraction"] == pytest.approx(2 * np.arcsin(0.9) / np.pi, abs=4 * h)


def test_undefined_intensity_is_nan():
    mesh = grid_mesh((4, 4))
    pure = mixing_metrics(mesh, np.zeros(mesh.n_cells))
    assert np.isnan(pure["segregation_intensity"]) and np.isnan(pure["mixing_index"])
    assert pure["mean_indicator"] == 0.0


def test_nan_cells_left_out():
    mesh = grid_mesh((4, 4))
    c = (mesh.cell_centroids[:, 1] > 0.5).astype(float)
    c[0] = np.nan
    out = mixing_metrics(mesh, c)
    assert out["region_volume"] == pytest.approx(15 / 16)
    assert out["segregation_intensity"] == pytest.approx(1.0)


@pytest.mark.parametrize("kind,shape", [("triangle", (9, 7)), ("mixed", (9, 7)), ("polygon", (9, 7)),
                                        ("tetra", (5, 4, 3)), ("hexahedron", (5, 4, 3)),
                                        ("wedge", (5, 4, 3)), ("pyramid", (5, 4, 3)), ("mixed", (6, 4, 3))])
def test_box_clips_cells_exactly(kind, shape):
    mesh = grid_mesh(shape, kind=kind, jitter=0.2 if len(shape) == 2 or kind == "tetra" else 0.0, seed=1)
    box = ((0.13, 0.71), (0.22, None), (0.05, 0.6))
    c = mesh.cell_centroids[:, 0]
    out = mixing_metrics(mesh, c, box=box)
    # box volume (elementary geometry): the box cut by the unit square/cube
    expected = 0.58 * 0.78 * (0.55 if mesh.dimension == 3 else 1.0)
    assert out["region_volume"] == pytest.approx(expected, rel=1e-10)


def test_box_rejects_bad_bounds():
    mesh = grid_mesh((4, 4))
    with pytest.raises(OptionError, match="box bounds along x must increase"):
        mixing_metrics(mesh, np.zeros(16), box=((1, 0), (0, 1)))
    with pytest.raises(OptionError, match="box must be"):
        mixing_metrics(mesh, np.zeros(16), box=3)


def test_c_length_checked():
    mesh = grid_mesh((4, 4))
    with pytest.raises(OptionError, match=r"one value per cell \(16\)"):
        mixing_metrics(mesh, np.zeros(25))


def _halfspace_volume(tet, axis, value):
    # scipy.spatial.HalfspaceIntersection + ConvexHull: volume of {tet, x_axis <= value}
    hull = ConvexHull(tet)
    halfspaces = hull.equations
    plane = np.zeros(4)
    plane[axis], plane[3] = 1.0, -value
    halfspaces = np.vstack([halfspaces, plane])
    # a point strictly inside both: from the lowest corner a little towards the centroid
    low, centre = tet[np.argmin(tet[:, axis])], tet.mean(axis=0)
    step = min(0.5, 0.5 * (value - low[axis]) / (centre[axis] - low[axis]))
    inner = low + step * (centre - low)
    return ConvexHull(HalfspaceIntersection(halfspaces, inner).intersections).volume


def test_clip_simplices_against_scipy_halfspace_intersection():
    rng = np.random.default_rng(7)
    tets = rng.random((60, 4, 3))
    values = np.array([np.quantile(t[:, 0], rng.uniform(0.05, 0.95)) for t in tets])
    kept, parent = clip_simplices(tets, np.arange(60), tets[:, :, 0] - values[:, None])
    ours = np.bincount(parent, simplex_measures(kept), minlength=60)
    # reference: scipy's half-space intersection (Qhull) and convex-hull volume
    reference = np.array([_halfspace_volume(t, 0, v) for t, v in zip(tets, values)])
    np.testing.assert_allclose(ours, reference, rtol=1e-9)
    # every sign pattern (1, 2 and 3 corners kept) occurred
    kept_corners = np.count_nonzero(tets[:, :, 0] <= values[:, None], axis=1)
    assert set(kept_corners) == {1, 2, 3}


def test_mixing_length_interpolates():
    profile = pd.DataFrame({"position": [0.0, 1.0, 2.0, 3.0], "mixing_index": [0.2, 0.5, 0.8, 0.95],
                            "mixing_index_flow": [np.nan] * 4})
    # linear interpolation between 2.0 (0.8) and 3.0 (0.95): 2 + 0.1 / 0.15
    assert mixing_length(profile, reference="section", weighting="area") == pytest.approx(2 + 0.1 / 0.15)
    assert mixing_length(profile, target=0.1, reference="section", weighting="area") == 0.0
    assert np.isnan(mixing_length(profile, target=0.99, reference="section", weighting="area"))
    with pytest.raises(OptionError, match="no flow-weighted mixing index"):
        mixing_length(profile, reference="section")
    with pytest.raises(OptionError, match="weighting must be 'flow' or 'area'"):
        mixing_length(profile, reference="section", weighting="volume")
    with pytest.raises(OptionError, match=r"target mixing index must be in \(0, 1\]"):
        mixing_length(profile, target=1.5, reference="section", weighting="area")
    with pytest.raises(OptionError, match="no 'mixing_index_inflow'"):
        mixing_length(profile)  # the inflow reference by default
    with pytest.raises(OptionError, match="reference must be 'inflow' or 'section'"):
        mixing_length(profile, reference="outlet")


@pytest.mark.parametrize("kind,jitter", [("quad", 0.0), ("triangle", 0.2)])
def test_segregation_scale_of_a_sine(kind, jitter):
    # Danckwerts (1952) scale of segregation S = int_0^r0 R(r) dr. For c = 0.5 + 0.5 sin(2 pi x / L)
    # R(r, theta) = cos(2 pi r cos(theta) / L); averaged over directions this is J0(2 pi r / L)
    # (Bessel integral), so S = L / (2 pi) int_0^j01 J0(t) dt  [calc, scipy.special.j0]
    periods = 4
    L = 1.0 / periods
    reference = L / (2 * np.pi) * integrate.quad(special.j0, 0, special.jn_zeros(0, 1)[0])[0]
    mesh = grid_mesh((100, 100), kind=kind, jitter=jitter, seed=2)
    c = 0.5 + 0.5 * np.sin(2 * np.pi * mesh.cell_centroids[:, 0] / L)
    # the finite window leaves partial periods in the overlap of shifted copies: a few per cent
    assert segregation_scale(mesh, c) == pytest.approx(reference, rel=0.06)
    assert np.isnan(segregation_scale(mesh, np.full(mesh.n_cells, 0.5)))
    with pytest.raises(OptionError, match="resolution must be a whole number"):
        segregation_scale(mesh, c, resolution=2)


def _true_scale(k, dim):
    """Danckwerts' S of c = sum_i cos(k x_i): R averaged over directions is J0(k r) in 2D and
    sin(k r) / (k r) in 3D, so S = int_0^j01 J0(t) dt / k and Si(pi) / k [calc, scipy quad, jn_zeros, sici]."""
    if dim == 2:
        return integrate.quad(special.j0, 0, special.jn_zeros(0, 1)[0])[0] / k
    return special.sici(np.pi)[0] / k


def _windowed_scale(k, dim, L=1.0):
    """S of the zero-padded estimator in the continuum, for c = sum_i cos(k x_i) on [0, L]^dim with whole
    periods: the overlap-normalised product of lag a is sum_i (cos(k a_i) / 2 - sin(k a_i) / (2 k (L - a_i)))
    + sum_(i != j) s_i s_j, s_i = -sin(k a_i) / (k (L - a_i)) (the integrals over the overlap, by hand),
    over the variance dim / 2, averaged over directions by Gauss-Legendre (scipy roots_legendre), its first
    zero by brentq and its integral by quad."""
    from scipy.optimize import brentq

    t, w = special.roots_legendre(48)
    t, w = (t + 1) * np.pi / 4, w * np.pi / 4  # on [0, pi/2]: one octant holds every |a_i|
    if dim == 2:
        unit, weight = np.stack([np.cos(t), np.sin(t)]), w
    else:
        T, P = np.meshgrid(t, t, indexing="ij")
        unit = np.stack([np.sin(T) * np.cos(P), np.sin(T) * np.sin(P), np.cos(T)]).reshape(3, -1)
        weight = np.outer(w * np.sin(t), w).ravel()

    def R(r):
        a = r * unit
        s = -np.sin(k * a) / (k * (L - a))
        product = np.sum(0.5 * np.cos(k * a) + 0.5 * s, axis=0) + s.sum(axis=0) ** 2 - np.sum(s ** 2, axis=0)
        return float(np.sum(weight * product) / weight.sum() / (dim / 2))

    first = (special.jn_zeros(0, 1)[0] if dim == 2 else np.pi) / k
    return integrate.quad(R, 0, brentq(R, 0.5 * first, 1.5 * first))[0]


# (dimension, cells per side, periods in the box, tolerance): the tolerance our threshold, above the
# lattice's own error measured at 50, 20 and 20 samples per wavelength (-0.04, -0.26, -0.14 %)
COSINES = [(2, 200, 4, 1e-3), (2, 200, 10, 4e-3), (3, 40, 2, 3e-3)]


@pytest.mark.parametrize("dim, cells, periods, tolerance", COSINES)
def test_segregation_scale_of_periodic_cosines_with_periodic_axes(dim, cells, periods, tolerance):
    """On a periodic pattern measured along its periodic axes the autocorrelation wraps: S is the
    analytic one to the lattice's error (it read 4 to 8 % low with every shell at its nominal radius and
    the box always walled)."""
    k = 2 * np.pi * periods
    mesh = grid_mesh((cells,) * dim)
    c = 0.5 + np.sum(np.cos(k * mesh.cell_centroids[:, :dim]), axis=1) / (2 * dim)
    axes = ("x", "y", "z")[:dim]
    assert segregation_scale(mesh, c, periodic=axes) == pytest.approx(_true_scale(k, dim), rel=tolerance)


@pytest.mark.parametrize("dim, cells, periods, tolerance", COSINES)
def test_segregation_scale_in_a_walled_box_is_the_windowed_estimate(dim, cells, periods, tolerance):
    """Without periodic axes the box's faces end the overlap of shifted copies: S is the windowed
    estimator's own continuum value (a few per cent below the true S, by 0.14 lambda / L in 2D), to the
    lattice's error."""
    k = 2 * np.pi * periods
    mesh = grid_mesh((cells,) * dim)
    c = 0.5 + np.sum(np.cos(k * mesh.cell_centroids[:, :dim]), axis=1) / (2 * dim)
    windowed = _windowed_scale(k, dim)
    assert windowed < _true_scale(k, dim)
    assert segregation_scale(mesh, c) == pytest.approx(windowed, rel=tolerance)


def test_segregation_scale_wraps_the_periodic_axes_of_a_resampled_mesh_and_checks_them():
    """Jittered triangles, resampled on a regular grid over the box: the periodic axes wrap there too."""
    k = 2 * np.pi * 4
    mesh = grid_mesh((100, 100), kind="triangle", jitter=0.2, seed=2)
    c = 0.5 + 0.25 * (np.cos(k * mesh.cell_centroids[:, 0]) + np.cos(k * mesh.cell_centroids[:, 1]))
    # nearest-cell resampling of a jittered mesh: 1 % our threshold (measured -0.4 %)
    assert segregation_scale(mesh, c, periodic=("x", "y")) == pytest.approx(_true_scale(k, 2), rel=0.01)
    with pytest.raises(OptionError, match="periodic axis 'z' is not an axis of this 2D mesh"):
        segregation_scale(mesh, c, periodic=("z",))


def test_measure_passes_its_periodic_axes_to_the_segregation_scale(tmp_path):
    """measure --segregation-scale --periodic x,y on a periodic pattern reads the analytic S (it read the
    walled box's 3.7 % low whatever --periodic said)."""
    from phasegauge import measure
    from phasegauge.meshgen import to_meshio

    k = 2 * np.pi * 10
    mesh = grid_mesh((200, 200))
    x, y = mesh.cell_centroids[:, 0], mesh.cell_centroids[:, 1]
    folder = tmp_path / "run"
    folder.mkdir()
    for step in range(2):
        to_meshio(mesh, cell_data={"phi": 0.5 * (np.cos(k * x) + np.cos(k * y))},
                  field_data={"TimeValue": np.array([float(step)])}).write(str(folder / f"s_{step}.vtu"))
    read = {periodic: measure(str(folder), field="phi", range=(-1, 1), segregation_scale=True, periodic=periodic,
                              analyses=("mixing",)).steps["segregation_scale"].iat[0] for periodic in ((), ("x", "y"))}
    assert read[("x", "y")] == pytest.approx(_true_scale(k, 2), rel=4e-3)  # COSINES' tolerance at 20 per wavelength
    assert read[()] == pytest.approx(_windowed_scale(k, 2), rel=4e-3)
