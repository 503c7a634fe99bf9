"""Equilibrium of a phase-field run: chemical potential, free energy, interfacial tension.

For the Ginzburg-Landau free energy ``F = int f(phi) + kappa/2 |grad phi|^2 dV`` with the double
well ``f = h (phi - lean)^2 (phi - rich)^2``, the chemical potential is
``mu = f'(phi) - kappa lap(phi)``: uniform in a relaxed run. The interfacial tension of a
planar equilibrium interface is ``sigma = int kappa |dphi/dn|^2 dn``, so over a whole field
``sigma = int kappa |grad phi|^2 dV / interface size``.

On a uniform regular grid with cell values: the Laplacian by the five- (seven-) point stencil,
the gradient energy by face differences (the discrete energy whose variation is that
Laplacian), zero flux through the boundary unless the axis is periodic. With point values: the
same on the point lattice, edge differences between neighbouring points and f and mu at the
points, each point weighted by its share of the cells (the trapezoid rule: half a spacing on a
boundary plane). A periodic axis's two boundary planes equal to round-off are one plane written
twice (a finite element code's layout); otherwise the period is one spacing beyond the last plane
(a spectral code's N points 0..N-1), every point weighted by a whole spacing.

References
----------
Cahn, J. W. and Hilliard, J. E. (1958), "Free energy of a nonuniform system. I. Interfacial
free energy", J. Chem. Phys. 28:258.
"""

from __future__ import annotations

import numpy as np

from ..errors import OptionError
from ..model.axes import AXIS_INDEX
from ..model.mesh import Mesh
from ..model.mixture_models import check_kappa

__all__ = ["equilibrium_metrics", "EQUILIBRIUM_KEYS"]

EQUILIBRIUM_KEYS = ("chemical_potential_mean", "chemical_potential_spread_max", "chemical_potential_spread_rms",
                    "free_energy", "gradient_energy", "interfacial_tension")


def _along(ndim: int, axis: int, part: slice) -> tuple:
    """The index taking ``part`` of ``axis`` (all of the other axes) of an array of ``ndim`` axes."""
    index = [slice(None)] * ndim
    index[axis] = part
    return tuple(index)


def _nan() -> dict:
    return {key: float("nan") for key in EQUILIBRIUM_KEYS}


def _cell_lattice(phi: np.ndarray, h: tuple, wrapped: tuple) -> tuple[np.ndarray, float]:
    """Laplacian and sum of squared gradients times volume of cell values (face differences)."""
    dV = float(np.prod(h))
    lap = np.zeros_like(phi)
    grad_energy = 0.0
    term = np.empty_like(phi)
    for k, (step, wraps) in enumerate(zip(h, wrapped)):
        # along the axis k: the first and last layers, all but the first, all but the last
        first, last, rest, head = (_along(phi.ndim, k, part) for part in
                                   (slice(0, 1), slice(-1, None), slice(1, None), slice(None, -1)))
        # (ahead - 2 phi + behind) / h^2 in place, term by term in that order; beyond the
        # boundary the cell itself (no flux) or, on a periodic axis, the far end
        np.multiply(phi, 2.0, out=term)
        np.subtract(phi[rest], term[head], out=term[head])
        np.subtract(phi[first] if wraps else phi[last], term[last], out=term[last])
        term[rest] += phi[head]
        term[first] += phi[last] if wraps else phi[first]
        term /= step ** 2
        lap += term
        faces = np.diff(phi, axis=k)
        if wraps:  # the face between the far end and the first cell, last
            faces = np.concatenate([faces, phi[first] - phi[last]], axis=k)
        grad_energy += float(np.sum(faces ** 2)) / step ** 2 * dV
    return lap, grad_energy


def _point_weights(n: int, step: float, ndim: int, axis: int, ends: bool = True) -> np.ndarray:
    """Weights of ``n`` points a ``step`` apart, shaped to broadcast along ``axis``: the trapezoid
    rule (half a step on the two end planes) with ``ends``, a whole step each without."""
    w = np.full(n, step)
    if ends:
        w[[0, -1]] *= 0.5
    shape = [1] * ndim
    shape[axis] = n
    return w.reshape(shape)


def _product_but(weights: list, axis: int, ndim: int) -> np.ndarray:
    """The product of the weights of every axis but ``axis`` (the area across it of each edge)."""
    across = np.ones((1,) * ndim)
    for j, w in enumerate(weights):
        if j != axis:
            across = across * w
    return across


def _point_lattice(phi: np.ndarray, h: tuple, wrapped: tuple) -> tuple[np.ndarray, float, np.ndarray, float]:
    """Laplacian, sum of squared gradients times volume, the points' volumes, and the sum of squared
    gradients times volume over the mesh as written, of point values.

    Edge differences between neighbouring points, each edge weighted by its length times the
    weights across it; the Laplacian is that energy's variation per point volume: beyond a wall the
    mirror point (no flux). A periodic axis has one of two layouts. Its two boundary planes equal to
    round-off (:func:`plane_written_twice`) are one plane written twice: trapezoid weights, and
    across the boundary the point next to the far plane. Otherwise the period is one spacing beyond
    the last plane (a spectral code's N points 0..N-1): a whole spacing for every point, and the
    edge from the last plane to the first. The mesh ends at the last plane in either layout: the
    last sum, the gradient energy where an interface traced on the mesh lies, leaves that edge out.
    """
    from ._periodic_look import plane_written_twice

    ndim = phi.ndim
    rolled = tuple(bool(wraps) and not plane_written_twice(phi, k) for k, wraps in enumerate(wrapped))
    weights = [_point_weights(n, step, ndim, k, ends=not rolled[k])
               for k, (n, step) in enumerate(zip(phi.shape, h))]
    on_mesh = [_point_weights(n, step, ndim, k) for k, (n, step) in enumerate(zip(phi.shape, h))]
    volume = np.ones((1,) * ndim)
    for w in weights:
        volume = volume * w
    lap = np.zeros_like(phi)
    grad_energy = mesh_energy = 0.0
    for k, (step, wraps) in enumerate(zip(h, wrapped)):
        across = _product_but(weights, k, ndim)
        # along the axis k: the first, last, second and last but one planes of points; the first
        # and last edges; all edges but the first, all but the last
        first, last, second, before_last, rest, head = (
            _along(ndim, k, part) for part in (slice(0, 1), slice(-1, None), slice(1, 2), slice(-2, -1),
                                               slice(1, None), slice(None, -1)))
        edges = np.diff(phi, axis=k)
        squares = np.square(edges)
        if any(rolled):  # the mesh's own weights differ from the period's
            mesh_energy += float(np.sum(squares * _product_but(on_mesh, k, ndim))) / step
        squares *= across
        grad_energy += float(squares.sum()) / step
        del squares
        closing = None
        if rolled[k]:  # the edge from the last plane to the first, one spacing beyond the mesh
            closing = phi[first] - phi[last]
            grad_energy += float(np.sum(np.square(closing) * across)) / step
        edges /= step ** 2  # differences per spacing squared from here on
        lap[_along(ndim, k, slice(1, -1))] += edges[rest] - edges[head]  # (ahead - behind) inside
        if closing is not None:  # the period one spacing beyond the last plane
            closing /= step ** 2
            lap[first] += edges[first] - closing
            lap[last] += closing - edges[last]
        elif wraps:  # one plane written twice: across it the point next to the far plane
            lap[first] += edges[first] - (phi[first] - phi[before_last]) / step ** 2
            lap[last] += (phi[second] - phi[last]) / step ** 2 - edges[last]
        else:  # the mirror point beyond the wall: no flux
            lap[first] += 2.0 * edges[first]
            lap[last] -= 2.0 * edges[last]
        del edges
    return lap, grad_energy, volume, mesh_energy if any(rolled) else grad_energy


def equilibrium_metrics(mesh: Mesh, field, model, *, kappa: float, periodic=(),
                        interface_size: float | None = None, temperature: float | None = None) -> dict:
    """Chemical potential spread, free energy and interfacial tension of one step.

    Parameters
    ----------
    mesh : Mesh
        A uniform regular grid (other meshes give NaN).
    field : ndarray of shape (n_cells,) or (n_points,)
        The order parameter in the model's own variable (``measure --free-energy`` passes c, the
        field mapped through its range), on the cells or on the points: point values are measured
        on the point lattice itself.
    model : DoubleWellModel, NrtlModel or RegularSolutionModel
        The bulk free energy ``f`` (``model.mixing_gibbs``) and its slope
        (``model.mixing_gibbs_slope``): the double well ``height (phi - lean)^2 (phi - rich)^2``,
        or an activity model's ``Delta g_mix / RT`` in the mole fraction (energies in RT per
        molar volume).
    kappa : float
        Gradient-energy coefficient (> 0), in field^-2 energy length^2 per volume units.
    periodic : sequence of {'x', 'y', 'z'}
        Periodic axes (the stencil wraps); other boundaries carry no flux. With point values each
        such axis's two boundary planes are one plane written twice where their values are equal
        to round-off, and the period is one spacing beyond the last plane where they are not.
    interface_size : float, optional
        Length (2D) or area (3D) of the interface, for the tension.
    temperature : float, optional
        Temperature in K of an activity model (the double well does not use it).

    Returns
    -------
    dict
        ``chemical_potential_mean`` (volume-weighted), ``chemical_potential_spread_max``
        (largest |mu - mean|), ``chemical_potential_spread_rms`` (volume-weighted RMS of
        mu - mean), ``free_energy`` (int f + kappa/2 |grad phi|^2 dV), ``gradient_energy``
        (int kappa |grad phi|^2 dV), ``interfacial_tension`` (gradient energy per interface
        size; NaN without one; with point values whose period lies one spacing beyond the last
        plane, the gradient energy over the mesh as written, where the interface was traced).

    Notes
    -----
    Checks: for ``f = A c^2 (1 - c)^2``, sigma = sqrt(2 kappa A) / 6; for
    ``(beta/4)(phi^2 - 1)^2``, sigma = (2 sqrt 2 / 3) sqrt(kappa beta); for any f,
    sigma = int sqrt(2 kappa (f - tangent)) dx between the coexisting compositions (Cahn &
    Hilliard 1958).
    """
    kappa = check_kappa(kappa)
    if kappa is None:
        raise OptionError("kappa is needed", fix="write kappa = 1e-4 in the model file")
    grid = mesh.regular_grid
    values = np.asarray(field, dtype=np.float64)
    if grid is None or not grid.uniform or values.shape not in ((mesh.n_cells,), (mesh.n_points,)):
        return _nan()
    on_points = values.shape == (mesh.n_points,)
    phi = grid.points_to_array(values) if on_points else grid.cells_to_array(values)
    if not np.isfinite(phi).all():
        return _nan()
    h = grid.spacing
    wrap = {AXIS_INDEX[a] for a in periodic}
    wrapped = tuple(axis in wrap for axis in grid.mesh_axes)
    if on_points:
        lap, grad_energy, volume, mesh_energy = _point_lattice(phi, h, wrapped)
    else:
        lap, grad_energy = _cell_lattice(phi, h, wrapped)
        volume, mesh_energy = float(np.prod(h)), grad_energy
    if getattr(model, "kind", "") != "double-well":  # a mole fraction: the logarithms need 0 < x < 1
        if temperature is None or not np.isfinite(temperature):
            return _nan()
        phi = np.clip(phi, 1e-12, 1.0 - 1e-12)
    bulk = model.mixing_gibbs(phi, temperature)
    mu = model.mixing_gibbs_slope(phi, temperature) - kappa * lap
    del lap
    if on_points:
        total = float(np.sum(np.broadcast_to(volume, mu.shape)))
        mean = float(np.sum(mu * volume)) / total
        dev = mu - mean
        rms = float(np.sqrt(np.sum(dev ** 2 * volume) / total))
        bulk_energy = float(np.sum(bulk * volume))
    else:  # one volume per cell
        mean = float(mu.mean())
        dev = mu - mean
        rms = float(np.sqrt(np.mean(dev ** 2)))
        bulk_energy = float(bulk.sum() * volume)
    tension = (kappa * mesh_energy / interface_size
               if interface_size is not None and np.isfinite(interface_size) and interface_size > 0
               else float("nan"))
    return {"chemical_potential_mean": mean,
            "chemical_potential_spread_max": float(np.abs(dev).max()),
            "chemical_potential_spread_rms": rms,
            "free_energy": float(bulk_energy + 0.5 * kappa * grad_energy),
            "gradient_energy": float(kappa * grad_energy),
            "interfacial_tension": float(tension)}
