"""Reading a reference table (published values a run is checked against) from a CSV file.

The checks themselves work on the table (:mod:`phasegauge.analysis.references`);
this module only reads the file.
"""

from __future__ import annotations

import os

from ..errors import InputError

__all__ = ["read_reference_table"]


def read_reference_table(path):
    """Read a reference table from a CSV file, as it stands (checked by the analysis).

    Parameters
    ----------
    path : str or os.PathLike
        CSV with a header (``quantity, time, value, tolerance``, optional ``low, high,
        source``); ``#`` starts a comment.

    Returns
    -------
    pandas.DataFrame
        The table, with ``attrs["path"]`` naming the file (the checks name it in their messages).

    Raises
    ------
    InputError
        The file cannot be read as CSV.
    """
    import pandas as pd

    try:
        table = pd.read_csv(path, skipinitialspace=True, comment="#")
    except (OSError, pd.errors.ParserError, pd.errors.EmptyDataError, UnicodeDecodeError) as err:
        raise InputError(f"cannot read the reference table: {err}", where=os.fspath(path),
                         fix="give a CSV file with columns quantity, time, value, tolerance") from None
    table.attrs["path"] = os.fspath(path)
    return table
