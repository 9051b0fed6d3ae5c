"""Benchmark: a year of 15-minute data for a site with 300 assets, site meter and bill.

Run from the repository root:  python benchmarks/bench_billing.py

Synthetic data only (random load profiles). Prints the wall-clock time of each step, best of a few
repeats. Not a test: timings depend on the machine.
"""

from __future__ import annotations

import sys
import time
import tomllib
from pathlib import Path

import numpy as np
import pandas as pd

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))

from models.attribution import option_savings  # noqa: E402
from models.billing import bill, bill_many  # noqa: E402
from models.site import Site, SteppedCapacitorBank  # noqa: E402
from models.tariff import tariff_from_dict  # noqa: E402

N_ASSETS = 300


def best_of(fn, repeats: int = 3) -> tuple[float, object]:
    best, out = np.inf, None
    for _ in range(repeats):
        t0 = time.perf_counter()
        out = fn()
        best = min(best, time.perf_counter() - t0)
    return best, out


def main() -> None:
    with open(ROOT / "data" / "tariffs" / "example_tou_kw_reactive_ratchet.toml", "rb") as f:
        tariff, problems = tariff_from_dict(tomllib.load(f), source="example_tou_kw_reactive_ratchet.toml")
    assert tariff is not None, problems
    index = pd.date_range("2025-01-01", "2026-01-01", freq="15min", tz=tariff.time_zone, inclusive="left")
    n = len(index)
    rng = np.random.default_rng(2025)
    rated_kw = rng.uniform(2.0, 90.0, (N_ASSETS, 1))
    hour = np.asarray(index.hour)
    shift = ((hour >= 6) & (hour < 22)).astype(float)
    p = rated_kw * (0.3 + 0.5 * shift[None, :]) * rng.uniform(0.8, 1.0, (N_ASSETS, n))
    q = p * rng.uniform(0.5, 0.9, (N_ASSETS, 1))
    site = Site(base_p_kw=400.0, base_power_factor=0.92, stepped_banks=(SteppedCapacitorBank(1200.0, 100.0, 0.95),))

    print(f"intervals: {n:,}  assets: {N_ASSETS}  asset array: {p.nbytes / 1e6:.0f} MB per quantity")
    t_meter, meter = best_of(lambda: site.meter(p, q))
    t_bill, b = best_of(lambda: bill(tariff, index, meter.p_kw, meter.q_kvar))
    t_both, _ = best_of(lambda: bill(tariff, index, *(lambda m: (m.p_kw, m.q_kvar))(site.meter(p, q))))
    print(f"site meter (300 assets, 35,040 intervals):  {t_meter * 1e3:7.1f} ms")
    print(f"bill (one meter series, 12 months):          {t_bill * 1e3:7.1f} ms  -> {len(b)} line items, total {b['amount'].sum():,.0f} {tariff.currency}")
    print(f"meter + bill:                                {t_both * 1e3:7.1f} ms")

    scen_p = np.broadcast_to(meter.p_kw, (N_ASSETS, n)) * rng.uniform(0.97, 1.0, (N_ASSETS, 1))
    scen_q = np.broadcast_to(meter.q_kvar, (N_ASSETS, n)) * rng.uniform(0.9, 1.0, (N_ASSETS, 1))
    t_many, _ = best_of(lambda: bill_many(tariff, index, scen_p, scen_q), repeats=1)
    print(f"bill_many (300 scenarios):                   {t_many * 1e3:7.1f} ms  ({t_many / N_ASSETS * 1e3:.2f} ms per scenario)")

    dp = -0.03 * p
    dq = -0.4 * q
    t_opt, res = best_of(lambda: option_savings(tariff, index, p, q, dp, dq, site=site, capacitor_cost_per_kvar=30.0), repeats=1)
    print(f"option_savings (300 options, with equivalent capacitor bank): {t_opt:5.2f} s")
    print(f"  mean saving per option {res['saving'].mean():,.0f} {tariff.currency}, of which reactive {res['reactive_saving'].mean():,.0f}")


if __name__ == "__main__":
    main()
