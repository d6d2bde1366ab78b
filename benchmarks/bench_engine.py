"""Engine benchmark: vectorised evaluation against the plain-Python reference loop.

Run from the repository root::

    python benchmarks/bench_engine.py            # everything (about a minute)
    python benchmarks/bench_engine.py --quick    # skip the 1,000,000-channel memory run
    python benchmarks/bench_engine.py --profile  # also print where evaluate() spends its time

What it measures (targets from the issue):

1. A 10,000-channel tuning sweep at order 15 (an invented UHF scanner plan):
   ``evaluate(plan)`` without filters (target < 0.2 s and >= 100x the plain loop), the raw
   products layer (product_bands + response_bands + overlaps over all channels, chunked),
   and the plain-Python reference (tests/reference.py) doing the same products, responses
   and in-band work on the first 200 channels, scaled linearly to 10,000.
2. The same sweep with a tracking tuned-circuit preselector and a Chebyshev IF filter,
   full level evaluation (target < 0.5 s).
3. Peak extra memory of a 1,000,000-channel order-15 sweep, in a fresh child process
   (tracemalloc peak and the growth of ru_maxrss; target < 500 MB).
4. That an absurd request (1e12 channels) is refused before anything is allocated.

This is a script, not a test: it prints a table and exits 0 (1 if a target is missed).
"""

from __future__ import annotations

import argparse
import json
import os
import resource
import subprocess
import sys
import time
import tracemalloc
from pathlib import Path

REPO = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(REPO))
sys.path.insert(0, str(REPO / "tests"))

import numpy as np  # noqa: E402

import reference as ref  # noqa: E402  tests/reference.py
from mixchart import evaluate  # noqa: E402
from mixchart.analysis import CHUNK_CHANNELS  # noqa: E402
from mixchart.errors import SweepTooLargeError  # noqa: E402
from mixchart.plan import plan_from_dict  # noqa: E402
from mixchart.products import overlaps, product_bands, product_family, response_bands, response_family  # noqa: E402

ORDER = 15
N_CHANNELS = 10_000
REFERENCE_CHANNELS = 200

#: Invented demo scenario: a UHF scanning receiver, 400.0-1399.9 MHz on a 100 kHz raster
#: (10,000 channels), 70 MHz IF, tracking high-side LO.
SCANNER = {
    "name": "benchmark: UHF scanner, 70 MHz IF",
    "direction": "down",
    "rf": {"start_hz": "400 MHz", "stop_hz": "1399.9 MHz", "step_hz": "100 kHz"},
    "signal": {"bandwidth_hz": "25 kHz", "level_dbm": -30},
    "lo": {"mode": "tracking", "side": "high"},
    "if": {"center_hz": "70 MHz", "bandwidth_hz": "30 kHz"},
    "max_order": ORDER,
    "mixer": {"rf_ref_dbm": -30},
    "requirement": {"min_rejection_db": 70},
}
FILTERS = {
    "rf": {"kind": "tuned", "q_loaded": 40, "stages": 2, "tracks_channel": True},
    "if": {"kind": "chebyshev1", "response": "bandpass", "order": 5, "ripple_db": 0.1,
           "f_center_hz": "70 MHz", "bandwidth_hz": "40 kHz"},
}


def best_of(fn, repeat: int) -> float:
    """Smallest wall time of ``repeat`` calls, s."""
    best = float("inf")
    for _ in range(repeat):
        t0 = time.perf_counter()
        fn()
        best = min(best, time.perf_counter() - t0)
    return best


def raw_layer(plan) -> int:
    """Products, responses and the in-band test over every channel, chunked; returns in-band count."""
    ch, lo = plan.channels_hz(), plan.lo_hz()
    pf, rf = product_family(plan.max_order), response_family(plan.max_order)
    if_lo, if_hi = plan.if_.lo_hz, plan.if_.hi_hz
    hits = 0
    for start in range(0, ch.size, CHUNK_CHANNELS):
        rows = slice(start, start + CHUNK_CHANNELS)
        _, p_low, p_high = product_bands(ch[rows], lo[rows], plan.signal.bandwidth_hz, pf)
        response_bands(lo[rows], if_lo, if_hi, rf)
        hits += int(np.count_nonzero(overlaps(p_low, p_high, if_lo, if_hi)))
    return hits


def memory_child(n_channels: int) -> None:
    """Run in a fresh process: evaluate an n-channel order-15 sweep, print peak memory as JSON."""
    step_hz = 1_000.0
    plan = plan_from_dict({**SCANNER, "rf": {"start_hz": 100e6, "stop_hz": 100e6 + (n_channels - 1) * step_hz,
                                             "step_hz": step_hz}})
    assert plan.rf.n_channels == n_channels
    rss0 = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss
    tracemalloc.start()
    t0 = time.perf_counter()
    result = evaluate(plan)
    elapsed = time.perf_counter() - t0
    _, peak = tracemalloc.get_traced_memory()
    tracemalloc.stop()
    rss1 = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss
    frames = sum(f.memory_usage(deep=True).sum() for f in (result.worst_row, result.worst_by_product, result.hits))
    print(json.dumps({
        "n_channels": n_channels, "seconds": elapsed, "tracemalloc_peak_mb": peak / 1e6,
        "rss_growth_mb": (rss1 - rss0) / 1e3, "result_frames_mb": frames / 1e6,
        "failing_rows": result.summary.n_failing_rows,
    }))


def absurd_request() -> tuple[str, float]:
    """Ask for 1e12 channels; return the error text and the traced peak, bytes."""
    tracemalloc.start()
    try:
        plan_from_dict({**SCANNER, "rf": {"start_hz": "1 MHz", "stop_hz": 1e6 + (1e12 - 1) * 1.0, "step_hz": "1 Hz"}})
    except SweepTooLargeError as exc:
        message = str(exc)
    else:  # pragma: no cover - would be a bug
        message = "NOT REFUSED"
    _, peak = tracemalloc.get_traced_memory()
    tracemalloc.stop()
    return message, peak


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true", help="skip the 1,000,000-channel memory run")
    parser.add_argument("--profile", action="store_true", help="print a cProfile of evaluate() on the 10,000-channel sweep")
    parser.add_argument("--repeat", type=int, default=5, help="timing repeats (best of)")
    parser.add_argument("--memory-child", type=int, help=argparse.SUPPRESS)
    args = parser.parse_args(argv)
    if args.memory_child:
        memory_child(args.memory_child)
        return 0

    plan = plan_from_dict(SCANNER)
    filtered = plan_from_dict({**SCANNER, "filters": FILTERS})
    assert plan.rf.n_channels == N_CHANNELS
    k = len(product_family(ORDER)) + len(response_family(ORDER))
    pairs = N_CHANNELS * k  # (channel, product-or-response) pairs per sweep

    evaluate(plan)  # warm up (imports, caches)
    t_eval = best_of(lambda: evaluate(plan), args.repeat)
    t_raw = best_of(lambda: raw_layer(plan), args.repeat)
    t_filt = best_of(lambda: evaluate(filtered), args.repeat)
    t_ref_subset = best_of(lambda: ref.sweep(plan, limit=REFERENCE_CHANNELS), 3)
    t_ref = t_ref_subset * N_CHANNELS / REFERENCE_CHANNELS

    # the reference and the engine agree on the in-band set of the subset (sanity)
    rows = ref.sweep(plan, limit=REFERENCE_CHANNELS)
    ch, lo = plan.channels_hz()[:REFERENCE_CHANNELS], plan.lo_hz()[:REFERENCE_CHANNELS]
    _, p_low, p_high = product_bands(ch, lo, plan.signal.bandwidth_hz, product_family(ORDER))
    engine_in_band = int(np.count_nonzero(overlaps(p_low, p_high, plan.if_.lo_hz, plan.if_.hi_hz)))
    assert engine_in_band == sum(len(r["in_band"]) for r in rows), "engine and reference disagree"

    print(f"mixchart engine benchmark: {N_CHANNELS:,} channels x order {ORDER} "
          f"({k} products+responses per channel, {pairs:,} pairs); chunk {CHUNK_CHANNELS} channels; best of {args.repeat}")
    print(f"plain-Python reference timed on the first {REFERENCE_CHANNELS} channels ({t_ref_subset * 1e3:.0f} ms) "
          f"and scaled linearly x{N_CHANNELS // REFERENCE_CHANNELS}")
    print()
    header = f"{'what':<56} {'time':>9} {'pairs/s':>10} {'vs loop':>8}  target"
    print(header)
    print("-" * (len(header) + 24))
    ok = True

    def row(what: str, seconds: float, targets: tuple[tuple[str, bool], ...] = ()) -> None:
        nonlocal ok
        ok &= all(passed for _, passed in targets)
        verdict = "; ".join(f"{text} {'ok' if passed else 'MISSED'}" for text, passed in targets)
        print(f"{what:<56} {seconds:8.3f}s {pairs / seconds:10.3g} {t_ref / seconds:7.0f}x  {verdict}")

    row("plain-Python loop: products+responses+in-band (scaled)", t_ref)
    row("raw layer: product_bands+response_bands+overlaps", t_raw)
    row("evaluate(plan), no filters (levels, margins, frames)", t_eval,
        (("< 0.2 s", t_eval < 0.2), (">= 100x loop", t_ref / t_eval >= 100)))
    row("evaluate(plan), tuned preselector + Chebyshev IF", t_filt, (("< 0.5 s", t_filt < 0.5),))
    print(f"(load average while measuring: {', '.join(f'{x:.2f}' for x in os.getloadavg())} on {os.cpu_count()} CPUs)")
    print()

    message, peak = absurd_request()
    refused = message != "NOT REFUSED" and peak < 1e6
    ok &= refused
    print(f"absurd request (1e12 channels): refused={refused}, traced peak {peak / 1e3:.1f} kB")
    print(f"  message: {message}")

    if not args.quick:
        n = 1_000_000
        done = subprocess.run([sys.executable, __file__, "--memory-child", str(n)], capture_output=True, text=True, cwd=REPO)
        if done.returncode != 0:
            print(done.stderr)
            return 1
        mem = json.loads(done.stdout.strip().splitlines()[-1])
        fits = mem["tracemalloc_peak_mb"] < 500 and mem["rss_growth_mb"] < 500
        ok &= fits
        print(f"{n:,}-channel order-{ORDER} sweep (fresh process): {mem['seconds']:.1f} s, "
              f"tracemalloc peak {mem['tracemalloc_peak_mb']:.0f} MB, ru_maxrss growth {mem['rss_growth_mb']:.0f} MB "
              f"(target < 500 MB: {'ok' if fits else 'MISSED'})")
        print(f"  result frames (worst row per channel, worst per product, hits), pandas deep memory_usage "
              f"(counts the shared label strings once per row): {mem['result_frames_mb']:.0f} MB; "
              f"failing rows counted {mem['failing_rows']:,}")

    if args.profile:
        import cProfile
        import pstats

        profiler = cProfile.Profile()
        profiler.runcall(evaluate, plan)
        pstats.Stats(profiler).sort_stats("tottime").print_stats(15)
    print()
    print("all targets met" if ok else "SOME TARGETS MISSED")
    return 0 if ok else 1


if __name__ == "__main__":
    sys.exit(main())
