"""Mixing products and spurious responses: pure numpy.

A mixer fed with a signal at ``f_in`` and an LO at ``f_lo`` puts out products
at ``|m·f_in ± n·f_lo|``, where ``m`` (``rf_harmonic``) is the harmonic of the
signal at the mixer's signal input (the RF of a down-converter, the IF of an
up-converter) and ``n`` (``lo_harmonic``) the LO harmonic; the order is
``m + n``.  A signal of bandwidth ``B`` gives an (m, n) product of width
``m·B``.

Every function here works on whole arrays of channels at once: a tuning sweep
is one call, never a Python loop over channels.  Nothing here imports a
plotting or widget library.  The chart's loci and strips of these products are in
:mod:`mixchart.physics.loci`.

References
----------
The product and response relations are the standard heterodyne relations found
in any receiver-design text: the output ``|m·f_RF ± n·f_LO|`` and its inverse,
the inputs that reach an IF ``f_in = |n·f_LO ± f_IF| / m``.
"""

from __future__ import annotations

from dataclasses import dataclass
from functools import lru_cache

import numpy as np

from ..errors import MixchartError, field_error

__all__ = [
    "LABELS",
    "ProductFamily",
    "ResponseFamily",
    "product_family",
    "response_family",
    "product_bands",
    "response_bands",
    "response_bands_at",
    "overlaps",
    "is_inverted",
    "product_labels",
    "response_labels",
]

#: Label codes used in the ``label`` arrays, and their text.
LABELS: tuple[str, ...] = (
    "spur",  # 0: any other (m, n)
    "wanted",  # 1
    "image",  # 2: (1,1) response on the far side of the LO
    "half-IF",  # 3: (2,2) response between the wanted input and the LO
    "IF feedthrough",  # 4: (1,0) response: an input at the IF itself
    "LO leakage",  # 5: (0,1) product
    "LO harmonic",  # 6: (0,n>1) product
    "RF feedthrough",  # 7: (1,0) product of a down-converter
    "sum product",  # 8: (1,1) unwanted sign of a down-converter
    "unwanted sideband",  # 9: (1,1) unwanted sign of an up-converter
    "IF feedthrough",  # 10: (1,0) product of an up-converter (input IF at the output)
)
SPUR, WANTED, IMAGE, HALF_IF, IF_FEEDTHROUGH, LO_LEAKAGE, LO_HARMONIC = range(7)
RF_FEEDTHROUGH, SUM_PRODUCT, UNWANTED_SIDEBAND, IF_FEEDTHROUGH_OUT = 7, 8, 9, 10


DIRECTIONS = ("down", "up")


def _check_direction(direction: object) -> str:
    if not isinstance(direction, str) or direction not in DIRECTIONS:
        raise field_error(MixchartError, "direction", direction, "must be 'down' or 'up'")
    return direction


def _check_order(max_order: object) -> int:
    if isinstance(max_order, bool) or not isinstance(max_order, (int, np.integer)) or not 1 <= max_order <= 64:
        raise field_error(MixchartError, "max_order", max_order, "must be a whole number from 1 to 64")
    return int(max_order)


@dataclass(frozen=True)
class ProductFamily:
    """The (m, n, sign) output products up to an order.

    Attributes
    ----------
    rf_harmonic : numpy.ndarray of int, shape (K,)
        ``m``, harmonic of the signal input.
    lo_harmonic : numpy.ndarray of int, shape (K,)
        ``n``, harmonic of the LO.
    sign : numpy.ndarray of int, shape (K,)
        ``+1`` for ``m·f_in + n·f_lo``, ``-1`` for ``|m·f_in - n·f_lo|``.
        Products with ``m == 0`` or ``n == 0`` appear once, with ``+1``.
    """

    rf_harmonic: np.ndarray
    lo_harmonic: np.ndarray
    sign: np.ndarray

    @property
    def order(self) -> np.ndarray:
        """``m + n`` for each product."""
        return self.rf_harmonic + self.lo_harmonic

    def __len__(self) -> int:
        return int(self.rf_harmonic.size)


@dataclass(frozen=True)
class ResponseFamily:
    """The (m, n, branch) input responses up to an order.

    Attributes
    ----------
    rf_harmonic : numpy.ndarray of int, shape (K,)
        ``m >= 1``.
    lo_harmonic : numpy.ndarray of int, shape (K,)
        ``n >= 0``.
    branch : numpy.ndarray of int, shape (K,)
        ``+1`` for ``f_in = (n·f_lo + f_IF)/m`` (input above the LO harmonic),
        ``-1`` for ``f_in = |n·f_lo - f_IF|/m``.  ``n == 0`` appears once.
    """

    rf_harmonic: np.ndarray
    lo_harmonic: np.ndarray
    branch: np.ndarray

    @property
    def order(self) -> np.ndarray:
        """``m + n`` for each response."""
        return self.rf_harmonic + self.lo_harmonic

    def __len__(self) -> int:
        return int(self.rf_harmonic.size)


def _family_columns(max_order: object, m_min: int, both_when) -> tuple[np.ndarray, ...]:
    """Read-only (m, n, ±1) columns for 1 <= m + n <= max_order, m >= m_min, sorted by order,
    then m, then -1 before +1; a pair gets both signs when ``both_when(m, n)`` is true, else +1."""
    max_order = _check_order(max_order)
    rows = []
    for order in range(1, max_order + 1):
        for m in range(m_min, order + 1):
            n = order - m
            rows.extend((m, n, s) for s in ((-1, 1) if both_when(m, n) else (1,)))
    table = np.array(rows, dtype=np.int64)
    columns = tuple(table[:, k].copy() for k in range(3))
    for column in columns:
        column.setflags(write=False)
    return columns


@lru_cache(maxsize=64)
def product_family(max_order: int) -> ProductFamily:
    """All output products with ``1 <= m + n <= max_order``.

    Parameters
    ----------
    max_order : int
        Highest order ``m + n``.

    Returns
    -------
    ProductFamily
        Sorted by order, then ``m``, then sign (difference first).

    Examples
    --------
    >>> fam = product_family(2)
    >>> list(zip(fam.rf_harmonic, fam.lo_harmonic, fam.sign))  # doctest: +NORMALIZE_WHITESPACE
    [(0, 1, 1), (1, 0, 1), (0, 2, 1), (1, 1, -1), (1, 1, 1), (2, 0, 1)]
    """
    return ProductFamily(*_family_columns(max_order, m_min=0, both_when=lambda m, n: m and n))


@lru_cache(maxsize=64)
def response_family(max_order: int) -> ResponseFamily:
    """All input responses with ``m >= 1`` and ``m + n <= max_order``.

    Parameters
    ----------
    max_order : int
        Highest order ``m + n``.

    Returns
    -------
    ResponseFamily
        Sorted by order, then ``m``, then branch (``-1`` first).
    """
    return ResponseFamily(*_family_columns(max_order, m_min=1, both_when=lambda m, n: n))


def product_bands(
    f_in_hz: np.ndarray, f_lo_hz: np.ndarray, bw_in_hz: float, family: ProductFamily
) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Output bands of every product for every channel.

    Parameters
    ----------
    f_in_hz : array_like, shape (C,)
        Centre of the signal at the mixer's signal input for each channel, Hz.
    f_lo_hz : array_like, shape (C,)
        LO frequency for each channel, Hz.
    bw_in_hz : float
        Bandwidth of the input signal, Hz.  Product (m, n) is ``m·bw_in_hz`` wide.
    family : ProductFamily
        Which products.

    Returns
    -------
    f_center_hz, f_low_hz, f_high_hz : numpy.ndarray, shape (C, K)
        Centre ``|m·f_in ± n·f_lo|`` and band edges, Hz.  A band that folds
        through 0 Hz is reported as ``[0, centre + width/2]``.
    """
    f_in = np.asarray(f_in_hz, dtype=float)[:, None]
    f_lo = np.asarray(f_lo_hz, dtype=float)[:, None]
    # float harmonics: the same values, without a cast inside every full-size multiply
    m = family.rf_harmonic.astype(float)[None, :]
    n_signed = (family.sign * family.lo_harmonic).astype(float)[None, :]
    # |m·f_in ± n·f_lo|, worked in place to spare full-size temporaries
    center = m * f_in
    center += n_signed * f_lo
    np.abs(center, out=center)
    half = 0.5 * bw_in_hz * m
    low = center - half
    np.maximum(low, 0.0, out=low)
    high = center + half
    return center, low, high


def response_bands(
    f_lo_hz: np.ndarray, if_low_hz: float, if_high_hz: float, family: ResponseFamily, *,
    interferer_bandwidth_hz: float = 0.0,
) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Input bands that reach the IF passband, for every channel's LO.

    An input at ``f`` produces (m, n) output ``|m·f ± n·f_lo|``; it lands in
    ``[if_low_hz, if_high_hz]`` when ``f = |n·f_lo ± f_IF| / m``, so the IF
    passband of width ``B`` maps to an input band of width ``B/m``.

    Parameters
    ----------
    f_lo_hz : array_like, shape (C,)
        LO frequency for each channel, Hz.
    if_low_hz, if_high_hz : float
        IF passband edges, Hz.
    family : ResponseFamily
        Which responses.
    interferer_bandwidth_hz : float, optional
        Bandwidth of the unwanted input, Hz (0: a CW interferer).  An input ``B_u`` wide
        centred at ``f`` gives an (m, n) output ``m·B_u`` wide, which reaches the IF passband
        when ``m·f`` lies within ``m·B_u/2`` of ``[IF_low, IF_high] ± n·f_lo``: the band of
        responding centres widens by ``B_u/2`` on each side, for every m (derived by hand).

    Returns
    -------
    f_center_hz, f_low_hz, f_high_hz : numpy.ndarray, shape (C, K)
        Centre (for the IF centre) and edges of each responding input band, Hz.
        A band of the ``-1`` branch that straddles ``n·f_lo`` starts at 0 Hz.
    """
    f_lo = np.asarray(f_lo_hz, dtype=float)[:, None]
    return response_bands_at(f_lo, family.rf_harmonic, family.lo_harmonic, family.branch, if_low_hz, if_high_hz,
                             interferer_bandwidth_hz=interferer_bandwidth_hz)


def response_bands_at(
    f_lo_hz: np.ndarray,
    rf_harmonic: np.ndarray,
    lo_harmonic: np.ndarray,
    branch: np.ndarray,
    if_low_hz: float,
    if_high_hz: float,
    *,
    interferer_bandwidth_hz: float = 0.0,
) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """:func:`response_bands` element by element: the arguments broadcast together.

    Lets a caller work out the bands only at the (channel, response) pairs it needs,
    e.g. ``f_lo_hz = lo[rows]`` with ``rf_harmonic = family.rf_harmonic[cols]``; the
    arithmetic is the same, so the values are identical to those of :func:`response_bands`.

    Parameters
    ----------
    f_lo_hz : array_like of float
        LO frequency, Hz.
    rf_harmonic, lo_harmonic, branch : array_like of int
        ``m >= 1``, ``n >= 0`` and the branch (+1/-1) of each response (see
        :class:`ResponseFamily`).
    if_low_hz, if_high_hz : float
        IF passband edges, Hz.
    interferer_bandwidth_hz : float, optional
        Bandwidth of the unwanted input, Hz (see :func:`response_bands`).

    Returns
    -------
    f_center_hz, f_low_hz, f_high_hz : numpy.ndarray
        Centre and edges of each responding input band, Hz, of the broadcast shape.
    """
    if_center = 0.5 * (if_low_hz + if_high_hz)
    m = np.asarray(rf_harmonic).astype(float)
    plus = np.asarray(branch) > 0
    # Both branches at once, with per-column offsets (h = n·f_lo):
    #   branch +1: f = (h + f_IF)/m, band [x, y] with x = (h + IF_low)/m <= y = (h + IF_high)/m;
    #   branch -1: f = |h - f_IF|/m; with x = (h - IF_high)/m <= y = (h - IF_low)/m the band is
    #     [x, y] if x > 0, [-y, -x] if y < 0, else [0, max(-x, y)] (it straddles h).
    # low = x if x > 0 else (-y if y < 0 else 0) and high = max(|x|, |y|) cover both, since on
    # branch +1 0 < x <= y.
    harmonic = np.multiply(lo_harmonic, f_lo_hz, dtype=float)
    center = harmonic + np.where(plus, if_center, -if_center)
    np.abs(center, out=center)
    center /= m
    x = harmonic + np.where(plus, if_low_hz, -if_high_hz)
    x /= m
    y = np.add(harmonic, np.where(plus, if_high_hz, -if_low_hz), out=harmonic)
    y /= m
    low = np.zeros(np.shape(y))
    np.negative(y, out=low, where=y < 0)  # -y where y < 0, else 0 (cheaper than np.where here)
    np.copyto(low, x, where=x > 0)
    np.abs(x, out=x)
    np.abs(y, out=y)
    high = np.maximum(x, y, out=x)
    if interferer_bandwidth_hz > 0:
        half = 0.5 * interferer_bandwidth_hz
        low -= half
        np.maximum(low, 0.0, out=low)
        high += half
    return center, low, high


def overlaps(
    low_a: np.ndarray, high_a: np.ndarray, low_b: np.ndarray | float, high_b: np.ndarray | float
) -> np.ndarray:
    """True where band ``[low_a, high_a]`` overlaps band ``[low_b, high_b]``.

    Touching edges count as an overlap: a product whose edge sits exactly on the
    passband edge is reported, not hidden.
    """
    return (np.asarray(low_a) <= high_b) & (np.asarray(high_a) >= low_b)


def is_inverted(f_in_hz: np.ndarray, f_lo_hz: np.ndarray, wanted_sign: np.ndarray) -> np.ndarray:
    """Whether the wanted (1,1) conversion inverts the spectrum.

    The output ``f_lo - f_in`` (the difference with the LO above the input)
    runs backwards as the input rises, so the spectrum is inverted; the sum and
    ``f_in - f_lo`` are not.  With a tracking LO, high-side injection inverts.

    Parameters
    ----------
    f_in_hz, f_lo_hz : array_like
        Input-signal centre and LO, Hz.
    wanted_sign : array_like of int
        ``+1`` if the wanted output is the sum, ``-1`` if the difference.

    Returns
    -------
    numpy.ndarray of bool
    """
    return (np.asarray(wanted_sign) < 0) & (np.asarray(f_lo_hz) > np.asarray(f_in_hz))


# -------------------------------------------------------------------- labels


def product_labels(family: ProductFamily, direction: str, wanted_sign: np.ndarray) -> np.ndarray:
    """Label code (index into :data:`LABELS`) of every output product.

    Parameters
    ----------
    family : ProductFamily
        The products, shape (K,).
    direction : {"down", "up"}
        Down-conversion (RF in) or up-conversion (IF in).
    wanted_sign : array_like of int, shape (C,)
        Sign of the wanted (1,1) product for each channel.

    Returns
    -------
    numpy.ndarray of int8, shape (C, K)
    """
    _check_direction(direction)
    m, n, s = family.rf_harmonic, family.lo_harmonic, family.sign
    base = np.full(m.size, SPUR, dtype=np.int8)
    base[(m == 0) & (n == 1)] = LO_LEAKAGE
    base[(m == 0) & (n > 1)] = LO_HARMONIC
    base[(m == 1) & (n == 0)] = RF_FEEDTHROUGH if direction == "down" else IF_FEEDTHROUGH_OUT
    codes = np.repeat(base[None, :], np.size(wanted_sign), axis=0)
    one_one = (m == 1) & (n == 1)
    wanted = one_one[None, :] & (s[None, :] == np.asarray(wanted_sign)[:, None])
    other = one_one[None, :] & ~wanted
    codes[wanted] = WANTED
    codes[other] = SUM_PRODUCT if direction == "down" else UNWANTED_SIDEBAND
    if direction == "down":
        # the unwanted (1,1) of a down-converter is the sum unless the wanted is the sum
        codes[other & (s[None, :] < 0)] = SPUR
    return codes


def response_labels(family: ResponseFamily, wanted_branch: np.ndarray) -> np.ndarray:
    """Label code (index into :data:`LABELS`) of every receiver response.

    The wanted response is the (1,1) branch holding the channel; the image is
    the other (1,1) branch, on the far side of the LO; the half-IF response is
    the (2,2) branch on the wanted side of the LO (halfway between the wanted
    input and the LO); (1,0) is IF feedthrough.

    Parameters
    ----------
    family : ResponseFamily
        The responses, shape (K,).
    wanted_branch : array_like of int, shape (C,)
        ``+1`` when the wanted input sits above the LO, ``-1`` below.

    Returns
    -------
    numpy.ndarray of int8, shape (C, K)
    """
    m, n, b = family.rf_harmonic, family.lo_harmonic, family.branch
    wanted_branch = np.asarray(wanted_branch)[:, None]
    codes = np.full((wanted_branch.shape[0], m.size), SPUR, dtype=np.int8)
    codes[:, (m == 1) & (n == 0)] = IF_FEEDTHROUGH
    one_one = ((m == 1) & (n == 1))[None, :]
    same = b[None, :] == wanted_branch
    codes[one_one & same] = WANTED
    codes[one_one & ~same] = IMAGE
    codes[((m == 2) & (n == 2))[None, :] & same] = HALF_IF
    return codes
