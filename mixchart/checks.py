"""The warnings of an evaluation: what a reviewer expects to be told about a plan.

Each warning is one line starting with the plan field it concerns.  Pure numpy; never
imports a plotting library.
"""

from __future__ import annotations

import math

import numpy as np
import pandas as pd

from .context import Context, capped
from .filters import Filter, iter_filter_stages
from .levels import RF_EXTRAPOLATION_LIMIT_DB
from .mixer_model import assumed_figures
from .ring_model import circuit_warnings
from .units import format_frequency

#: A band filter wider than this fraction of its centre is warned about when it uses the
#: arithmetic (narrow-band) transform, which is accurate only for narrow filters (common
#: practice, no source: about 5 %).
ARITHMETIC_WARN_FRACTION = 0.05
#: An RF drive at the mixer closer than this to the LO drive is warned about as compression,
#: dB (common practice, no source).
COMPRESSION_MARGIN_DB = 10.0
#: A wanted signal this far (dB) down a fixed filter's skirt is reported in the warnings.
WANTED_LOSS_WARN_DB = 3.0


def _all_stages(filt: Filter | None):
    """``filt`` and, for a cascade, every stage inside it (nested cascades included)."""
    if filt is None:
        return
    yield filt
    for stage in getattr(filt, "stages", ()):
        yield from _all_stages(stage)


def _measured_stages(filt: Filter | None, field: str):
    """Every measured (Touchstone) filter inside ``filt``, with its dotted field name."""
    stages = getattr(filt, "stages", None)
    if stages is not None:
        for i, stage in enumerate(stages):
            yield from _measured_stages(stage, f"{field}.stages.{i}")
    elif filt is not None and hasattr(filt, "table_db"):
        yield field, filt


def span_warnings(ctx: Context, worst_by_product: pd.DataFrame) -> list[str]:
    """Say when measured data was read outside its span, and how many worst-case rows it touched.

    A Touchstone filter asked outside its file's span uses its policy (``outside``: the end
    values held, or an error); held values are an assumption, so every worst-case row whose
    band reaches outside the span is counted and named here, never silently.
    """
    down = ctx.plan.direction == "down"
    out: list[str] = []
    # (filter, field, the frequencies it is read at in the worst-case rows, which rows)
    kinds = worst_by_product["kind"].to_numpy()
    low, high = worst_by_product["f_low_hz"].to_numpy(), worst_by_product["f_high_hz"].to_numpy()
    uses = ((ctx.rf_filter, "filters.rf", "response" if down else "product"),
            (ctx.if_filter, "filters.if", "product" if down else None))
    for filt, field, kind in uses:
        for name, stage in _measured_stages(filt, field):
            f0, f1 = float(stage.f_hz[0]), float(stage.f_hz[-1])
            wanted = ctx.channels_hz if field == "filters.rf" else (ctx.f_out_hz if down else ctx.f_in_hz)
            rows = kinds == kind if kind else np.zeros(kinds.size, bool)
            outside = rows & ((low < f0) | (high > f1))
            n_wanted = int(np.count_nonzero((wanted < f0) | (wanted > f1)))
            if outside.any() or n_wanted:
                parts = []
                if outside.any():
                    parts.append(f"{int(outside.sum())} of {int(rows.sum())} worst-case rows "
                                 f"({format_frequency(float(low[outside].min()))} to "
                                 f"{format_frequency(float(high[outside].max()))})")
                if n_wanted:
                    parts.append(f"the wanted signal on {n_wanted} channel(s)")
                policy = ("the end values are held there" if stage.spec.outside == "hold" else
                          f"the stated floor of {stage.spec.outside_atten_db:g} dB is taken there")
                out.append(f"{name}: {' and '.join(parts)} read outside the file's span "
                           f"{format_frequency(f0)} to {format_frequency(f1)}; {policy} "
                           "(an assumption: measure wider, or set outside='error')")
    return out


def floor_warnings(worst_by_product: pd.DataFrame) -> list[str]:
    """Say when an assumed ultimate rejection (a kind's default floor) decided worst-case rows.

    The default floors are common practice, not the user's filter: a margin they decide
    depends on that assumption, so the count, the failing count and the worst such row are
    named (from the ``loss_limit`` column of the worst-case rows).
    """
    out: list[str] = []
    limits = worst_by_product["loss_limit"].to_numpy()
    margins = worst_by_product["margin_db"].to_numpy()
    notes: dict[str, list[int]] = {}
    for i, text in enumerate(limits):
        for note in filter(None, text.split("; ")):
            if note.endswith("(assumed)"):
                notes.setdefault(note, []).append(i)
    for note, rows in notes.items():
        field, floor = note.split(" floor ", 1)
        worst = min(rows, key=lambda i: margins[i])
        row = worst_by_product.iloc[worst]
        n_fail = int(np.count_nonzero(margins[rows] < 0))
        out.append(f"{field}: the assumed ultimate rejection ({floor.removesuffix(' (assumed)')}) sets the loss of "
                   f"{len(rows)} of {len(limits)} worst-case rows, {n_fail} of them failing; the worst: "
                   f"{row['label']} ({row['rf_harmonic']},{row['lo_harmonic']}) at "
                   f"{format_frequency(float(row['channel_hz']))}, margin {float(row['margin_db']):+.1f} dB. "
                   "These margins rest on the assumption: state max_atten_db from the filter's data")
    return out


def mixer_warnings(ctx: Context) -> list[str]:
    """Name the mixer figures the built-in model took from its typical defaults.

    Only figures the table uses are named: a CSV table's measured (0,1) or (1,0) entry needs no
    isolation, and measured even-n entries need no LO second harmonic.  The circuit model's own
    assumptions follow (:func:`mixchart.ring_model.circuit_warnings`).
    """
    plan, table = ctx.plan, ctx.table
    h = np.arange(table.max_harmonic + 1)
    order = h[:, None] + h[None, :]
    used = (order > 0) & (order <= plan.max_order) & ~table.measured
    needs = {"lo_if_isolation_db": bool(used[0, 1]), "lo_rf_isolation_db": bool(used[0, 1]),
             "rf_if_isolation_db": bool(used[1, 0]),
             "lo_harmonic2_dbc": bool((used & (h[None, :] % 2 == 0)).any())}
    assumed = [text for text in assumed_figures(plan.mixer, plan.direction) if needs[text.split(" ", 1)[0]]]
    out = circuit_warnings(plan.mixer)
    if not assumed:
        return out
    return [f"mixer: {', '.join(assumed)} not given, so typical {plan.mixer.topology.replace('_', '-')} values are "
            "assumed (common practice); state them from the mixer's data sheet", *out]


def plan_warnings(ctx: Context) -> list[str]:
    plan = ctx.plan
    out: list[str] = mixer_warnings(ctx)
    rf_low = plan.rf.start_hz - plan.signal.bandwidth_hz / 2
    rf_high = plan.rf.stop_hz + plan.signal.bandwidth_hz / 2
    if plan.if_.f_low_hz <= rf_high and plan.if_.f_high_hz >= rf_low:
        out.append(
            f"IF passband {format_frequency(plan.if_.f_low_hz)}-{format_frequency(plan.if_.f_high_hz)} "
            f"overlaps the RF band {format_frequency(rf_low)}-{format_frequency(rf_high)}: "
            "signals there feed straight through"
        )
    if plan.direction == "down":
        err = ctx.f_out_hz - plan.if_.center_hz
    else:
        err = ctx.f_in_hz - plan.if_.center_hz
    half_room = (plan.if_.bandwidth_hz - plan.signal.bandwidth_hz) / 2
    misfit = np.abs(err) > half_room + 1e-9 * plan.if_.center_hz
    if misfit.any():
        k = int(np.argmax(np.abs(err)))
        out.append(
            f"{int(misfit.sum())} channel(s) do not fit the IF passband with the signal bandwidth "
            f"(worst: {format_frequency(ctx.channels_hz[k])}, off by {format_frequency(abs(err[k]))})"
        )
    if plan.lo.mode == "fixed" and plan.lo.step_hz is not None:
        moved = float(np.max(np.abs(ctx.lo_hz - float(plan.lo.fixed_hz))))
        if moved > 0:
            out.append(f"lo.step_hz: the step grid moves the fixed LO {format_frequency(float(plan.lo.fixed_hz))} "
                       f"by {format_frequency(moved)}; the analysis uses the LO on the grid")
    if plan.direction == "down" and plan.requirement.emission_mask:
        out.append("requirement.emission_mask: a receiver has no emission mask; its segments are ignored "
                   "(products are judged against output_spur_dbc)")
    if plan.direction == "down" and plan.signal.interferer_bandwidth_hz is None:
        out.append("signal.interferer_bandwidth_hz: not given, so each response band assumes a CW interferer; "
                   "a modulated interferer B wide widens every band by B/2 on each side")
    if plan.direction == "down" and plan.max_order < 4:
        out.append(f"max_order: {plan.max_order} < 4, so the half-IF response (2,2) is not analysed")
    for name, spec in (("filters.rf", plan.filters.rf), ("filters.if", plan.filters.if_),
                       ("filters.lo", plan.filters.lo)):
        if spec is None:
            continue
        for where, stage in iter_filter_stages(spec, name):
            centre, width = getattr(stage, "f_center_hz", None), getattr(stage, "bandwidth_hz", None)
            if getattr(stage, "transform", None) != "arithmetic" or width is None:
                continue
            # tracking stages take the channel as centre: judge them at the lowest channel
            f0 = float(centre) if centre is not None else float(ctx.channels_hz.min())
            if width / f0 > ARITHMETIC_WARN_FRACTION:
                out.append(f"{where}.transform: the arithmetic (narrow-band) transform on a "
                           f"{100 * width / f0:.1f}% wide filter misstates its skirts; use 'geometric'")
    if plan.lo.step_hz is not None:
        worst_step = float(np.max(np.abs(ctx.lo_hz - plan.nominal_lo_hz(ctx.channels_hz))))
        if worst_step > 0 and plan.direction == "down":
            out.append(f"LO grid error up to {format_frequency(worst_step)}: the RF channel is where it is, so the "
                       "wanted IF output and every product move by as much")
        elif worst_step > 0 and plan.lo.grid_holds == "input":
            out.append(f"LO grid error up to {format_frequency(worst_step)}: the IF input is held (lo.grid_holds "
                       "'input'), so the wanted output and every product move off the channel by as much")
        elif worst_step > 0:
            out.append(f"LO grid error up to {format_frequency(worst_step)}: the IF input is retuned by as much to "
                       "keep the output on the channel (lo.grid_holds 'output')")
    if plan.direction == "down" and plan.lo.grid_holds == "output":
        out.append("lo.grid_holds: 'output' applies to a transmitter; a receiver's RF channel is where it is, "
                   "so its output moves with the LO (as for 'input')")
    down = plan.direction == "down"
    # (field, filter, the frequencies that must pass it, what they are, what follows)
    must_pass = (
        ("filters.rf", ctx.rf_filter, ctx.channels_hz, "the wanted signal", "move the filter with the plan"),
        ("filters.if", ctx.if_filter, ctx.f_out_hz if down else ctx.f_in_hz, "the wanted signal",
         "move the filter with the plan"),
        # the tables hold at the stated LO drive: an LO on the skirt starves the mixer, and the
        # levels are not scaled for that (the LO filter enters the levels only through the LO H2 floor)
        ("filters.lo", ctx.lo_filter, ctx.lo_hz, "the LO",
         "the mixer's LO drive falls by as much and the levels, stated at the table's LO drive, do not follow"),
    )
    for name, filt, f_hz, what, advice in must_pass:
        if filt is None or filt.tracks_channel:
            continue  # a tracking filter follows the wanted signal by construction
        loss = capped(filt.atten_db(f_hz), name, f_hz) - _passband_loss_db(filt)
        k = int(np.argmax(loss))
        if loss[k] > WANTED_LOSS_WARN_DB:
            out.append(
                f"{name}: {what} at {format_frequency(f_hz[k])} is {loss[k]:.1f} dB down the filter's "
                f"skirt (channel {format_frequency(ctx.channels_hz[k])}); {advice}"
            )
    # Every filter stops at an ultimate rejection; where the plan does not state one, the kind's
    # common-practice default is assumed, and said (an assumption is never silent).
    for name, filt in (("filters.rf", ctx.rf_filter), ("filters.if", ctx.if_filter)):
        assumed = sorted({f"{f.spec.kind} {f.max_atten_db:g} dB" for f in _all_stages(filt) if f.max_atten_is_default})
        if assumed:
            out.append(f"{name}.max_atten_db: not given, so the common-practice ultimate rejection is assumed "
                       f"({', '.join(assumed)}); state the filter's real stopband floor")
    if plan.direction == "up" and ctx.rf_filter is None:
        out.append("filters.rf: no output filter described; every product is taken at 0 dB of filter loss "
                   "wherever it lands (add the real output filter for real margins)")
    elif plan.direction == "down" and ctx.if_filter is None:
        out.append("filters.if: no IF filter described; the IF passband is taken as an ideal brick wall "
                   "(products outside it are not counted)")
    # Drives at the mixer, after the input-side filter's loss: the wanted signal on every
    # channel, and (receivers) the interferer at its least-loss point, the channel itself.
    in_filter = ctx.rf_filter if plan.direction == "down" else ctx.if_filter
    in_field = "filters.rf" if plan.direction == "down" else "filters.if"
    centre = ctx.channels_hz if (in_filter is not None and in_filter.tracks_channel) else None
    loss = np.zeros_like(ctx.f_in_hz) if in_filter is None else capped(
        in_filter.atten_db(ctx.f_in_hz, centre), in_field, ctx.f_in_hz)
    drive = plan.signal.level_dbm - loss
    out.extend(ctx.table.drive_warnings(drive, plan.mixer.lo_drive_dbm))
    if in_filter is not None and float(loss.max()) > WANTED_LOSS_WARN_DB:
        k = int(np.argmax(loss))
        out.append(f"signal.level_dbm: the wanted drive at the mixer is {drive[k]:.1f} dBm on channel "
                   f"{format_frequency(float(ctx.channels_hz[k]))}, {loss[k]:.1f} dB below the signal level "
                   f"after {in_field}")
    strongest = float(drive.max())
    interferer = plan.signal.interferer_level_dbm
    if plan.direction == "down" and interferer is not None:
        u_mix = interferer - float(loss.min())  # pessimistic: at the preselector's least loss
        strongest = max(strongest, u_mix)
        if u_mix - ctx.table.rf_ref_dbm > RF_EXTRAPOLATION_LIMIT_DB:  # above: optimistic (drive_warnings)
            out.append("signal.interferer_level_dbm: the interferer's " + ctx.table.drive_warnings(
                u_mix, ctx.table.lo_ref_dbm)[0])
    # Compression: a switching mixer stays near its small-signal levels only with the RF drive
    # well below the LO drive (common practice, no source: about 10 dB below).
    if strongest > plan.mixer.lo_drive_dbm - COMPRESSION_MARGIN_DB:
        out.append(f"mixer.lo_drive_dbm: an RF drive of {strongest:.1f} dBm at the mixer is within "
                   f"{COMPRESSION_MARGIN_DB:g} dB of the {plan.mixer.lo_drive_dbm:g} dBm LO drive: the mixer "
                   "compresses and the levels are optimistic there")
    note = ctx.table.fallback_note(plan.max_order)
    if note:
        out.append(note)
    return out


def _passband_loss_db(filt: Filter) -> float:
    """Smallest loss of a fixed filter across its nominal passband, dB (its insertion loss)."""
    low, high = filt.passband_hz()
    if not (math.isfinite(low) and high > low):
        return 0.0
    if not math.isfinite(high):
        high = 4 * max(low, 1.0)
    grid = np.linspace(low, high, 129)
    return float(np.min(filt.atten_db(grid)))
