"""Cahn-Hilliard equation on a periodic box: semi-implicit Fourier spectral solver.

The model (Cahn & Hilliard 1958), order parameter phi in [-1, 1]::

    F[phi] = int eps/2 |grad phi|^2 + (1 - phi^2)^2 / (4 eps) dV
    mu     = dF/dphi = -eps lap phi + (phi^3 - phi) / eps
    d phi/dt + div(u phi) = M lap mu

Time stepping is the linearly stabilised semi-implicit scheme (Shen & Yang 2010):
the fourth-order term and a stabilising term S/eps (phi^{n+1} - phi^n) are
implicit, the double-well force and the advection explicit. Without advection
the zero wavenumber is untouched (mean phi conserved to round-off) and the
discrete energy does not increase when S >= max|f''|/2 = 1 for |phi| <= 1.
"""

from __future__ import annotations

import numpy as np

__all__ = ["cahn_hilliard", "cahn_hilliard_energy", "spectral_grid"]


def spectral_grid(shape, lengths):
    """Cell-centred coordinates of a periodic box.

    Parameters
    ----------
    shape : tuple of int
        Grid points per axis.
    lengths : tuple of float
        Box edge lengths, in length units; the box starts at the origin.

    Returns
    -------
    list of ndarray
        One 1D coordinate array per axis, ``(i + 1/2) L / n``.
    """
    return [(np.arange(n) + 0.5) * (length / n) for n, length in zip(shape, lengths)]


def _wavenumbers(shape, lengths):
    """Wavenumbers of the real FFT layout (last axis halved), one array per axis."""
    ks = [2 * np.pi * np.fft.fftfreq(n, d=length / n) for n, length in zip(shape[:-1], lengths[:-1])]
    ks.append(2 * np.pi * np.fft.rfftfreq(shape[-1], d=lengths[-1] / shape[-1]))
    return np.meshgrid(*ks, indexing="ij", sparse=True)


def cahn_hilliard_energy(phi, lengths, *, epsilon: float) -> float:
    """Ginzburg-Landau free energy of a periodic field (gradient taken spectrally).

    Parameters
    ----------
    phi : ndarray of shape (n_1, ..., n_d), dimensionless
    lengths : tuple of float
        Box edge lengths.
    epsilon : float
        Interface parameter eps, in length units.

    Returns
    -------
    float
        ``int eps/2 |grad phi|^2 + (1 - phi^2)^2 / (4 eps) dV``.

    References
    ----------
    Cahn, J. W., Hilliard, J. E. (1958). Free energy of a nonuniform system. I.
    Interfacial free energy. J. Chem. Phys. 28, 258.
    """
    phi = np.asarray(phi, dtype=float)
    cell = float(np.prod([length / n for n, length in zip(phi.shape, lengths)]))
    k = _wavenumbers(phi.shape, lengths)
    ph = np.fft.rfftn(phi)
    axes = tuple(range(phi.ndim))
    grad2 = sum(np.fft.irfftn(1j * kk * ph, s=phi.shape, axes=axes) ** 2 for kk in k)
    density = 0.5 * epsilon * grad2 + (1.0 - phi**2) ** 2 / (4.0 * epsilon)
    return float(density.sum() * cell)


def cahn_hilliard(phi0, lengths, *, epsilon: float, mobility: float, dt: float, save_steps,
                  velocity=None, stabilization: float = 2.0, energies: bool = False, bulk_force=None):
    """Integrate the (advective) Cahn-Hilliard equation on a periodic box.

    Parameters
    ----------
    phi0 : ndarray of shape (n_1, ..., n_d)
        Initial order parameter, dimensionless, about [-1, 1].
    lengths : tuple of float
        Box edge lengths, in length units.
    epsilon : float
        Interface parameter eps (planar profile tanh(x / (sqrt2 eps))).
    mobility : float
        Mobility M, in length^3 per (time x energy-density unit) of the scaled model.
    dt : float
        Time step.
    save_steps : sequence of int
        Step numbers (increasing, 0 = the initial field) at which to return phi.
    velocity : ndarray of shape (d, n_1, ..., n_d), optional
        Steady, divergence-free velocity advecting phi (explicit term div(u phi)).
    stabilization : float
        S of the stabilised scheme; S >= 1 makes it energy stable for |phi| <= 1.
    energies : bool
        Also return the free energy after every step (of the double well only).
    bulk_force : callable, optional
        ``f'(phi)`` of another bulk free energy in place of the double well's ``phi^3 - phi``
        (same scaling: the chemical potential is ``-eps lap phi + f'(phi) / eps``); S should be
        at least half the largest ``f''`` the run meets.

    Returns
    -------
    fields : list of ndarray
        phi at each of ``save_steps``.
    energy : ndarray of shape (n_steps + 1,)
        Only when ``energies`` is true.

    References
    ----------
    Cahn, J. W., Hilliard, J. E. (1958). J. Chem. Phys. 28, 258.
    Shen, J., Yang, X. (2010). Numerical approximations of Allen-Cahn and
    Cahn-Hilliard equations. Discrete Contin. Dyn. Syst. A 28, 1669-1691.
    """
    if energies and bulk_force is not None:
        raise ValueError("energies are those of the double well: leave bulk_force out")
    force_of = (lambda p: p**3 - p) if bulk_force is None else bulk_force
    phi = np.array(phi0, dtype=float)
    save_steps = [int(s) for s in save_steps]
    if any(b <= a for a, b in zip(save_steps, save_steps[1:])) or save_steps[0] < 0:
        raise ValueError("save_steps must be increasing and non-negative")
    k = _wavenumbers(phi.shape, lengths)
    k2 = sum(kk**2 for kk in k)
    explicit = 1.0 + dt * mobility * k2 * stabilization / epsilon
    implicit = 1.0 + dt * mobility * k2 * (epsilon * k2 + stabilization / epsilon)
    ph = np.fft.rfftn(phi)
    out = [phi.copy()] if save_steps[0] == 0 else []
    energy = [cahn_hilliard_energy(phi, lengths, epsilon=epsilon)] if energies else None
    targets = set(save_steps)
    for step in range(1, save_steps[-1] + 1):
        force = np.fft.rfftn(force_of(phi))
        rhs = ph * explicit - dt * mobility * k2 * force / epsilon
        if velocity is not None:
            rhs = rhs - dt * sum(1j * kk * np.fft.rfftn(u * phi) for kk, u in zip(k, velocity))
        ph = rhs / implicit
        phi = np.fft.irfftn(ph, s=phi.shape, axes=tuple(range(phi.ndim)))
        if energies:
            energy.append(cahn_hilliard_energy(phi, lengths, epsilon=epsilon))
        if step in targets:
            out.append(phi.copy())
    if energies:
        return out, np.array(energy)
    return out
