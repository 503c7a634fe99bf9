"""Grouping equal rows of small integer tables (faces, edges, corner sets) without hashing."""

from __future__ import annotations

import sys
from types import MappingProxyType

import numpy as np

from ._threads import ordered_map

#: cells (or rows) per chunk where work goes column by column: the temporaries stay in cache
CHUNK = 1 << 15

#: values from which a sort is shared among threads (below, one thread sorts them quickly)
THREADED_SORT = 1 << 20


def grid_face_ids(v: list, shapes: list, offsets: np.ndarray) -> np.ndarray | None:
    """Numbers of quad faces from their corners' grid positions ``v[axis][corner]`` (each (n,)).

    None when a face does not lie in one grid plane on the four corners of one grid square.
    """
    n = v[0][0].size
    ids = np.full(n, -1, dtype=np.int64)
    for axis in range(3):
        a = v[axis]
        flat = (a[0] == a[1]) & (a[0] == a[2]) & (a[0] == a[3])
        if not flat.any():
            continue
        whole = bool(flat.all())  # usually: a generator orders every cell's corners alike
        if whole and np.any(ids >= 0) or not whole and np.any(ids[flat] >= 0):
            return None  # flat along two axes: a degenerate face
        def pick(x, flat=flat, whole=whole):
            return x if whole else x[flat]

        index = [None, None, None]
        index[axis] = pick(a[0])
        seen = np.zeros(index[axis].size, dtype=np.uint8)
        codes = [np.zeros_like(seen) for _ in range(4)]
        for bit, other in ((0, (axis + 1) % 3), (1, (axis + 2) % 3)):
            b = [pick(x) for x in v[other]]
            low = np.minimum(np.minimum(b[0], b[1]), np.minimum(b[2], b[3]))
            high = np.maximum(np.maximum(b[0], b[1]), np.maximum(b[2], b[3]))
            if np.any(high - low != 1):
                return None
            index[other] = low
            for k in range(4):
                codes[k] |= (b[k] != low).view(np.uint8) << np.uint8(bit)
        # the four corners are the four corners of the square, each once
        for code in codes:
            seen |= np.left_shift(np.uint8(1), code)
        if np.any(seen != 15):
            return None
        number = offsets[axis] + np.ravel_multi_index(tuple(index), shapes[axis])
        if whole:
            ids = number
        else:
            ids[flat] = number
    if np.any(ids < 0):
        return None
    return ids


def sort_in_place(values: np.ndarray, *, threads: int = 1) -> np.ndarray:
    """Sort a contiguous 1D integer array in place (and return it), on up to ``threads`` threads.

    From :data:`THREADED_SORT` values on, up to four equal parts are sorted side by side (numpy
    releases the interpreter lock inside a sort) and one stable sort then merges the sorted
    runs (numpy's stable sort of 64-bit integers is a Timsort, which merges runs it finds in
    linear passes: 0.04 s for two runs of 3M against 0.42 s for sorting 6M anew, measured). A
    sorted integer array is the same whatever sorted it (floats are refused: -0.0 and 0.0, or NaNs,
    could come out in another order).

    References
    ----------
    Timsort's run detection and merging: Peters, T. (2002), "listsort.txt", CPython source
    (Objects/listsort.txt); numpy uses it as ``kind='stable'`` for these types.
    """
    if values.dtype.kind not in "iu":
        raise TypeError(f"sort_in_place sorts integer arrays, not {values.dtype}")
    parts = min(int(threads), 4) if values.size >= THREADED_SORT else 1
    if parts < 2:
        values.sort()
        return values
    bounds = np.linspace(0, values.size, parts + 1).astype(np.int64)
    for _ in ordered_map(lambda k: values[bounds[k]:bounds[k + 1]].sort(), range(parts), threads=parts):
        pass
    values.sort(kind="stable")
    return values


def unique_ints(values: np.ndarray, *, threads: int = 1) -> np.ndarray:
    """Sorted distinct values of a 1D integer array (its sort on up to ``threads`` threads).

    By sorting: ``np.unique`` without ``return_*`` options takes a hash path
    that is many times slower on millions of values (numpy 2.3-2.4).
    """
    s = sort_in_place(np.array(values, copy=True).ravel(), threads=threads)
    if s.size < 2:
        return s
    return s[np.concatenate([[True], s[1:] != s[:-1]])]


def ranges(offsets: np.ndarray, which: np.ndarray) -> np.ndarray:
    """Positions ``offsets[j]:offsets[j + 1]`` of every ``j`` of ``which``, one range after another
    (int64): the items of rows ``which`` of a ragged table stored as ``offsets`` into one stream."""
    starts = np.asarray(offsets[which], dtype=np.int64)
    counts = np.asarray(offsets[np.asarray(which) + 1], dtype=np.int64) - starts
    total = int(counts.sum())
    if total == 0:
        return np.zeros(0, dtype=np.int64)
    out = np.arange(total, dtype=np.int64)
    out += np.repeat(starts - (np.cumsum(counts) - counts), counts)
    return out


def index_dtype(n: int):
    """int32 for indices (or index arithmetic) below ``n`` when they fit, else int64."""
    return np.int32 if n < 2 ** 31 - 1 else np.int64


# comparators of the smallest sorting networks (Knuth, TAOCP vol. 3, 5.3.4)
_NETWORKS = MappingProxyType({2: ((0, 1),), 3: ((1, 2), (0, 2), (0, 1)),
                              4: ((0, 1), (2, 3), (0, 2), (1, 3), (1, 2))})


def sort_columns(columns: list) -> list:
    """Sort k <= 4 equal-length arrays elementwise (row i sorted across the arrays), by a network."""
    c = list(columns)
    for a, b in _NETWORKS.get(len(c), ()):
        lo = np.minimum(c[a], c[b])
        c[b] = np.maximum(c[a], c[b])
        c[a] = lo
    return c


def sort_small_rows(rows: np.ndarray) -> np.ndarray:
    """Sort each row of an (n, k) array; a sorting network for k <= 4 (fast for many rows)."""
    if rows.shape[1] not in _NETWORKS:
        return np.sort(rows, axis=1)
    return np.stack(sort_columns([rows[:, j] for j in range(rows.shape[1])]), axis=1)


def all_distinct(values: np.ndarray, n: int) -> bool:
    """True when ``values`` (integers in 0 .. n - 1) are all different (a mask, no sort)."""
    seen = np.zeros(n, dtype=bool)
    seen[values] = True
    return int(np.count_nonzero(seen)) == values.size


def _bits(n: int) -> int:
    """Bits needed for the integers 0 .. n - 1."""
    return max(int(n - 1).bit_length(), 0)


def _sort_order(key: np.ndarray, key_bits: int, *, threads: int = 1) -> tuple[np.ndarray, np.ndarray]:
    """A permutation sorting ``key`` (non-negative int64 below ``2**key_bits``), ties by position.

    The position is packed below the key where both fit in 63 bits, so one plain
    ``np.sort`` (vectorised) replaces ``np.argsort`` (several times slower on millions of
    keys); that sort on up to ``threads`` threads (:func:`sort_in_place`: the packed keys are all
    different, so the same permutation on any number). Returns ``(order, sorted_key)``; ``key``
    is overwritten (it becomes ``sorted_key``).
    """
    n = key.size
    shift = max(_bits(n), 1)
    if key_bits + shift > 63:
        order = np.argsort(key, kind="stable")
        return order, key[order]
    packed = key  # packed in place: the caller hands the key over
    packed <<= np.int64(shift)
    for start in range(0, n, CHUNK):  # positions below the key (small temporaries)
        packed[start:start + CHUNK] |= np.arange(start, min(start + CHUNK, n), dtype=np.int64)
    sort_in_place(packed, threads=threads)
    if shift < 31:  # positions fit in the low 32-bit half of each entry
        low = packed.view(np.int32)[0 if sys.byteorder == "little" else 1::2]
        order = low & np.int32((1 << shift) - 1)
    else:
        order = packed & np.int64((1 << shift) - 1)
    packed >>= np.int64(shift)
    return order, packed


def group_columns(columns: list, *, threads: int = 1) -> tuple[np.ndarray, np.ndarray]:
    """Group equal rows of the table whose columns are ``columns`` (equal-length int arrays).

    Returns ``order``, a permutation that sorts the rows lexicographically (so
    equal rows are next to each other), and ``starts``, the first position of
    each group of equal rows in that order. Exact: the rows are sorted by
    their own values, packed in 63-bit digits (least significant digit first,
    each pass stable), never by a hash; where that takes more than one pass, in one pass over
    buckets of the leading column's values when they fit (:func:`_bucketed_groups`: the same
    order and groups). Each pass's sort on up to ``threads`` threads (the same result on any number).

    References
    ----------
    Least-significant-digit radix sorting with a stable sort per digit: Knuth, D. E.
    (1998), The Art of Computer Programming, vol. 3, 2nd ed., section 5.2.5.
    """
    n = columns[0].size if columns else 0
    if n == 0:
        return np.zeros(0, dtype=np.int64), np.zeros(0, dtype=np.int64)
    lows = [int(c.min()) for c in columns]
    widths = [_bits(int(c.max()) - lo + 1) for c, lo in zip(columns, lows)]
    room = 63 - max(_bits(n), 1)
    # digits: runs of neighbouring columns whose bits fit in one pass, last column first
    digits, current, used = [], [], 0
    for j in reversed(range(len(columns))):
        if widths[j] == 0:
            continue
        if current and used + widths[j] > room:
            digits.append(current)
            current, used = [], 0
        current.append(j)
        used += widths[j]
    if current:
        digits.append(current)
    if not digits:  # every row is the same
        return np.arange(n, dtype=np.int64), np.zeros(1, dtype=np.int64)
    if len(digits) > 1:  # one pass in buckets of the leading column, where they fit in 63 bits
        found = _bucketed_groups(columns, lows, widths, threads=threads)
        if found is not None:
            return found
    order, ranks = None, []  # ranks: per digit done, the rank of each row's digit value, in order
    index = index_dtype(n)
    for digit in digits:
        key, shift = np.empty(n, dtype=np.int64), 0
        for position, j in enumerate(digit):  # least significant column first
            for lo in range(0, n, CHUNK):  # in chunks: no full-length int64 temporaries
                rows = slice(lo, lo + CHUNK)
                part = (columns[j][rows] if order is None else np.take(columns[j], order[rows])).astype(np.int64)
                if lows[j]:
                    part -= lows[j]
                if shift:
                    part <<= np.int64(shift)
                if position > 0:  # later columns are or-ed into the key the first one set
                    key[rows] |= part
                else:
                    key[rows] = part
            shift += widths[j]
        del part
        step, ordered = _sort_order(key, shift, threads=threads)
        del key
        ranks = [r[step] for r in ranks]
        order = step if order is None else order[step]
        del step
        if digit is not digits[-1]:
            rank = np.zeros(n, dtype=index)
            np.cumsum(ordered[1:] != ordered[:-1], out=rank[1:])
            ranks.append(rank)
            del ordered, rank
    # rows differ where any digit differs
    new = np.zeros(n, dtype=bool)
    new[0] = True
    np.not_equal(ordered[1:], ordered[:-1], out=new[1:])
    del ordered
    for r in ranks:
        new[1:] |= r[1:] != r[:-1]
    return order, np.flatnonzero(new)


#: bins of the leading column's values that :func:`_bucketed_groups` gathers into buckets
_BINS_BITS = 12
#: rows of a bucket of :func:`_bucketed_groups` past which it takes no more bins (a bin alone may
#: hold more): each sort's temporaries stay near 2 MB (buckets of half the rows took 92 MB of the
#: 205 MB peak of the grouping of 1M tetrahedra's 4M face rows on two threads)
_BUCKET_ROWS = 1 << 16


def _bucketed_groups(columns: list, lows: list, widths: list, *, threads: int = 1):
    """:func:`group_columns`' ``order`` and ``starts`` in one sorting pass per bucket, or None.

    Rows are parted into buckets of consecutive values of the leading column (the first whose
    values differ), each bucket small enough that its rows' packed key (leading column from the
    bucket's lowest value, the later columns, the position in the bucket) fits in 63 bits and
    its sort stays small (:func:`_bucket_edges`; a bin alone may hold more). The
    buckets follow each other in the leading column's order and every row of a group falls in
    one bucket, so sorting each bucket (on up to ``threads`` threads) gives the same order and
    groups as the passes over all rows (least significant digit first), in one pass of small
    sorts instead of several of all rows: most significant digit first, then by sorting (Knuth,
    TAOCP vol. 3, 5.2.5). None when one bin of the leading column alone does not fit.
    """
    n = columns[0].size
    lead = next(j for j, w in enumerate(widths) if w > 0)
    later = [j for j in range(lead + 1, len(columns)) if widths[j] > 0]
    rest = sum(widths[j] for j in later)
    shift = max(widths[lead] - _BINS_BITS, 0)
    values = columns[lead]
    if widths[lead] >= 8 * values.dtype.itemsize - 1:  # the offsets from the low would wrap in its dtype
        values = values.astype(np.int64)
    binned = values - values.dtype.type(lows[lead])
    del values
    binned >>= shift
    total = np.concatenate([[0], np.cumsum(np.bincount(binned))])
    edges = _bucket_edges(total, shift, rest)
    if edges is None:
        return None
    # at most 2**_BINS_BITS buckets: uint16 numbers them all
    bucket = np.repeat(np.arange(len(edges) - 1, dtype=np.uint8 if len(edges) <= 257 else np.uint16),
                       np.diff(edges))[binned]
    del binned
    by_bucket = np.argsort(bucket, kind="stable")  # a radix sort for these small ints: rows in order within
    del bucket
    at = total[edges]
    index = index_dtype(n)
    order = np.empty(n, dtype=index)
    new = np.empty(n, dtype=bool)

    def sort_bucket(k: int) -> None:  # writes its own slice of order and new
        rows = by_bucket[at[k]:at[k + 1]]
        m = rows.size
        if m == 0:
            return
        spare = max(_bits(m), 1)
        key = columns[lead][rows].astype(np.int64)
        key -= lows[lead] + (int(edges[k]) << shift)
        room = rest
        key <<= np.int64(room)
        for j in later:
            room -= widths[j]
            part = columns[j][rows].astype(np.int64)
            part -= lows[j]
            part <<= np.int64(room)
            key |= part
        key <<= np.int64(spare)
        key |= np.arange(m, dtype=np.int64)
        key.sort()
        order[at[k]:at[k + 1]] = rows[key & np.int64((1 << spare) - 1)]
        key >>= np.int64(spare)
        new[at[k]] = True
        np.not_equal(key[1:], key[:-1], out=new[at[k] + 1:at[k + 1]])

    for _ in ordered_map(sort_bucket, range(len(edges) - 1), threads=threads):
        pass
    return order, np.flatnonzero(new)


def _bucket_edges(total: np.ndarray, shift: int, rest: int) -> list | None:
    """The first bin of every bucket of :func:`_bucketed_groups` and, last, the number of bins; None
    when one bin alone does not fit. ``total``: the rows before each bin (and all rows, last);
    ``shift``: the bits of the leading column's values within a bin; ``rest``: the later columns' bits.
    A bucket takes bins while its key fits in 63 bits and it holds at most :data:`_BUCKET_ROWS`
    rows (a bin alone may hold more)."""

    def fits(a: int, b: int) -> bool:  # bins a .. b - 1 as one bucket
        return _bits((b - a) << shift) + rest + max(_bits(int(total[b] - total[a])), 1) <= 63

    edges, a, bins = [0], 0, total.size - 1
    while a < bins:
        if not fits(a, a + 1):
            return None
        b = a + 1
        while b < bins and total[b + 1] - total[a] <= _BUCKET_ROWS and fits(a, b + 1):
            b += 1
        edges.append(b)
        a = b
    return edges


def unique_rows(rows: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """The distinct rows of an integer table (n, k) in lexicographic order, and the number of each
    row's among them: ``np.unique(rows, axis=0, return_inverse=True)``, by packed sorts
    (:func:`group_columns`)."""
    order, starts = group_columns([rows[:, j] for j in range(rows.shape[1])])
    return rows[order[starts]], group_numbers(order, starts)


def group_numbers(order: np.ndarray, starts: np.ndarray) -> np.ndarray:
    """Each row's group number (groups numbered in sorted order) from :func:`group_columns`'
    ``order`` and ``starts``: ``np.unique``'s inverse."""
    group = np.zeros(order.size, dtype=np.int64)
    group[starts] = 1
    inverse = np.empty(order.size, dtype=np.int64)
    inverse[order] = np.cumsum(group) - 1
    return inverse
