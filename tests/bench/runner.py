"""Command line of the benchmarks: run the cases, print the table, write ``bench-results.json``.

Usage: ``python -m tests.bench [--quick] [--no-browser] [--cases refresh,fit,...] [--repeats N]
[--out FILE]``. The exit code is 0 whatever the timings: benchmarks never fail on a slow machine.
A case that raises is reported as an ``error: ...`` row and the run goes on.
"""

from __future__ import annotations

import argparse
import datetime as dt
import importlib.metadata
import json
import os
import platform
import subprocess
import time
import traceback
from pathlib import Path

from .rows import make_row

KERNEL_CASES = ("refresh", "diagnostics", "exclusion", "predict", "fit", "designs", "splitplot", "family_sliders",
                "mixture")
ALL_CASES = (*KERNEL_CASES, "browser", "viewers")
#: Every row id a run writes, in table order (the smoke test checks them all).
ROW_IDS = (
    "refresh_full_vs_statsmodels", "refresh_full_vs_floor", "refresh_no_slice_vs_statsmodels",
    "refresh_no_slice_vs_floor", "diagnostics_1000", "diagnostics_10000", "exclude_one", "predict_1_row",
    "predict_10000_rows", "predict_10000_rows_floor", "fit_large",
    "min_aberration_15_16", "min_aberration_11_64", "d_optimal", "reml_split_plot", "slider_split_plot",
    "slider_binomial", "slider_p50", "slider_p95", "first_view", "kernel_memory", "slider_bytes",
    "mixture_refresh_vs_statsmodels", "viewers_slider_p50", "viewers_slider_p95",
    "viewers_kernel_memory",
)
ROWS_OF = {
    "refresh": ROW_IDS[:4], "diagnostics": ROW_IDS[4:6], "exclusion": ROW_IDS[6:7], "predict": ROW_IDS[7:10],
    "fit": ROW_IDS[10:11], "designs": ROW_IDS[11:14], "splitplot": ROW_IDS[14:15], "family_sliders": ROW_IDS[15:17],
    "browser": ROW_IDS[17:22], "mixture": ("mixture_refresh_vs_statsmodels",),
    "viewers": ("viewers_slider_p50", "viewers_slider_p95", "viewers_kernel_memory"),
}
PACKAGES = ("numpy", "scipy", "pandas", "statsmodels", "patsy", "threadpoolctl", "ipywidgets", "bqplot", "voila",
            "ipykernel", "playwright")


def machine() -> dict:
    model = ""
    try:
        for line in Path("/proc/cpuinfo").read_text().splitlines():
            if line.startswith("model name"):
                model = line.split(":", 1)[1].strip()
                break
    except OSError:
        pass
    try:
        chromium = subprocess.run(["/usr/bin/chromium", "--version"], capture_output=True, text=True,
                                  timeout=20).stdout.strip()
    except (OSError, subprocess.TimeoutExpired):
        chromium = "not found"
    memory = ""
    try:
        memory = Path("/proc/meminfo").read_text().splitlines()[0].split(":", 1)[1].strip()
    except OSError:
        pass
    return {
        "cpu_count": os.cpu_count(),
        "cpus_usable": len(os.sched_getaffinity(0)) if hasattr(os, "sched_getaffinity") else None,
        "cpu_model": model,
        "memory_total": memory,
        "platform": platform.platform(),
        "python": platform.python_version(),
        "chromium": chromium,
        "load_average": list(os.getloadavg()) if hasattr(os, "getloadavg") else None,
    }


def versions() -> dict:
    found = {}
    for name in PACKAGES:
        try:
            found[name] = importlib.metadata.version(name)
        except importlib.metadata.PackageNotFoundError:
            found[name] = None
    return found


def error_rows(name: str, exc: BaseException) -> list[dict]:
    """One ``error: ...`` row per row id of a case that raised."""
    message = f"error: {type(exc).__name__}: {exc}"[:300]
    return [make_row(case_id, case_id, kind="absolute", goal="", goal_value=None, status=message,
                     note=f"case {name!r} raised; see the traceback on stderr") for case_id in ROWS_OF[name]]


def fmt_value(value, unit: str) -> str:
    if value is None:
        return "-"
    if unit == "MB":
        return f"{value:.0f} MB"
    if unit == "ms":
        return f"{value:.1f} ms"
    if unit == "KB":
        return f"{value:.2f} KB"
    if value >= 1.0:
        return f"{value:.3g} s"
    if value >= 1e-3:
        return f"{value * 1e3:.3g} ms"
    return f"{value * 1e6:.3g} µs"


def fmt_ratio(row: dict) -> str:
    """Speed-ups read reference/ours (bigger is better); overheads ours/reference (smaller is better)."""
    if row["ratio"] is None:
        return "-"
    if row["kind"] == "speedup":
        return f"ref/ours {row['ratio']:.3g}"
    return f"ours/ref {row['ratio']:.2f}"


def table(rows: list[dict]) -> str:
    """The results as a Markdown table (printed, and pasted into the README)."""
    lines = ["| case | ours (median) | reference (median) | ratio | goal | met |",
             "|---|---:|---:|---:|---|---|"]
    for row in rows:
        if row["status"].startswith("partial"):
            lines.append(f"| {row['case']} | {fmt_value(row['ours'], row['unit'])} | {row['status']} | - "
                         f"| {row['goal']} | - |")
            continue
        if row["status"] != "ok":
            lines.append(f"| {row['case']} | {row['status']} | | | {row['goal']} | - |")
            continue
        met = {True: "yes", False: "**no**", None: "-"}[row["met"]]
        lines.append(
            f"| {row['case']} | {fmt_value(row['ours'], row['unit'])} | {fmt_value(row['reference'], row['unit'])} "
            f"| {fmt_ratio(row)} | {row['goal']} | {met} |"
        )
    return "\n".join(lines)


def parse(argv):
    parser = argparse.ArgumentParser(prog="python -m tests.bench", description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true", help="5 repeats, smaller sizes, 20 slider steps.")
    parser.add_argument("--repeats", type=int, default=None, help="Repeats per case (default 21, quick 5).")
    parser.add_argument("--cases", default=",".join(ALL_CASES),
                        help=f"Comma-separated subset of {', '.join(ALL_CASES)}.")
    parser.add_argument("--no-browser", action="store_true", help="Skip the browser cases 6-8 and 10.")
    parser.add_argument("--budget", type=float, default=None,
                        help="Seconds per case after which no new repeats start (default 300, quick 20).")
    parser.add_argument("--out", default="bench-results.json", help="Where to write the JSON results.")
    parser.add_argument("--table-from", default=None, metavar="FILE",
                        help="Print the Markdown table of an earlier results file and exit (runs nothing).")
    args = parser.parse_args(argv)
    cases = [c.strip() for c in args.cases.split(",") if c.strip()]
    unknown = sorted(set(cases) - set(ALL_CASES))
    if unknown:
        parser.error(f"unknown case(s) {unknown}; choose from {list(ALL_CASES)}")
    if args.no_browser:
        cases = [c for c in cases if c not in ("browser", "viewers")]
    if args.repeats is not None and args.repeats < 1:
        parser.error(f"--repeats must be >= 1, got {args.repeats}")
    return args, cases


def main(argv=None) -> int:
    args, cases = parse(argv)
    if args.table_from:
        results = json.loads(Path(args.table_from).read_text())
        info = results["machine"]
        print(f"{results['mode']} run of {results['started_utc']}, {info['cpu_count']} CPUs ({info['cpu_model']}), "
              f"load average {info.get('load_average')}, {results['repeats']} repeats\n")
        print(table(results["rows"]))
        return 0
    from threadpoolctl import threadpool_info, threadpool_limits

    from .kernel_cases import CASES, Config

    repeats = args.repeats or (5 if args.quick else 21)
    budget = args.budget or (20.0 if args.quick else 300.0)
    cfg = Config(quick=args.quick, repeats=repeats, budget=budget, min_sample=0.002 if args.quick else 0.005)
    started = dt.datetime.now(dt.UTC)
    info = machine()
    libs = versions()
    print(f"levelwise benchmarks, {'quick' if args.quick else 'full'} mode, {started:%Y-%m-%d %H:%M} UTC")
    print(f"machine: {info['cpu_count']} CPUs ({info['cpus_usable']} usable), {info['cpu_model']}, "
          f"{info['memory_total']}, {info['platform']}, Python {info['python']}, {info['chromium']}")
    print("libraries: " + ", ".join(f"{k} {v}" for k, v in libs.items()))
    print(f"repeats: {repeats} (median reported), interleaved with the reference; one BLAS thread", flush=True)
    rows: list[dict] = []
    with threadpool_limits(limits=1):
        blas = [{k: d.get(k) for k in ("internal_api", "version", "num_threads")} for d in threadpool_info()]
        for name in KERNEL_CASES:
            if name not in cases:
                continue
            t0 = time.perf_counter()
            try:
                rows += CASES[name](cfg)
            except Exception as exc:  # noqa: BLE001 - reported as a row; the run goes on
                traceback.print_exc()
                rows += error_rows(name, exc)
            print(f"  {name}: {time.perf_counter() - t0:.1f} s", flush=True)
    if "browser" in cases:
        from . import browser_cases

        t0 = time.perf_counter()
        try:
            rows += browser_cases.run(args.quick)
        except Exception as exc:  # noqa: BLE001 - reported as a row; the run goes on
            traceback.print_exc()
            rows += error_rows("browser", exc)
        print(f"  browser: {time.perf_counter() - t0:.1f} s", flush=True)
    if "viewers" in cases:
        from . import viewers_case

        t0 = time.perf_counter()
        try:
            rows += viewers_case.run(args.quick)
        except Exception as exc:  # noqa: BLE001 - reported as a row; the run goes on
            traceback.print_exc()
            rows += error_rows("viewers", exc)
        print(f"  viewers: {time.perf_counter() - t0:.1f} s", flush=True)
    skipped = [name for name in ALL_CASES if name not in cases]
    for name in skipped:
        for case_id in ROWS_OF[name]:
            rows.append(make_row(case_id, case_id, kind="absolute", goal="", goal_value=None,
                                 status="skipped (not selected)"))
    order = {case_id: i for i, case_id in enumerate(ROW_IDS)}
    rows.sort(key=lambda row: order.get(row["id"], len(order)))
    elapsed = (dt.datetime.now(dt.UTC) - started).total_seconds()
    results = {
        "mode": "quick" if args.quick else "full",
        "started_utc": started.isoformat(timespec="seconds"),
        "elapsed_s": round(elapsed, 1),
        "repeats": repeats,
        "machine": info,
        "versions": libs,
        "blas": blas,
        "rows": rows,
    }
    Path(args.out).write_text(json.dumps(results, indent=2, default=float) + "\n")
    print()
    print(table(rows))
    print()
    for row in rows:
        if row.get("note"):
            print(f"- {row['id']}: {row['note']}")
    print(f"\n{len(rows)} rows in {elapsed:.0f} s; written to {args.out}. "
          "Benchmarks report; they never fail on slowness.")
    return 0
