"""Per-block cell geometry: measures and centroids by exact formulas or Gauss quadrature."""

from __future__ import annotations

from types import MappingProxyType

import numpy as np

from ..errors import UnsupportedMeshError
from .corners import corner_sum


_G = 0.5 - 0.5 / np.sqrt(3.0), 0.5 + 0.5 / np.sqrt(3.0)  # 2-point Gauss on [0, 1]

# Dunavant degree-4 rule on the unit triangle (barycentric points, weights summing to 1)
_TRI4_POINTS = np.array([
    [0.108103018168070, 0.445948490915965, 0.445948490915965],
    [0.445948490915965, 0.108103018168070, 0.445948490915965],
    [0.445948490915965, 0.445948490915965, 0.108103018168070],
    [0.816847572980459, 0.091576213509771, 0.091576213509771],
    [0.091576213509771, 0.816847572980459, 0.091576213509771],
    [0.091576213509771, 0.091576213509771, 0.816847572980459],
])
_TRI4_WEIGHTS = np.array([0.223381589678011] * 3 + [0.109951743655322] * 3)


def _det(J: np.ndarray) -> np.ndarray:
    if J.shape[-1] == 2:
        return J[..., 0, 0] * J[..., 1, 1] - J[..., 0, 1] * J[..., 1, 0]
    return (J[..., 0, 0] * (J[..., 1, 1] * J[..., 2, 2] - J[..., 1, 2] * J[..., 2, 1])
            - J[..., 0, 1] * (J[..., 1, 0] * J[..., 2, 2] - J[..., 1, 2] * J[..., 2, 0])
            + J[..., 0, 2] * (J[..., 1, 0] * J[..., 2, 1] - J[..., 1, 1] * J[..., 2, 0]))


def _quadrature(X: np.ndarray, rule) -> tuple[np.ndarray, np.ndarray]:
    """Integrate 1 and x over mapped cells: X (n, k, d); rule yields (N, dN, w)."""
    n, _, d = X.shape
    measure = np.zeros(n)
    moment = np.zeros((n, d))
    for N, dN, w in rule:
        J = np.einsum("nkd,ke->nde", X, dN)
        detJ = _det(J) * w
        measure += detJ
        moment += (N @ X) * detJ[:, None]
    return measure, moment


def _quad_rule():
    for u in _G:
        for v in _G:
            N = np.array([(1 - u) * (1 - v), u * (1 - v), u * v, (1 - u) * v])
            dN = np.array([[-(1 - v), -(1 - u)], [1 - v, -u], [v, u], [-v, 1 - u]])
            yield N, dN, 0.25


def _hex_rule():
    corners = np.array([[0, 0, 0], [1, 0, 0], [1, 1, 0], [0, 1, 0],
                        [0, 0, 1], [1, 0, 1], [1, 1, 1], [0, 1, 1]], dtype=float)
    for u in _G:
        for v in _G:
            for w in _G:
                p = np.array([u, v, w])
                f = np.where(corners == 1, p, 1 - p)  # (8, 3) one-axis factors
                sgn = np.where(corners == 1, 1.0, -1.0)
                N = f.prod(axis=1)
                dN = np.empty((8, 3))
                for a in range(3):
                    others = [b for b in range(3) if b != a]
                    dN[:, a] = sgn[:, a] * f[:, others[0]] * f[:, others[1]]
                yield N, dN, 0.125


def _wedge_rule():
    for bary, wt in zip(_TRI4_POINTS, _TRI4_WEIGHTS):
        xi, eta = bary[1], bary[2]
        L = np.array([1 - xi - eta, xi, eta])
        dL = np.array([[-1.0, -1.0], [1.0, 0.0], [0.0, 1.0]])
        for z in _G:
            N = np.concatenate([L * (1 - z), L * z])
            dN = np.zeros((6, 3))
            dN[:3, :2] = dL * (1 - z)
            dN[3:, :2] = dL * z
            dN[:3, 2] = -L
            dN[3:, 2] = L
            yield N, dN, wt * 0.5 * 0.5


_RULES = MappingProxyType({"quad": list(_quad_rule()), "hexahedron": list(_hex_rule()), "wedge": list(_wedge_rule())})


def _simplex(X: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Signed measure and centroid of triangles (2D) or tetrahedra (3D), X of shape (n, d+1, d)."""
    d = X.shape[2]
    p0 = X[:, 0, :]
    if d == 2:
        a = X[:, 1, :] - p0
        b = X[:, 2, :] - p0
        return 0.5 * (a[:, 0] * b[:, 1] - a[:, 1] * b[:, 0]), X.mean(axis=1)
    a = X[:, 1, :] - p0
    b = X[:, 2, :] - p0
    c = X[:, 3, :] - p0
    det = (a[:, 0] * (b[:, 1] * c[:, 2] - b[:, 2] * c[:, 1])
           - a[:, 1] * (b[:, 0] * c[:, 2] - b[:, 2] * c[:, 0])
           + a[:, 2] * (b[:, 0] * c[:, 1] - b[:, 1] * c[:, 0]))
    return det / 6.0, X.mean(axis=1)


def _block_geometry(cell_type: str, X: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Signed measures and centroids of a block, X of shape (n, k, dim)."""
    if cell_type in ("triangle", "tetra"):
        return _simplex(X)
    if cell_type == "polygon":
        k = X.shape[1]
        total = np.zeros(X.shape[0])
        moment = np.zeros((X.shape[0], 2))
        for i in range(1, k - 1):
            tri = X[:, [0, i, i + 1], :]
            a, c = _simplex(tri)
            total += a
            moment += a[:, None] * c
        with np.errstate(invalid="ignore", divide="ignore"):
            cent = np.where(total[:, None] != 0, moment / np.where(total == 0, 1, total)[:, None],
                            X.mean(axis=1))
        return total, cent
    if cell_type == "pyramid":
        # a pyramid is the cone from the apex over its (bilinear) base: the trilinear map of a
        # hexahedron whose four top corners meet at the apex, integrated exactly like one
        X = X[:, [0, 1, 2, 3, 4, 4, 4, 4], :]
        cell_type = "hexahedron"
    if cell_type in _RULES:
        measure, moment = _quadrature(X, _RULES[cell_type])
        with np.errstate(invalid="ignore", divide="ignore"):
            cent = np.where(measure[:, None] != 0,
                            moment / np.where(measure == 0, 1, measure)[:, None], X.mean(axis=1))
        if cell_type == "wedge":
            # VTK orders a wedge's base (0, 1, 2) with its normal pointing away from the top,
            # so the reference map of a valid wedge is left-handed
            measure = -measure
        return measure, cent
    raise UnsupportedMeshError(f"no geometry for cell type '{cell_type}'")


# ---------------------------------------------------------------------------
# per-block geometry by corner columns, in chunks (the fast paths)

#: a hexahedron or wedge counts as affine (a parallelepiped, a prism with equal parallel ends) when
#: the size of its non-affine map coefficients times its edge size squared is at most this share of
#: its volume; its volume is then exact to rounding and its centroid within ~1e-13 edge lengths
_AFFINE = 1e-13
#: cells per chunk of :func:`cell_geometry`: a bent hexahedron's integrals hold about 80 arrays of
#: this many floats, which then stay in a 4 MB cache (1 << 15 was 30 % slower on 1M hexahedra)
_CELL_CHUNK = 1 << 13


def cell_geometry(cell_type: str, X: np.ndarray, conn: np.ndarray,
                   out: tuple | None = None) -> tuple[np.ndarray, np.ndarray]:
    """Signed measures and centroids of the cells ``conn`` (n, k) of one type, X (n_points, dim).

    The same quantities as :func:`_block_geometry`, computed from the corners' coordinate columns
    in chunks (small temporaries): simplices directly, quads in closed form, hexahedra and
    wedges that are affine by their triple product, other hexahedra and pyramids by the
    closed-form integrals of the trilinear map written in its coefficients. ``out``: arrays (n,) and
    (n, dim) to write into (returned), else new ones.
    """
    n, dim = conn.shape[0], X.shape[1]
    signed, cent = out if out is not None else (np.empty(n), np.empty((n, dim)))
    if cell_type == "polygon" or cell_type not in _COLUMN_GEOMETRY:
        signed[:], cent[:] = _block_geometry(cell_type, X[conn])
        return signed, cent
    Xt = [np.ascontiguousarray(X[:, i]) for i in range(dim)]
    for lo in range(0, n, _CELL_CHUNK):
        part = conn[lo:lo + _CELL_CHUNK]
        # P[j][i]: coordinate i of corner j, each of shape (chunk,)
        P = [[x[part[:, j]] for x in Xt] for j in range(conn.shape[1])]
        s, c = _COLUMN_GEOMETRY[cell_type](P)
        signed[lo:lo + _CELL_CHUNK] = s
        for i in range(dim):
            cent[lo:lo + _CELL_CHUNK, i] = c[i]
    return signed, cent


def _sub(a: list, b: list) -> list:
    return [x - y for x, y in zip(a, b)]


def _triple(a: list, b: list, c: list) -> np.ndarray:
    """a . (b x c) for 3-vectors given as component lists (the cofactor order of :func:`_det`)."""
    return _dot(a, _cross(b, c))  # the middle cofactor negated: the same floats


def _corner_mean(P: list) -> list:
    """Per coordinate, the mean of the corners (summed in corner order)."""
    return [corner_sum(p[i] for p in P) / len(P) for i in range(len(P[0]))]


def _simplex_columns(P: list):
    """Triangles or tetrahedra: signed measure and centroid (as :func:`_simplex`)."""
    p0 = P[0]
    if len(P) == 3:
        a, b = _sub(P[1], p0), _sub(P[2], p0)
        return 0.5 * (a[0] * b[1] - a[1] * b[0]), _corner_mean(P)
    a, b, c = _sub(P[1], p0), _sub(P[2], p0), _sub(P[3], p0)
    return _triple(a, b, c) / 6.0, _corner_mean(P)


def _quad_columns(P: list):
    """Bilinear quads in closed form.

    With x = m + A p + B q + D p q on p, q in [-1/2, 1/2] (m the corner mean), det J is
    linear in p and q, so the area is det[A, B] exactly and the first moment is
    (A (A x D) + B (D x B)) / 12.
    """
    x0, x1, x2, x3 = P
    A = [0.5 * ((x1[i] - x0[i]) + (x2[i] - x3[i])) for i in range(2)]
    B = [0.5 * ((x3[i] - x0[i]) + (x2[i] - x1[i])) for i in range(2)]
    D = [(x2[i] - x3[i]) - (x1[i] - x0[i]) for i in range(2)]
    area = A[0] * B[1] - A[1] * B[0]
    ad = A[0] * D[1] - A[1] * D[0]
    db = D[0] * B[1] - D[1] * B[0]
    m = _corner_mean(P)
    with np.errstate(invalid="ignore", divide="ignore"):
        scale = np.where(area != 0, 1.0 / (12.0 * np.where(area == 0, 1.0, area)), 0.0)
    return area, [m[i] + (A[i] * ad + B[i] * db) * scale for i in range(2)]


def _cross(a: list, b: list) -> list:
    """a x b for 3-vectors given as component lists."""
    return [a[1] * b[2] - a[2] * b[1], a[2] * b[0] - a[0] * b[2], a[0] * b[1] - a[1] * b[0]]


def _dot(a: list, b: list) -> np.ndarray:
    return a[0] * b[0] + a[1] * b[1] + a[2] * b[2]


def _hex_columns(P: list):
    """Hexahedra (and pyramids as hexahedra with the top collapsed to the apex).

    The trilinear map about the centre: x = m + A p + B q + C r + D p q + E q r + F p r + G p q r
    on p, q, r in [-1/2, 1/2]. Where D, E, F, G are negligible (:data:`_AFFINE`) the cell is a
    parallelepiped: volume det[A, B, C], centroid the corner mean. Elsewhere the volume and the
    first moment about m are the integrals of det J and (x - m) det J in closed form
    (:func:`_trilinear_moments`), exact as the 2-point Gauss rule per direction is, in about
    half the array operations.
    """
    x0, x1, x2, x3, x4, x5, x6, x7 = P
    r3 = range(3)
    u0, u1, u2, u3 = _sub(x1, x0), _sub(x2, x3), _sub(x5, x4), _sub(x6, x7)  # edges along u
    A = [0.25 * ((u0[i] + u1[i]) + (u2[i] + u3[i])) for i in r3]
    B = [0.25 * (((x3[i] - x0[i]) + (x2[i] - x1[i])) + ((x7[i] - x4[i]) + (x6[i] - x5[i]))) for i in r3]
    C = [0.25 * (((x4[i] - x0[i]) + (x5[i] - x1[i])) + ((x6[i] - x2[i]) + (x7[i] - x3[i]))) for i in r3]
    d = [u1[i] - u0[i] for i in r3]  # u-edges at v = 1 minus at v = 0
    f = [u2[i] - u0[i] for i in r3]  # at w = 1 minus at w = 0
    e = [(x7[i] - x4[i]) - (x3[i] - x0[i]) for i in r3]  # v-edges at w = 1 minus at w = 0
    G = [(u3[i] - u2[i]) - d[i] for i in r3]
    volume = _triple(A, B, C)
    m = _corner_mean(P)
    nonaffine = sum(np.abs(v[i]) for v in (d, e, f, G) for i in r3)
    size = sum(np.abs(v[i]) for v in (A, B, C) for i in r3)
    bent = np.flatnonzero(nonaffine * size * size > _AFFINE * np.abs(volume))
    if bent.size:
        Ab, Bb, Cb, Gb = ([v[i][bent] for i in r3] for v in (A, B, C, G))
        D = [d[i][bent] + 0.5 * Gb[i] for i in r3]
        E = [e[i][bent] + 0.5 * Gb[i] for i in r3]
        F = [f[i][bent] + 0.5 * Gb[i] for i in r3]
        total, moment = _trilinear_moments(volume[bent], Ab, Bb, Cb, D, E, F, Gb)
        volume[bent] = total
        with np.errstate(invalid="ignore", divide="ignore"):
            scale = np.where(total != 0, 1.0 / np.where(total == 0, 1.0, total), 0.0)
        for i in r3:
            m[i][bent] += moment[i] * scale
    return volume, m


def _trilinear_moments(abc: np.ndarray, A: list, B: list, C: list, D: list, E: list, F: list, G: list):
    """Volume and first moment about m of x = m + A p + B q + C r + D p q + E q r + F p r + G p q r,
    p, q, r in [-1/2, 1/2], in closed form; ``abc`` is det[A, B, C].

    det J = [Ju, Jv, Jw] with Ju = A + D q + F r + G q r, Jv = B + D p + E r + G p r,
    Jw = C + F p + E q + G p q; expanded in triple products [X, Y, Z] = X . (Y x Z), the odd
    powers of p, q, r integrate to 0 and the even ones to 1/12 (squares), 1/144 and 1/1728:

    V = [A, B, C] + ([A, D, F] - [B, D, E] - [C, E, F]) / 12,

    and the first moment int (x - m) det J is A s_A + B s_B + ... + G s_G with

    s_A = ([A, B, F] - [A, C, D]) / 12 + ([C, F, G] - [B, D, G]) / 144,
    s_B = ([A, B, E] + [B, C, D]) / 12 + ([A, D, G] - [C, E, G]) / 144,
    s_C = ([B, C, F] - [A, C, E]) / 12 + ([B, E, G] - [A, F, G]) / 144,
    s_D = ([A, B, G] + [A, D, E] - [B, D, F]) / 144 + [E, F, G] / 1728,
    s_E = ([B, C, G] + [B, E, F] + [C, D, E]) / 144 - [D, F, G] / 1728,
    s_F = ([A, E, F] - [A, C, G] - [C, D, F]) / 144 + [D, E, G] / 1728,
    s_G = [D, E, F] / 864.

    The same integrals as the 2-point Gauss rule per direction, which is exact for them (to
    rounding: 3e-16 relative on hexahedra jittered by a third of the spacing).
    """
    AB, AC, AD, AF = _cross(A, B), _cross(A, C), _cross(A, D), _cross(A, F)
    BC, BD, BE = _cross(B, C), _cross(B, D), _cross(B, E)
    CE, CF, DE, DF, EF = _cross(C, E), _cross(C, F), _cross(D, E), _cross(D, F), _cross(E, F)
    volume = abc + (_dot(AD, F) - _dot(BD, E) - _dot(CE, F)) / 12.0
    s = [(_dot(AB, F) - _dot(AC, D)) / 12.0 + (_dot(CF, G) - _dot(BD, G)) / 144.0,
         (_dot(AB, E) + _dot(BC, D)) / 12.0 + (_dot(AD, G) - _dot(CE, G)) / 144.0,
         (_dot(BC, F) - _dot(AC, E)) / 12.0 + (_dot(BE, G) - _dot(AF, G)) / 144.0,
         (_dot(AB, G) + _dot(AD, E) - _dot(BD, F)) / 144.0 + _dot(EF, G) / 1728.0,
         (_dot(BC, G) + _dot(BE, F) + _dot(DE, C)) / 144.0 - _dot(DF, G) / 1728.0,
         (_dot(EF, A) - _dot(AC, G) - _dot(DF, C)) / 144.0 + _dot(DE, G) / 1728.0,
         _dot(DE, F) / 864.0]
    moment = [sum(s[k] * X[i] for k, X in enumerate((A, B, C, D, E, F, G))) for i in range(3)]
    return volume, moment


def _wedge_columns(P: list):
    """Wedges: those whose three vertical edges are equal vectors (to :data:`_AFFINE`) by the
    triple product, volume det[a, b, c] / 2 at the reference centre, centroid the corner mean;
    the others by the Gauss rule of :func:`_block_geometry`."""
    x0, x1, x2, x3, x4, x5 = P
    r3 = range(3)
    a, b = _sub(x1, x0), _sub(x2, x0)
    c0, c1, c2 = _sub(x3, x0), _sub(x4, x1), _sub(x5, x2)  # vertical edges
    da = [c1[i] - c0[i] for i in r3]
    db = [c2[i] - c0[i] for i in r3]
    # the Jacobian at the reference centroid (1/3, 1/3, 1/2): exact for the affine part
    Jc = ([a[i] + 0.5 * da[i] for i in r3], [b[i] + 0.5 * db[i] for i in r3],
          [(c0[i] + c1[i] + c2[i]) / 3.0 for i in r3])
    # VTK orders a wedge's base with its normal away from the top: the reference map is left-handed
    volume = -0.5 * _triple(*Jc)
    m = _corner_mean(P)
    nonaffine = sum(np.abs(v[i]) for v in (da, db) for i in r3)
    size = sum(np.abs(v[i]) for v in Jc for i in r3)
    bent = np.flatnonzero(nonaffine * size * size > _AFFINE * np.abs(volume))
    if bent.size:
        # about the corner mean: the Gauss sums then lose no digits to a far origin
        X = np.stack([np.stack([x[i][bent] - m[i][bent] for i in r3], axis=1) for x in P], axis=1)
        s, cent = _block_geometry("wedge", X)
        volume[bent] = s
        for i in r3:
            m[i][bent] += cent[:, i]
    return volume, m


def _pyramid_columns(P: list):
    """Pyramids as hexahedra whose four top corners meet at the apex (see :func:`_block_geometry`)."""
    return _hex_columns(P[:4] + [P[4]] * 4)


_COLUMN_GEOMETRY = MappingProxyType({"triangle": _simplex_columns, "tetra": _simplex_columns, "quad": _quad_columns,
                    "hexahedron": _hex_columns, "wedge": _wedge_columns, "pyramid": _pyramid_columns})
