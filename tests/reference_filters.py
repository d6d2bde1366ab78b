"""Filter losses for the brute-force reference (tests/reference.py): plain Python floats.

Butterworth, Chebyshev type I, tuned-circuit, brick-wall and cascade filters are
re-derived from their textbook formulas; elliptic and Touchstone filters call
:meth:`mixchart.filters.Filter.atten_db` on one scalar at a time.  Kept apart from
tests/reference.py so that the filter rules have one home.
"""

from __future__ import annotations

import math

_DB_PER_DECADE_POWER = 10.0


def _db_one_plus(log10_x: float) -> float:
    """``10·log10(1 + x)`` in dB given ``log10(x)``, without overflow (derived by hand)."""
    if log10_x == math.inf:
        return math.inf
    if log10_x > 0.0:  # 10 log10(x (1 + 1/x)) = 10 log10 x + 10 log10(1 + 1/x)
        return _DB_PER_DECADE_POWER * (log10_x + math.log10(1.0 + 10.0 ** -log10_x))
    return _DB_PER_DECADE_POWER * math.log1p(10.0**log10_x) / math.log(10.0)


def butterworth_loss_db(omega: float, order: int) -> float:
    """Butterworth low-pass prototype loss ``10·log10(1 + Omega^(2n))``, dB.

    Textbook formula (from memory: A. B. Williams & F. J. Taylor, *Electronic Filter
    Design Handbook*, ch. 2, the Butterworth magnitude ``|H|^2 = 1/(1 + Omega^2n)``).
    """
    if omega == 0.0:
        return 0.0
    return _db_one_plus(2 * order * math.log10(omega))


def chebyshev1_loss_db(omega: float, order: int, ripple_db: float) -> float:
    """Chebyshev type I prototype loss ``10·log10(1 + eps²·T_n(Omega)²)``, dB.

    ``eps² = 10^(ripple/10) - 1``; ``T_n(x) = cos(n·acos x)`` for ``|x| <= 1`` and
    ``cosh(n·acosh x)`` above (textbook formula, from memory: Williams & Taylor, ch. 2).
    """
    eps_sq = 10.0 ** (ripple_db / 10.0) - 1.0
    if omega <= 1.0:
        t = math.cos(order * math.acos(omega))
        return _DB_PER_DECADE_POWER * math.log10(1.0 + eps_sq * t * t)
    if omega == math.inf:
        return math.inf
    x = order * math.acosh(omega)
    log10_t = (x + math.log1p(math.exp(-2.0 * x)) - math.log(2.0)) / math.log(10.0)  # log10 cosh x
    return _db_one_plus(math.log10(eps_sq) + 2.0 * log10_t)


def tuned_circuit_loss_db(f_hz: float, f0_hz: float, q_loaded: float, stages: int) -> float:
    """``stages`` single tuned circuits: each ``10·log10(1 + (Q·(f/f0 - f0/f))²)``, dB.

    Textbook formula (from memory: Kennedy & Davis, *Electronic Communication Systems*,
    the image-rejection ratio ``alpha = sqrt(1 + Q²·rho²)``, ``rho = f/f0 - f0/f``).
    """
    if f_hz == 0.0 or f_hz == math.inf:
        return math.inf
    q_rho = abs(q_loaded * (f_hz / f0_hz - f0_hz / f_hz))
    if q_rho == 0.0:
        return 0.0
    return stages * _db_one_plus(2.0 * math.log10(q_rho))


def _omega(spec, f_hz: float, f0_hz: float | None, arithmetic: bool) -> float:
    """Normalised prototype frequency of a low/high/band-pass/band-stop filter.

    Standard transforms (as scipy.signal.lp2hp/lp2bp/lp2bs; filters.PrototypeFilter docstring):
    low-pass ``f/f_e``; high-pass ``f_e/f``; band-pass ``|f/f0 - f0/f|·f0/BW`` (geometric) or
    ``2|f - f0|/BW`` (arithmetic, narrow-band); band-stop the reciprocal of the band-pass value.
    """
    response = spec.response
    if response == "lowpass":
        return f_hz / spec.f_edge_hz
    if response == "highpass":
        return math.inf if f_hz == 0.0 else spec.f_edge_hz / f_hz
    if arithmetic:
        band = abs(f_hz - f0_hz) * 2.0 / spec.bandwidth_hz
    elif f_hz == 0.0 or f_hz == math.inf:
        band = math.inf
    else:
        band = abs(f_hz / f0_hz - f0_hz / f_hz) * f0_hz / spec.bandwidth_hz
    if response == "bandpass":
        return band
    return math.inf if band == 0.0 else 1.0 / band


def omega_range(spec, low: float, high: float, f0_hz: float | None, arithmetic: bool) -> tuple[float, float]:
    """Least and greatest prototype frequency ``Omega`` over the band ``[low, high]`` Hz.

    Each transform is monotone on known pieces (derived by hand): low-pass rises with f,
    high-pass falls; the band-pass value falls to 0 at f0 and rises either side, so its least
    is 0 when the band holds f0 and its greatest is at an end; band-stop is the reciprocal.
    """
    ends = (_omega(spec, low, f0_hz, arithmetic), _omega(spec, high, f0_hz, arithmetic))
    holds_centre = spec.response in ("bandpass", "bandstop") and low <= f0_hz <= high
    if spec.response == "bandpass" and holds_centre:
        return 0.0, max(ends)
    if spec.response == "bandstop" and holds_centre:
        return min(ends), math.inf
    return min(ends), max(ends)


#: The documented default ultimate rejection of each kind, dB (common practice, no source; restated
#: from the mixchart.filters docstring, not imported).
ULTIMATE_DEFAULT_DB = {"butterworth": 80.0, "chebyshev1": 80.0, "elliptic": 80.0, "brickwall": 80.0,
                       "tuned": 70.0, "touchstone": 100.0, "cascade": 100.0}


def ultimate_db(spec) -> float:
    """A filter spec's ultimate rejection: its ``max_atten_db``, else its kind's default, dB."""
    given = getattr(spec, "max_atten_db", None)
    return ULTIMATE_DEFAULT_DB[spec.kind] if given is None else float(given)


class FilterLoss:
    """Loss of a plan's filter at one frequency, dB (positive = loss), plain floats.

    Butterworth, Chebyshev type I, tuned-circuit, brick-wall and cascade filters are
    re-derived from their textbook formulas above; elliptic and Touchstone filters call
    :meth:`mixchart.filters.Filter.atten_db` on one scalar at a time.  A filter (or a
    stage of a cascade) with ``tracks_channel`` is centred on the ``channel_hz`` given
    (mixchart.filters docstring: "their centre is then given at evaluation time").
    """

    def __init__(self, spec, base_dir=None) -> None:
        self.spec = spec
        self.base_dir = base_dir
        self.stages = list(spec.stages) if spec.kind == "cascade" else [spec]
        self.tracks_channel = any(getattr(stage, "tracks_channel", False) for stage in self.stages)
        self._built = {}

    def least(self, f_low_hz: float, f_high_hz: float, channel_hz: float | None) -> float:
        """Least loss over the band ``[f_low_hz, f_high_hz]``, dB (a band reaches the far side
        through its least-loss point: mixchart.filters.Filter.least_atten_db docstring).

        Re-derived per stage: Butterworth, brick-wall and tuned losses grow with the prototype
        frequency's magnitude, so the least is at the band's smallest ``|Omega|`` (found from the
        transform's monotone pieces: :func:`omega_range`); a Chebyshev loss is 0 where ``T_n``
        has a zero ``cos((2k-1)·pi/(2n))`` inside the band's ``Omega`` range and otherwise at an
        end of that range (``T_n²`` is unimodal between its zeros and grows above 1).  Elliptic
        and Touchstone stages call the library's ``least_atten_db`` on one band (checked on its
        own against scipy.signal's densely sampled response in tests/test_filter_bands.py).  A
        cascade takes the sum of its stages' least losses, each at its floor, then the
        assembly's floor (the library's documented lower bound, restated).
        """
        total = sum(min(self._stage_least(stage, i, f_low_hz, f_high_hz, channel_hz), ultimate_db(stage))
                    for i, stage in enumerate(self.stages))
        return min(total, ultimate_db(self.spec)) if self.spec.kind == "cascade" else total

    def _stage_least(self, spec, index: int, low: float, high: float, channel_hz: float | None) -> float:
        f0 = getattr(spec, "f_center_hz", None)
        if getattr(spec, "tracks_channel", False) and channel_hz is not None:
            f0 = channel_hz
        kind = spec.kind
        if kind == "tuned":  # least |f/f0 - f0/f| at the band point nearest f0
            return tuned_circuit_loss_db(min(max(f0, low), high), f0, spec.q_loaded, spec.stages)
        if kind in ("brickwall", "butterworth", "chebyshev1"):
            arithmetic = kind == "brickwall" or spec.transform == "arithmetic"
            w_min, w_max = omega_range(spec, low, high, f0, arithmetic)
            if kind == "brickwall":
                return 0.0 if w_min <= 1.0 else spec.stop_atten_db
            if kind == "butterworth":
                return butterworth_loss_db(w_min, spec.order)
            n = spec.order
            if any(w_min <= math.cos((2 * k - 1) * math.pi / (2 * n)) <= w_max for k in range(1, n + 1)):
                return 0.0
            return min(chebyshev1_loss_db(w_min, n, spec.ripple_db), chebyshev1_loss_db(w_max, n, spec.ripple_db))
        from mixchart.filters import build_filter

        if index not in self._built:
            self._built[index] = build_filter(spec, base_dir=self.base_dir)
        built = self._built[index]
        fc = f0 if built.tracks_channel else None
        return float(built.least_atten_db(low, high, fc))

    def __call__(self, f_hz: float, channel_hz: float | None) -> float:
        # Every filter's loss stops at its ultimate rejection (mixchart.filters docstring:
        # max_atten_db, else the kind's common-practice default); a cascade's stages keep their
        # own and the assembly has its own.
        total = sum(min(self._stage(stage, i, f_hz, channel_hz), ultimate_db(stage))
                    for i, stage in enumerate(self.stages))
        return min(total, ultimate_db(self.spec)) if self.spec.kind == "cascade" else total

    def _stage(self, spec, index: int, f_hz: float, channel_hz: float | None) -> float:
        f0 = getattr(spec, "f_center_hz", None)
        if getattr(spec, "tracks_channel", False) and channel_hz is not None:
            f0 = channel_hz
        kind = spec.kind
        if kind == "tuned":
            return tuned_circuit_loss_db(f_hz, f0, spec.q_loaded, spec.stages)
        if kind == "brickwall":  # filters.BrickWall: 0 dB edge to edge (edges included), stop_atten_db outside
            return 0.0 if _omega(spec, f_hz, f0, arithmetic=True) <= 1.0 else spec.stop_atten_db
        if kind == "butterworth":
            return butterworth_loss_db(_omega(spec, f_hz, f0, spec.transform == "arithmetic"), spec.order)
        if kind == "chebyshev1":
            return chebyshev1_loss_db(
                _omega(spec, f_hz, f0, spec.transform == "arithmetic"), spec.order, spec.ripple_db
            )
        # elliptic, touchstone: the library's own response, one scalar at a time
        from mixchart.filters import build_filter

        if index not in self._built:
            self._built[index] = build_filter(spec, base_dir=self.base_dir)
        built = self._built[index]
        return float(built.atten_db(f_hz, f0 if built.tracks_channel else None))
