"""Width integrals on coned hexahedra, cell by cell: the split's tetrahedra formed from the corners.

A hexahedron the conforming split (:func:`phasegauge.model.simplices.split_cells`) cones
from its centre (a face bent, or cut along different diagonals by its two cells: every inner
cell of a jittered or curvilinear hexahedral mesh) is split into tetrahedra joined to the cell
centre: two per face, cut along the diagonal the split chooses (the shorter one for a bent
face, the table's for a flat face cut alike from both sides), or four where the face's two
diagonals tie and it gets a face centre (edge start, edge end, face centre): 12 per cell on a
jittered mesh. The centres are their corners' means in coordinates and values alike. Those
tetrahedra are fixed by the cell's own eight corners and its face code (how each face is cut,
worked out once per mesh), so their integrals need no split arrays (no vertex ids, owners,
shared face centres or concatenations): this module forms them per chunk of cells with the
same faces centred (on a jittered mesh one set, none) from the gathered corners, in cache, each
face's corners picked per cell from corner 0 or corner 1 by its diagonal (:func:`_seen_corners`:
one table for the 64 ways six faces can be cut, not chunks of a few cells per way).

What is integrated, per tetrahedron t of volume V_t with linear c:

* int c (1 - c) = V_t (s (4 - s) + s - q) / 20, s and q the sums of the vertex values and of
  their squares (exact for a linear c);
* int |grad c| = V_t |grad c| = |adj(E) dv| / 6, E the edge vectors from the cell centre and
  dv the value differences (Cramer's rule: the determinant cancels, no division); for the
  tetrahedron (a, b, f) joined to the centre, adj(E) dv = e_f x W + dv_f P and 6 V_t = |e_f . P|
  with P = e_a x e_b and W = dv_b e_a - dv_a e_b, both formed once per vertex pair (an edge is
  shared by two faces) and both changing sign with the pair's order, which the norms drop;
* the band volume of 0.05 < c < 0.95: a cell whose corner values all lie inside the band adds
  its volume (the sum of its tetrahedra), a cell they all lie outside of on one side adds
  nothing; only the cells a band edge crosses are integrated tetrahedron by tetrahedron (the
  centres' values lie between the corners', so the corner extremes decide);
* the moments of the signed distance, weighted by |grad c|, with the distance at a centre the
  mean of its corners' (as :func:`._signed_distance._vertex_distances` gives it): a cell counts
  when the distance is known at all eight corners.

Which cells: the criterion is the split's own, unchanged. A face is flat when
the triple product of its corners' offsets from its first corner (six times the volume of the
tetrahedron they span) is at most 1e-10 of the cube of its diagonal from that corner;
a hexahedron all of whose faces are flat and cut alike by both of their cells takes the
6-tetrahedra table and goes through the split itself (:class:`._width_integrals._SplitBand`);
every other hexahedron is integrated here. Over the split's tetrahedra (above) the integrals
equal the split's up to round-off (the centres are summed in corner order here, in
point-number order there; relative differences about 1e-15, at most 1e-12 in
``tests/analysis/test_hex_integrals.py``).

The cells no band edge crosses (all corners inside 0.05 < c < 0.95, or all on one side of it:
most of the cells where c varies) take a quadrature of the cell's trilinear map instead, a
fraction of the work: int |grad c| = V |grad c| at the cell centre (J^-T dc/dxi there, by
Cramer's rule), V the cell's volume (:attr:`Mesh.cell_measures`, exact for the trilinear map);
int c (1 - c) and the moments' int d and int d^2 by the rule V ((1/3) mean over the corners +
(2/3) value at the centre), the centre's value the corners' mean. On an
affine cell (a parallelepiped) with c and d linear every one of these is exact, the same as the
split's to round-off (tested). Otherwise the rule integrates the trilinear interpolant where the
split integrates its piecewise-linear one: both are O(h^2) from the field, and they differ by
O(h^2) (a share of about (h |grad grad c| / |grad c|)^2 per cell). Measured on the logistic
profile (Olsson & Kreiss 2005) on jittered hexahedra (jitter 0.2, the set-ups of
``tests/analysis/test_hex_integrals.py``, every cell integrated), 4 and 8 cells across the 5-95 %
band: int |grad c| per area 1.0016 and 1.0004 against 1.0033 and 1.0011 over the 12-tetrahedra
split (analytic 1), int c (1 - c) per area and eps 1.0610 and 1.0155 against 1.0606 and 1.0155
(analytic 1); on a sphere of radius 0.3 at 4 cells across (32^3 cells) the threshold-free width
moves from +4.2 % to +5.0 % of w, the second moment's from +5.1 % to +5.6 %, within the
tolerances the split meets (on the earlier 24-tetrahedra split: +5.2 % to +5.6 %, +4.8 % to
+5.5 %). The cells a band edge crosses keep the split, so the
band volume (``interface_width``) keeps its exact band edges. A band cell adds the volume of its
tetrahedra in the split, not V: a bent face cut along a diagonal moves what lies between it and
its two triangles from one of its cells to the other (:func:`_split_volumes`, V corrected face by
face), so the band volume is the split's to round-off (with V it moved by about 1e-4 where band
cells meet cells a band edge crosses).
"""

from __future__ import annotations

import numpy as np

from ..model.cells import FACES
from ..model.mesh import Mesh
from ..model._grouping import index_dtype
from ..model._geometry import _cross, _dot, _sub, _triple
from ..model.corners import corner_sum
from ..model.simplices import _split_plan
from ._sums import dot
from ._signed_distance import _ContourGeometry, _signed_distance, _whole_cell_pieces
from ._width_integrals import NEAR_BAND, _SplitBand, _band_volume

#: cells per chunk (the chunk's temporaries, about 150 arrays of this many floats, stay in cache)
_CELL_CHUNK = 1 << 12
#: band edges of ``interface_width``
_LOW, _HIGH = 0.05, 0.95
_HEX_FACES = FACES["hexahedron"]
#: the weights and volumes of a chunk are kept as six times the measure (times |grad c|)
_SIX = 6.0
#: cells no band edge crosses integrated on their trilinear map, not the split's tetrahedra
_QUADRATURE = True
#: per reference axis xi_k of a hexahedron, its corners on the face xi_k = 1 and on xi_k = 0
_XI_FACES = (((1, 2, 5, 6), (0, 3, 4, 7)), ((2, 3, 6, 7), (0, 1, 4, 5)), ((4, 5, 6, 7), (0, 1, 2, 3)))


def coned_hexahedra(mesh: Mesh) -> list | None:
    """Per block, (local rows, face codes) of the coned hexahedra; None if the mesh has none.

    The code of a cell says how the split (:func:`phasegauge.model.simplices._split_plan`,
    cached per mesh) cuts each face j (``FACES`` order): bit j set when the face gets a centre,
    else bit 6 + j set when it is cut along its face corners 1-3 (clear: along 0-2).
    """
    if mesh.dimension != 3 or not any(block.cell_type == "hexahedron" for block in mesh.blocks):
        return None

    def compute():  # kept with the mesh: 6 bytes per coned cell (int32 rows, uint16 codes)
        out = []
        empty = (np.zeros(0, np.int32), np.zeros(0, np.uint16))
        for block, coned in zip(mesh.blocks, _split_plan(mesh)):
            if block.cell_type != "hexahedron" or coned is None:
                out.append(empty)
                continue
            rows = np.flatnonzero(coned.coned).astype(index_dtype(len(block)))
            codes = np.zeros(rows.size, np.uint16)
            for j in range(6):
                centred = coned.centred[rows, j]
                codes |= centred.astype(np.uint16) << j
                codes |= (coned.along13[rows, j] & ~centred).astype(np.uint16) << (6 + j)
            out.append((rows, codes))
        return out if any(rows.size for rows, _ in out) else None

    return mesh.memo("coned_hexahedra", compute)


#: vertex numbers of a face's corners as its cut sees them: face j's corner k is vertex 14 + 4 j + k,
#: corner k of the face (``FACES`` order) where it is cut along 0-2, corner k + 1 where along 1-3
_TURNED = 14


def _tetrahedra(centred: int) -> tuple:
    """The tetrahedra of a coned hexahedron whose faces with a centre are the bits of ``centred``,
    as vertex triples joined to the cell centre: corners 0-7, face centres 8-13, a face's corners
    as its cut sees them 14-37 (:data:`_TURNED`). A face with a centre gives four (edge and face
    centre), another face two, cut along its seen corners 0-2 (as the split does): one table for
    the cells of every diagonal choice (a face code per choice made chunks of a few cells)."""
    out = []
    for j, face in enumerate(_HEX_FACES):
        if centred >> j & 1:
            out += [(face[i], face[(i + 1) % 4], 8 + j) for i in range(4)]
        else:
            a, b, c, d = range(_TURNED + 4 * j, _TURNED + 4 * j + 4)
            out += [(a, b, c), (a, c, d)]
    return tuple(out)


def _seen_corners(rows: list, codes: np.ndarray, tets: tuple) -> list:
    """``rows`` (per vertex 0-7, or 0-13 with the face centres: arrays (n,) or lists of them)
    extended to the vertices 14-37 the tetrahedra read: per face cut along a diagonal, its corners
    from corner 0 (cut along 0-2, bit 6 + j of ``codes`` clear) or from corner 1 (along 1-3)."""
    out = list(rows) + [None] * (_TURNED + 24 - len(rows))
    used = {v for tet in tets for v in tet if v >= _TURNED}
    for j, face in enumerate(_HEX_FACES):
        if _TURNED + 4 * j not in used:
            continue
        turned = (codes >> (6 + j) & 1).astype(bool)
        every, some = turned.all(), turned.any()
        for k in range(4):
            here, next_ = rows[face[k]], rows[face[(k + 1) % 4]]
            out[_TURNED + 4 * j + k] = next_ if every else np.where(turned, next_, here) if some else here
    return out


class _HexCells:
    """Width integrals over the tetrahedra of coned hexahedra, cell by cell (see the module notes).

    Parameters
    ----------
    mesh : Mesh
    clipped : ndarray of shape (n_points,)
        c at the points, clipped to [0, 1].
    rows : list of (ndarray, ndarray)
        Per block, the local rows of the cells to integrate and their face codes
        (:func:`coned_hexahedra`).
    low, high : ndarray of shape (n_cells,)
        Corner extremes of ``clipped`` per cell (decide which cells a band edge crosses).

    Attributes
    ----------
    count : int
        Number of tetrahedra, and of cells integrated by the quadrature.
    band, mixed, total_gradient : float
        As :class:`._width_integrals._SplitBand`.
    known : ndarray of bool, shape (n_points,)
        Corners of tetrahedra where c is not constant.
    need : ndarray of bool, shape (n_points,)
        Corners of cells with such a tetrahedron (their distances make the centres').
    """

    def __init__(self, mesh: Mesh, clipped: np.ndarray, rows: list, low: np.ndarray, high: np.ndarray):
        self.mesh = mesh
        columns = [np.ascontiguousarray(mesh.coordinates[:, i]) for i in range(3)]
        self.known = np.zeros(mesh.n_points, dtype=bool)
        self.need = np.zeros(mesh.n_points, dtype=bool)
        self.band = self.mixed = self.total_gradient = 0.0
        # (tetrahedra, block connectivity, its rows (n,), face codes (n,), the second moment's coefficients
        # (3, n_tetrahedra, n): see _chunk) of the cells where c varies
        self.chunks = []
        # (block connectivity, its rows (n,), the second moment's coefficients (3 arrays (n,): see _smooth),
        # offsets of the cells summed together) of cells by quadrature
        self.smooth_chunks = []
        self.count = 0
        for block, start, (local, codes) in zip(mesh.blocks, mesh.block_offsets[:-1], rows):
            if local.size == 0:
                continue
            if _QUADRATURE:  # cells no band edge crosses: by the cell's trilinear map (any face code)
                low_all, high_all = low[start + local], high[start + local]
                inside = (low_all > _LOW) & (high_all < _HIGH)
                smooth = inside | (high_all < _LOW) | (low_all > _HIGH)
                picked = np.flatnonzero(smooth)
                # the smooth cells of each chunk of _CELL_CHUNK cells are summed on their own (the
                # same sums as one call a chunk); several chunks' cells are formed in one call
                bounds = np.searchsorted(picked, np.arange(0, local.size + _CELL_CHUNK, _CELL_CHUNK))
                bounds = np.unique(bounds)
                first = 0
                while first < bounds.size - 1:
                    last = max(first + 1, int(np.searchsorted(bounds, bounds[first] + _CELL_CHUNK, "right")) - 1)
                    rows = picked[bounds[first]:bounds[last]]
                    self._smooth(block.connectivity, local[rows], codes[rows], clipped, columns, start,
                                 inside[rows], (bounds[first:last + 1] - bounds[first]).tolist())
                    first = last
                if smooth.any():
                    local, codes = local[~smooth], codes[~smooth]
            centred = codes & 63
            counts = np.bincount(centred, minlength=64)
            for code in np.flatnonzero(counts):  # cells of one set of centred faces at a time (few sets)
                one = counts[code] == local.size
                chosen, chosen_codes = (local, codes) if one else (local[centred == code], codes[centred == code])
                tets = _tetrahedra(int(code))
                for lo in range(0, chosen.size, _CELL_CHUNK):
                    part, part_codes = chosen[lo:lo + _CELL_CHUNK], chosen_codes[lo:lo + _CELL_CHUNK]
                    low_part, high_part = low[start + part], high[start + part]
                    weights, coefficients = self._chunk(tets, block.connectivity[part], part_codes, clipped,
                                                        columns, low_part, high_part)
                    varying = (weights > 0).any(axis=0)
                    self.chunks.append((tets, block.connectivity, part[varying], part_codes[varying],
                                        coefficients[:, :, varying]))
        # the corners of cells where c varies: those of the cells where it varies on every
        # tetrahedron are all known, the others were marked as they came
        self.need |= self.known

    def _chunk(self, tets, conn, codes, values, columns, low, high) -> np.ndarray:
        """Integrals of one chunk of cells added up; returns the tetrahedra's gradient weights and
        gradients.

        The weights are kept as six times the measure times |grad c| (``_SIX``), the gradients as six
        times the measure times grad c (shape (3, n_tetrahedra, n)), the volumes as six times the
        measure: the factor is taken out of the sums once.
        """
        ids = [conn[:, q] for q in range(8)]
        v = [values[i] for i in ids]
        vm = (((((((v[0] + v[1]) + v[2]) + v[3]) + v[4]) + v[5]) + v[6]) + v[7]) / 8.0
        e = _cone_vectors(conn, codes, tets, columns)
        v = _seen_corners(v + [None] * 6, codes, tets)
        dv, v2 = [None] * len(v), [None] * len(v)
        for f in sorted({f for _, _, f in tets if 8 <= f < _TURNED}):
            a, b, c, d = _HEX_FACES[f - 8]
            v[f] = (((v[a] + v[b]) + v[c]) + v[d]) / 4.0
        pairs, apexes = {}, {}

        def pair(a, b):
            """Per vertex pair (low first): P = e_a x e_b, W = dv_b e_a - dv_a e_b, v_a + v_b, v_a^2 + v_b^2."""
            key = (a, b) if a < b else (b, a)
            if key not in pairs:
                a, b = key
                for q in key:
                    if dv[q] is None:
                        dv[q] = v[q] - vm
                        v2[q] = v[q] * v[q]
                p, q = e[a], e[b]
                cross = (p[1] * q[2] - p[2] * q[1], p[2] * q[0] - p[0] * q[2], p[0] * q[1] - p[1] * q[0])
                w = tuple(dv[b] * p[k] - dv[a] * q[k] for k in range(3))
                pairs[key] = (cross, w, v[a] + v[b], v2[a] + v2[b])
            return pairs[key]

        def apex(f):
            """Per third vertex: dv_f, v_f + vm, v_f^2 + vm^2."""
            if f not in apexes:
                if dv[f] is None:
                    dv[f] = v[f] - vm
                    v2[f] = v[f] * v[f]
                apexes[f] = (dv[f], v[f] + vm, v2[f] + vm * vm)
            return apexes[f]

        n = conn.shape[0]
        weights = np.empty((len(tets), n))
        volumes = np.empty((len(tets), n))
        # per tetrahedron (a, b, f, m), the pair (a, b) low first, the coefficients of d_a - d_m, d_b - d_m and
        # d_f - d_m in six times the measure times grad c . grad d, d any linear field: G . (e_b x e_f),
        # G . (e_f x e_a), G . (e_a x e_b), G = adj(E) dc / |det E| (grad d = adj(E) dd / det E; the pair's order
        # flips both signs alike)
        coefficients = np.empty((3, len(tets), n))
        mixed = np.zeros(n)
        for t, (a, b, f) in enumerate(tets):
            # tetrahedron (a, b, f, m) from m: adj(E) dv = dv_a (e_b x e_f) + dv_b (e_f x e_a) + dv_f (e_a x e_b)
            # = e_f x W + dv_f P, its determinant e_f . P (each up to a sign the norms drop)
            (px, py, pz), (wx, wy, wz), pair_sum, pair_squares = pair(a, b)
            uf, apex_sum, apex_squares = apex(f)
            fx, fy, fz = e[f]
            gx = (fy * wz - fz * wy) + uf * px
            gy = (fz * wx - fx * wz) + uf * py
            gz = (fx * wy - fy * wx) + uf * pz
            measure = np.abs(fx * px + fy * py + fz * pz, out=volumes[t])  # six times the measure
            flat = measure == 0
            G = [np.divide(g, measure, out=np.zeros(n), where=~flat) for g in (gx, gy, gz)]
            lo, hi = (a, b) if a < b else (b, a)
            coefficients[0, t] = _dot(G, _cross(e[hi], e[f]))
            coefficients[1, t] = _dot(G, _cross(e[f], e[lo]))
            coefficients[2, t] = _dot(G, (px, py, pz))
            del G
            gx *= gx
            gy *= gy
            gx += gy
            gz *= gz
            gx += gz
            np.sqrt(gx, out=weights[t])
            s = pair_sum + apex_sum
            q = pair_squares + apex_squares
            q -= s * (5.0 - s)  # int c (1 - c) = measure (s (4 - s) + s - q) / 20, measure six-fold here
            q *= measure
            mixed -= q
        weights[volumes == 0] = 0.0  # a flat tetrahedron has no gradient (as the split's)
        coefficients[:, volumes == 0] = 0.0
        self.mixed += float(mixed.sum()) / (20.0 * _SIX)
        self.total_gradient += float(weights.sum()) / _SIX
        self.count += len(tets) * n
        varying = weights > 0
        every = varying.all(axis=0)  # usually most cells: all their corners are known
        for q in range(8):
            self.known[ids[q][every]] = True
        partly = np.flatnonzero(varying.any(axis=0) & ~every)
        if partly.size:  # (the corners of the other cells needed are the known ones: see __init__)
            some = varying[:, partly]
            seen = _seen_corners([i[partly] for i in ids], codes[partly], tets)
            for t, tet in enumerate(tets):
                for q in tet:
                    if not 8 <= q < _TURNED:  # a corner (face centres are no mesh points)
                        self.known[seen[q][some[t]]] = True
            for q in range(8):
                self.need[ids[q][partly]] = True
        # band volume: whole cells inside, tetrahedra of the cells a band edge crosses
        inside = (low > _LOW) & (high < _HIGH)
        if inside.any():
            self.band += float(volumes[:, inside].sum()) / _SIX
        cut = np.flatnonzero(~inside & (high >= _LOW) & (low <= _HIGH))
        if cut.size:  # all tetrahedra of these cells in one pass
            vc = [None if x is None else x[cut] for x in v]
            self.band += _band_volume(volumes[:, cut].ravel(), [np.concatenate([vc[a] for a, _, _ in tets]),
                                                                np.concatenate([vc[b] for _, b, _ in tets]),
                                                                np.concatenate([vc[f] for _, _, f in tets]),
                                                                np.tile(vm[cut], len(tets))]) / _SIX
        return weights, coefficients

    def _smooth(self, connectivity, part, codes, values, columns, start, inside, segments):
        """Integrals of cells no band edge crosses, by the cell's trilinear map (see the module notes);
        the band cells add the split's volume of the cell (:func:`_split_volumes`). ``segments``
        (offsets into ``part``, from 0 to its size) marks the cells summed together: each segment's
        sums are added on their own, in order."""
        conn = connectivity[part]
        ids = [conn[:, q] for q in range(8)]
        v = [values[i] for i in ids]
        X = [[col[i] for col in columns] for i in ids]
        det, adjugate = _centre_adjugate(X)
        g = _centre_product(adjugate, _xi_differences(v))
        volume = self.mesh.cell_measures[start + part]
        if inside.any():
            split = _split_volumes([[x[inside] for x in corner] for corner in X], codes[inside],
                                   np.copysign(volume[inside], det[inside]))
            for lo, hi in _pairs(_within(inside, segments)):
                if hi > lo:
                    self.band += float(split[lo:hi].sum())
        del X
        ok = det != 0
        gradients = [np.divide(x * volume, det, out=np.zeros(part.size), where=ok) for x in g]  # V grad c
        # V grad c . grad d = sum_k (d's kth xi difference) V grad c . a_k / det J, a_k the adjugate's columns
        coefficients = [np.divide(_dot(gradients, a), det, out=np.zeros(part.size), where=ok) for a in adjugate]
        del gradients
        weights = np.abs(det)
        np.divide(np.sqrt(sum(x * x for x in g)) * volume, weights, out=weights, where=ok)
        weights[~ok] = 0.0
        mean = corner_sum(v) / 8.0
        squares = corner_sum(x * x for x in v) / 8.0
        # int c (1 - c): the corners' mean of c^2 with weight 1/3, the centre's with 2/3 (exact for
        # c linear on a parallelepiped)
        mixed = mean - squares / 3.0 - (2.0 / 3.0) * mean * mean
        for lo, hi in _pairs(segments):
            self.mixed += float(dot(volume[lo:hi], mixed[lo:hi]))
            self.total_gradient += float(weights[lo:hi].sum())
        self.count += part.size
        varying = weights > 0
        for i in ids:
            self.known[i[varying]] = True
        self.smooth_chunks.append((connectivity, part[varying], [x[varying] for x in coefficients],
                                   _within(varying, segments)))

    def moments(self, dist: np.ndarray) -> np.ndarray:
        """(m0, m1, m2) over the cells whose eight corner distances are known (by the quadrature's
        rule where the integrals took it, else over their tetrahedra), weighted by the measure times
        grad c . grad d (as :func:`._width_integrals._normal_coefficients`)."""
        m0 = m1 = m2 = 0.0
        for connectivity, part, coefficients, segments in self.smooth_chunks:  # the same rule as int c (1 - c)
            conn = connectivity[part]
            d, dm = _corner_distances(dist, conn)
            ok = np.isfinite(dm)
            w = _dot(coefficients, _xi_differences(d))[ok]
            squares = corner_sum(x * x for x in d) / 8.0
            dm = dm[ok]
            second = squares[ok] / 3.0 + (2.0 / 3.0) * dm * dm
            for lo, hi in _pairs(_within(ok, segments)):  # each segment's sums on their own
                m0 += _SIX * float(w[lo:hi].sum())
                m1 += 4.0 * _SIX * dot(w[lo:hi], dm[lo:hi])
                m2 += 20.0 * _SIX * dot(w[lo:hi], second[lo:hi])
        for tets, connectivity, part, codes, coefficients in self.chunks:
            # the chunk's corners gathered again: 8 bytes a cell kept, not 64
            conn = connectivity[part]
            d, dm = _corner_distances(dist, conn)
            ok = np.isfinite(dm)
            if not ok.all():
                if not ok.any():
                    continue
                d, dm = [x[ok] for x in d], dm[ok]
                coefficients, codes = coefficients[:, :, ok], codes[ok]
            d += [None] * 6
            for f in {f for _, _, f in tets if 8 <= f < _TURNED}:
                a, b, c, h = _HEX_FACES[f - 8]
                d[f] = (((d[a] + d[b]) + d[c]) + d[h]) / 4.0
            d = _seen_corners(d, codes, tets)
            squares = [None if x is None else x * x for x in d]
            pairs, apexes = {}, {}
            for t, (a, b, f) in enumerate(tets):
                key = (a, b) if a < b else (b, a)
                if key not in pairs:  # sums of the distances and of their squares, once per pair
                    pairs[key] = (d[a] + d[b], squares[a] + squares[b])
                if f not in apexes:
                    apexes[f] = (d[f] + dm, squares[f] + dm * dm)
                (pair_sum, pair_squares), (apex_sum, apex_squares) = pairs[key], apexes[f]
                a, b = key  # (the coefficients' order: the pair low first, then the third vertex)
                w = _dot(coefficients[:, t], (d[a] - dm, d[b] - dm, d[f] - dm))
                m0 += float(w.sum())
                total = pair_sum + apex_sum
                m1 += dot(w, total)
                total *= total
                total += pair_squares
                total += apex_squares
                m2 += dot(w, total)
        return np.array([m0, m1 / 4.0, m2 / 20.0]) / _SIX


def _cone_vectors(conn: np.ndarray, codes: np.ndarray, tets: tuple, columns: list) -> list:
    """The vertices of the cells' tetrahedra from their centres (per vertex 0-37 a list of 3 arrays, None
    where no tetrahedron reads it): corners 0-7, the face centres 8-13 the tetrahedra read, and the faces'
    corners as their cuts see them (:func:`_seen_corners`)."""
    X = [[col[conn[:, q]] for col in columns] for q in range(8)]
    centre = [(((((((X[0][d] + X[1][d]) + X[2][d]) + X[3][d]) + X[4][d]) + X[5][d]) + X[6][d]) + X[7][d]) / 8.0
              for d in range(3)]
    e = [[X[q][d] - centre[d] for d in range(3)] for q in range(8)] + [None] * 6
    e = _seen_corners(e, codes, tets)  # (the same arrays, or picked by face: 8 of them per cell)
    for f in sorted({f for _, _, f in tets if 8 <= f < _TURNED}):
        a, b, c, d = _HEX_FACES[f - 8]
        e[f] = [(((X[a][k] + X[b][k]) + X[c][k]) + X[d][k]) / 4.0 - centre[k] for k in range(3)]
    return e


def _centre_adjugate(X: list) -> tuple:
    """det J and the adjugate's columns a_0, a_1, a_2 of the trilinear map at the cells' centres (4 dx/dxi_k, the
    corner sums of the faces xi_k = 1 less those of xi_k = 0: the factors 4 cancel in every gradient).

    ``X``: per corner its three coordinate arrays. A field's gradient there is sum_k b_k a_k / det J, b its
    :func:`_xi_differences` (J^-T dv/dxi by Cramer's rule)."""
    j = [[corner_sum(X[q][d] for q in high) - corner_sum(X[q][d] for q in low) for d in range(3)]
         for high, low in _XI_FACES]
    a0, a1, a2 = _cross(j[1], j[2]), _cross(j[2], j[0]), _cross(j[0], j[1])
    return _dot(j[0], a0), (a0, a1, a2)


def _xi_differences(v: list) -> list:
    """4 dv/dxi_k at the cells' centres: the corner sums of the faces xi_k = 1 less those of xi_k = 0 (``v``: the
    field's corner values)."""
    return [corner_sum(v[q] for q in high) - corner_sum(v[q] for q in low) for high, low in _XI_FACES]


def _centre_product(adjugate: tuple, b: list) -> list:
    """det J times a field's gradient at the cells' centres, from its :func:`_xi_differences` ``b``."""
    a0, a1, a2 = adjugate
    return [b[0] * a0[d] + b[1] * a1[d] + b[2] * a2[d] for d in range(3)]


class _HexBand:
    """Width integrals on a mesh with coned hexahedra: those cell by cell, the rest on the split.

    Same attributes and methods as :class:`._width_integrals._SplitBand`.
    """

    def __init__(self, mesh: Mesh, clipped: np.ndarray, active: np.ndarray, rows: list, low, high, *,
                 near_band: float = NEAR_BAND):
        self.mesh, self.values, self.near_band = mesh, clipped, near_band
        mine = []
        rest = active.copy()
        for (local, codes), start in zip(rows, mesh.block_offsets[:-1]):
            keep = active[start + local]
            mine.append((local[keep], codes[keep]))
            rest[start + local] = False
        self.cells = _HexCells(mesh, clipped, mine, low, high)
        self.rest = _SplitBand(mesh, clipped, rest, near_band=near_band) if rest.any() else None
        self.count = self.cells.count + (self.rest.count if self.rest else 0)
        self.band = self.cells.band + (self.rest.band if self.rest else 0.0)
        self.mixed = self.cells.mixed + (self.rest.mixed if self.rest else 0.0)
        self.total_gradient = self.cells.total_gradient + (self.rest.total_gradient if self.rest else 0.0)
        self._rest_dist = None

    @staticmethod
    def merges_pieces(mesh: Mesh) -> bool:
        """True: :meth:`distances` searches one element per crossed whole cell."""
        return True

    def distances(self, geometry: _ContourGeometry, level: float, bound: float, threads: int = 1) -> np.ndarray:
        """Signed distances at the mesh points the cells need (NaN elsewhere and beyond ``bound``),
        each search on up to ``threads`` threads."""
        geometry = _whole_cell_pieces(self.mesh, geometry)
        need = self.cells.need
        dist = np.full(self.mesh.n_points, np.nan)
        if self.rest is not None:
            self._rest_dist = self.rest.distances(geometry, level, bound, threads)
            dist = self._rest_dist[:self.mesh.n_points].copy()
            need = need & ~np.isfinite(dist)
        used = np.flatnonzero(need)
        dist[used] = _signed_distance(self.mesh.coordinates[used], self.values[used], geometry,
                                      self.mesh.plane_axes, level, bound, near_band=self.near_band, threads=threads)
        return dist

    def moments(self, dist: np.ndarray) -> tuple[float, float, float]:
        m = self.cells.moments(dist)
        if self.rest is not None:
            m += np.array(self.rest.moments(self._rest_dist))
        return tuple(float(x) for x in m)

    def at_points(self, dist: np.ndarray):
        known = self.cells.known
        if self.rest is not None:
            known = known | self.rest.known[:self.mesh.n_points]
        return self.values, dist, known


def _within(mask: np.ndarray, segments: list) -> list:
    """The offsets ``segments`` into an array, as offsets into its entries where ``mask`` holds."""
    out = [0]
    for lo, hi in _pairs(segments):
        out.append(out[-1] + int(np.count_nonzero(mask[lo:hi])))
    return out


def _pairs(segments: list):
    """(start, stop) of each segment between consecutive offsets."""
    return zip(segments[:-1], segments[1:])


def _corner_distances(dist: np.ndarray, conn: np.ndarray) -> tuple:
    """The eight corners' distances of each row of ``conn`` (a list of 8 arrays) and their mean."""
    d = [dist[conn[:, q]] for q in range(8)]
    return d, corner_sum(d) / 8.0


def _split_volumes(X: list, codes: np.ndarray, trilinear: np.ndarray) -> np.ndarray:
    """The volumes of hexahedra over the split's tetrahedra, from their trilinear volumes.

    ``X``: per corner its three coordinate arrays (n,); ``codes`` as :func:`coned_hexahedra`;
    ``trilinear`` the cells' volumes signed as their orientation (the Jacobian at the centre).
    A face with a centre encloses what the bilinear face does (the trilinear volume's share); a
    face cut along its corners 0-2 encloses 1/12 of six times the signed volume of the tetrahedron of
    its four corners less, along 1-3 as much more (the bilinear face lies halfway between the two
    cuts). Exact for the split's tetrahedra when none is turned against its cell (the split sees to
    that: ``model/_face_diagonals.py``); tested against their sum.
    """
    total = trilinear.copy()
    for j, face in enumerate(_HEX_FACES):
        centred = (codes >> j & 1).astype(bool)
        if centred.all():
            continue
        p0, p1, p2, p3 = (X[q] for q in face)
        six = _triple(_sub(p1, p0), _sub(p2, p0), _sub(p3, p0))
        along13 = (codes >> (6 + j) & 1).astype(bool)
        six[centred] = 0.0
        total += np.where(along13, six, -six) / 12.0
    return np.abs(total)
