"""Partially miscible mixtures: activity models, spinodal, binodal, critical points, tie lines.

Numbers only (no mesh and no file), except the measured-composition helpers, which take cell
values. The models themselves (:class:`NrtlModel`, :class:`RegularSolutionModel`,
:class:`DoubleWellModel`, multicomponent :func:`nrtl_ln_gamma`) live in
:mod:`phasegauge.model.mixture_models` and are re-exported here.

References
----------
Renon, H. and Prausnitz, J. M. (1968). Local compositions in thermodynamic excess functions for
liquid mixtures. AIChE Journal 14(1), 135-144.
"""

from ..model.mixture_models import (MODEL_KINDS, DoubleWellModel, NrtlModel, RegularSolutionModel,
                                    nrtl_ln_gamma)
from ._binodal import (BinaryEquilibrium, CriticalPoint, binodal, critical_points, equilibrium_at,
                       phase_diagram, spinodal)
from ._equilibrium import EQUILIBRIUM_KEYS, equilibrium_metrics
from ._phase_compositions import (MIXTURE_STATES, bulk_compositions, equilibrium_gap, gibbs_thomson_shift,
                                  interface_distance, mixture_state, solute_distribution)
from ._tie_lines import TieLine, liquid_liquid_split, nrtl_split, nrtl_tau

__all__ = ["NrtlModel", "RegularSolutionModel", "DoubleWellModel", "nrtl_ln_gamma", "MODEL_KINDS",
           "BinaryEquilibrium", "CriticalPoint", "spinodal", "binodal", "critical_points", "equilibrium_at",
           "phase_diagram", "TieLine", "liquid_liquid_split", "nrtl_split", "nrtl_tau",
           "bulk_compositions", "interface_distance", "mixture_state", "solute_distribution", "equilibrium_gap",
           "gibbs_thomson_shift", "MIXTURE_STATES", "equilibrium_metrics", "EQUILIBRIUM_KEYS"]
