"""Spinodal, binodal and critical points of a binary liquid mixture.

The binodal solves isoactivity, ``x_a gamma_1(x_a) = x_b gamma_1(x_b)`` and the same for
component 2, by Newton's method in logit variables ``u = ln(x / (1 - x))`` (compositions near
0 or 1 keep their digits: ``1 - x`` is carried as ``sigmoid(-u)``; converged on the step in u;
near a critical point in moments of the curvature), started outside the spinodal roots and kept
outside them (which rejects the trivial root ``x_a = x_b``). Each pair is then confirmed globally: the
common tangent must lie below ``Delta g_mix / RT`` everywhere (a tangent-plane test on a
dense grid); a pair that fails is solved again from the lower convex hull of the grid.
All temperatures are solved at once (numpy arrays over temperature).

References
----------
Renon, H. and Prausnitz, J. M. (1968). AIChE Journal 14(1), 135-144 (NRTL).
Michelsen, M. L. (1982). The isothermal flash problem. Part I. Stability.
Fluid Phase Equilibria 9, 1-19 (tangent-plane test).
"""

from __future__ import annotations

import math
import warnings
from dataclasses import dataclass

import numpy as np

from ..errors import AnalysisError, OptionError, PhasegaugeWarning
from ..model.mixture_models import DoubleWellModel

__all__ = ["BinaryEquilibrium", "CriticalPoint", "spinodal", "binodal", "critical_points", "phase_diagram",
           "equilibrium_at", "all_regions", "other_regions", "region_of"]

_STEP = 1e-20            # complex step
_U_LIMIT = 36.0          # logit bound: x down to about 2e-16 (and 1 - x, the nearest a float comes to 1)
_NARROW = 1.0            # pairs closer than this in u are solved in moments of the curvature (_newton_step)
_NODES = 16              # Gauss-Legendre nodes of that integral (exact to round-off over u-widths below 1)
#: Newton's step in u = logit(x) below which the binodal has converged: x and 1 - x settled to this relative
#: precision (our threshold; the step's round-off is about 1e-14 away from a critical point)
SETTLED = 1e-10
#: a Newton step no smaller than the one before (the round-off floor) is taken as converged when below this
#: share of the pair's width in u (our threshold; reached only within about 1e-10 of a critical point)
NEAR_CRITICAL_SHARE = 1e-4


def _grid_x():
    """Compositions for scans and the global test: logit-spaced (ends) and evenly spaced (middle)."""
    u = np.linspace(-_U_LIMIT + 1.0, _U_LIMIT - 1.0, 281)
    return np.unique(np.concatenate([_sigmoid(u), np.linspace(0.002, 0.998, 250)]))


def _sigmoid(u):
    return 1.0 / (1.0 + np.exp(-u))


def _temperatures(temperature):
    t = np.atleast_1d(np.asarray(temperature, dtype=float))
    if t.ndim != 1 or not np.all(np.isfinite(t)) or np.any(t <= 0):
        raise OptionError(f"temperatures must be finite and > 0 K, found {temperature!r}",
                          fix="give the temperature in kelvin")
    return t


def _stability(model, x, t):
    """x (1 - x) d^2(g/RT)/dx^2 = 1 + x (1 - x) d(ln gamma_1 - ln gamma_2)/dx (complex step)."""
    z = x + 1j * _STEP
    ln_g1, ln_g2 = model.ln_gamma(z, t)
    slope = np.imag(ln_g1 - ln_g2) / _STEP
    return 1.0 + x * (1 - x) * slope


def _potentials(model, u, t):
    """mu_1, mu_2 (over RT) and their derivatives in u = logit(x), at x = sigmoid(u).

    ``1 - x`` is carried as ``sigmoid(-u)``: near x = 1 the difference ``1 - x`` keeps only
    ``1e-16 / (1 - x)`` of its digits, which left Delta mu_2 a noise of ``1e-16 / (1 - x)``.
    """
    x, x2 = _sigmoid(u), _sigmoid(-u)
    step = 1j * _STEP * x * x2
    mu1, mu2 = model.chemical_potentials(x + step, t, x2=x2 - step)
    return mu1.real, mu2.real, np.imag(mu1) / _STEP, np.imag(mu2) / _STEP


def _newton_step(model, t, ua, ub):
    """Newton's step (du_a, du_b) on isoactivity, mu_i(a) = mu_i(b) for i = 1, 2, in u = logit(x).

    A pair closer than :data:`_NARROW` in u (near a critical point) is solved in the moments of the
    curvature q = x (1 - x) g'' (g = Delta g_mix / RT; q dx / (x (1 - x)) = g'' dx) over [x_a, x_b],
    integrated by Gauss-Legendre in u: ``S = -int g'' dx`` (the slopes' difference, Delta (mu_1 - mu_2))
    and ``T = -int (c - x) g'' dx`` (c the pair's middle: the common tangent). Differences of the
    potentials carry a round-off of 1e-16 where they shrink like (x_b - x_a)^3, and the Jacobian's
    determinant as a difference of products like (x_b - x_a) q^2: there the pair's middle wandered by
    1e-16 / (x_b - x_a)^2 and the step failed.
    """
    m1a, m2a, d1a, d2a = _potentials(model, ua, t)
    m1b, m2b, d1b, d2b = _potentials(model, ub, t)
    f1, f2 = m1a - m1b, m2a - m2b
    det = -d1a * d2b + d1b * d2a
    det = np.where(np.abs(det) < 1e-300, 1e-300, det)
    dua = (f1 * d2b - d1b * f2) / det      # J (du_a, du_b) = -f, J = [[d1a, -d1b], [d2a, -d2b]]
    dub = (d2a * f1 - d1a * f2) / det
    narrow = np.flatnonzero(ub - ua < _NARROW)
    if narrow.size:
        nodes, weights = np.polynomial.legendre.leggauss(_NODES)
        a, b, tn = ua[narrow], ub[narrow], t[narrow]
        middle, half = 0.5 * (a + b), 0.5 * (b - a)
        x = _sigmoid(middle[:, None] + half[:, None] * nodes[None, :])
        q = _stability(model, x, tn[:, None])
        xa, xb = _sigmoid(a), _sigmoid(b)
        c = 0.5 * (xa + xb)
        slopes = -half * (q @ weights)
        tangent = -half * (((c[:, None] - x) * q) @ weights)
        # with d mu_1 / du = (1 - x) q and d mu_2 / du = -x q, the determinant is q_a q_b (x_b - x_a)
        width = np.maximum(xb - xa, 1e-300)
        with np.errstate(divide="ignore", invalid="ignore"):
            dua[narrow] = -(tangent + (xb - c) * slopes) / (_stability(model, xa, tn) * width)
            dub[narrow] = -(tangent + (xa - c) * slopes) / (_stability(model, xb, tn) * width)
    return dua, dub


@dataclass(frozen=True)
class BinaryEquilibrium:
    """Coexisting compositions of a binary mixture at one temperature.

    Attributes
    ----------
    temperature : float, in K
    binodal_lean, binodal_rich : float
        Mole fractions of the component in the two coexisting phases (NaN: one stable phase).
    spinodal_lean, spinodal_rich : float
        Limits of the unstable region (NaN: none).
    confirmed : bool
        The common tangent passed the global (tangent-plane) test.
    """

    temperature: float
    binodal_lean: float
    binodal_rich: float
    spinodal_lean: float
    spinodal_rich: float
    confirmed: bool = True

    @property
    def separates(self) -> bool:
        """True when two liquid phases coexist at this temperature."""
        return bool(np.isfinite(self.binodal_lean))

    def as_dict(self) -> dict:
        return {"temperature": self.temperature, "binodal_lean": self.binodal_lean,
                "binodal_rich": self.binodal_rich, "spinodal_lean": self.spinodal_lean,
                "spinodal_rich": self.spinodal_rich, "separates": self.separates, "confirmed": self.confirmed}


@dataclass(frozen=True)
class CriticalPoint:
    """A consolute point: temperature (K), composition (mole fraction) and kind ('UCST' or 'LCST')."""

    temperature: float
    composition: float
    kind: str


def spinodal(model, temperature):
    """The outermost roots of ``d^2 (Delta g_mix / RT) / dx^2 = 0`` at each temperature.

    Parameters
    ----------
    model : NrtlModel, RegularSolutionModel or DoubleWellModel
    temperature : float or array_like of shape (n,), in K

    Returns
    -------
    lean, rich : ndarray of shape (n,)
        NaN where the mixture is stable at every composition.
    """
    t = _temperatures(temperature)
    if isinstance(model, DoubleWellModel):
        lean, rich = model.spinodal()
        return np.full(t.shape, lean), np.full(t.shape, rich)
    x = _grid_x()
    s = _stability(model, x[None, :], t[:, None])
    negative = s < 0
    has = negative.any(axis=1)
    lean = np.full(t.shape, np.nan)
    rich = np.full(t.shape, np.nan)
    # a narrow unstable region (near a critical point) may fall between grid points: try the
    # minimum of a parabola through the lowest grid value and its neighbours
    k = np.clip(np.argmin(s, axis=1), 1, x.size - 2)
    r = np.arange(t.size)
    x0, x1, x2 = x[k - 1], x[k], x[k + 1]
    s0, s1, s2 = s[r, k - 1], s[r, k], s[r, k + 1]
    num = (x1 - x0) ** 2 * (s1 - s2) - (x1 - x2) ** 2 * (s1 - s0)
    den = (x1 - x0) * (s1 - s2) - (x1 - x2) * (s1 - s0)
    with np.errstate(divide="ignore", invalid="ignore"):
        vertex = np.clip(x1 - 0.5 * num / den, x0, x2)
    vertex = np.where(np.isfinite(vertex), vertex, x1)
    narrow = ~has & (s1 < 0.05)
    if narrow.any():
        narrow[narrow] = _stability(model, vertex[narrow], t[narrow]) < 0
    if not (has | narrow).any():
        return lean, rich
    rows = np.flatnonzero(has | narrow)
    first = np.argmax(negative[rows], axis=1)
    last = x.size - 1 - np.argmax(negative[rows, ::-1], axis=1)
    lean_in, rich_in = x[first], x[last]
    lean_out, rich_out = x[np.maximum(first - 1, 0)], x[np.minimum(last + 1, x.size - 1)]
    tight = narrow[rows]
    lean_in[tight], rich_in[tight] = vertex[rows][tight], vertex[rows][tight]
    lean_out[tight], rich_out[tight] = x0[rows][tight], x2[rows][tight]
    lo, hi = np.concatenate([lean_out, rich_out]), np.concatenate([lean_in, rich_in])
    tt = np.concatenate([t[rows], t[rows]])
    root = _bracketed_root(lambda v: _stability(model, v, tt), lo, hi)
    lean[rows], rich[rows] = root[:rows.size], root[rows.size:]
    return lean, rich


def _bracketed_root(f, a, b, iterations=100):
    """Roots of ``f`` in the brackets [a, b] (f(a) >= 0 > f(b)), all at once: the Illinois method."""
    fa, fb = f(a), f(b)
    for _ in range(iterations):
        done = (np.abs(b - a) <= 1e-14 * np.maximum(np.abs(b), 1e-300) + 1e-300) | (fb == 0)
        if done.all():
            break
        with np.errstate(divide="ignore", invalid="ignore"):
            c = b - fb * (b - a) / (fb - fa)
        bad = ~np.isfinite(c) | (c <= np.minimum(a, b)) | (c >= np.maximum(a, b))
        c = np.where(bad, 0.5 * (a + b), c)
        c = np.where(done, b, c)
        fc = f(c)
        crossed = np.sign(fc) != np.sign(fb)
        a, fa = np.where(crossed, b, a), np.where(crossed, fb, 0.5 * fa)
        b, fb = c, fc
    return b


def _newton(model, t, ua, ub, ua_max, ub_min, iterations=80):
    """Isoactivity in logit variables, u_a kept below ua_max and u_b above ub_min.

    Converged where Newton's own step (before any bound or damping) is below :data:`SETTLED` in u (each
    composition and its complement settled to that relative precision), or near a critical point has
    reached its round-off floor below :data:`NEAR_CRITICAL_SHARE` of the pair's width. A residual test
    cannot serve: near a critical point Delta mu shrinks like (x_b - x_a)^3 (the start passed 1e-11);
    near a pure component the potentials' round-off exceeded it.

    Returns
    -------
    ua, ub : ndarray, the logits of the pair (last iterate where not converged)
    ok : ndarray of bool, converged
    """
    ua, ub = np.array(ua, dtype=float), np.array(ub, dtype=float)
    ok = np.zeros(t.shape, dtype=bool)
    before = np.full(t.shape, np.inf)
    for _ in range(iterations):
        dua, dub = _newton_step(model, t, ua, ub)
        step = np.maximum(np.abs(dua), np.abs(dub))
        # near a critical point the round-off of the pair's middle grows like 1e-15 / (u_b - u_a): there
        # a step that no longer shrinks is that floor, taken when below a share of the pair's width
        floor = (step <= NEAR_CRITICAL_SHARE * (ub - ua)) & (step >= 0.5 * before)
        settled = ~ok & ((step <= SETTLED) | floor) & (ub - ua > SETTLED)    # a pair, not the trivial root
        before = step
        dua, dub = np.clip(dua, -2.0, 2.0), np.clip(dub, -2.0, 2.0)
        new_a = ua + np.where(ok, 0.0, dua)
        new_b = ub + np.where(ok, 0.0, dub)
        ua = np.minimum(np.where(new_a > ua_max, 0.5 * (ua + ua_max), new_a), ua_max)
        ub = np.maximum(np.where(new_b < ub_min, 0.5 * (ub + ub_min), new_b), ub_min)
        ua, ub = np.clip(ua, -_U_LIMIT, _U_LIMIT), np.clip(ub, -_U_LIMIT, _U_LIMIT)
        ok = ok | settled
        if ok.all():
            break
    return ua, ub, ok


def _tangent_gap(model, t, xa, xb):
    """min over the grid of g(x) - common tangent(x), per temperature (>= 0: globally stable pair)."""
    x = _grid_x()[None, :]
    tt = t[:, None]
    ga, gb = model.mixing_gibbs(xa, t), model.mixing_gibbs(xb, t)
    slope = (gb - ga) / (xb - xa)
    line = ga[:, None] + slope[:, None] * (x - xa[:, None])
    return np.min(model.mixing_gibbs(x, tt) - line, axis=1)


def _hull_bridges(model, t):
    """Bridges of the lower convex hull of g on the grid, widest first: (x_a, x_b, s_a, s_b).

    Each bridge spans a two-phase region; ``s_a, s_b`` are the first and last grid compositions
    inside it where g is concave (bounds that keep Newton off the trivial root), or the bridge's
    middle when the concave part falls between grid points.
    """
    x = _grid_x()
    g = model.mixing_gibbs(x, t)
    hull = []
    for k in range(x.size):
        while len(hull) >= 2:
            i, j = hull[-2], hull[-1]
            if (x[j] - x[i]) * (g[k] - g[i]) - (g[j] - g[i]) * (x[k] - x[i]) <= 0:
                hull.pop()
            else:
                break
        hull.append(k)
    hull = np.asarray(hull)
    concave = _stability(model, x, t) < 0
    bridges = []
    for i, j in zip(hull[:-1], hull[1:]):
        if j - i <= 1:
            continue
        inside = np.flatnonzero(concave[i + 1:j]) + i + 1
        if inside.size:
            s_a, s_b = x[inside[0]], x[inside[-1]]
        else:
            s_a = s_b = 0.5 * (x[i] + x[j])
        bridges.append((x[i], x[j], s_a, s_b))
    bridges.sort(key=lambda b: b[0] - b[1])
    return bridges


def _logit(x):
    return np.log(x) - np.log1p(-x)


def binodal(model, temperature, *, spinodal_pair=None):
    """Coexisting compositions (the binodal) at each temperature by isoactivity.

    Parameters
    ----------
    model : NrtlModel, RegularSolutionModel or DoubleWellModel
    temperature : float or array_like of shape (n,), in K
    spinodal_pair : tuple of ndarray, optional
        The result of :func:`spinodal` when already computed.

    Returns
    -------
    lean, rich : ndarray of shape (n,)
        Mole fractions of the component in the two phases; NaN where one phase is stable. Where
        the model has two separate two-phase regions at one temperature (NRTL with large tau and
        alpha near 0.5 can), the widest is returned.
    confirmed : ndarray of bool, shape (n,)
        The pair passed the global tangent-plane test (always true where NaN).

    Raises
    ------
    AnalysisError
        Newton's method failed from both starts (spinodal and convex hull) at some temperature, or
        a coexisting composition lies nearer a pure component than a float carries (about 2e-16).
    """
    t = _temperatures(temperature)
    lean, rich, confirmed, cause = _solve_binodal(model, t, spinodal_pair)
    if cause.any():
        what, fix = _unsolved_text(t, cause)
        raise AnalysisError(what, fix=fix)
    return lean, rich, confirmed


#: why the binodal was not solved at a temperature, and the fix (the codes of _solve_binodal's ``cause``,
#: from 1; {celsius} is filled in below 200 K)
_CAUSES = (("Newton's method on isoactivity settled neither from outside the spinodal nor from the free energy's "
            "convex hull", "check the model parameters and the temperature{celsius}; report the model file if they "
            "are right"),
           ("a coexisting composition lies within about 2e-16 of a pure component (x = 0 or 1), nearer than a "
            "double-precision mole fraction carries", "check the model parameters and the temperature{celsius} (the "
            "phases of this model are pure to double precision)"),
           ("the temperature lies within round-off of a critical point (an unstable range narrower than 1e-7), "
            "where the pair's middle is lost in the round-off of the free energy", "take a temperature a relative "
            "1e-13 or more from the critical temperature"))
#: an unstable range narrower than this (in mole fraction) is within round-off of a critical point (the
#: binodal converges down to about 7e-8; a regular solution is refused from about 2e-14 above A = 2 down,
#: measured: refused at 3e-15, 5e-15 and 2e-14, solved at 1e-14 and 2e-15, round-off deciding)
_ROUND_OFF_SPINODAL = 1e-7


def _solve_binodal(model, t, spinodal_pair=None):
    """:func:`binodal`'s work: ``lean, rich, confirmed`` and, per temperature, ``cause``: 0 where solved,
    else (NaN pair) 1 + the index into :data:`_CAUSES`."""
    cause = np.zeros(t.shape, dtype=int)
    if isinstance(model, DoubleWellModel):
        return np.full(t.shape, model.lean), np.full(t.shape, model.rich), np.ones(t.shape, dtype=bool), cause
    s_lean, s_rich = spinodal(model, t) if spinodal_pair is None else spinodal_pair
    lean = np.full(t.shape, np.nan)
    rich = np.full(t.shape, np.nan)
    confirmed = np.ones(t.shape, dtype=bool)
    rows = np.flatnonzero(np.isfinite(s_lean))
    if rows.size == 0:
        return lean, rich, confirmed, cause
    tt = t[rows]
    ua_max, ub_min = _logit(s_lean[rows]), _logit(s_rich[rows])
    middle = 0.5 * (ua_max + ub_min)
    half = np.maximum(0.5 * (ub_min - ua_max), 1e-6)
    ua, ub, ok = _newton(model, tt, middle - 2.0 * half, middle + 2.0 * half, ua_max, ub_min)
    limit = _at_limit(ua, ub)
    xa, xb = _sigmoid(ua), _sigmoid(ub)
    gap = np.where(ok, _tangent_gap(model, tt, xa, xb), -1.0)
    good = ok & (gap > -1e-9)
    for k in np.flatnonzero(~good):   # fall back to the bridges of the convex hull of the grid
        one = tt[k:k + 1]
        for a0, b0, s_a, s_b in _hull_bridges(model, tt[k]):
            if b0 - a0 <= MIN_REGION:   # the round-off of the free energy near a pure component
                continue
            a, b, done = _newton(model, one, _logit(np.array([a0])), _logit(np.array([b0])),
                                 _logit(np.array([s_a])), _logit(np.array([s_b])))
            limit[k] |= _at_limit(a, b)[0]
            a, b = _sigmoid(a), _sigmoid(b)
            if done[0] and _tangent_gap(model, one, a, b)[0] > -1e-9:
                xa[k], xb[k], ok[k], good[k] = a[0], b[0], True, True
                break
    lean[rows] = np.where(ok, xa, np.nan)
    rich[rows] = np.where(ok, xb, np.nan)
    confirmed[rows] = good | ~ok
    critical = s_rich[rows] - s_lean[rows] < _ROUND_OFF_SPINODAL
    cause[rows] = np.where(ok, 0, np.where(limit, 2, np.where(critical, 3, 1)))
    return lean, rich, confirmed, cause


def _at_limit(ua, ub):
    """Newton's pair ended at the logit bound (a composition within about 2e-16 of a pure component)."""
    return (np.abs(ua) >= _U_LIMIT - 1e-9) | (np.abs(ub) >= _U_LIMIT - 1e-9)


def _unsolved_text(t, cause) -> tuple:
    """What and fix where the binodal was not solved (``cause`` > 0), naming the cause(s)."""
    bad = t[cause > 0]
    where = f"T = {bad[0]:g} K" if bad.size == 1 else f"{bad.size} temperatures from {bad.min():g} to {bad.max():g} K"
    codes = np.unique(cause[cause > 0])
    celsius = (f"; temperatures are in kelvin (if {bad[0]:g} is in degrees Celsius, give {bad[0] + 273.15:g})"
               if bad.min() < 200.0 else "")
    what = "; or ".join(_CAUSES[k - 1][0] for k in codes)
    fix = "; or ".join(_CAUSES[k - 1][1].format(celsius=celsius) for k in codes)
    return f"the binodal was not solved at {where}: {what}", fix


#: a bridge of the grid's hull narrower than this (in mole fraction) is the round-off of the free energy
#: near a pure component, not a two-phase region
MIN_REGION = 1e-6


def other_regions(model, temperature: float, lean: float, rich: float) -> list:
    """The two-phase regions beside the widest one (``lean``, ``rich``: the refined binodal), as
    ``(lean, rich)`` pairs: the bridges of the lower convex hull of Delta g_mix / RT on the composition
    grid that lie clear of it and are wider than :data:`MIN_REGION`, each refined by isoactivity from
    its bridge (as the widest is) where that converges to a common tangent, else the bridge's ends."""
    t = float(temperature)
    found = []
    for a, b, s_a, s_b in _hull_bridges(model, t):
        if not ((b <= lean or a >= rich) and b - a > MIN_REGION):
            continue
        one = np.array([t])
        ua, ub, done = _newton(model, one, _logit(np.array([a])), _logit(np.array([b])),
                               _logit(np.array([s_a])), _logit(np.array([s_b])))
        xa, xb = _sigmoid(ua), _sigmoid(ub)
        if done[0] and xb[0] - xa[0] > MIN_REGION and _tangent_gap(model, one, xa, xb)[0] > -1e-9:
            a, b = xa[0], xb[0]
        found.append((float(a), float(b)))
    return found


def region_of(model, temperature: float, composition: float, equilibrium=None) -> tuple:
    """The two-phase region ``(lean, rich)`` a mixture of this mean composition separates into at this
    temperature: the region that holds it, else the nearest one (a mixture outside every region is one
    stable phase; its nearest region is what its phases would be measured against). The binodal
    (the widest region) when the model has one region; ``(nan, nan)`` when it has none."""
    eq = equilibrium_at(model, float(temperature)) if equilibrium is None else equilibrium
    if not eq.separates:
        return math.nan, math.nan
    regions = [(eq.binodal_lean, eq.binodal_rich)]
    if not isinstance(model, DoubleWellModel):
        regions += other_regions(model, float(temperature), eq.binodal_lean, eq.binodal_rich)
    x = float(composition)
    if len(regions) == 1 or not np.isfinite(x):
        return regions[0]
    return min(regions, key=lambda r: max(r[0] - x, x - r[1], 0.0))


def all_regions(model, temperature, equilibrium=None) -> tuple:
    """Every two-phase region and every unstable range at one temperature, as ``(regions, unstable)``
    lists of ``(lean, rich)`` pairs in order of composition.

    The widest two-phase region is the refined binodal of ``equilibrium`` (:func:`equilibrium_at`);
    the others are the bridges of the lower convex hull of Delta g_mix / RT on the composition grid,
    refined by isoactivity (:func:`other_regions`). The unstable ranges are
    where the free energy is concave, each end refined to a root of the curvature. A model with one
    region has one of each (or none: one stable phase).
    """
    t = float(temperature)
    eq = equilibrium_at(model, t) if equilibrium is None else equilibrium
    if not eq.separates:
        return [], []
    if isinstance(model, DoubleWellModel):
        return [(eq.binodal_lean, eq.binodal_rich)], [(eq.spinodal_lean, eq.spinodal_rich)]
    regions = [(eq.binodal_lean, eq.binodal_rich)] + other_regions(model, t, eq.binodal_lean, eq.binodal_rich)
    x = _grid_x()
    concave = _stability(model, x, t) < 0
    edges = np.flatnonzero(np.diff(concave.astype(np.int8)))  # a change between x[k] and x[k + 1]
    lo, hi = x[edges], x[edges + 1]
    roots = _bracketed_root(lambda v: _stability(model, v, np.full(v.shape, t)), lo, hi) if edges.size else lo
    ends = list(roots)
    if concave[0]:
        ends.insert(0, float(x[0]))
    if concave[-1]:
        ends.append(float(x[-1]))
    unstable = [(float(a), float(b)) for a, b in zip(ends[0::2], ends[1::2])]
    return sorted(regions), unstable


def equilibrium_at(model, temperature) -> BinaryEquilibrium:
    """Binodal and spinodal pair at one temperature (K) as a :class:`BinaryEquilibrium`."""
    t = _temperatures(temperature)
    if t.size != 1:
        raise OptionError(f"one temperature expected, found {t.size}", fix="use phase_diagram for several")
    s = spinodal(model, t)
    lean, rich, confirmed = binodal(model, t, spinodal_pair=s)
    return BinaryEquilibrium(float(t[0]), float(lean[0]), float(rich[0]), float(s[0][0]), float(s[1][0]),
                             bool(confirmed[0]))


def _least_stability(model, t):
    """min over x of x (1 - x) g'' at each temperature (negative: an unstable region exists)."""
    from scipy.optimize import minimize_scalar

    x = _grid_x()
    s = _stability(model, x[None, :], np.atleast_1d(t)[:, None])
    out = s.min(axis=1)
    positions = x[np.argmin(s, axis=1)]
    for k, tk in enumerate(np.atleast_1d(t)):
        u0 = _logit(positions[k])
        res = minimize_scalar(lambda u: float(_stability(model, _sigmoid(u), tk)), bracket=None,
                              bounds=(u0 - 0.5, u0 + 0.5), method="bounded", options={"xatol": 1e-10})
        if res.fun < out[k]:
            out[k], positions[k] = res.fun, _sigmoid(res.x)
    return out, positions


def critical_points(model, *, temperatures=(1.0, 5000.0), samples=400):
    """Consolute (critical) points of the model within a temperature range.

    A critical point is where the unstable region appears or vanishes:
    ``min_x x (1 - x) d^2 (Delta g_mix / RT) / dx^2 = 0``. Below an upper critical solution
    temperature (UCST) the mixture separates, above a lower one (LCST).

    Parameters
    ----------
    model : NrtlModel or RegularSolutionModel (a double well has none)
    temperatures : (float, float), in K
        Search range; scanned on ``samples`` log-spaced temperatures, then refined.
    samples : int

    Returns
    -------
    list of CriticalPoint
        In order of temperature; empty when the mixture separates everywhere or nowhere in the range.
    """
    from scipy.optimize import brentq

    if isinstance(model, DoubleWellModel):
        return []
    lo, hi = (float(v) for v in temperatures)
    if not (0 < lo < hi and np.isfinite(hi)):
        raise OptionError(f"temperature range must be 0 < LO < HI, found {temperatures!r}", fix="for example 250,400")
    t = np.geomspace(lo, hi, int(samples))
    x = _grid_x()
    s = _stability(model, x[None, :], t[:, None]).min(axis=1)
    changes = np.flatnonzero(np.sign(s[:-1]) != np.sign(s[1:]))
    points = []
    for k in changes:
        def least(tk):
            return float(_least_stability(model, np.array([tk]))[0][0])

        a, b = t[k], t[k + 1]
        fa, fb = least(a), least(b)
        if np.sign(fa) == np.sign(fb):
            continue
        tc = brentq(least, a, b, xtol=1e-10 * b, rtol=1e-13)
        xc = float(_least_stability(model, np.array([tc]))[1][0])
        points.append(CriticalPoint(float(tc), xc, "UCST" if fa < 0 else "LCST"))
    return points


def phase_diagram(model, temperatures):
    """Binodal and spinodal against temperature.

    A temperature where the binodal does not converge (see :func:`binodal`) is left NaN with
    ``solved`` false, and one :class:`~phasegauge.errors.PhasegaugeWarning` names them and the cause:
    a diagram over a range is not refused for one temperature at its edge.

    Parameters
    ----------
    model : NrtlModel, RegularSolutionModel or DoubleWellModel
    temperatures : array_like of shape (n,), in K

    Returns
    -------
    dict of ndarray of shape (n,)
        ``temperature, binodal_lean, binodal_rich, spinodal_lean, spinodal_rich, confirmed, solved``.
    """
    t = _temperatures(temperatures)
    s = spinodal(model, t)
    lean, rich, confirmed, cause = _solve_binodal(model, t, spinodal_pair=s)
    if cause.any():
        what, _ = _unsolved_text(t, cause)
        warnings.warn(PhasegaugeWarning(f"{what}; the phase diagram leaves the binodal empty (NaN) there"),
                      stacklevel=2)
    return {"temperature": t, "binodal_lean": lean, "binodal_rich": rich, "spinodal_lean": s[0],
            "spinodal_rich": s[1], "confirmed": confirmed, "solved": cause == 0}
