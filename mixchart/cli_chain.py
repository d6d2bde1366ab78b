"""``mixchart sweep`` for a chain of several stages: text, CSV or JSON."""

from __future__ import annotations

import argparse
import json
import sys

from .units import format_frequency

__all__ = ["sweep_chain", "nodes_text", "paths_text"]

CAUTION = ("Levels are estimates from the stage models; emission limits are set by local rules and licensed "
           "practice - check against them.")


def _span(low: float, high: float) -> str:
    return format_frequency(low, 7) if low == high else f"{format_frequency(low, 7)} to {format_frequency(high, 7)}"


def nodes_text(nodes) -> str:
    """The frequency plan: the wanted signal's range, sense and LO at every node."""
    rows = [("node", "after", "wanted signal", "sense", "LO", "level")]
    for row in nodes.itertuples(index=False):
        lo = "" if row.lo_low_hz != row.lo_low_hz else _span(row.lo_low_hz, row.lo_high_hz)
        rows.append((str(row.node), row.after, _span(row.f_low_hz, row.f_high_hz), row.sense, lo,
                     f"{row.level_dbm:.1f} dBm"))
    widths = [max(len(r[i]) for r in rows) for i in range(len(rows[0]))]
    return "\n".join("  ".join(cell.ljust(w) for cell, w in zip(r, widths, strict=True)).rstrip() for r in rows)


def paths_text(frame, top: int) -> str:
    """The worst paths as a text table."""
    shown = frame.head(top)
    rows = [("kind", "stage", "channel", "band", "level dBc", "rej. dB", "limit", "margin", "path")]
    for row in shown.itertuples(index=False):
        rej = f"{row.rejection_db:.1f}" if row.kind == "response" else ""
        rows.append((row.kind, row.stage, format_frequency(row.channel_hz, 7),
                     _span(row.f_low_hz, row.f_high_hz), f"{row.level_dbc:.1f}", rej, row.limit,
                     f"{row.margin_db:+.1f}", row.path))
    widths = [max(len(r[i]) for r in rows) for i in range(len(rows[0]) - 1)]
    return "\n".join("  ".join([*(c.ljust(w) for c, w in zip(r[:-1], widths, strict=True)), r[-1]]) for r in rows)


def sweep_chain(plan, base, args: argparse.Namespace) -> int:
    """Sweep a chain plan and print it as ``args.format`` asks (exit 1 with --fail-on-spur and a FAIL)."""
    from .chains import analyse_chain

    result = analyse_chain(plan, base_dir=base)
    frame = result.hits if args.rows == "hits" else result.paths
    index = None
    if args.channel is not None:
        from .cli import channel_index

        index = channel_index(args.channel, plan, result)
        frame = result.channel_frame(index)
    out = sys.stdout
    if args.format == "json":
        payload = result.to_json()
        if index is not None or args.rows == "hits":
            from .analysis import frame_records

            payload["rows"] = frame_records(frame)
        json.dump(payload, out, indent=2, allow_nan=False)
        out.write("\n")
    elif args.format == "csv":
        frame.to_csv(out, index=False, float_format="%.9g")
    else:
        from .requirements import resolve_limits

        limits = resolve_limits(plan.requirement, plan.direction)
        texts = limits.texts[1:] if plan.direction == "up" else limits.texts
        span = _span(float(result.channels_hz[0]), float(result.channels_hz[-1]))
        out.write(f"{plan.name}\njudged against: {'; '.join(texts)} | {plan.direction}-conversion chain, "
                  f"{plan.rf.n_channels} channel(s) {span}\n")
        if index is not None:
            margin = float(result.worst_margin_db[index])
            out.write(f"channel {format_frequency(float(result.channels_hz[index]))}: "
                      f"{'PASS' if margin >= 0 else 'FAIL'}, worst margin {margin:+.1f} dB; whole plan: ")
        out.write(result.summary.line() + "\n")
        for warning in result.warnings:
            out.write(f"note: {warning}\n")
        out.write("frequency plan (the wanted signal at every node):\n" + nodes_text(result.nodes) + "\n")
        out.write(paths_text(frame, args.top) + "\n")
        out.write(CAUTION + "\n")
    if args.fail_on_spur and not result.summary.worst_margin_db >= 0:
        return 1
    return 0
