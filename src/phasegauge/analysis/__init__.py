"""Analyses: pure functions of a mesh and the phase indicator.

Public modules: :mod:`~phasegauge.analysis.interface` (contours, widths, diffusion audit),
:mod:`~phasegauge.analysis.droplets` (labelling), :mod:`~phasegauge.analysis.tracking`
(tracks and events), :mod:`~phasegauge.analysis.mixing` (segregation, cross sections),
:mod:`~phasegauge.analysis.conservation` (phase volume, boundedness, boundary flux),
the modules :mod:`~phasegauge.analysis.compare` (two runs side by side),
:mod:`~phasegauge.analysis.references` (published benchmark values),
:mod:`~phasegauge.analysis.thermo` (partially miscible mixtures: binodal, spinodal, phase compositions),
:mod:`~phasegauge.analysis.convergence` (grid convergence index) and
:mod:`~phasegauge.analysis.probes` (values at points and along lines).
"""

__all__ = ["interface", "droplets", "tracking", "mixing", "conservation", "compare", "references", "thermo",
           "convergence", "probes"]


def __getattr__(name):  # import the analysis modules on first use (they pull in scipy and pandas)
    if name in __all__:
        import importlib

        return importlib.import_module(f"{__name__}.{name}")
    raise AttributeError(f"module {__name__!r} has no attribute {name!r}")
