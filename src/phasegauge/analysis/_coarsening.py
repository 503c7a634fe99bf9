"""Coarsening: the characteristic lengths of a pattern and their growth law.

Two lengths: ``L = 2 pi / k1`` with ``k1`` the first moment of the radially averaged structure
factor ``S(k) = |FFT(c - mean)|^2`` on a regular resampling of the cell values (directly on a
uniform regular grid), and the interface spacing, the inverse interface density ``V / A`` (domain
volume over interface size). Their growth ``L ~ t^n`` is fitted by least squares in log-log;
diffusive (Cahn-Hilliard) coarsening gives n = 1/3 (Lifshitz-Slyozov). The interface spacing is
the one to fit: the structure factor's first moment takes in the interface's Porod tail, so at a
fixed interface width (any Cahn-Hilliard run) it reads lower and lower as the pattern outgrows the
width, and its exponent reads low.

References
----------
Lifshitz, I. M. and Slyozov, V. V. (1961), "The kinetics of precipitation from supersaturated
solid solutions", J. Phys. Chem. Solids 19:35.
Bray, A. J. (1994), "Theory of phase-ordering kinetics", Adv. Phys. 43:357 (first moment of S(k);
Porod's law, S(k) ~ (A / V) k^-(d+1) above the peak: the interface density sets the tail).
"""

from __future__ import annotations

import numpy as np

from ..model.fields import cell_values
from ..model.mesh import Mesh
from ._segregation import regular_sample

__all__ = ["coarsening_length", "interface_spacing", "coarsening_exponent"]


def coarsening_length(mesh: Mesh, c_cell, *, resolution: int | None = None) -> float:
    """Characteristic length of the pattern, 2 pi / (first moment of the structure factor).

    Parameters
    ----------
    mesh : Mesh
    c_cell : ndarray of shape (n_cells,)
    resolution : int, optional
        Grid points along the longest side of the resampling (see ``regular_sample``).

    Returns
    -------
    float, length units
        NaN when the resampling has holes (NaN samples are set to the mean, so a few do not
        matter; fewer than 2 finite samples give NaN) or the field is uniform.

    Notes
    -----
    The domain is taken as periodic by the FFT. The first moment is taken over k-space,
    k1 = int k S d^d k / int S d^d k (Bray 1994): the radially averaged S(k) weighted by the
    modes of each shell, summed mode by mode so that each sits at its own |k|. The interface's
    Porod tail S ~ k^-(d+1) makes int k S d^d k grow as ln(L / eps) up to the interface's cut-off
    near 1 / eps: at a fixed interface width eps, L reads lower the more the pattern outgrows it
    (0.82 to 0.64 of the scale as it grows from 16 to 64 cells at a tanh width of 1.5 cells, in
    our check), and a growth exponent fitted to it reads low; :func:`interface_spacing` has no
    such bias.
    """
    c = cell_values(mesh, c_cell)
    sample, spacing = regular_sample(mesh, c, resolution)
    finite = np.isfinite(sample)
    if finite.sum() < 2:
        return float("nan")
    values = np.where(finite, sample - sample[finite].mean(), 0.0)
    # the real transform holds half the modes: each one off the last axis's own (zero and, for an
    # even length, the highest) stands for itself and its complex conjugate
    transform = np.fft.rfftn(values)
    del values
    power = transform.real ** 2 + transform.imag ** 2
    del transform
    n_last = sample.shape[-1]
    twice = np.full(power.shape[-1], 2.0)
    twice[0] = 1.0
    if n_last % 2 == 0:
        twice[-1] = 1.0
    power *= twice
    # |k| by broadcasting the axes' frequencies (no full coordinate arrays)
    freqs = [2.0 * np.pi * np.fft.fftfreq(n, d=h) for n, h in zip(sample.shape[:-1], spacing[:-1])]
    freqs.append(2.0 * np.pi * np.fft.rfftfreq(n_last, d=spacing[-1]))
    k = np.zeros(power.shape)
    for axis, f in enumerate(freqs):
        shape = [1] * power.ndim
        shape[axis] = f.size
        k += (f ** 2).reshape(shape)
    np.sqrt(k, out=k)
    # the first moment over k-space of the radially averaged S(k): sum over shells of
    # k S(k) n(k) / sum of S(k) n(k), n(k) the modes of a shell, taken mode by mode so that each
    # mode sits at its own |k| (no shell rounding)
    total = float(power.sum() - power.flat[0])
    if not total > 0:
        return float("nan")
    k *= power
    k1 = float(k.sum() / total)
    return 2.0 * np.pi / k1


def interface_spacing(mesh: Mesh, c_point=None, *, level: float = 0.5,
                      interface_size: float | None = None) -> float:
    """The inverse interface density: domain volume over interface size, a length.

    Parameters
    ----------
    mesh : Mesh
    c_point : ndarray of shape (n_points,), optional
        The indicator at the points, whose contour ``c = level`` gives the interface size when
        ``interface_size`` is not given.
    level : float
        The contour's level in c.
    interface_size : float, optional
        The contour's length (2D) or area (3D), already measured (``interface_size``).

    Returns
    -------
    float, length units
        NaN with no interface (or no size given and no ``c_point``).

    Notes
    -----
    A self-similar pattern keeps its interface size per unit volume a fixed multiple of one over
    its scale, so V / A grows as the scale does; no interface width enters it (the contour
    c = level is the same line for any width), which the structure factor's first moment lacks
    (:func:`coarsening_length`). A contour of a curved interface cut a few cells across reads a
    little short, so V / A reads a little long for domains only a few cells across.

    References
    ----------
    Bray, A. J. (1994), Adv. Phys. 43:357: Porod's law, the interface density as one over the
    pattern's length.
    """
    if interface_size is None:
        if c_point is None:
            return float("nan")
        from ._contour import find_interface

        interface_size = float(np.sum(find_interface(mesh, c_point, level=level).element_sizes))
    size = float(interface_size)
    return float(mesh.total_measure) / size if np.isfinite(size) and size > 0 else float("nan")


def coarsening_exponent(times, lengths) -> dict:
    """Least-squares fit of ``L = a t^n`` in log-log, with the standard error of n.

    Parameters
    ----------
    times, lengths : array_like
        Steps with t > 0 and a finite, positive L are used.

    Returns
    -------
    dict
        ``exponent``, ``exponent_stderr`` (NaN with fewer than 3 points), ``prefactor``,
        ``points``.
    """
    t = np.asarray(times, dtype=float)
    L = np.asarray(lengths, dtype=float)
    use = np.isfinite(t) & np.isfinite(L) & (t > 0) & (L > 0)
    out = {"exponent": float("nan"), "exponent_stderr": float("nan"), "prefactor": float("nan"),
           "points": int(use.sum())}
    if use.sum() < 2:
        return out
    x, y = np.log(t[use]), np.log(L[use])
    A = np.column_stack([x, np.ones_like(x)])
    coef, *_ = np.linalg.lstsq(A, y, rcond=None)
    out["exponent"], out["prefactor"] = float(coef[0]), float(np.exp(coef[1]))
    if use.sum() > 2:
        resid = y - A @ coef
        s2 = float(resid @ resid) / (use.sum() - 2)
        out["exponent_stderr"] = float(np.sqrt(s2 / np.sum((x - x.mean()) ** 2)))
    return out
