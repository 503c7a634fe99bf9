"""Model files: a thermodynamic mixture model written as TOML.

::

    [model]
    kind = "nrtl"                  # or "regular", "double-well"
    component = "solvent A"        # what the composition field is the mole fraction of
    tau_a = [0.8, 1.2]             # tau_ij = a_ij + b_ij / T  (12, 21)
    tau_b = [250.0, 150.0]         # in K
    alpha = 0.3

A regular solution takes ``A_a`` and ``A_b`` (``A = a + b / T``) or a constant ``chi``; the
double well takes ``lean``, ``rich`` and optionally ``height``. Every kind takes an optional
``kappa``, the gradient-energy coefficient that ``measure --free-energy`` needs. Every value is checked on
reading; an error names the key and the fix in one line.
"""

from __future__ import annotations

import difflib
import os
import sys
from types import MappingProxyType

from ..errors import InputFileNotFound, OptionError, PhasegaugeError
from ..model.mixture_models import MODEL_KINDS, DoubleWellModel, NrtlModel, RegularSolutionModel

__all__ = ["read_mixture_model", "mixture_model_from_table", "MODEL_KEYS"]

#: the keys each kind of model accepts in [model] (besides kind, component and description)
MODEL_KEYS = MappingProxyType({
    "nrtl": ("tau_a", "tau_b", "tau_e", "tau_f", "alpha", "kappa"),
    "regular": ("A_a", "A_b", "chi", "kappa"),
    "double-well": ("lean", "rich", "height", "kappa"),
})
_COMMON = ("kind", "component", "description")


def _suggest(name, known):
    close = difflib.get_close_matches(name, list(known), n=1, cutoff=0.5)
    return f"did you mean '{close[0]}'?" if close else "known keys: " + ", ".join(known)


def mixture_model_from_table(table: dict, *, where: str = ""):
    """Build a model from the ``[model]`` table of a model file (already parsed).

    Parameters
    ----------
    table : dict
    where : str
        The file named in errors.

    Returns
    -------
    NrtlModel, RegularSolutionModel or DoubleWellModel

    Raises
    ------
    OptionError
        Unknown kind or key, a missing key, or a value out of range; one line naming the key.
    """
    if not isinstance(table, dict):
        raise OptionError("[model] must be a table", where=where, fix="write [model] and the keys below it")
    kind = table.get("kind")
    if kind is None:
        raise OptionError("[model] has no 'kind'", where=where, fix='add kind = "nrtl", "regular" or "double-well"')
    if kind not in MODEL_KINDS:
        raise OptionError(f"[model] kind {kind!r} is not known; {_suggest(str(kind), MODEL_KINDS)}", where=where,
                          fix='use kind = "nrtl", "regular" or "double-well"')
    allowed = _COMMON + MODEL_KEYS[kind]
    for key in table:
        if key not in allowed:
            raise OptionError(f"unknown key '{key}' in [model] for kind {kind!r}; {_suggest(key, allowed)}",
                              where=where, fix="see the model file format in the README")
    component = table.get("component", "")
    if not isinstance(component, str):
        raise OptionError(f"[model] component must be a name in quotes, found {component!r}", where=where,
                          fix='write component = "water"')
    try:
        if kind == "nrtl":
            if "tau_a" not in table and "tau_b" not in table:
                raise OptionError("an NRTL model needs tau_a and/or tau_b", fix="write tau_a = [a12, a21] and "
                                  "tau_b = [b12, b21] (tau_ij = a_ij + b_ij / T)")
            value = table.get("alpha", 0.3)
            if isinstance(value, bool) or not isinstance(value, int | float):  # a string, list, table or date
                raise OptionError(f"alpha must be a number, found {value!r}", fix="write alpha = 0.3")
            options = {key: table[key] for key in MODEL_KEYS["nrtl"] if key in table}
            return NrtlModel(component=component, **options)
        if kind == "regular":
            if "chi" in table and ("A_a" in table or "A_b" in table):
                raise OptionError("give either chi or A_a / A_b, not both", fix="keep chi for a constant A")
            if not any(key in table for key in ("chi", "A_a", "A_b")):
                raise OptionError("a regular solution needs A_a and/or A_b (or chi)",
                                  fix="write A_a = 0.0 and A_b = 750.0 (A = A_a + A_b / T)")
            values = {"A_a": table.get("chi", table.get("A_a", 0.0)), "A_b": table.get("A_b", 0.0)}
            for key, value in values.items():
                if isinstance(value, bool | str | list):
                    name = "chi" if "chi" in table and key == "A_a" else key
                    raise OptionError(f"{name} must be a number, found {value!r}", fix=f"write {name} = 2.5")
            return RegularSolutionModel(component=component, kappa=table.get("kappa"), **values)
        for key in ("lean", "rich"):
            if key not in table:
                raise OptionError(f"a double well needs '{key}'", fix="write lean = 0.1 and rich = 0.9")
        options = {key: table[key] for key in MODEL_KEYS["double-well"] if key in table}
        return DoubleWellModel(component=component, **options)
    except PhasegaugeError as err:
        raise OptionError(f"[model] {err.what}", where=where, fix=err.fix) from None


def read_mixture_model(path):
    """Read a model file (TOML with a ``[model]`` table).

    Parameters
    ----------
    path : str or os.PathLike

    Returns
    -------
    NrtlModel, RegularSolutionModel or DoubleWellModel

    Raises
    ------
    InputFileNotFound
        No such file.
    OptionError
        Not TOML, no [model] table, or a bad key or value (one line naming the key and the fix).
    """
    path = os.fspath(path)
    if sys.version_info >= (3, 11):
        import tomllib
    else:  # pragma: no cover
        import tomli as tomllib
    if not os.path.isfile(path):
        raise InputFileNotFound("model file not found", where=path,
                                fix="check the path; an example is sample_fields/solvent_pair.toml")
    try:
        with open(path, "rb") as handle:
            data = tomllib.load(handle)
    except tomllib.TOMLDecodeError as exc:
        raise OptionError(f"not valid TOML ({exc})", where=path,
                          fix="check quotes, brackets and '=' on the line named") from None
    if "model" not in data:
        raise OptionError("no [model] table", where=path, fix='start the file with [model] and kind = "nrtl"')
    extra = [name for name in data if name != "model"]
    if extra:
        raise OptionError(f"unknown table [{extra[0]}]", where=path, fix="a model file holds only [model]")
    return mixture_model_from_table(data["model"], where=path)
