"""What a measure run computes: the options (checked once, before any step) and the analyses.

:class:`MeasureOptions` holds everything that changes the numbers; its
:meth:`~MeasureOptions.key` digests them for the resume cache and the output
folder's marker.
"""

from __future__ import annotations

import dataclasses
import difflib
import functools
import hashlib
import json
import warnings
from dataclasses import dataclass
from types import MappingProxyType

from ..errors import FieldNotFoundError, FieldShapeError, OldNameWarning, OptionError
from ..model.axes import AXIS_INDEX
from ..model.fields import velocity_name
from ..model.indicator import normalize_field_location, normalize_phase, parse_range

__all__ = ["MeasureOptions", "ANALYSES", "STEP_COLUMNS", "MORE_STEP_COLUMNS", "OLD_OPTION_NAMES", "check_workers",
           "wrong_field_option", "renamed_keywords"]

#: old keyword -> the one name of the option (the old one is accepted with an OldNameWarning)
OLD_OPTION_NAMES = MappingProxyType({"value_range": "range", "connectivity": "adjacency"})


def renamed_keywords(given: dict, known, *, old=None, where: str = "", stacklevel: int = 3) -> dict:
    """Keyword arguments with old names replaced by the current ones; an unknown name refused.

    Parameters
    ----------
    given : dict
        The keywords as the caller wrote them.
    known : iterable of str
        The current names.
    old : dict, optional
        Old name -> current name (default :data:`OLD_OPTION_NAMES`).
    where : str
        What takes the keywords, for the messages (``'measure()'``).

    Returns
    -------
    dict
        The same values under the current names.

    Raises
    ------
    OptionError
        A name that is neither current nor old (with the nearest current name), or
        an option given under both its old and its current name.
    """
    old = OLD_OPTION_NAMES if old is None else old
    known = list(known)
    out = {}
    for key, value in given.items():
        if key in old and key not in known:
            new = old[key]
            if new in given:
                raise OptionError(f"{where} got '{new}' and its old name '{key}'",
                                  fix=f"give only {new}=...")
            warnings.warn(OldNameWarning(f"{where}: '{key}' is the old name of '{new}'; write {new}=... "
                                         "(the old name will be removed)"), stacklevel=stacklevel)
            out[new] = value
        elif key in known:
            out[key] = value
        else:
            close = difflib.get_close_matches(key, known + list(old), n=1, cutoff=0.5)
            hint = f"did you mean '{old.get(close[0], close[0])}'?" if close else "known: " + ", ".join(sorted(known))
            raise OptionError(f"{where} has no option '{key}'; {hint}", fix="see the README's table of option names")
    return out


def accept_old_names(cls):
    """Class decorator: the dataclass ``cls`` takes old option names (with a warning) and
    answers a wrong keyword with the nearest name; a subclass needs the decorator too."""
    init = cls.__init__

    @functools.wraps(init)
    def __init__(self, *args, **kwargs):
        known = [f.name for f in dataclasses.fields(cls)]
        init(self, *args, **renamed_keywords(kwargs, known, where=cls.__name__))

    cls.__init__ = __init__
    return cls

#: the analyses ``measure`` can run
ANALYSES = ("interface", "droplets", "mixing", "conservation")

#: the leading columns of steps.csv, in order (more follow; see the README)
STEP_COLUMNS = ("step", "time", "phase_volume", "phase_volume_drift", "phase_volume_drift_abs",
                "interface_size", "interface_width", "interface_width_cells", "droplet_count",
                "segregation_intensity", "mixing_index", "c_min", "c_max", "overshoot_volume")

#: every other column steps.csv may hold, with the options that add it (the README's steps.csv table; a
#: model's and a solute's columns are run/_mixture.MIXTURE_COLUMNS and SOLUTE_COLUMNS)
MORE_STEP_COLUMNS = ("depth", "interface_eps", "width_threshold_free", "interface_variance", "width_second_moment",
                     "width_profile_median", "width_profile_p90", "widest_x", "widest_y", "widest_z",
                     "under_resolved_interface_fraction", "distance_error_median", "distance_error_p90",
                     "interface_near_boundary_fraction", "interface_near_interface_fraction", "interface_cells_across",
                     "bulk_c_low", "bulk_c_high", "bulk_noise_left_out",
                     "width_cell_data_bias", "under_resolved_droplets", "chemical_potential_mean",
                     "chemical_potential_spread_max", "chemical_potential_spread_rms", "free_energy",
                     "gradient_energy", "interfacial_tension", "mixed_volume_fraction", "mean_indicator",
                     "region_volume", "domain_volume", "nonfinite_volume", "nonfinite_values", "boundary_outflow",
                     "boundary_phase_outflow", "open_boundary", "open_boundary_area",
                     "boundary_phase_outflow_unknown", "phase_volume_outflow", "phase_volume_drift_closed",
                     "phase_mass", "other_mass", "total_mass", "mixing_length", "mixing_length_status",
                     "coarsening_length", "interface_spacing", "segregation_scale")


@accept_old_names
@dataclass(frozen=True)
class MeasureOptions:
    """What to measure and how (everything that changes the numbers).

    Parameters
    ----------
    field : str
        Field mapped to the phase indicator.
    range : tuple of float
        Field values mapped to c = 0 and c = 1 (old name ``value_range``).
    phase : {'upper', 'lower'}
        Which side of the range is the measured phase.
    level : float
        Indicator level of the interface and of droplet labelling, in (0, 1).
    velocity : str, sequence of str, or None
        Velocity field (for droplet velocities, prediction in tracking, flow-weighted cross
        sections and the boundary flux): a vector field, or its 2 or 3 scalar components in
        x, y(, z) order, as ``('u.x', 'u.y')`` or ``'u.x,u.y'`` (kept as the comma text).
    analyses : tuple of str
        Subset of :data:`ANALYSES`.
    adjacency : {'face', 'point'}
        Cells that share a face (or any point) belong to one droplet (old name
        ``connectivity``).
    periodic : tuple of str
        Periodic axes (``'x'``, ``'y'``, ``'z'``): droplets, widths and bulk distances join across
        them, their boundary planes are never open, and the free energy's stencil wraps there.
    ignore_remerge_within : int
        A breakup that merges again, or a coalescence that breaks up again into as many drops, within this
        many steps is not an event.
    densities : tuple of float or None
        Densities of the measured phase and the other phase, for masses.
    diffusivity : float or None
        Physical diffusivity or mobility to compare the numerical one with.
    interface_kind : {'sharp', 'diffuse'} or None
        The run's interface kind as the user knows it (a volume-of-fluid or a phase-field run),
        taking the place of the kind read from the interface's thickness (None: that kind); the
        audit keeps the measured one beside it (``interface_kind_measured``).
    box : tuple or None
        ``((xmin, xmax), (ymin, ymax)[, (zmin, zmax)])`` region for mixing figures; a z pair
        that bounds nothing (both ends infinite or beyond 1e300) is dropped, so a 2D box
        reads the same however it is given.
    section_axis : str or None
        Axis of the cross-section profiles (``'x'``...); None for none.
    section_count : int
        Number of planes when ``section_positions`` is not given.
    section_positions : tuple of float or None
    mixing_target : float
        Mixing index that defines the mixing length.
    inflow_mean : float or None
        The mean of c over the whole inflow, strictly between 0 and 1, that the sections' mixing
        index against the inflow is read about; None: the first section along the flow's (flow-weighted).
    segregation_scale : bool
        Also compute Danckwerts' scale of segregation (from the autocorrelation
        on a regular resampling; costs an FFT of the domain per step).
    drift_tolerance : float
        Relative phase-volume drift that raises a flag in the report.
    strict : bool
        Fail on a bad step instead of skipping it.
    field_location : {'auto', 'cell', 'point'}
        Which copy of the field to read when a step holds it on cells and on
        points under one name (``'auto'``: the cell copy, the solver's values).
    sort_by_time : bool
        Order the steps by the times stored in their files instead of by their
        names (default: refuse a series whose times do not increase).
    keep_3d : bool
        Measure a mesh one cell thick (quasi-2D) as 3D; by default it is
        measured per unit depth as 2D on its lower face plane.
    free_energy : str or model, optional
        A model file (or model) with its gradient coefficient kappa, read as ``model`` reads it:
        on the composition c mapped through ``range`` (a double well's ``lean`` and ``rich`` in
        [0, 1]; an activity model, NRTL or regular solution, in the mole fraction c at
        ``temperature`` or ``temperature_field``). Each step then gets the chemical potential's
        spread, the free energy and the interfacial tension (uniform regular grids; the stencil
        wraps along ``periodic`` axes and is closed, no flux, along the others).
    level_set : bool
        The field is a level set (a signed distance, zero on the interface; ``phase``
        picks its positive or negative side): the phase is where it has that sign, its
        volume the cut cells' exact share for the field linear on the split, and the
        widths give way to ``distance_error_*`` (see :mod:`phasegauge.model.level_set`).
    coarsening : bool
        The characteristic lengths of the pattern per step (``coarsening_length``, first moment
        of the structure factor; ``interface_spacing``, domain volume / interface size) and the
        exponent of L ~ t^n fitted to the interface spacing (none when the steps store no times).
    probes : tuple of (name, x, y, z)
        Points where the field and c are kept at every step (``probes.csv``).
    lines : tuple of (name, x0, y0, z0, x1, y1, z1, points)
        Straight lines sampled at evenly spaced points at every step (``lines.csv``).
    steps : str or None
        Step numbers to measure, ``START:STOP:STRIDE`` (STOP excluded, as a Python
        slice) or one number; None for all.
    time_from, time_to : float or None
        Measure only steps whose time lies within these bounds (inclusive).
    every : int
        Of the steps left, measure every ``every``-th (see :mod:`phasegauge.run._selection`).
    measured : tuple of (x, y, z, value, time, uncertainty)
        Measured values the run is checked against (``validation.csv``); time and
        uncertainty may be NaN (see :func:`phasegauge.io.read_measured_file`).
    model : mixture model, str or None
        Thermodynamic model of a partially miscible mixture (or its TOML file, read at
        once): the field is the mole fraction of its component, mapped through the range.
    temperature : float or None
        Temperature of the run, in K (or ``temperature_field``).
    temperature_field : str or None
        Field holding the temperature (each step uses its volume-weighted median).
    solute : str or None
        Field of a solute's mole fraction distributed between the two phases.
    solute_receiving : {'rich', 'lean'}
        The phase the solute moves into (extraction progress, partition coefficient).
    bulk_widths : float
        Cells farther than this many measured interface widths (5-95 %) from the contour are the
        bulk (1 width is about 4 Cahn-Hilliard eps, where the tanh tail is 0.35 %).
    equilibrium_tolerance : float
        Mole-fraction gap to the binodal below which a run counts as at equilibrium.
    capillary_length : float or None
        ``sigma v_m / (R T)`` in mesh length units, for the Gibbs-Thomson shift of drops.
    """

    field: str
    range: tuple = (0.0, 1.0)
    phase: str = "upper"
    level: float = 0.5
    velocity: str | None = None
    analyses: tuple = ANALYSES
    adjacency: str = "face"
    periodic: tuple = ()
    ignore_remerge_within: int = 0
    densities: tuple | None = None
    diffusivity: float | None = None
    interface_kind: str | None = None
    box: tuple | None = None
    section_axis: str | None = None
    section_count: int = 20
    section_positions: tuple | None = None
    mixing_target: float = 0.9
    inflow_mean: float | None = None
    segregation_scale: bool = False
    drift_tolerance: float = 1e-3
    strict: bool = False
    steps: str | None = None
    time_from: float | None = None
    time_to: float | None = None
    every: int = 1
    field_location: str = "auto"
    sort_by_time: bool = False
    keep_3d: bool = False
    level_set: bool = False
    free_energy: object = None
    coarsening: bool = False

    probes: tuple = ()
    lines: tuple = ()
    measured: tuple = ()

    model: object = None
    temperature: float | None = None
    temperature_field: str | None = None
    solute: str | None = None
    solute_receiving: str = "rich"
    bulk_widths: float = 1.0
    equilibrium_tolerance: float = 0.01
    capillary_length: float | None = None

    def __post_init__(self):
        set_ = object.__setattr__
        from ._sampling import normalize_lines, normalize_measured, normalize_probes

        set_(self, "field_location", normalize_field_location(self.field_location))
        set_(self, "sort_by_time", bool(self.sort_by_time))
        set_(self, "probes", normalize_probes(self.probes))
        set_(self, "lines", normalize_lines(self.lines))
        set_(self, "measured", normalize_measured(self.measured))
        if not isinstance(self.field, str) or not self.field:
            raise OptionError("a field name is needed", fix="give --field NAME (see 'phasegauge inspect')")
        set_(self, "range", parse_range(self.range))
        from ._selection import normalize_selection, normalize_steps

        set_(self, "steps", normalize_steps(self.steps))
        time_from, time_to, every = normalize_selection(self.time_from, self.time_to, self.every)
        set_(self, "time_from", time_from)
        set_(self, "time_to", time_to)
        set_(self, "every", every)
        set_(self, "phase", normalize_phase(self.phase))
        set_(self, "velocity", velocity_name(self.velocity))
        level = float(self.level)
        if not 0.0 < level < 1.0:
            raise OptionError(f"level must lie strictly between 0 and 1, found {level}",
                              fix="the interface is usually at --level 0.5")
        set_(self, "level", level)
        analyses = tuple(self.analyses)
        unknown = [a for a in analyses if a not in ANALYSES]
        if unknown or not analyses:
            raise OptionError(f"unknown analyses {unknown}" if unknown else "no analysis chosen",
                              fix="choose from " + ", ".join(ANALYSES))
        set_(self, "analyses", tuple(a for a in ANALYSES if a in analyses))
        if self.adjacency not in ("face", "point"):
            raise OptionError(f"adjacency must be 'face' or 'point', found {self.adjacency!r}",
                              fix="'face' keeps droplets that touch at a corner apart")
        periodic = tuple(str(a).lower() for a in (self.periodic or ()))
        if any(a not in AXIS_INDEX for a in periodic):
            raise OptionError(f"periodic axes must be among x, y, z, found {periodic}", fix="for example x,y")
        set_(self, "periodic", periodic)
        if self.section_axis is not None and str(self.section_axis).lower() not in AXIS_INDEX:
            raise OptionError(f"section axis must be x, y or z, found {self.section_axis!r}",
                              fix="for a channel along x: x")
        if self.section_axis is not None:
            set_(self, "section_axis", str(self.section_axis).lower())
        if int(self.section_count) < 1:
            raise OptionError("section count must be at least 1", fix="for example 20")
        if self.section_positions is not None:
            set_(self, "section_positions", tuple(float(p) for p in self.section_positions))
            if self.section_axis is None:
                raise OptionError("section positions are given without a section axis, so no section would be "
                                  "cut", fix="name the axis the planes are normal to (--section-axis x)")
        if self.densities is not None:
            dens = tuple(float(d) for d in self.densities)
            if len(dens) != 2 or min(dens) < 0:
                raise OptionError(f"densities must be two non-negative numbers, found {self.densities}",
                                  fix="give the measured phase's density then the other's")
            set_(self, "densities", dens)
        if self.diffusivity is not None and not float(self.diffusivity) >= 0:
            raise OptionError(f"diffusivity must be non-negative, found {self.diffusivity}",
                              fix="give the physical diffusivity or mobility in length^2/time")
        if self.interface_kind not in (None, "sharp", "diffuse"):
            raise OptionError(f"interface kind must be 'sharp' or 'diffuse', found {self.interface_kind!r}",
                              fix="sharp (volume-of-fluid) or diffuse (phase-field)")
        if not 0.0 < float(self.mixing_target) <= 1.0:
            raise OptionError("mixing target must lie in (0, 1]", fix="0.9 is common practice")
        if self.inflow_mean is not None:
            given = self.inflow_mean
            try:
                set_(self, "inflow_mean", float(given))
            except (TypeError, ValueError):
                set_(self, "inflow_mean", float("nan"))
            if not 0.0 < self.inflow_mean < 1.0:
                raise OptionError(f"inflow mean must lie strictly between 0 and 1, found {given!r}",
                                  fix="give the flow-weighted mean of c over every inlet together (0.25 where a "
                                      "quarter of the flow is dye), or leave it out")
        if self.free_energy is not None:
            set_(self, "free_energy", _free_energy_model(self.free_energy, self.range))
        if self.box is not None:
            box = tuple(tuple(float(v) for v in pair) for pair in self.box)
            if len(box) not in (2, 3) or any(len(p) != 2 or p[0] >= p[1] for p in box):
                raise OptionError(f"box must be 2 or 3 (lo, hi) pairs, one per axis, found {self.box}",
                                  fix="for example ((0, 1), (0, 0.5)) in 2D or ((0, 1), (0, 0.5), (-1, 1)) in 3D")
            if len(box) == 3 and box[2][0] <= -1e300 and box[2][1] >= 1e300:
                box = box[:2]  # an unbounded z: the same box as the two pairs
            set_(self, "box", box)
        from ._mixture import normalize_mixture

        for name, value in normalize_mixture(self).items():
            set_(self, name, value)
        set_(self, "level_set", bool(self.level_set))
        if self.level_set:
            _check_level_set(self)

    @property
    def value_range(self):
        """Old name of :attr:`range` (warns)."""
        warnings.warn(OldNameWarning("'value_range' is the old name of 'range'"), stacklevel=2)
        return self.range

    @property
    def connectivity(self):
        """Old name of :attr:`adjacency` (warns)."""
        warnings.warn(OldNameWarning("'connectivity' is the old name of 'adjacency'"), stacklevel=2)
        return self.adjacency

    def key(self) -> str:
        """Digest of every option that changes the numbers."""
        text = json.dumps(dataclasses.asdict(self), sort_keys=True, default=str)
        return hashlib.sha256(text.encode()).hexdigest()[:16]

    def step_extra(self, step, indicator):
        """Extra per-step work for a subclass (kept in ``StepResult.extra``); None here."""
        return None


def _free_energy_model(value, value_range):
    """The free-energy model of ``--free-energy`` (a model file path or a model), with its kappa.

    Read as ``--model`` reads a model (:func:`check_mapped_wells`): a double well on the
    composition mapped through the range, an activity model (NRTL, regular solution) in that
    composition as the mole fraction, at the run's temperature.
    """
    import os

    if isinstance(value, (str, os.PathLike)):
        from ..io import read_mixture_model

        value = read_mixture_model(value)
    if not hasattr(value, "mixing_gibbs_slope") or getattr(value, "kappa", None) is None:
        raise OptionError("the free energy needs a model with its gradient coefficient kappa",
                          fix='add kappa = 1e-4 to the [model] table of the model file (a "double-well", '
                              '"regular" or "nrtl" model)')
    check_mapped_wells(value, value_range, "--free-energy")
    return value


def check_mapped_wells(model, value_range, option: str) -> None:
    """Refuse a double well whose bulk values lie outside [0, 1], in one line with the same well on
    the mapped scale.

    ``--model`` and ``--free-energy`` read a model alike: on the composition c mapped through
    ``--range`` (0 at the range's low end, 1 at its high end). A well written on the field's own
    scale, h (phi - a)^2 (phi - b)^2 with kappa, is with phi = lo + (hi - lo) c the well
    h (hi - lo)^4 (c - a')^2 (c - b')^2, a' = (a - lo) / (hi - lo), with kappa (hi - lo)^2: the same
    energy, which the fix writes out.
    """
    if getattr(model, "kind", None) != "double-well":
        return
    lean, rich = model.lean, model.rich
    if 0.0 <= lean < rich <= 1.0:
        return
    lo, hi = value_range
    scale = hi - lo
    mapped = sorted(((lean - lo) / scale, (rich - lo) / scale))
    if -1e-12 <= mapped[0] and mapped[1] <= 1.0 + 1e-12:  # the well on the field's own scale: convert it
        parts = [f"lean = {max(mapped[0], 0.0):g}", f"rich = {min(mapped[1], 1.0):g}",
                 f"height = {model.height * scale ** 4:g}"]
        if model.kappa is not None:
            parts.append(f"kappa = {model.kappa * scale ** 2:g}")
        fix = f"write the same well on the mapped scale of --range {lo:g},{hi:g}: " + ", ".join(parts)
    else:
        fix = ("give the field's range with --range LO,HI and write the well on c = (value - LO) / (HI - LO), its "
               "height times (HI - LO)^4, kappa times (HI - LO)^2 (a field in [-1, 1]: --range -1,1, lean = 0, "
               "rich = 1, height times 16, kappa times 4)")
    raise OptionError(f"the double well's bulk values ({lean:g}, {rich:g}) lie outside [0, 1], but {option} reads "
                      "the model on the composition mapped through --range (0 to 1)", fix=fix)


def check_workers(workers) -> int:
    """The number of local worker processes, checked (at least 1)."""
    workers = int(workers)
    if workers < 1:
        raise OptionError(f"workers must be at least 1, found {workers}", fix="for example --workers 2")
    return workers


def wrong_field_option(err) -> bool:
    """True for an error that says the chosen field itself is wrong (not this step's file).

    Such an error at the first step stops the run, skipped steps or not.
    """
    return isinstance(err, FieldNotFoundError) or (isinstance(err, FieldShapeError) and "component" in err.what)


def _check_level_set(options) -> None:
    """Refuse what does not apply to a level-set field, each in one line with the fix."""
    fix = "leave it out: a level set's interface is where the field is 0 (--phase picks the side measured)"
    if options.range != (0.0, 1.0):
        raise OptionError(f"--range {options.range[0]:g},{options.range[1]:g} was given with --level-set", fix=fix)
    if options.level != 0.5:
        raise OptionError(f"--level {options.level:g} was given with --level-set", fix=fix)
    if options.interface_kind is not None:
        raise OptionError(f"--interface-kind {options.interface_kind} was given with --level-set",
                          fix="leave it out: a level set has no width, so no interface kind is read or declared")
    for name, given in (("probes, lines or measured positions", options.probes or options.lines or options.measured),
                        ("a free-energy model", options.free_energy is not None),
                        ("a mixture model", options.model is not None)):
        if given:
            raise OptionError(f"{name} given with --level-set: they read the field as a phase indicator or a "
                              "composition, which a level set is not", fix="measure them in a run without --level-set")
