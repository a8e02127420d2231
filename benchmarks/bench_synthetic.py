"""Synthetic program benchmark: 200 holes x 200 m (about 30,000 samples), two nested structures of
2,000 cosines each, written to disk. Prints the time of each part; the first call of a process also
compiles (or loads from the cache) the kernels, so it is shown apart.
Usage: ``python benchmarks/bench_synthetic.py [--seed N]``."""

from __future__ import annotations

import argparse
import sys
import tempfile
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

from synthetic_holes import ProgramSpec, generate_program  # noqa: E402


def main():
    parser = argparse.ArgumentParser(description=__doc__)
    parser.add_argument("--seed", type=int, default=0)
    args = parser.parse_args()
    spec = ProgramSpec(n_along=20, n_lines=10, hole_length_m=200.0, length_scatter_m=0.0)
    t0 = time.perf_counter()
    generate_program(ProgramSpec(n_along=2, n_lines=1, hole_length_m=20.0), seed=1)
    t1 = time.perf_counter()
    program = generate_program(spec, seed=args.seed)
    t2 = time.perf_counter()
    with tempfile.TemporaryDirectory() as folder:
        program.write(folder)
    t3 = time.perf_counter()
    counts = program.truth["counts"]
    print(f"synthetic program: {counts['holes']} holes, {counts['intervals']:,} samples, "
          f"{counts['sampled_m']:,.0f} m sampled")
    print(f"  first call (kernel compile or cache load): {t1 - t0:.2f} s")
    print(f"  generate: {t2 - t1:.2f} s; write tables and truth.json: {t3 - t2:.2f} s")


if __name__ == "__main__":
    main()
