"""Sampling physics: Nyquist zones, folding, aliases, harmonics and clock spurs; pure numpy.

An ADC sampling at ``fs`` turns a real input at ``f`` into a tone in the first Nyquist zone
``[0, fs/2]``: ``f mod fs``, reflected about ``fs/2`` when above it.  Nyquist zone ``z >= 1``
is ``(z-1)·fs/2 <= f < z·fs/2``; in an even zone the spectrum arrives mirrored (its sense
flips).  **Edge convention:** a zone holds its lower edge, so a frequency exactly at
``k·fs/2`` is in zone ``k + 1``; it folds to ``0`` or ``fs/2`` either way.  A band's upper
edge is closed (a band ``[a, k·fs/2]`` lies in zone ``k``).

Every function takes float64 Hz (scalars or arrays that broadcast) and never loops over
frequencies in Python.  Nothing here imports a plotting or widget library.

References
----------
.. [1] W. Kester (ed.), *Data Conversion Handbook*, Analog Devices, 2005, ch. 2, "Sampling
   theory": Nyquist zones and the folding of real inputs (from memory: chapter title).
.. [2] B. Brannon, "Sampled Systems and the Effects of Clock Phase Noise and Jitter",
   Analog Devices AN-756: clock phase modulation reaches a sampled tone scaled by
   ``20·log10(f_in/fs)`` (from memory; the result is derived in :func:`clock_spur_sideband_dbc`
   and checked by simulation in ``tests/test_sampling.py``).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..errors import PlanError, SweepTooLargeError, UnitError, field_error, one_line
from ..units import format_frequency

__all__ = [
    "nyquist_zone", "fold_hz", "FoldedBand", "fold_band", "AliasBands", "alias_input_bands", "zone_band_hz",
    "check_band_in_zone", "clock_spur_sideband_dbc", "clock_spur_sideband_hz", "harmonic_bands", "MAX_ALIAS_BANDS",
]

#: Most input bands :func:`alias_input_bands` lists (common practice, no source: far more than
#: any anti-alias filter plan looks at, small enough to stay well under a megabyte).
MAX_ALIAS_BANDS = 100_000
#: Highest zone index handled: ``2·f/fs`` must stay an exact float64 integer range.
_MAX_ZONE = 2.0**51


def _frequency(value: object, name: str, *, positive: bool = False) -> np.ndarray:
    """``value`` as a float64 array of finite Hz, >= 0 (> 0 with ``positive``), or a one-line error."""
    allowed = f"must be a finite frequency {'>' if positive else '>='} 0 Hz"
    try:
        f = np.asarray(value, dtype=np.float64)
    except (TypeError, ValueError):
        raise field_error(UnitError, name, value, allowed) from None
    bad = ~np.isfinite(f) | ((f <= 0.0) if positive else (f < 0.0))
    if bad.any():
        raise field_error(UnitError, name, float(f[bad].flat[0]), allowed)
    return f


def _whole(value: object, name: str, cls: type, lowest: int, highest: int | None = None) -> int:
    whole = not isinstance(value, bool) and isinstance(value, (int, np.integer))
    if not whole or value < lowest or (highest is not None and value > highest):
        span = f"from {lowest} to {highest}" if highest is not None else f">= {lowest}"
        raise field_error(cls, name, value, f"must be a whole number {span}")
    return int(value)


def _zone_index(f: np.ndarray, fs: np.ndarray, name: str = "f_hz") -> np.ndarray:
    """``floor(2·f/fs)`` (zone - 1) as float64, refusing ratios beyond exact float integers."""
    with np.errstate(over="ignore"):  # an overflow gives inf, refused just below
        q = np.floor(2.0 * f / fs)
    if np.any(q > _MAX_ZONE):
        raise field_error(UnitError, name, float(np.broadcast_to(f, q.shape)[q > _MAX_ZONE][0]),
                          "2·f/fs must be at most 2**51 (too many zones above 0 Hz)")
    return q


def _fold(f: np.ndarray, fs: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    q = _zone_index(f, fs)
    even_zone = np.mod(q, 2.0) == 1.0  # zone q + 1 is even
    half = np.floor(q / 2.0)
    folded = np.where(even_zone, (half + 1.0) * fs - f, f - half * fs)
    return np.clip(folded, 0.0, fs / 2.0), even_zone


def nyquist_zone(f_hz, fs_hz) -> np.ndarray:
    """Nyquist zone of each frequency: ``z >= 1`` with ``(z-1)·fs/2 <= f < z·fs/2``.

    Parameters
    ----------
    f_hz, fs_hz : float or array_like
        Input frequencies (finite, >= 0) and sample rate (> 0), Hz; they broadcast.

    Returns
    -------
    numpy.ndarray of int64
        The zone (0-d for scalar input).  ``f = k·fs/2`` exactly is in zone ``k + 1``.
    """
    f, fs = _frequency(f_hz, "f_hz"), _frequency(fs_hz, "fs_hz", positive=True)
    return _zone_index(f, fs).astype(np.int64) + 1


def fold_hz(f_hz, fs_hz) -> tuple[np.ndarray, np.ndarray]:
    """Where a real input appears after sampling: its image in the first Nyquist zone.

    Parameters
    ----------
    f_hz, fs_hz : float or array_like
        Input frequencies (finite, >= 0) and sample rate (> 0), Hz; they broadcast.

    Returns
    -------
    f_folded_hz : numpy.ndarray
        ``f mod fs``, reflected to ``fs - (f mod fs)`` when above ``fs/2``; in ``[0, fs/2]``, Hz.
    inverted : numpy.ndarray of bool
        True where ``f`` is in an even zone: a band there arrives with its sense flipped.  (Kester [1]_.)
    """
    f, fs = _frequency(f_hz, "f_hz"), _frequency(fs_hz, "fs_hz", positive=True)
    return _fold(f, fs)


@dataclass(frozen=True)
class FoldedBand:
    """A band's image in ``[0, fs/2]``: up to two pieces per band, in Hz.

    Every array has the broadcast shape of the inputs plus a last axis of 2 (the pieces), except
    ``covers_zone``.  Piece 0 comes from the zone of the band's lower edge, piece 1 (valid only when
    the band crosses one multiple of ``fs/2``) from the next zone; the two share the edge ``0`` or
    ``fs/2`` they fold about, overlap there, and have opposite ``inverted`` flags.
    """

    #: Lower edge of each piece, Hz (0 where the piece is not valid).
    low_hz: np.ndarray
    #: Upper edge of each piece, Hz (0 where the piece is not valid).
    high_hz: np.ndarray
    #: True where the piece arrives with its sense flipped (it comes from an even zone).
    inverted: np.ndarray
    #: True where the piece exists.
    valid: np.ndarray
    #: True where the image is the whole ``[0, fs/2]``.  A band spanning three or more zones is given as
    #: the one piece ``[0, fs/2]`` with ``inverted`` False (both senses land everywhere).
    covers_zone: np.ndarray

    @property
    def count(self) -> np.ndarray:
        """Number of valid pieces per band (1 or 2)."""
        return self.valid.sum(axis=-1)


def fold_band(f_low_hz, f_high_hz, fs_hz) -> FoldedBand:
    """Fold the band ``[f_low, f_high]`` into the first Nyquist zone.

    Parameters
    ----------
    f_low_hz, f_high_hz, fs_hz : float or array_like
        Band edges, Hz, ``0 <= f_low <= f_high``, and sample rate, Hz, > 0; they broadcast.

    Returns
    -------
    FoldedBand
        One piece for a band inside one zone; two overlapping pieces for a band straddling one
        multiple of ``fs/2`` (it folds back onto itself); the whole ``[0, fs/2]`` for a band that
        spans three or more zones.  A band wider than ``fs/2`` spans at least two zones, and it
        covers the whole first zone exactly when it holds a whole Nyquist zone (``covers_zone``).
    """
    lo, hi, fs = np.broadcast_arrays(
        _frequency(f_low_hz, "f_low_hz"), _frequency(f_high_hz, "f_high_hz"), _frequency(fs_hz, "fs_hz", positive=True)
    )
    if np.any(hi < lo):
        raise field_error(UnitError, "f_high_hz", float(hi[hi < lo][0]), "must be >= f_low_hz")
    z_lo = _zone_index(lo, fs, "f_low_hz") + 1.0
    _zone_index(hi, fs, "f_high_hz")
    z_hi = np.maximum(np.ceil(2.0 * hi / fs), z_lo)  # the zone of a closed upper edge
    f_lo, f_hi = _fold(lo, fs)[0], _fold(hi, fs)[0]
    f_edge = np.where(np.mod(z_lo, 2.0) == 0.0, 0.0, fs / 2.0)  # image of z_lo·fs/2
    one, two = z_hi == z_lo, z_hi == z_lo + 1.0
    many = ~(one | two)
    far0 = np.where(one, f_hi, f_edge)
    low = np.stack([np.where(many, 0.0, np.minimum(f_lo, far0)), np.where(two, np.minimum(f_edge, f_hi), 0.0)], -1)
    high = np.stack([np.where(many, fs / 2, np.maximum(f_lo, far0)), np.where(two, np.maximum(f_edge, f_hi), 0.0)], -1)
    inv0 = (np.mod(z_lo, 2.0) == 0.0) & ~many
    inverted = np.stack([inv0, two & ~inv0], -1)
    valid = np.stack([np.ones_like(one), two], -1)
    union_low = np.where(two, low.min(axis=-1), low[..., 0])
    covers = many | ((union_low <= 0.0) & (high.max(axis=-1) >= fs / 2.0))
    return FoldedBand(low, high, inverted, valid, covers)


@dataclass(frozen=True)
class AliasBands:
    """Input bands that fold onto one first-zone passband, sorted by frequency (1-d arrays)."""

    #: Lower and upper edge of each input band, Hz (not clipped to ``f_max_hz``).
    low_hz: np.ndarray
    high_hz: np.ndarray
    #: The multiple of ``fs`` the band sits beside: ``[k·fs - high, k·fs - low]`` or ``[k·fs + low, k·fs + high]``.
    k: np.ndarray
    #: The band's Nyquist zone (``2k`` below ``k·fs``, ``2k + 1`` above).
    zone: np.ndarray
    #: True where the band arrives with its sense flipped (even zones).
    inverted: np.ndarray


def alias_input_bands(f_low_hz: float, f_high_hz: float, fs_hz: float, f_max_hz: float) -> AliasBands:
    """Every input band up to ``f_max_hz`` that an ADC hears inside a first-zone passband.

    Parameters
    ----------
    f_low_hz, f_high_hz, fs_hz : float
        The digital passband, Hz, ``0 <= f_low < f_high <= fs/2``, and the sample rate, Hz, > 0.
    f_max_hz : float
        Highest input frequency of interest, Hz, >= 0: bands with a lower edge above it are left out.

    Returns
    -------
    AliasBands
        The bands ``[k·fs - f_high, k·fs - f_low]`` (zone ``2k``, inverted) and
        ``[k·fs + f_low, k·fs + f_high]`` (zone ``2k + 1``), ``k = 0, 1, ...``, with upper edge
        > 0 and lower edge <= ``f_max_hz``.  The inverse of :func:`fold_band`.

    Raises
    ------
    UnitError
        On a bad frequency or a passband outside ``[0, fs/2]``.
    SweepTooLargeError
        If more than :data:`MAX_ALIAS_BANDS` bands would be listed.
    """
    lo, hi = float(_frequency(f_low_hz, "f_low_hz")), float(_frequency(f_high_hz, "f_high_hz"))
    fs, f_max = float(_frequency(fs_hz, "fs_hz", positive=True)), float(_frequency(f_max_hz, "f_max_hz"))
    if not lo < hi <= fs / 2.0:
        allowed = f"must be above f_low_hz ({format_frequency(lo)}) and at most fs_hz/2 ({format_frequency(fs / 2)})"
        raise field_error(UnitError, "f_high_hz", hi, allowed)
    k_max = np.floor((f_max + hi) / fs)
    if 2.0 * (k_max + 1.0) > MAX_ALIAS_BANDS:
        raise field_error(SweepTooLargeError, "f_max_hz", f_max, f"would list more than {MAX_ALIAS_BANDS} bands")
    k = np.arange(int(k_max) + 1, dtype=np.float64)
    low = np.concatenate([k * fs - hi, k * fs + lo])
    high = np.concatenate([k * fs - lo, k * fs + hi])
    kk = np.concatenate([k, k]).astype(np.int64)
    zone = np.concatenate([2 * kk[: k.size], 2 * kk[k.size :] + 1])
    keep = (low <= f_max) & (high > 0.0)
    order = np.argsort(low[keep], kind="stable")
    zone = zone[keep][order]
    return AliasBands(low[keep][order], high[keep][order], kk[keep][order], zone, zone % 2 == 0)


def zone_band_hz(zone, fs_hz) -> tuple[np.ndarray, np.ndarray]:
    """Edges of Nyquist zone ``z``: ``((z-1)·fs/2, z·fs/2)``, Hz.

    Parameters
    ----------
    zone, fs_hz : array_like
        Zone numbers (whole, >= 1) and sample rate, Hz, > 0; they broadcast.

    Returns
    -------
    (numpy.ndarray, numpy.ndarray)
        Lower and upper edge of each zone, Hz.
    """
    z = np.asarray(zone)
    if z.dtype.kind not in "iu" or np.any(z < 1):
        raise field_error(PlanError, "zone", zone, "must be whole numbers >= 1")
    fs = _frequency(fs_hz, "fs_hz", positive=True)
    return (z - 1) * fs / 2.0, z * fs / 2.0


def check_band_in_zone(f_low_hz: float, f_high_hz: float, fs_hz: float, zone: int, field: str) -> None:
    """Refuse a passband that does not fit inside the chosen Nyquist zone (edges included).

    Parameters
    ----------
    f_low_hz, f_high_hz, fs_hz : float
        Passband edges at the ADC input, Hz, ``0 <= f_low <= f_high``, and sample rate, Hz, > 0.
    zone : int
        The chosen Nyquist zone, >= 1.
    field : str
        Dotted name of the plan field holding ``zone``, repeated in the error.

    Raises
    ------
    PlanError
        One line such as ``adc.nyquist_zone: 2 (61.44 MHz to 122.88 MHz) cannot hold the passband
        60 MHz to 70 MHz; it spans zones 1 to 2``.
    """
    z = _whole(zone, field, PlanError, 1)
    lo, hi = float(_frequency(f_low_hz, "f_low_hz")), float(_frequency(f_high_hz, "f_high_hz"))
    fs = float(_frequency(fs_hz, "fs_hz", positive=True))
    if hi < lo:
        raise field_error(UnitError, "f_high_hz", hi, "must be >= f_low_hz")
    z_low, z_high = (z - 1) * fs / 2.0, z * fs / 2.0
    if z_low <= lo and hi <= z_high:
        return
    first = int(_zone_index(np.float64(lo), np.float64(fs))) + 1
    last = max(int(np.ceil(2.0 * hi / fs)), first)
    where = f"zone {first}" if first == last else f"zones {first} to {last}"
    raise PlanError(one_line(
        f"{field}: {z} ({format_frequency(z_low)} to {format_frequency(z_high)}) cannot hold the passband "
        f"{format_frequency(lo)} to {format_frequency(hi)}; it spans {where}"
    ))


def clock_spur_sideband_dbc(f_in_hz, fs_hz, spur_dbc) -> np.ndarray:
    """Level of the sidebands a phase-modulation spur on the sample clock puts on a sampled tone.

    A clock ``cos(2π·fs·t + β·sin(2π·d·t))`` has sidebands at ``fs ± d`` at ``20·log10(β/2)`` dBc
    (small β).  It ticks when its phase is ``2πk``: ``t_k ≈ k/fs - β/(2π·fs)·sin(2π·d·k/fs)``, so a
    tone ``cos(2π·f_in·t)`` is sampled as ``cos(2π·f_in·k/fs - β·(f_in/fs)·sin(2π·d·k/fs))``: the
    same modulation with index ``β·f_in/fs``.  Its sidebands sit at ``f_in ± d`` before folding
    (where they land after folding: :func:`clock_spur_sideband_hz`) at
    ``spur_dbc + 20·log10(f_in/fs)`` dBc each.

    Parameters
    ----------
    f_in_hz, fs_hz : float or array_like
        Input tone (any Nyquist zone) and sample rate, Hz, both > 0.
    spur_dbc : float or array_like
        Level of each of the clock's two phase-modulation sidebands at ``fs ± d``, dBc.

    Returns
    -------
    numpy.ndarray
        Level of each sideband of the sampled tone, dBc relative to the tone.  Small-modulation
        result (first-order Bessel terms): with ``x = β·f_in/fs`` the error is about ``x²/8`` in
        amplitude (0.004 dB at -30 dBc, 0.04 dB at -20 dBc).  A single-sided additive
        clock spur is half phase and half amplitude modulation; only the phase part is modelled.

    References
    ----------
    Brannon [2]_ (module docstring).
    """
    f_in = _frequency(f_in_hz, "f_in_hz", positive=True)
    fs = _frequency(fs_hz, "fs_hz", positive=True)
    level = np.asarray(spur_dbc, dtype=np.float64)
    if not np.all(np.isfinite(level)):
        bad = float(level[~np.isfinite(level)].flat[0])
        raise field_error(UnitError, "spur_dbc", bad, "must be a finite level in dBc")
    return level + 20.0 * np.log10(f_in / fs)


def clock_spur_sideband_hz(f_in_hz, fs_hz, offset_hz) -> tuple[np.ndarray, np.ndarray]:
    """Where the clock-spur sidebands of a sampled tone land in ``[0, fs/2]``.

    Parameters
    ----------
    f_in_hz, fs_hz, offset_hz : float or array_like
        Input tone (>= 0), sample rate (> 0) and the clock spur's offset ``d`` from ``fs`` (>= 0), Hz.

    Returns
    -------
    upper_hz, lower_hz : numpy.ndarray
        Images of the input-side sidebands ``f_in + d`` and ``|f_in - d|``, Hz.  In an odd zone
        ``upper_hz`` is the folded tone plus ``d``; in an even zone the order flips and it is the
        folded tone minus ``d`` (each reflects again where it crosses 0 or ``fs/2``).
    """
    f_in, fs = _frequency(f_in_hz, "f_in_hz"), _frequency(fs_hz, "fs_hz", positive=True)
    d = _frequency(offset_hz, "offset_hz")
    return _fold(f_in + d, fs)[0], _fold(np.abs(f_in - d), fs)[0]


def harmonic_bands(f_low_hz, f_high_hz, max_harmonic: int) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Harmonics ``k = 2..K`` of a band, made by the ADC's front end before it samples.

    Parameters
    ----------
    f_low_hz, f_high_hz : float or array_like
        Band edges, Hz, ``0 <= f_low <= f_high``; broadcast together (shape ``S``).
    max_harmonic : int
        Highest harmonic ``K``, 2 to 64.

    Returns
    -------
    harmonic : numpy.ndarray of int64, shape (K-1,)
        ``2, 3, ..., K``.
    low_hz, high_hz : numpy.ndarray, shape (K-1, *S)
        ``k·f_low`` and ``k·f_high``, Hz; fold them with :func:`fold_band` to see where they land.
    """
    lo, hi = np.broadcast_arrays(_frequency(f_low_hz, "f_low_hz"), _frequency(f_high_hz, "f_high_hz"))
    if np.any(hi < lo):
        raise field_error(UnitError, "f_high_hz", float(hi[hi < lo][0]), "must be >= f_low_hz")
    k = np.arange(2, _whole(max_harmonic, "max_harmonic", UnitError, 2, 64) + 1, dtype=np.int64)
    scale = k.reshape((-1,) + (1,) * lo.ndim).astype(np.float64)
    return k, scale * lo, scale * hi
