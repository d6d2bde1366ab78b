"""The Chebyshev type I and elliptic low-pass prototypes: loss in dB of the normalised frequency Omega.

Overflow-free losses, and the local minima that make a band's least loss exact
(:meth:`mixchart.filters.Filter.least_atten_db`).  scipy is imported only when an
elliptic prototype is built.
"""

from __future__ import annotations

import itertools
import math

import numpy as np

_DB_PER_NEPER_SQ = 10.0 / math.log(10.0)  # 10*log10(x) == _DB_PER_NEPER_SQ * ln(x)


def _chebyshev_atten_db(w: np.ndarray, n: int, log_eps_sq: float) -> np.ndarray:
    """``10 log10(1 + eps^2 T_n(w)^2)`` without overflow, for ``w >= 0``.

    ``T_n(w) = cos(n acos w)`` for ``w <= 1`` and ``cosh(x)``, ``x = n acosh w``, above, taken
    through ``ln cosh x = x - ln 2 + ln(1 + e^(-2x))``; each branch is worked out only where it
    applies (most of a sweep's frequencies lie in the stopband).
    """
    inside = w <= 1.0
    n_inside = np.count_nonzero(inside)
    if n_inside == 0:
        return _chebyshev_stop_db(w, n, log_eps_sq)
    out = np.empty(w.shape)
    t_in = np.cos(n * np.arccos(w[inside]))
    out[inside] = np.log1p(math.exp(log_eps_sq) * t_in * t_in) * _DB_PER_NEPER_SQ
    if n_inside < w.size:
        outside = ~inside
        out[outside] = _chebyshev_stop_db(w[outside], n, log_eps_sq)
    return out


def _chebyshev_stop_db(w: np.ndarray, n: int, log_eps_sq: float) -> np.ndarray:
    """The Chebyshev loss above the edge (``w > 1``, or NaN), dB: ``10 log10(1 + eps^2 cosh^2 x)``."""
    x = n * np.arccosh(w)
    y = np.exp(-2.0 * x)
    np.log1p(y, out=y)
    y += x
    y *= 2.0
    y += log_eps_sq - 2.0 * math.log(2.0)
    return np.logaddexp(0.0, y, out=y) * _DB_PER_NEPER_SQ


def _elliptic_atten(n: int, ripple_db: float, stop_atten_db: float):
    """Return ``w -> loss in dB`` of scipy's elliptic prototype ``scipy.signal.ellipap``.

    ``|H(jw)| = |k| prod |w^2 - wz^2| / (|jw - p| |jw - conj p|)`` over matched
    zero and pole pairs (each factor tends to 1 as w grows, so nothing
    overflows), divided by ``|jw - p0|`` for the real pole of an odd order.
    ellipap scales ``k`` so that the passband maximum is exactly 0 dB.
    """
    from scipy.signal import ellipap

    z, p, k = ellipap(n, ripple_db, stop_atten_db)
    zeros_sq = np.sort(z.imag[z.imag > 0]) ** 2
    upper = np.sort_complex(p[p.imag > 1e-12 * np.abs(p)] * -1j) * 1j  # upper-half poles by imag part
    pole_c = upper.real**2 - upper.imag**2  # |jw - p|^2 |jw - conj p|^2 = (w^2 + c)^2 + e^2
    pole_e = 2.0 * np.abs(upper.real * upper.imag)
    real_sq = p.real[np.abs(p.imag) <= 1e-12 * np.abs(p)] ** 2
    log_k = math.log(abs(float(np.real(k))))
    assert len(zeros_sq) == len(pole_c) and len(real_sq) == n % 2, "unexpected ellipap layout"

    def atten(w: np.ndarray) -> np.ndarray:
        w_sq = w * w
        w_cap = np.minimum(w_sq, 1e300)  # each pair factor is 1 to float precision long before this
        gain = np.ones_like(w_sq)
        for z_sq, c, e in zip(zeros_sq, pole_c, pole_e, strict=True):
            gain *= np.abs(w_cap - z_sq) / np.hypot(w_cap + c, e)
        for s_sq in real_sq:
            gain /= np.sqrt(w_sq + s_sq)
        return -2.0 * _DB_PER_NEPER_SQ * (np.log(gain) + log_k)

    return atten, np.sqrt(zeros_sq)


def _elliptic_pass_minima(atten, zeros: np.ndarray, stop_atten_db: float) -> list[tuple[float, float]] | None:
    """The passband's 0 dB points (Omega, 0.0) of an elliptic prototype, or None if not found.

    An elliptic rational function's zeros and poles are reciprocal about the selectivity
    ``xi`` (the stopband edge, passband edge 1): ``R(xi/x) = L/R(x)`` (the elliptic rational
    functions' reciprocity; from memory, and checked here point by point).  So the passband's
    zero-loss points are ``xi / Omega_z`` for the transmission zeros ``Omega_z``; between them
    the loss rises to the ripple and falls again.  If a point does not check out to 1e-6 dB the
    caller falls back to 0 dB for any interval reaching the passband (a lower bound).
    """
    from scipy.optimize import brentq

    if not zeros.size:
        return None
    try:
        edge = brentq(lambda w: float(atten(np.array([w]))[0]) - stop_atten_db, 1.0, float(zeros[0]) * (1 - 1e-12),
                      xtol=1e-15, rtol=1e-15)
    except ValueError:
        return None
    points = edge / zeros
    if not np.all(np.abs(atten(points)) < 1e-6):
        return None
    return [(float(w), 0.0) for w in points]


def _elliptic_stop_minima(atten, zeros: np.ndarray, n: int, stop_atten_db: float) -> list[tuple[float, float]]:
    """The stopband's local minima (Omega, dB) of an elliptic prototype.

    Between two transmission zeros (and, for an odd order, beyond the last) the loss has one
    minimum, where it touches ``stop_atten_db`` (equiripple stopband); it is found with a bounded
    scalar search in each bracket and given the design value, the least of the two.  Below the
    first zero the loss rises monotonically from the passband edge, and beyond the last zero of an
    even order it falls monotonically towards ``stop_atten_db``, so the interval ends cover those.
    """
    from scipy.optimize import minimize_scalar

    brackets = list(itertools.pairwise(zeros))
    if n % 2 and zeros.size:
        brackets.append((zeros[-1], zeros[-1] * 1e3))  # the real pole's 20 dB/decade rise follows
    minima = []
    for a, b in brackets:
        found = minimize_scalar(lambda w: float(atten(np.array([w]))[0]), bounds=(a, b), method="bounded",
                                options={"xatol": 1e-12 * b})
        minima.append((float(found.x), min(float(found.fun), stop_atten_db)))
    return minima

