"""Free energies of mixing of liquid mixtures: numbers only, no mesh and no file.

Three binary models give the molar Gibbs energy of mixing over RT as a function
of ``x``, the mole fraction of the named component (component 1), and of the
temperature ``T`` in kelvin:

* :class:`NrtlModel`, the non-random two-liquid model (Renon & Prausnitz 1968)
  with ``tau_ij = a_ij + b_ij / T + e_ij ln T + f_ij T`` and ``G_ij = exp(-alpha tau_ij)``;
* :class:`RegularSolutionModel`, one-constant Margules ``g_E / RT = A x (1 - x)``
  with ``A = a + b / T`` (Flory-Huggins' chi for equal segment numbers);
* :class:`DoubleWellModel`, the phase-field double well whose bulk values are fixed
  (no temperature dependence).

:func:`nrtl_ln_gamma` is the multicomponent NRTL activity coefficient. Every
function takes numpy arrays and broadcasts ``x`` against ``T``; complex
arguments are allowed (the equilibrium solvers differentiate by complex step).

References
----------
Renon, H. and Prausnitz, J. M. (1968). Local compositions in thermodynamic
excess functions for liquid mixtures. AIChE Journal 14(1), 135-144.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..errors import OptionError
from ._numbers import finite_number


__all__ = ["NrtlModel", "RegularSolutionModel", "DoubleWellModel", "nrtl_ln_gamma", "MODEL_KINDS"]

#: the ``kind`` names of the model file
MODEL_KINDS = ("nrtl", "regular", "double-well")


def _finite_number(name: str, value, *, example: str) -> float:
    """``value`` as a finite float, or an :class:`OptionError` naming the model key."""
    return finite_number(name, value, fix=f"write {name} = {example}")


def check_kappa(value):
    """The gradient-energy coefficient kappa, checked (> 0; None when not given)."""
    if value is None:
        return None
    kappa = finite_number("kappa", value, fix="write kappa = 1e-4")
    if kappa <= 0:
        raise OptionError(f"kappa must be > 0, found {value!r}", fix="write kappa = 1e-4")
    return kappa


def _pair(value, name):
    try:
        pair = tuple(float(v) for v in value)
    except TypeError:
        raise OptionError(f"{name} must be a pair [value_12, value_21], found {value!r}",
                          fix=f"write {name} = [1.0, 2.0]") from None
    if len(pair) != 2 or not all(np.isfinite(pair)):
        raise OptionError(f"{name} must be two finite numbers [value_12, value_21], found {value!r}",
                          fix=f"write {name} = [1.0, 2.0]")
    return pair


def _mixing_entropy_term(x):
    """x ln x + (1 - x) ln(1 - x), 0 at the pure ends; complex-safe."""
    x = np.asarray(x)
    if np.iscomplexobj(x):
        return x * np.log(x) + (1 - x) * np.log(1 - x)
    from scipy.special import xlogy

    return xlogy(x, x) + xlogy(1 - x, 1 - x)


class _BinaryActivityModel:
    """Shared parts of the binary models given by ln gamma (NRTL, regular solution)."""

    component: str

    def ln_gamma(self, x, temperature, x2=None):  # pragma: no cover - abstract
        raise NotImplementedError

    def excess_gibbs(self, x, temperature):  # pragma: no cover - abstract
        raise NotImplementedError

    def mixing_gibbs(self, x, temperature):
        """Delta g_mix / RT at mole fraction ``x`` of the component and temperature ``T``.

        Parameters
        ----------
        x : array_like, mole fraction in [0, 1]
        temperature : array_like, in K, broadcast against ``x``

        Returns
        -------
        ndarray, dimensionless
        """
        return _mixing_entropy_term(x) + self.excess_gibbs(x, temperature)

    def chemical_potentials(self, x, temperature, x2=None):
        """(mu_1 - mu_1 pure) / RT and (mu_2 - mu_2 pure) / RT: ln(x gamma_1), ln((1 - x) gamma_2).

        ``x2`` is the mole fraction of component 2, ``1 - x``, where the caller knows it without the
        cancellation of ``1 - x`` (near x = 1 that difference keeps only ``1e-16 / (1 - x)`` of its
        digits; the binodal solver passes ``sigmoid(-u)`` beside ``x = sigmoid(u)``); default ``1 - x``.
        """
        x2 = 1 - x if x2 is None else x2
        ln_g1, ln_g2 = self.ln_gamma(x, temperature, x2)
        return np.log(x) + ln_g1, np.log(x2) + ln_g2

    def mixing_gibbs_slope(self, x, temperature):
        """d(Delta g_mix / RT)/dx = ln(x gamma_1) - ln((1 - x) gamma_2) (Gibbs-Duhem)."""
        mu1, mu2 = self.chemical_potentials(x, temperature)
        return mu1 - mu2


@dataclass(frozen=True)
class NrtlModel(_BinaryActivityModel):
    """Binary NRTL model (Renon & Prausnitz 1968).

    Parameters
    ----------
    tau_a, tau_b : pair of float
        ``[x_12, x_21]`` of ``tau_ij = a_ij + b_ij / T (+ e_ij ln T + f_ij T)``; ``b`` in K.
    alpha : float
        Non-randomness, >= 0 (0.2 to 0.47 in practice; 0 gives one-constant Margules with
        ``A = tau_12 + tau_21``).
    tau_e, tau_f : pair of float, optional
        Further temperature terms (``e ln T``, ``f T``), zero by default.
    component : str
        What ``x`` is the mole fraction of (component 1).
    """

    tau_a: tuple = (0.0, 0.0)
    tau_b: tuple = (0.0, 0.0)
    alpha: float = 0.3
    tau_e: tuple = (0.0, 0.0)
    tau_f: tuple = (0.0, 0.0)
    component: str = ""
    kappa: float | None = None

    def __post_init__(self):
        for name in ("tau_a", "tau_b", "tau_e", "tau_f"):
            object.__setattr__(self, name, _pair(getattr(self, name), name))
        object.__setattr__(self, "kappa", check_kappa(self.kappa))
        fix = "use the non-randomness of the fit, typically 0.2 to 0.47"
        alpha = finite_number("alpha", self.alpha, fix=fix)
        if alpha < 0:
            raise OptionError(f"alpha must be a number >= 0, found {self.alpha!r}", fix=fix)
        object.__setattr__(self, "alpha", alpha)

    kind = "nrtl"

    def tau(self, temperature):
        """(tau_12, tau_21) at ``temperature`` (K)."""
        t = np.asarray(temperature, dtype=float)
        out = []
        for k in range(2):
            value = self.tau_a[k] + self.tau_b[k] / t
            if self.tau_e[k]:
                value = value + self.tau_e[k] * np.log(t)
            if self.tau_f[k]:
                value = value + self.tau_f[k] * t
            out.append(value)
        return tuple(out)

    def ln_gamma(self, x, temperature, x2=None):
        """ln gamma_1, ln gamma_2 at mole fraction ``x`` of component 1 (Renon & Prausnitz 1968, eq. 15);
        ``x2``: that of component 2 where known without cancellation (default ``1 - x``)."""
        tau12, tau21 = self.tau(temperature)
        g12, g21 = np.exp(-self.alpha * tau12), np.exp(-self.alpha * tau21)
        x1 = x
        x2 = 1 - x if x2 is None else x2
        d1 = x1 + x2 * g21
        d2 = x2 + x1 * g12
        ln_g1 = x2 ** 2 * (tau21 * (g21 / d1) ** 2 + tau12 * g12 / d2 ** 2)
        ln_g2 = x1 ** 2 * (tau12 * (g12 / d2) ** 2 + tau21 * g21 / d1 ** 2)
        return ln_g1, ln_g2

    def excess_gibbs(self, x, temperature):
        """g_E / RT = x1 x2 (tau_21 G_21 / (x1 + x2 G_21) + tau_12 G_12 / (x2 + x1 G_12))."""
        tau12, tau21 = self.tau(temperature)
        g12, g21 = np.exp(-self.alpha * tau12), np.exp(-self.alpha * tau21)
        x1, x2 = x, 1 - x
        return x1 * x2 * (tau21 * g21 / (x1 + x2 * g21) + tau12 * g12 / (x2 + x1 * g12))


@dataclass(frozen=True)
class RegularSolutionModel(_BinaryActivityModel):
    """One-constant Margules (regular solution): g_E / RT = A x (1 - x), A = a + b / T.

    Parameters
    ----------
    A_a : float
        Constant part of A (dimensionless); a Flory-Huggins chi for equal segment numbers.
    A_b : float
        Part of A proportional to 1 / T, in K.
    component : str
    kappa : float, optional
        Gradient-energy coefficient, as for :class:`NrtlModel`.
    """

    A_a: float = 0.0
    A_b: float = 0.0
    component: str = ""
    kappa: float | None = None

    kind = "regular"

    def __post_init__(self):
        for name in ("A_a", "A_b"):
            object.__setattr__(self, name, _finite_number(name, getattr(self, name), example="2.5"))
        object.__setattr__(self, "kappa", check_kappa(self.kappa))

    def interaction(self, temperature):
        """A = a + b / T (dimensionless)."""
        return self.A_a + self.A_b / np.asarray(temperature, dtype=float)

    def ln_gamma(self, x, temperature, x2=None):
        """ln gamma_1 = A (1 - x)^2, ln gamma_2 = A x^2 (Margules); ``x2`` as for :class:`NrtlModel`."""
        a = self.interaction(temperature)
        return a * (1 - x if x2 is None else x2) ** 2, a * x ** 2

    def excess_gibbs(self, x, temperature):
        """g_E / RT = A x (1 - x)."""
        return self.interaction(temperature) * x * (1 - x)


@dataclass(frozen=True)
class DoubleWellModel:
    """The phase-field double well ``f = h (x - lean)^2 (x - rich)^2`` with fixed bulk values.

    Its coexisting compositions are ``lean`` and ``rich`` at every temperature and its
    spinodal is ``(lean + rich) / 2 -+ (rich - lean) / (2 sqrt 3)``.

    Parameters
    ----------
    lean, rich : float
        The two bulk values, ``lean < rich``.
    height : float
        Scale ``h`` of the well (> 0).
    component : str
    kappa : float, optional
        Gradient-energy coefficient of the phase-field free energy
        ``int f + kappa/2 |grad x|^2 dV`` (> 0), for the equilibrium checks of a run.
    """

    lean: float = 0.0
    rich: float = 1.0
    height: float = 1.0
    component: str = ""
    kappa: float | None = None

    kind = "double-well"

    def __post_init__(self):
        for name in ("lean", "rich", "height"):
            object.__setattr__(self, name, _finite_number(name, getattr(self, name), example="0.1"))
        if not self.lean < self.rich:
            raise OptionError(f"the double well needs lean < rich, found lean {self.lean:g}, rich {self.rich:g}",
                              fix="give the lower bulk value as lean")
        if self.height <= 0:
            raise OptionError(f"height must be > 0, found {self.height:g}", fix="write height = 1")
        object.__setattr__(self, "kappa", check_kappa(self.kappa))

    def mixing_gibbs(self, x, temperature=None):
        """h (x - lean)^2 (x - rich)^2 (the temperature is not used)."""
        return self.height * (x - self.lean) ** 2 * (x - self.rich) ** 2

    def mixing_gibbs_slope(self, x, temperature=None):
        """2 h (x - lean)(x - rich)(2x - lean - rich)."""
        return 2.0 * self.height * (x - self.lean) * (x - self.rich) * (2.0 * x - self.lean - self.rich)

    def spinodal(self):
        """The two roots of the second derivative."""
        middle, half = 0.5 * (self.lean + self.rich), 0.5 * (self.rich - self.lean)
        return middle - half / np.sqrt(3.0), middle + half / np.sqrt(3.0)


def nrtl_ln_gamma(x, tau, alpha):
    """Multicomponent NRTL ln gamma (Renon & Prausnitz 1968).

    ``ln gamma_i = sum_j x_j tau_ji G_ji / sum_k x_k G_ki
    + sum_j x_j G_ij / sum_k x_k G_kj (tau_ij - sum_m x_m tau_mj G_mj / sum_k x_k G_kj)``
    with ``G_ij = exp(-alpha_ij tau_ij)``.

    Parameters
    ----------
    x : array_like of shape (..., n), mole fractions
    tau : array_like of shape (n, n), dimensionless, zero diagonal
    alpha : array_like of shape (n, n) or float, symmetric non-randomness

    Returns
    -------
    ndarray of shape (..., n)
    """
    x = np.asarray(x)
    tau = np.asarray(tau, dtype=float)
    alpha = np.broadcast_to(np.asarray(alpha, dtype=float), tau.shape)
    g = np.exp(-alpha * tau)
    denominator = x @ g                      # S_j = sum_k x_k G_kj
    numerator = x @ (tau * g)                # C_j = sum_k x_k tau_kj G_kj
    ratio = numerator / denominator
    first = ratio
    weights = x[..., None, :] * g / denominator[..., None, :]          # x_j G_ij / S_j
    second = np.sum(weights * (tau - ratio[..., None, :]), axis=-1)
    return first + second
