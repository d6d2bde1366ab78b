"""Time-domain simulation of an ideal switching mixer, measured with a coherent FFT (test helper).

The mixer is y(t) = p(x(t))·s(t): the RF tone x(t) = A·cos(2·pi·f_RF·t) through an optional
memoryless power series p, times an LO switching wave s(t) that is 0/1 (single-ended) or +/-1
(balanced).  The record holds a whole number of periods of both tones (``rf_cycles`` and
``lo_cycles`` in ``n_samples`` samples), so every product |m·f_RF ± n·f_LO| falls exactly on an
FFT bin with no leakage and no window; :func:`simulate` checks that the products asked about fall
on distinct bins below Nyquist.  Frequencies are in cycles per record (FFT bins).

Independent of :mod:`mixchart`: it only samples the circuit and reads the output spectrum.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass
from typing import Literal

import numpy as np

__all__ = ["MixerOutput", "lo_driven_wave", "simulate", "switching_wave"]


def switching_wave(n_samples: int, lo_cycles: int, *, kind: Literal["unipolar", "bipolar"], duty: float = 0.5
                   ) -> np.ndarray:
    """Sampled LO switching wave, ``lo_cycles`` periods in ``n_samples`` samples.

    Parameters
    ----------
    n_samples, lo_cycles : int
        Record length, samples, and LO periods in it; ``n_samples`` must be a multiple of
        ``lo_cycles`` so that every period is sampled alike.
    kind : {"unipolar", "bipolar"}
        0/1 switch (single-ended mixer) or +/-1 switch (balanced mixer).
    duty : float
        Fraction of each period 'on' (1), 0 < duty < 1.

    Returns
    -------
    numpy.ndarray
        float64 samples.  Samples sit at half-sample phase offsets so that none falls on an edge.
    """
    if n_samples % lo_cycles:
        raise ValueError("n_samples must be a multiple of lo_cycles")
    per_period = n_samples // lo_cycles
    phase = (np.arange(n_samples) % per_period + 0.5) / per_period
    on = phase < duty
    if kind == "bipolar":
        return np.where(on, 1.0, -1.0)
    if kind == "unipolar":
        return on.astype(float)
    raise ValueError(f"kind: {kind!r}")


def lo_driven_wave(n_samples: int, lo_cycles: int, *, h2_amplitude: float = 0.0, h2_phase_rad: float = 0.0,
                   threshold: np.ndarray | float = 0.0) -> np.ndarray:
    """+/-1 switch driven by an LO with a second harmonic: ``sign(cos θ + a·cos(2θ + φ) - threshold)``.

    The switch changes state where the LO voltage crosses ``threshold`` (0: the LO's own zero
    crossings), so a second harmonic in the LO, or an RF voltage shared with the diodes passed
    as ``threshold``, moves the switching instants.  Samples at half-sample phase offsets.
    """
    theta = 2.0 * np.pi * ((lo_cycles * np.arange(n_samples)) % n_samples + 0.5) / n_samples
    v = np.cos(theta) + h2_amplitude * np.cos(2.0 * theta + h2_phase_rad)
    return np.where(v > threshold, 1.0, -1.0)


@dataclass(frozen=True)
class MixerOutput:
    """Output spectrum of a simulated mixer.

    Attributes
    ----------
    amplitudes : numpy.ndarray
        One-sided amplitude spectrum (peak amplitude per bin, same unit as the RF amplitude A).
    rf_cycles, lo_cycles : int
        RF and LO frequencies, bins.
    """

    amplitudes: np.ndarray
    rf_cycles: int
    lo_cycles: int

    def bin(self, m: int, n: int, sign: int = -1) -> int:
        """FFT bin of product |m·f_RF + sign·n·f_LO|."""
        return abs(m * self.rf_cycles + sign * n * self.lo_cycles)

    def amplitude(self, m: int, n: int, sign: int = -1) -> float:
        """Peak output amplitude of product (m, n): the difference (sign -1) or sum (+1) sideband."""
        return float(self.amplitudes[self.bin(m, n, sign)])

    def dbc(self, m: int, n: int, sign: int = -1) -> float:
        """Level of product (m, n) relative to the wanted difference product (1, 1), dB."""
        return 20.0 * math.log10(self.amplitude(m, n, sign) / self.amplitude(1, 1))


def simulate(*, switch: Literal["unipolar", "bipolar"], amplitude: float = 1.0, duty: float = 0.5,
             rf_poly: Sequence[float] = (0.0, 1.0), rf_cycles: int = 37, lo_cycles: int = 256,
             n_samples: int = 2**18, max_m: int | None = None, max_n: int = 5,
             wave: np.ndarray | None = None) -> MixerOutput:
    """Simulate y = p(A·cos(2·pi·f_RF·t))·s(t) over a coherent record and take its spectrum.

    Parameters
    ----------
    switch : {"unipolar", "bipolar"}
        0/1 switch (single-ended) or +/-1 switch (balanced), see :func:`switching_wave`.
    amplitude : float
        RF peak amplitude A.
    duty : float
        Switch duty cycle.
    rf_poly : sequence of float
        Power-series coefficients of p, lowest order first (default p(x) = x, a linear RF path).
    rf_cycles, lo_cycles, n_samples : int
        RF and LO periods in the record, and its length.  The defaults (37, 256, 2**18) give
        1024 samples per LO period: the sampled 0/1 wave's fundamental and third harmonic are
        within 2e-5 dB of the continuous Fourier series.
    max_m, max_n : int
        Products 0 <= m <= max_m (default: the degree of p), 0 <= n <= max_n are checked to fall
        on distinct bins strictly between DC and Nyquist.
    wave : numpy.ndarray, optional
        A switching wave of ``n_samples`` samples to use instead of :func:`switching_wave`
        (e.g. :func:`lo_driven_wave`); ``switch`` and ``duty`` are then ignored.

    Returns
    -------
    MixerOutput

    Raises
    ------
    ValueError
        If two of those products share a bin, or one lies at DC or at or above Nyquist.
    """
    max_m = len(rf_poly) - 1 if max_m is None else max_m
    seen: dict[int, tuple[int, int]] = {}
    for m in range(max_m + 1):
        for n in range(max_n + 1):
            if (m, n) == (0, 0):
                continue
            for sign in ((-1, 1) if m and n else (1,)):
                k = abs(m * rf_cycles + sign * n * lo_cycles)
                if not 0 < k < n_samples // 2:
                    raise ValueError(f"product ({m}, {n}) at bin {k}: not between DC and Nyquist")
                if seen.setdefault(k, (m, n)) != (m, n):
                    raise ValueError(f"products {seen[k]} and ({m}, {n}) share bin {k}")
    t = np.arange(n_samples)
    x = amplitude * np.cos(2.0 * np.pi * ((rf_cycles * t) % n_samples) / n_samples)  # exact phase
    p = np.polynomial.polynomial.polyval(x, rf_poly)
    y = p * (switching_wave(n_samples, lo_cycles, kind=switch, duty=duty) if wave is None else wave)
    spectrum = np.abs(np.fft.rfft(y)) * 2.0 / n_samples
    spectrum[0] /= 2.0
    return MixerOutput(spectrum, rf_cycles, lo_cycles)
