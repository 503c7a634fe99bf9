"""The plots of the measure report, built from the result tables."""

from __future__ import annotations

__all__ = ["measure_figures"]


def measure_figures(result) -> list:
    """(file stem, caption, matplotlib Figure) for every plot that has data."""
    return []
