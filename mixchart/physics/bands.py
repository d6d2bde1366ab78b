"""Frequency bands through a mixer, forward and inverse (pure numpy).

A band is a closed interval ``[low, high]`` of frequency, Hz, ``0 <= low <= high``.  The
product ``(m, n, s)`` of a band ``[a, b]`` with an LO at ``f_lo`` is the set of
``|m·f + s·n·f_lo|`` for ``f`` in the band (``s = +1`` the sum, ``-1`` the difference): an
interval of width ``m·(b - a)``, folded at 0 Hz when it straddles it.  The inverse asks which
inputs ``f >= 0`` land in a given output band through ``(m, n, s)``: up to two intervals
(``m·f + s·n·f_lo`` in ``[a, b]`` or in ``[-b, -a]``), each ``1/m`` as wide as the output band.

References
----------
The product frequencies ``|m·f_RF ± n·f_LO|`` and the responses ``|n·f_LO ± f_IF| / m``
are the textbook mixer relations (e.g. Maas, *Microwave Mixers*, 2nd ed., ch. 1).
"""

from __future__ import annotations

import numpy as np

__all__ = ["mix_band", "inverse_mix_band"]


def mix_band(low_hz: np.ndarray, high_hz: np.ndarray, f_lo_hz: np.ndarray, m: np.ndarray, n: np.ndarray,
             sign: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """The band ``|m·f + sign·n·f_lo|`` made from ``[low, high]`` (all arguments broadcast).

    Parameters
    ----------
    low_hz, high_hz : numpy.ndarray
        Input band edges, Hz, ``0 <= low <= high``.
    f_lo_hz : numpy.ndarray
        LO frequency, Hz.
    m, n : numpy.ndarray of int
        Harmonic of the input (``m >= 0``) and of the LO (``n >= 0``).
    sign : numpy.ndarray of int
        +1 for the sum, -1 for the difference.

    Returns
    -------
    low_hz, high_hz : numpy.ndarray
        The product's band, Hz (folded at 0 Hz: a band straddling 0 becomes ``[0, max]``).
    inverted : numpy.ndarray of bool
        True where the product's frequency falls as the input's rises (the spectrum is
        turned over): ``m·f + s·n·f_lo`` is negative, or (never for ``m >= 1``) ``m`` is 0.
    """
    m = np.asarray(m, dtype=float)
    a = m * low_hz + sign * n * f_lo_hz
    b = m * high_hz + sign * n * f_lo_hz
    out_low = np.where(a >= 0, a, np.where(b <= 0, -b, 0.0))
    out_high = np.maximum(np.abs(a), np.abs(b))
    inverted = (a + b) < 0  # the band's middle sits on the negative side: the sense flips
    return out_low, out_high, inverted


def inverse_mix_band(low_hz: np.ndarray, high_hz: np.ndarray, f_lo_hz: np.ndarray, m: np.ndarray, n: np.ndarray,
                     sign: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
    """Inputs ``f >= 0`` with ``|m·f + sign·n·f_lo|`` inside the output band ``[low, high]``.

    Parameters
    ----------
    low_hz, high_hz : numpy.ndarray
        Output band, Hz, ``0 <= low <= high``.
    f_lo_hz : numpy.ndarray
        LO frequency, Hz.
    m, n, sign : numpy.ndarray of int
        The product, ``m >= 1``.

    Returns
    -------
    low_a, high_a, low_b, high_b : numpy.ndarray
        Two candidate input bands, Hz: ``a`` from ``m·f + s·n·f_lo`` in ``[low, high]`` (the
        product's sense is kept), ``b`` from it in ``[-high, -low]`` (the sense turns over).
        Each is clipped to ``f >= 0``.
    valid : numpy.ndarray of bool, shape (2, ...)
        Whether each candidate is non-empty.
    """
    m = np.asarray(m, dtype=float)
    shift = sign * n * f_lo_hz
    low_a, high_a = (low_hz - shift) / m, (high_hz - shift) / m
    low_b, high_b = (-high_hz - shift) / m, (-low_hz - shift) / m
    valid = np.stack([high_a >= 0, high_b >= 0])
    # a band that touches 0 Hz from both branches would be counted twice: branch b keeps f > 0 only
    valid[1] &= ~((low_hz <= 0) & (high_b <= 0))
    return np.maximum(low_a, 0.0), high_a, np.maximum(low_b, 0.0), high_b, valid
