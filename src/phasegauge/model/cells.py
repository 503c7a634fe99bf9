"""Cell tables of the model: dimensions, corner maps, faces and edges in VTK corner order; how a
reader marks the pieces of the cells it split."""

from __future__ import annotations

from types import MappingProxyType
from typing import NamedTuple

import numpy as np

__all__ = ["CELL_DIMENSION", "CELLS_PER_CUBE", "LINEAR_CORNERS", "FACES", "EDGES", "JoinedPieces"]


class JoinedPieces(NamedTuple):
    """A reader's mark of a block whose cells are pieces of cells numbered as the block before it
    numbers them (``Mesh(..., pieces=[..., marks, JoinedPieces(marks)])``: one cell's pieces of two
    types, such as a polyhedron's pyramids and tetrahedra). A plain mark (an array) numbers its
    cells after every block before it."""

    parents: np.ndarray

#: topological dimension of every cell type the model accepts
CELL_DIMENSION = MappingProxyType({
    "vertex": 0,
    "line": 1,
    "triangle": 2,
    "quad": 2,
    "polygon": 2,
    "tetra": 3,
    "hexahedron": 3,
    "wedge": 3,
    "pyramid": 3,
})

#: how many cells of a type fill the square or cube whose side is taken as such a cell's size
#: (:attr:`Mesh.cell_sizes`: (count x measure) ** (1 / dimension)): a square cut along a diagonal into
#: 2 triangles, a cube cut about a main diagonal into 6 tetrahedra (Kuhn's split), across a face
#: diagonal into 2 wedges, into 3 pyramids with their apexes at one corner; 1 for the rest. So a grid
#: of spacing h split into simplices has cells of size h, as its squares and cubes have, and a
#: regular tetrahedron and a pyramid with every edge a both have size 2 ** (-1/6) a = 0.89 a
CELLS_PER_CUBE = MappingProxyType({"triangle": 2, "tetra": 6, "wedge": 2, "pyramid": 3})

#: higher-order and VTK-specific types mapped to a linear type (corner nodes, reordered)
LINEAR_CORNERS = MappingProxyType({
    "line3": ("line", [0, 1]),
    "triangle6": ("triangle", [0, 1, 2]),
    "triangle7": ("triangle", [0, 1, 2]),
    "quad8": ("quad", [0, 1, 2, 3]),
    "quad9": ("quad", [0, 1, 2, 3]),
    "tetra10": ("tetra", [0, 1, 2, 3]),
    "hexahedron20": ("hexahedron", list(range(8))),
    "hexahedron24": ("hexahedron", list(range(8))),
    "hexahedron27": ("hexahedron", list(range(8))),
    "wedge15": ("wedge", list(range(6))),
    "wedge18": ("wedge", list(range(6))),
    "pyramid13": ("pyramid", list(range(5))),
    "pyramid14": ("pyramid", list(range(5))),
    # VTK pixel and voxel number their corners lexicographically, not around the face
    "pixel": ("quad", [0, 1, 3, 2]),
    "voxel": ("hexahedron", [0, 1, 3, 2, 4, 5, 7, 6]),
})

#: local faces (3D) or edges (2D) that adjacency is built from, VTK corner order (read-only)
FACES = MappingProxyType({
    "triangle": ((0, 1), (1, 2), (2, 0)),
    "quad": ((0, 1), (1, 2), (2, 3), (3, 0)),
    "tetra": ((0, 1, 2), (0, 1, 3), (1, 2, 3), (0, 2, 3)),
    "hexahedron": ((0, 3, 2, 1), (4, 5, 6, 7), (0, 1, 5, 4), (1, 2, 6, 5), (2, 3, 7, 6), (3, 0, 4, 7)),
    "wedge": ((0, 2, 1), (3, 4, 5), (0, 1, 4, 3), (1, 2, 5, 4), (2, 0, 3, 5)),
    "pyramid": ((0, 3, 2, 1), (0, 1, 4), (1, 2, 4), (2, 3, 4), (3, 0, 4)),
})

#: local edges of every cell type, VTK corner order (read-only)
EDGES = MappingProxyType({
    "triangle": ((0, 1), (1, 2), (2, 0)),
    "quad": ((0, 1), (1, 2), (2, 3), (3, 0)),
    "tetra": ((0, 1), (1, 2), (2, 0), (0, 3), (1, 3), (2, 3)),
    "hexahedron": ((0, 1), (1, 2), (2, 3), (3, 0), (4, 5), (5, 6), (6, 7), (7, 4),
                   (0, 4), (1, 5), (2, 6), (3, 7)),
    "wedge": ((0, 1), (1, 2), (2, 0), (3, 4), (4, 5), (5, 3), (0, 3), (1, 4), (2, 5)),
    "pyramid": ((0, 1), (1, 2), (2, 3), (3, 0), (0, 4), (1, 4), (2, 4), (3, 4)),
})
