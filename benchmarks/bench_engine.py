"""Engine benchmark: the vectorised engine against the plain-Python reference, like for like.

Run from the repository root::

    python benchmarks/bench_engine.py            # everything (about two minutes on 2 cores)
    python benchmarks/bench_engine.py --quick    # skip the worst-accepted-request memory run
    python benchmarks/bench_engine.py --profile  # also print where evaluate() spends its time

What it measures (targets from the issue), on a 10,000-channel order-15 tuning sweep (an
invented UHF scanner plan); each engine row is printed beside the plain-Python reference
(tests/reference.py) doing the same work, and their ratio:

(a) products layer: ``product_bands`` + ``response_bands`` + ``overlaps`` and, per channel,
    the worst in-band spur (the lowest-order in-band product other than the wanted), chunked
    as evaluate() chunks; against ``reference.sweep`` doing exactly that.  No target (it is
    the layer under evaluate()).
(b) full evaluation without filters: ``evaluate(plan)`` (levels, margins, per-channel and
    per-product worst cases, frames) against ``reference.sweep_levels`` (levels, margins,
    per-channel and per-product worst cases).  Target: < 0.2 s and >= 100x the plain loop.
(c) the same with a tracking tuned-circuit preselector and a Chebyshev IF filter, every band
    taking the filter's least loss over the band.  Target: < 0.5 s; its plain-loop ratio is
    printed beside it, and so is the same sweep with each band's loss read at one point (the
    former rule), for what the least-loss rule costs.
(d) one filter over many frequencies: a 7th-order Chebyshev band-pass ``atten_db`` over
    2,000,000 points in one call, against calling it once per point (timed on the first
    ``FILTER_LOOP_POINTS`` and scaled).  Target: >= 1e7 points/s (moved here from
    tests/test_filters.py: timings are not tests).

The plain-Python reference is timed on the first ``REFERENCE_CHANNELS`` channels and scaled
linearly to the full sweep (its cost per channel does not depend on the channel count).
Before timing, the engine's answers are checked against the reference on that subset.

Also: peak extra memory of the worst accepted request (MAX_CHANNELS channels at MAX_ORDER,
with a requirement that makes every row fail) in a fresh child process (limit 500 MB: over it
is WRONG, exit 1, since the limit is what MAX_CHANNELS promises), and that an absurd request
(1e15 channels) is refused before anything is allocated.

This is a script, not a test.  Timings depend on the machine and its load: a missed target
prints MISSED and the script still exits 0.  It exits 1 only when something is *wrong*: the
engine disagrees with the reference, the absurd request is not refused, or the memory child
fails.
"""

from __future__ import annotations

import argparse
import contextlib
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
from mixchart.filters import build_filter  # noqa: E402
from mixchart.physics.products import overlaps, product_bands, product_family, response_bands, response_family  # noqa: E402
from mixchart.plan import MAX_CHANNELS, MAX_ORDER, plan_from_dict  # noqa: E402

ORDER = 15
N_CHANNELS = 10_000
REFERENCE_CHANNELS = 200
FILTER_POINTS = 2_000_000
FILTER_LOOP_POINTS = 2_000

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


def raw_layer(plan) -> np.ndarray:
    """Products layer over every channel, chunked: bands, responses, in-band test, worst in-band spur.

    Down-conversion plans (the output passband is the IF).  Returns, per channel, the column
    (into ``product_family(plan.max_order)``) of the in-band product other than the wanted with
    the lowest (order, m, sign) -- the family is sorted that way, so it is the first such
    column -- or -1.  The same work as ``reference.sweep``.
    """
    ch, lo = plan.channels_hz(), plan.lo_hz()
    pf, rf = product_family(plan.max_order), response_family(plan.max_order)
    if_lo, if_hi = plan.if_.f_low_hz, plan.if_.f_high_hz
    one_one = (pf.rf_harmonic == 1) & (pf.lo_harmonic == 1)
    worst = np.empty(ch.size, dtype=np.int64)
    for start in range(0, ch.size, CHUNK_CHANNELS):
        rows = slice(start, start + CHUNK_CHANNELS)
        c, f = ch[rows], lo[rows]
        summ, diff = c + f, np.abs(c - f)
        wanted_sign = np.where((summ >= if_lo) & (summ <= if_hi) & ~((diff >= if_lo) & (diff <= if_hi)), 1, -1)
        _, p_low, p_high = product_bands(c, f, plan.signal.bandwidth_hz, pf)
        response_bands(f, if_lo, if_hi, rf)
        spur = overlaps(p_low, p_high, if_lo, if_hi)
        spur &= ~(one_one[None, :] & (pf.sign[None, :] == wanted_sign[:, None]))
        first = np.argmax(spur, axis=1)
        worst[rows] = np.where(spur[np.arange(first.size), first], first, -1)
    return worst


def check_against_reference(plan, n: int) -> list[str]:
    """Problems found comparing the engine with the reference on the first ``n`` channels (empty: agree)."""
    problems = []
    pf = product_family(plan.max_order)
    family = list(zip(pf.rf_harmonic.tolist(), pf.lo_harmonic.tolist(), pf.sign.tolist(), strict=True))
    engine_worst = [None if k < 0 else family[k] for k in raw_layer(plan)[:n].tolist()]
    reference_worst = [row["worst_in_band"] for row in ref.sweep(plan, limit=n)]
    if engine_worst != reference_worst:
        problems.append("products layer: worst in-band spur differs from reference.sweep")
    evaluation = evaluate(plan)
    expected = ref.sweep_levels(plan, limit=n)["channels"]
    labels = evaluation.channels_frame()["label"].tolist()[:n]
    for i, channel in enumerate(expected):
        got, want = float(evaluation.worst_margin_db[i]), channel["worst_margin_db"]
        if not (got == want or abs(got - want) <= 1e-9) or labels[i] != channel["worst"][1]:
            problems.append(f"evaluate: channel {i} worst {got!r} {labels[i]!r}, "
                            f"reference {want!r} {channel['worst'][1]!r}")
            break
    return problems


def memory_child(n_channels: int) -> None:
    """Run in a fresh process: evaluate the worst accepted request, print peak memory as JSON.

    ``n_channels`` channels at MAX_ORDER with a requirement no row can meet, so every
    (channel, product) row fails and the kept failing rows are at their bound.
    """
    step_hz = 1_000.0
    plan = plan_from_dict({**SCANNER, "max_order": MAX_ORDER, "requirement": {"min_rejection_db": 300},
                           "rf": {"start_hz": 100e6, "stop_hz": 100e6 + (n_channels - 1) * step_hz,
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
    """Ask for 1e15 channels (1 Hz to 1 THz in 1 mHz steps, each field in its range); return the
    error text and the traced peak, bytes."""
    tracemalloc.start()
    try:
        plan_from_dict({**SCANNER, "rf": {"start_hz": "1 Hz", "stop_hz": "1 THz", "step_hz": 1e-3}})
    except SweepTooLargeError as exc:
        message = str(exc)
    else:  # pragma: no cover - would be a bug
        message = "NOT REFUSED"
    _, peak = tracemalloc.get_traced_memory()
    tracemalloc.stop()
    return message, peak


@contextlib.contextmanager
def point_rule():
    """The former rule, for the cost of the least-loss one: each band's loss read at one point.

    The point is the band's point nearest the filter's centre (the channel for a tracking
    filter); exact for the monotone and tuned filters of this plan, optimistic for elliptic
    zeros and measured notches, which is why the engine no longer uses it.
    """
    import mixchart.analysis.block as block
    import mixchart.context as context

    def band_atten(filt, f_low, f_high, centre, field):
        if filt.tracks_channel and centre is not None:
            shape = np.broadcast_shapes(f_low.shape, f_high.shape)
            fc = np.broadcast_to(np.asarray(centre, dtype=float)[:, None], shape)
            point = np.clip(fc, f_low, f_high)
        else:
            fc = None
            point = np.clip(0.5 * sum(filt.passband_hz()), f_low, f_high)
        return context.capped(filt.atten_db(point, fc), field, point)

    saved = block.band_atten, context.band_atten
    block.band_atten = context.band_atten = band_atten
    try:
        yield
    finally:
        block.band_atten, context.band_atten = saved


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true", help="skip the worst-accepted-request memory run")
    parser.add_argument("--profile", action="store_true",
                        help="print a cProfile of evaluate() on the 10,000-channel sweep")
    parser.add_argument("--repeat", type=int, default=5, help="timing repeats of the engine (best of)")
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
    scale = N_CHANNELS / REFERENCE_CHANNELS

    # correctness first: the engine and the reference agree on the subset the reference is timed on
    problems = [f"{what}: {p}" for what, p_ in (("no filters", plan), ("filters", filtered))
                for p in check_against_reference(p_, REFERENCE_CHANNELS)]

    evaluate(plan)  # warm up (imports, caches)
    timings = {
        "raw": best_of(lambda: raw_layer(plan), args.repeat),
        "ref_raw": best_of(lambda: ref.sweep(plan, limit=REFERENCE_CHANNELS), 3) * scale,
        "eval": best_of(lambda: evaluate(plan), args.repeat),
        "ref_eval": best_of(lambda: ref.sweep_levels(plan, limit=REFERENCE_CHANNELS), 3) * scale,
        "filt": best_of(lambda: evaluate(filtered), args.repeat),
        "ref_filt": best_of(lambda: ref.sweep_levels(filtered, limit=REFERENCE_CHANNELS), 3) * scale,
    }
    with point_rule():
        timings["filt_point"] = best_of(lambda: evaluate(filtered), args.repeat)

    print(f"mixchart engine benchmark: {N_CHANNELS:,} channels x order {ORDER} "
          f"({k} products+responses per channel, {pairs:,} pairs); chunk {CHUNK_CHANNELS} channels")
    print(f"engine: best of {args.repeat}; plain-Python reference (tests/reference.py): best of 3 on the first "
          f"{REFERENCE_CHANNELS} channels, scaled linearly x{scale:g} to {N_CHANNELS:,}")
    print()
    header = f"{'':<4}{'what':<64} {'time':>9} {'pairs/s':>10} {'ratio':>7}  target"
    print(header)
    print("-" * (len(header) + 26))
    missed: list[str] = []

    def row(tag: str, what: str, seconds: float, loop_seconds: float | None = None,
            targets: tuple[tuple[str, bool], ...] = ()) -> None:
        ratio = f"{loop_seconds / seconds:6.0f}x" if loop_seconds else f"{'1x':>7}"
        missed.extend(f"{what}: {text}" for text, passed in targets if not passed)
        verdict = "; ".join(f"{text} {'ok' if passed else 'MISSED'}" for text, passed in targets)
        print(f"{tag:<4}{what:<64} {seconds:8.3f}s {pairs / seconds:10.3g} {ratio}  {verdict}")

    t = timings
    row("(a)", "plain loop: reference.sweep (scaled)", t["ref_raw"])
    row("", "engine: products layer (bands, responses, in-band, worst)", t["raw"], t["ref_raw"])
    row("(b)", "plain loop: reference.sweep_levels, no filters (scaled)", t["ref_eval"])
    row("", "engine: evaluate(plan), no filters", t["eval"], t["ref_eval"],
        (("< 0.2 s", t["eval"] < 0.2), (">= 100x", t["ref_eval"] / t["eval"] >= 100)))
    row("(c)", "plain loop: reference.sweep_levels, preselector + IF (scaled)", t["ref_filt"])
    row("", "engine: evaluate(plan), tuned preselector + Chebyshev IF", t["filt"], t["ref_filt"],
        (("< 0.5 s", t["filt"] < 0.5),))
    row("", "engine, each band's loss read at one point (the former rule)", t["filt_point"], t["ref_filt"])
    print(f"    the least-loss-over-band rule costs {t['filt'] / t['filt_point']:.2f}x the one-point rule "
          f"({1e3 * (t['filt'] - t['filt_point']):+.0f} ms on this sweep)")
    chebyshev = build_filter({"kind": "chebyshev1", "response": "bandpass", "order": 7, "ripple_db": 0.5,
                              "f_center_hz": 10e6, "bandwidth_hz": 1e6})
    f_hz = np.linspace(0, 100e6, FILTER_POINTS)
    chebyshev.atten_db(f_hz[:10])  # warm up
    t_vec = best_of(lambda: chebyshev.atten_db(f_hz), args.repeat)
    t_loop = best_of(lambda: [chebyshev.atten_db(f_hz[i:i + 1]) for i in range(FILTER_LOOP_POINTS)], 3)
    t_loop *= FILTER_POINTS / FILTER_LOOP_POINTS
    rate = FILTER_POINTS / t_vec
    if rate < 1e7:
        missed.append("filter atten_db: >= 1e7 points/s")
    print(f"{'(d)':<4}{f'filter: Chebyshev-7 band-pass atten_db, {FILTER_POINTS:,} points':<64} "
          f"{t_vec:8.3f}s {rate:10.3g} {t_loop / t_vec:6.0f}x  >= 1e7 points/s {'ok' if rate >= 1e7 else 'MISSED'}")
    print(f"    (ratio against one call per point, timed on {FILTER_LOOP_POINTS:,} points and scaled; "
          "the pairs/s column is points/s on this row)")
    print("ratio = plain-loop time / engine time for the same work; pairs/s = (channel, product or response) "
          "pairs per second")
    print(f"(load average while measuring: {', '.join(f'{x:.2f}' for x in os.getloadavg())} on {os.cpu_count()} CPUs)")
    print()

    message, peak = absurd_request()
    refused = message != "NOT REFUSED" and peak < 1e6
    if not refused:
        problems.append("the 1e15-channel request was not refused before allocating")
    print(f"absurd request (1e15 channels): refused={refused}, traced peak {peak / 1e3:.1f} kB")
    print(f"  message: {message}")

    if not args.quick:
        n = MAX_CHANNELS
        done = subprocess.run([sys.executable, __file__, "--memory-child", str(n)],
                              capture_output=True, text=True, cwd=REPO)
        if done.returncode != 0:
            print(done.stderr)
            problems.append("the memory child process failed")
        else:
            mem = json.loads(done.stdout.strip().splitlines()[-1])
            fits = mem["tracemalloc_peak_mb"] < 500 and mem["rss_growth_mb"] < 500
            if not fits:
                problems.append(f"the worst accepted request ({n:,} channels, order {MAX_ORDER}) exceeds 500 MB")
            print(f"worst accepted request, {n:,} channels at order {MAX_ORDER}, every row failing "
                  f"(fresh process): {mem['seconds']:.1f} s, "
                  f"tracemalloc peak {mem['tracemalloc_peak_mb']:.0f} MB, "
                  f"ru_maxrss growth {mem['rss_growth_mb']:.0f} MB "
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
    for problem in problems:
        print(f"WRONG: {problem}")
    if missed:
        print(f"targets MISSED ({len(missed)}): {'; '.join(missed)}  (timings are not tests: exit status 0)")
    else:
        print("all targets met")
    return 1 if problems else 0


if __name__ == "__main__":
    sys.exit(main())
