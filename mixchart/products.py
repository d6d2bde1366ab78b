"""Mixing products, spurious responses and spur loci: pure numpy.

A mixer fed with a signal at ``f_in`` and an LO at ``f_lo`` puts out products
at ``|m·f_in ± n·f_lo|``, where ``m`` (``rf_harmonic``) is the harmonic of the
signal at the mixer's signal input (the RF of a down-converter, the IF of an
up-converter) and ``n`` (``lo_harmonic``) the LO harmonic; the order is
``m + n``.  A signal of bandwidth ``B`` gives an (m, n) product of width
``m·B``.

Every function here works on whole arrays of channels at once: a tuning sweep
is one call, never a Python loop over channels.  Nothing here imports a
plotting or widget library.

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

from .errors import MixchartError, field_error

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
    "Lines",
    "clip_lines",
    "tuning_plane_loci",
    "Strips",
    "tuning_plane_strips",
    "output_plane_loci",
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


# --------------------------------------------------------------------- loci


@dataclass(frozen=True)
class Lines:
    """Straight line segments with their product identity, as plain arrays.

    Attributes
    ----------
    x0, y0, x1, y1 : numpy.ndarray of float
        End points, in the plane's units (Hz, or LO-normalised).
    rf_harmonic, lo_harmonic, sign : numpy.ndarray of int
        The product each segment belongs to.
    edge : numpy.ndarray of int
        ``-1``/``0``/``+1``: the line where the product hits the lower IF edge,
        the IF centre or the upper IF edge (always 0 on the output plane).
    """

    x0: np.ndarray
    y0: np.ndarray
    x1: np.ndarray
    y1: np.ndarray
    rf_harmonic: np.ndarray
    lo_harmonic: np.ndarray
    sign: np.ndarray
    edge: np.ndarray

    def __len__(self) -> int:
        return int(self.x0.size)


def clip_lines(
    a: np.ndarray, b: np.ndarray, c: np.ndarray, window: tuple[float, float, float, float]
) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
    """Clip the lines ``a·x + b·y = c`` to a rectangle.

    Parameters
    ----------
    a, b, c : array_like, shape (L,)
        Line coefficients; ``a`` and ``b`` must not both be zero.
    window : (x_min, x_max, y_min, y_max)
        The rectangle.

    Returns
    -------
    x0, y0, x1, y1 : numpy.ndarray, shape (L,)
        Segment end points (NaN where the line misses the rectangle).
    keep : numpy.ndarray of bool, shape (L,)
        Lines that cross the rectangle in more than a point.
    """
    x_min, x_max, y_min, y_max = (float(v) for v in window)
    a = np.asarray(a, dtype=float)
    b = np.asarray(b, dtype=float)
    c = np.asarray(c, dtype=float)
    span = max(x_max - x_min, y_max - y_min)
    tol = 1e-12 * max(span, abs(x_max), abs(y_max), 1.0)
    with np.errstate(divide="ignore", invalid="ignore"):
        # candidate points on the four edges
        xs = np.stack([np.full_like(a, x_min), np.full_like(a, x_max), (c - b * y_min) / a, (c - b * y_max) / a])
        ys = np.stack([(c - a * x_min) / b, (c - a * x_max) / b, np.full_like(a, y_min), np.full_like(a, y_max)])
    ok = (
        np.isfinite(xs)
        & np.isfinite(ys)
        & (xs >= x_min - tol)
        & (xs <= x_max + tol)
        & (ys >= y_min - tol)
        & (ys <= y_max + tol)
    )
    # order candidates along the line direction (-b, a)
    t = np.where(ok, -b * xs + a * ys, np.nan)
    has = ok.any(axis=0)
    t_lo = np.where(ok, t, np.inf)
    t_hi = np.where(ok, t, -np.inf)
    i0 = np.argmin(t_lo, axis=0)
    i1 = np.argmax(t_hi, axis=0)
    cols = np.arange(a.size)
    x0, y0 = xs[i0, cols], ys[i0, cols]
    x1, y1 = xs[i1, cols], ys[i1, cols]
    with np.errstate(invalid="ignore"):
        keep = has & ((np.abs(x1 - x0) > tol) | (np.abs(y1 - y0) > tol))
    nan = np.nan
    x0, y0, x1, y1 = (np.where(keep, v, nan) for v in (x0, y0, x1, y1))
    return (
        np.clip(x0, x_min, x_max),
        np.clip(y0, y_min, y_max),
        np.clip(x1, x_min, x_max),
        np.clip(y1, y_min, y_max),
        keep,
    )


def _select(lines: dict[str, np.ndarray], window: tuple[float, float, float, float]) -> Lines:
    x0, y0, x1, y1, keep = clip_lines(lines["a"], lines["b"], lines["c"], window)
    return Lines(
        x0=x0[keep],
        y0=y0[keep],
        x1=x1[keep],
        y1=y1[keep],
        rf_harmonic=lines["m"][keep],
        lo_harmonic=lines["n"][keep],
        sign=lines["s"][keep],
        edge=lines["edge"][keep],
    )


def tuning_plane_loci(
    max_order: int,
    if_low_hz: float,
    if_high_hz: float,
    window: tuple[float, float, float, float],
    *,
    include_center: bool = True,
    direction: str = "down",
) -> Lines:
    """Where each product lands on the IF, across the RF (x) versus LO (y) plane.

    Down-conversion: product (m, n, sign) of an input at ``x`` with the LO at
    ``y`` lands on an IF frequency ``f_t`` along the straight lines
    ``m·x + sign·n·y = ±f_t``.  Up-conversion: the IF at ``f_t`` mixed with the
    LO at ``y`` lands on ``x`` along ``x - sign·n·y = m·f_t`` and, for the
    difference, ``x - n·y = -m·f_t``.  The strip between the lines for the
    lower and upper IF edges is where that product falls inside the IF
    passband (down) or covers ``x`` (up); a plan's LO line crossing a strip is a
    spur hit.

    Parameters
    ----------
    max_order : int
        Highest order ``m + n``.
    if_low_hz, if_high_hz : float
        IF passband edges, Hz.
    window : (rf_min_hz, rf_max_hz, lo_min_hz, lo_max_hz)
        The plotted rectangle, Hz.
    include_center : bool
        Also return the lines for the IF centre (``edge == 0``).
    direction : {"down", "up"}
        Conversion direction.

    Returns
    -------
    Lines
        Segments with ``x`` = RF and ``y`` = LO, in Hz.
    """
    family = product_family(max_order)
    edges = [(-1, if_low_hz), (1, if_high_hz)]
    if include_center:
        edges.insert(1, (0, 0.5 * (if_low_hz + if_high_hz)))
    parts: dict[str, list[np.ndarray]] = {k: [] for k in ("a", "b", "c", "m", "n", "s", "edge")}
    for edge, f_t in edges:
        # a strip of zero width: its two boundary lines coincide on the line for f_t
        a, b, c, _c, (m, n, s) = _strip_coefficients(direction, family, f_t, f_t)
        for key, value in zip(("a", "b", "c", "m", "n", "s"), (a, b, c, m, n, s), strict=True):
            parts[key].append(value)
        parts["edge"].append(np.full(a.size, edge))
    lines = {k: np.concatenate(v) for k, v in parts.items()}
    return _select(lines, window)


def output_plane_loci(max_order: int, f_lo_hz: float, window: tuple[float, float, float, float]) -> Lines:
    """Each product's output against the input frequency, for one LO.

    Product (m, n, sign) is the line ``y = |m·x + sign·n·f_lo|``: one line for
    the sum, and a V of two lines for the difference, meeting at 0 on
    ``x = n·f_lo/m``.  With ``f_lo_hz = 1`` and the window in LO units this is
    the normalised chart ``y = |m·x ± n|``.

    Parameters
    ----------
    max_order : int
        Highest order ``m + n``.
    f_lo_hz : float
        The LO, Hz (or 1 for the normalised plane).
    window : (x_min, x_max, y_min, y_max)
        The plotted rectangle (``y_min >= 0``).

    Returns
    -------
    Lines
        Segments with ``x`` = input and ``y`` = output frequency.
    """
    family = product_family(max_order)
    m, n, s = family.rf_harmonic, family.lo_harmonic, family.sign
    # y = m·x + s·n·f_lo  <=>  -m·x + y = s·n·f_lo ; the fold of the difference:
    # y = s'·(m·x - n·f_lo) with the other sign  <=>  m·x + y = n·f_lo
    fold = s < 0
    lines = {
        "a": np.concatenate([-m.astype(float), m[fold].astype(float)]),
        "b": np.ones(m.size + fold.sum()),
        "c": np.concatenate([(s * n * f_lo_hz).astype(float), (n[fold] * f_lo_hz).astype(float)]),
        "m": np.concatenate([m, m[fold]]),
        "n": np.concatenate([n, n[fold]]),
        "s": np.concatenate([s, s[fold]]),
        "edge": np.zeros(m.size + fold.sum(), dtype=np.int64),
    }
    return _select(lines, window)


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


# -------------------------------------------------------------------- strips


@dataclass(frozen=True)
class Strips:
    """Convex polygons (one per product branch) clipped to a window, as plain arrays.

    Attributes
    ----------
    xs, ys : list of numpy.ndarray
        Polygon vertices, in the plane's units.
    rf_harmonic, lo_harmonic, sign : numpy.ndarray of int
        The product each strip belongs to.
    """

    xs: list[np.ndarray]
    ys: list[np.ndarray]
    rf_harmonic: np.ndarray
    lo_harmonic: np.ndarray
    sign: np.ndarray

    def __len__(self) -> int:
        return len(self.xs)


def _strip_coefficients(direction: str, family: ProductFamily, t_low: float, t_high: float):
    _check_direction(direction)
    m, n, s = family.rf_harmonic, family.lo_harmonic, family.sign
    diff = s < 0
    if direction == "down":
        # m·x + s·n·y in [t_low, t_high]; the difference also in [-t_high, -t_low]
        a = np.concatenate([m, m[diff]]).astype(float)
        b = np.concatenate([s * n, -n[diff]]).astype(float)
        lo = np.concatenate([np.full(m.size, t_low), np.full(diff.sum(), -t_high)])
        hi = np.concatenate([np.full(m.size, t_high), np.full(diff.sum(), -t_low)])
    else:
        # x - s·n·y in [m·t_low, m·t_high]; the difference also x - n·y in [-m·t_high, -m·t_low]
        a = np.ones(m.size + diff.sum())
        b = np.concatenate([-(s * n), -n[diff]]).astype(float)
        lo = np.concatenate([m * t_low, -m[diff] * t_high]).astype(float)
        hi = np.concatenate([m * t_high, -m[diff] * t_low]).astype(float)
    meta = (np.concatenate([m, m[diff]]), np.concatenate([n, n[diff]]), np.concatenate([s, s[diff]]))
    return a, b, lo, hi, meta


@lru_cache(maxsize=32)
def tuning_plane_strips(
    direction: str, max_order: int, if_low_hz: float, if_high_hz: float, window: tuple[float, float, float, float]
) -> Strips:
    """The regions of the RF (x) versus LO (y) plane where each product hits the IF band.

    Down-conversion: the input at ``x`` mixed with the LO at ``y`` through
    (m, n, sign) lands inside the IF passband.  Up-conversion: the IF passband
    mixed with the LO at ``y`` lands on ``x``.  Each region is the strip
    between the two lines of :func:`tuning_plane_loci` for the IF edges,
    clipped to the window.

    Parameters
    ----------
    direction : {"down", "up"}
        Conversion direction.
    max_order : int
        Highest order ``m + n``.
    if_low_hz, if_high_hz : float
        IF passband edges, Hz.
    window : (rf_min_hz, rf_max_hz, lo_min_hz, lo_max_hz)
        The plotted rectangle, Hz.

    Returns
    -------
    Strips
        Only strips that cover part of the window.  Results are cached (the
        arguments are plain numbers), so the arrays are read-only.
    """
    family = product_family(max_order)
    a, b, c_lo, c_hi, (m, n, s) = _strip_coefficients(direction, family, if_low_hz, if_high_hz)
    x_min, x_max, y_min, y_max = (float(v) for v in window)
    scale = max(abs(x_max), abs(y_max), 1.0)
    tol = 1e-9 * scale * (np.abs(a) + np.abs(b))
    # candidates: the 4 corners and each boundary line's crossings with the 4 edges
    cx = np.array([x_min, x_max, x_max, x_min])
    cy = np.array([y_min, y_min, y_max, y_max])
    pts_x = [np.broadcast_to(cx[:, None], (4, a.size))]
    pts_y = [np.broadcast_to(cy[:, None], (4, a.size))]
    with np.errstate(divide="ignore", invalid="ignore"):
        for c in (c_lo, c_hi):
            pts_x.append(
                np.stack([np.full_like(a, x_min), np.full_like(a, x_max), (c - b * y_min) / a, (c - b * y_max) / a])
            )
            pts_y.append(
                np.stack([(c - a * x_min) / b, (c - a * x_max) / b, np.full_like(a, y_min), np.full_like(a, y_max)])
            )
    px = np.concatenate(pts_x)
    py = np.concatenate(pts_y)
    with np.errstate(invalid="ignore"):
        value = a * px + b * py
        ok = (
            np.isfinite(px)
            & np.isfinite(py)
            & (px >= x_min - 1e-12 * scale)
            & (px <= x_max + 1e-12 * scale)
            & (py >= y_min - 1e-12 * scale)
            & (py <= y_max + 1e-12 * scale)
            & (value >= c_lo - tol)
            & (value <= c_hi + tol)
        )
    count = ok.sum(axis=0)
    keep = np.flatnonzero(count >= 3)
    xs: list[np.ndarray] = []
    ys: list[np.ndarray] = []
    for k in keep:
        x = np.clip(px[ok[:, k], k], x_min, x_max)
        y = np.clip(py[ok[:, k], k], y_min, y_max)
        angle = np.arctan2((y - y.mean()) / (y_max - y_min), (x - x.mean()) / (x_max - x_min))
        order = np.argsort(angle, kind="stable")
        xs.append(x[order])
        ys.append(y[order])
    strips = Strips(xs=xs, ys=ys, rf_harmonic=m[keep], lo_harmonic=n[keep], sign=s[keep])
    # cached (a channel change redraws the same strips): hand out read-only arrays
    for array in (*xs, *ys, strips.rf_harmonic, strips.lo_harmonic, strips.sign):
        array.setflags(write=False)
    return strips
