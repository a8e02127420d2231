"""The pair engine's search structure: points sorted by the cells of a uniform grid.

Cells are a fraction of the search distance wide (half by default). Every unordered pair of cells
whose closest corners are within the search distance is one task, visited once; a cell with itself
is a task too (pairs i < j inside it). Tasks are sorted by work, largest first, and dealt to threads
in turn. The structure is built once per point set and reused for every variable, measure and set.
Memory is O(points + cells x neighbours + bins): pairs are never stored.

Example
-------
>>> import numpy as np
>>> xyz = np.c_[np.arange(10.0), np.zeros(10), np.zeros(10)]
>>> index = PairIndex(xyz, max_distance_m=3.0)
>>> index.point_count, index.task_count > 0
(10, True)
"""

from __future__ import annotations

import math

import numpy as np

from .._jit import threads as numba_threads
from ..errors import UsageError
from . import _kernels as kernels

MAX_CELLS_PER_SIDE = 2048


class PairIndex:
    """Points sorted by search cell.

    Parameters
    ----------
    xyz : (n, 3) array, metres
    hole : (n,) int array, optional
        Hole index of each point (same-hole and across-hole filters, down-hole pairs).
    depth : (n,) float array, optional
        Along-hole depth of each point (down-hole separations), metres.
    max_distance_m : float
        The search distance: no set may reach further.
    cell_fraction : float
        Cell width as a fraction of the search distance.
    """

    def __init__(self, xyz, hole=None, depth=None, *, max_distance_m: float, cell_fraction: float = 0.5):
        xyz = np.asarray(xyz, dtype=np.float64)
        if xyz.ndim != 2 or xyz.shape[1] != 3:
            raise UsageError("points must be an (n, 3) array of x, y, z")
        if not (max_distance_m > 0) or not math.isfinite(max_distance_m):
            raise UsageError(f"the search distance must be above zero (got {max_distance_m!r})")
        finite = np.isfinite(xyz).all(axis=1)
        if not finite.all():
            raise UsageError(f"{int((~finite).sum())} point(s) have no finite position; leave them out first")
        n = len(xyz)
        hole = np.zeros(n, dtype=np.int64) if hole is None else np.asarray(hole, dtype=np.int64)
        depth = np.zeros(n) if depth is None else np.asarray(depth, dtype=np.float64)
        self.max_distance_m = float(max_distance_m)
        extent = float(np.max(np.ptp(xyz, axis=0))) if n else 0.0
        # cells are only a search aid: never more than MAX_CELLS_PER_SIDE along an axis (a tiny search
        # distance over a wide domain would overflow the cell numbers); larger cells stay exact
        self.cell_m = max(self.max_distance_m * float(cell_fraction), extent / MAX_CELLS_PER_SIDE)
        lo = xyz.min(axis=0) if n else np.zeros(3)
        cells = np.floor((xyz - lo) / self.cell_m).astype(np.int64)
        shape = cells.max(axis=0) + 1 if n else np.ones(3, dtype=np.int64)
        linear = (cells[:, 2] * shape[1] + cells[:, 1]) * shape[0] + cells[:, 0]
        order = np.argsort(linear, kind="stable")
        self.order = order
        self.point_count = n
        self.x = np.ascontiguousarray(xyz[order, 0])
        self.y = np.ascontiguousarray(xyz[order, 1])
        self.z = np.ascontiguousarray(xyz[order, 2])
        self.hole = np.ascontiguousarray(hole[order])
        self.depth = np.ascontiguousarray(depth[order])
        ids, starts, counts = np.unique(linear[order], return_index=True, return_counts=True)
        self.cell_start = np.r_[starts, n].astype(np.int64)
        self.tasks = self._tasks(ids, counts, shape)
        self.task_count = len(self.tasks)

    def _tasks(self, ids, counts, shape):
        reach = int(math.ceil(self.max_distance_m / self.cell_m))
        cx = ids % shape[0]
        cy = (ids // shape[0]) % shape[1]
        cz = ids // (shape[0] * shape[1])
        pairs = []
        r = range(-reach, reach + 1)
        for oz in r:
            for oy in r:
                for ox in r:
                    if (oz, oy, ox) < (0, 0, 0):
                        continue  # each unordered pair of cells once
                    gap = [max(0, abs(o) - 1) * self.cell_m for o in (ox, oy, oz)]
                    if math.sqrt(sum(g * g for g in gap)) > self.max_distance_m:
                        continue
                    nx, ny, nz = cx + ox, cy + oy, cz + oz
                    inside = (nx >= 0) & (nx < shape[0]) & (ny >= 0) & (ny < shape[1]) & (nz >= 0) & (nz < shape[2])
                    target = (nz * shape[1] + ny) * shape[0] + nx
                    where = np.searchsorted(ids, target)
                    where = np.minimum(where, len(ids) - 1)
                    found = inside & (ids[where] == target)
                    a = np.flatnonzero(found)
                    pairs.append(np.c_[a, where[found]])
        tasks = np.concatenate(pairs) if pairs else np.zeros((0, 2), dtype=np.int64)
        na, nb = counts[tasks[:, 0]], counts[tasks[:, 1]]
        work = np.where(tasks[:, 0] == tasks[:, 1], na * (na - 1) // 2, na * nb)
        keep = work > 0
        tasks, work = tasks[keep], work[keep]
        return np.ascontiguousarray(tasks[np.argsort(-work, kind="stable")], dtype=np.int64)

    def sorted_values(self, values) -> np.ndarray:
        """Values (n, v) in the index's point order."""
        values = np.asarray(values, dtype=np.float64)
        if values.ndim == 1:
            values = values[:, None]
        if len(values) != self.point_count:
            raise UsageError(f"{len(values)} values for {self.point_count} points")
        return np.ascontiguousarray(values[self.order])

    def pair_list(self, values, plan, slot: int, expected_pairs: float, max_pairs: int = 5000):
        """The pairs of one bin: ``(i, j)`` in the caller's point numbering, head and tail values of
        the first variable and the separation. When the bin holds more than ``max_pairs`` (as
        ``expected_pairs`` says), a fixed hash of each pair chooses about ``max_pairs`` of them: the
        same pairs every time, for any thread count."""
        v = self.sorted_values(values)[:, :1]
        layout, params = kernels.kernel_arguments(plan, 1)
        share = 1.0 if expected_pairs <= max_pairs else max_pairs / expected_pairs
        keep_below = min(int(share * 2**32) + 1, 2**32)
        i, j, head, tail, d, kept = kernels.pair_list_pass(
            self.tasks, self.cell_start, self.x, self.y, self.z, self.hole, self.depth, v, np.zeros(0), layout,
            params, plan.directions, plan.dir_params, plan.dir_lookup, plan.n_slots, kernels.N_STATS, slot,
            keep_below, max_pairs)
        return self.order[i[:kept]], self.order[j[:kept]], head[:kept], tail[:kept], d[:kept]

    def sorted_weights(self, weights) -> np.ndarray:
        """Point weights (n,) in the index's point order; an empty array for an unweighted pass."""
        if weights is None:
            return np.zeros(0)
        weights = np.asarray(weights, dtype=np.float64).ravel()
        if len(weights) != self.point_count or not (np.isfinite(weights).all() and (weights >= 0).all()):
            raise UsageError(f"weights must be {self.point_count} finite numbers of at least zero")
        return np.ascontiguousarray(weights[self.order])

    def run(self, values, plan, threads: int | None = None, brute_force: bool = False, weights=None):
        """Accumulate the bins of ``plan`` (see engine.variogram.Plan) over every pair. With
        ``weights`` (one per point, the same within a hole: the hole-wise bootstrap) a pair of two
        holes counts w_i w_j and a pair within a hole w_i.

        Returns (accumulators (slots, columns), candidate pairs, pairs within the search distance).
        """
        if plan.max_distance_m > self.max_distance_m * (1 + 1e-12):
            raise UsageError(f"the sets reach {plan.max_distance_m:g} m, beyond the index's search distance "
                             f"{self.max_distance_m:g} m; build the index with a larger distance")
        v = self.sorted_values(values)
        w = self.sorted_weights(weights)
        layout, params = kernels.kernel_arguments(plan, v.shape[1], weighted=len(w) > 0)
        n_columns = kernels.N_STATS * v.shape[1] + v.shape[1] * (v.shape[1] - 1)
        with numba_threads(threads) as count:
            if brute_force:
                acc, accepted = kernels.brute_force_pass(
                    count, self.x, self.y, self.z, self.hole, self.depth, v, w, layout, params, plan.directions,
                    plan.dir_params, plan.dir_lookup, plan.n_slots, n_columns)
                n = self.point_count
                return acc, n * (n - 1) // 2, int(accepted)
            acc, candidates, accepted = kernels.pair_pass(
                count, self.tasks, self.cell_start, self.x, self.y, self.z, self.hole, self.depth, v, w, layout,
                params, plan.directions, plan.dir_params, plan.dir_lookup, plan.n_slots, n_columns)
        return acc, int(candidates), int(accepted)

    def run_replicates(self, values, plan, replicate_weights, threads: int | None = None, group=None) -> np.ndarray:
        """Weighted pair counts and sums of squared differences of one variable for many bootstrap
        replicates in one pass (``replicate_weights`` (n, R), one column per replicate, the same
        within each resampled ``group`` of points: by default the hole; the directional, down-hole
        and volume sets of ``plan``). Returns (slots, 2, R)."""
        v = np.ascontiguousarray(self.sorted_values(values)[:, 0])
        w = np.asarray(replicate_weights, dtype=np.float64)
        if w.ndim != 2 or len(w) != self.point_count or not (np.isfinite(w).all() and (w >= 0).all()):
            raise UsageError(f"replicate weights must be ({self.point_count}, R) finite numbers of at least zero")
        w = np.ascontiguousarray(w[self.order])
        g = self.hole if group is None else np.ascontiguousarray(np.asarray(group, dtype=np.int64)[self.order])
        layout, params = kernels.kernel_arguments(plan, 1, weighted=True)
        with numba_threads(threads) as count:
            return kernels.replicate_pass(count, self.tasks, self.cell_start, self.x, self.y, self.z, self.hole, g,
                                          self.depth, v, w, layout, params, plan.directions, plan.dir_params,
                                          plan.dir_lookup, plan.n_slots)
