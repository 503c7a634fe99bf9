"""Grid convergence of a quantity on three meshes: apparent order, extrapolation, GCI (Celik et al. 2008)."""

from ._grid_convergence import (CONVERGENCE_FIELDS, GCI_SAFETY_FACTOR, grid_convergence,
                                representative_cell_size)

__all__ = ["grid_convergence", "representative_cell_size", "GCI_SAFETY_FACTOR", "CONVERGENCE_FIELDS"]
