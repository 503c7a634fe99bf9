"""Grid convergence of a quantity on three meshes: apparent order, extrapolation, GCI (Celik et al. 2008)."""

from ._grid_convergence import (CONVERGENCE_COLUMNS, CONVERGENCE_FIELDS, GCI_SAFETY_FACTOR, convergence_table,
                                covered_span, droplet_integrals, grid_convergence, paired_times, span_reach,
                                representative_cell_size)

__all__ = ["grid_convergence", "representative_cell_size", "convergence_table", "droplet_integrals",
           "paired_times", "span_reach", "covered_span", "GCI_SAFETY_FACTOR", "CONVERGENCE_FIELDS",
           "CONVERGENCE_COLUMNS"]
