"""Mixing: intensity and scale of segregation, cross-section profiles, mixing length.

Whole-domain or box figures weigh cells by their volume; cross-section
profiles cut the mesh exactly by planes normal to an axis and weigh by area
and by the normal flow. All figures follow Danckwerts (1952).
"""

from ._coarsening import coarsening_exponent, coarsening_length, interface_spacing
from ._cross_sections import PROFILE_COLUMNS, cross_sections, cross_sections_noted, prepare_cross_sections
from ._segregation import (MIXED_RANGE, MIXING_LENGTH_STATUSES, mixing_length, mixing_length_note,
                           mixing_length_status, mixing_metrics, segregation_scale)

__all__ = ["mixing_metrics", "cross_sections", "cross_sections_noted", "prepare_cross_sections", "mixing_length",
           "mixing_length_status", "mixing_length_note", "segregation_scale", "coarsening_length", "interface_spacing",
           "coarsening_exponent", "PROFILE_COLUMNS", "MIXED_RANGE", "MIXING_LENGTH_STATUSES"]
