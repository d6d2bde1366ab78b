"""Benchmark of the diode circuit model: a table to order 7, time per solved sample, convergence, LO sweep.

Run: ``PYTHONPATH=. python benchmarks/bench_ring.py``.  Prints; asserts nothing (timings are never tested).
The closed form and the Newton solver are timed side by side in one run on the same single-diode samples.
"""

from __future__ import annotations

import time

import numpy as np

from mixchart.ring_solver import TYPICAL_DIODE, Circuit, build_network, solve_newton, solve_single_diode
from mixchart.ring_table import solve_ring


def best_of(fn, repeat=3):
    best, out = float("inf"), None
    for _ in range(repeat):
        t = time.perf_counter()
        out = fn()
        best = min(best, time.perf_counter() - t)
    return best, out


def main() -> None:
    ring = Circuit()
    print("double-balanced ring, typical diodes, order 7 (best of 3)")
    for lo, rf in ((7.0, -30.0), (7.0, -20.0), (7.0, -10.0)):
        t, r = best_of(lambda lo=lo, rf=rf: solve_ring(ring, lo_drive_dbm=lo, rf_drive_dbm=rf, max_order=7))
        print(f"  LO {lo:+.0f} dBm, RF {rf:+.0f} dBm: {t * 1e3:7.1f} ms  {r.n_samples} samples (K {r.lo_cycles}, "
              f"P {r.samples_per_lo_period}), {t / r.n_samples * 1e6:.2f} us per final sample, "
              f"{r.newton_iterations} Newton steps on the last record; floor {r.floor_dbc:.1f} dBc, "
              f"converged to {r.convergence_db:.2g} dB")
    # convergence by doubling: the table at the solver's choice against one forced to 4x the samples
    r = solve_ring(ring, lo_drive_dbm=7.0, rf_drive_dbm=-30.0, max_order=7)
    fine = solve_ring(ring, lo_drive_dbm=7.0, rf_drive_dbm=-30.0, max_order=7, tol_db=1e-4)
    resolved = (r.level_dbc > r.floor_dbc + 20) & (fine.level_dbc > fine.floor_dbc + 20)
    print(f"convergence: {r.n_samples} -> {fine.n_samples} samples moves a resolved level by at most "
          f"{np.abs(r.level_dbc - fine.level_dbc)[resolved].max():.2e} dB ({int(resolved.sum())} levels), "
          f"conversion loss by {abs(r.conversion_loss_db - fine.conversion_loss_db):.2e} dB")
    print("LO-drive sweep (RF -30 dBm, order 7): LO dBm, CL dB, (1,3) (1,5) (3,1) (3,3) dBc, ms")
    for lo in np.linspace(-1.0, 14.0, 11):
        t = time.perf_counter()
        r = solve_ring(ring, lo_drive_dbm=float(lo), rf_drive_dbm=-30.0, max_order=7)
        t = time.perf_counter() - t
        lv = r.level_dbc
        print(f"  {lo:+5.1f}  {r.conversion_loss_db:5.2f}  {lv[1, 3]:7.2f} {lv[1, 5]:7.2f} {lv[3, 1]:8.2f} "
              f"{lv[3, 3]:8.2f}  {t * 1e3:6.1f}")
    # one diode: closed form against Newton, same samples, same run
    single = Circuit(topology="single_ended", diodes=(TYPICAL_DIODE,))
    net = build_network(single)
    v = 2.0 * np.cos(2 * np.pi * np.arange(2**16) / 2**16)
    nvt = float(single.diode_arrays()[1][0])
    t_closed, closed = best_of(lambda: solve_single_diode(v, float(net.z_ohm[0, 0]), TYPICAL_DIODE, nvt))
    t_newton, (newton, _, rep) = best_of(lambda: solve_newton(v[None, :], net.z_ohm, single))
    err = np.max(np.abs(newton[0] - closed) / (np.abs(closed) + TYPICAL_DIODE.is_a))
    print(f"one diode, {v.size} samples: Wright omega {t_closed * 1e3:.1f} ms, Newton {t_newton * 1e3:.1f} ms "
          f"({rep.iterations} steps from cold), ratio Newton/closed {t_newton / t_closed:.1f}; "
          f"largest relative difference {err:.1e}")


if __name__ == "__main__":
    main()
