"""Pure numpy physics: sampling (Nyquist zones, folding, aliases, harmonics, clock spurs).

Nothing in this package imports a plotting or widget library.
"""

from .sampling import (
    MAX_ALIAS_BANDS,
    AliasBands,
    FoldedBand,
    alias_input_bands,
    check_band_in_zone,
    clock_spur_sideband_dbc,
    clock_spur_sideband_hz,
    fold_band,
    fold_hz,
    harmonic_bands,
    nyquist_zone,
    zone_band_hz,
)

__all__ = [
    "nyquist_zone",
    "fold_hz",
    "FoldedBand",
    "fold_band",
    "AliasBands",
    "alias_input_bands",
    "zone_band_hz",
    "check_band_in_zone",
    "clock_spur_sideband_dbc",
    "clock_spur_sideband_hz",
    "harmonic_bands",
    "MAX_ALIAS_BANDS",
]
