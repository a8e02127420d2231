"""Desurvey benchmark: 10,000 holes x 50 stations, positions at 1 million depths.

Prints the engine's wall times and the ratio to a plain per-hole Python loop (the slow reference of
tests/reference, plus a bisect-and-arc loop for the positions) run in the same process on the same
data. Compilation is excluded: the kernels are warmed up on a tiny program first (and cached on disk
by numba after the first run). Usage: ``python benchmarks/bench_desurvey.py [--holes N] [--threads N]``.
"""

from __future__ import annotations

import argparse
import bisect
import math
import sys
import time
from pathlib import Path

import numpy as np
import pandas as pd

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

from engine._jit import threads  # noqa: E402
from engine.desurvey import Desurvey  # noqa: E402
from tests.reference.desurvey_reference import desurvey_hole, station_direction  # noqa: E402


def make_program(n_holes: int, n_stations: int, n_queries: int, rng):
    hole_ids = np.array([f"B{h:05d}" for h in range(n_holes)], dtype=object)
    depth = 500.0
    collars = pd.DataFrame({"hole": hole_ids, "x": rng.uniform(0, 5000, n_holes),
                            "y": rng.uniform(0, 5000, n_holes), "z": rng.uniform(300, 400, n_holes),
                            "depth": depth})
    at = np.tile(np.linspace(0.0, depth, n_stations), n_holes)
    az = (np.repeat(rng.uniform(0, 360, n_holes), n_stations) + rng.normal(0, 1.0, at.size).cumsum() * 0.1) % 360
    dip = np.clip(np.repeat(rng.uniform(-85, -50, n_holes), n_stations) + rng.normal(0, 0.5, at.size), -89.9, -1)
    surveys = pd.DataFrame({"hole": np.repeat(hole_ids, n_stations), "survey_depth": at, "azimuth": az, "dip": dip})
    q_hole = rng.integers(0, n_holes, n_queries)
    q_depth = rng.uniform(0, depth, n_queries)
    return collars, surveys, q_hole, q_depth


def python_loop(collars, surveys, q_hole, q_depth):
    """Per-hole Python: stations by the slow reference, positions by bisect and the arc formula."""
    stations = {}
    for hole, part in surveys.groupby("hole", sort=False):
        stations[hole] = list(zip(part["survey_depth"], part["azimuth"], part["dip"]))
    positions_by_hole = {}
    for row in collars.itertuples(index=False):
        st = sorted(stations[row.hole])
        positions_by_hole[row.hole] = (st, desurvey_hole((row.x, row.y, row.z), st))
    hole_ids = collars["hole"].to_numpy()
    out = np.empty((len(q_hole), 3))
    for q, (h, d) in enumerate(zip(q_hole, q_depth)):
        st, pos = positions_by_hole[hole_ids[h]]
        depths = [s[0] for s in st]
        k = min(max(bisect.bisect_right(depths, d) - 1, 0), len(st) - 2)
        t1 = station_direction(st[k][1], st[k][2])
        t2 = station_direction(st[k + 1][1], st[k + 1][2])
        length = depths[k + 1] - depths[k]
        s = d - depths[k]
        dot = max(-1.0, min(1.0, sum(a * b for a, b in zip(t1, t2))))
        b = math.acos(dot)
        if b < 1e-9:
            step = [s * a for a in t1]
        else:
            f = s / length
            u = [(math.sin((1 - f) * b) * a + math.sin(f * b) * c) / math.sin(b) for a, c in zip(t1, t2)]
            rf = math.tan(f * b / 2) / (f * b / 2) if f > 0 else 1.0
            step = [s / 2 * rf * (a + c) for a, c in zip(t1, u)]
        out[q] = [p + e for p, e in zip(pos[k], step)]
    return out


def main():
    parser = argparse.ArgumentParser(description=__doc__)
    parser.add_argument("--holes", type=int, default=10_000)
    parser.add_argument("--stations", type=int, default=50)
    parser.add_argument("--queries", type=int, default=1_000_000)
    parser.add_argument("--threads", type=int, default=None)
    parser.add_argument("--repeats", type=int, default=5)
    args = parser.parse_args()
    rng = np.random.default_rng(0)
    collars, surveys, q_hole, q_depth = make_program(args.holes, args.stations, args.queries, rng)

    warm = make_program(3, 4, 10, np.random.default_rng(1))
    Desurvey().fit(warm[0], warm[1]).positions(warm[2], warm[3])

    with threads(args.threads) as count:
        fit_times, pos_times, total_times = [], [], []
        for _ in range(args.repeats):
            t0 = time.perf_counter()
            trace = Desurvey().fit(collars, surveys)
            t1 = time.perf_counter()
            xyz = trace.positions(q_hole, q_depth)
            t2 = time.perf_counter()
            fit_times.append(t1 - t0)
            pos_times.append(t2 - t1)
            total_times.append(t2 - t0)
    t0 = time.perf_counter()
    reference = python_loop(collars, surveys, q_hole, q_depth)
    loop_time = time.perf_counter() - t0
    worst = float(np.abs(reference - xyz).max())

    med = lambda v: float(np.median(v))
    print(f"desurvey benchmark: {args.holes} holes x {args.stations} stations "
          f"({len(surveys):,} stations), positions at {args.queries:,} depths, {count} thread(s)")
    print(f"  engine fit (sort + station positions): median {med(fit_times):.3f} s of {args.repeats}")
    print(f"  engine positions at depths:            median {med(pos_times):.3f} s")
    print(f"  engine total:                          median {med(total_times):.3f} s "
          f"(min {min(total_times):.3f} s)")
    print(f"  per-hole Python loop, same work:       {loop_time:.2f} s")
    print(f"  ratio loop / engine:                   {loop_time / med(total_times):.0f}x")
    print(f"  largest difference engine vs loop:     {worst:.2e} m")


if __name__ == "__main__":
    main()
