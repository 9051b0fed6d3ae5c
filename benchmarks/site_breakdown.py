"""Where one site's machine time goes: the machines stage of a few sites, split by model and pass.

Run from the repository root on a fleet written by benchmarks/synthetic_fleet.py (not part of the test
suite; prints figures, asserts nothing):

    .venv/bin/python benchmarks/synthetic_fleet.py /tmp/fleet10k --assets 10000
    .venv/bin/python benchmarks/site_breakdown.py /tmp/fleet10k --sites 3

The first site of the fleet is run once to compile and warm up, then ``--sites`` sites are run on one
thread with freed memory kept (as :func:`models.scenario.physics` runs them). Each option's evaluation
is timed by the number of loads per row it was evaluated at (the grid's 2 x nodes - 1, the fine grid's,
or every interval), and the grid and table passes by name; the figures are per site, averaged. Nested
timings overlap (a drive option's evaluation includes its speed control), so the lines do not add up
to the machines stage, which is printed first.
"""

from __future__ import annotations

import argparse
import collections
import sys
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))

#: Functions timed by name (module, name): the passes between the models.
TIMED = (("operation", "_reference_load"), ("operation", "_grid_load"), ("operation", "_speed_controlled"),
         ("operation", "asset_loads"), ("operation", "_site_other"), ("operation", "_tabulation_holds"),
         ("operation", "_whole"), ("tabulation", "locate"), ("tabulation", "refine"), ("tabulation", "interpolate_pair"),
         ("tabulation", "weighted_sums"), ("tabulation", "signed_sums"), ("tabulation", "tables"))


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("fleet", help="a case folder (e.g. one written by benchmarks/synthetic_fleet.py)")
    parser.add_argument("--sites", type=int, default=3, help="sites timed after the warm-up (default 3)")
    parser.add_argument("--also", nargs="*", default=[], metavar="MODULE.FUNCTION",
                        help="more functions of models/ to time by name, e.g. synchronous.wfsm_operating_point "
                             "(called through their module; a function imported by name elsewhere is not seen)")
    args = parser.parse_args(argv)

    from models import operation, scenario, tabulation
    from models.case import load_case
    from models.memory import retained_memory
    from models.operation import case_index, site_case, site_partition

    case, problems = load_case(args.fleet)
    if case is None:
        print(f"{args.fleet}: not a valid case ({sum(p.severity == 'error' for p in problems)} errors)", file=sys.stderr)
        return 1
    index = case_index(case)
    partition = site_partition(case)
    n_sites = max(1, min(args.sites, len(partition)))
    sites = [site_case(case, site_id) for site_id, _ in partition[:n_sites]]
    scenario.site_physics(site_case(case, partition[-1][0]), index, 40.0, None, {}, True)  # compile and warm up

    acc: dict[tuple[str, int], list[float]] = collections.defaultdict(lambda: [0.0, 0, 0])
    import importlib

    timed_names = list(TIMED) + [tuple(name.rsplit(".", 1)) for name in args.also]
    modules = {m: importlib.import_module(f"models.{m}") for m, _ in timed_names}
    modules.update({"operation": operation, "tabulation": tabulation})
    originals = {("operation", "_evaluate"): operation._evaluate}
    originals.update({(m, n): getattr(modules[m], n) for m, n in timed_names})

    def evaluate(option, arr, existing, load, site_other=None):
        t0 = time.perf_counter()
        out = originals[("operation", "_evaluate")](option, arr, existing, load, site_other)
        entry = acc[(str(option["option_id"]), int(load.p_ref_kw.shape[1]))]
        entry[0] += time.perf_counter() - t0
        entry[1] += 1
        entry[2] += int(load.p_ref_kw.shape[0])
        return out

    def timed(key):
        function = originals[key]

        def wrapper(*a, **k):
            t0 = time.perf_counter()
            out = function(*a, **k)
            entry = acc[(key[1], 0)]
            entry[0] += time.perf_counter() - t0
            entry[1] += 1
            return out
        return wrapper

    operation._evaluate = evaluate
    for key in timed_names:
        setattr(modules[key[0]], key[1], timed(key))
    stage: dict[str, float] = {}
    try:
        with retained_memory():
            for one in sites:
                scenario.site_physics(one, index, 40.0, None, stage, True)
    finally:
        for (module, name), function in originals.items():
            setattr(modules[module], name, function)

    assets = sum(len(one.assets) for one in sites) / n_sites
    print(f"{args.fleet}: {n_sites} site(s) of {assets:.0f} assets on average, {len(index)} steps, one thread")
    print(f"  machines {1000 * stage.get('machines', 0.0) / n_sites:.1f} ms per site, "
          f"site bills {1000 * stage.get('site bills', 0.0) / n_sites:.1f} ms per site")
    print("  what (option: loads per row evaluated; pass: 0)        ms/site  calls/site  rows/site")
    for (name, width), (seconds, calls, rows) in sorted(acc.items(), key=lambda kv: -kv[1][0]):
        label = f"{name}: {width}" if width else f"{name} (pass)"
        print(f"  {label:<52} {1000 * seconds / n_sites:8.1f} {calls / n_sites:11.1f} {rows / n_sites:10.0f}")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
