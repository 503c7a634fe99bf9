"""XDMF steps written as spatial collections of pieces: refused by name, not as broken files.

Outside check: the files are laid out as the XDMF specification lays out a spatial collection (XDMF Model and
Format, https://www.xdmf.org/index.php/XDMF_Model_and_Format: Grid GridType="Collection"
CollectionType="Spatial"); VTK's own XDMF reader (pyvista.read) reads the same file to both pieces' cells.
"""

import numpy as np
import pytest
import pyvista

import phasegauge
from phasegauge.errors import UnsupportedMeshError

N = 4  # cells along each axis of the unit box, split at x = 0.5 into two pieces


def _piece_xml(x0):
    """A Uniform grid of the hexahedra of the box between x0 and x0 + 0.5, its points and cells inline."""
    nx, ny, nz = N // 2, N, N
    x, y, z = np.meshgrid(x0 + np.arange(nx + 1) / N, np.arange(ny + 1) / N, np.arange(nz + 1) / N, indexing="ij")
    corners = np.c_[x.ravel(), y.ravel(), z.ravel()]  # point (i, j, k) at i (ny+1)(nz+1) + j (nz+1) + k
    i, j, k = (a.ravel() for a in np.meshgrid(np.arange(nx), np.arange(ny), np.arange(nz), indexing="ij"))

    def at(di, dj, dk):
        return (i + di) * (ny + 1) * (nz + 1) + (j + dj) * (nz + 1) + (k + dk)

    hexes = np.c_[at(0, 0, 0), at(1, 0, 0), at(1, 1, 0), at(0, 1, 0), at(0, 0, 1), at(1, 0, 1), at(1, 1, 1),
                  at(0, 1, 1)]
    points = " ".join(f"{v:.17g}" for v in corners.ravel())
    cells = " ".join(str(v) for v in hexes.ravel())
    alpha = " ".join("1" if x0 == 0 else "0" for _ in range(len(hexes)))
    return (f'<Grid Name="piece" GridType="Uniform">\n'
            f'<Topology TopologyType="Hexahedron" NumberOfElements="{len(hexes)}">'
            f'<DataItem Dimensions="{len(hexes)} 8" NumberType="Int" Format="XML">{cells}</DataItem></Topology>\n'
            f'<Geometry GeometryType="XYZ"><DataItem Dimensions="{len(corners)} 3" NumberType="Float" '
            f'Precision="8" Format="XML">{points}</DataItem></Geometry>\n'
            f'<Attribute Name="alpha" AttributeType="Scalar" Center="Cell"><DataItem Dimensions="{len(hexes)}" '
            f'NumberType="Float" Precision="8" Format="XML">{alpha}</DataItem></Attribute>\n</Grid>\n')


def _spatial(time=None):
    stamp = "" if time is None else f'<Time Value="{time}"/>\n'
    return (f'<Grid Name="step" GridType="Collection" CollectionType="Spatial">\n{stamp}'
            + _piece_xml(0.0) + _piece_xml(0.5) + "</Grid>\n")


def _file(path, body):
    path.write_text(f'<?xml version="1.0"?>\n<Xdmf Version="3.0"><Domain>\n{body}</Domain></Xdmf>\n')
    return path


@pytest.mark.parametrize("timed", [False, True])
def test_a_step_written_as_a_spatial_collection_is_refused_by_name(tmp_path, timed):
    if timed:
        body = ('<Grid Name="run" GridType="Collection" CollectionType="Temporal">\n'
                + _spatial(0.0) + _spatial(0.1) + "</Grid>\n")
    else:
        body = _spatial()
    path = _file(tmp_path / "run.xdmf", body)
    if timed:  # VTK's XDMF reader reads the file (its first step): it is whole, only its layout is not read
        data = pyvista.read(path)
        blocks = [block for block in data.recursive_iterator() if block is not None]
        assert len(blocks) == 2 and sum(block.n_cells for block in blocks) == N ** 3
        volume = sum(float(np.sum(b.cell_data["alpha"] * b.compute_cell_sizes().cell_data["Volume"])) for b in blocks)
        assert volume == pytest.approx(0.5, rel=1e-12)  # the piece x < 0.5 holds the phase
    with pytest.raises(UnsupportedMeshError, match="spatial collections of pieces are not read.*one Uniform grid"):
        phasegauge.measure(str(path), "alpha", analyses=("conservation",))
