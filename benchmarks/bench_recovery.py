"""Recovery of known truths over seeds (synthetic_holes.recovery).

``--scenario`` names programs whose truth is set at sample support (irregular samples of 0.5 to 1.5 m,
each with its own nugget draw, composited to 2 m): "oblique lode", "flat blanket" (vertical holes 45 m
apart, vertical range 14 m), "steep shoot" (drilled along no axis), "strong nugget" (40% nugget,
exponential). The nugget the composites truly carry is the variance of the nugget draws composited
alone on the same layout. "project" is the project's own program (truth at composite support).

Per seed: the axis errors (degrees), the ratios of the fitted to the true 95%-sill distance along the
true axes, the nugget share of the composites' variance against the true one, and with
``--bootstrap`` whether the bootstrap's intervals hold the truth (axes: the angle to the true axis
within the replicates' 95th percentile; ranges: the true 95%-sill distance along the fitted axis
within the 2.5-97.5% interval; the nugget likewise). Then a summary per scenario against the aims of
the issue (axes within 5 degrees, ranges within 10%, nugget share within 0.03).

Usage: ``python benchmarks/bench_recovery.py [--scenario NAME ...] [--seeds 10] [--bootstrap 0]``.
"""

from __future__ import annotations

import argparse
import sys
import time
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

NAMES = ("major", "semi_major", "minor")


def one(name, seed, bootstrap):
    from synthetic_holes.recovery import axis_errors_deg, recover, recover_scenario

    if name == "project":
        result, truth, _ = recover(seed, bootstrap=bootstrap)
        variance = result.variance
        true_nugget = truth.nugget * variance / truth.sill  # the truth is set at composite support
    else:
        result, truth, true_nugget, variance = recover_scenario(name, seed, bootstrap=bootstrap)
    m = result.model
    err = axis_errors_deg(m.axes, truth.axes)
    ratio = [m.effective_range(truth.axes[a]) / truth.effective_range(truth.axes[a]) for a in range(3)]
    share, true_share = m.nugget / variance, true_nugget / variance
    b = result.bootstrap or {}
    held = {}
    if "axis_angle_deg" in b:
        held["axes"] = all(err[a] <= b["axis_angle_deg"][n]["p95"] for a, n in enumerate(NAMES))
        held["ranges"] = [b["effective_range_m"][n]["p2_5"] <= truth.effective_range(m.axes[a])
                          <= b["effective_range_m"][n]["p97_5"] for a, n in enumerate(NAMES)]
        held["nugget"] = b["nugget"]["p2_5"] <= true_nugget <= b["nugget"]["p97_5"]
    return err, ratio, share, true_share, held, m


def main():
    parser = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    parser.add_argument("--scenario", action="append", help="a scenario (repeatable; default: all four and project)")
    parser.add_argument("--seeds", type=int, default=10)
    parser.add_argument("--bootstrap", type=int, default=0)
    args = parser.parse_args()
    scenarios = args.scenario or ["oblique lode", "flat blanket", "steep shoot", "strong nugget", "project"]
    for name in scenarios:
        rows = []
        for seed in range(args.seeds):
            t0 = time.perf_counter()
            err, ratio, share, true_share, held, m = one(name, seed, args.bootstrap)
            rows.append((err, ratio, share - true_share, held))
            print(f"{name} seed {seed}: axes {err[0]:.1f} / {err[1]:.1f} / {err[2]:.1f} deg; ranges x{ratio[0]:.2f} / "
                  f"x{ratio[1]:.2f} / x{ratio[2]:.2f}; nugget share {share:.3f} (true {true_share:.3f}); "
                  f"{len(m.structures)} {m.structures[0].shape}" + (f"; bootstrap holds {held}" if held else "")
                  + f"; {time.perf_counter() - t0:.0f} s", flush=True)
        err = np.array([r[0] for r in rows])
        ratio = np.array([r[1] for r in rows])
        dn = np.array([r[2] for r in rows])
        n = len(rows)
        print(f"== {name}, {n} seeds: axis error max per seed median {np.median(err.max(axis=1)):.1f} deg, worst "
              f"{err.max():.1f}; within 5 deg (all three): {int(np.sum(err.max(axis=1) <= 5))} of {n}")
        for a, axis in enumerate(NAMES):
            print(f"   {axis} range ratio: median {np.median(ratio[:, a]):.2f}, {np.min(ratio[:, a]):.2f}-"
                  f"{np.max(ratio[:, a]):.2f}; within 10%: {int(np.sum(np.abs(ratio[:, a] - 1) <= 0.10))} of {n}")
        worst = dn[np.argmax(np.abs(dn))]
        print(f"   nugget share minus the true share: median {np.median(dn):+.3f}, worst {worst:+.3f}; "
              f"within 0.03: {int(np.sum(np.abs(dn) <= 0.03))} of {n}")
        if rows and rows[0][3]:
            print(f"   bootstrap holds the axes in {sum(r[3]['axes'] for r in rows)} of {n}, the ranges "
                  + " / ".join(str(sum(r[3]['ranges'][a] for r in rows)) for a in range(3))
                  + f", the nugget in {sum(r[3]['nugget'] for r in rows)}", flush=True)


if __name__ == "__main__":
    main()
