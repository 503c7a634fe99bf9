"""Cells written each with their own copies of their corners: a layout, told apart from duplicate points.

Some finite-element writers give every cell its own copies of its corners (no point is shared by two
cells), each copy carrying the point values the cell computes there. Merged into shared points (exactly
equal coordinates), the mesh is the shared-point mesh; where the copies' values agree, the figures are the
shared-point file's too, and the merge is said as an info line, not a finding.
"""

from __future__ import annotations

import numpy as np

from ..errors import CornerCopiesNote

__all__ = ["corner_copies_note", "COPIES_AGREE"]

#: copies of one corner agree when their values differ by at most this share of the field's range (our
#: threshold: far below any difference a field's jump makes), or by the rounding of their own precision
#: (:func:`_rounding`: a float32 field near 300 with a range of 1 rounds 4 orders of magnitude more coarsely)
COPIES_AGREE = 1e-6


def corner_copies_note(raw, inverse: np.ndarray, own: np.ndarray, duplicates: int, where: str):
    """A :class:`~phasegauge.errors.CornerCopiesNote` of the merge when every file point is a corner of at
    most one cell (cells written with their own copies of their corners) and the copies' point values agree
    (:data:`COPIES_AGREE`), else None (the merge is then a finding: copies shared by some cells only, or a
    field discontinuous at the corners, averaged).

    Parameters
    ----------
    raw : meshio.Mesh
        The mesh as read (its cells and point fields).
    inverse : ndarray of shape (n_points,), int
        Each point's place among the distinct points.
    own : ndarray of shape (n_points,), bool
        The file's own points (not centres a reader added).
    duplicates : int
        How many copies the merge removed.
    """
    uses = np.zeros(len(inverse), dtype=np.int64)
    for block in raw.cells:
        if isinstance(block.data, list):  # polyhedra: faces share points within a cell
            return None
        uses += np.bincount(np.asarray(block.data, dtype=np.int64).ravel(), minlength=len(inverse))
    if (uses[own] > 1).any():
        return None
    order = np.argsort(inverse, kind="stable")
    groups = inverse[order]
    starts = np.flatnonzero(np.concatenate([[True], groups[1:] != groups[:-1]]))
    for values in (raw.point_data or {}).values():
        values = np.asarray(values)
        if values.dtype.kind not in "fiub" or values.shape[:1] != inverse.shape:
            continue
        column = values.reshape(len(inverse), -1).astype(np.float64)[order]
        spread = np.maximum.reduceat(column, starts, axis=0) - np.minimum.reduceat(column, starts, axis=0)
        finite = column[np.isfinite(column)]
        scale = float(finite.max() - finite.min()) if finite.size else 0.0
        allowed = max(COPIES_AGREE * scale, _rounding(values.dtype, finite), np.finfo(float).tiny)
        if not (spread <= allowed).all():
            return None
    return CornerCopiesNote(f"cells written with their own copies of their corners: {duplicates} copies merged "
                            "(cells share their corners now; the copies' point values agree)", where=where)


def _rounding(dtype, finite: np.ndarray) -> float:
    """Four rounding steps of a floating field's own precision at its largest magnitude (0 for integers): what
    two copies of one value written apart may differ by."""
    if np.dtype(dtype).kind != "f" or not finite.size:
        return 0.0
    return 4.0 * float(np.finfo(dtype).eps) * float(np.abs(finite).max())
