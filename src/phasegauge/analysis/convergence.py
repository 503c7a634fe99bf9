"""Grid convergence of a quantity on three meshes: apparent order, extrapolation, GCI (Celik et al. 2008)."""

from ._grid_convergence import (AGREEMENT_SHARE, CONVERGENCE_COLUMNS, CONVERGENCE_FIELDS, FORMAL_ORDER_TOLERANCE,
                                GCI_SAFETY_FACTOR, HIGHEST_PLAUSIBLE_ORDER, agreeing_rows, check_formal_order,
                                convergence_table, covered_span, droplet_integrals, grid_convergence,
                                implausible_order_limit, paired_times, representative_cell_size, span_reach)

__all__ = ["grid_convergence", "representative_cell_size", "convergence_table", "droplet_integrals",
           "paired_times", "span_reach", "covered_span", "GCI_SAFETY_FACTOR", "CONVERGENCE_FIELDS",
           "CONVERGENCE_COLUMNS", "check_formal_order", "implausible_order_limit", "HIGHEST_PLAUSIBLE_ORDER",
           "FORMAL_ORDER_TOLERANCE", "AGREEMENT_SHARE", "agreeing_rows"]
