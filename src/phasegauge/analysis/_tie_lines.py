"""Liquid-liquid split of a multicomponent mixture (one tie line) from an activity model.

Successive substitution of the distribution ratios ``K_i = gamma_i(I) / gamma_i(II)`` with the
Rachford-Rice phase balance, then Newton's method on ``ln x_i(I) gamma_i(I) = ln x_i(II) gamma_i(II)``
and the mass balance to polish. The split with the lower Gibbs energy of mixing is kept when
several starts converge.

References
----------
Rachford, H. H. and Rice, J. D. (1952). Procedure for use of electronic digital computers in
calculating flash vaporization hydrocarbon equilibrium. J. Petroleum Technology 4(10), 19-3.
Renon, H. and Prausnitz, J. M. (1969). Estimation of parameters for the NRTL equation for
excess Gibbs energies of strongly nonideal liquid mixtures. Ind. Eng. Chem. Process Des. Dev. 8, 413.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..errors import AnalysisError, OptionError
from ..model.mixture_models import nrtl_ln_gamma

__all__ = ["TieLine", "liquid_liquid_split", "nrtl_split", "nrtl_tau"]

GAS_CONSTANT = 8.314462618  # J / (mol K)


@dataclass(frozen=True)
class TieLine:
    """Two coexisting liquid phases of a feed.

    Attributes
    ----------
    phase_one, phase_two : ndarray of shape (n,), mole fractions
    fraction_two : float
        Mole fraction of the feed in phase two (the lever rule).
    """

    phase_one: np.ndarray
    phase_two: np.ndarray
    fraction_two: float

    def partition_coefficients(self) -> np.ndarray:
        """K_i = x_i(phase one) / x_i(phase two)."""
        return self.phase_one / self.phase_two


def nrtl_tau(delta_g, temperature, *, gas_constant=GAS_CONSTANT):
    """tau_ij = Delta g_ij / (R T) from interaction energies ``delta_g`` (n, n) in J/mol."""
    return np.asarray(delta_g, dtype=float) / (gas_constant * float(temperature))


def _rachford_rice(z, k):
    from scipy.optimize import brentq

    kmax, kmin = k.max(), k.min()
    if kmax <= 1 or kmin >= 1:
        return None
    lo, hi = 1.0 / (1.0 - kmax), 1.0 / (1.0 - kmin)

    def balance(beta):
        return float(np.sum(z * (k - 1) / (1 + beta * (k - 1))))

    eps = 1e-14 * (hi - lo)
    return brentq(balance, lo + eps, hi - eps, xtol=1e-15, maxiter=200)


def _split_from(z, ln_gamma, k, iterations):
    beta = None
    for _ in range(iterations):
        beta = _rachford_rice(z, k)
        if beta is None:
            return None
        x_one = z / (1 + beta * (k - 1))
        x_two = k * x_one
        x_one, x_two = x_one / x_one.sum(), x_two / x_two.sum()
        new_k = np.exp(ln_gamma(x_one) - ln_gamma(x_two))
        if np.max(np.abs(np.log(new_k) - np.log(k))) < 1e-13:
            k = new_k
            break
        k = new_k
        if np.max(np.abs(np.log(k))) < 1e-4:   # collapsing onto one phase (the trivial solution)
            return None
    if beta is None or not 0 < beta < 1 or np.max(np.abs(x_one - x_two)) < 1e-6:
        return None
    return x_one, x_two, beta


def _polish(z, ln_gamma, x_one, x_two, beta):
    """Newton (scipy's hybrid method) on isoactivity + mass balance in log variables."""
    from scipy.optimize import root

    n = z.size

    def unpack(v):
        a, b = np.exp(v[:n]), np.exp(v[n:2 * n])
        return a, b, v[-1]

    def residual(v):
        a, b, f = unpack(v)
        iso = np.log(a) + ln_gamma(a) - np.log(b) - ln_gamma(b)
        balance = (1 - f) * a + f * b - z
        return np.concatenate([iso, balance[:-1], [a.sum() - 1, b.sum() - 1]])

    v0 = np.concatenate([np.log(x_one), np.log(x_two), [beta]])
    sol = root(residual, v0, method="hybr", tol=1e-14)
    a, b, f = unpack(sol.x)
    if sol.success and np.max(np.abs(residual(sol.x))) < 1e-10:
        return a, b, float(f)
    return x_one, x_two, beta


def liquid_liquid_split(feed, ln_gamma, *, guesses=None, iterations=300):
    """The liquid-liquid split (tie line) of ``feed``.

    Parameters
    ----------
    feed : array_like of shape (n,), overall mole fractions
    ln_gamma : callable
        ``ln_gamma(x) -> ndarray of shape (n,)`` at the temperature of interest, for example
        ``lambda x: nrtl_ln_gamma(x, tau, alpha)``.
    guesses : sequence of (x_one, x_two), optional
        Starting phase compositions; by default each pair of phases rich in one component.
    iterations : int
        Most successive-substitution steps per start (Newton's method polishes after them).

    Returns
    -------
    TieLine or None
        None when the feed is one stable liquid (no start splits it).
    """
    z = np.asarray(feed, dtype=float)
    if z.ndim != 1 or z.size < 2 or np.any(z <= 0) or not np.isclose(z.sum(), 1.0, atol=1e-9):
        raise OptionError(f"the feed must be positive mole fractions summing to 1, found {feed!r}",
                          fix="normalise the composition")
    n = z.size
    if guesses is None:
        guesses = []
        rich = np.full((n, n), 0.02 / max(n - 1, 1)) + np.eye(n) * (0.98 - 0.02 / max(n - 1, 1))
        for i in range(n):
            for j in range(i + 1, n):
                guesses.append((rich[i], rich[j]))
    best, best_g = None, np.inf
    for one, two in guesses:
        k = np.asarray(two, dtype=float) / np.asarray(one, dtype=float)
        found = _split_from(z, ln_gamma, k, iterations)
        if found is None:
            continue
        x_one, x_two, beta = _polish(z, ln_gamma, *found)
        g = sum(w * float(np.sum(x * (np.log(x) + ln_gamma(x)))) for w, x in ((1 - beta, x_one), (beta, x_two)))
        if g < best_g - 1e-12:
            best, best_g = TieLine(x_one, x_two, beta), g
    if best is None:
        return None
    if not np.all(np.isfinite(best.phase_one)):
        raise AnalysisError("the liquid-liquid split did not converge", fix="give starting compositions (guesses)")
    return best


def nrtl_split(feed, tau, alpha, **options):
    """:func:`liquid_liquid_split` with the multicomponent NRTL model."""
    tau = np.asarray(tau, dtype=float)
    return liquid_liquid_split(feed, lambda x: nrtl_ln_gamma(x, tau, alpha), **options)
