"""Measures and clipping of triangles and tetrahedra given by their corners (:mod:`.simplices`)."""

from __future__ import annotations

import numpy as np

__all__ = ["simplex_measures", "clip_simplices"]


def simplex_measures(X: np.ndarray) -> np.ndarray:
    """Unsigned areas (triangles) or volumes (tetrahedra) of X, shape (n, d + 1, d)."""
    E = X[:, 1:, :] - X[:, :1, :]
    if X.shape[2] == 2:
        return 0.5 * np.abs(E[:, 0, 0] * E[:, 1, 1] - E[:, 0, 1] * E[:, 1, 0])
    return np.abs(np.einsum("ni,ni->n", E[:, 0], np.cross(E[:, 1], E[:, 2]))) / 6.0


def _edge_point(X: np.ndarray, s: np.ndarray, i: int, j: int) -> np.ndarray:
    """Where the edge i-j (s_i <= 0 < s_j) meets s = 0."""
    t = s[:, i] / (s[:, i] - s[:, j])
    return X[:, i] + t[:, None] * (X[:, j] - X[:, i])


def _prism(a0, a1, a2, b0, b1, b2) -> list:
    """Three tetrahedra filling the prism with end triangles a and b (a_k joined to b_k)."""
    return [np.stack(t, axis=1) for t in ((a0, a1, a2, b2), (a0, a1, b1, b2), (a0, b0, b1, b2))]


def clip_simplices(X: np.ndarray, parent: np.ndarray, s: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """The parts of simplices where the linear function s <= 0.

    Parameters
    ----------
    X : ndarray of shape (n, d + 1, d)
        Corner coordinates of triangles (d = 2) or tetrahedra (d = 3).
    parent : ndarray of shape (n,)
        A label carried over to the pieces.
    s : ndarray of shape (n, d + 1)
        Signed distance (or any affine function) at the corners.

    Returns
    -------
    X, parent
        Simplices covering exactly the kept part.
    """
    order = np.argsort(s, axis=1, kind="stable")
    X = np.take_along_axis(X, order[:, :, None], axis=1)
    s = np.take_along_axis(s, order, axis=1)
    inside = np.count_nonzero(s <= 0, axis=1)
    k = X.shape[1]
    pieces, labels = [X[inside == k]], [parent[inside == k]]
    one = inside == 1
    Xa, sa = X[one], s[one]
    pieces.append(np.stack([Xa[:, 0]] + [_edge_point(Xa, sa, 0, j) for j in range(1, k)], axis=1))
    labels.append(parent[one])
    two = inside == 2
    Xb, sb = X[two], s[two]
    if k == 3:
        p12, p02 = _edge_point(Xb, sb, 1, 2), _edge_point(Xb, sb, 0, 2)
        pieces += [np.stack([Xb[:, 0], Xb[:, 1], p12], axis=1), np.stack([Xb[:, 0], p12, p02], axis=1)]
        labels += [parent[two]] * 2
    else:
        p02, p03 = _edge_point(Xb, sb, 0, 2), _edge_point(Xb, sb, 0, 3)
        p12, p13 = _edge_point(Xb, sb, 1, 2), _edge_point(Xb, sb, 1, 3)
        pieces += _prism(Xb[:, 0], p02, p03, Xb[:, 1], p12, p13)
        labels += [parent[two]] * 3
        three = inside == 3
        Xc, sc = X[three], s[three]
        tops = [_edge_point(Xc, sc, j, 3) for j in (0, 1, 2)]
        pieces += _prism(Xc[:, 0], Xc[:, 1], Xc[:, 2], *tops)
        labels += [parent[three]] * 3
    return np.concatenate(pieces), np.concatenate(labels)
