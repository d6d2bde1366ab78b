"""Rows of evaluated blocks gathered into tables: :data:`FRAME_COLUMNS` and the frames of them."""

from __future__ import annotations

import numpy as np
import pandas as pd

from ..checks import COMPRESSION_MARGIN_DB
from ..context import Context, loss_limits
from ..levels import RF_EXTRAPOLATION_LIMIT_DB
from ..physics.products import LABELS
from .block import _Block

__all__ = ["FRAME_COLUMNS"]

#: Columns of :meth:`Evaluation.to_frame`, :attr:`Evaluation.hits` and
#: :meth:`Evaluation.channel_frame`, with their meaning.
FRAME_COLUMNS: dict[str, str] = {
    "kind": "'product' (an output of the wanted signal) or 'response' (an unwanted receiver input)",
    "label": "wanted, image, half-IF, IF feedthrough, LO leakage, LO harmonic, RF feedthrough, "
    "sum product, unwanted sideband, or spur",
    "rf_harmonic": "m, harmonic of the signal at the mixer's signal input (RF down, IF up)",
    "lo_harmonic": "n, LO harmonic",
    "order": "m + n",
    "sign": "product: +1 sum, -1 difference; response: +1 input above n·LO, -1 |n·LO - IF|/m",
    "channel_hz": "RF channel centre, Hz",
    "lo_hz": "LO frequency (on the LO grid), Hz",
    "f_center_hz": "product: output centre; response: unwanted input centre, Hz",
    "f_low_hz": "lower band edge, Hz",
    "f_high_hz": "upper band edge, Hz",
    "in_band": "product: overlaps the output passband; response: always True",
    "table_dbc": "mixer table level at the reference drive, dBc",
    "rf_atten_db": "RF filter loss applied (response: m·A(f_in) - A(f_wanted); up: output filter), dB",
    "if_atten_db": "IF filter loss applied relative to the wanted output, dB",
    "level_dbc": "output level relative to the wanted output, dBc, floored once at -300 dBc for display "
    "(rejection_db and margin_db come from the unfloored level; -inf: nothing reaches the output)",
    "level_dbm": "output level, dBm (level_dbc plus the wanted output level; responses at the interferer level)",
    "rejection_db": "response: how much stronger than the wanted an unwanted input must be for an equal "
    "output, (P_u - P_w) - level_dbc/m (input-referred); product: -level_dbc",
    "requirement": "the limit the margin is taken against: response rejection, output spur or a mask segment",
    "limit": "that limit's value, in limit_unit",
    "limit_unit": "dB (input-referred rejection), dBc or dBm (output level)",
    "margin_db": "response: rejection_db - limit; product: limit - level (dBc or dBm); >= 0 passes; +inf: the "
    "wanted row, and co-channel responses (an input inside the wanted channel is the wanted signal, whose own "
    "products are judged)",
    "mixer_drive_dbm": "RF drive at the mixer's signal input that the row's level was read at, dBm (product: the "
    "wanted after the input filter; response: the interferer after the preselector's loss)",
    "drive_ok": "mixer_drive_dbm at most 10 dB above the level table's reference and 10 dB under the LO drive",
    "loss_limit": "what limited the row's filter loss where the filter's response did not: a filter's ultimate "
    "rejection ('filters.rf floor 70 dB (assumed)': assumed when the kind's common-practice default stood in "
    "for max_atten_db), measured data read outside its span (the file's policy), or a filter not described; "
    "'' when the response itself",
    "passes": "margin_db >= 0",
    "extra_rf_db": "extra RF-filter rejection at the spur that would make it pass, dB (NaN: none needed or no help)",
    "extra_if_db": "extra IF/output-filter rejection that would make it pass, dB (NaN: none needed or no help)",
}


def _frame(block: _Block, mask: np.ndarray, ctx: Context) -> pd.DataFrame:
    """Frame of the rows where ``mask`` (shape of ``block.margin_db``) is True, in row-major order."""
    return _frame_at(block, *np.nonzero(mask), ctx)


def _frame_at(block: _Block, rows: np.ndarray, cols: np.ndarray, ctx: Context) -> pd.DataFrame:
    """Frame of the given (channel row, product column) pairs, in that order."""
    return _frame_from(block.take(rows, cols), ctx)


_KIND_TEXT = np.asarray(("product", "response"), dtype=object)
_LABEL_TEXT = np.asarray(LABELS, dtype=object)


def _frame_from(data: dict[str, np.ndarray], ctx: Context) -> pd.DataFrame:
    """Frame (columns :data:`FRAME_COLUMNS`) of gathered block columns.

    Built without copying the gathered arrays (they are fresh and never written
    again), which keeps the memory of a million-row frame down.
    """
    rf_harmonic = data["rf_harmonic"].astype(np.int64, copy=False)
    lo_harmonic = data["lo_harmonic"].astype(np.int64, copy=False)
    floats = ("table_dbc", "rf_atten_db", "if_atten_db", "level_dbc", "level_dbm", "rejection_db", "margin_db",
              "extra_rf_db", "extra_if_db", "mixer_drive_dbm")
    limits = ctx.limits
    req = data["requirement"].astype(np.intp, copy=False)
    limit = np.concatenate([[limits.rejection_db], limits.pieces_limit])
    unit = np.asarray(["dB", *np.where(limits.pieces_dbm, "dBm", "dBc")], dtype=object)
    columns = {
        "kind": _KIND_TEXT[data["kind"]],
        "label": _LABEL_TEXT[data["label"]],
        "rf_harmonic": rf_harmonic,
        "lo_harmonic": lo_harmonic,
        "order": rf_harmonic + lo_harmonic,
        "sign": data["sign"].astype(np.int64, copy=False),
        **{k: data[k] for k in ("channel_hz", "lo_hz", "f_center_hz", "f_low_hz", "f_high_hz")},
        "in_band": data["in_band"].astype(bool, copy=False),
        **{k: data[k].astype(float, copy=False) for k in floats},
    }
    columns["passes"] = columns["margin_db"] >= 0
    columns["requirement"] = np.asarray(limits.texts, dtype=object)[req]
    columns["limit"] = limit[req]
    columns["limit_unit"] = unit[req]
    # The table's levels hold up to RF_EXTRAPOLATION_LIMIT_DB above its reference drive and with the
    # RF drive COMPRESSION_MARGIN_DB under the LO drive: rows read beyond are flagged.  Below the
    # reference the small-signal slope of (m - 1) dB per dB is the power-series result itself, so
    # lower drives are not flagged (the summary's drive warning still names a far reference).
    drive = columns["mixer_drive_dbm"]
    columns["loss_limit"] = loss_limits(ctx, data["kind"], columns["f_low_hz"], columns["f_high_hz"],
                                        columns["channel_hz"])
    columns["drive_ok"] = ((drive <= ctx.table.rf_ref_dbm + RF_EXTRAPOLATION_LIMIT_DB)
                           & (drive <= ctx.plan.mixer.lo_drive_dbm - COMPRESSION_MARGIN_DB))
    return pd.DataFrame({k: columns[k] for k in FRAME_COLUMNS}, copy=False)

