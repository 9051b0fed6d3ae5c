"""How far the one pass that every tabulated-curve method needs sits above the bandwidth floor.

Placing each interval's load on its asset's grid (its cell and position, from the cube root of the
load) cannot be skipped by any method that reads the machines' curves from tables. This times
:func:`models.tabulation.locate` and :func:`models.tabulation.cube_root_row` alone against the floor of
``benchmarks/bench_fleet.py`` (one numpy pass, a multiply into a preallocated buffer) over the same
array, in the same process. Not part of the test suite; prints figures, asserts nothing:

    .venv/bin/python benchmarks/placing_bound.py --assets 10000
"""

from __future__ import annotations

import argparse
import sys
import time
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))


def best_s(run, repeats: int) -> float:
    """Best wall time of ``repeats`` calls of ``run()`` [s]."""
    times = []
    for _ in range(repeats):
        t0 = time.perf_counter()
        run()
        times.append(time.perf_counter() - t0)
    return min(times)


def main(argv: list[str] | None = None) -> int:
    from models import tabulation

    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--assets", type=int, default=10000, help="rows of the load array (default 10000)")
    parser.add_argument("--steps", type=int, default=8760, help="intervals per row (default 8760)")
    parser.add_argument("--nodes", type=int, default=129, help="grid nodes per row (default 129)")
    args = parser.parse_args(argv)
    rng = np.random.default_rng(0)
    p_kw = rng.random((args.assets, args.steps)) * 100.0
    running = rng.random((args.assets, args.steps)) > 0.1  # 90 % of intervals running
    buffer = np.empty_like(p_kw)
    tabulation.locate(p_kw[:4], running[:4], 1.0, args.nodes)  # compile
    row = np.empty(args.steps)

    def cube_roots() -> None:
        for i in range(args.assets):
            tabulation.cube_root_row(p_kw[i], row)

    floor_s = best_s(lambda: np.multiply(p_kw, 1.0001, out=buffer), 5)
    placing_s = best_s(lambda: tabulation.locate(p_kw, running, 1.0, args.nodes), 3)
    roots_s = best_s(cube_roots, 3)
    print(f"{args.assets:,} x {args.steps:,} loads, {args.nodes} nodes, one thread")
    print(f"  floor (one numpy pass)    {1e3 * floor_s:8.1f} ms")
    print(f"  placing (locate)          {1e3 * placing_s:8.1f} ms  {placing_s / floor_s:5.1f}x the floor")
    print(f"  cube roots alone          {1e3 * roots_s:8.1f} ms  {roots_s / floor_s:5.1f}x the floor")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
