"""Compositing benchmark: 1 million intervals (5,000 holes x 200 samples with gaps and two domains),
2 m composites by domain, two value columns.

Prints the engine's time and the ratio to a straightforward pandas implementation (split each sample
at the composite edges, group the pieces by hole, run and composite, sum; then merge short residuals)
run in the same process on the same data, and checks that both give the same composites.
Usage: ``python benchmarks/bench_composite.py [--holes N] [--threads N]``.
"""

from __future__ import annotations

import argparse
import sys
import time
from pathlib import Path

import numpy as np
import pandas as pd

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

from engine._jit import threads  # noqa: E402
from engine.composite import CompositeOptions, composite  # noqa: E402


def make_intervals(n_holes, per_hole, rng):
    length = rng.choice([0.5, 1.0, 1.0, 1.5], size=(n_holes, per_hole))
    gap = np.where(rng.uniform(size=(n_holes, per_hole)) < 0.03, rng.uniform(1, 4, (n_holes, per_hole)), 0.0)
    start = np.cumsum(length + gap, axis=1) - length
    zone = np.where(start < rng.uniform(20, 60, (n_holes, 1)), "OXIDE", "FRESH")
    return pd.DataFrame({
        "hole": np.repeat([f"B{h:05d}" for h in range(n_holes)], per_hole),
        "from": start.ravel().round(3), "to": (start + length).ravel().round(3),
        "au": rng.lognormal(0, 1, n_holes * per_hole), "cu": rng.lognormal(-1, 0.5, n_holes * per_hole),
        "zone": zone.ravel(),
    })


def pandas_composites(frame, columns, length):
    """Straightforward pandas: runs by shift/cumsum, pieces by repeat, sums by groupby, then merge."""
    f = frame.sort_values(["hole", "from"]).reset_index(drop=True)
    new_run = (f["hole"] != f["hole"].shift()) | (f["zone"] != f["zone"].shift())
    f["run"] = new_run.cumsum()
    f["top"] = f.groupby("run")["from"].transform("min")
    f["bottom"] = f.groupby("run")["to"].transform("max")
    first = np.floor((f["from"] - f["top"]) / length).astype(int)
    last = np.maximum(first, np.ceil((f["to"] - f["top"]) / length).astype(int) - 1)
    pieces = f.loc[f.index.repeat(last - first + 1)].copy()
    pieces["k"] = first.loc[pieces.index] + pieces.groupby(level=0).cumcount()
    a = pieces["top"] + pieces["k"] * length
    b = np.minimum(a + length, pieces["bottom"])
    pieces["overlap"] = np.minimum(b, pieces["to"]) - np.maximum(a, pieces["from"])
    pieces = pieces[pieces["overlap"] > 1e-9]
    # a residual shorter than half the length joins the previous composite of its run
    full = np.floor((pieces["bottom"] - pieces["top"]) / length + 1e-9).astype(int)
    rest = (pieces["bottom"] - pieces["top"]) - full * length
    merge = (pieces["k"] == full) & (rest < 0.5 * length) & (full >= 1)
    pieces.loc[merge, "k"] = pieces.loc[merge, "k"] - 1
    sums = {"sampled": ("overlap", "sum")}
    for c in columns:
        pieces[f"m_{c}"] = pieces["overlap"] * pieces[c]
        pieces[f"l_{c}"] = pieces["overlap"].where(pieces[c].notna(), 0.0)
        sums[f"m_{c}"] = (f"m_{c}", "sum")
        sums[f"l_{c}"] = (f"l_{c}", "sum")
    out = pieces.groupby(["hole", "run", "k"], sort=True).agg(**sums, top=("top", "first")).reset_index()
    for c in columns:
        out[c] = out[f"m_{c}"] / out[f"l_{c}"]
    out["from"] = out["top"] + out["k"] * length
    return out


def main():
    parser = argparse.ArgumentParser(description=__doc__)
    parser.add_argument("--holes", type=int, default=5000)
    parser.add_argument("--samples", type=int, default=200)
    parser.add_argument("--threads", type=int, default=None)
    parser.add_argument("--repeats", type=int, default=3)
    args = parser.parse_args()
    frame = make_intervals(args.holes, args.samples, np.random.default_rng(0))
    options = CompositeOptions(length_m=2.0, domain="zone", min_coverage=0.0)
    composite(frame.iloc[:500], ["au", "cu"], options)  # compile or load the kernel
    with threads(args.threads) as count:
        times = []
        for _ in range(args.repeats):
            t0 = time.perf_counter()
            result = composite(frame, ["au", "cu"], options)
            times.append(time.perf_counter() - t0)
    t0 = time.perf_counter()
    baseline = pandas_composites(frame, ["au", "cu"], 2.0)
    baseline_time = time.perf_counter() - t0
    engine = result.composites[result.composites["sampled"] > 0]  # pandas makes no empty composites
    same = len(engine) == len(baseline) and np.allclose(engine["au"].to_numpy(), baseline["au"].to_numpy(),
                                                         equal_nan=True)
    engine_time = float(np.median(times))
    print(f"composite benchmark: {len(frame):,} intervals in {args.holes} holes -> {len(engine):,} composites "
          f"of 2 m by domain, 2 value columns, {count} thread(s)")
    print(f"  engine (runs, edges, kernel, metal check): median {engine_time:.2f} s of {args.repeats}")
    print(f"  pandas groupby implementation:             {baseline_time:.2f} s")
    print(f"  ratio pandas / engine:                     {baseline_time / engine_time:.1f}x")
    print(f"  same composites and values:                {same}")
    print(f"  largest metal difference (engine check):   {result.summary['largest_metal_difference']:.2e}")


if __name__ == "__main__":
    main()
