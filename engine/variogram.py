"""Experimental variograms: the sets (omnidirectional, directional, down-hole, volume), the measures
computed from the bin sums, and the tables written to ``variograms.csv``.

Bins (docs/conventions.md): lag bin k = 1..N holds the pairs with k lag - tol < d <= k lag + tol; bin 0
(0 <= d <= tol) holds pairs closer than the first bin, duplicates among them. With the default
tolerance lag / 2 the bins tile the distances and a pair on the edge between two bins belongs to the
lower one. A directional set takes the pairs whose separation is within the angle tolerance of its
direction (either sense), no further than the across bandwidth from the direction's vertical plane
and no further than the vertical bandwidth along it. Head and tail: in a directional set the head is
the end the separation points to along the direction; down the hole the deeper sample; elsewhere the
lower sample (then the southern, then the western).

Example
-------
>>> import numpy as np
>>> xyz = np.c_[np.arange(15.0) * 50.0, np.zeros(15), np.zeros(15)]
>>> grades = np.array([28, 25, 27, 25, 21, 25, 11, 16, 11, 17, 27, 26, 25, 26, 21.0])
>>> sets = Sets(omni=LagBins(50.0, 4))
>>> table = experimental_variograms(xyz, grades, sets)
>>> table[["lag", "pairs", "gamma"]].round(6).values.tolist()[:2]
[[50.0, 14.0, 16.392857], [100.0, 13.0, 22.153846]]
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np
import pandas as pd
from .errors import UsageError
from .orientation import vector_from_trend_plunge
from .pairs import PairIndex
from .pairs import _kernels as k

MEASURES = ("semivariogram", "standardized", "standardized-by-lag", "covariance", "correlogram",
            "pairwise-relative", "general-relative", "madogram")


@dataclass(frozen=True)
class LagBins:
    """N lags of ``lag_m`` metres with a tolerance (default half the lag)."""

    lag_m: float
    count: int
    tolerance_m: float | None = None

    @property
    def tolerance(self) -> float:
        return 0.5 * self.lag_m if self.tolerance_m is None else float(self.tolerance_m)

    @property
    def reach_m(self) -> float:
        return self.count * self.lag_m + self.tolerance

    def check(self, name):
        if not (self.lag_m > 0) or self.count < 1 or not (self.tolerance >= 0):
            raise UsageError(f"{name}: lag must be above zero, lags at least 1 and the tolerance not negative")
        if self.tolerance > 30 * self.lag_m:
            raise UsageError(f"{name}: a lag tolerance above 30 lags is not supported")


@dataclass(frozen=True)
class Direction:
    """A direction (trend, plunge, degrees) with its angle tolerance and bandwidths (m)."""

    trend_deg: float
    plunge_deg: float
    angle_tolerance_deg: float = 22.5
    bandwidth_m: float = math.inf
    vertical_bandwidth_m: float = math.inf

    def frame(self) -> np.ndarray:
        """u, then the horizontal unit vector across the direction's vertical plane, then the unit
        vector in that plane perpendicular to u: 9 numbers."""
        u = vector_from_trend_plunge(self.trend_deg, self.plunge_deg)
        across = np.cross(u, [0.0, 0.0, 1.0])
        if np.linalg.norm(across) < 1e-12:  # a vertical direction: take east as across
            across = np.array([1.0, 0.0, 0.0])
        across /= np.linalg.norm(across)
        along = np.cross(across, u)
        return np.concatenate([u, across, along])


def fan(dip_direction_deg: float, dip_deg: float, count: int, angle_tolerance_deg: float | None = None,
        bandwidth_m: float = math.inf, vertical_bandwidth_m: float = math.inf) -> list:
    """``count`` directions evenly spaced over 180 degrees in a plane given by its dip direction and
    dip (dip 0: a horizontal fan, starting at the strike, dip direction - 90). The default angle
    tolerance is half the spacing."""
    from .orientation import trend_plunge

    if count < 1:
        raise UsageError("a fan needs at least one direction")
    dd, dip = math.radians(dip_direction_deg), math.radians(dip_deg)
    strike = np.array([math.sin(dd - math.pi / 2), math.cos(dd - math.pi / 2), 0.0])
    down_dip = np.array([math.cos(dip) * math.sin(dd), math.cos(dip) * math.cos(dd), -math.sin(dip)])
    tolerance = 90.0 / count if angle_tolerance_deg is None else angle_tolerance_deg
    out = []
    for i in range(count):
        a = math.pi * i / count
        trend, plunge = trend_plunge(math.cos(a) * strike + math.sin(a) * down_dip)
        out.append(Direction(round(trend, 6), round(plunge, 6), tolerance, bandwidth_m, vertical_bandwidth_m))
    return out


@dataclass(frozen=True)
class VolumeGrid:
    """A grid of lag vectors: cells of ``cell_m`` (east, north, up) metres, ``half_counts`` cells
    each side of zero along each axis (41 x 41 x 21 cells is half counts 20, 20, 10)."""

    cell_m: tuple = (10.0, 10.0, 5.0)
    half_counts: tuple = (20, 20, 10)

    @property
    def reach_m(self) -> float:
        return float(np.linalg.norm([(n + 0.5) * c for n, c in zip(self.half_counts, self.cell_m)]))

    @property
    def stored_cells(self) -> int:
        nx, ny, nz = self.half_counts
        return (nz + 1) * (2 * ny + 1) * (2 * nx + 1)


@dataclass
class Sets:
    """Which sets one pass fills. ``pairs`` is "all", "across-holes" or "same-hole"."""

    omni: LagBins | None = None
    directions: list = field(default_factory=list)
    directional_bins: LagBins | None = None
    downhole: LagBins | None = None
    volume: VolumeGrid | None = None
    pairs: str = "all"
    max_distance_m: float | None = None  # a cap on the search: volume cells beyond it hold no pairs

    def plan(self) -> "Plan":
        return Plan(self)


class Plan:
    """The integer layout, float parameters, direction frames and direction lookup the kernels read."""

    def __init__(self, sets: Sets):
        if sets.pairs not in ("all", "across-holes", "same-hole"):
            raise UsageError(f"pairs {sets.pairs!r}: use all, across-holes or same-hole")
        self.sets = sets
        layout = np.zeros(k.L_WIDTH, dtype=np.int64)
        params = np.zeros(k.F_WIDTH)
        slot = 0
        reach = [0.0]
        layout[k.L_OMNI_N] = -1
        layout[k.L_DH_N] = -1
        layout[k.L_VOL_NX] = -1

        def place(bins, name, slot_at, count_at, lag_at, tol_at, copies=1):
            """Lay out ``copies`` sets of these lag bins from the current slot."""
            nonlocal slot
            bins.check(name)
            layout[slot_at], layout[count_at] = slot, bins.count
            params[lag_at], params[tol_at] = bins.lag_m, bins.tolerance
            slot += copies * (bins.count + 1)
            reach.append(bins.reach_m)

        if sets.omni is not None:
            place(sets.omni, "omnidirectional bins", k.L_OMNI_SLOT, k.L_OMNI_N, k.F_OMNI_LAG, k.F_OMNI_TOL)
        self.directions = np.zeros((max(1, len(sets.directions)), 9))
        self.dir_params = np.zeros((max(1, len(sets.directions)), 3))
        if sets.directions:
            bins = sets.directional_bins or sets.omni
            if bins is None:
                raise UsageError("directional sets need lag bins")
            layout[k.L_DIR_COUNT] = len(sets.directions)
            place(bins, "directional bins", k.L_DIR_SLOT, k.L_DIR_N, k.F_DIR_LAG, k.F_DIR_TOL, len(sets.directions))
            for s, d in enumerate(sets.directions):
                self.directions[s] = d.frame()
                self.dir_params[s] = [math.cos(math.radians(d.angle_tolerance_deg)), d.bandwidth_m,
                                      d.vertical_bandwidth_m]
            self.directional_bins = bins
        self.dir_lookup = k.direction_lookup(self.directions[:len(sets.directions), :3],
                                             self.dir_params[:len(sets.directions), 0])
        if sets.downhole is not None:
            place(sets.downhole, "down-hole bins", k.L_DH_SLOT, k.L_DH_N, k.F_DH_LAG, k.F_DH_TOL)
        if sets.volume is not None:
            v = sets.volume
            layout[k.L_VOL_SLOT] = slot
            layout[k.L_VOL_NX], layout[k.L_VOL_NY], layout[k.L_VOL_NZ] = v.half_counts
            params[k.F_VOL_CX], params[k.F_VOL_CY], params[k.F_VOL_CZ] = v.cell_m
            slot += v.stored_cells
            reach.append(v.reach_m)
        layout[k.L_FILTER] = {"all": 0, "across-holes": 1, "same-hole": 2}[sets.pairs]
        self.layout = layout
        self.params = params
        self.n_slots = max(slot, 1)
        self.max_distance_m = max(reach)
        if sets.max_distance_m is not None:
            line_reach = max(reach[:-1]) if sets.volume is not None else self.max_distance_m
            if sets.max_distance_m < line_reach:
                raise UsageError(f"the search cap {sets.max_distance_m:g} m is shorter than the lag bins' reach "
                                 f"{line_reach:g} m")
            self.max_distance_m = min(self.max_distance_m, float(sets.max_distance_m))


def require_variation(values, what: str, least: int = 2) -> None:
    """Refuse (TableError) values that cannot make a variogram: fewer than ``least`` finite values, or
    values that do not vary beyond round-off (a range below 1e-9 of their magnitude: compositing a
    constant leaves differences of about 1e-16, which would be fitted as a model)."""
    from .errors import TableError

    v = np.asarray(values, dtype=np.float64)
    v = v[np.isfinite(v)]
    if len(v) < least:
        raise TableError(f"{what}: {len(v)} value(s) present; a variogram needs at least {least}.")
    spread = float(v.max() - v.min())
    if not spread > 1e-9 * float(np.abs(v).max()):
        raise TableError(f"{what}: every value is {float(np.median(v)):.6g} (to round-off): the values do not vary, "
                         "so there is no variogram to compute. Check the column and the domain chosen.")


# --------------------------------------------------------------------------------------------
# transforms
# --------------------------------------------------------------------------------------------


def normal_scores(values, weights=None) -> np.ndarray:
    """Normal scores of the finite values (ties share their mean rank); NaN stays NaN. With
    ``weights`` (declustering), each value's cumulative probability is the weight below it plus half
    its own (ties sharing), over the total: the declustered distribution is made normal."""
    from scipy.special import ndtri  # imported here: scipy.special costs start-up time

    values = np.asarray(values, dtype=np.float64)
    out = np.full(values.shape, np.nan)
    finite = np.isfinite(values)
    n = int(finite.sum())
    if not n:
        return out
    if weights is None:
        out[finite] = ndtri((_average_ranks(values[finite]) - 0.5) / n)
        return out
    _, cdf, mass, inverse = weighted_distribution(values[finite], np.asarray(weights, dtype=np.float64)[finite])
    out[finite] = ndtri((cdf - 0.5 * mass)[inverse])
    return out


def weighted_distribution(values, weights):
    """The distinct values in increasing order, the cumulative probability at each and each one's
    probability (its weight, ties summed, over the total), and each value's place among them."""
    z, inverse = np.unique(np.asarray(values, dtype=np.float64), return_inverse=True)
    mass = np.bincount(inverse.ravel(), weights=np.asarray(weights, dtype=np.float64), minlength=len(z))
    mass = mass / mass.sum()
    return z, np.cumsum(mass), mass, inverse.ravel()


def _average_ranks(values: np.ndarray) -> np.ndarray:
    """Ranks 1..n, ties sharing the mean of their ranks."""
    order = np.argsort(values, kind="stable")
    sorted_values = values[order]
    new = np.r_[True, sorted_values[1:] != sorted_values[:-1]]
    group = np.cumsum(new) - 1
    starts = np.flatnonzero(new)
    ends = np.r_[starts[1:], len(values)]
    mean_rank = 0.5 * (starts + 1 + ends)
    ranks = np.empty(len(values))
    ranks[order] = mean_rank[group]
    return ranks


def indicator(values, threshold: float) -> np.ndarray:
    """1 where the value is at or below the threshold, 0 above it, NaN where missing."""
    values = np.asarray(values, dtype=np.float64)
    return np.where(np.isnan(values), np.nan, (values <= threshold).astype(np.float64))


# --------------------------------------------------------------------------------------------
# measures
# --------------------------------------------------------------------------------------------


def measure_from_sums(stats: np.ndarray, measure: str = "semivariogram", variance: float | None = None,
                      zero_pairs=None) -> np.ndarray:
    """A measure per bin from the 10 sums of one variable, ``stats`` (bins, 10). NaN where a bin has
    no pairs or the measure is undefined. ``standardized`` divides by ``variance``, the domain's (so
    that the sill is one, as the trade means it); ``standardized-by-lag`` by the variance of each lag's
    own pairs (heads and tails together). ``pairwise-relative`` averages over the pairs whose mean is
    not zero: ``zero_pairs`` (bins,) counts the others (pairs of two zeros) to leave out."""
    if measure not in MEASURES:
        raise UsageError(f"measure {measure!r}: use one of {', '.join(MEASURES)}")
    if measure == "standardized" and not (variance is not None and variance > 0):
        raise UsageError("measure 'standardized' divides by the domain's variance: give it (or use "
                         "'standardized-by-lag').")
    s = np.asarray(stats, dtype=np.float64)
    n = s[:, k.COUNT]
    with np.errstate(invalid="ignore", divide="ignore"):
        mh, mt = s[:, k.SUM_H] / n, s[:, k.SUM_T] / n
        gamma = s[:, k.SUM_SQ] / (2 * n)
        if measure == "semivariogram":
            out = gamma
        elif measure == "madogram":
            out = s[:, k.SUM_ABS] / (2 * n)
        elif measure == "pairwise-relative":
            used = n - (0.0 if zero_pairs is None else np.asarray(zero_pairs, dtype=np.float64))
            out = np.where(used > 0, s[:, k.SUM_PR] / (2 * used), np.nan)
        elif measure == "standardized":
            out = gamma / variance
        elif measure == "general-relative":
            out = gamma / (0.5 * (mh + mt)) ** 2
        else:
            cov = s[:, k.SUM_HT] / n - mh * mt
            if measure == "covariance":
                out = cov
            elif measure == "correlogram":
                vh = s[:, k.SUM_H2] / n - mh * mh
                vt = s[:, k.SUM_T2] / n - mt * mt
                out = cov / np.sqrt(vh * vt)
            else:  # standardized-by-lag: by the variance of the pairs' data (heads and tails together)
                m = (s[:, k.SUM_H] + s[:, k.SUM_T]) / (2 * n)
                var = (s[:, k.SUM_H2] + s[:, k.SUM_T2]) / (2 * n) - m * m
                out = gamma / var
    out = np.where(n > 0, out, np.nan)
    return out


@dataclass
class Accumulation:
    """The bin sums of one pass, with the plan that lays them out."""

    sums: np.ndarray  # (slots, columns)
    plan: Plan
    n_values: int
    candidates: int
    accepted: int
    variance: float | None = None  # the domain's, for the standardized measure
    zero_pairs: np.ndarray | None = None  # per slot, pairs of two zeros (left out of the pairwise relative)

    def stats(self, variable: int = 0) -> np.ndarray:
        return self.sums[:, variable * k.N_STATS:(variable + 1) * k.N_STATS]

    def cross(self, a: int, b: int) -> tuple[np.ndarray, np.ndarray]:
        """Count and sum of difference products of variables a < b, per slot."""
        index = 0
        for p in range(self.n_values):
            for q in range(p + 1, self.n_values):
                if (p, q) == (a, b):
                    base = self.n_values * k.N_STATS + 2 * index
                    return self.sums[:, base], self.sums[:, base + 1]
                index += 1
        raise UsageError(f"no cross terms for variables {a} and {b}")

    def volume(self, variable: int = 0, measure: str = "semivariogram"):
        """The full variogram volume (2nz+1, 2ny+1, 2nx+1) of a measure and its pair counts, indexed
        [iz + nz, iy + ny, ix + nx] for the lag vector (ix cx, iy cy, iz cz), mirrored by h = -h."""
        v = self.plan.sets.volume
        if v is None:
            raise UsageError("no volume in this pass")
        nx, ny, nz = v.half_counts
        start = self.plan.layout[k.L_VOL_SLOT]
        stats = self.stats(variable)[start:start + v.stored_cells].reshape(nz + 1, 2 * ny + 1, 2 * nx + 1, k.N_STATS)
        full = np.zeros((2 * nz + 1, 2 * ny + 1, 2 * nx + 1, k.N_STATS))
        # stored index 0..nz is iz = 0, -1, ..., -nz
        for j in range(nz + 1):
            full[nz - j] += stats[j]
        mirrored = full[::-1, ::-1, ::-1].copy()
        swap = mirrored.copy()  # -h holds the same pairs with head and tail exchanged
        swap[..., k.SUM_H], swap[..., k.SUM_T] = mirrored[..., k.SUM_T], mirrored[..., k.SUM_H]
        swap[..., k.SUM_H2], swap[..., k.SUM_T2] = mirrored[..., k.SUM_T2], mirrored[..., k.SUM_H2]
        upper = np.zeros(full.shape[:3], dtype=bool)  # cells not stored: iz > 0, or iz = 0 with (iy, ix) > 0
        upper[nz + 1:] = True
        plane = upper[nz]
        plane[ny + 1:, :] = True
        plane[ny, nx + 1:] = True
        full[upper] = swap[upper]
        zeros = None
        if self.zero_pairs is not None:
            stored = self.zero_pairs[start:start + v.stored_cells].reshape(nz + 1, 2 * ny + 1, 2 * nx + 1)
            zeros = np.zeros(full.shape[:3])
            for j in range(nz + 1):
                zeros[nz - j] += stored[j]
            zeros[upper] = zeros[::-1, ::-1, ::-1][upper]
            zeros = zeros.ravel()
        values = measure_from_sums(full.reshape(-1, k.N_STATS), measure, self.variance, zeros).reshape(full.shape[:3])
        return values, full[..., k.COUNT]


def bin_slot(plan: Plan, set_name: str, lag_index: int, direction: int = 0) -> int:
    """The accumulator slot of lag bin ``lag_index`` (1..N) of a line set ("omni", "directional",
    "downhole"); ``direction`` numbers the directional sets from 0."""
    sets = plan.sets
    if set_name == "omni" and sets.omni is not None and 0 <= lag_index <= sets.omni.count:
        return int(plan.layout[k.L_OMNI_SLOT] + lag_index)
    if set_name == "directional" and sets.directions and 0 <= direction < len(sets.directions) \
            and 0 <= lag_index <= plan.directional_bins.count:
        return int(plan.layout[k.L_DIR_SLOT] + direction * (plan.directional_bins.count + 1) + lag_index)
    if set_name == "downhole" and sets.downhole is not None and 0 <= lag_index <= sets.downhole.count:
        return int(plan.layout[k.L_DH_SLOT] + lag_index)
    raise UsageError(f"no bin {lag_index} of set {set_name!r} (direction {direction}) in these sets")


def bin_pairs(xyz, values, sets: Sets, set_name: str, lag_index: int, direction: int = 0, max_pairs: int = 5000,
              hole=None, depth=None, index: PairIndex | None = None) -> dict:
    """The pairs of one bin, for the scene and for h-scatterplots: arrays ``i, j`` (point numbers),
    ``head, tail`` (values) and ``distance``; at most about ``max_pairs``, chosen by a fixed hash."""
    plan = sets.plan()
    if index is None:
        index = PairIndex(xyz, hole, depth, max_distance_m=plan.max_distance_m)
    slot = bin_slot(plan, set_name, lag_index, direction)
    expected = accumulate(xyz, values, sets, hole=hole, depth=depth, index=index).sums[slot, k.COUNT]
    i, j, head, tail, d = index.pair_list(values, plan, slot, expected, max_pairs)
    return {"i": i, "j": j, "head": head, "tail": tail, "distance": d, "pairs_in_bin": int(expected)}


def accumulate(xyz, values, sets: Sets, hole=None, depth=None, index: PairIndex | None = None,
               threads: int | None = None, brute_force: bool = False, dask: str | None = None,
               weights=None) -> Accumulation:
    """One pass over every pair: fill the bins of ``sets`` for every column of ``values``. With
    ``dask`` (a scheduler address or ``local:N``) the pass runs on a Dask cluster. ``weights``: hole
    weights per point (see PairIndex.run)."""
    plan = sets.plan()
    if index is None:
        index = PairIndex(xyz, hole, depth, max_distance_m=plan.max_distance_m)
    values = np.asarray(values, dtype=np.float64)
    n_values = 1 if values.ndim == 1 else values.shape[1]
    if dask:
        from .distributed import run_on_dask

        sums, candidates, accepted = run_on_dask(index, values, plan, dask, weights=weights)
        return Accumulation(sums, plan, n_values, candidates, accepted)
    sums, candidates, accepted = index.run(values, plan, threads=threads, brute_force=brute_force, weights=weights)
    return Accumulation(sums, plan, n_values, candidates, accepted)


def variogram_table(acc: Accumulation, measure: str = "semivariogram", variable: int = 0) -> pd.DataFrame:
    """Rows ``set, direction, trend, plunge, lag, distance, pairs, gamma`` (the measure) plus the head
    and tail means, for every lag k >= 1 of every line set (omni, directional, down-hole)."""
    stats = acc.stats(variable)
    plan = acc.plan
    frames = []

    def rows(name, start, count, lag_m, direction="", trend=np.nan, plunge=np.nan):
        part = stats[start + 1:start + count + 1]
        zeros = None if acc.zero_pairs is None else acc.zero_pairs[start + 1:start + count + 1]
        n = part[:, k.COUNT]
        with np.errstate(invalid="ignore", divide="ignore"):
            frames.append(pd.DataFrame({
                "set": name, "direction": direction, "trend": trend, "plunge": plunge,
                "lag": np.arange(1, count + 1, dtype=np.float64) * lag_m,
                "distance": np.where(n > 0, part[:, k.SUM_D] / n, np.nan), "pairs": n,
                "gamma": measure_from_sums(part, measure, acc.variance, zeros),
                "mean_head": np.where(n > 0, part[:, k.SUM_H] / n, np.nan),
                "mean_tail": np.where(n > 0, part[:, k.SUM_T] / n, np.nan),
            }))

    sets = plan.sets
    if sets.omni is not None:
        rows("omni", plan.layout[k.L_OMNI_SLOT], sets.omni.count, sets.omni.lag_m)
    if sets.directions:
        bins = plan.directional_bins
        for s, d in enumerate(sets.directions):
            rows("directional", plan.layout[k.L_DIR_SLOT] + s * (bins.count + 1), bins.count, bins.lag_m,
                 f"{d.trend_deg:g}/{d.plunge_deg:g}", d.trend_deg, d.plunge_deg)
    if sets.downhole is not None:
        rows("downhole", plan.layout[k.L_DH_SLOT], sets.downhole.count, sets.downhole.lag_m)
    table = pd.concat(frames, ignore_index=True) if frames else pd.DataFrame(
        columns=["set", "direction", "trend", "plunge", "lag", "distance", "pairs", "gamma"])
    table.insert(len(table.columns), "measure", measure)
    return table


def experimental_variograms(xyz, values, sets: Sets, measure: str = "semivariogram", **options) -> pd.DataFrame:
    """Convenience: one pass and the table of one variable."""
    return variogram_table(accumulate(xyz, values, sets, **options), measure)
