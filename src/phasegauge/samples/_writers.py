"""File writers for the sample series: atomic, deterministic, readable by meshio.

* XDMF time series through meshio's ``TimeSeriesWriter``, with the HDF5 file
  placed next to the XDMF file (meshio puts it in the working directory),
  gzip-compressed datasets, and an array that repeats between steps (a steady
  velocity) stored once.
* VTU files through meshio's writer, with the step time added as a one-value
  ``TimeValue`` field-data array (meshio's VTU writer drops field data).

Every file is written under a temporary name in the target folder and moved in
place with :func:`os.replace`, so a reader never sees half a file.
"""

from __future__ import annotations

import hashlib
import os
import shutil
import secrets
import tempfile

import numpy as np

__all__ = ["write_xdmf_series", "write_vtu_with_time", "replace_into"]


def replace_into(directory: str, files) -> list:
    """Move finished files into ``directory`` (one :func:`os.replace` each)."""
    out = []
    for path in files:
        target = os.path.join(directory, os.path.basename(path))
        os.replace(path, target)
        out.append(target)
    return out


def _time_series_writer_class():
    import h5py
    import meshio

    class _Writer(meshio.xdmf.TimeSeriesWriter):
        """meshio's writer with the HDF5 file beside the XDMF file, compressed."""

        def __enter__(self):
            self.h5_filename = str(self.filename.with_suffix(".h5"))
            self.h5_file = h5py.File(self.h5_filename, "w")
            return self

        def numpy_to_xml_string(self, data):
            # an array equal to one written before (a steady velocity) is stored once
            # and named again by every step that holds it
            data = np.ascontiguousarray(data)
            key = (data.dtype.str, data.shape, hashlib.sha256(data.tobytes()).hexdigest())
            written = self.__dict__.setdefault("_written", {})
            if key not in written:
                name = f"data{self.data_counter}"
                self.data_counter += 1
                self.h5_file.create_dataset(name, data=data, compression="gzip",
                                            compression_opts=6, shuffle=True)
                written[key] = os.path.basename(self.h5_filename) + ":/" + name
            return written[key]

    return _Writer


def write_xdmf_series(path: str, mesh, steps) -> str:
    """Write an XDMF time series (XDMF file plus HDF5 file of the same stem).

    Parameters
    ----------
    path : str
        Target ``.xdmf`` path; the HDF5 file gets the same stem and ``.h5``.
    mesh : phasegauge.Mesh
    steps : iterable of (time, point_data, cell_data)
        Cell data joined over the mesh's blocks.

    Returns
    -------
    str
        ``path``.
    """
    directory = os.path.dirname(os.path.abspath(path))
    scratch = tempfile.mkdtemp(prefix=".writing-", dir=directory)
    try:
        inner = os.path.join(scratch, os.path.basename(path))
        with _time_series_writer_class()(inner) as writer:
            writer.write_points_cells(mesh.points, [(b.cell_type, b.connectivity) for b in mesh.blocks])
            for time, point_data, cell_data in steps:
                split = {name: [np.asarray(v)[a:b] for a, b in zip(mesh.block_offsets[:-1],
                                                                 mesh.block_offsets[1:])]
                         for name, v in (cell_data or {}).items()}
                writer.write_data(float(time), point_data=point_data or {}, cell_data=split)
        h5 = os.path.splitext(inner)[0] + ".h5"
        replace_into(directory, [h5, inner])
    finally:
        shutil.rmtree(scratch, ignore_errors=True)
    return path


def write_vtu_with_time(path: str, mesh, time: float, *, point_data=None, cell_data=None) -> str:
    """Write one VTU file holding ``time`` as field data ``TimeValue`` (atomic).

    The arrays are written by meshio (binary, zlib-compressed); a ``<FieldData>`` block
    with one ASCII ``TimeValue`` array is placed before ``<Piece>``, where VTK's
    own writers put it and where meshio's reader finds it.
    """
    import meshio

    from ..meshgen import to_meshio

    directory = os.path.dirname(os.path.abspath(path))
    temp = os.path.join(directory, f".writing-{secrets.token_hex(6)}.vtu")  # new file: umask applies
    try:
        meshio.vtu.write(temp, to_meshio(mesh, point_data, cell_data), binary=True,
                         compression="zlib")
        with open(temp, "rb") as f:
            text = f.read()
        block = (b'<FieldData>\n<DataArray type="Float64" Name="TimeValue" NumberOfTuples="1" '
                 b'format="ascii">\n' + repr(float(time)).encode() + b'\n</DataArray>\n</FieldData>\n')
        anchor = text.find(b"<Piece")
        if anchor < 0:
            raise RuntimeError(f"meshio wrote no <Piece> element into {temp}")
        with open(temp, "wb") as f:
            f.write(text[:anchor] + block + text[anchor:])
        os.replace(temp, path)
    finally:
        if os.path.exists(temp):
            os.remove(temp)
    return path
