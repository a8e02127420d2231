"""The variogram volume in the frame of the holes (docs/methods.md, "Fitting").

Drilling gives pairs at two scales: along the holes, every composite length; across them, from the
hole spacing up. A grid of lag vectors with cubic cells one lag wide sees one scale only: a range
shorter than the hole spacing along the holes (a flat blanket drilled vertically) falls inside its
first cell. Here the lag vectors are binned in a grid whose third axis is the mean direction of the
holes: cells one composite long along the holes and one lag wide across them, so that each scale is
seen where the drilling supports it; the fit compares the model with every cell at its pairs' mean
lag vector. Far along the holes the cells are merged by octaves, so that the fit sees a few thousand
lag vectors.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from .pairs import PairIndex
from .variogram import Sets, VolumeGrid

ALONG_CELLS = 60  # cells along the holes each side of zero, at most
ACROSS_CELLS = 14  # cells across the holes each side of zero, at most (wider cells at long reaches)
FINE_CELLS = 4  # cells along the holes each side of zero kept one by one; beyond, merged by octaves

def hole_vectors(xyz, hole) -> np.ndarray:
    """Unit vectors (holes, 3), each from a hole's shallowest composite to its deepest (holes of one
    composite left out)."""
    xyz = np.asarray(xyz, dtype=np.float64)
    order = np.lexsort((-xyz[:, 2], hole))
    h = np.asarray(hole)[order]
    first = np.r_[True, h[1:] != h[:-1]]
    last = np.r_[h[1:] != h[:-1], True]
    v = xyz[order][last] - xyz[order][first]
    length = np.linalg.norm(v, axis=1)
    return v[length > 0] / length[length > 0, None]


def hole_frame(xyz, hole) -> tuple[np.ndarray, float]:
    """Rows e1, e2, e3 of a right-handed frame whose third axis is the mean direction of the holes
    (their axial mean, from each hole's first to last composite, downward), and the share of the
    holes' directions along it (1: parallel holes)."""
    v = hole_vectors(xyz, hole)
    if len(v) == 0:
        e3, share = np.array([0.0, 0.0, -1.0]), 0.0
    else:
        values, vectors = np.linalg.eigh(v.T @ v)
        e3, share = vectors[:, -1], float(values[-1] / len(v))
        if e3[2] > 0:
            e3 = -e3
    helper = np.array([0.0, 0.0, 1.0]) if abs(e3[2]) < 0.9 else np.array([1.0, 0.0, 0.0])
    e1 = np.cross(helper, e3)
    e1 /= np.linalg.norm(e1)
    return np.stack([e1, np.cross(e3, e1), e3]), share


@dataclass
class LagVectors:
    """Experimental variogram values at lag vectors (m, 3) in east, north, up, with their pairs."""

    h: np.ndarray
    gamma: np.ndarray
    pairs: np.ndarray

    def supported(self, min_pairs: int) -> "LagVectors":
        ok = (self.pairs >= min_pairs) & np.isfinite(self.gamma)
        return LagVectors(self.h[ok], self.gamma[ok], self.pairs[ok])

    def __len__(self):
        return len(self.gamma)


class FrameVolume:
    """The lag-vector grid in the frame of the holes: its pair index (points turned into the frame,
    where the grid's axes are the coordinate axes) and the lag vector of each stored cell."""

    def __init__(self, xyz, hole, depth, frame, across_m: float, along_m: float, reach_m: float, threads=None):
        self.frame = np.asarray(frame, dtype=np.float64)
        across_m = max(across_m, reach_m / ACROSS_CELLS)
        n_across = max(1, int(math.ceil(reach_m / across_m)))
        n_along = max(1, min(ALONG_CELLS, int(math.ceil(reach_m / along_m))))
        self.grid = VolumeGrid((across_m, across_m, along_m), (n_across, n_across, n_along))
        self.reach_m = float(reach_m)
        self.sets = Sets(volume=self.grid, max_distance_m=reach_m)
        self.plan = self.sets.plan()
        self.index = PairIndex(np.asarray(xyz) @ self.frame.T, hole, depth, max_distance_m=self.plan.max_distance_m)
        self.threads = threads
        nx, ny, nz = self.grid.half_counts
        cx, cy, cz = self.grid.cell_m
        iz, iy, ix = np.meshgrid(-np.arange(nz + 1), np.arange(-ny, ny + 1), np.arange(-nx, nx + 1), indexing="ij")
        local = np.c_[ix.ravel() * cx, iy.ravel() * cy, iz.ravel() * cz]
        lower = ((iz < 0) | ((iz == 0) & ((iy < 0) | ((iy == 0) & (ix < 0))))).ravel()
        self.cells = np.flatnonzero(lower & (np.linalg.norm(local, axis=1) <= reach_m))
        self.h = local[self.cells] @ self.frame  # back to east, north, up
        # along the holes, cells near zero one by one and further ones merged by octaves (across them
        # the cells stay one lag wide, for the bearing): the fits see a few thousand lag vectors
        keys = np.c_[ix.ravel()[self.cells], iy.ravel()[self.cells], _octave(iz.ravel()[self.cells])]
        _, self.merged = np.unique(keys, axis=0, return_inverse=True)
        self.merged = self.merged.ravel()
        self.n_merged = int(self.merged.max()) + 1 if len(self.merged) else 0

    def lag_vectors(self, pairs, squares) -> LagVectors:
        """The merged cells' lag vectors (pair-weighted means of their cells'), semivariograms and pairs
        from per-cell pair counts and sums of squared differences."""
        n = np.bincount(self.merged, weights=pairs, minlength=self.n_merged)
        sq = np.bincount(self.merged, weights=squares, minlength=self.n_merged)
        h = np.stack([np.bincount(self.merged, weights=pairs * self.h[:, a], minlength=self.n_merged)
                      for a in range(3)], axis=1)
        with np.errstate(invalid="ignore", divide="ignore"):
            return LagVectors(h / n[:, None], np.where(n > 0, sq / (2 * n), np.nan), n)

    def data(self, values) -> LagVectors:
        """One pass: every merged cell's semivariogram and pairs."""
        from .pairs import _kernels as k

        sums, _, _ = self.index.run(values, self.plan, threads=self.threads)
        first = self.plan.layout[k.L_VOL_SLOT]
        s = sums[first + self.cells]
        return self.lag_vectors(s[:, k.COUNT], s[:, k.SUM_SQ])

    def replicates(self, values, weights, group=None) -> tuple[np.ndarray, np.ndarray]:
        """One pass for many weightings of the points (bootstrap replicates, cross-validation folds):
        (pairs, sums of squared differences), each (cells, R)."""
        from .pairs import _kernels as k

        sums = self.index.run_replicates(values, self.plan, weights, threads=self.threads, group=group)
        first = self.plan.layout[k.L_VOL_SLOT]
        return sums[first + self.cells, 0, :], sums[first + self.cells, 1, :]


def _octave(i) -> np.ndarray:
    """Cell numbers along one axis merged by octaves beyond FINE_CELLS: 5-8, 9-16, 17-32... each one group
    (signed, so that the two sides stay apart)."""
    a = np.abs(np.asarray(i, dtype=np.int64))
    group = np.where(a <= FINE_CELLS, a,
                     FINE_CELLS + np.ceil(np.log2(np.maximum(a, 1) / FINE_CELLS)).astype(np.int64))
    return np.sign(i) * group


def start_orientations(search_axes, frame) -> list[np.ndarray]:
    """Where the orientation fit starts: the direction search's axes; the minor axis along the holes
    with the major at four bearings across them; the major along the holes with the semi-major at
    two (so that holes drilled across, or along, the continuity are both tried)."""
    from .fit import orientation_axes

    e1, e2, e3 = frame
    out = [np.asarray(search_axes, dtype=np.float64)]
    for a in np.radians([0.0, 45.0, 90.0, 135.0]):
        major = math.cos(a) * e1 + math.sin(a) * e2
        out.append(orientation_axes(major, np.cross(e3, major)))
    for a in np.radians([0.0, 90.0]):
        out.append(orientation_axes(e3, math.cos(a) * e1 + math.sin(a) * e2))
    return out
