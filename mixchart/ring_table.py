"""A mixer's level table estimated from its diode circuit: tones, coherent record, FFT, dynamic range.

:func:`solve_ring` drives a :class:`~mixchart.ring_solver.Circuit` with an LO sine (plus the
LO's second harmonic, if given) and a signal sine, solves it quasi-statically at every sample
of one common period (:mod:`mixchart.ring_solver`) and reads product (m, n) from the output
port's spectrum.  Choices, each checked in the tests:

- **Tones.** The circuit has no memory, so a product's level does not depend on the ratio of
  the two frequencies, only on the two tones' products not sharing a bin.  The signal makes
  one cycle per record and the LO ``K`` cycles (``K`` a power of two above 4·(order + 1)), so
  product (m, n) sits at bin ``n·K ± m``: distinct for every n below ``P/2`` and every m below
  ``K/2``, far beyond the order asked for (:func:`product_bin`).  The record holds
  ``N = K·P`` samples, ``P`` per LO period; its sampling is coherent (whole periods of both
  tones), so no window is needed.
- **No hard switch.** The diodes' exponential law and series resistance make every waveform
  smooth, so its spectrum falls faster than any power of n and the sampled record converges;
  a sampled hard 0/1 switch would instead leave an aliasing floor near -60 dBc.  ``P`` doubles
  (each level starting from the one before) until no resolved level moves by more than
  ``tol_db``: that change is reported as the convergence.
- **Dynamic range.** The floor under every level is the larger of (a) the aliasing guard: the
  strongest bin among the highest LO harmonics (n near P/2) and the highest signal harmonics
  (m near K/2) the record resolves, which bounds what folds back, and (b) the solve's own
  error: the last Newton step and four rounding units per sample, carried to the output and
  bounded over any bin.  Levels below the floor are held at it (never claimed lower).
- **Sidebands.** A table entry is the stronger of the sum and difference products; the wanted
  (1, 1) reference is the weaker of its two (both pessimistic; with no phase imbalance they
  are equal).

Pure numpy; never imports a plotting or widget library.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from .errors import CircuitError, field_error
from .levels import FLOOR_DBC, MAX_HARMONIC
from .ring_solver import Circuit, _cholesky_solve, build_network, solve_newton, solve_single_diode

__all__ = ["RingResult", "solve_ring", "tone_plan", "product_bin", "conversion_waveform", "DEFAULT_TOL_DB",
           "MAX_SAMPLES", "CONDUCTION_RULE"]

#: A table has converged when no level above the floor (by 20 dB) moves by more than this between
#: a record and one of twice the samples, dB.
DEFAULT_TOL_DB = 0.01
#: Largest record solved, samples (about 0.3 s per million samples and Newton iteration here).
MAX_SAMPLES = 2**21
#: The floor aimed at, dBc: samples double while the floor falls towards it, and K doubles while the
#: signal harmonics that fold onto the table (extrapolated) are above it.  With a strong signal they fall
#: slowly (about 5 dB per order at 10 dB under the LO, from this solver).
TARGET_FLOOR_DBC = -200.0
MAX_LO_CYCLES = 1024
#: Fewest and first samples per LO period.
_P_START = 64
#: What "the ring conducts" means: at the LO's peak some diode carries at least n·V_T / R_LO,
#: so its own incremental resistance falls below the LO port's (common practice, no source).
CONDUCTION_RULE = "a diode's peak current reaches n·V_T / R_LO"
_EPS = float(np.finfo(float).eps)


@dataclass(frozen=True)
class RingResult:
    """What the circuit solve gives: levels, conversion loss, isolations, and how far to trust them.

    Attributes
    ----------
    level_dbc : numpy.ndarray
        (H + 1, H + 1) levels of products (m, n), dBc relative to the wanted (1, 1) output, held
        at :attr:`floor_dbc` where the solve cannot resolve them; [1, 1] = 0; [0, 0] at -300.
    raw_dbc : numpy.ndarray
        The same before holding at the floor (for tests of the floor itself).
    conversion_loss_db : float
        Available signal power over the wanted output power in the output termination, dB.
    lo_if_isolation_db, lo_rf_isolation_db, rf_if_isolation_db : float
        Available LO power over the LO-frequency power in the IF and RF terminations, and
        available signal power over the signal-frequency power at the output, dB (bounded by
        the floor: a perfect balance gives the dynamic range, not infinity).
    floor_dbc, dynamic_range_db : float
        The floor under the levels, dBc, and its distance below the wanted output, dB.
    convergence_db : float
        Largest change of a resolved level on the last doubling of the samples, dB.
    n_samples, lo_cycles, samples_per_lo_period : int
        The record: N samples, K LO cycles (the signal makes one), P = N / K.
    newton_iterations : int
        Newton steps of the last level (0: the single diode's closed form).
    peak_diode_current_a : float
        Largest forward current of any diode, A.
    lo_drive_dbm, rf_drive_dbm : float
        Available LO and signal power, dBm.
    direction : str
        "down" (signal into the RF port, output at IF) or "up" (into IF, out of the RF port).
    circuit : Circuit
    """

    level_dbc: np.ndarray = field(repr=False)
    raw_dbc: np.ndarray = field(repr=False)
    conversion_loss_db: float
    lo_if_isolation_db: float
    lo_rf_isolation_db: float
    rf_if_isolation_db: float
    floor_dbc: float
    dynamic_range_db: float
    convergence_db: float
    n_samples: int
    lo_cycles: int
    samples_per_lo_period: int
    newton_iterations: int
    peak_diode_current_a: float
    lo_drive_dbm: float
    rf_drive_dbm: float
    direction: str
    circuit: Circuit = field(repr=False)

    @property
    def max_harmonic(self) -> int:
        """Highest harmonic index in the table."""
        return self.level_dbc.shape[0] - 1

    def to_frame(self):
        """Levels, dBc: index m (signal harmonic), columns n (LO harmonic); (0, 0) as NaN.

        Returns
        -------
        pandas.DataFrame
        """
        import pandas as pd

        values = np.where(self.level_dbc <= FLOOR_DBC, np.nan, self.level_dbc)
        h = range(self.max_harmonic + 1)
        return pd.DataFrame(values, index=pd.Index(h, name="m"), columns=pd.Index(h, name="n"))


def tone_plan(max_order: int) -> int:
    """LO cycles per record ``K`` for a table to ``max_order``: a power of two >= 4·(max_order + 1), >= 16.

    The signal makes one cycle per record, so product (m, n) lies at bin ``n·K ± m``
    (:func:`product_bin`); m < K/2 keeps every such bin apart.
    """
    return max(16, 1 << math.ceil(math.log2(4 * (max_order + 1))))


def product_bin(m: int, n: int, sign: int, lo_cycles: int) -> int:
    """FFT bin of product ``|m·f_sig + sign·n·f_LO|`` when the signal makes 1 cycle and the LO ``lo_cycles``."""
    return abs(m + sign * n * lo_cycles)


def _check_inputs(lo_drive_dbm: float, rf_drive_dbm: float, max_order: int, direction: str, where: str) -> None:
    for name, value in (("lo_drive_dbm", lo_drive_dbm), ("rf_drive_dbm", rf_drive_dbm)):
        if not (isinstance(value, (int, float)) and math.isfinite(value) and -200.0 <= value <= 60.0):
            raise field_error(CircuitError, f"{where}{name}", value, "a finite drive from -200 to +60 dBm")
    whole = isinstance(max_order, (int, np.integer)) and not isinstance(max_order, bool)
    if not whole or not 1 <= max_order <= MAX_HARMONIC:
        raise field_error(CircuitError, "max_order", max_order, f"an integer from 1 to {MAX_HARMONIC}")
    if direction not in ("down", "up"):
        raise field_error(CircuitError, "direction", direction, "'down' or 'up'")


def _drivers(circuit: Circuit, n_samples: int, lo_cycles: int, lo_amp_v: float, sig_amp_v: float,
             lo_h2: float, direction: str, idx: np.ndarray | None = None) -> np.ndarray:
    """The (7, S) driver waveforms at samples ``idx`` of an N-sample record (V)."""
    j = np.arange(n_samples) if idx is None else idx
    th_lo = 2.0 * np.pi * ((lo_cycles * j) % n_samples) / n_samples
    th_sig = 2.0 * np.pi * j / n_samples

    def lo_wave(th: np.ndarray) -> np.ndarray:
        return np.cos(th) + lo_h2 * np.cos(2.0 * th)

    out = np.zeros((7, j.size))
    base = lo_amp_v * lo_wave(th_lo)
    out[0] = base
    if circuit.topology != "single_ended":
        half = math.radians(circuit.lo_balun.phase_imbalance_deg) / 2.0
        n1, n2 = circuit.lo_balun.turns()
        if half:
            out[1] = n1 * (lo_amp_v * lo_wave(th_lo + half) - base)
            out[2] = -n2 * (lo_amp_v * lo_wave(th_lo - half) - base)
    sig = sig_amp_v * np.cos(th_sig)
    if direction == "down":
        out[3] = sig
        half = math.radians(circuit.rf_balun.phase_imbalance_deg) / 2.0
        if half and circuit.topology != "single_ended":
            m1, m2 = circuit.rf_balun.turns()
            out[4] = m1 * (sig_amp_v * np.cos(th_sig + half) - sig)
            out[5] = -m2 * (sig_amp_v * np.cos(th_sig - half) - sig)
    else:
        out[6] = sig
    return out


def _solve_record(circuit, net, drv: np.ndarray, w0: np.ndarray | None, max_iterations: int):
    """Diode currents (D, S), I + Is, the last relative step and the Newton iterations for drivers (7, S)."""
    e = net.drive @ drv
    if circuit.topology == "single_ended":
        _, nvt, _ = circuit.diode_arrays()
        diode = circuit.diodes[0]
        i = solve_single_diode(e[0], float(net.z_ohm[0, 0]), diode, float(nvt[0]))[None, :]
        return i, np.maximum(i + diode.is_a, 1e-300), 4 * _EPS, 0
    i, w, report = solve_newton(e, net.z_ohm, circuit, w0_a=w0, max_iterations=max_iterations)
    return i, w, report.last_step, report.iterations


def _spectrum(v: np.ndarray) -> np.ndarray:
    return np.abs(np.fft.rfft(v)) * (2.0 / v.size)


def _signal_alias_amp(amp: np.ndarray, k: int, h: int) -> float:
    """Estimated level of the signal harmonics that fold onto the table (m = K - h), by extending
    the harmonics' envelope geometrically from m = K/4 and K/2 - 1 (the strongest bin over n)."""
    n_clusters = amp.size // k
    def envelope(m: int) -> float:
        return float(max(amp[[c * k + m for c in range(n_clusters) if c * k + m < amp.size]].max(),
                         amp[[c * k - m for c in range(1, n_clusters)]].max(), 1e-300))
    m1, m2 = k // 4, k // 2 - 1
    l1, l2 = math.log(envelope(m1)), math.log(envelope(m2))
    slope = min(l2 - l1, 0.0) / (m2 - m1)  # never assumed to rise
    return math.exp(l2 + slope * (k - h - m2))


def _amplitudes(amp: np.ndarray, h: int, k: int) -> np.ndarray:
    """Product amplitudes (h+1, h+1): the stronger of the sum and difference bins."""
    m = np.arange(h + 1)[:, None]
    n = np.arange(h + 1)[None, :]
    return np.maximum(amp[n * k + m], amp[np.abs(n * k - m)])


def solve_ring(circuit: Circuit, *, lo_drive_dbm: float, rf_drive_dbm: float, max_order: int = 7,
               direction: str = "down", lo_harmonic2_dbc: float | None = None, tol_db: float = DEFAULT_TOL_DB,
               max_samples: int = MAX_SAMPLES, max_iterations: int = 200, where: str = "") -> RingResult:
    """Solve a diode mixer circuit over one common period and read its level table.

    Parameters
    ----------
    circuit : Circuit
        The circuit (topology, diodes, baluns, port resistances).
    lo_drive_dbm : float
        Available LO power at the LO port, dBm.
    rf_drive_dbm : float
        Available power of the signal at the input port (RF for "down", IF for "up"), dBm.
    max_order : int
        The table holds 0 <= m, n <= max_order.
    direction : {"down", "up"}
        Signal into the RF port and out of the IF port, or into IF and out of RF.
    lo_harmonic2_dbc : float, optional
        The LO's second harmonic at the LO port, dBc, in phase with the fundamental's peak (the
        worst phase for the switching duty; derived by hand: it shortens one half-cycle by
        2·a/pi of a cycle).  None: a pure sine.
    tol_db : float
        Convergence tolerance of the sample doubling, dB.
    max_samples : int
        Largest record tried, samples.
    max_iterations : int
        Most Newton steps per record.
    where : str
        Prefix for field names in errors (``"mixer."`` from a plan).

    Returns
    -------
    RingResult

    Raises
    ------
    CircuitError
        Naming the field and the value: a drive out of range; an LO drive too low for the
        diodes to conduct (:data:`CONDUCTION_RULE`); a Newton solve or a sample doubling that
        does not converge; a non-finite result.
    """
    _check_inputs(lo_drive_dbm, rf_drive_dbm, max_order, direction, where)
    if lo_harmonic2_dbc is not None and not (math.isfinite(lo_harmonic2_dbc) and lo_harmonic2_dbc <= 0):
        raise field_error(CircuitError, f"{where}lo_harmonic2_dbc", lo_harmonic2_dbc, "a finite level <= 0 dBc")
    net = build_network(circuit)
    r_in = circuit.rf_port_ohm if direction == "down" else circuit.if_port_ohm
    out_row = 2 if direction == "down" else 1
    lo_amp = math.sqrt(8.0 * circuit.lo_port_ohm * 1e-3 * 10.0 ** (lo_drive_dbm / 10.0))
    sig_amp = math.sqrt(8.0 * r_in * 1e-3 * 10.0 ** (rf_drive_dbm / 10.0))
    h2 = 0.0 if lo_harmonic2_dbc is None else 10.0 ** (lo_harmonic2_dbc / 20.0)
    setup = (circuit, net, lo_amp, sig_amp, h2, direction, out_row, r_in, max_iterations, where)
    k = tone_plan(max_order)
    while True:
        lad = _ladder(setup, k, max_order, tol_db, max_samples, lo_drive_dbm)
        # the signal harmonics that fold onto the table: double K until they are out of the way
        if lad["signal_alias_dbc"] <= TARGET_FLOOR_DBC or 2 * k > MAX_LO_CYCLES or 2 * lad["n"] > max_samples:
            break
        k *= 2
    rec, floor_dbc = lad["rec"], lad["floor_dbc"]
    cl, iso = _finish(circuit, out_row, lo_amp, sig_amp, r_in, rec, lad["floors"])
    raw = rec["level"].copy()
    held = np.maximum(raw, floor_dbc)
    held[1, 1], held[0, 0], raw[1, 1], raw[0, 0] = 0.0, FLOOR_DBC, 0.0, FLOOR_DBC
    if not (np.isfinite(held).all() and math.isfinite(cl) and all(math.isfinite(x) for x in iso)):
        raise CircuitError(f"{where}circuit: the solve gave a value that is not a number; check the figures")
    for arr in (held, raw):
        arr.flags.writeable = False
    return RingResult(level_dbc=held, raw_dbc=raw, conversion_loss_db=cl, lo_if_isolation_db=iso[0],
                      lo_rf_isolation_db=iso[1], rf_if_isolation_db=iso[2], floor_dbc=floor_dbc,
                      dynamic_range_db=-floor_dbc, convergence_db=lad["change"], n_samples=lad["n"], lo_cycles=k,
                      samples_per_lo_period=lad["p"], newton_iterations=lad["iterations"],
                      peak_diode_current_a=lad["peak"], lo_drive_dbm=float(lo_drive_dbm),
                      rf_drive_dbm=float(rf_drive_dbm), direction=direction, circuit=circuit)


def _ladder(setup, k: int, max_order: int, tol_db: float, max_samples: int, lo_drive_dbm: float) -> dict:
    """Solve records of K LO cycles and P = 64, 128, ... samples per LO period until the table converges.

    Stops when no level resolved above the floor moves by more than ``tol_db`` and the floor has
    reached :data:`TARGET_FLOOR_DBC` or stopped falling (by 6 dB a doubling: rounding, not aliasing).
    """
    circuit, net, lo_amp, sig_amp, h2, direction, out_row, r_in, max_iterations, where = setup
    p = max(_P_START, 1 << math.ceil(math.log2(2 * max_order + 8)))
    n = k * p
    drv = _drivers(circuit, n, k, lo_amp, sig_amp, h2, direction)
    i, w, step, iters = _solve_record(circuit, net, drv, None, max_iterations)
    _check_conduction(circuit, i, lo_drive_dbm, where)
    previous = None
    change, floor_before = math.inf, math.inf
    while True:
        v = net.port_drive @ drv + net.port_current @ i
        rec = _read(circuit, net, v, i, step, k, max_order, out_row, lo_amp, sig_amp, r_in)
        if previous is not None:
            # what the doubling moved: the coarser record's aliasing error, an upper bound on this one's
            moved = [float(np.abs(a - b).max()) for a, b in zip(rec["amps"], previous["amps"], strict=True)]
            floors = [max(x, y, z, 1e-300) for x, y, z in zip(moved, rec["solver"], rec["signal_alias"],
                                                               strict=True)]
            floor_dbc = max(20.0 * math.log10(floors[out_row] / rec["ref"]), FLOOR_DBC)
            level, prev_level = rec["level"], previous["level"]
            resolved = (prev_level > floor_dbc + 20.0) & (level > floor_dbc + 20.0)
            change = float(np.abs(prev_level - level)[resolved].max(initial=0.0))
            still_falling = floor_dbc > TARGET_FLOOR_DBC and floor_dbc < floor_before - 6.0
            if change <= tol_db and (not still_falling or 2 * n > max_samples):
                return {"rec": rec, "floors": floors, "floor_dbc": floor_dbc, "change": change, "n": n, "p": p,
                        "iterations": iters, "peak": float(i.max()),
                        "signal_alias_dbc": 20.0 * math.log10(max(rec["signal_alias"][out_row], 1e-300) / rec["ref"])}
            floor_before = floor_dbc
        if 2 * n > max_samples:
            raise CircuitError(
                f"{where}circuit: the level table did not converge by doubling the samples: {n} samples "
                f"({p} per LO period) still move a level by {change:.3g} dB (tolerance {tol_db:g} dB); "
                "the diodes switch too sharply for the record (raise the series resistance or lower the drive)"
            )
        previous = rec
        # the next record keeps every sample and solves the new ones between them, from their neighbours
        odd = 2 * np.arange(n) + 1
        w0 = np.sqrt(w * np.roll(w, -1, axis=1))  # geometric mean: log-linear between neighbours
        drv_odd = _drivers(circuit, 2 * n, k, lo_amp, sig_amp, h2, direction, odd)
        i_odd, w_odd, step_odd, iters = _solve_record(circuit, net, drv_odd, w0, max_iterations)
        i = np.stack([i, i_odd], axis=2).reshape(i.shape[0], 2 * n)
        w = np.stack([w, w_odd], axis=2).reshape(w.shape[0], 2 * n)
        full = np.empty((7, 2 * n))
        full[:, 0::2], full[:, 1::2] = drv, drv_odd
        drv, step = full, max(step, step_odd)
        n, p = 2 * n, 2 * p


def _check_conduction(circuit: Circuit, i: np.ndarray, lo_drive_dbm: float, where: str) -> None:
    _, nvt, _ = circuit.diode_arrays()
    need = float(nvt.min()) / circuit.lo_port_ohm
    peak = float(i.max())
    if peak < need:
        raise field_error(CircuitError, f"{where}lo_drive_dbm", lo_drive_dbm,
                          f"too low for the diodes to conduct: the peak diode current {peak:.3g} A stays below "
                          f"n·V_T/R_LO = {need:.3g} A ({CONDUCTION_RULE}), so the circuit is no switching mixer; "
                          "raise the LO drive or use diodes of a larger saturation current")


def _read(circuit, net, v, i, step, k, max_order, out_row, lo_amp, sig_amp, r_in) -> dict:
    """The table's amplitudes at each port, the wanted reference and the solve's own error bound of one record."""
    # per-sample error bound of each port voltage (the last Newton step and rounding), over a bin at most 2·max
    di = step * (np.abs(i).max() + max(d.is_a for d in circuit.diodes))
    err = np.abs(net.port_current).sum(axis=1) * di + 4 * _EPS * np.abs(v).max(axis=1)
    spectra = [_spectrum(v[row]) for row in range(3)]
    amps = [_amplitudes(sp, max_order, k) for sp in spectra]
    ref = float(min(spectra[out_row][k + 1], spectra[out_row][k - 1]))
    with np.errstate(divide="ignore"):
        level = np.maximum(20.0 * np.log10(amps[out_row] / ref), FLOOR_DBC)
    return {"amps": amps, "ref": ref, "level": level, "solver": list(2.0 * err),
            "signal_alias": [_signal_alias_amp(sp, k, max_order) for sp in spectra]}


def _finish(circuit: Circuit, out_row: int, lo_amp: float, sig_amp: float, r_in: float, rec: dict,
            floors: list[float]) -> tuple[float, tuple[float, float, float]]:
    """Conversion loss (dB) and isolations (dB, bounded by the floors) of a converged record."""
    r_out = circuit.if_port_ohm if out_row == 2 else circuit.rf_port_ohm
    p_in = sig_amp**2 / (8.0 * r_in)
    p_lo = lo_amp**2 / (8.0 * circuit.lo_port_ohm)
    cl = 10.0 * math.log10(p_in / (rec["ref"] ** 2 / (2.0 * r_out)))

    def iso(p_avail: float, row: int, m: int, n: int, r: float) -> float:
        a = max(float(rec["amps"][row][m, n]), floors[row])
        return 10.0 * math.log10(p_avail / (a**2 / (2.0 * r)))

    return cl, (iso(p_lo, 2, 0, 1, circuit.if_port_ohm), iso(p_lo, 1, 0, 1, circuit.rf_port_ohm),
                iso(p_in, out_row, 1, 0, r_out))


def conversion_waveform(circuit: Circuit, *, lo_drive_dbm: float, direction: str = "down",
                        lo_harmonic2_dbc: float | None = None, samples: int = 4096) -> tuple[np.ndarray, np.ndarray]:
    """The small-signal conversion function of a circuit over one LO period.

    ``g(theta) = d v_out / d e_sig`` at the LO phase theta with no signal: the time-varying gain
    from the signal EMF to the output voltage, V/V.  An ideal matched double-balanced ring's is
    a +/-1/2 square wave; a finite diode turn-on rounds it and opens a dead zone round each LO
    zero crossing.  To first order in the signal, the (1, n) products are this function's
    Fourier coefficients.

    Parameters
    ----------
    circuit : Circuit
    lo_drive_dbm : float
        Available LO power, dBm.
    direction : {"down", "up"}
        Which port takes the signal and which gives the output.
    lo_harmonic2_dbc : float, optional
        The LO's second harmonic, dBc (as :func:`solve_ring`).
    samples : int
        Samples over the LO period.

    Returns
    -------
    theta_rad, gain : numpy.ndarray
        LO phase (rad, from 0 at the LO's peak) and g, V/V.
    """
    _check_inputs(lo_drive_dbm, -100.0, 1, direction, "")
    net = build_network(circuit)
    lo_amp = math.sqrt(8.0 * circuit.lo_port_ohm * 1e-3 * 10.0 ** (lo_drive_dbm / 10.0))
    h2 = 0.0 if lo_harmonic2_dbc is None else 10.0 ** (lo_harmonic2_dbc / 20.0)
    drv = _drivers(circuit, samples, 1, lo_amp, 0.0, h2, direction)
    i, w, _, _ = _solve_record(circuit, net, drv, None, 200)
    _, nvt, rs = (a[:, None] for a in circuit.diode_arrays())
    col, row = (3, 2) if direction == "down" else (6, 1)
    # linearised: (diag(Rs + nVt/w) + Z)·dI = drive[:, col]
    d = i.shape[0]
    jac = np.repeat(net.z_ohm[:, :, None], samples, axis=2)
    for q in range(d):
        jac[q, q] += rs[q] + nvt[q] / w[q]
    rhs = np.repeat(net.drive[:, col][:, None], samples, axis=1)
    di = _cholesky_solve(jac, rhs)
    gain = net.port_drive[row, col] + net.port_current[row] @ di
    return 2.0 * np.pi * np.arange(samples) / samples, gain
