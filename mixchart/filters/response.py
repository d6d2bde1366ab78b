"""The :class:`Filter` interface: attenuation in dB versus frequency in Hz, checked and in blocks.

Each kind of filter (:mod:`mixchart.filters.kinds`) gives its loss at points
(``_atten``) and its least loss over bands (``_least``); :class:`Filter` checks the
frequencies, broadcasts a tracking filter's centres, works in cache-sized blocks and
applies the ultimate rejection.
"""

from __future__ import annotations

import math

import numpy as np
from numpy.typing import ArrayLike

from ..errors import FilterError, field_error
from ..models.filters import DEFAULT_MAX_ATTEN_DB

__all__ = ["Filter"]

_CHUNK = 8192  # points per block in Filter.atten_db (cache-sized blocks run several times faster)


class Filter:
    """A built filter: attenuation in dB versus frequency in Hz.

    Attributes
    ----------
    spec : FilterSpec
        The spec the filter was built from.
    tracks_channel : bool
        True when the filter (or a stage of a cascade) follows the tuned channel
        and so needs ``f_center_hz`` at evaluation time.
    max_atten_db : float
        Ultimate rejection in dB: the spec's ``max_atten_db``, or the kind's
        common-practice default (:data:`DEFAULT_MAX_ATTEN_DB`).
    max_atten_is_default : bool
        True when ``max_atten_db`` is the default, an assumption the analysis reports.
    """

    def __init__(self, spec, field: str = "") -> None:
        self.spec = spec
        self.tracks_channel = bool(getattr(spec, "tracks_channel", False))
        self._field = field
        given = getattr(spec, "max_atten_db", None)
        self.max_atten_is_default = given is None
        self.max_atten_db = float(DEFAULT_MAX_ATTEN_DB[spec.kind] if given is None else given)

    def __repr__(self) -> str:
        return f"{type(self).__name__}({self.spec!r})"

    def atten_db(self, f_hz: ArrayLike, f_center_hz: ArrayLike | None = None, *, floored: bool = True) -> np.ndarray:
        """Attenuation in dB (positive = loss) at the frequencies ``f_hz``.

        Parameters
        ----------
        f_hz : array_like of float
            Frequencies in Hz, >= 0 (``inf`` allowed).
        f_center_hz : array_like of float, optional
            Centre in Hz of a channel-tracking filter, broadcast against ``f_hz``
            (one per frequency, or a scalar).  Ignored by fixed filters.  When
            omitted, a tracking filter uses the ``f_center_hz`` of its spec.
        floored : bool
            Limit the loss to the ultimate rejection :attr:`max_atten_db` (and each
            cascade stage's own); False gives the ideal response (``inf`` where it
            is exactly zero, e.g. a high-pass at 0 Hz).

        Returns
        -------
        numpy.ndarray of float64
            Loss in dB, shape ``broadcast(f_hz, f_center_hz)``: 0 dB at the
            passband maximum of a prototype or tuned circuit, ``-|S|`` in dB for
            a measured filter, never above :attr:`max_atten_db` when ``floored``.

        Raises
        ------
        FilterError
            If a frequency is negative or NaN, a tracking filter has no valid
            centre, or a measured filter with ``outside="error"`` is asked
            outside its measured range.
        """
        return self._evaluate(self._total, (f_hz,), ("f_hz",), f_center_hz, floored=floored)

    def least_atten_db(self, f_low_hz: ArrayLike, f_high_hz: ArrayLike, f_center_hz: ArrayLike | None = None, *,
                       floored: bool = True) -> np.ndarray:
        """Least attenuation in dB over each band ``[f_low_hz, f_high_hz]``.

        A signal occupying the band reaches the far side through the band's least-loss
        point, so this, not the loss at one point, is what a band's level takes.  It is
        exact for prototypes (their local minima are known: ``T_n``'s zeros for a
        Chebyshev filter, the equiripple stopband minima of an elliptic filter, found
        between its transmission zeros), tuned circuits (loss least at the point
        nearest the centre) and measured data (the least of the points inside the band
        and of the interpolated ends).  Bounds that are not exact are lower bounds, so
        never optimistic: an elliptic band that reaches the passband takes 0 dB (at
        most ``ripple_db`` low), and a cascade takes the sum of its stages' least losses.

        Parameters
        ----------
        f_low_hz, f_high_hz : array_like of float
            Band edges in Hz, ``0 <= f_low_hz <= f_high_hz`` (``inf`` allowed), broadcast together.
        f_center_hz : array_like of float, optional
            Centre of a channel-tracking filter in Hz, as in :meth:`atten_db`.
        floored : bool
            Limit the loss to :attr:`max_atten_db` (and each stage's); False gives the
            unlimited response, to tell where the ultimate rejection decided.

        Returns
        -------
        numpy.ndarray of float64
            Least loss over each band, dB, shape ``broadcast(f_low_hz, f_high_hz, f_center_hz)``.

        Raises
        ------
        FilterError
            As :meth:`atten_db`, and if a band's low edge is above its high edge.

        Examples
        --------
        >>> from mixchart.filters import build_filter
        >>> filt = build_filter({"kind": "tuned", "f_center_hz": "10 MHz", "q_loaded": 20})
        >>> float(filt.least_atten_db(9e6, 11e6))  # the band holds the centre
        0.0
        """
        low = np.asarray(f_low_hz, dtype=np.float64)
        high = np.asarray(f_high_hz, dtype=np.float64)
        try:
            low, high = np.broadcast_arrays(low, high)
        except ValueError:
            raise field_error(FilterError, "f_high_hz", f"shape {high.shape}",
                              f"must broadcast against f_low_hz of shape {low.shape}") from None
        if low.size and not np.all(high >= low):
            bad = ~(high >= low)
            allowed = f"each band's high edge must be >= its low edge ({float(low[bad].flat[0])!r} Hz)"
            raise field_error(FilterError, "f_high_hz", float(high[bad].flat[0]), allowed)
        return self._evaluate(self._least_total, (low, high), ("f_low_hz", "f_high_hz"), f_center_hz,
                              floored=floored)

    def _evaluate(self, fn, freqs: tuple, names: tuple, f_center_hz, *, floored: bool) -> np.ndarray:
        """Checked, broadcast, chunked evaluation of ``fn(*freqs, fc, floored)`` (1-D blocks)."""
        arrays = [np.asarray(f, dtype=np.float64) for f in freqs]
        for f, name in zip(arrays, names, strict=True):
            if f.size and not f.min() >= 0:
                raise field_error(FilterError, name, float(f[~(f >= 0)].flat[0]), "frequencies must be >= 0 Hz")
        fc = None if f_center_hz is None else np.asarray(f_center_hz, dtype=np.float64)
        if fc is not None:
            if self.tracks_channel and fc.size and not (fc.min() > 0 and np.isfinite(fc.max())):
                bad = float(fc[~((fc > 0) & np.isfinite(fc))].flat[0])
                raise field_error(FilterError, self._field + "f_center_hz", bad, "centres must be finite and > 0 Hz")
            try:
                *arrays, fc = np.broadcast_arrays(*arrays, fc)
            except ValueError:
                allowed = f"must broadcast against {names[0]} of shape {arrays[0].shape}"
                raise field_error(FilterError, self._field + "f_center_hz", f"shape {fc.shape}", allowed) from None
        shape = arrays[0].shape
        arrays = [a.reshape(-1) for a in arrays]
        fc = None if fc is None else fc.reshape(-1)
        out = np.empty(arrays[0].size)
        with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
            for i in range(0, out.size, _CHUNK):
                part = slice(i, i + _CHUNK)
                out[part] = fn(*(a[part] for a in arrays), None if fc is None else fc[part], floored)
        return out.reshape(shape)

    def _total(self, f: np.ndarray, fc, floored: bool) -> np.ndarray:
        out = self._atten(f, fc)
        return np.minimum(out, self.max_atten_db) if floored else out

    def _least_total(self, low: np.ndarray, high: np.ndarray, fc, floored: bool) -> np.ndarray:
        out = self._least(low, high, fc)
        return np.minimum(out, self.max_atten_db) if floored else out

    def _least(self, low: np.ndarray, high: np.ndarray, fc) -> np.ndarray:
        raise NotImplementedError

    def passbands_hz(self, f_center_hz: float | None = None) -> list[tuple[float, float]]:
        """Nominal pass intervals in Hz, for shading on charts.

        Parameters
        ----------
        f_center_hz : float, optional
            Centre in Hz of a channel-tracking filter.

        Returns
        -------
        list of (float, float)
            Sorted ``(lo_hz, hi_hz)`` intervals; ``hi_hz`` may be ``inf``.  A
            band-stop filter has two; a cascade whose stages share no pass
            interval has none.
        """
        raise NotImplementedError

    def passband_hz(self, f_center_hz: float | None = None) -> tuple[float, float]:
        """Nominal passband ``(lo_hz, hi_hz)``: low-pass ``(0, fc)``, high-pass ``(fc, inf)``.

        Parameters
        ----------
        f_center_hz : float, optional
            Centre in Hz of a channel-tracking filter.

        Returns
        -------
        (float, float)
            The span of :meth:`passbands_hz` in Hz: ``(0, inf)`` for a band-stop
            filter, ``(nan, nan)`` for a cascade with no common pass interval.
        """
        bands = self.passbands_hz(f_center_hz)
        return (bands[0][0], bands[-1][1]) if bands else (math.nan, math.nan)

    def _centre(self, fc: np.ndarray | float | None) -> np.ndarray | float:
        """The centre in Hz: ``fc`` for a tracking filter when given, else the spec's."""
        fc = fc if self.tracks_channel and fc is not None else self.spec.f_center_hz
        if fc is None:
            allowed = "this filter tracks the channel; pass f_center_hz (Hz) or set it in the spec"
            raise field_error(FilterError, self._field + "f_center_hz", None, allowed)
        return fc

    def _passband_centre(self, f_center_hz: float | None) -> float:
        f0 = float(self._centre(f_center_hz))
        if not 0 < f0 < math.inf:
            raise field_error(FilterError, self._field + "f_center_hz", f0, "must be finite and > 0 Hz")
        return f0

    def _atten(self, f: np.ndarray, fc: np.ndarray | None) -> np.ndarray:
        raise NotImplementedError

