"""Numerical-diffusion audit: an effective diffusivity from the width history.

Under pure diffusion with coefficient D a profile is convolved with a Gaussian
of variance 2 D t, so the variance of dc/dn across the interface grows as
var(t) = var_0 + 2 D t whatever the profile's shape. Fitting that line to the
``interface_variance`` of a series gives the diffusivity the run behaves as
if it had; for the logistic profile it is the same as D = (pi^2 / 6) d(eps^2)/dt.

The variance is that of dc/dn against the distance to the contour along its
normal, so it is local to each stretch of interface: stretching, rotation
and a change of curvature move and lengthen the interface but leave the
profile across it, and do not enter (curvature adds O(w^2 / R)).

A run's interface is *diffuse* (several cells across, a smooth profile) or
*sharp* (one to two cells, a volume-of-fluid field): :func:`interface_kind`
tells them apart from the local thickness in cells; a sharp interface gets no
diffusivity, since its width measures the smearing of the scheme's
reconstruction, not a diffusing profile.
"""

from __future__ import annotations

import numpy as np

from ..errors import OptionError

__all__ = ["diffusion_audit", "interface_kind", "AUDIT_KEYS", "SHARP_CELLS_ACROSS"]

AUDIT_KEYS = ("interface_kind", "interface_kind_measured", "cells_across", "D_num", "D_num_stderr", "D_ratio",
              "significant", "widening", "r_squared", "variance_0", "width_first", "width_last", "width_growth",
              "fit_from_time", "n_fit", "n_steps", "noise_left_out_changes", "verdict")

#: median local 10-90 % thickness (cells) below which a run's interface counts as sharp
SHARP_CELLS_ACROSS = 3.5

#: a sharp run whose width grows by more than this (first to last sixth of the steps), or that ends diffuse,
#: with its variance growing steadily (the later half's slope at most SMEARED_ACCELERATION times the earlier
#: half's, after the first step: a quadratic growth gives 3), is smeared (our thresholds)
SMEARED_GROWTH = 0.5
SMEARED_ACCELERATION = 2.0

#: a widening counts as ongoing when the second half of the fitted steps widens at this share of the whole
#: fit's rate at least (our threshold)
LATE_SHARE = 0.5

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


def _empty(n: int, kind: str = "unknown", cells: float = float("nan"), verdict: str = "",
           measured: str | None = None) -> dict:
    out = {key: float("nan") for key in AUDIT_KEYS}
    out.update(interface_kind=kind, interface_kind_measured=measured or kind, cells_across=cells, significant=False,
               widening=False, n_fit=0, n_steps=n, noise_left_out_changes=0,
               verdict=verdict or f"too few steps with a measured width ({n}) for a diffusivity")
    return out


def _state_changes(left_out, t) -> tuple[int, float]:
    """How often a per-step 0/1 state changes between consecutive steps (NaN steps skipped) and the time of
    the first step after the first change (NaN without one)."""
    if left_out is None:
        return 0, float("nan")
    known = np.isfinite(left_out)
    state, times = left_out[known] > 0.5, t[known]
    changed = np.flatnonzero(state[1:] != state[:-1])
    return int(changed.size), (float(times[changed[0] + 1]) if changed.size else float("nan"))


def interface_kind(cells_across) -> tuple[str, float]:
    """Whether a run's interface is diffuse or sharp, from its local thickness in cells.

    Parameters
    ----------
    cells_across : array_like of shape (n_steps,)
        ``interface_cells_across`` of each step (:func:`interface_metrics`):
        the length/area-weighted median over the interface of the local
        10-90 % thickness in cells. Non-finite values are left out.

    Returns
    -------
    kind : {'diffuse', 'sharp', 'unknown'}
        ``sharp`` when the median over the steps is below
        ``SHARP_CELLS_ACROSS`` (3.5 cells), ``diffuse`` otherwise,
        ``unknown`` without a finite value.
    median : float
        That median over the steps.

    Notes
    -----
    The thickness is ln 9 / (2 |grad c|) h at the contour, h the cell size:
    4.39 eps / h for the logistic profile, so a diffuse interface resolved by
    the common 4-cells rule reads 4 or more. A volume-of-fluid step given as
    cell values and averaged to the points reads about 2.2 (the linear ramp
    over two cells); the bounded TVD sample ``vortex_sharp`` reads 3.1 in
    median (2.2 to 5.8 by step), the upwind sample 8.5 (2.2 to 29). The
    median over steps keeps a run that starts from a sharp step and diffuses
    (the upwind sample) diffuse, and late filament wisps of a sharp run sharp.
    A share of the band volume in the tails (1e-3 < c < 0.05 or 0.95 < c <
    1 - 1e-3: logistic 0.57) was tried and left out: a flux-limited
    volume-of-fluid scheme leaves a floor of tiny values, and the samples read
    0.46 (sharp) and 0.41 (upwind).
    """
    a = np.asarray(cells_across, dtype=np.float64).ravel()
    a = a[np.isfinite(a)]
    if a.size == 0:
        return "unknown", float("nan")
    median = float(np.median(a))
    return ("sharp" if median < SHARP_CELLS_ACROSS else "diffuse"), median


def _end_widths(v) -> tuple[float, float]:
    """The width (sqrt of the median variance) of the first and of the last k steps (k = max(1, n // 6));
    NaN where that variance is not above 0."""
    k = max(1, v.size // 6)
    first, last = float(np.median(v[:k])), float(np.median(v[-k:]))
    return (float(np.sqrt(first)) if first > 0 else float("nan"), float(np.sqrt(last)) if last > 0 else float("nan"))


def _growth(v) -> float:
    """``width_last / width_first - 1`` of :func:`_end_widths`."""
    first, last = _end_widths(v)
    return last / first - 1.0 if first > 0 and np.isfinite(last) else float("nan")


def _robust_fit(t, v):
    """Huber IRLS line v = a + b t: (intercept, slope, stderr, r_squared)."""
    n = t.size
    w = np.ones(n)
    intercept, slope, sxx = plain = _weighted_line(t, v, w)  # the first pass: ordinary least squares
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
    sigma2 = float((w * r ** 2).sum()) / (n - 2)
    stderr = float(np.sqrt(sigma2 / sxx))
    # the last pass's weighted standard error takes the down-weighting as given, and reads a slope of
    # constant data significant 4-6 % of the time at 95 % two-sided (2.5 % one-sided nominal); Huber's
    # own covariance (his proposal 2, as statsmodels' RLM "H1": the psi's spread over its mean slope
    # squared, with his small-sample factor) is kept when larger
    scale = 1.4826 * np.median(np.abs(r - np.median(r)))
    if scale > 0:
        u = r / scale
        psi = np.clip(u, -_HUBER, _HUBER)
        m = float(np.mean(np.abs(u) < _HUBER))
        if m > 0:
            k = 1.0 + 2.0 / n * (1.0 - m) / m
            sandwich = k * k * float((psi ** 2).sum()) / (n - 2) / (m * m) * scale * scale / plain[2]
            stderr = max(stderr, float(np.sqrt(sandwich)))
    if n < 6:  # too few steps for the robust spread (5 % false significance at 4): the plain least-squares one
        rest = v - (plain[0] + plain[1] * t)
        stderr = max(stderr, float(np.sqrt(float((rest ** 2).sum()) / (n - 2) / plain[2])))
    mean_w = (w * v).sum() / w.sum()
    total = float((w * (v - mean_w) ** 2).sum())
    r_squared = 1.0 - float((w * r ** 2).sum()) / total if total > 0 else float("nan")
    return float(intercept), float(slope), stderr, r_squared


def diffusion_audit(times, variances, *, cells_across=None, physical_diffusivity: float | None = None,
                    min_steps: int = 3, growth_threshold: float = 0.05,
                    confidence: float = 0.95, times_are_indices: bool = False,
                    declared_kind: str | None = None, noise_left_out=None) -> dict:
    """Effective diffusivity of the interface from its variance history.

    Parameters
    ----------
    times : array_like of shape (n,), time units
    variances : array_like of shape (n,), length units squared
        ``interface_variance`` of each step (:func:`interface_metrics`).
        Pairs with a non-finite value are left out.
    cells_across : array_like of shape (n,), optional
        ``interface_cells_across`` of each step: gives the interface kind
        (:func:`interface_kind`) and the start of the fit. None: the kind is
        ``unknown`` and every step is fitted.
    physical_diffusivity : float, optional
        The diffusivity the model should have (length^2 / time, >= 0), to
        form ``D_ratio``; 0 (no physical diffusion) is accepted, and the
        audit then reports the numerical value alone.
    min_steps : int
        Fewer usable steps give NaN results (at least 3).
    growth_threshold : float
        Relative growth of the width above which a significant slope counts
        as widening (default 0.05).
    confidence : float
        Confidence level of the slope's interval, in (0, 1): the slope is
        significant when its two-sided interval excludes 0 (Student's t,
        n - 2 degrees of freedom).
    times_are_indices : bool
        The steps store no times (``times`` are step numbers): ``D_num`` is per step,
        ``D_ratio`` is left out (NaN), and ``note`` says so when a physical diffusivity was given.
    declared_kind : {'sharp', 'diffuse'}, optional
        The kind the user knows the run to be: it takes the place of the kind read from
        ``cells_across`` (which is kept as ``interface_kind_measured``).
    noise_left_out : array_like of shape (n,), optional
        ``bulk_noise_left_out`` of each step (:func:`interface_metrics`): 1 where the bulk noise was left
        out of the widths. The verdict says where it changes within the fitted steps.

    Returns
    -------
    dict
        ``interface_kind`` : {'diffuse', 'sharp', 'unknown'}; ``cells_across``:
        the median local 10-90 % thickness in cells behind it; ``interface_kind_measured``: the kind
        that thickness gives (``interface_kind`` too unless one was declared).
        ``D_num`` : float, length^2 / time; half the fitted slope (NaN for a
        sharp interface). ``D_num_stderr`` : its standard error.
        ``D_ratio`` : ``D_num / physical_diffusivity`` (NaN without one or
        when it is 0).
        ``significant`` : bool; the slope's interval at ``confidence`` lies above 0.
        ``widening`` : bool; not sharp, significant, and the measured width
        grown by more than ``growth_threshold``.
        ``r_squared`` : weighted coefficient of determination.
        ``variance_0`` : fitted variance at the first fitted step (``fit_from_time``; a line
        carried back to t = 0 from a run that starts later could read below 0).
        ``width_first``, ``width_last`` : float, length; sqrt of the median
        variance of the first and of the last k fitted steps (k = max(1,
        n // 6)): the measured width, not the fitted line.
        ``width_growth`` : ``width_last / width_first - 1``.
        ``fit_from_time`` : time of the first fitted step; ``n_fit``: steps
        fitted (NaN and 0 for a sharp interface, whose widths are then taken
        over every step); ``n_steps``: steps with a variance.
        ``noise_left_out_changes`` : int; how often ``noise_left_out`` changes between consecutive
        fitted steps (0 without it). The variance reads the values as written, so such a change does not
        move it; the band-volume and threshold-free widths change estimator there.
        ``verdict`` : str; the audit in one sentence (what the report shows).

    Raises
    ------
    OptionError
        Sequences of different lengths or not 1-D; ``min_steps`` < 3; a
        physical diffusivity that is negative or not a number; a threshold
        or confidence out of range.

    Notes
    -----
    The fit starts at the first step whose interface is resolved as a
    diffuse profile (``cells_across`` >= 3.5, :data:`SHARP_CELLS_ACROSS`),
    so the first transient of a run that starts from a sharp step (its
    variance jumps while the step takes the scheme's shape) is left out;
    when fewer than ``min_steps`` remain, every step is fitted.
    var(t) = var_0 + 2 D t is fitted by iteratively reweighted least squares
    with Huber weights (tuning 1.345, scale 1.4826 MAD of the residuals), so a
    step or two disturbed by, e.g., a droplet touching the boundary does not
    drive the result. The standard error is that of the weighted fit with
    n - 2 degrees of freedom. For a logistic profile the same D follows from
    (pi^2 / 6) d(eps^2)/dt, since var = pi^2 eps^2 / 3. A constant bias of
    the variance (mesh interpolation adds about h^2 / 6) cancels in the slope.
    A sharp interface gets no D_num and no widening: its band is the
    scheme's reconstruction (one to three cells), which filaments and wisps
    thicken without any diffusion.

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
    cells = left_out = None
    if noise_left_out is not None:
        left_out = _as_series(noise_left_out, "noise_left_out")
        if left_out.shape != t.shape:
            raise OptionError(f"times and noise_left_out differ in length ({t.size} and {left_out.size})",
                              fix="pass one bulk_noise_left_out per time")
    if cells_across is not None:
        cells = _as_series(cells_across, "cells_across")
        if cells.shape != t.shape:
            raise OptionError(f"times and cells_across differ in length ({t.size} and {cells.size})",
                              fix="pass one interface_cells_across per time")
    if isinstance(min_steps, bool) or not isinstance(min_steps, (int, np.integer)) or min_steps < 3:
        raise OptionError(f"min_steps must be an integer of at least 3, found {min_steps!r}",
                          fix="a line with an uncertainty needs three points")
    physical = None
    if physical_diffusivity is not None:
        try:
            physical = float(physical_diffusivity)
        except (TypeError, ValueError):
            physical = float("nan")
        if not (np.isfinite(physical) and physical >= 0):
            raise OptionError(f"the physical diffusivity must be zero or a positive number, found "
                              f"{physical_diffusivity!r}", fix="give it in length^2 / time (0: none)")
    if not (0 <= float(growth_threshold) < np.inf):
        raise OptionError(f"growth_threshold must be >= 0, found {growth_threshold!r}",
                          fix="for example 0.05 (5 %)")
    if not (0 < float(confidence) < 1):
        raise OptionError(f"confidence must lie in (0, 1), found {confidence!r}", fix="for example 0.95")
    if declared_kind not in (None, "sharp", "diffuse"):
        raise OptionError(f"the declared interface kind must be 'sharp' or 'diffuse', found {declared_kind!r}",
                          fix="sharp for a volume-of-fluid run, diffuse for a phase-field run")
    measured, median_cells = interface_kind(cells) if cells is not None else ("unknown", float("nan"))
    kind = declared_kind or measured
    ok = np.isfinite(t) & np.isfinite(v)
    t, v = t[ok], v[ok]
    cells = cells[ok] if cells is not None else None
    left_out = left_out[ok] if left_out is not None else None
    n = int(t.size)
    if n < min_steps or np.ptp(t) <= 0:
        return _empty(n, kind, median_cells, measured=measured)
    order = np.argsort(t, kind="stable")
    t, v = t[order], v[order]
    start = 0
    # a run sharp in median that ends diffuse (or widens by half) and grows steadily is smeared: fitted from
    # its second step, past the scheme's start-up (a volume-of-fluid run smearing at a steady rate read "no
    # diffusivity inferred")
    smeared = False
    if kind == "sharp" and measured == "sharp" and cells is not None:
        tail = float(np.nanmedian(cells[order][-max(1, n // 6):]))
        grown = _growth(v)
        # steadily: filaments thinned below the cells late in a run grow the variance faster and faster (a
        # reversed vortex's wisps: the later half's slope 58 times the earlier's), and are the scheme's
        # reconstruction, not a diffusing profile
        smeared = (tail >= SHARP_CELLS_ACROSS or (np.isfinite(grown) and grown > SMEARED_GROWTH)) and n >= 7
        if smeared:  # growing steadily, not faster and faster (robust slopes of the two halves after step 0)
            mid = 1 + (n - 1) // 2
            early, late_rate = _robust_fit(t[1:mid], v[1:mid])[1], _robust_fit(t[mid:], v[mid:])[1]
            smeared = early > 0 and late_rate <= SMEARED_ACCELERATION * early
    if smeared:  # from the first step past the scheme's start-up, as its steadiness was judged
        start = 1
    elif cells is not None and measured != "sharp":
        resolved = np.flatnonzero(cells[order] >= SHARP_CELLS_ACROSS)
        if resolved.size and n - resolved[0] >= min_steps and np.ptp(t[resolved[0]:]) > 0:
            start = int(resolved[0])
    tf, vf = t[start:], v[start:]
    changes, switched = _state_changes(None if left_out is None else left_out[order][start:], tf)
    width_first, width_last = _end_widths(vf)
    growth = _growth(vf)
    common = {"interface_kind": kind, "interface_kind_measured": measured, "cells_across": median_cells,
              "width_first": width_first, "width_last": width_last, "width_growth": growth,
              "fit_from_time": float(tf[0]), "n_fit": int(tf.size), "n_steps": n, "noise_left_out_changes": changes}
    # a run declared sharp whose thickness reads diffuse is a smeared one: fitted as a diffuse run (so is
    # one whose thickness is not read)
    if kind == "sharp" and measured == "sharp" and not smeared:
        out = _empty(n, kind, median_cells)
        out.update(common, fit_from_time=float("nan"), n_fit=0)
        how = "" if declared_kind is None else "as declared; "
        out["verdict"] = (f"sharp interface ({how}{median_cells:.2g} cells across in median): its width is the "
                          f"scheme's reconstruction, no diffusivity inferred (width {100 * growth:+.3g} % "
                          "first to last); a diffuse-interface (phase-field) run this thin would be "
                          "under-resolved: 4 cells across 0.1 < c < 0.9 is common practice")
        return out
    intercept, slope, stderr, r_squared = _robust_fit(tf, vf)
    from scipy.special import stdtrit  # Student t quantile, as scipy.stats.t.ppf (whose import costs ~1 s)

    quantile = float(stdtrit(tf.size - 2, 0.5 + 0.5 * float(confidence)))
    significant = bool(slope > quantile * stderr if stderr > 0 else slope > 0)
    widening = bool(significant and np.isfinite(growth) and growth > float(growth_threshold))
    # an ongoing widening goes on over the second half of the fitted steps at half the rate at least (our
    # threshold): a phase-field profile relaxing to its equilibrium width early, then constant, is no widening
    late = None
    half = tf.size // 2
    if widening and tf.size - half >= max(int(min_steps), 4) and np.ptp(tf[half:]) > 0:
        late = _robust_fit(tf[half:], vf[half:])
        late_quantile = float(stdtrit(tf.size - half - 2, 0.5 + 0.5 * float(confidence)))
        # below the share, and the whole fit's rate beyond the late half's own interval (a steady rate with
        # noisy widths stays "ongoing"; a profile that settled reads early)
        if late[1] < LATE_SHARE * slope and late[1] + late_quantile * late[2] < slope:
            widening = False
        else:
            late = None
    D = 0.5 * slope
    if slope < -quantile * stderr and np.isfinite(growth) and growth < -float(growth_threshold):
        verdict = (f"no widening: the interface narrows (fitted diffusivity {D:.3g} +- {0.5 * stderr:.2g}, "
                   f"r^2 {r_squared:.2g}; width {100 * growth:+.3g} % first to last)")
    elif slope < -quantile * stderr:
        verdict = (f"no widening: the fitted diffusivity {D:.3g} +- {0.5 * stderr:.2g} is below 0, but the width "
                   f"changes by only {100 * growth:+.3g} % (threshold {100 * float(growth_threshold):.3g} %)")
    elif not significant:
        verdict = (f"no significant widening: the fitted diffusivity {D:.3g} +- {0.5 * stderr:.2g} "
                   f"(r^2 {r_squared:.2g}) is not distinguishable from 0")
    elif late is not None:
        verdict = (f"the interface widened early (width {100 * growth:+.3g} % first to last, fitted diffusivity "
                   f"{D:.3g} over every fitted step), then at {0.5 * late[1]:.3g} +- {0.5 * late[2]:.2g} over "
                   f"the second half, under {LATE_SHARE:g} of that: an early widening (a start-up transient, as "
                   "a profile relaxing to its equilibrium width), not an ongoing one; the diffusivity given is the "
                   "second half's")
        intercept, slope, stderr, r_squared = late
        D = 0.5 * slope
        significant = bool(slope > late_quantile * stderr if stderr > 0 else slope > 0)
    elif widening:
        verdict = (f"interface keeps widening: numerical diffusivity {D:.3g} +- {0.5 * stderr:.2g} "
                   f"(width {100 * growth:+.3g} % first to last)")
    else:
        verdict = (f"diffusivity {D:.3g} +- {0.5 * stderr:.2g}, but the width grows by only "
                   f"{100 * growth:+.3g} % (threshold {100 * float(growth_threshold):.3g} %)")
    if times_are_indices:
        verdict += " (the steps store no times: per step index)"
    if changes:
        verdict += (f"; the bulk noise is left out of the widths at some fitted steps and not at others ({changes} "
                    f"change(s), first at t = {switched:g}): the variance fitted reads the values as written and "
                    "does not change with it, but interface_width and width_threshold_free do")
    if smeared:
        verdict = (f"sharp interface in median ({median_cells:.2g} cells across), but it smears steadily to "
                   f"{tail:.2g} cells at the end (fitted from t = {float(tf[0]):g}, past the first step): {verdict}")
    elif kind == "sharp" and measured == "diffuse":  # declared
        verdict = (f"declared sharp, but the interface is {median_cells:.2g} cells across in median, as a smeared "
                   f"one reads: {verdict}")
    elif kind == "sharp":  # declared, its thickness not read: fitted, so that a widening is not hidden
        verdict = f"declared sharp (its thickness not read, so fitted as any width history): {verdict}"
    return {
        **common,
        "D_num": D,
        "D_num_stderr": 0.5 * stderr,
        "D_ratio": D / physical if physical and not times_are_indices else float("nan"),
        **({"note": "the steps store no times (their times are step numbers): the numerical diffusivity is "
                    "per step, so its ratio to the physical diffusivity is left out; give the times in a "
                    "'time,path' listing"} if times_are_indices and physical is not None else {}),
        "significant": significant,
        "widening": widening,
        "r_squared": r_squared,
        "variance_0": intercept + slope * float(tf[0]),
        "verdict": verdict,
    }
