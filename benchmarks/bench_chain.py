"""Chain benchmark: conversion chains through the path engine, and one conversion through the bridge.

Run from the repository root::

    python benchmarks/bench_chain.py            # everything (about a minute on 2 cores)
    python benchmarks/bench_chain.py --quick    # skip the memory runs

What it measures (targets from the issue), side by side in one run:

(a) a two-mixer receiver (tracking preselector, mixer 1, first-IF filter, mixer 2, second-IF
    filter; an invented VHF/UHF plan), 10,000 channels at order 7 per stage, forward (the wanted
    signal's products) with pruning; the paths explored and pruned are printed.  Target: < 1 s.
    Beside it: the same without pruning (what pruning saves), and with the inverse search (the
    receiver's responses) added.
(b) a single-mixer plan (the 10,000-channel order-15 benchmark plan of bench_engine.py) through
    the chain code: ``evaluate_any(migrate_v1(plan))`` against today's ``evaluate(plan)``.
    Target: within 10 %.  Beside it: the path engine's own sweep of the same one-mixer chain.
(c) peak extra memory (tracemalloc, in a fresh child process each) of the largest accepted
    chain (three mixers at order 7, the most bands per channel the block sizing allows) and of
    (a); limit 500 MB (over it is WRONG, exit 1).  A chain over the band limit is refused before
    anything is allocated.

A script, not a test: a missed timing prints MISSED and the script still exits 0; it exits 1
only when something is wrong (a memory limit broken, a refusal missing, results that disagree).
"""

from __future__ import annotations

import argparse
import json
import subprocess
import sys
import time
import tracemalloc
from pathlib import Path

import numpy as np

REPO = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(REPO))

from bench_engine import SCANNER  # noqa: E402  (the single-conversion benchmark plan)

from mixchart.analysis import evaluate  # noqa: E402
from mixchart.chains import analyse_chain, evaluate_any  # noqa: E402
from mixchart.errors import SweepTooLargeError  # noqa: E402
from mixchart.models import chain_from_dict, migrate_v1  # noqa: E402
from mixchart.plan import plan_from_dict  # noqa: E402

#: Invented demo scenario: a two-conversion receiver, 200-400 MHz on a 20 kHz raster (10,001
#: channels), 70 MHz first IF, 10.7 MHz second IF.
TWO_MIXER = {
    "schema_version": 2, "name": "benchmark: two-conversion receiver", "direction": "down",
    "rf": {"start_hz": 200e6, "stop_hz": 400e6, "step_hz": 20e3},
    "signal": {"bandwidth_hz": 12.5e3, "level_dbm": -60},
    "max_order": 7,
    "requirement": {"response_rejection_db": 70, "output_spur_dbc": -70},
    "chain": [
        {"kind": "filter", "name": "preselector",
         "filter": {"kind": "tuned", "q_loaded": 30, "stages": 2, "tracks_channel": True}},
        {"kind": "mixer", "name": "mixer 1", "lo": {"side": "high", "step_hz": 10e3},
         "if": {"center_hz": 70e6, "bandwidth_hz": 200e3}},
        {"kind": "filter", "name": "first-IF filter",
         "filter": {"kind": "chebyshev1", "response": "bandpass", "order": 5, "ripple_db": 0.5,
                    "f_center_hz": 70e6, "bandwidth_hz": 400e3}},
        {"kind": "mixer", "name": "mixer 2", "lo": {"mode": "fixed", "fixed_hz": 59.3e6},
         "if": {"center_hz": 10.7e6, "bandwidth_hz": 15e3}},
        {"kind": "filter", "name": "second-IF filter",
         "filter": {"kind": "butterworth", "response": "bandpass", "order": 6, "f_center_hz": 10.7e6,
                    "bandwidth_hz": 20e3}},
    ],
}


def best_of(fn, repeat: int = 3) -> tuple[float, object]:
    best, out = float("inf"), None
    for _ in range(repeat):
        t0 = time.perf_counter()
        out = fn()
        best = min(best, time.perf_counter() - t0)
    return best, out


def largest_chain() -> dict:
    """Three mixers at order 7: 50 x 50 x 50 bands per channel before pruning, over 2,001 channels."""
    data = json.loads(json.dumps(TWO_MIXER))
    data["rf"] = {"start_hz": 200e6, "stop_hz": 240e6, "step_hz": 20e3}
    data["chain"] += [{"kind": "mixer", "name": "mixer 3", "lo": {"mode": "fixed", "fixed_hz": 10.245e6},
                       "if": {"center_hz": 455e3, "bandwidth_hz": 15e3}},
                      {"kind": "filter", "name": "third-IF filter",
                       "filter": {"kind": "butterworth", "response": "bandpass", "order": 4,
                                  "f_center_hz": 455e3, "bandwidth_hz": 15e3}}]
    data["requirement"] = {"response_rejection_db": 300, "output_spur_dbc": -300}  # nothing pruned by level
    return data


def memory_child(which: str) -> None:
    """In a fresh process: analyse a chain, print its traced peak memory as JSON."""
    data = largest_chain() if which == "largest" else TWO_MIXER
    plan = chain_from_dict(data)
    tracemalloc.start()
    t0 = time.perf_counter()
    result = analyse_chain(plan, responses=which != "largest")
    elapsed = time.perf_counter() - t0
    _, peak = tracemalloc.get_traced_memory()
    print(json.dumps({"which": which, "seconds": elapsed, "peak_mb": peak / 1e6,
                      "explored": result.summary.paths_explored, "pruned": result.summary.paths_pruned}))


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true", help="skip the memory runs")
    parser.add_argument("--memory-child", help=argparse.SUPPRESS)
    args = parser.parse_args()
    if args.memory_child:
        memory_child(args.memory_child)
        return 0
    problems = []
    plan = chain_from_dict(TWO_MIXER)
    print(f"(a) {plan.name}: {plan.rf.n_channels} channels, order 7 per stage")
    t_fwd, fwd = best_of(lambda: analyse_chain(plan, responses=False))
    t_raw, raw = best_of(lambda: analyse_chain(plan, responses=False, prune=False), repeat=1)
    t_all, full = best_of(lambda: analyse_chain(plan), repeat=1)
    s = fwd.summary
    print(f"    forward, pruned:        {t_fwd:6.3f} s  (target < 1 s: {'met' if t_fwd < 1 else 'MISSED'}); "
          f"paths explored {s.paths_explored}, pruned {s.paths_pruned}")
    print(f"    forward, no pruning:    {t_raw:6.3f} s  ({t_raw / t_fwd:.1f}x the pruned sweep); "
          f"paths explored {raw.summary.paths_explored}")
    print(f"    forward + inverse:      {t_all:6.3f} s  ({t_all / t_fwd:.1f}x); responses explored "
          f"{full.summary.responses_explored}, pruned {full.summary.responses_pruned}")
    if not np.array_equal(np.minimum(fwd.worst_margin_db, 30), np.minimum(raw.worst_margin_db, 30)):
        problems.append("pruning changed a worst margin within the headroom")
    print(f"    result: {full.summary.line()}")

    single = plan_from_dict(SCANNER)
    chain = migrate_v1(single)
    print(f"(b) {single.name}: {single.rf.n_channels} channels, order {single.max_order}, one mixer")
    t_v1, ev1 = best_of(lambda: evaluate(single))
    t_br, ev2 = best_of(lambda: evaluate_any(chain))
    t_pe, pe = best_of(lambda: analyse_chain(chain), repeat=1)
    ratio = t_br / t_v1
    print(f"    evaluate(plan):                 {t_v1:6.3f} s")
    print(f"    evaluate_any(migrate_v1(plan)): {t_br:6.3f} s  ({ratio:.2f}x; target within 10 %: "
          f"{'met' if ratio <= 1.10 else 'MISSED'})")
    print(f"    analyse_chain (path engine):    {t_pe:6.3f} s  ({t_pe / t_v1:.1f}x)")
    if not np.array_equal(ev1.worst_margin_db, ev2.worst_margin_db):
        problems.append("the bridge changed a result")
    if not np.allclose(ev1.worst_margin_db, pe.worst_margin_db, atol=1e-6, rtol=0):
        problems.append("the path engine disagrees with evaluate on the one-mixer chain")

    print("(c) memory (fresh process each; limit 500 MB)")
    try:
        big = dict(largest_chain())
        big["chain"] = big["chain"] + [{"kind": "amplifier", "gain_db": 10}, {"kind": "mixer", "name": "mixer 4",
                                         "lo": {"mode": "fixed", "fixed_hz": 1e6},
                                         "if": {"center_hz": 545e3, "bandwidth_hz": 12e3}}]
        tracemalloc.start()
        analyse_chain(chain_from_dict(big))
        problems.append("a chain over the band limit was not refused")
    except SweepTooLargeError as exc:
        _, peak = tracemalloc.get_traced_memory()
        print(f"    over the limit: refused before allocation ({peak / 1e6:.1f} MB traced): {exc}")
    finally:
        tracemalloc.stop()
    if not args.quick:
        for which in ("largest", "two-mixer"):
            done = subprocess.run([sys.executable, __file__, "--memory-child", which], capture_output=True,
                                  text=True, check=False)
            if done.returncode:
                problems.append(f"memory child {which} failed: {done.stderr.strip()[-300:]}")
                continue
            mem = json.loads(done.stdout)
            state = "ok" if mem["peak_mb"] < 500 else "WRONG"
            print(f"    {which}: peak {mem['peak_mb']:.0f} MB ({state}) in {mem['seconds']:.1f} s; "
                  f"paths explored {mem['explored']}, pruned {mem['pruned']}")
            if mem["peak_mb"] >= 500:
                problems.append(f"{which}: peak {mem['peak_mb']:.0f} MB over 500 MB")
    for p in problems:
        print(f"WRONG: {p}")
    return 1 if problems else 0


if __name__ == "__main__":
    sys.exit(main())
