"""The compiled per-target loop of the local kriging engine
(:mod:`aquitardmap.geostat.localkrige`, whose docstring tells the method).

Written in the subset of Python that numba compiles; numba is imported and the loop compiled
on first use only (the ``fast`` extra), and caches the machine code on disk. The variogram's
structures are :func:`aquitardmap.geostat.variogram.structure`, compiled here, so the
compiled and the numpy paths share one set of formulas.
"""

from __future__ import annotations

import numpy as np

from aquitardmap.geostat.variogram import structure

#: Recently built systems searched for one to derive a new system from.
PARENT_PROBES = 8

_COMPILED = None


def compiled_kernel():
    """The compiled per-target loop (numba imported and the loop compiled on first use;
    numba caches the machine code on disk)."""
    global _COMPILED, _gamma_nb, _pair_gamma_nb, _fresh_inverse_nb, _replace_point_nb
    global _kth_smallest_nb, _structure_nb
    if _COMPILED is None:
        import numba

        def jit(f):
            return numba.njit(cache=True, nogil=True, error_model="numpy")(f)

        _structure_nb = jit(structure)
        _gamma_nb = jit(_gamma_py)
        _kth_smallest_nb = jit(_kth_smallest)
        _pair_gamma_nb = jit(_pair_gamma)
        _fresh_inverse_nb = jit(_fresh_inverse)
        _replace_point_nb = jit(_replace_point)
        _COMPILED = jit(_kernel_py)
    return _COMPILED


def _gamma_py(h, nugget, kinds, psills, ranges):  # pragma: no cover - compiled
    """Semivariance at h > 0 (:meth:`VariogramModel.gamma`, its structures compiled from
    :func:`aquitardmap.geostat.variogram.structure`)."""
    g = nugget
    for s in range(kinds.shape[0]):
        g += psills[s] * _structure_nb(kinds[s], h, ranges[s])
    return g


_gamma_nb = _pair_gamma_nb = _fresh_inverse_nb = _replace_point_nb = _kth_smallest_nb = None
_structure_nb = None


def _kth_smallest(a, n, kth):  # pragma: no cover - compiled
    """The ``kth`` smallest (from 0) of ``a[:n]``, by quickselect; reorders ``a[:n]``."""
    lo = 0
    hi = n - 1
    while lo < hi:
        mid = (lo + hi) // 2  # median of three as pivot
        x0 = a[lo]
        x1 = a[mid]
        x2 = a[hi]
        if x0 > x1:
            x0, x1 = x1, x0
        if x1 > x2:
            x1 = x2
            if x0 > x1:
                x1 = x0
        pivot = x1
        i = lo
        j = hi
        while i <= j:
            while a[i] < pivot:
                i += 1
            while a[j] > pivot:
                j -= 1
            if i <= j:
                tmp = a[i]
                a[i] = a[j]
                a[j] = tmp
                i += 1
                j -= 1
        if kth <= j:
            hi = j
        elif kth >= i:
            lo = i
        else:
            return a[kth]
    return a[kth]


def _pair_gamma(dxy, qa, qb, nugget, kinds, psills, ranges):  # pragma: no cover - compiled
    """Semivariance between data qa and qb (0 for the same point)."""
    dx = dxy[qa, 0] - dxy[qb, 0]
    dy = dxy[qa, 1] - dxy[qb, 1]
    h = np.sqrt(dx * dx + dy * dy)
    return _gamma_nb(h, nugget, kinds, psills, ranges) if h > 0.0 else 0.0


def _fresh_inverse(dxy, sel, k, nugget, kinds, psills, ranges, amat, a, binv, col):
    """The bordered system of neighbour set ``sel`` (positions = order of ``sel``) into
    ``amat`` and its inverse into ``binv``: LU with partial pivoting of a copy ``a``, then
    the inverse from the factors. Returns False when the system is singular."""
    # pragma: no cover - compiled
    n1 = k + 1
    for i in range(k):
        amat[i, i] = 0.0
        for j in range(i + 1, k):
            g = _pair_gamma_nb(dxy, sel[i], sel[j], nugget, kinds, psills, ranges)
            amat[i, j] = g
            amat[j, i] = g
        amat[i, k] = 1.0
        amat[k, i] = 1.0
    amat[k, k] = 0.0
    for i in range(n1):
        for j in range(n1):
            a[i, j] = amat[i, j]
    piv = np.empty(n1, dtype=np.int64)
    for c in range(n1):
        p = c
        big = abs(a[c, c])
        for r in range(c + 1, n1):
            v = abs(a[r, c])
            if v > big:
                big = v
                p = r
        piv[c] = p
        if big == 0.0:
            return False
        if p != c:
            for j in range(n1):
                tmp = a[c, j]
                a[c, j] = a[p, j]
                a[p, j] = tmp
        inv_p = 1.0 / a[c, c]
        for r in range(c + 1, n1):
            f = a[r, c] * inv_p
            a[r, c] = f
            if f != 0.0:
                for j in range(c + 1, n1):
                    a[r, j] -= f * a[c, j]
    # inverse = U⁻¹ L⁻¹ P, all columns at once with whole-row operations
    for i in range(n1):
        for j in range(n1):
            binv[i, j] = 0.0
        binv[i, i] = 1.0
    for i in range(n1):
        p = piv[i]
        if p != i:
            for j in range(n1):
                tmp = binv[i, j]
                binv[i, j] = binv[p, j]
                binv[p, j] = tmp
    for i in range(1, n1):
        row = binv[i]
        for j in range(i):
            f = a[i, j]
            if f != 0.0:
                src = binv[j]
                for c in range(n1):
                    row[c] -= f * src[c]
    for i in range(n1 - 1, -1, -1):
        row = binv[i]
        for j in range(i + 1, n1):
            f = a[i, j]
            if f != 0.0:
                src = binv[j]
                for c in range(n1):
                    row[c] -= f * src[c]
        inv_d = 1.0 / a[i, i]
        for c in range(n1):
            row[c] *= inv_d
    return True


def _replace_point(dxy, amat, binv, pos, i, q, k, nugget, kinds, psills, ranges, delta, u,
                   v):
    """Replace the datum at position ``i`` by datum ``q`` in the inverse ``binv`` of a
    bordered system, by the Woodbury identity for the symmetric rank-2 change
    A' = A + δ e_iᵀ + e_i δᵀ (Hager 1989, SIAM Review 31(2):221-239). Returns False when
    the 2 × 2 capacitance matrix is too close to singular to trust."""  # pragma: no cover
    n1 = k + 1
    p = pos[i]
    for j in range(k):
        if j == i:
            delta[j] = 0.0
        else:
            qj = pos[j]
            g_new = _pair_gamma_nb(dxy, q, qj, nugget, kinds, psills, ranges)
            delta[j] = g_new - _pair_gamma_nb(dxy, p, qj, nugget, kinds, psills, ranges)
            u[j] = g_new  # (u is free until below)
    delta[k] = 0.0
    for j in range(k):
        if j != i:
            amat[i, j] = u[j]
            amat[j, i] = u[j]
    for a_ in range(n1):
        u[a_] = 0.0
    for j in range(n1):
        dj = delta[j]
        if dj != 0.0:
            row = binv[j]
            for a_ in range(n1):
                u[a_] += dj * row[a_]
    m00 = 0.0
    m01 = 1.0
    for a_ in range(n1):
        v[a_] = binv[i, a_]
        m00 += delta[a_] * u[a_]
        m01 += delta[a_] * v[a_]
    m11 = binv[i, i]
    det = m00 * m11 - m01 * m01
    if not abs(det) > 1e-8 * (abs(m00 * m11) + m01 * m01):
        return False
    i00 = m11 / det
    i01 = -m01 / det
    i11 = m00 / det
    for a_ in range(n1):
        pa = i00 * u[a_] + i01 * v[a_]
        qa = i01 * u[a_] + i11 * v[a_]
        row = binv[a_]
        for b_ in range(n1):
            row[b_] -= pa * u[b_] + qa * v[b_]
    pos[i] = q
    return True


def _kernel_py(dxy, z, tx, ty, bounds, cand, cand_bounds, k, nugget, kinds, psills, ranges,
               eps, cap, max_swaps, max_depth, est, var):  # pragma: no cover - compiled
    """For each bin: pick every target's k nearest among the bin's candidates; take the
    inverse system of that neighbour set from the cache, or derive it from a cached set that
    differs by a few data (Woodbury replacements), or compute it afresh; solve for the
    target's γ0."""
    n1 = k + 1
    binv = np.empty((cap, n1, n1))
    amat = np.empty((cap, n1, n1))  # the systems themselves, for iterative refinement
    pos = np.empty((cap, k), dtype=np.int64)  # datum at each position of a cached system
    srt = np.empty((cap, k), dtype=np.int64)  # the same set, sorted (for matching)
    keys = np.empty(cap, dtype=np.int64)
    depth = np.empty(cap, dtype=np.int64)
    good = np.empty(cap, dtype=np.bool_)
    a = np.empty((n1, n1))
    col = np.empty(n1)
    delta = np.empty(n1)
    u = np.empty(n1)
    v = np.empty(n1)
    m_max = 0
    for bn in range(bounds.shape[0] - 1):
        m_max = max(m_max, cand_bounds[bn + 1] - cand_bounds[bn])
    dist2 = np.empty(m_max)
    work = np.empty(m_max)
    sel = np.empty(k, dtype=np.int64)
    gone = np.empty(k, dtype=np.int64)
    came = np.empty(k, dtype=np.int64)
    b = np.empty(n1)
    w = np.empty(n1)
    n_cached = 0  # the cache of systems persists from bin to bin
    slot_next = 0
    last = -1
    for bn in range(bounds.shape[0] - 1):
        c0 = cand_bounds[bn]
        mc = cand_bounds[bn + 1] - c0
        for t in range(bounds[bn], bounds[bn + 1]):
            px = tx[t]
            py = ty[t]
            if mc == k:  # the candidates are the neighbours (sorted by index)
                for j in range(k):
                    sel[j] = cand[c0 + j]
            else:
                # the k nearest: the k-th smallest squared distance by selection, then the
                # candidates up to it in their (index) order; among equal distances the
                # lower index wins
                for j in range(mc):
                    q = cand[c0 + j]
                    dx = dxy[q, 0] - px
                    dy = dxy[q, 1] - py
                    d2 = dx * dx + dy * dy
                    dist2[j] = d2
                    work[j] = d2
                thr = _kth_smallest_nb(work, mc, k - 1)
                n_less = 0
                for j in range(mc):
                    if dist2[j] < thr:
                        n_less += 1
                eq_left = k - n_less
                m = 0
                for j in range(mc):
                    d2 = dist2[j]
                    if d2 < thr:
                        sel[m] = cand[c0 + j]
                        m += 1
                    elif d2 == thr and eq_left > 0:
                        sel[m] = cand[c0 + j]
                        m += 1
                        eq_left -= 1
            key = 0
            for i in range(k):
                key = key * 1000003 + sel[i]
            # 1. the same set in the cache
            slot = -1
            s = last
            for probe in range(n_cached + 1):
                if s >= 0 and keys[s] == key:
                    same = True
                    for i in range(k):
                        if srt[s, i] != sel[i]:
                            same = False
                            break
                    if same:
                        slot = s
                        break
                s = probe if probe < n_cached else -1
            if slot < 0:
                # 2. among the most recent systems, the set closest to it (fewest data to
                #    replace)
                parent = -1
                best = max_swaps + 1
                for probe in range(min(n_cached, PARENT_PROBES) + 1):
                    if probe == 0:
                        s = last
                    else:
                        s = (slot_next - probe + cap) % cap
                        if s == last:
                            continue
                    if s < 0 or not good[s] or depth[s] >= max_depth:
                        continue
                    i = 0
                    j = 0
                    nd = 0
                    while i < k and j < k and nd < best:  # |cached set minus new set|
                        if srt[s, i] == sel[j]:
                            i += 1
                            j += 1
                        elif srt[s, i] < sel[j]:
                            nd += 1
                            i += 1
                        else:
                            j += 1
                    nd += k - i
                    if nd < best and depth[s] + nd <= max_depth:
                        best = nd
                        parent = s
                        if nd <= 1:
                            break
                ng = 0
                if parent >= 0:  # the data to replace, and their replacements
                    i = 0
                    j = 0
                    nc = 0
                    while i < k or j < k:
                        if i < k and j < k and srt[parent, i] == sel[j]:
                            i += 1
                            j += 1
                        elif j >= k or (i < k and srt[parent, i] < sel[j]):
                            gone[ng] = srt[parent, i]
                            ng += 1
                            i += 1
                        else:
                            came[nc] = sel[j]
                            nc += 1
                            j += 1
                slot = slot_next
                slot_next = (slot_next + 1) % cap
                if n_cached < cap:
                    n_cached += 1
                ok = False
                if parent >= 0:
                    if parent != slot:
                        binv[slot, :, :] = binv[parent]
                        amat[slot, :, :] = amat[parent]
                        for i in range(k):
                            pos[slot, i] = pos[parent, i]
                    d0 = depth[parent]
                    ok = True
                    for r in range(ng):
                        at = 0
                        while pos[slot, at] != gone[r]:
                            at += 1
                        if not _replace_point_nb(dxy, amat[slot], binv[slot], pos[slot], at,
                                                 came[r], k, nugget, kinds, psills, ranges,
                                                 delta, u, v):
                            ok = False
                            break
                    depth[slot] = d0 + ng
                keys[slot] = key
                for i in range(k):
                    srt[slot, i] = sel[i]
                if not ok:
                    for i in range(k):
                        pos[slot, i] = sel[i]
                    ok = _fresh_inverse_nb(dxy, sel, k, nugget, kinds, psills, ranges,
                                           amat[slot], a, binv[slot], col)
                    depth[slot] = 0
                good[slot] = ok
            last = slot
            if not good[slot]:
                est[t] = np.nan
                var[t] = np.nan
                continue
            for j in range(k):
                q = pos[slot, j]
                dx = dxy[q, 0] - px
                dy = dxy[q, 1] - py
                h = np.sqrt(dx * dx + dy * dy)
                b[j] = 0.0 if h <= eps else _gamma_nb(h, nugget, kinds, psills, ranges)
            b[k] = 1.0
            for i in range(n1):
                w[i] = 0.0
            bm = binv[slot]
            am = amat[slot]
            for j in range(n1):  # w = B b, row by row (B is symmetric)
                bj = b[j]
                if bj != 0.0:
                    row = bm[j]
                    for i in range(n1):
                        w[i] += bj * row[i]
            # one step of iterative refinement with the system itself: r = b - A w,
            # w += B r (keeps the accuracy of a fresh solve after many replacements)
            for i in range(n1):
                col[i] = b[i]
            for j in range(n1):
                wj = w[j]
                row = am[j]
                for i in range(n1):
                    col[i] -= wj * row[i]
            for j in range(n1):
                rj = col[j]
                row = bm[j]
                for i in range(n1):
                    w[i] += rj * row[i]
            e = 0.0
            for j in range(k):
                e += w[j] * z[pos[slot, j]]
            s2 = 0.0
            for j in range(n1):
                s2 += w[j] * b[j]
            est[t] = e
            var[t] = s2
    return 0
