"""The fields of a VTK XML unstructured-grid file, read without its points and cells.

A later step of a series whose mesh is already known needs only its fields. A VTK XML file
(``.vtu``) keeps its fields in the ``PointData``, ``CellData`` and ``FieldData`` sections and
its mesh everywhere else (``Points``, ``Cells`` with the polyhedra's face arrays, and the
header). :func:`scan_layout` hashes the text outside those three sections (equal hashes:
the same points, cells and faces, byte for byte) and notes where each field's data lies;
:func:`read_fields` decodes only those.

Only files whose arrays are inline ``format="binary"`` (base64, with or without VTK's zlib
compression, header ``UInt32`` or ``UInt64``, either byte order) are laid out here: that is
what VTK's writer (and pyvista's ``save``) write by default. Anything else (ASCII arrays,
appended data, other compressors, bit or string arrays, a file without its closing tag) gives
no layout, and the caller reads the whole file with VTK's reader as before.

References
----------
.. [1] Kitware, *VTK File Formats* (VTK User's Guide, 11th ed., 2010, and the VTK online
   documentation "VTK XML Formats"): the binary inline data layout, the compression header
   ``[number of blocks, block size, last block size, compressed sizes...]``.
"""

from __future__ import annotations

import base64
import hashlib
import re
import zlib
from dataclasses import dataclass
from types import MappingProxyType

import numpy as np

__all__ = ["XmlLayout", "scan_layout", "read_fields", "CHUNK"]

#: bytes read at a time when a file is scanned (the whole file is never held)
CHUNK = 1 << 22

#: VTK XML data types read here, as numpy type codes (byte order added from the file)
_TYPES = MappingProxyType({"Int8": "i1", "UInt8": "u1", "Int16": "i2", "UInt16": "u2", "Int32": "i4",
                           "UInt32": "u4", "Int64": "i8", "UInt64": "u8", "Float32": "f4", "Float64": "f8"})
#: the field sections, and the name of the arrays' location in each
_SECTIONS = MappingProxyType({"PointData": "point", "CellData": "cell", "FieldData": "field"})
_NAMES = MappingProxyType({section: name for name, section in _SECTIONS.items()})
_ATTRIBUTE = re.compile(rb'([A-Za-z_]+)="([^"]*)"')


@dataclass(frozen=True)
class _Array:
    section: str  # "point", "cell" or "field"
    name: str
    dtype: np.dtype
    components: int
    tuples: int
    start: int  # the data text's span in the file
    end: int


@dataclass(frozen=True)
class XmlLayout:
    """Where the fields of one VTK XML file are, and a hash of its mesh.

    Attributes
    ----------
    signature : str
        Hash of the file's text outside its field sections: files with equal signatures hold
        the same points and cells (and faces), byte for byte.
    header : numpy dtype
        The type of the binary data headers (``header_type``).
    compressed : bool
        Arrays are zlib-compressed (``compressor="vtkZLibDataCompressor"``).
    arrays : tuple
        Each field array: section, name, type, components, tuples and the span of its text.
    """

    signature: str
    header: np.dtype
    compressed: bool
    arrays: tuple


def _attributes(tag: bytes) -> dict:
    return {k.decode(): v.decode() for k, v in _ATTRIBUTE.findall(tag)}


def _tags(handle) -> tuple | None:
    """Every XML tag of the file: (start, end after its ``>``, name with a leading ``/`` for a
    closing tag, its text), and the file's size; None when a tag is not closed. One pass in
    chunks of :data:`CHUNK` bytes (no copy of the whole file): base64 and numbers never hold ``<``."""
    tags, carry, base = [], b"", 0  # base: the file offset of carry's first byte
    while True:
        chunk = handle.read(CHUNK)
        buf = carry + chunk if carry else chunk
        at, carry = 0, b""
        while True:
            start = buf.find(b"<", at)
            if start < 0:
                break
            end = buf.find(b">", start)
            if end < 0:
                carry = buf[start:]
                break
            text = buf[start + 1:end]
            name = text.split(None, 1)[0].rstrip(b"/") if text.strip() else b""
            tags.append((base + start, base + end + 1, name.decode("latin-1"), text))
            at = end + 1
        base += len(buf) - len(carry)
        if not chunk:
            return None if carry else (tags, base)


def _digest(handle, spans: list, size: int) -> str:
    """Hash of the file's bytes outside ``spans`` (sorted, apart), read in chunks."""
    digest = hashlib.sha256()
    at = 0
    for start, end in [*spans, (size, size)]:
        handle.seek(at)
        while at < start:
            part = handle.read(min(CHUNK, start - at))
            if not part:
                break
            digest.update(part)
            at += len(part)
        at = end
    return digest.hexdigest()[:32]


def _array(tag: tuple, stop: tuple, section: str, count: int | None, order: str) -> _Array | None:
    """One field array (its opening tag and the tag after its data: its closing tag, or the
    ``InformationKey`` VTK writes after a vector's data), or None if it is not laid out as
    :func:`read_fields` reads it."""
    attrs = _attributes(tag[3])
    if stop[2] not in ("/DataArray", "InformationKey") or tag[3].endswith(b"/"):
        return None
    if attrs.get("format") != "binary" or attrs.get("type") not in _TYPES or "Name" not in attrs:
        return None
    try:
        components = int(attrs.get("NumberOfComponents", "1"))
        tuples = int(attrs["NumberOfTuples"]) if count is None else count
    except (KeyError, ValueError):
        return None
    if components < 1 or tuples < 0:
        return None
    return _Array(section, attrs["Name"], np.dtype(order + _TYPES[attrs["type"]]), components, tuples,
                  tag[1], stop[0])


def scan_layout(path: str) -> XmlLayout | None:
    """The layout of a VTK XML unstructured-grid file's fields (see the module notes), or None."""
    with open(path, "rb") as handle:
        found = _tags(handle)
        if not found or not found[0]:
            return None
        tags, size = found
        handle.seek(tags[-1][1])
        if tags[-1][2] != "/VTKFile" or handle.read(size - tags[-1][1]).strip():
            return None  # not closed: perhaps written only in part
        layout = _layout(handle, tags, size)
    return layout


def _layout(handle, tags: list, size: int) -> XmlLayout | None:
    names = [t[2] for t in tags]
    if "AppendedData" in names or names.count("Piece") != 1 or "VTKFile" not in names:
        return None
    head = _attributes(tags[names.index("VTKFile")][3])
    if head.get("type") != "UnstructuredGrid" or head.get("compressor", "vtkZLibDataCompressor") not in (
            "vtkZLibDataCompressor",) or head.get("header_type", "UInt32") not in ("UInt32", "UInt64"):
        return None
    order = {"LittleEndian": "<", "BigEndian": ">"}.get(head.get("byte_order", ""))
    piece = _attributes(tags[names.index("Piece")][3])
    try:
        counts = {"point": int(piece["NumberOfPoints"]), "cell": int(piece["NumberOfCells"]), "field": None}
    except (KeyError, ValueError):
        return None
    if order is None:
        return None
    spans, arrays, open_at, section, in_array = [], [], None, None, False
    for i, (start, end, name, text) in enumerate(tags):
        if in_array:  # the array's information keys, up to its closing tag
            in_array = name != "/DataArray"
        elif section is None and name in _SECTIONS:
            section, open_at = _SECTIONS[name], start
            if text.endswith(b"/"):  # <PointData/>
                spans.append((start, end))
                section = None
        elif section is not None and name == "/" + _NAMES[section]:
            spans.append((open_at, end))
            section = None
        elif section is not None and name == "DataArray":
            found = _array(tags[i], tags[i + 1], section, counts[section], order)
            if found is None:
                return None
            arrays.append(found)
            in_array = True
        elif section is not None:
            return None  # something else inside a field section
    if section is not None or in_array:
        return None
    signature = _digest(handle, spans, size)
    header = np.dtype(order + ("u4" if head.get("header_type", "UInt32") == "UInt32" else "u8"))
    compressed = "compressor" in head
    return XmlLayout("xml:" + signature, header, compressed, tuple(arrays))


def _b64_length(n_bytes: int) -> int:
    return 4 * (-(-n_bytes // 3))


def _decode(text: bytes, header: np.dtype, compressed: bool) -> bytes | None:
    """The bytes of one inline binary array (base64, header encoded apart from the data), or None."""
    text = b"".join(text.split())
    size = header.itemsize
    try:
        if not compressed:
            first = _b64_length(size)
            n_bytes = int(np.frombuffer(base64.b64decode(text[:first])[:size], header)[0])
            body = base64.b64decode(text[first:])
            if len(body) != n_bytes:  # header and data encoded as one stream
                body = base64.b64decode(text)[size:size + n_bytes]
            return body if len(body) == n_bytes else None
        n_blocks = int(np.frombuffer(base64.b64decode(text[:_b64_length(size)])[:size], header)[0])
        first = _b64_length((3 + n_blocks) * size)
        head = np.frombuffer(base64.b64decode(text[:first]), header)[:3 + n_blocks].astype(np.int64)
        sizes = head[3:]
        body = base64.b64decode(text[first:])
        if head.size != 3 + n_blocks or len(body) != int(sizes.sum()):
            return None
        ends = np.cumsum(sizes)
        return b"".join(zlib.decompress(body[e - s:e]) for s, e in zip(sizes.tolist(), ends.tolist()))
    except (ValueError, IndexError, zlib.error):  # binascii.Error is a ValueError
        return None


def read_fields(path: str, layout: XmlLayout) -> tuple[dict, dict, dict] | None:
    """The point, cell and field data of the file laid out as ``layout``: arrays as VTK's reader
    gives them (native byte order; shape (n,) for one component, (n, k) for k), or None when one
    does not decode to its stated size (then read the file whole)."""
    out = {"point": {}, "cell": {}, "field": {}}
    with open(path, "rb") as handle:
        for array in layout.arrays:
            handle.seek(array.start)
            raw = _decode(handle.read(array.end - array.start), layout.header, layout.compressed)
            count = array.tuples * array.components
            if raw is None or len(raw) != count * array.dtype.itemsize:
                return None
            values = np.frombuffer(raw, array.dtype).astype(array.dtype.newbyteorder("="))
            out[array.section][array.name] = values if array.components == 1 else values.reshape(-1, array.components)
    return out["point"], out["cell"], out["field"]
