"""Filter descriptions and their attenuation versus frequency.

A filter is described by a strict pydantic *spec* (embedded in the plan JSON),
a discriminated union on ``kind``: ``butterworth``, ``chebyshev1`` and
``elliptic`` prototypes (:class:`PrototypeFilter`), cascaded single tuned
circuits (``tuned``, :class:`TunedCircuit`), an ideal ``brickwall``
(:class:`BrickWall`), a measured ``touchstone`` two-port
(:class:`MeasuredFilter`) and a ``cascade`` of any of these (:class:`Cascade`).
:func:`build_filter` turns a spec into a :class:`Filter`, whose
:meth:`Filter.atten_db` gives the loss in dB (positive = loss) at arrays of
frequencies in Hz.  Band filters and tuned circuits may *track the channel*
(a tracking preselector): their centre is then given at evaluation time.

Pure numpy; scipy.signal and scikit-rf are imported only when an elliptic or
a measured filter is built.

The package's modules: :mod:`~mixchart.models.filters` (the specs, their physical
ranges and default ultimate rejections), :mod:`~mixchart.filters.response` (the
:class:`Filter` interface), :mod:`~mixchart.filters.kinds` (the filter of each kind,
:func:`build_filter`) and :mod:`~mixchart.filters.prototypes` (the Chebyshev and
elliptic low-pass prototypes' mathematics).
"""

from ..models.filters import (  # noqa: F401 (the limits are re-exported)
    DEFAULT_MAX_ATTEN_DB,
    MAX_FILTER_LOSS_DB,
    MAX_PATH_CHARS,
    MAX_PORT,
    MAX_Q,
    MAX_RIPPLE_DB,
    MAX_STOP_ATTEN_DB,
    MIN_Q,
    MIN_RIPPLE_DB,
    BrickWall,
    Cascade,
    FilterSpec,
    MeasuredFilter,
    PrototypeFilter,
    Response,
    TunedCircuit,
    iter_filter_stages,
    parse_filter_spec,
)
from ..touchstone import MAX_TOUCHSTONE_BYTES, read_touchstone  # noqa: F401 (re-exported)
from .kinds import build_filter
from .response import Filter

__all__ = ["PrototypeFilter", "TunedCircuit", "BrickWall", "MeasuredFilter", "Cascade", "FilterSpec",
           "parse_filter_spec", "iter_filter_stages", "Filter", "build_filter"]
