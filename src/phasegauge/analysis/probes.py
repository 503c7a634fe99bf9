"""Probes and lines: values of a field at chosen points, exact for fields linear on the mesh's own cells;
the simulation against measured values at such points."""

from ._probes import PointSampler, line_points, point_sampler, sample_points
from ._validation import SUMMARY_COLUMNS, VALIDATION_COLUMNS, validation_summary, validation_table

__all__ = ["PointSampler", "point_sampler", "sample_points", "line_points", "validation_table",
           "validation_summary", "VALIDATION_COLUMNS", "SUMMARY_COLUMNS"]
