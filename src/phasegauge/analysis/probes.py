"""Probes and lines: values of a field at chosen points, exact for fields linear on the mesh's own cells."""

from ._probes import PointSampler, line_points, point_sampler, sample_points

__all__ = ["PointSampler", "point_sampler", "sample_points", "line_points"]
