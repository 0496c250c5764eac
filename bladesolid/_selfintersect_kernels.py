"""numba kernels of :mod:`bladesolid.selfintersect` (imported on first use; compiled once and
cached on disk).

Module-level functions, so that kernels calling each other stay cacheable. The per-pair helpers
take tuples of numbers, never arrays: a call that passes arrays costs reference counting, and
that is slow when two threads do it on the same arrays millions of times.

A face in the narrow phase is a tuple of 21 floats ``T``: corners ``T[0:9]`` (a, b, c), unit
normal ``T[9:12]``, inward unit in-plane normals of the edges a→b, b→c, c→a ``T[12:21]``; its
vertex indices are a tuple ``F`` of 3 ints.
"""

from __future__ import annotations

import numpy as np
from numba import njit

#: a cell holding more faces than this is split into a finer grid of its own
BIG_CELL = 256
#: candidate pairs gathered before they are tested
BLOCK = 4096


@njit(cache=True, nogil=True)
def prepare(v, f, eps, deg2, geo, lo, hi, degenerate):
    """Per face: unit normal and inward unit in-plane edge normals (``geo`` (m, 12)), bounding
    box padded by eps, and whether twice its area is at most deg2 (degenerate)."""
    for i in range(f.shape[0]):
        a, b, c = f[i, 0], f[i, 1], f[i, 2]
        ux, uy, uz = v[b, 0] - v[a, 0], v[b, 1] - v[a, 1], v[b, 2] - v[a, 2]
        wx, wy, wz = v[c, 0] - v[a, 0], v[c, 1] - v[a, 1], v[c, 2] - v[a, 2]
        nx, ny, nz = uy * wz - uz * wy, uz * wx - ux * wz, ux * wy - uy * wx
        nn = np.sqrt(nx * nx + ny * ny + nz * nz)
        degenerate[i] = not (nn > deg2)
        if nn > 0.0:
            nx, ny, nz = nx / nn, ny / nn, nz / nn
        geo[i, 0], geo[i, 1], geo[i, 2] = nx, ny, nz
        for e in range(3):
            p, q = f[i, e], f[i, (e + 1) % 3]
            ex, ey, ez = v[q, 0] - v[p, 0], v[q, 1] - v[p, 1], v[q, 2] - v[p, 2]
            # n x e points into the triangle for a counter-clockwise edge about n
            mx, my, mz = ny * ez - nz * ey, nz * ex - nx * ez, nx * ey - ny * ex
            mm = np.sqrt(mx * mx + my * my + mz * mz)
            if mm > 0.0:
                mx, my, mz = mx / mm, my / mm, mz / mm
            geo[i, 3 + 3 * e], geo[i, 4 + 3 * e], geo[i, 5 + 3 * e] = mx, my, mz
        for d in range(3):
            x0, x1, x2 = v[a, d], v[b, d], v[c, d]
            lo[i, d] = min(x0, min(x1, x2)) - eps
            hi[i, d] = max(x0, max(x1, x2)) + eps


@njit(cache=True, nogil=True)
def ranges(lo, hi, degenerate, origin, cell, dims, c0, c1, per):
    """Range of grid cells each face box reaches, and how many cells that is (0 if degenerate)."""
    for i in range(lo.shape[0]):
        n = 1
        for d in range(3):
            a = cell_of(lo[i, d], origin[d], cell, dims[d])
            b = cell_of(hi[i, d], origin[d], cell, dims[d])
            c0[i, d] = a
            c1[i, d] = b
            n *= b - a + 1
        per[i] = 0 if degenerate[i] else n


@njit(cache=True)
def fill(c0, c1, dims, offsets, keys, members):
    """One (cell key, face) entry per cell that each face box reaches, from ``offsets[i]`` on."""
    for i in range(c0.shape[0]):
        o = offsets[i]
        if offsets[i + 1] == o:
            continue
        for z in range(c0[i, 2], c1[i, 2] + 1):
            for y in range(c0[i, 1], c1[i, 1] + 1):
                for x in range(c0[i, 0], c1[i, 0] + 1):
                    keys[o] = x + dims[0] * (y + dims[1] * z)
                    members[o] = i
                    o += 1


@njit(cache=True)
def bucket(keys, members, first):
    """Counting sort of the entries by cell key: returns the members grouped by cell, with
    ``first[key]:first[key + 1]`` delimiting cell ``key`` (first has n_cells + 1 entries)."""
    for key in keys:
        first[key + 1] += 1
    for g in range(1, first.shape[0]):
        first[g] += first[g - 1]
    out = np.empty_like(members)
    place = first[:-1].copy()
    for u in range(keys.shape[0]):
        out[place[keys[u]]] = members[u]
        place[keys[u]] += 1
    return out


# ------------------------------------------------------------------------- narrow phase


@njit(cache=True)
def clip(px, py, pz, qx, qy, qz, T, eps):
    """Segment p -> q against the closed triangle T (tolerance eps): (hit, t0, t1), the
    parameter interval of the common part (t0 == t1 when the segment crosses the plane)."""
    ax, ay, az = T[0], T[1], T[2]
    nx, ny, nz = T[9], T[10], T[11]
    dp = nx * (px - ax) + ny * (py - ay) + nz * (pz - az)
    dq = nx * (qx - ax) + ny * (qy - ay) + nz * (qz - az)
    if abs(dp) <= eps:
        dp = 0.0
    if abs(dq) <= eps:
        dq = 0.0
    if (dp > 0.0 and dq > 0.0) or (dp < 0.0 and dq < 0.0):
        return False, 0.0, 0.0
    flat = dp == 0.0 and dq == 0.0
    if flat:  # in the plane: clip the whole segment
        t0, t1 = 0.0, 1.0
    else:  # crosses the plane at one point
        t0 = dp / (dp - dq)
        t1 = t0
    for e in range(3):
        ox, oy, oz = T[3 * e], T[3 * e + 1], T[3 * e + 2]
        mx, my, mz = T[12 + 3 * e], T[13 + 3 * e], T[14 + 3 * e]
        sp = mx * (px - ox) + my * (py - oy) + mz * (pz - oz)
        sq = mx * (qx - ox) + my * (qy - oy) + mz * (qz - oz)
        # keep the part where sp + t (sq - sp) >= -eps
        aa = sp + eps
        bb = sq - sp
        if not flat:
            if aa + t0 * bb < 0.0:
                return False, 0.0, 0.0
        elif bb > 0.0:
            t0 = max(t0, -aa / bb)
        elif bb < 0.0:
            t1 = min(t1, -aa / bb)
        elif aa < 0.0:
            return False, 0.0, 0.0
        if t0 > t1:
            return False, 0.0, 0.0
    return True, t0, t1


@njit(cache=True)
def side(S, T, eps):
    """True when the three corners of T lie strictly on one side of S's plane (beyond eps)."""
    ax, ay, az = S[0], S[1], S[2]
    nx, ny, nz = S[9], S[10], S[11]
    pos = 0
    neg = 0
    for k in range(3):
        d = nx * (T[3 * k] - ax) + ny * (T[3 * k + 1] - ay) + nz * (T[3 * k + 2] - az)
        if d > eps:
            pos += 1
        elif d < -eps:
            neg += 1
    return pos == 3 or neg == 3


@njit(cache=True)
def pair(Ti, Fi, Tj, Fj, eps):
    """Do faces Ti and Tj (vertex indices Fi, Fj) intersect beyond their shared vertices?

    Returns (hit, box lo x, y, z, box hi x, y, z) of the common part."""
    shared_i = 0  # bit k: corner k of face i is a corner of face j
    shared_j = 0
    ns = 0
    for a in range(3):
        for b in range(3):
            if Fi[a] == Fj[b]:
                shared_i |= 1 << a
                shared_j |= 1 << b
                ns += 1
    inf = np.inf
    if ns >= 3:  # the same face twice
        return (True, min(Ti[0], Ti[3], Ti[6]), min(Ti[1], Ti[4], Ti[7]), min(Ti[2], Ti[5], Ti[8]),
                max(Ti[0], Ti[3], Ti[6]), max(Ti[1], Ti[4], Ti[7]), max(Ti[2], Ti[5], Ti[8]))
    if ns == 2:
        # shared edge (a, b); c, d the other corners: an overlap only when folded flat (c
        # within eps of face j's plane or d of face i's) with c and d on one side of ab
        kc = 0 if not shared_i & 1 else (1 if not shared_i & 2 else 2)
        kd = 0 if not shared_j & 1 else (1 if not shared_j & 2 else 2)
        ka = (kc + 1) % 3
        kb = (kc + 2) % 3
        ax, ay, az = Ti[3 * ka], Ti[3 * ka + 1], Ti[3 * ka + 2]
        ex, ey, ez = Ti[3 * kb] - ax, Ti[3 * kb + 1] - ay, Ti[3 * kb + 2] - az
        cx, cy, cz = Ti[3 * kc] - ax, Ti[3 * kc + 1] - ay, Ti[3 * kc + 2] - az
        gx, gy, gz = Tj[3 * kd] - ax, Tj[3 * kd + 1] - ay, Tj[3 * kd + 2] - az
        dc = abs(Tj[9] * cx + Tj[10] * cy + Tj[11] * cz)
        dd = abs(Ti[9] * gx + Ti[10] * gy + Ti[11] * gz)
        if dc > eps and dd > eps:
            return False, inf, inf, inf, -inf, -inf, -inf
        n1x, n1y, n1z = ey * cz - ez * cy, ez * cx - ex * cz, ex * cy - ey * cx
        n2x, n2y, n2z = ey * gz - ez * gy, ez * gx - ex * gz, ex * gy - ey * gx
        if n1x * n2x + n1y * n2y + n1z * n2z <= 0.0:
            return False, inf, inf, inf, -inf, -inf, -inf
        # the overlap of the two faces' boxes holds their common area
        return (True,
                max(min(Ti[0], Ti[3], Ti[6]), min(Tj[0], Tj[3], Tj[6])),
                max(min(Ti[1], Ti[4], Ti[7]), min(Tj[1], Tj[4], Tj[7])),
                max(min(Ti[2], Ti[5], Ti[8]), min(Tj[2], Tj[5], Tj[8])),
                min(max(Ti[0], Ti[3], Ti[6]), max(Tj[0], Tj[3], Tj[6])),
                min(max(Ti[1], Ti[4], Ti[7]), max(Tj[1], Tj[4], Tj[7])),
                min(max(Ti[2], Ti[5], Ti[8]), max(Tj[2], Tj[5], Tj[8])))
    if ns == 0 and (side(Ti, Tj, eps) or side(Tj, Ti, eps)):
        return False, inf, inf, inf, -inf, -inf, -inf
    # every common point of two triangles lies on an edge of one of them that meets the other
    hit = False
    bx0, by0, bz0, bx1, by1, bz1 = inf, inf, inf, -inf, -inf, -inf
    for which in range(2):
        S = Ti if which == 0 else Tj
        T = Tj if which == 0 else Ti
        shared = shared_i if which == 0 else shared_j
        for e in range(3):
            ka, kb = e, (e + 1) % 3
            # with one shared corner only the edge opposite to it can meet the other face
            # anywhere but at that corner
            if ns == 1 and ((shared >> ka) & 1 or (shared >> kb) & 1):
                continue
            px, py, pz = S[3 * ka], S[3 * ka + 1], S[3 * ka + 2]
            qx, qy, qz = S[3 * kb], S[3 * kb + 1], S[3 * kb + 2]
            ok, t0, t1 = clip(px, py, pz, qx, qy, qz, T, eps)
            if ok:
                hit = True
                for tt in (t0, t1):
                    x, y, z = px + tt * (qx - px), py + tt * (qy - py), pz + tt * (qz - pz)
                    bx0, by0, bz0 = min(bx0, x), min(by0, y), min(bz0, z)
                    bx1, by1, bz1 = max(bx1, x), max(by1, y), max(bz1, z)
    return hit, bx0, by0, bz0, bx1, by1, bz1


@njit(cache=True)
def check_block(v, f, geo, eps, cand, n_cand, c, counts, out_pairs, out_centres, boxes, sums):
    """Test the candidate pairs ``cand[:n_cand]``; record the hits in row c of the outputs."""
    for t in range(n_cand):
        i, j = cand[t, 0], cand[t, 1]
        a, b, d = f[i, 0], f[i, 1], f[i, 2]
        Ti = (v[a, 0], v[a, 1], v[a, 2], v[b, 0], v[b, 1], v[b, 2], v[d, 0], v[d, 1], v[d, 2],
              geo[i, 0], geo[i, 1], geo[i, 2], geo[i, 3], geo[i, 4], geo[i, 5], geo[i, 6], geo[i, 7], geo[i, 8],
              geo[i, 9], geo[i, 10], geo[i, 11])
        Fi = (a, b, d)
        a, b, d = f[j, 0], f[j, 1], f[j, 2]
        Tj = (v[a, 0], v[a, 1], v[a, 2], v[b, 0], v[b, 1], v[b, 2], v[d, 0], v[d, 1], v[d, 2],
              geo[j, 0], geo[j, 1], geo[j, 2], geo[j, 3], geo[j, 4], geo[j, 5], geo[j, 6], geo[j, 7], geo[j, 8],
              geo[j, 9], geo[j, 10], geo[j, 11])
        Fj = (a, b, d)
        hit, q0, q1, q2, q3, q4, q5 = pair(Ti, Fi, Tj, Fj, eps)
        if not hit:
            continue
        mx, my, mz = 0.5 * (q0 + q3), 0.5 * (q1 + q4), 0.5 * (q2 + q5)
        n = counts[c]
        if n < out_pairs.shape[1]:
            out_pairs[c, n, 0] = min(i, j)
            out_pairs[c, n, 1] = max(i, j)
            out_centres[c, n, 0] = mx
            out_centres[c, n, 1] = my
            out_centres[c, n, 2] = mz
        counts[c] = n + 1
        sums[c, 0] += mx
        sums[c, 1] += my
        sums[c, 2] += mz
        boxes[c, 0], boxes[c, 1], boxes[c, 2] = min(boxes[c, 0], q0), min(boxes[c, 1], q1), min(boxes[c, 2], q2)
        boxes[c, 3], boxes[c, 4], boxes[c, 5] = max(boxes[c, 3], q3), max(boxes[c, 4], q4), max(boxes[c, 5], q5)


# ------------------------------------------------------------------------- broad phase


@njit(cache=True)
def cell_of(x, o, size, n):
    """Index of the cell (edge ``size``, ``n`` cells from ``o``) that holds coordinate x."""
    return min(max(np.int64(np.floor((x - o) / size)), 0), n - 1)


@njit(cache=True)
def owner(lo_i, hi_i, lo_j, hi_j, o, size, n):
    """Cell (x, y, z) holding the low corner of the overlap of boxes i and j (tuples of 3),
    or (-1, -1, -1) when they do not overlap. Each pair is tested in that cell only, however
    many cells the two faces share."""
    x0, y0, z0 = max(lo_i[0], lo_j[0]), max(lo_i[1], lo_j[1]), max(lo_i[2], lo_j[2])
    if x0 > min(hi_i[0], hi_j[0]) or y0 > min(hi_i[1], hi_j[1]) or z0 > min(hi_i[2], hi_j[2]):
        return -1, -1, -1
    return cell_of(x0, o[0], size, n[0]), cell_of(y0, o[1], size, n[1]), cell_of(z0, o[2], size, n[2])


@njit(cache=True, nogil=True)
def chunk_pairs(c, v, f, geo, lo, hi, origin, cell, dims, starts, ends, cell_keys, members, eps, counts, out_pairs,
                out_centres, boxes, sums):
    """Every intersecting pair among the faces sharing cells c, c + nchunk, c + 2 nchunk, ...
    (nchunk = len(counts); interleaved cells give each thread an even share), tested in blocks.
    Row c of the outputs receives the number of hits, the first ones (pairs and the centres of
    their common parts), the sum of those centres and the box of the common parts. Releases
    the GIL: rows are filled by several threads at once."""
    nchunk = counts.shape[0]
    o3 = (origin[0], origin[1], origin[2])
    n3 = (dims[0], dims[1], dims[2])
    cand = np.empty((BLOCK, 2), np.int64)
    n_cand = 0
    counts[c] = 0
    for g in range(c, starts.shape[0], nchunk):
        key = cell_keys[g]
        cx, cy, cz = key % dims[0], (key // dims[0]) % dims[1], key // (dims[0] * dims[1])
        s0, k = starts[g], ends[g] - starts[g]
        if k <= BIG_CELL:
            for u in range(s0, s0 + k):
                fi = members[u]
                lo_i, hi_i = (lo[fi, 0], lo[fi, 1], lo[fi, 2]), (hi[fi, 0], hi[fi, 1], hi[fi, 2])
                for w in range(u + 1, s0 + k):
                    fj = members[w]
                    ox, oy, oz = owner(lo_i, hi_i, (lo[fj, 0], lo[fj, 1], lo[fj, 2]),
                                       (hi[fj, 0], hi[fj, 1], hi[fj, 2]), o3, cell, n3)
                    if ox != cx or oy != cy or oz != cz:
                        continue
                    cand[n_cand, 0], cand[n_cand, 1] = fi, fj
                    n_cand += 1
                    if n_cand == BLOCK:
                        check_block(v, f, geo, eps, cand, n_cand, c, counts, out_pairs, out_centres, boxes, sums)
                        n_cand = 0
            continue
        # a crowded cell (small faces where most of the surface has larger ones): a grid of
        # its own with about a dozen faces per sub-cell; a face reaching more than 8 sub-cells
        # is paired with every face of the cell instead
        n_sub = min(16, max(2, np.int64(np.ceil((k / 12.0) ** (1.0 / 3.0)))))
        sub = cell / n_sub
        so3 = (origin[0] + cell * cx, origin[1] + cell * cy, origin[2] + cell * cz)
        ns3 = (n_sub, n_sub, n_sub)
        r0 = np.empty((k, 3), np.int64)
        r1 = np.empty((k, 3), np.int64)
        large = np.zeros(k, np.bool_)
        first = np.zeros(n_sub * n_sub * n_sub + 1, np.int64)
        for u in range(k):
            fi = members[s0 + u]
            reach = 1
            for d in range(3):
                r0[u, d] = cell_of(lo[fi, d], so3[d], sub, n_sub)
                r1[u, d] = cell_of(hi[fi, d], so3[d], sub, n_sub)
                reach *= r1[u, d] - r0[u, d] + 1
            large[u] = reach > 8
            if large[u]:
                continue
            for z in range(r0[u, 2], r1[u, 2] + 1):
                for y in range(r0[u, 1], r1[u, 1] + 1):
                    for x in range(r0[u, 0], r1[u, 0] + 1):
                        first[x + n_sub * (y + n_sub * z) + 1] += 1
        for q in range(1, first.shape[0]):
            first[q] += first[q - 1]
        place = first[:-1].copy()
        inner = np.empty(first[-1], np.int64)
        for u in range(k):
            if large[u]:
                continue
            for z in range(r0[u, 2], r1[u, 2] + 1):
                for y in range(r0[u, 1], r1[u, 1] + 1):
                    for x in range(r0[u, 0], r1[u, 0] + 1):
                        q = x + n_sub * (y + n_sub * z)
                        inner[place[q]] = members[s0 + u]
                        place[q] += 1
        # q < 0: the large face k + q against every other face of the cell (a pair of large
        # faces once); q >= 0: the small faces of sub-cell q against each other
        for q in range(-k, first.shape[0] - 1):
            if q < 0 and not large[k + q]:
                continue
            n_a = k if q < 0 else first[q + 1] - first[q]
            for a in range(n_a):
                if q < 0:
                    u = k + q
                    if a == u or (large[a] and a < u):
                        continue
                    fi, fj = members[s0 + u], members[s0 + a]
                    b_from, b_to = 0, 1  # one partner, fj
                else:
                    fi = inner[first[q] + a]
                    b_from, b_to = a + 1, n_a
                for b in range(b_from, b_to):
                    if q >= 0:
                        fj = inner[first[q] + b]
                    ox, oy, oz = owner((lo[fi, 0], lo[fi, 1], lo[fi, 2]), (hi[fi, 0], hi[fi, 1], hi[fi, 2]),
                                       (lo[fj, 0], lo[fj, 1], lo[fj, 2]), (hi[fj, 0], hi[fj, 1], hi[fj, 2]),
                                       o3, cell, n3)
                    if ox != cx or oy != cy or oz != cz:
                        continue
                    if q >= 0:
                        sx, sy, sz = owner((lo[fi, 0], lo[fi, 1], lo[fi, 2]), (hi[fi, 0], hi[fi, 1], hi[fi, 2]),
                                           (lo[fj, 0], lo[fj, 1], lo[fj, 2]), (hi[fj, 0], hi[fj, 1], hi[fj, 2]),
                                           so3, sub, ns3)
                        if sx + n_sub * (sy + n_sub * sz) != q:
                            continue
                    cand[n_cand, 0], cand[n_cand, 1] = fi, fj
                    n_cand += 1
                    if n_cand == BLOCK:
                        check_block(v, f, geo, eps, cand, n_cand, c, counts, out_pairs, out_centres, boxes, sums)
                        n_cand = 0
    check_block(v, f, geo, eps, cand, n_cand, c, counts, out_pairs, out_centres, boxes, sums)
