"""Reports: tables, plots, the HTML page and the manifest (the edge where files are written).

The report draws and writes what a run hands it (tables, plain records and arrays); it reads no
input and computes no metric.
"""

from ._files import (atomic_save_figure, atomic_write_bytes, atomic_write_csv, atomic_write_json,
                     atomic_write_text, prepare_output_folder)
from ._measure_report import write_measure_report

__all__ = ["atomic_save_figure", "atomic_write_bytes", "atomic_write_csv", "atomic_write_json",
           "atomic_write_text", "prepare_output_folder", "write_measure_report"]
