"""Demo series computed from published models in invented scenarios.

:func:`write_samples` writes every series (or the ones named) into a folder;
the generators and the models behind them are public for tests and notebooks.
Every generator is deterministic: the same call writes the same values.

Series (see ``sample_fields/README.md``):

``filament_breakup``
    2D Cahn-Hilliard: an oil ligament pinching into droplets that coarsen;
    ``phi`` in [-1, 1] on the points of triangles; XDMF time series.
``vortex_upwind``, ``vortex_sharp``
    Reversed single vortex: a dye blob advected by first-order upwind (64 x 64
    quads) and by a bounded flux-corrected TVD scheme (100 x 100 quads); ``c``
    in [0, 1] and ``velocity`` on cells; numbered VTU files with ``TimeValue``.
``channel_mixing``
    Two streams in a channel at four inlet flow rates: a folder of four XDMF
    series (one steady step each, the Graetz-type series solution), ``c`` and
    ``velocity`` on the points of triangles; a campaign
    (``recipes/channel_mixing.toml``).
``droplets_3d``
    Two droplets pushed together by a straining flow and merging (advective
    Cahn-Hilliard); ``phi`` and ``velocity`` on the points of hexahedra; XDMF.
``solvent_quench``
    An invented solvent pair (NRTL) cooled into two liquids and reheated until it
    mixes (Cahn-Hilliard with the NRTL free energy); ``x``, a solute ``s`` and
    ``T`` on the cells of quads; XDMF.

Not among the shipped series, for tests of reading solver output:
:func:`write_vof_tank` writes a sloshing tank laid out as a finite-volume
solver's VTK converter writes it (``.vtm`` files beside step folders, fields on
cells and on points under one name, times only in the files' field data).
"""

from __future__ import annotations

import os

from ..errors import OptionError, OutputError
from ._cahn_hilliard import cahn_hilliard, cahn_hilliard_energy, spectral_grid
from ._channel import CHANNEL, channel_concentration, poiseuille_velocity, write_channel_mixing
from ._droplets3d import DROPLETS_3D, droplets_3d_fields, straining_flow, write_droplets_3d
from ._filament import FILAMENT, filament_breakup_fields, filament_initial, write_filament_breakup
from ._finite_volume import advect
from ._miscibility import SOLVENT_QUENCH, solvent_quench_fields, write_solvent_quench
from ._vortex import VORTEX, circle_fraction, vortex_fields, vortex_velocity, write_vortex
from ._vof_tank import TANK, TankCase, tank_fields, tank_mesh, tank_velocity, write_vof_tank

__all__ = [
    "SAMPLE_NAMES", "write_samples",
    "write_filament_breakup", "write_vortex", "write_channel_mixing", "write_droplets_3d",
    "filament_breakup_fields", "filament_initial", "vortex_fields", "vortex_velocity",
    "circle_fraction", "channel_concentration", "poiseuille_velocity", "droplets_3d_fields",
    "straining_flow", "cahn_hilliard", "cahn_hilliard_energy", "spectral_grid", "advect",
    "FILAMENT", "VORTEX", "CHANNEL", "DROPLETS_3D",
    "write_solvent_quench", "solvent_quench_fields", "SOLVENT_QUENCH",
    "write_vof_tank", "tank_fields", "tank_mesh", "tank_velocity", "TankCase", "TANK",
]

#: the series :func:`write_samples` writes, in order
SAMPLE_NAMES = ("filament_breakup", "vortex_upwind", "vortex_sharp", "channel_mixing", "droplets_3d",
                "solvent_quench")

_WRITERS = {
    "filament_breakup": write_filament_breakup,
    "vortex_upwind": lambda d: write_vortex(d, "vortex_upwind"),
    "vortex_sharp": lambda d: write_vortex(d, "vortex_sharp"),
    "channel_mixing": write_channel_mixing,
    "droplets_3d": write_droplets_3d,
    "solvent_quench": write_solvent_quench,
}


def write_samples(directory, *, names=None, progress=None) -> dict:
    """Compute and write the demo series into ``directory``.

    Parameters
    ----------
    directory : str or os.PathLike
        Created if missing. Files of the same names are replaced (each file
        atomically: written under a temporary name, then moved in place).
    names : iterable of str, optional
        Which series; default all of :data:`SAMPLE_NAMES`.
    progress : callable, optional
        Called as ``progress(name, path)`` after each series is written.

    Returns
    -------
    dict
        Series name -> path to give to ``phasegauge measure`` (an ``.xdmf``
        file, or the folder of numbered ``.vtu`` files); for ``channel_mixing``
        the folder of its series, one per flow rate (each a campaign run).

    Raises
    ------
    OptionError
        An unknown series name.
    OutputError
        ``directory`` exists and is not a folder.

    Notes
    -----
    All the series take some tens of seconds on two cores; the values do
    not depend on the machine beyond floating-point round-off.
    """
    chosen = list(SAMPLE_NAMES) if names is None else [str(n) for n in names]
    unknown = [n for n in chosen if n not in _WRITERS]
    if unknown:
        raise OptionError(f"unknown sample series {', '.join(map(repr, unknown))}",
                          fix="choose from " + ", ".join(SAMPLE_NAMES))
    directory = os.fspath(directory)
    if os.path.exists(directory) and not os.path.isdir(directory):
        raise OutputError("exists and is not a folder", where=directory,
                          fix="give a folder path for the sample series")
    os.makedirs(directory, exist_ok=True)
    written = {}
    for name in chosen:
        written[name] = _WRITERS[name](directory)
        if progress is not None:
            progress(name, written[name])
    return written
