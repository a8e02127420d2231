"""Pair-engine benchmark on 200,000 composites: vertical-ish holes on a 25 m grid, 2 m composites down
250 m.

(a) omnidirectional, 10 lags of 5 m (about 42 million pairs): the whole ``drillaxis variogram``
    command against a baseline written with scipy's cKDTree.query_pairs and numpy binning, each in its
    own process so that peak memory is its own; and the kernel time per candidate pair against a
    brute-force numba loop over every pair of a 20,000-composite subset (the compute limit per pair).
(b) a full search job: volume of 41 x 41 x 21 cells, three fans of 18 directions, down-hole, 150 m.

Prints wall times, pairs per second, peak memory and the ratios, all from this run.
Usage: ``python benchmarks/bench_pairs.py [--holes-per-side 40] [--skip-baseline]``.
"""

from __future__ import annotations

import argparse
import json
import os
import resource
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np
import pandas as pd

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))

BASELINE = r'''
import json, sys, time, resource
import numpy as np, pandas as pd
from scipy.spatial import cKDTree
f = pd.read_csv(sys.argv[1])
t0 = time.perf_counter()
xyz = f[["x", "y", "z"]].to_numpy(); v = f["value"].to_numpy()
lag, n, tol = 5.0, 10, 2.5
pairs = cKDTree(xyz).query_pairs(r=n * lag + tol, output_type="ndarray")
i, j = pairs[:, 0], pairs[:, 1]
d = np.sqrt(((xyz[j] - xyz[i]) ** 2).sum(axis=1))
k = np.ceil((d - tol) / lag).astype(np.int64)  # lag bins k lag - tol < d <= k lag + tol
k[(k * lag - tol >= d)] += 1
ok = (k >= 1) & (k <= n)
counts = np.bincount(k[ok], minlength=n + 1)
gamma = np.bincount(k[ok], weights=0.5 * (v[i] - v[j])[ok] ** 2, minlength=n + 1) / np.maximum(counts, 1)
elapsed = time.perf_counter() - t0
print(json.dumps({"seconds": elapsed, "pairs": int(ok.sum()), "counts": counts[1:].tolist(),
                  "gamma": gamma[1:].tolist(), "peak_mb": resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024}))
'''


def make_composites(per_side, rng):
    gx, gy = np.meshgrid(np.arange(per_side) * 25.0, np.arange(per_side) * 25.0)
    n_holes = per_side * per_side
    depth = np.arange(125) * 2.0 + 1.0
    azimuth = np.radians(rng.uniform(0, 360, n_holes))
    dip = np.radians(rng.uniform(80, 90, n_holes))
    u = np.c_[np.cos(dip) * np.sin(azimuth), np.cos(dip) * np.cos(azimuth), -np.sin(dip)]
    xyz = (np.c_[gx.ravel(), gy.ravel(), np.zeros(n_holes)][:, None, :]
           + depth[None, :, None] * u[:, None, :]).reshape(-1, 3)
    hole = np.repeat(np.arange(n_holes), len(depth))
    frame = pd.DataFrame({"hole": [f"P{h:04d}" for h in hole], "from": np.tile(depth - 1, n_holes),
                          "to": np.tile(depth + 1, n_holes), "x": xyz[:, 0], "y": xyz[:, 1], "z": xyz[:, 2],
                          "value": rng.normal(size=len(xyz))})
    return frame


def run_child(argv):
    before = resource.getrusage(resource.RUSAGE_CHILDREN).ru_maxrss
    t0 = time.perf_counter()
    result = subprocess.run(argv, capture_output=True, text=True, cwd=ROOT)
    elapsed = time.perf_counter() - t0
    peak = resource.getrusage(resource.RUSAGE_CHILDREN).ru_maxrss
    if result.returncode != 0:
        raise SystemExit(result.stderr)
    return elapsed, max(peak, before) / 1024, result.stdout


def main():
    parser = argparse.ArgumentParser(description=__doc__)
    parser.add_argument("--holes-per-side", type=int, default=40)
    parser.add_argument("--skip-baseline", action="store_true")
    parser.add_argument("--skip-full", action="store_true", help="leave out (b)")
    args = parser.parse_args()
    from engine.pairs import PairIndex
    from engine.variogram import LagBins, Sets, VolumeGrid, accumulate, fan

    rng = np.random.default_rng(0)
    frame = make_composites(args.holes_per_side, rng)
    xyz = frame[["x", "y", "z"]].to_numpy()
    values = frame["value"].to_numpy()
    hole = pd.factorize(frame["hole"])[0]
    depth = 0.5 * (frame["from"] + frame["to"]).to_numpy()
    print(f"pair benchmark: {len(frame):,} composites in {args.holes_per_side ** 2} holes, 2 threads available: "
          f"{os.cpu_count()}")
    with tempfile.TemporaryDirectory() as folder:
        path = Path(folder) / "composites.csv"
        frame.to_csv(path, index=False)
        # warm the kernel cache in a child so the timed command loads compiled kernels
        small = Path(folder) / "small.csv"
        frame.iloc[:2000].to_csv(small, index=False)
        command = [sys.executable, "-m", "engine", "variogram", "--value", "value", "--omni", "--lag", "5",
                   "--lags", "10", "--quiet"]
        run_child(command + ["--composites", str(small), "--out", str(Path(folder) / "warm")])
        engine_s, engine_mb, _ = run_child(command + ["--composites", str(path), "--out", str(Path(folder) / "a")])
        table = pd.read_csv(Path(folder) / "a" / "variograms.csv")
        if not args.skip_baseline:
            base_s, _, out = run_child([sys.executable, "-c", BASELINE, str(path)])
            base = json.loads(out)
    sets = Sets(omni=LagBins(5.0, 10))
    accumulate(xyz[:1000], values[:1000], sets)
    t0 = time.perf_counter()
    index = PairIndex(xyz, hole, depth, max_distance_m=sets.plan().max_distance_m)
    t1 = time.perf_counter()
    acc = accumulate(xyz, values, sets, hole=hole, depth=depth, index=index)
    t2 = time.perf_counter()
    pairs_a = int(table["pairs"].sum())
    print("(a) omnidirectional, 10 lags of 5 m")
    print(f"  drillaxis variogram, whole command: {engine_s:.2f} s, peak {engine_mb:.0f} MB, {pairs_a:,} pairs in bins")
    print(f"  in-process: index {t1 - t0:.2f} s, pass {t2 - t1:.2f} s, {acc.candidates:,} candidates, "
          f"{acc.accepted:,} within reach, {acc.accepted / (t2 - t1) / 1e6:.0f} M pairs/s")
    if not args.skip_baseline:
        same = base["counts"] == table["pairs"].astype(int).tolist() and np.allclose(base["gamma"], table["gamma"])
        print(f"  cKDTree.query_pairs + numpy baseline: {base['seconds']:.2f} s compute ({base_s:.2f} s with "
              f"start-up), peak {base['peak_mb']:.0f} MB; same counts and gamma: {same}")
        print(f"  ratio baseline / whole command: {base_s / engine_s:.1f}x (compute only: "
              f"{base['seconds'] / engine_s:.1f}x); memory ratio {base['peak_mb'] / engine_mb:.1f}x")
    # the compute limit per pair: the same pair code over every pair of a subset, no search
    # structure. Per-candidate cost depends on how many candidates are within reach (a rejected
    # candidate costs a few instructions, an accepted one the whole bin update), so the subset is
    # the central composites chosen to give the cell search's own share within reach; the 20,000
    # central composites (few within reach) are shown too.
    centre = xyz.mean(axis=0)
    nearest = np.argsort(np.linalg.norm(xyz - centre, axis=1))
    plan = sets.plan()
    share = acc.accepted / acc.candidates

    def brute(count, repeats=1):
        sub = nearest[:count]
        sub_index = PairIndex(xyz[sub], max_distance_m=plan.max_distance_m)
        sub_index.run(values[sub], plan, brute_force=True)  # compile, warm
        t0 = time.perf_counter()
        for _ in range(repeats):
            _, cand, inside = sub_index.run(values[sub], plan, brute_force=True)
        return (time.perf_counter() - t0) / repeats, cand, inside

    lo, hi = 50, 20000  # the largest subset whose share within reach is at least the cell search's
    while hi - lo > 10:
        mid = (lo + hi) // 2
        _, cand, inside = brute(mid)
        lo, hi = (mid, hi) if inside / cand >= share else (lo, mid)
    _, cand, inside = brute(lo)
    repeats = max(1, int(2e8 / cand))
    matched_s, cand, inside = brute(lo, repeats)
    per_matched = matched_s / cand * 1e9
    wide_s, wide_cand, wide_inside = brute(20000)
    per_cell = (t2 - t1) / acc.candidates * 1e9
    print(f"  cell search pass: {per_cell:.2f} ns per candidate ({share:.0%} within reach), "
          f"{(t2 - t1) / acc.accepted * 1e9:.2f} ns per pair within reach")
    print(f"  brute-force loop, all pairs of the {lo:,} central composites ({inside / cand:.0%} within reach, "
          f"{repeats} runs): {per_matched:.2f} ns per candidate, {matched_s / inside * 1e9:.2f} ns per pair within "
          f"reach; ratio cell / brute per candidate {per_cell / per_matched:.2f}")
    print(f"  brute-force loop, all pairs of the 20,000 central composites ({wide_inside / wide_cand:.0%} within "
          f"reach): {wide_s / wide_cand * 1e9:.2f} ns per candidate, {wide_s / wide_inside * 1e9:.2f} ns per pair "
          f"within reach; ratio cell / brute per candidate {per_cell / (wide_s / wide_cand * 1e9):.2f}")
    if args.skip_full:
        return

    full = Sets(omni=LagBins(10.0, 15), downhole=LagBins(2.0, 40),  # 150 m of lags; the volume's corners are cut
                directions=fan(0, 0, 18) + fan(90, 90, 18) + fan(0, 90, 18), directional_bins=LagBins(10.0, 15),
                volume=VolumeGrid((150 / 20.5, 150 / 20.5, 75 / 10.5), (20, 20, 10)), max_distance_m=155.0)
    plan = full.plan()
    t0 = time.perf_counter()
    index = PairIndex(xyz, hole, depth, max_distance_m=plan.max_distance_m)
    t1 = time.perf_counter()
    acc = accumulate(xyz, values, full, hole=hole, depth=depth, index=index)
    t2 = time.perf_counter()
    peak = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024
    print(f"(b) full search job: volume 41 x 41 x 21, three fans of 18 directions, down-hole, omni; reach "
          f"{plan.max_distance_m:.0f} m")
    print(f"  index {t1 - t0:.2f} s, pass {t2 - t1:.2f} s, {acc.candidates:,} candidates, {acc.accepted:,} pairs "
          f"within reach ({acc.accepted / (t2 - t1) / 1e6:.0f} M pairs/s); peak of this process {peak:.0f} MB")
    print(f"  per candidate {(t2 - t1) / acc.candidates * 1e9:.2f} ns")


if __name__ == "__main__":
    main()
