"""numba kernels of the pair engine. Arrays and scalars only; they never raise.

Statistics kept per bin and per variable (``STATS`` columns, in this order): pair count, sum of
separation, sums of head and tail values, of their squares, of squared differences, of absolute
differences, of head x tail, and of squared differences over the squared pair mean (for the pairwise
relative variogram). Two more per pair of variables: the count where both are present and the sum of
the products of their differences (the cross-semivariogram).
"""

from __future__ import annotations

import math

import numba
import numpy as np

from .._jit import jit, jit_parallel

N_STATS = 10
COUNT, SUM_D, SUM_H, SUM_T, SUM_H2, SUM_T2, SUM_SQ, SUM_ABS, SUM_HT, SUM_PR = range(N_STATS)

# integer layout of the sets (see engine/pairs/__init__.py, _layout)
(L_OMNI_SLOT, L_OMNI_N, L_DIR_SLOT, L_DIR_COUNT, L_DIR_N, L_DH_SLOT, L_DH_N, L_VOL_SLOT, L_VOL_NX, L_VOL_NY,
 L_VOL_NZ, L_FILTER, L_N_VALUES, L_WIDTH) = range(14)
# float parameters
(F_MAX2, F_OMNI_LAG, F_OMNI_TOL, F_DIR_LAG, F_DIR_TOL, F_DH_LAG, F_DH_TOL, F_VOL_CX, F_VOL_CY, F_VOL_CZ,
 F_WIDTH) = range(11)


@jit(inline="always")
def _bins(d, lag, tol, n, out):
    """Bins k = 0..n with k lag - tol < d <= k lag + tol (bin 0: 0 <= d <= tol). Returns how many
    were written to ``out``."""
    count = 0
    if lag <= 0.0:
        return 0
    if tol + tol <= lag:  # bins do not overlap: at most one, found directly
        k = int(math.ceil((d - tol) / lag))
        if k > 0 and (k - 1) * lag + tol >= d:  # the division rounded up past an edge
            k -= 1
        if k <= n and k * lag - tol < d <= k * lag + tol:
            out[0] = k
            return 1
        if k + 1 <= n and (k + 1) * lag - tol < d <= (k + 1) * lag + tol:  # it rounded down
            out[0] = k + 1
            return 1
        return 0
    k = int(math.ceil((d - tol) / lag)) - 1  # one below, in case the division rounded up
    if k < 0:
        k = 0
    while k <= n and k * lag - tol < d and count < out.shape[0]:
        if d <= k * lag + tol:
            out[count] = k
            count += 1
        k += 1
    return count


@jit(inline="always")
def _add(acc, slot, values, head, tail, d, n_values):
    """Add one oriented pair (rows ``head`` and ``tail`` of ``values``) at separation d to a bin."""
    row = acc[slot]
    for v in range(n_values):
        h = values[head, v]
        t = values[tail, v]
        if np.isnan(h) or np.isnan(t):
            continue
        base = v * N_STATS
        diff = h - t
        row[base + COUNT] += 1.0
        row[base + SUM_D] += d
        row[base + SUM_H] += h
        row[base + SUM_T] += t
        row[base + SUM_H2] += h * h
        row[base + SUM_T2] += t * t
        row[base + SUM_SQ] += diff * diff
        row[base + SUM_ABS] += abs(diff)
        row[base + SUM_HT] += h * t
        m = 0.5 * (h + t)
        if m != 0.0:
            row[base + SUM_PR] += diff * diff / (m * m)
    # cross terms of every pair of variables
    k = n_values * N_STATS
    for a in range(n_values):
        for b in range(a + 1, n_values):
            da = values[head, a] - values[tail, a]
            db = values[head, b] - values[tail, b]
            if not (np.isnan(da) or np.isnan(db)):
                row[k] += 1.0
                row[k + 1] += da * db
            k += 2


@jit(inline="always")
def _pair(acc, i, j, dx, dy, dz, d2, hole, depth, values, layout, params, directions, dir_params, scratch):
    """Add one unordered pair of points within the search distance (separation dx, dy, dz from i to
    j) to every bin of every set it falls in."""
    same_hole = hole[i] == hole[j]
    mode = layout[L_FILTER]
    if (mode == 1 and same_hole) or (mode == 2 and not same_hole):
        return 0
    d = math.sqrt(d2)
    # canonical orientation: the head is the lower point (then the more southern, then western);
    # written as selects rather than a branch, which would be mispredicted half the time
    flip = dz > 0.0 or (dz == 0.0 and (dy > 0.0 or (dy == 0.0 and dx > 0.0)))
    head = i if flip else j
    tail = j if flip else i
    sign = -1.0 if flip else 1.0
    dx *= sign
    dy *= sign
    dz *= sign
    n_values = layout[L_N_VALUES]
    # omnidirectional
    n = _bins(d, params[F_OMNI_LAG], params[F_OMNI_TOL], layout[L_OMNI_N], scratch)
    for q in range(n):
        _add(acc, layout[L_OMNI_SLOT] + scratch[q], values, head, tail, d, n_values)
    # directional: angle tolerance about u, then bandwidths across (horizontal) and along (vertical)
    # the direction's vertical plane
    n_dir = layout[L_DIR_COUNT]
    width = layout[L_DIR_N] + 1
    for s in range(n_dir):
        ux = directions[s, 0]
        uy = directions[s, 1]
        uz = directions[s, 2]
        c = dx * ux + dy * uy + dz * uz
        if abs(c) < d * dir_params[s, 0] or d == 0.0:
            continue
        across = abs(dx * directions[s, 3] + dy * directions[s, 4] + dz * directions[s, 5])
        if across > dir_params[s, 1]:
            continue
        along = abs(dx * directions[s, 6] + dy * directions[s, 7] + dz * directions[s, 8])
        if along > dir_params[s, 2]:
            continue
        n = _bins(d, params[F_DIR_LAG], params[F_DIR_TOL], layout[L_DIR_N], scratch)
        for q in range(n):
            if c >= 0.0:  # the separation points along u: the canonical head is the head
                _add(acc, layout[L_DIR_SLOT] + s * width + scratch[q], values, head, tail, d, n_values)
            else:
                _add(acc, layout[L_DIR_SLOT] + s * width + scratch[q], values, tail, head, d, n_values)
    # down the hole: the deeper sample is the head
    if same_hole and layout[L_DH_N] > 0:
        sep = depth[j] - depth[i]
        dh_head = j
        dh_tail = i
        if sep < 0.0:
            dh_head = i
            dh_tail = j
            sep = -sep
        n = _bins(sep, params[F_DH_LAG], params[F_DH_TOL], layout[L_DH_N], scratch)
        for q in range(n):
            _add(acc, layout[L_DH_SLOT] + scratch[q], values, dh_head, dh_tail, sep, n_values)
    # the variogram volume: lag-vector cells, one half stored (h and -h are the same pair)
    nx = layout[L_VOL_NX]
    if nx >= 0:
        ny = layout[L_VOL_NY]
        nz = layout[L_VOL_NZ]
        ix = int(math.floor(dx / params[F_VOL_CX] + 0.5))
        iy = int(math.floor(dy / params[F_VOL_CY] + 0.5))
        iz = int(math.floor(dz / params[F_VOL_CZ] + 0.5))
        vol_head = head
        vol_tail = tail
        if iz > 0 or (iz == 0 and (iy > 0 or (iy == 0 and ix > 0))):
            ix = -ix
            iy = -iy
            iz = -iz
            vol_head = tail
            vol_tail = head
        if abs(ix) <= nx and abs(iy) <= ny and -iz <= nz:
            cell = ((-iz) * (2 * ny + 1) + (iy + ny)) * (2 * nx + 1) + (ix + nx)
            _add(acc, layout[L_VOL_SLOT] + cell, values, vol_head, vol_tail, d, n_values)
    return 1


@jit_parallel
def pair_pass(n_threads, tasks, cell_start, x, y, z, hole, depth, values, layout, params, directions,
              dir_params, n_slots, n_columns):
    """Visit every unordered pair within the search distance once.

    ``tasks`` (k, 2) are pairs of cells (A, B) with B == A for pairs inside a cell; task k goes to
    thread k % n_threads (tasks come sorted by work, largest first). Each thread adds into its own
    accumulator slice; the slices are summed in a fixed order afterwards, so pair counts do not depend
    on the thread count and sums agree to round-off. Returns (accumulators, candidate pairs, pairs
    within the search distance).
    """
    acc = np.zeros((n_threads, n_slots, n_columns))
    candidates = np.zeros(n_threads, dtype=np.int64)
    accepted = np.zeros(n_threads, dtype=np.int64)
    n_tasks = tasks.shape[0]
    max2 = params[F_MAX2]
    for t in numba.prange(n_threads):
        scratch = np.empty(64, dtype=np.int64)
        local = acc[t]
        cand = 0
        inside = 0
        for k in range(t, n_tasks, n_threads):
            a = tasks[k, 0]
            b = tasks[k, 1]
            a0 = cell_start[a]
            a1 = cell_start[a + 1]
            b0 = cell_start[b]
            b1 = cell_start[b + 1]
            for i in range(a0, a1):
                j0 = i + 1 if a == b else b0
                xi = x[i]
                yi = y[i]
                zi = z[i]
                cand += b1 - j0
                for j in range(j0, b1):
                    dx = x[j] - xi
                    dy = y[j] - yi
                    dz = z[j] - zi
                    d2 = dx * dx + dy * dy + dz * dz
                    if d2 <= max2:
                        inside += _pair(local, i, j, dx, dy, dz, d2, hole, depth, values, layout, params,
                                        directions, dir_params, scratch)
        candidates[t] = cand
        accepted[t] = inside
    total = np.zeros((n_slots, n_columns))
    for t in range(n_threads):
        total += acc[t]
    return total, candidates.sum(), accepted.sum()


@jit_parallel
def brute_force_pass(n_threads, x, y, z, hole, depth, values, layout, params, directions, dir_params,
                     n_slots, n_columns):
    """Every pair of points, no search structure: the compute limit per pair (benchmarks, tests).

    The inner loop is written out here as in ``pair_pass`` on purpose: a shared inlined helper for it
    measured 5-10% slower on the 200,000-composite benchmark."""
    n = x.shape[0]
    acc = np.zeros((n_threads, n_slots, n_columns))
    accepted = np.zeros(n_threads, dtype=np.int64)
    max2 = params[F_MAX2]
    for t in numba.prange(n_threads):
        scratch = np.empty(64, dtype=np.int64)
        local = acc[t]
        inside = 0
        for i in range(t, n, n_threads):
            xi = x[i]
            yi = y[i]
            zi = z[i]
            for j in range(i + 1, n):
                dx = x[j] - xi
                dy = y[j] - yi
                dz = z[j] - zi
                d2 = dx * dx + dy * dy + dz * dz
                if d2 <= max2:
                    inside += _pair(local, i, j, dx, dy, dz, d2, hole, depth, values, layout, params,
                                    directions, dir_params, scratch)
        accepted[t] = inside
    total = np.zeros((n_slots, n_columns))
    for t in range(n_threads):
        total += acc[t]
    return total, accepted.sum()


@jit
def _mix(i, j):
    """A fixed hash of a pair of indices to [0, 2^32): the deterministic choice of sampled pairs."""
    h = (i * 0x9E3779B1 + j * 0x85EBCA77) & 0xFFFFFFFF
    h ^= h >> 15
    h = (h * 0x2C1B3C6D) & 0xFFFFFFFF
    h ^= h >> 12
    h = (h * 0x297A2D39) & 0xFFFFFFFF
    h ^= h >> 15
    return h


@jit
def pair_list_pass(tasks, cell_start, x, y, z, hole, depth, values, layout, params, directions, dir_params,
                   n_slots, n_columns, target, keep_below, max_out):
    """The pairs that fall in one bin (slot ``target``), found by the very code that fills the bins:
    a pair belongs to the bin when adding it changes the bin's count. Pairs whose hash is below
    ``keep_below`` are kept, up to ``max_out``. Returns (i, j, head value, tail value, separation,
    number kept)."""
    acc = np.zeros((n_slots, n_columns))
    scratch = np.empty(64, dtype=np.int64)
    out_i = np.empty(max_out, dtype=np.int64)
    out_j = np.empty(max_out, dtype=np.int64)
    out_h = np.empty(max_out)
    out_t = np.empty(max_out)
    out_d = np.empty(max_out)
    kept = 0
    max2 = params[F_MAX2]
    for k in range(tasks.shape[0]):
        a = tasks[k, 0]
        b = tasks[k, 1]
        for i in range(cell_start[a], cell_start[a + 1]):
            j0 = i + 1 if a == b else cell_start[b]
            for j in range(j0, cell_start[b + 1]):
                dx = x[j] - x[i]
                dy = y[j] - y[i]
                dz = z[j] - z[i]
                d2 = dx * dx + dy * dy + dz * dz
                if d2 > max2:
                    continue
                before = acc[target, COUNT]
                sum_h = acc[target, SUM_H]
                sum_t = acc[target, SUM_T]
                sum_d = acc[target, SUM_D]
                _pair(acc, i, j, dx, dy, dz, d2, hole, depth, values, layout, params, directions, dir_params,
                      scratch)
                if acc[target, COUNT] != before and kept < max_out and _mix(min(i, j), max(i, j)) < keep_below:
                    out_i[kept] = i
                    out_j[kept] = j
                    out_h[kept] = acc[target, SUM_H] - sum_h
                    out_t[kept] = acc[target, SUM_T] - sum_t
                    out_d[kept] = acc[target, SUM_D] - sum_d
                    kept += 1
    return out_i, out_j, out_h, out_t, out_d, kept
