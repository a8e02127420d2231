"""Timing of ``drillaxis run`` (desurvey, composite, search, fit, 50-replicate bootstrap, pattern
check) on a synthetic program of about 30,000 composites, 2 threads. Prints the wall time of the
whole command (its own process, kernels already compiled by a small warm-up run) and what it fitted
against the truth.

Usage: ``python benchmarks/bench_run.py [--along 20 --lines 15]``.
"""

from __future__ import annotations

import argparse
import json
import subprocess
import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))


def main():
    from engine.model import Model
    from synthetic_holes import generate_program
    from synthetic_holes.recovery import axis_errors_deg, recovery_spec

    parser = argparse.ArgumentParser(description=__doc__)
    parser.add_argument("--along", type=int, default=20)
    parser.add_argument("--lines", type=int, default=15)
    parser.add_argument("--bootstrap", type=int, default=50)
    args = parser.parse_args()
    with tempfile.TemporaryDirectory() as folder:
        folder = Path(folder)
        t0 = time.perf_counter()
        program = generate_program(recovery_spec(n_along=args.along, n_lines=args.lines), seed=11)
        paths = program.write(folder / "data")
        small = generate_program(recovery_spec(n_along=5, n_lines=4, hole_length_m=100.0), seed=1)
        small_paths = small.write(folder / "small")
        print(f"program: {len(program.collars)} holes, {len(program.intervals):,} samples "
              f"(generated in {time.perf_counter() - t0:.1f} s)")

        def run(p, out, bootstrap):
            command = [sys.executable, "-m", "engine", "run", "--collars", str(p["collars"]), "--surveys",
                       str(p["surveys"]), "--intervals", str(p["intervals"]), "--value", "au_gpt", "--bootstrap",
                       str(bootstrap), "--threads", "2", "--out", str(out), "--quiet"]
            start = time.perf_counter()
            done = subprocess.run(command, capture_output=True, text=True, cwd=ROOT)
            if done.returncode:
                raise SystemExit(done.stderr)
            return time.perf_counter() - start

        run(small_paths, folder / "warm", 3)
        seconds = run(paths, folder / "run", args.bootstrap)
        no_boot = run(paths, folder / "run0", 0)
        model = json.loads((folder / "run" / "model.json").read_text())
        composites = sum(1 for _ in open(folder / "run" / "composites.csv")) - 1
        fitted, truth = Model.from_json(model), Model.from_json(program.truth["model"])
        err = axis_errors_deg(fitted.axes, truth.axes)
        print(f"drillaxis run, {composites:,} composites, bootstrap {args.bootstrap}: {seconds:.1f} s "
              f"(without the bootstrap {no_boot:.1f} s; the bootstrap {seconds - no_boot:.1f} s); aim: under 30 s")
        print(f"  axes against the truth: major {err[0]:.1f}, semi-major {err[1]:.1f}, minor {err[2]:.1f} degrees")
        ranges = [fitted.effective_range(fitted.axes[a]) / truth.effective_range(truth.axes[a]) for a in range(3)]
        print("  95%-sill ranges over the truth's: " + ", ".join(f"{r:.2f}" for r in ranges))
        b = model.get("bootstrap", {})
        if "axis_angle_deg" in b:
            print("  bootstrap 95% axis angles: " + ", ".join(
                f"{n} {v['p95']:.1f}" for n, v in b["axis_angle_deg"].items()))


if __name__ == "__main__":
    main()
