"""The diagonal a coned cell's quad face is cut along: the shorter one (:mod:`.simplices`).

A quad face that is bent, or that the tables of its two cells cut along different diagonals,
is cut along its shorter diagonal. The two lengths are compared on the face's own four corner
coordinates: both cells sharing the face see the same four points, and a diagonal's squared
length is the same number from either side (``(a - b)**2 == (b - a)**2`` in floating point,
summed over the same axes in the same order), so both choose the same diagonal and the split
conforms. The choice reads coordinates only, never point or cell numbers: renumbering a mesh
leaves it unchanged. Where the two lengths are equal within a relative ``_TIE`` no choice is
free of the numbering, and the face keeps a centre (split in four about its corners' mean).
"""

from __future__ import annotations

import numpy as np

from .cells import FACES

__all__ = ["shorter_diagonals", "diagonal_triangles"]

#: two diagonals this close (relative to the longer) are a tie: the face gets a centre
_TIE = 1e-9


def shorter_diagonals(cell_type: str, P: list) -> tuple[np.ndarray, np.ndarray]:
    """Per cell and quad face (``FACES`` order, quads only): whether its face corners 1-3 are the
    shorter diagonal, and whether the two diagonals tie.

    ``P``: per corner the list of its three coordinate arrays (n,). Returns two bool arrays
    (n, number of quad faces): ``along13`` and ``tie``.
    """
    quads = [face for face in FACES[cell_type] if len(face) == 4]
    n = P[0][0].shape[0]
    along13 = np.empty((n, len(quads)), dtype=bool)
    tie = np.empty((n, len(quads)), dtype=bool)
    for q, face in enumerate(quads):
        lengths = []
        for a, b in ((face[0], face[2]), (face[1], face[3])):
            total = None
            for i in range(3):
                d = P[a][i] - P[b][i]
                d *= d
                total = d if total is None else total + d
            lengths.append(np.sqrt(total))
        d02, d13 = lengths
        along13[:, q] = d13 < d02
        tie[:, q] = np.abs(d02 - d13) <= _TIE * np.maximum(d02, d13)
    return along13, tie


def diagonal_triangles(F: np.ndarray, along13: np.ndarray) -> tuple:
    """The two triangles (n, 3) of quads ``F`` (n, 4, corners in face order), cut along the face
    corners 1-3 where ``along13`` (n,) is set, else along 0-2."""
    first = np.where(along13[:, None], F[:, [1, 2, 3]], F[:, [0, 1, 2]])
    second = np.where(along13[:, None], F[:, [1, 3, 0]], F[:, [0, 2, 3]])
    return first, second
