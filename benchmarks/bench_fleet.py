"""Fleet-size benchmark: wall time, peak memory and throughput per stage, on synthetic fleets.

Run from the repository root (not part of the test suite; a 10,000-asset run takes several minutes):

    .venv/bin/python benchmarks/bench_fleet.py --assets 1000 10000

For each size it writes a seeded synthetic fleet (benchmarks/synthetic_fleet.py: 20 sites, a tariff per
site from data/tariffs/, every option of the default catalogue, an hourly year, profiles shared in
groups, Parquet) to a temporary folder, then runs the analysis in a fresh subprocess per engine so the
memory figures are that run's alone. Stages: load (reading and validating the case), machines and site
bills (run interleaved site by site; their times are measured apart, their memory peak is shared),
finance (cash flows and metrics), plan, end of life, Monte Carlo (tornado and risk), bills. Peak memory
is the largest resident set of the process and its children (Dask workers), sampled every 20 ms with
psutil. Throughput is asset-option-steps per second. The bandwidth floor is one numpy pass over an array
of the size of the load array (n_assets x n_steps float64), timed in the same process; beside it, the
seconds per GiB of the first write to fresh memory (:func:`fresh_memory_s_per_gib`), which every byte the
run keeps pays once, so that runs on hosts in different states can be compared.
A 1,000-draw Monte Carlo on the demo case is timed as well, and the peaks of the sizes run are set
side by side ("Memory as the fleet grows": run two sizes, e.g. 5000 10000, to see the peak as the fleet
doubles). The figures and the machine are written to the "Fleet benchmark" section of
docs/performance.md (other sections are left as they are).
"""

from __future__ import annotations

import argparse
import json
import os
import platform
import re
import subprocess
import sys
import tempfile
import threading
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))
sys.path.insert(0, str(ROOT / "benchmarks"))

from models.memory import one_heap  # noqa: E402

one_heap()  # first, as the drivecase command does (models.memory): the run is measured as the command runs it

import numpy as np  # noqa: E402

SECTION = "## Fleet benchmark"
STAGE_ORDER = ("load", "machines", "site bills", "finance", "plan", "end of life", "Monte Carlo", "bills")
#: Economics stage names (models.scenario.economics) -> benchmark stage.
ECONOMICS_STAGES = {"cash flows": "finance", "metrics": "finance", "fleet plan": "plan", "end of life": "end of life",
                    "risk": "Monte Carlo", "fleet plan (finishing)": "Monte Carlo", "bills": "bills"}


class PeakSampler:
    """Samples the resident memory of this process (and its children: Dask workers); keeps the peak of each
    labelled stage. Without children only this process is read (about 20 us a sample instead of a scan of
    every process, which would take its share of the cores being measured)."""

    def __init__(self, period_s: float = 0.02, children: bool = True):
        import psutil

        self.proc = psutil.Process()
        self.children = children
        self.period_s = period_s
        self.stage = "start"
        self.peaks: dict[str, int] = {}
        self._stop = threading.Event()
        self._thread = threading.Thread(target=self._run, daemon=True)

    def rss(self) -> int:
        total = 0
        for p in [self.proc] + (self.proc.children(recursive=True) if self.children else []):
            try:
                total += p.memory_info().rss
            except Exception:  # a child that just ended
                pass
        return total

    def _run(self) -> None:
        while not self._stop.is_set():
            value = self.rss()
            self.peaks[self.stage] = max(self.peaks.get(self.stage, 0), value)
            time.sleep(self.period_s)

    def start(self) -> "PeakSampler":
        self._thread.start()
        return self

    def mark(self, stage: str) -> None:
        value = self.rss()
        self.peaks[self.stage] = max(self.peaks.get(self.stage, 0), value)
        self.stage = stage
        self.peaks[stage] = max(self.peaks.get(stage, 0), value)

    def stop(self) -> None:
        self._stop.set()
        self._thread.join()


def bandwidth_floor_s(n_assets: int, n_steps: int, repeats: int = 5) -> float:
    """Best time of one numpy pass (multiply into a preallocated buffer) over an (n_assets, n_steps) array [s]."""
    load = np.random.default_rng(0).random((n_assets, n_steps))
    buf = np.empty_like(load)
    best = np.inf
    for _ in range(repeats):
        t0 = time.perf_counter()
        np.multiply(load, 1.0001, out=buf)
        best = min(best, time.perf_counter() - t0)
    return best


def fresh_memory_s_per_gib(size_bytes: int = 2**29) -> tuple[float, float]:
    """Seconds per GiB to write one byte per 4 KiB page of fresh anonymous memory, the first time and again.

    The first figure is what the run pays, page by page, for every byte it keeps (the kernel maps a page at
    its first write; on a virtual machine the host may have to back it too); the second is the same pass on
    pages already mapped. Their gap is a property of the host, not of the code: it says how much of a
    stage that keeps memory (the machines' per-interval rows and curve books) is paging, in this run.
    """
    import mmap

    region = mmap.mmap(-1, size_bytes)
    pages = np.frombuffer(region, dtype=np.uint8)[::4096]
    t0 = time.perf_counter()
    pages[:] = 1
    first = time.perf_counter() - t0
    t0 = time.perf_counter()
    pages[:] = 2
    again = time.perf_counter() - t0
    del pages
    region.close()
    scale = 2**30 / size_bytes
    return first * scale, again * scale


def child(case_dir: str, engine: str, plan_gap_pct: float | None = None, plan_seconds: float | None = None,
          max_memory_gib: float | None = None) -> dict:
    """Run one case in this process; return stage times [s], peaks [bytes] and sizes.

    ``plan_gap_pct`` and ``plan_seconds`` bound the exact plan as ``drivecase run --plan-gap --plan-seconds``
    do (default: the full run's settings); ``max_memory_gib`` fits the run's budgets to that peak as
    ``drivecase run --max-memory`` does (its estimate is reported beside the measured peak)."""
    sampler = PeakSampler(children=engine == "dask").start()
    times: dict[str, float] = {}
    sampler.mark("load")
    t0 = time.perf_counter()
    from models import scenario
    from models.case import load_case
    from models.operation import case_index, options_with_baseline

    case, problems = load_case(case_dir)
    if case is None:
        raise SystemExit(f"case not valid: {[str(p) for p in problems][:5]}")
    times["load"] = time.perf_counter() - t0
    n_assets, n_options, n_steps = len(case.assets), len(options_with_baseline(case.options)), len(case_index(case))
    state = {"stage": None, "t": time.perf_counter()}

    def progress(name: str) -> None:
        now = time.perf_counter()
        if state["stage"] is not None:
            times[state["stage"]] = times.get(state["stage"], 0.0) + now - state["t"]
        state["stage"], state["t"] = ECONOMICS_STAGES.get(name, "physics"), now
        sampler.mark(state["stage"])

    settings = scenario.PRECISE_PLAN
    if plan_gap_pct is not None:
        settings = scenario.PlanSettings(time_limit_s=settings.time_limit_s, gap_frac=plan_gap_pct / 100.0)
    if plan_seconds is not None:
        settings = scenario.PlanSettings(time_limit_s=plan_seconds, gap_frac=settings.gap_frac)
    budgets, fitted = None, {}
    if max_memory_gib is not None:
        from models.distributed import local_workers
        from models.estimate import budgets_within

        workers = local_workers(len(case.sites)) if engine == "dask" else 1
        plan = budgets_within(case, int(max_memory_gib * 2**30), workers=workers, dask=engine == "dask")
        budgets = plan.budgets
        fitted = {"max_memory_gib": max_memory_gib, "estimated_peak_bytes": plan.estimate.peak_bytes,
                  "fits": plan.fits, "given_up": list(plan.given_up)}
    t_run = time.perf_counter()
    own: dict[str, float] = {}  # each economics stage's own time (the plan runs beside end of life and risk)
    if engine == "dask":
        from models.distributed import run_distributed

        result = run_distributed(case, case.finance, progress=progress, plan_settings=settings, timer=own,
                                 budgets=budgets)
    else:
        timer: dict[str, float] = {}
        phys = scenario.physics(case, float(case.finance.capacitor_cost_per_kvar), progress, timer=timer,
                                budgets=budgets)
        result = scenario.economics(case, phys, case.finance, progress, plan_settings=settings, timer=own)
        times.pop("physics", None)
        times["machines"], times["site bills"] = timer["machines"], timer["site bills"]
    progress("end")
    for name, stage in (("fleet plan", "plan"), ("end of life", "end of life"), ("risk", "Monte Carlo")):
        if name in own:
            times[stage] = own[name]
    times["end to end"] = time.perf_counter() - t_run + times["load"]
    sampler.stop()
    peaks = dict(sampler.peaks)
    if "physics" in peaks:
        peaks["machines"] = peaks["site bills"] = peaks.pop("physics")
    if engine == "dask":
        times["machines + site bills"] = times.pop("physics")
    floor = bandwidth_floor_s(n_assets, n_steps)
    fresh_s_per_gib, mapped_s_per_gib = fresh_memory_s_per_gib()
    order = list(STAGE_ORDER) + ["machines + site bills", "end to end"]
    times = {k: times[k] for k in sorted(times, key=lambda k: order.index(k) if k in order else len(order))}
    return {"load_average_1min": os.getloadavg()[0],"engine": engine, "n_assets": n_assets, "n_options": n_options, "n_steps": n_steps, "times_s": times,
            "peak_bytes": peaks, "overall_peak_bytes": max(peaks.values()), "floor_s": floor,
            "fresh_page_s_per_gib": fresh_s_per_gib, "mapped_page_s_per_gib": mapped_s_per_gib,
            "n_results": len(result.results), "plan_status": result.plan_status.get("message", ""), "plan_solves": result.plan_status.get("solves", 1),
            "plan_gap_pct": 100.0 * settings.gap_frac, "plan_seconds": settings.time_limit_s, **fitted}


def monte_carlo_demo() -> dict:
    """Time the Monte Carlo stage of the demo case (its finance file asks for 1,000 draws)."""
    from models import scenario
    from models.case import load_case

    case, _ = load_case(ROOT / "data" / "demo")
    phys = scenario.physics(case, float(case.finance.capacitor_cost_per_kvar))
    own: dict[str, float] = {}
    scenario.economics(case, phys, case.finance, timer=own)
    return {"draws": int(case.finance.monte_carlo_draws), "risk_s": own["risk"]}


def machine() -> dict:
    import pandas

    cpu = "unknown"
    try:
        for line in Path("/proc/cpuinfo").read_text().splitlines():
            if line.startswith("model name"):
                cpu = line.split(":", 1)[1].strip()
                break
    except OSError:
        pass
    ram = os.sysconf("SC_PAGE_SIZE") * os.sysconf("SC_PHYS_PAGES")
    return {"cpu": cpu, "cores": os.cpu_count(), "ram_gib": round(ram / 2**30, 1), "python": platform.python_version(),
            "numpy": np.__version__, "pandas": pandas.__version__}


def run_child(case_dir: Path, engine: str, plan_gap_pct: float | None = None, plan_seconds: float | None = None,
              max_memory_gib: float | None = None) -> dict:
    extra = ([] if plan_gap_pct is None else ["--plan-gap", str(plan_gap_pct)]) + \
            ([] if plan_seconds is None else ["--plan-seconds", str(plan_seconds)]) + \
            ([] if max_memory_gib is None else ["--max-memory", str(max_memory_gib)])
    out = subprocess.run([sys.executable, __file__, "--child", str(case_dir), "--engine", engine, *extra], check=True,
                         capture_output=True, text=True)
    return json.loads(out.stdout.strip().splitlines()[-1])


def render(runs: list[dict], mc: dict | None, info: dict) -> str:
    mb = lambda b: f"{b / 2**20:,.0f}"  # noqa: E731
    lines = [SECTION, "",
             f"Measured by `benchmarks/bench_fleet.py` on {time.strftime('%Y-%m-%d')}: {info['cpu']}, {info['cores']} cores, "
             f"{info['ram_gib']} GiB RAM, Python {info['python']}, numpy {info['numpy']}, pandas {info['pandas']}. "
             "Synthetic fleets of 20 sites (a tariff per site from `data/tariffs/`), every option of the default "
             "catalogue, one year of "
             + ", ".join(sorted({"hourly steps" if r["n_steps"] <= 8784 else f"{r['n_steps']:,} steps" for r in runs}))
             + (", a profile per motor" if any(r.get("assets_per_profile") == 1 for r in runs) else
                ", profiles shared by about 25 motors")
             + ", capital budgets "
             + ("the demo's per motor (the demo's budgets x fleet size / the demo's 82 motors)"
                if all(r.get("budgets", "per_asset") == "per_asset" for r in runs) else "the demo's own")
             + ". Peak memory is the resident set of the process and its Dask workers; machines "
             "and site bills run interleaved site by site and share one peak. Throughput in asset-option-steps per second. "
             "The local engine works two sites at once in threads (`models.operation.PHYSICS_THREADS`); the machines and "
             "site-bills times are their shares of the physics' wall time. The plan is solved in a second thread while "
             "the end of life and the Monte Carlo run: the three times are each one's own and overlap, so the stages "
             "add up to more than the end-to-end wall time.", ""]
    for r in runs:
        elems = r["n_assets"] * r["n_options"] * r["n_steps"]
        lines += [f"### {r['n_assets']:,} assets x {r['n_options']} options x {r['n_steps']:,} steps, {r['engine']} engine", "",
                  "| stage | wall time [s] | peak memory [MiB] | throughput [asset-option-steps/s] |", "|---|---:|---:|---:|"]
        for stage, seconds in r["times_s"].items():
            peak = r["peak_bytes"].get(stage)
            thr = f"{elems / seconds:,.3g}" if stage in ("machines", "site bills", "machines + site bills") and seconds > 0 else ""
            lines.append(f"| {stage} | {seconds:,.1f} | {mb(peak) if peak else ''} | {thr} |")
        machines = r["times_s"].get("machines")
        ratio = f"{machines / r['floor_s']:,.0f}x" if machines else "n/a (dask: not separated)"
        lines += ["", f"Load average at the end of the run: {r['load_average_1min']:.1f} (other work shared the 2 cores). "
                  f"Overall peak {mb(r['overall_peak_bytes'])} MiB. Bandwidth floor (one numpy pass over the "
                  f"{r['n_assets']:,} x {r['n_steps']:,} load array): {1000 * r['floor_s']:.1f} ms; machines stage / floor: {ratio}."
                  + (f" Fresh memory on this host: {r['fresh_page_s_per_gib']:.2f} s per GiB at its first write, "
                     f"{r['mapped_page_s_per_gib']:.3f} s per GiB once mapped." if "fresh_page_s_per_gib" in r else "")
                  + (f" Exact plan asked to {r['plan_gap_pct']:g} % or {r['plan_seconds']:g} s: {r['plan_status']}."
                     if r.get("plan_status") else "")
                  + (f" Budgets fitted to {r['max_memory_gib']:g} GiB (estimated peak "
                     f"{mb(r['estimated_peak_bytes'])} MiB{'' if r['fits'] else ', above the limit'}; kept less: "
                     f"{'; '.join(r['given_up']) or 'nothing'})." if "max_memory_gib" in r else ""), ""]
    lines += memory_growth(runs)
    if mc:
        lines += [f"Monte Carlo on the demo case ({mc['draws']:,} draws): {mc['risk_s']:.2f} s.", ""]
    return "\n".join(lines) + "\n"


def memory_growth(runs: list[dict]) -> list[str]:
    """Lines of the "Memory as the fleet grows" table: each run's peak split into the per-interval power
    kept for the whole run (every option's while it fits the dense budget, else today's motors') and the
    rest, with the growth of the peak against the growth of the fleet."""
    from models.operation import DENSE_INTERVAL_BUDGET_BYTES, interval_bytes

    mb = lambda b: f"{b / 2**20:,.0f}"  # noqa: E731
    lines = ["### Memory as the fleet grows", "",
             "| fleet | engine | peak [MiB] | per-interval power kept for the run [MiB] | the rest [MiB] | peak per asset [KiB] |",
             "|---|---|---:|---:|---:|---:|"]
    by_engine: dict[str, list[dict]] = {}
    for r in sorted(runs, key=lambda r: (r["engine"], r["n_assets"])):
        n, n_o, n_t = r["n_assets"], r["n_options"], r["n_steps"]
        dense = interval_bytes(n, n_o, n_t)
        kept = dense if dense <= DENSE_INTERVAL_BUDGET_BYTES else interval_bytes(n, 1, n_t)
        peak = r["overall_peak_bytes"]
        lines.append(f"| {n:,} assets | {r['engine']} | {mb(peak)} | {mb(kept)} ({'every option' if kept == dense else 'today only'}) "
                     f"| {mb(peak - kept)} | {peak / n / 1024:,.0f} |")
        by_engine.setdefault(r["engine"], []).append(r)
    lines.append("")
    notes = []
    for engine, rs in by_engine.items():
        for a, b in zip(rs, rs[1:]):
            notes.append(f"{engine}: {a['n_assets']:,} -> {b['n_assets']:,} assets (x{b['n_assets'] / a['n_assets']:.1f}), "
                         f"peak x{b['overall_peak_bytes'] / a['overall_peak_bytes']:.2f}")
    if notes:
        lines += ["Growth of the peak with the fleet: " + "; ".join(notes) + ". Per-interval power of every option is "
                  "kept only up to the dense budget; above it, today's motors only (16 bytes per asset-step), and the "
                  "rest is one site's blocks and the per-asset results.", ""]
    return lines


def write_section(text: str, path: Path) -> None:
    """Replace (or add) the Fleet benchmark section of ``path``, leaving every other section as it is."""
    if path.exists():
        doc = path.read_text(encoding="utf-8")
    else:
        doc = "# Performance\n\n"
    pattern = re.compile(rf"^{re.escape(SECTION)}\n.*?(?=^## |\Z)", re.S | re.M)
    doc = pattern.sub(lambda _m: text + "\n", doc) if pattern.search(doc) else doc.rstrip("\n") + "\n\n" + text
    path.write_text(doc.rstrip("\n") + "\n", encoding="utf-8")


def main(argv: list[str] | None = None) -> None:
    parser = argparse.ArgumentParser(description="Fleet-size benchmark (see the module docstring).")
    parser.add_argument("--assets", type=int, nargs="+", default=[1000, 10000], help="fleet sizes")
    parser.add_argument("--sites", type=int, default=20)
    parser.add_argument("--engines", nargs="+", default=["local"], choices=("local", "dask"))
    parser.add_argument("--doc", default=str(ROOT / "docs" / "performance.md"), help="document to update")
    parser.add_argument("--no-write", action="store_true", help="print only; leave docs/performance.md alone")
    parser.add_argument("--plan-gap", type=float, metavar="PCT",
                        help="prove the exact plan within this %% only (as drivecase run --plan-gap; default 0.01)")
    parser.add_argument("--plan-seconds", type=float, metavar="S",
                        help="time limit of the exact plan (as drivecase run --plan-seconds; default 60)")
    parser.add_argument("--assets-per-profile", type=int, default=25, metavar="N",
                        help="motors sharing one load profile in the synthetic fleets (default 25; 1: one each)")
    parser.add_argument("--step-minutes", type=int, choices=(60, 30, 15), default=60,
                        help="the synthetic profiles' step in minutes (default 60: 8,760 a year; 15: 35,040)")
    parser.add_argument("--max-memory", type=float, metavar="GIB",
                        help="fit the run's memory budgets to this peak (as drivecase run --max-memory)")
    parser.add_argument("--budgets", choices=("per_asset", "demo"), default="per_asset",
                        help="capital budgets of the synthetic fleets: the demo's per motor (default) or the demo's own")
    parser.add_argument("--child", help=argparse.SUPPRESS)
    parser.add_argument("--engine", default="local", help=argparse.SUPPRESS)
    parser.add_argument("--mc-child", action="store_true", help=argparse.SUPPRESS)
    args = parser.parse_args(argv)
    if args.child:
        print(json.dumps(child(args.child, args.engine, args.plan_gap, args.plan_seconds, args.max_memory)))
        return
    if args.mc_child:
        print(json.dumps(monte_carlo_demo()))
        return
    from synthetic_fleet import write_fleet

    runs = []
    with tempfile.TemporaryDirectory(prefix="drivecase-bench-") as tmp:
        for n in args.assets:
            folder = write_fleet(Path(tmp) / f"fleet{n}", n, args.sites, budgets=args.budgets,
                                 assets_per_profile=args.assets_per_profile, step_minutes=args.step_minutes)
            for engine in args.engines:
                r = run_child(folder, engine, args.plan_gap, args.plan_seconds, args.max_memory)
                r["budgets"] = args.budgets
                r["assets_per_profile"] = args.assets_per_profile
                print(json.dumps(r), flush=True)
                runs.append(r)
    out = subprocess.run([sys.executable, __file__, "--mc-child"], check=True, capture_output=True, text=True)
    mc = json.loads(out.stdout.strip().splitlines()[-1])
    text = render(runs, mc, machine())
    print(text)
    if not args.no_write:
        write_section(text, Path(args.doc))


if __name__ == "__main__":
    main()
