"""A slow, obvious pair reference: a Python double loop over every pair with the rules of
engine.variogram written out plainly (bins, orientation, angle and bandwidth tests, the volume)."""

import math

import numpy as np

from engine.variogram import Direction

NAMES = ("count", "sum_d", "sum_h", "sum_t", "sum_h2", "sum_t2", "sum_sq", "sum_abs", "sum_ht", "sum_pr")


def bins_of(d, lag, tol, n):
    return [k for k in range(n + 1) if k * lag - tol < d <= k * lag + tol]


def add(table, key, h, t, d, w=1.0):
    if math.isnan(h) or math.isnan(t):
        return
    row = table.setdefault(key, dict.fromkeys(NAMES, 0.0))
    row["count"] += w
    row["sum_d"] += w * d
    row["sum_h"] += w * h
    row["sum_t"] += w * t
    row["sum_h2"] += w * h * h
    row["sum_t2"] += w * t * t
    row["sum_sq"] += w * (h - t) ** 2
    row["sum_abs"] += w * abs(h - t)
    row["sum_ht"] += w * h * t
    m = (h + t) / 2
    if m != 0:
        row["sum_pr"] += w * (h - t) ** 2 / m**2


def separation(a, b):
    """The one distance rule of the engine (docs/conventions.md): the square root of the sum of the
    squared coordinate differences, added in the order east, north, up. numpy's ``linalg.norm``
    may add them another way and differ in the last bit, which moves a pair on a bin edge."""
    h = b - a
    return h, math.sqrt(h[0] * h[0] + h[1] * h[1] + h[2] * h[2])


def pair_weight(weights, hole, i, j):
    """The hole-wise bootstrap's pair weight: w_i w_j across two holes, w_i within one hole."""
    if weights is None:
        return 1.0
    return float(weights[i]) if hole[i] == hole[j] else float(weights[i]) * float(weights[j])


def reference_sums(xyz, values, hole, depth, sets, weights=None):
    """{(set, index, bin): {stat: sum}} for one variable; volume keys are (set, (ix, iy, iz)) with
    every lag vector and its opposite both present (full volume). ``weights``: one per point (the
    same within a hole); a pair counts :func:`pair_weight`."""
    xyz = np.asarray(xyz, dtype=float)
    n = len(xyz)
    out = {}
    frames = [Direction.frame(d) for d in sets.directions]
    dir_bins = sets.directional_bins or sets.omni
    reach = sets.plan().max_distance_m
    for i in range(n):
        for j in range(i + 1, n):
            h, d = separation(xyz[i], xyz[j])
            w = pair_weight(weights, hole, i, j)
            if d > reach:
                continue
            same = hole[i] == hole[j]
            if (sets.pairs == "across-holes" and same) or (sets.pairs == "same-hole" and not same):
                continue
            # canonical: the head is the lower point, then the southern, then the western
            head, tail = j, i
            if (h[2], h[1], h[0]) > (0.0, 0.0, 0.0):
                head, tail, h = i, j, -h
            vh, vt = values[head], values[tail]
            if sets.omni:
                for b in bins_of(d, sets.omni.lag_m, sets.omni.tolerance, sets.omni.count):
                    add(out, ("omni", 0, b), vh, vt, d, w)
            for s, (direction, f) in enumerate(zip(sets.directions, frames)):
                u, across, along = f[:3], f[3:6], f[6:]
                c = h[0] * u[0] + h[1] * u[1] + h[2] * u[2]
                if d == 0 or abs(c) < d * math.cos(math.radians(direction.angle_tolerance_deg)):
                    continue
                a_ = abs(h[0] * across[0] + h[1] * across[1] + h[2] * across[2])
                v_ = abs(h[0] * along[0] + h[1] * along[1] + h[2] * along[2])
                if a_ > direction.bandwidth_m or v_ > direction.vertical_bandwidth_m:
                    continue
                for b in bins_of(d, dir_bins.lag_m, dir_bins.tolerance, dir_bins.count):
                    if c >= 0:
                        add(out, ("directional", s, b), vh, vt, d, w)
                    else:
                        add(out, ("directional", s, b), vt, vh, d, w)
            if sets.downhole and same:
                sep = depth[j] - depth[i]
                a, b_ = (j, i) if sep >= 0 else (i, j)
                for b in bins_of(abs(sep), sets.downhole.lag_m, sets.downhole.tolerance, sets.downhole.count):
                    add(out, ("downhole", 0, b), values[a], values[b_], abs(sep), w)
            if sets.volume:
                cell = [int(math.floor(h[q] / sets.volume.cell_m[q] + 0.5)) for q in range(3)]
                if all(abs(cell[q]) <= sets.volume.half_counts[q] for q in range(3)):
                    add(out, ("volume", tuple(cell)), vh, vt, d, w)
                    if any(cell):  # the zero cell holds each pair once
                        add(out, ("volume", tuple(-c for c in cell)), vt, vh, d, w)
    return out
