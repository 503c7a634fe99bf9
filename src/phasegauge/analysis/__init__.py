"""Analyses: pure functions of a mesh and the phase indicator."""
