"""Spur loci and strips of the two chart planes: pure numpy.

On the tuning plane (RF across, LO up) each product (m, n, sign) that lands on the
IF is a straight line for each IF edge (:func:`tuning_plane_loci`), and the strip
between the lines for the lower and upper edges (:func:`tuning_plane_strips`) is
where it falls inside the IF passband; on the output plane (input across, output
up) each product is a line ``|m·x ± n·f_LO|`` (:func:`output_plane_loci`).  The
lines are clipped to the plotted window (:func:`clip_lines`).  Nothing here imports
a plotting or widget library.
"""

from __future__ import annotations

from dataclasses import dataclass
from functools import lru_cache

import numpy as np

from .products import ProductFamily, _check_direction, product_family

__all__ = ["Lines", "clip_lines", "tuning_plane_loci", "output_plane_loci", "Strips", "tuning_plane_strips"]


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
