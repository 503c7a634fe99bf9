"""Numerical-diffusion audit: an effective diffusivity from the width history.

Under pure diffusion with coefficient D a profile is convolved with a Gaussian
of variance 2 D t, so the variance of dc/dn across the interface grows as
var(t) = var_0 + 2 D t whatever the profile's shape. Fitting that line to the
``interface_variance`` of a series gives the diffusivity the run behaves as
if it had; for the logistic profile it is the same as D = (pi^2 / 6) d(eps^2)/dt.
"""

from __future__ import annotations

import numpy as np

from ..errors import OptionError

__all__ = ["diffusion_audit", "AUDIT_KEYS"]

AUDIT_KEYS = ("D_num", "D_num_stderr", "D_ratio", "widening", "r_squared", "variance_0",
              "width_growth", "n_steps")

_HUBER = 1.345  # Huber's tuning constant: 95 % efficiency for normal errors


def _as_series(values, name: str) -> np.ndarray:
    a = np.asarray(values, dtype=np.float64)
    if a.ndim != 1:
        raise OptionError(f"{name} must be a one-dimensional sequence, found shape {a.shape}",
                          fix=f"pass one {name[:-1]} per step")
    return a


def _weighted_line(x: np.ndarray, y: np.ndarray, w: np.ndarray):
    sw = w.sum()
    mx = (w * x).sum() / sw
    my = (w * y).sum() / sw
    sxx = (w * (x - mx) ** 2).sum()
    slope = (w * (x - mx) * (y - my)).sum() / sxx
    return my - slope * mx, slope, sxx


def _empty(n: int) -> dict:
    out = {key: float("nan") for key in AUDIT_KEYS}
    out["widening"] = False
    out["n_steps"] = n
    return out


def diffusion_audit(times, variances, *, physical_diffusivity: float | None = None,
                    min_steps: int = 3, growth_threshold: float = 0.05,
                    confidence: float = 0.95) -> dict:
    """Effective diffusivity of the interface from its variance history.

    Parameters
    ----------
    times : array_like of shape (n,), time units
    variances : array_like of shape (n,), length units squared
        ``interface_variance`` of each step (:func:`interface_metrics`).
        Pairs with a non-finite value are left out.
    physical_diffusivity : float, optional
        The diffusivity the model should have (length^2 / time), to form
        ``D_ratio``.
    min_steps : int
        Fewer usable steps give NaN results (at least 3).
    growth_threshold : float
        Relative growth of the width (sqrt of the fitted variance) over the
        record above which a significant slope counts as widening (default
        0.05: a few %).
    confidence : float
        Two-sided confidence level of the slope test, in (0, 1).

    Returns
    -------
    dict
        ``D_num`` : float, length^2 / time; half the fitted slope.
        ``D_num_stderr`` : float; its standard error.
        ``D_ratio`` : float; ``D_num / physical_diffusivity`` (NaN without one, or when it is 0).
        ``widening`` : bool; slope significantly > 0 (one-sided at
        ``confidence``) and width grown by more than ``growth_threshold``.
        ``r_squared`` : float; weighted coefficient of determination.
        ``variance_0`` : float; fitted variance at t = 0.
        ``width_growth`` : float; sqrt(var_fit(t_last) / var_fit(t_first)) - 1.
        ``n_steps`` : int; steps used.

    Raises
    ------
    OptionError
        Sequences of different lengths or not 1-D; ``min_steps`` < 3; a
        negative physical diffusivity; a threshold or confidence
        out of range.

    Notes
    -----
    var(t) = var_0 + 2 D t is fitted by iteratively reweighted least squares
    with Huber weights (tuning 1.345, scale 1.4826 MAD of the residuals), so a
    step or two disturbed by, e.g., a droplet touching the boundary does not
    drive the result. The standard error is that of the weighted fit with
    n - 2 degrees of freedom; the slope test uses Student's t. For a
    logistic profile the same D follows from (pi^2 / 6) d(eps^2)/dt, since
    var = pi^2 eps^2 / 3. A constant bias of the variance (mesh
    interpolation adds about h^2 / 6) cancels in the slope.

    References
    ----------
    .. [1] Crank, J. (1975), *The Mathematics of Diffusion*, 2nd ed., Oxford:
       the variance of a diffusing profile grows by 2 D t.
    .. [2] Huber, P. J. (1964), "Robust estimation of a location parameter",
       Ann. Math. Statist. 35:73-101.
    .. [3] LeVeque, R. J. (2002), *Finite Volume Methods for Hyperbolic
       Problems*: first-order upwind adds D = u dx (1 - C) / 2.

    Examples
    --------
    >>> r = diffusion_audit([0, 1, 2, 3], [1.0, 1.2, 1.4, 1.6])
    >>> round(r["D_num"], 6), bool(r["widening"])
    (0.1, True)
    """
    t = _as_series(times, "times")
    v = _as_series(variances, "variances")
    if t.shape != v.shape:
        raise OptionError(f"times and variances differ in length ({t.size} and {v.size})",
                          fix="pass one variance per time")
    if isinstance(min_steps, bool) or not isinstance(min_steps, (int, np.integer)) or min_steps < 3:
        raise OptionError(f"min_steps must be an integer of at least 3, found {min_steps!r}",
                          fix="a line with an uncertainty needs three points")
    if physical_diffusivity is not None:
        try:
            physical = float(physical_diffusivity)
        except (TypeError, ValueError):
            physical = float("nan")
        if not (np.isfinite(physical) and physical >= 0):
            raise OptionError(f"the physical diffusivity must be zero or a positive number, found "
                              f"{physical_diffusivity!r}", fix="give it in length^2 / time")
    if not (0 <= float(growth_threshold) < np.inf):
        raise OptionError(f"growth_threshold must be >= 0, found {growth_threshold!r}",
                          fix="for example 0.05 (5 %)")
    if not (0 < float(confidence) < 1):
        raise OptionError(f"confidence must lie in (0, 1), found {confidence!r}", fix="for example 0.95")
    ok = np.isfinite(t) & np.isfinite(v)
    t, v = t[ok], v[ok]
    n = int(t.size)
    if n < min_steps or np.ptp(t) <= 0:
        return _empty(n)
    order = np.argsort(t, kind="stable")
    t, v = t[order], v[order]
    w = np.ones(n)
    intercept, slope, sxx = _weighted_line(t, v, w)
    for _ in range(50):
        r = v - (intercept + slope * t)
        scale = 1.4826 * np.median(np.abs(r - np.median(r)))
        if not scale > 0:
            break
        new = np.minimum(1.0, _HUBER * scale / np.maximum(np.abs(r), 1e-300))
        if np.allclose(new, w, rtol=0, atol=1e-10):
            break
        w = new
        intercept, slope, sxx = _weighted_line(t, v, w)
    r = v - (intercept + slope * t)
    dof = n - 2
    sigma2 = float((w * r ** 2).sum()) / dof
    stderr = float(np.sqrt(sigma2 / sxx))
    mean_w = (w * v).sum() / w.sum()
    total = float((w * (v - mean_w) ** 2).sum())
    r_squared = 1.0 - float((w * r ** 2).sum()) / total if total > 0 else float("nan")
    from scipy.special import stdtrit  # Student t quantile, as scipy.stats.t.ppf (whose import costs ~1 s)

    quantile = float(stdtrit(dof, 0.5 + 0.5 * float(confidence)))
    significant = slope > quantile * stderr if stderr > 0 else slope > 0
    first, last = intercept + slope * t[0], intercept + slope * t[-1]
    growth = float(np.sqrt(last / first) - 1.0) if first > 0 and last >= 0 else float("nan")
    widening = bool(significant and np.isfinite(growth) and growth > float(growth_threshold))
    D = 0.5 * float(slope)
    return {
        "D_num": D,
        "D_num_stderr": 0.5 * stderr,
        "D_ratio": D / physical if physical_diffusivity is not None and physical > 0 else float("nan"),
        "widening": widening,
        "r_squared": r_squared,
        "variance_0": float(intercept),
        "width_growth": growth,
        "n_steps": n,
    }
