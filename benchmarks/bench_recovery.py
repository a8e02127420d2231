"""Recovery of a known anisotropy over seeds (synthetic_holes.recovery): per seed the axis errors
(degrees), the errors of the 95%-sill ranges along the three axes (%), the nugget share against the
truth's, whether the bootstrap's 95% axis angles hold the truth, and the time; then the distribution.

Usage: ``python benchmarks/bench_recovery.py [--seeds 10] [--bootstrap 50]``.
"""

from __future__ import annotations

import argparse
import sys
import time
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))


def main():
    from synthetic_holes.recovery import axis_errors_deg, recover

    parser = argparse.ArgumentParser(description=__doc__)
    parser.add_argument("--seeds", type=int, default=10)
    parser.add_argument("--bootstrap", type=int, default=50)
    parser.add_argument("--block", type=float, default=None, help="bootstrap block side in metres (0: single "
                        "holes; default: the fit's own default)")
    args = parser.parse_args()
    extra = {} if args.block is None else {"bootstrap_block_m": args.block if args.block > 0 else 0.0}
    rows = []
    for seed in range(args.seeds):
        t0 = time.perf_counter()
        result, truth, (xyz, _) = recover(seed, bootstrap=args.bootstrap, **extra)
        m = result.model
        err = axis_errors_deg(m.axes, truth.axes)
        rng = [100 * (m.effective_range(m.axes[a]) / truth.effective_range(truth.axes[a]) - 1) for a in range(3)]
        b = result.bootstrap or {}
        held = ("axis_angle_deg" in b and err[0] <= b["axis_angle_deg"]["major"]["p95"]
                and err[2] <= b["axis_angle_deg"]["minor"]["p95"])
        share = m.nugget / m.sill - truth.nugget / truth.sill
        true_ranges = [max(s.ranges_m[a] for s in truth.structures) for a in range(3)]
        ranges_held = ["range_m" in b and b["range_m"][n]["p2_5"] <= r <= b["range_m"][n]["p97_5"]
                       for n, r in zip(("major", "semi_major", "minor"), true_ranges)]
        rows.append(err + rng + [share, held, time.perf_counter() - t0, ranges_held])
        print(f"seed {seed}: {len(xyz):,} composites; axes {err[0]:.1f} / {err[1]:.1f} / {err[2]:.1f} deg; ranges "
              f"{rng[0]:+.0f}% / {rng[1]:+.0f}% / {rng[2]:+.0f}%; nugget share {share:+.3f}; structures "
              f"{len(m.structures)} {m.structures[0].shape}; bootstrap holds the true axes: {held}, the true "
              f"ranges (major, semi-major, minor): {ranges_held}; "
              f"{time.perf_counter() - t0:.1f} s", flush=True)
    a = np.array([r[:7] for r in rows], dtype=float)
    for name, col in (("major axis error, deg", 0), ("minor axis error, deg", 2)):
        print(f"{name}: median {np.median(a[:, col]):.1f}, max {a[:, col].max():.1f}")
    for name, col in (("major range error, %", 3), ("semi-major range error, %", 4), ("minor range error, %", 5)):
        print(f"{name}: median {np.median(a[:, col]):+.0f}, min {a[:, col].min():+.0f}, max {a[:, col].max():+.0f}")
    good = sum(max(r[0], r[2]) <= 10 and max(abs(x) for x in r[3:6]) <= 25 for r in rows)
    print(f"seeds with axes within 10 degrees and ranges within 25%: {good} of {len(rows)}; bootstrap holding "
          f"the true axes (major and minor): {sum(r[7] for r in rows)} of {len(rows)}; nugget share within 0.05: "
          f"{sum(abs(r[6]) <= 0.05 for r in rows)} of {len(rows)}")
    for a, name in enumerate(("major", "semi-major", "minor")):
        print(f"bootstrap 2.5-97.5% interval of the {name} range holds the true range: "
              f"{sum(r[9][a] for r in rows)} of {len(rows)}")


if __name__ == "__main__":
    main()
