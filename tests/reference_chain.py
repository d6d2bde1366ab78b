"""A plain-Python reference for conversion chains: every path, by brute force, with no pruning.

Written from the definitions, one channel and one band at a time, without the engine's arrays,
its element classes or its pruning (it shares only the filters' responses and the mixers' level
tables, which have their own tests against outside sources):

* the wanted signal: each mixer's LO is fixed, or follows the wanted signal at its own input
  (``f ± IF``, high or low side), rounded to its step (nearest, halves up); the wanted output is
  the (1,1) sum when only the sum lands in the IF passband, else the difference; a mixer fed at
  its IF port puts the output on the channel;
* a band ``[a, b]`` through a mixer gives ``|m·f + s·n·f_LO|`` for every ``m >= 1``, ``n >= 0``,
  ``m + n`` up to the stage's cap, ``s = ±1`` (``+1`` only for ``n = 0``), folded at 0 Hz, at
  ``drive - CL + level_dbc(m, n, drive)``; the LO's lines ``(0, n)`` come once per stage;
* an amplifier adds its gain and the harmonics ``HD2 = P - OIP2 - 20·log10(2)``,
  ``HD3 = 2·(P - OIP3) - 20·log10(3)`` (power series);
* a filter takes its least loss over each band (the wanted signal: its loss at the centre);
* an ADC makes its harmonics, then folds every band into ``[0, fs/2]``;
* at the output every band is judged against the limit at its frequency; with no filter after
  a receiver's last mixer only what lands in its IF passband arrives.
"""

from __future__ import annotations

import math

from mixchart.context import MAX_FILTER_LOSS_DB
from mixchart.filters import build_filter
from mixchart.mixer_model import build_table
from mixchart.models.chain import stage_names
from mixchart.requirements import resolve_limits


def _loss(filt, f_low, f_high, centre):
    fc = centre if getattr(filt, "tracks_channel", False) else None
    return min(float(filt.least_atten_db(f_low, f_high, fc)), MAX_FILTER_LOSS_DB)


def _point_loss(filt, f, centre):
    fc = centre if getattr(filt, "tracks_channel", False) else None
    return min(float(filt.atten_db(f, fc)), MAX_FILTER_LOSS_DB)


def _mix(a, b, lo, m, n, s):
    x, y = m * a + s * n * lo, m * b + s * n * lo
    if x >= 0:
        return x, y
    if y <= 0:
        return -y, -x
    return 0.0, max(-x, y)


def _fold(f, fs):
    r = math.fmod(f, fs)
    return fs - r if r > fs / 2 else r


def _fold_band(a, b, fs):
    """The pieces of [a, b] in [0, fs/2] (a band within one zone, or straddling one zone edge)."""
    half = fs / 2
    za, zb = math.floor(a / half), max(math.ceil(b / half) - 1, math.floor(a / half))
    if za == zb:
        x, y = _fold(a, fs), _fold(b, fs)
        return [(min(x, y), max(x, y))]
    if zb == za + 1:
        edge = zb * half
        x, e, y = _fold(a, fs), _fold(edge, fs), _fold(b, fs)
        return [(min(x, e), max(x, e)), (min(e, y), max(e, y))]
    return [(0.0, half)]


def _lo(spec, f_in, channel):
    lo_set = spec.lo
    if lo_set.mode == "fixed":
        lo = lo_set.fixed_hz
    elif spec.input_port == "rf":
        lo = f_in + spec.if_.center_hz if lo_set.side == "high" else f_in - spec.if_.center_hz
    else:
        lo = channel + f_in if lo_set.side == "high" else channel - f_in
    if lo_set.step_hz is not None:
        lo = math.floor(lo / lo_set.step_hz + 0.5) * lo_set.step_hz
    return lo


def _wanted_sign(spec, f_in, lo, channel):
    if spec.input_port == "rf":
        summ, diff = f_in + lo, abs(f_in - lo)
        inside = lambda x: spec.if_.f_low_hz <= x <= spec.if_.f_high_hz  # noqa: E731
        return 1 if inside(summ) and not inside(diff) else -1
    if spec.lo.mode != "tracking":
        return 1
    return 1 if abs(f_in + lo - channel) <= abs(abs(f_in - lo) - channel) else -1


def _step(m, n, s):
    return f"({m},{'+' if s > 0 else '-'}{n})" if n else f"({m},0)"


def reference_paths(plan, base_dir=None):
    """Every band at the output of every channel: {channel index: [(path text, level dBc, margin dB)]}.

    The wanted signal itself is left out; so are bands that do not arrive (brick wall).
    """
    names = stage_names(plan)
    channels = _channels(plan)
    mixers = [i for i, s in enumerate(plan.chain) if s.kind == "mixer"]
    filters = {i: build_filter(s.filter, base_dir=base_dir) for i, s in enumerate(plan.chain) if s.kind == "filter"}
    lo_filters = {i: build_filter(s.lo_filter, base_dir=base_dir) for i, s in enumerate(plan.chain)
                  if s.kind == "mixer" and s.lo_filter is not None}
    adc_filters = {i: build_filter(s.channel_filter, base_dir=base_dir) for i, s in enumerate(plan.chain)
                   if s.kind == "adc" and s.channel_filter is not None}

    # the wanted signal through the chain, every channel: (f, level) at every node, each mixer's LO
    def wanted_nodes(channel):
        f = channel if plan.direction == "down" else plan.chain[mixers[0]].if_.center_hz
        level = plan.signal.level_dbm
        out, los = [(f, level)], {}
        for i, spec in enumerate(plan.chain):
            if spec.kind == "filter":
                level -= _point_loss(filters[i], f, f)
            elif spec.kind == "mixer":
                lo = _lo(spec, f, channel)
                los[i] = lo
                f = abs(f + _wanted_sign(spec, f, lo, channel) * lo)
                level -= tables[i].conversion_loss_db
            elif spec.kind == "amplifier":
                level += spec.gain_db
            elif spec.kind == "adc":
                f = _fold(f, spec.sample_rate_hz)
                if i in adc_filters:
                    level -= _point_loss(adc_filters[i], f, f)
            out.append((f, level))
        return out, los

    tables = _build_tables(plan, channels, filters, lo_filters, base_dir)

    limits = resolve_limits(plan.requirement, plan.direction)
    out = {}
    for k, channel in enumerate(channels):
        nodes, los = wanted_nodes(channel)
        f0, p0 = nodes[0]
        half = plan.signal.bandwidth_hz / 2
        # a band: (low, high, level dBm, steps after it left the wanted signal, is the wanted signal)
        bands = [(f0 - half, f0 + half, p0, [], True)]
        for i, spec in enumerate(plan.chain):
            f_in, _ = nodes[i]
            f_out, p_out = nodes[i + 1]
            new = []
            if spec.kind == "filter":
                for a, b, x, steps, wanted in bands:
                    if wanted:
                        new.append((f_out - half, f_out + half, p_out, steps, True))
                    else:
                        new.append((a, b, x - _loss(filters[i], a, b, f_in), steps, False))
            elif spec.kind == "mixer":
                lo, table = los[i], tables[i]
                cap = spec.max_order or plan.max_order
                s_w = _wanted_sign(spec, f_in, lo, channel)
                for a, b, x, steps, wanted in bands:
                    for m in range(1, cap + 1):
                        for n in range(cap + 1 - m):
                            for s in ((1,) if n == 0 else (-1, 1)):
                                lo_b, hi_b = _mix(a, b, lo, m, n, s)
                                level = x - table.conversion_loss_db + float(table.level_dbc_at(m, n, x,
                                                                                                 floored=False))
                                if wanted and (m, n, s) == (1, 1, s_w):
                                    new.append((lo_b, hi_b, p_out, [], True))
                                    continue
                                new.append((lo_b, hi_b, level, steps + [f"{_step(m, n, s)} in {names[i]}"], False))
                    if wanted:
                        for n in range(1, cap + 1):
                            leak = x - table.conversion_loss_db + float(table.level_dbc_at(0, n, x, floored=False))
                            new.append((n * lo, n * lo, leak, [f"LO (0,{n}) in {names[i]}"], False))
            elif spec.kind == "amplifier":
                k_max = spec.max_order if spec.max_order is not None else min(3, plan.max_order)
                oip2 = 30.0 if spec.oip2_dbm is None else spec.oip2_dbm
                oip3 = 20.0 if spec.oip3_dbm is None else spec.oip3_dbm
                g = spec.gain_db
                offsets = [g, 2 * g - oip2 - 20 * math.log10(2), 3 * g - 2 * oip3 - 20 * math.log10(3)]
                for a, b, x, steps, wanted in bands:
                    for h in range(1, k_max + 1):
                        if wanted and h == 1:
                            new.append((a, b, p_out, steps, True))
                            continue
                        step_text = [f"H{h} in {names[i]}"] if h > 1 else []
                        new.append((h * a, h * b, h * x + offsets[h - 1], steps + step_text, False))
            elif spec.kind == "adc":
                fs = spec.sample_rate_hz
                hd = [0.0] + list(spec.harmonics_dbc if spec.harmonics_dbc is not None else (-60, -60, -70, -70))
                k_max = min(len(hd), plan.max_order)
                width = spec.passband_hz if spec.passband_hz is not None else plan.signal.bandwidth_hz
                p_low, p_high = f_out - width / 2, f_out + width / 2
                for a, b, x, steps, wanted in bands:
                    for h in range(1, k_max + 1):
                        word = "alias" if h == 1 else f"H{h}, alias"
                        for lo_b, hi_b in _fold_band(h * a, h * b, fs):
                            if wanted and h == 1:
                                wanted_piece = lo_b <= f_out <= hi_b
                                if wanted_piece:
                                    new.append((f_out - half, f_out + half, p_out, [], True))
                                    continue
                            level = x + hd[h - 1]
                            if i in adc_filters:
                                level -= _loss(adc_filters[i], lo_b, hi_b, f_out)
                            elif not (hi_b >= p_low and lo_b <= p_high):
                                continue
                            new.append((lo_b, hi_b, level, steps + [f"{word} in {names[i]}"], False))
            bands = new
        # the output
        rows = []
        _, w_out = nodes[-1]
        last_mixer = plan.chain[mixers[-1]]
        brick = (plan.direction == "down" and plan.chain[-1].kind != "adc"
                 and not any(s.kind == "filter" for s in plan.chain[mixers[-1] + 1:]))
        for a, b, x, steps, wanted in bands:
            if wanted:
                continue
            if brick and not (b >= last_mixer.if_.f_low_hz and a <= last_mixer.if_.f_high_hz):
                continue
            dbc = x - w_out
            margin = math.inf
            for j in range(limits.n_pieces):
                lo_j, hi_j = float(limits.pieces_low_hz[j]), float(limits.pieces_high_hz[j])
                inside = b >= lo_j and a <= hi_j
                # a mask segment holds its edges: a gap never holds a line on a segment's edge
                if inside and limits.pieces_gap[j] and a == b and ((a == lo_j and lo_j > 0) or a == hi_j):
                    inside = False
                if inside:
                    level = x if limits.pieces_dbm[j] else dbc
                    margin = min(margin, float(limits.pieces_limit[j]) - level)
            rows.append((", then ".join(steps), dbc, margin))
        out[k] = rows
    return out



def _build_tables(plan, channels, filters, lo_filters, base_dir):
    """Each mixer's level table, built as a plan asks: from the LO and the drive of every channel."""
    mixers = [i for i, s in enumerate(plan.chain) if s.kind == "mixer"]
    tables = {}
    for i in mixers:
        spec = plan.chain[i]
        cap = spec.max_order or plan.max_order
        los, drives = [], []
        for channel in channels:
            f = channel if plan.direction == "down" else plan.chain[mixers[0]].if_.center_hz
            level = plan.signal.level_dbm
            for j in range(i):
                s = plan.chain[j]
                if s.kind == "filter":
                    level -= _point_loss(filters[j], f, f)
                elif s.kind == "mixer":
                    lo_j = _lo(s, f, channel)
                    f = abs(f + _wanted_sign(s, f, lo_j, channel) * lo_j)
                    level -= tables[j].conversion_loss_db
                elif s.kind == "amplifier":
                    level += s.gain_db
            los.append(_lo(spec, f, channel))
            drives.append(level)
        h2 = 0.0
        if i in lo_filters:
            lf = lo_filters[i]
            h2 = min(_point_loss(lf, 2 * lo, lo) - _point_loss(lf, lo, lo) for lo in los)
        tables[i] = build_table(spec.mixer, cap, base_dir=base_dir,
                                direction="down" if spec.input_port == "rf" else "up",
                                lo_h2_rejection_db=h2, signal_dbm=max(drives))
    return tables


def _channels(plan):
    n_ch = plan.rf.n_channels
    step = plan.rf.step_hz or 0.0
    return [min(plan.rf.start_hz + k * step, plan.rf.stop_hz) if n_ch > 1 else plan.rf.start_hz
            for k in range(n_ch)]


def reference_tone(plan, channel_index, f_hz, level_dbm, base_dir=None):
    """Every way a CW input at ``f_hz`` reaches the final passband of one channel, by brute force.

    Returns
    -------
    list of (str, float, float)
        The path, the output level relative to the wanted output (dBc) and the output frequency
        (Hz).  Steps are written as the inverse search writes them: a mixer step ``(m,+n)`` or
        ``(m,-n)`` when ``m·f ± n·f_LO`` is positive, its negative ``(-m,∓n)`` when it is negative;
        ``H2`` for an amplifier's harmonic; ``alias zone Z`` (or ``H2, alias zone Z``) for an ADC,
        Z the zone the band sampled sat in.  Each filter takes its loss at the tone's frequency (a
        tracking one centred on the wanted signal at its node).
    """
    names = stage_names(plan)
    channels = _channels(plan)
    channel = channels[channel_index]
    filters = {i: build_filter(s.filter, base_dir=base_dir) for i, s in enumerate(plan.chain) if s.kind == "filter"}
    lo_filters = {i: build_filter(s.lo_filter, base_dir=base_dir) for i, s in enumerate(plan.chain)
                  if s.kind == "mixer" and s.lo_filter is not None}
    adc_filters = {i: build_filter(s.channel_filter, base_dir=base_dir) for i, s in enumerate(plan.chain)
                   if s.kind == "adc" and s.channel_filter is not None}
    tables = _build_tables(plan, channels, filters, lo_filters, base_dir)
    mixers = [i for i, s in enumerate(plan.chain) if s.kind == "mixer"]
    # the wanted signal of this channel: its frequency at every node, the LOs, the output level
    f = channel if plan.direction == "down" else plan.chain[mixers[0]].if_.center_hz
    w = plan.signal.level_dbm
    at_node, los = [], {}
    for i, s in enumerate(plan.chain):
        at_node.append(f)
        if s.kind == "filter":
            w -= _point_loss(filters[i], f, f)
        elif s.kind == "mixer":
            los[i] = _lo(s, f, channel)
            f = abs(f + _wanted_sign(s, f, los[i], channel) * los[i])
            w -= tables[i].conversion_loss_db
        elif s.kind == "amplifier":
            w += s.gain_db
        elif s.kind == "adc":
            f = _fold(f, s.sample_rate_hz)
            if i in adc_filters:
                w -= _point_loss(adc_filters[i], f, f)
    last = plan.chain[-1]
    if last.kind == "adc":
        width = last.passband_hz if last.passband_hz is not None else plan.signal.bandwidth_hz
        p_low, p_high = f - width / 2, f + width / 2
    else:
        p_low, p_high = plan.chain[mixers[-1]].if_.f_low_hz, plan.chain[mixers[-1]].if_.f_high_hz
    tones = [(f_hz, level_dbm, [])]
    for i, s in enumerate(plan.chain):
        new = []
        for f_t, x, steps in tones:
            if s.kind == "filter":
                new.append((f_t, x - _point_loss(filters[i], f_t, at_node[i]), steps))
            elif s.kind == "mixer":
                cap = s.max_order or plan.max_order
                table = tables[i]
                for m in range(1, cap + 1):
                    for n in range(cap + 1 - m):
                        for sg in ((1,) if n == 0 else (-1, 1)):
                            raw = m * f_t + sg * n * los[i]
                            text = _step(m, n, sg) if raw >= 0 else _step(-m, n, -sg)
                            level = x - table.conversion_loss_db + float(table.level_dbc_at(m, n, x, floored=False))
                            new.append((abs(raw), level, steps + [f"{text} in {names[i]}"]))
            elif s.kind == "amplifier":
                k_max = s.max_order if s.max_order is not None else min(3, plan.max_order)
                oip2 = 30.0 if s.oip2_dbm is None else s.oip2_dbm
                oip3 = 20.0 if s.oip3_dbm is None else s.oip3_dbm
                g = s.gain_db
                offsets = [g, 2 * g - oip2 - 20 * math.log10(2), 3 * g - 2 * oip3 - 20 * math.log10(3)]
                for h in range(1, k_max + 1):
                    new.append((h * f_t, h * x + offsets[h - 1], steps + ([f"H{h} in {names[i]}"] if h > 1 else [])))
            elif s.kind == "adc":
                fs = s.sample_rate_hz
                top = s.input_bandwidth_hz or max(4 * fs / 2, 2 * s.nyquist_zone * fs / 2)
                if f_t > top:
                    continue  # beyond the converter's analog input bandwidth: not heard
                hd = [0.0] + list(s.harmonics_dbc if s.harmonics_dbc is not None else (-60, -60, -70, -70))
                for h in range(1, min(len(hd), plan.max_order) + 1):
                    zone = math.floor(h * f_t / (fs / 2)) + 1
                    word = f"alias zone {zone}" if h == 1 else f"H{h}, alias zone {zone}"
                    folded = _fold(h * f_t, fs)
                    level = x + hd[h - 1]
                    if i in adc_filters:
                        level -= _point_loss(adc_filters[i], folded, f)
                    new.append((folded, level, steps + [f"{word} in {names[i]}"]))
                    for spur in s.clock_spurs:  # sidebands h·f ± d, raised by 20·log10(h·f/fs) (phase modulation)
                        for sb, mark in ((1, "+"), (-1, "-")):
                            f_sb = abs(h * f_t + sb * spur.offset_hz)
                            z_sb = math.floor(f_sb / (fs / 2)) + 1
                            w_sb = f"alias zone {z_sb}" if h == 1 else f"H{h}, alias zone {z_sb}"
                            lvl_sb = (x + hd[h - 1] + spur.level_dbc + 20 * math.log10(h * f_t / fs))
                            folded_sb = _fold(f_sb, fs)
                            if i in adc_filters:
                                lvl_sb -= _point_loss(adc_filters[i], folded_sb, f)
                            new.append((folded_sb, lvl_sb,
                                        steps + [f"{w_sb}, clock {mark}{spur.offset_hz:g} Hz in {names[i]}"]))
        tones = new
    return [(", then ".join(st), x - w, f_t) for f_t, x, st in tones if p_low <= f_t <= p_high]
