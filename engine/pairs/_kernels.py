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
 L_VOL_NZ, L_FILTER, L_N_VALUES, L_WEIGHTED, L_WIDTH) = range(15)
# float parameters (the inverse lags spare the hot path a division)
(F_MAX2, F_OMNI_LAG, F_OMNI_TOL, F_DIR_LAG, F_DIR_TOL, F_DH_LAG, F_DH_TOL, F_VOL_CX, F_VOL_CY, F_VOL_CZ,
 F_OMNI_INV, F_DIR_INV, F_DH_INV, F_REACH, F_WIDTH) = range(15)


def kernel_arguments(plan, n_values: int, weighted: bool = False):
    """The layout and float parameters of a plan as tuples of scalars for the kernels. Tuples, not
    arrays: numba keeps them in registers, where array reads would be repeated after every store
    to the accumulators (the compiler cannot rule out that they overlap)."""
    layout = [int(x) for x in plan.layout]
    layout[L_N_VALUES] = int(n_values)
    layout[L_WEIGHTED] = int(bool(weighted))
    params = [float(x) for x in plan.params]
    # the search distance decides on d = sqrt(d2), as the bins do; the squared test in the loops only
    # screens candidates, a little wide so that a pair at exactly the distance is not lost to rounding
    params[F_REACH] = float(plan.max_distance_m)
    params[F_MAX2] = float(plan.max_distance_m) ** 2 * (1.0 + 1e-9)
    for lag, inv in ((F_OMNI_LAG, F_OMNI_INV), (F_DIR_LAG, F_DIR_INV), (F_DH_LAG, F_DH_INV)):
        params[inv] = 1.0 / params[lag] if params[lag] > 0 else 0.0
    return tuple(layout), tuple(params)


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
def _bin_one(d, lag, inv_lag, tol, n):
    """The one bin k (0..n) with k lag - tol < d <= k lag + tol when bins do not overlap, or -1.
    The product with the inverse lag only proposes k; the exact edge tests decide, so a separation
    on an edge falls in the same bin as in ``_bins`` and the references."""
    k = int(math.ceil((d - tol) * inv_lag))
    if k < 0:
        k = 0
    if k > 0 and (k - 1) * lag + tol >= d:
        k -= 1
    elif k * lag + tol < d:
        k += 1
    if k <= n and k * lag - tol < d and d <= k * lag + tol:
        return k
    return -1


@jit(inline="always")
def _add_binned(acc, first_slot, sep, lag, inv_lag, tol, n, values, head, tail, d, n_values, w, scratch):
    """Add one oriented pair to every bin of a line set its separation ``sep`` falls in."""
    if n < 0 or lag <= 0.0:
        return
    if tol + tol <= lag:  # one bin at most, found without a loop
        k = _bin_one(sep, lag, inv_lag, tol, n)
        count = 1 if k >= 0 else 0
        scratch[0] = k
    else:
        count = _bins(sep, lag, tol, n, scratch)
    for q in range(count):  # one copy of _add here: each copy costs compile time
        _add(acc, first_slot + scratch[q], values, head, tail, d, n_values, w)


@jit(inline="always")
def _add(acc, slot, values, head, tail, d, n_values, w):
    """Add one oriented pair (rows ``head`` and ``tail`` of ``values``) at separation d to a bin,
    with weight ``w`` (1 unless the pass is weighted)."""
    row = acc[slot]
    for v in range(n_values):
        h = values[head, v]
        t = values[tail, v]
        if np.isnan(h) or np.isnan(t):
            continue
        base = v * N_STATS
        diff = h - t
        row[base + COUNT] += w
        row[base + SUM_D] += w * d
        row[base + SUM_H] += w * h
        row[base + SUM_T] += w * t
        row[base + SUM_H2] += w * (h * h)
        row[base + SUM_T2] += w * (t * t)
        row[base + SUM_SQ] += w * (diff * diff)
        row[base + SUM_ABS] += w * abs(diff)
        row[base + SUM_HT] += w * (h * t)
        m = 0.5 * (h + t)
        if m != 0.0:
            row[base + SUM_PR] += w * (diff * diff / (m * m))
    # cross terms of every pair of variables
    k = n_values * N_STATS
    for a in range(n_values):
        for b in range(a + 1, n_values):
            da = values[head, a] - values[tail, a]
            db = values[head, b] - values[tail, b]
            if not (np.isnan(da) or np.isnan(db)):
                row[k] += w
                row[k + 1] += w * (da * db)
            k += 2


LOOKUP_SIDE = 16  # cube-map cells per face side for the direction lookup


@jit(inline="always")
def _direction_cell(dx, dy, dz):
    """The cube-map cell of a nonzero direction: face 2 a + (negative) by the dominant axis a, then
    the two other components (in axis order) over the dominant one, each cut in LOOKUP_SIDE parts."""
    ax = abs(dx)
    ay = abs(dy)
    az = abs(dz)
    if ax >= ay and ax >= az:
        face = 0 if dx >= 0.0 else 1
        m, p, r = ax, dy, dz
    elif ay >= az:
        face = 2 if dy >= 0.0 else 3
        m, p, r = ay, dx, dz
    else:
        face = 4 if dz >= 0.0 else 5
        m, p, r = az, dx, dy
    half = 0.5 * LOOKUP_SIDE
    ip = int((p / m + 1.0) * half)
    ir = int((r / m + 1.0) * half)
    ip = min(max(ip, 0), LOOKUP_SIDE - 1)
    ir = min(max(ir, 0), LOOKUP_SIDE - 1)
    return (face * LOOKUP_SIDE + ip) * LOOKUP_SIDE + ir


def direction_lookup(u, cos_tolerance) -> np.ndarray:
    """For each cube-map cell, the directional sets whose double cone (angle tolerance about u and
    -u) can reach into it, conservatively: a set is listed when the angle from the cell's centre to
    u or -u is within its tolerance plus the cell's radius (its farthest corner) plus 1e-6 radians.
    One int64 array: offsets of the cells' lists (cells + 1), then the lists, offsets counting from
    the array's start."""
    u = np.asarray(u, dtype=np.float64).reshape(-1, 3)
    side = LOOKUP_SIDE
    edges = np.linspace(-1.0, 1.0, side + 1)
    mids = 0.5 * (edges[1:] + edges[:-1])
    centres, radii = [], []
    for face in range(6):
        axis, negative = divmod(face, 2)
        others = [a for a in range(3) if a != axis]

        def direction(p, r):
            v = np.zeros(np.broadcast(p, r).shape + (3,))
            v[..., axis] = -1.0 if negative else 1.0
            v[..., others[0]] = p
            v[..., others[1]] = r
            return v / np.linalg.norm(v, axis=-1, keepdims=True)

        pp, rr = np.meshgrid(mids, mids, indexing="ij")
        centre = direction(pp, rr)
        radius = np.zeros((side, side))
        for cp in (edges[:-1], edges[1:]):
            for cr in (edges[:-1], edges[1:]):
                corner = direction(*np.meshgrid(cp, cr, indexing="ij"))
                cos = np.clip((corner * centre).sum(axis=-1), -1.0, 1.0)
                radius = np.maximum(radius, np.arccos(cos))
        centres.append(centre.reshape(-1, 3))
        radii.append(radius.ravel())
    centres = np.concatenate(centres)
    radii = np.concatenate(radii)
    tolerance = np.arccos(np.clip(np.asarray(cos_tolerance, dtype=np.float64), -1.0, 1.0))
    angle = np.arccos(np.clip(np.abs(centres @ u.T), 0.0, 1.0))  # to the nearer of u and -u
    listed = angle <= tolerance[None, :] + radii[:, None] + 1e-6
    counts = listed.sum(axis=1)
    n_cells = len(centres)
    offsets = n_cells + 1 + np.r_[0, np.cumsum(counts)]
    return np.concatenate([offsets, np.nonzero(listed)[1]]).astype(np.int64)


@jit(inline="always")
def _pair(acc, i, j, dx, dy, dz, d2, hole, depth, values, weights, layout, params, directions, dir_params,
          dir_lookup, scratch):
    """Add one unordered pair of points within the search distance (separation dx, dy, dz from i to
    j) to every bin of every set it falls in."""
    mode = layout[L_FILTER]
    same_hole = False
    if mode != 0 or layout[L_DH_N] >= 0:  # read the holes only when a filter or set needs them
        same_hole = hole[i] == hole[j]
        if (mode == 1 and same_hole) or (mode == 2 and not same_hole):
            return 0
    w = 1.0
    if layout[L_WEIGHTED]:  # hole weights (the bootstrap): copies of one hole do not pair with each other
        w = weights[i] if hole[i] == hole[j] else weights[i] * weights[j]
        if w == 0.0:
            return 0
    d = math.sqrt(d2)
    if d > params[F_REACH]:
        return 0
    # canonical orientation: the head is the lower point (then the more southern, then western);
    # bitwise operators and selects rather than branches, which would be mispredicted half the time
    flip = (dz > 0.0) | ((dz == 0.0) & ((dy > 0.0) | ((dy == 0.0) & (dx > 0.0))))
    head = i if flip else j
    tail = j if flip else i
    sign = -1.0 if flip else 1.0
    dx *= sign
    dy *= sign
    dz *= sign
    n_values = layout[L_N_VALUES]
    # omnidirectional
    _add_binned(acc, layout[L_OMNI_SLOT], d, params[F_OMNI_LAG], params[F_OMNI_INV], params[F_OMNI_TOL],
                layout[L_OMNI_N], values, head, tail, d, n_values, w, scratch)
    # directional: angle tolerance about u, then bandwidths across (horizontal) and along (vertical)
    # the direction's vertical plane
    # only the sets listed for the cube-map cell of the separation's direction can take it
    # (direction_lookup); the tests below decide, exactly as if every set were tried
    width = layout[L_DIR_N] + 1
    first = 0
    last = 0
    if layout[L_DIR_COUNT] > 0 and d > 0.0:
        cell = _direction_cell(dx, dy, dz)
        first = dir_lookup[cell]
        last = dir_lookup[cell + 1]
    for q in range(first, last):
        s = dir_lookup[q]
        ux = directions[s, 0]
        uy = directions[s, 1]
        uz = directions[s, 2]
        c = dx * ux + dy * uy + dz * uz
        if abs(c) < d * dir_params[s, 0]:
            continue
        across = abs(dx * directions[s, 3] + dy * directions[s, 4] + dz * directions[s, 5])
        if across > dir_params[s, 1]:
            continue
        along = abs(dx * directions[s, 6] + dy * directions[s, 7] + dz * directions[s, 8])
        if along > dir_params[s, 2]:
            continue
        # the separation points along u: the canonical head is the head
        dir_head = head if c >= 0.0 else tail
        dir_tail = tail if c >= 0.0 else head
        _add_binned(acc, layout[L_DIR_SLOT] + s * width, d, params[F_DIR_LAG], params[F_DIR_INV],
                    params[F_DIR_TOL], layout[L_DIR_N], values, dir_head, dir_tail, d, n_values, w, scratch)
    # down the hole: the deeper sample is the head
    if layout[L_DH_N] >= 0 and same_hole:
        sep = depth[j] - depth[i]
        dh_head = j
        dh_tail = i
        if sep < 0.0:
            dh_head = i
            dh_tail = j
            sep = -sep
        _add_binned(acc, layout[L_DH_SLOT], sep, params[F_DH_LAG], params[F_DH_INV], params[F_DH_TOL],
                    layout[L_DH_N], values, dh_head, dh_tail, sep, n_values, w, scratch)
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
            _add(acc, layout[L_VOL_SLOT] + cell, values, vol_head, vol_tail, d, n_values, w)
    return 1


@jit_parallel
def pair_pass(n_threads, tasks, cell_start, x, y, z, hole, depth, values, weights, layout, params, directions,
              dir_params, dir_lookup, n_slots, n_columns):
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
                        inside += _pair(local, i, j, dx, dy, dz, d2, hole, depth, values, weights, layout, params,
                                        directions, dir_params, dir_lookup, scratch)
        candidates[t] = cand
        accepted[t] = inside
    total = np.zeros((n_slots, n_columns))
    for t in range(n_threads):
        total += acc[t]
    return total, candidates.sum(), accepted.sum()


@jit_parallel
def brute_force_pass(n_threads, x, y, z, hole, depth, values, weights, layout, params, directions, dir_params,
                     dir_lookup, n_slots, n_columns):
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
                    inside += _pair(local, i, j, dx, dy, dz, d2, hole, depth, values, weights, layout, params,
                                    directions, dir_params, dir_lookup, scratch)
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
def pair_list_pass(tasks, cell_start, x, y, z, hole, depth, values, weights, layout, params, directions, dir_params,
                   dir_lookup, n_slots, n_columns, target, keep_below, max_out):
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
                _pair(acc, i, j, dx, dy, dz, d2, hole, depth, values, weights, layout, params, directions, dir_params,
                      dir_lookup, scratch)
                if acc[target, COUNT] != before and kept < max_out and _mix(min(i, j), max(i, j)) < keep_below:
                    out_i[kept] = i
                    out_j[kept] = j
                    out_h[kept] = acc[target, SUM_H] - sum_h
                    out_t[kept] = acc[target, SUM_T] - sum_t
                    out_d[kept] = acc[target, SUM_D] - sum_d
                    kept += 1
    return out_i, out_j, out_h, out_t, out_d, kept


@jit(inline="always")
def _bin_slots(sep, first_slot, lag, inv_lag, tol, n, slots, count):
    """Append to ``slots`` the slots of the bins of a line set that ``sep`` falls in."""
    if n < 0 or lag <= 0.0:
        return count
    if tol + tol <= lag:
        k = _bin_one(sep, lag, inv_lag, tol, n)
        if k >= 0 and count < slots.shape[0]:
            slots[count] = first_slot + k
            count += 1
        return count
    k = int(math.ceil((sep - tol) * inv_lag)) - 1
    if k < 0:
        k = 0
    while k <= n and k * lag - tol < sep and count < slots.shape[0]:
        if sep <= k * lag + tol:
            slots[count] = first_slot + k
            count += 1
        k += 1
    return count


@jit_parallel
def replicate_pass(n_threads, tasks, cell_start, x, y, z, hole, group, depth, values, replicate_weights, layout,
                   params, directions, dir_params, dir_lookup, n_slots):
    """Pair counts and sums of squared differences for R bootstrap replicates at once.

    ``replicate_weights`` (n, R): each point's weight in each replicate, the same within a resampled
    group (a hole, or a block of holes: ``group``). A pair from two groups adds w_i w_j, a pair
    within a group w_i (copies of a group do not pair with each other). Only the directional,
    down-hole and volume sets of the layout are filled (the same bins as ``pair_pass``, by the same
    tests); both statistics are
    symmetric in head and tail, so no orientation is needed. Returns (n_slots, 2, R): weighted
    counts, then weighted sums of squared differences.
    """
    n_rep = replicate_weights.shape[1]
    acc = np.zeros((n_threads, n_slots, 2, n_rep))
    n_tasks = tasks.shape[0]
    max2 = params[F_MAX2]
    reach = params[F_REACH]
    width = layout[L_DIR_N] + 1
    mode = layout[L_FILTER]
    for t in numba.prange(n_threads):
        slots = np.empty(64, dtype=np.int64)
        local = acc[t]
        for kk in range(t, n_tasks, n_threads):
            a = tasks[kk, 0]
            b = tasks[kk, 1]
            for i in range(cell_start[a], cell_start[a + 1]):
                j0 = i + 1 if a == b else cell_start[b]
                for j in range(j0, cell_start[b + 1]):
                    dx = x[j] - x[i]
                    dy = y[j] - y[i]
                    dz = z[j] - z[i]
                    d2 = dx * dx + dy * dy + dz * dz
                    if d2 > max2:
                        continue
                    d = math.sqrt(d2)
                    diff = values[i] - values[j]
                    if d > reach or np.isnan(diff):
                        continue
                    same = hole[i] == hole[j]
                    if (mode == 1 and same) or (mode == 2 and not same):
                        continue
                    flip = (dz > 0.0) | ((dz == 0.0) & ((dy > 0.0) | ((dy == 0.0) & (dx > 0.0))))
                    if flip:
                        dx = -dx
                        dy = -dy
                        dz = -dz
                    count = 0
                    if layout[L_DIR_COUNT] > 0 and d > 0.0:
                        cell = _direction_cell(dx, dy, dz)
                        for q in range(dir_lookup[cell], dir_lookup[cell + 1]):
                            s = dir_lookup[q]
                            c = dx * directions[s, 0] + dy * directions[s, 1] + dz * directions[s, 2]
                            if abs(c) < d * dir_params[s, 0]:
                                continue
                            if abs(dx * directions[s, 3] + dy * directions[s, 4] + dz * directions[s, 5]) > \
                                    dir_params[s, 1]:
                                continue
                            if abs(dx * directions[s, 6] + dy * directions[s, 7] + dz * directions[s, 8]) > \
                                    dir_params[s, 2]:
                                continue
                            count = _bin_slots(d, layout[L_DIR_SLOT] + s * width, params[F_DIR_LAG],
                                               params[F_DIR_INV], params[F_DIR_TOL], layout[L_DIR_N], slots, count)
                    if layout[L_DH_N] >= 0 and same:
                        count = _bin_slots(abs(depth[j] - depth[i]), layout[L_DH_SLOT], params[F_DH_LAG],
                                           params[F_DH_INV], params[F_DH_TOL], layout[L_DH_N], slots, count)
                    nx = layout[L_VOL_NX]
                    if nx >= 0:
                        ny = layout[L_VOL_NY]
                        nz = layout[L_VOL_NZ]
                        ix = int(math.floor(dx / params[F_VOL_CX] + 0.5))
                        iy = int(math.floor(dy / params[F_VOL_CY] + 0.5))
                        iz = int(math.floor(dz / params[F_VOL_CZ] + 0.5))
                        if iz > 0 or (iz == 0 and (iy > 0 or (iy == 0 and ix > 0))):
                            ix = -ix
                            iy = -iy
                            iz = -iz
                        if abs(ix) <= nx and abs(iy) <= ny and -iz <= nz and count < slots.shape[0]:
                            slots[count] = layout[L_VOL_SLOT] + ((-iz) * (2 * ny + 1) + (iy + ny)) * (2 * nx + 1) \
                                + (ix + nx)
                            count += 1
                    if count == 0:
                        continue
                    sq = diff * diff
                    wi = replicate_weights[i]
                    wj = replicate_weights[j]
                    one_group = group[i] == group[j]
                    for q in range(count):
                        row_n = local[slots[q], 0]
                        row_sq = local[slots[q], 1]
                        if one_group:
                            for r in range(n_rep):
                                row_n[r] += wi[r]
                                row_sq[r] += wi[r] * sq
                        else:
                            for r in range(n_rep):
                                w = wi[r] * wj[r]
                                row_n[r] += w
                                row_sq[r] += w * sq
    total = np.zeros((n_slots, 2, n_rep))
    for t in range(n_threads):
        total += acc[t]
    return total
