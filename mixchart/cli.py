"""Command line: ``mixchart sweep | check | schema | migrate | serve | snapshot``.

Exit status: 0 on success; 1 when ``--fail-on-spur`` is given and the plan
violates its requirement; 2 on bad input (a one-line message on stderr, never a
traceback).
"""

from __future__ import annotations

import argparse
import json
import sys
from collections.abc import Sequence
from pathlib import Path

from .errors import MixchartError
from .units import format_frequency

EXAMPLES = {
    "fm_receiver": "fm_receiver.json",
    "uplink_transmitter": "uplink_transmitter.json",
    "ku_block_converter": "ku_block_converter.json",
    "hf_upconverting_receiver": "hf_upconverting_receiver.json",
    "ism_transmitter": "ism_transmitter.json",
}
DEFAULT_EXAMPLE = "fm_receiver"
#: Built-in example chains (plan layout version 2), in mixchart/examples/chains.
CHAIN_EXAMPLES = {
    "scanner_double_conversion": "chains/scanner_double_conversion.json",
    "if_sampling_receiver": "chains/if_sampling_receiver.json",
    "two_step_transmitter": "chains/two_step_transmitter.json",
}


def example_path(name: str = DEFAULT_EXAMPLE) -> Path:
    """Path of a built-in example plan.

    Parameters
    ----------
    name : str
        One of :data:`EXAMPLES`.

    Returns
    -------
    pathlib.Path
    """
    known = {**EXAMPLES, **CHAIN_EXAMPLES}
    if name not in known:
        raise MixchartError(f"--example: {name!r} is invalid; choose one of {', '.join(known)}")
    return Path(__file__).resolve().parent / "examples" / known[name]


def _load_any(args: argparse.Namespace):
    """The plan of either layout version, and its folder; a one-mixer chain is read as version 1."""
    from .models import load_any, single_stage_plan
    from .models.chain import ChainPlan

    path = Path(args.plan) if args.plan else example_path(args.example)
    plan = load_any(path)
    if isinstance(plan, ChainPlan):
        plan = single_stage_plan(plan) or plan
    return plan, path.parent


def _fmt_db(value: float) -> str:
    return "   -inf" if value == float("-inf") else "    inf" if value == float("inf") else f"{value:7.1f}"


def _limit_text(row) -> str:
    """The row's requirement in short: ">=70 dB" (input-referred rejection), "<=-60 dBc", "<=-36 dBm"."""
    return f"{'>=' if row.limit_unit == 'dB' else '<='}{row.limit:g} {row.limit_unit}"


def _text_table(frame, top: int) -> str:
    shown = frame.head(top)
    channel = [format_frequency(f, 7) for f in shown["channel_hz"]]
    lo = [format_frequency(f, 7) for f in shown["lo_hz"]]
    band = [f"{format_frequency(a, 7)}-{format_frequency(b, 7)}"
            for a, b in zip(shown["f_low_hz"], shown["f_high_hz"], strict=True)]
    limit = [_limit_text(row) for row in shown.itertuples(index=False)]
    # frequency columns as wide as their longest entry, so long values never run together
    w_ch, w_lo, w_band, w_lim = (max([len(head), *map(len, col)]) for head, col in
                                 (("channel", channel), ("LO", lo), ("spur/input band", band), ("limit", limit)))
    lines = [
        f"{'kind':<8} {'label':<17} {'m':>2} {'n':>2} {'±':>1} {'channel':>{w_ch}} {'LO':>{w_lo}} "
        f"{'spur/input band':>{w_band}} {'level dBc':>10} {'rej. dB':>7} {'limit':>{w_lim}} {'margin':>7} "
        f"{'extra RF':>8} {'extra IF':>8} {'drive':<12} filter loss set by"
    ]
    for k, row in enumerate(shown.itertuples(index=False)):
        need_rf = "" if row.extra_rf_db != row.extra_rf_db else f"{row.extra_rf_db:8.1f}"
        need_if = "" if row.extra_if_db != row.extra_if_db else f"{row.extra_if_db:8.1f}"
        rejection = _fmt_db(row.rejection_db) if row.kind == "response" else ""
        drive = f"{row.mixer_drive_dbm:.0f} dBm{'' if row.drive_ok else ' (!)'}"
        lines.append(
            f"{row.kind:<8} {row.label:<17} {row.rf_harmonic:>2} {row.lo_harmonic:>2} "
            f"{'+' if row.sign > 0 else '-':>1} {channel[k]:>{w_ch}} {lo[k]:>{w_lo}} "
            f"{band[k]:>{w_band}} {_fmt_db(row.level_dbc):>10} {rejection:>7} {limit[k]:>{w_lim}} "
            f"{_fmt_db(row.margin_db):>7} {need_rf:>8} {need_if:>8} {drive:<12} {row.loss_limit}".rstrip()
        )
    if len(frame) > top:
        lines.append(f"... {len(frame) - top} more rows (use --top)")
    lines.append("rej. dB: input-referred response rejection (how much stronger than the wanted an input must be "
                 "for an equal output); level dBc: at the output after the filters; drive: RF drive at the mixer, "
                 "(!) where the level table does not hold (over 10 dB above its reference, or near the LO drive); "
                 "filter loss set by: a filter floor (ultimate rejection; 'assumed' when not stated) or a data-span "
                 "policy that set the row's filter loss")
    return "\n".join(lines)


def _cmd_sweep(args: argparse.Namespace) -> int:
    from .analysis import evaluate
    from .models.chain import ChainPlan

    plan, base = _load_any(args)
    if isinstance(plan, ChainPlan):
        from .cli_chain import sweep_chain

        return sweep_chain(plan, base, args)
    result = evaluate(plan, base_dir=base)
    if args.channel is not None:
        index = channel_index(args.channel, plan, result)
        frame = result.channel_frame(index)
    elif args.rows == "hits":
        frame = result.hits
    else:
        frame = result.to_frame()
    out = sys.stdout
    if args.format == "json":
        payload = result.to_json_dict()
        if args.channel is not None or args.rows == "hits":
            from .analysis import frame_records

            payload["rows"] = frame_records(frame)
        json.dump(payload, out, indent=2, allow_nan=False)
        out.write("\n")
    elif args.format == "csv":
        frame.to_csv(out, index=False, float_format="%.9g")
    else:
        out.write(f"{plan.name}\n{_plan_header(plan, result)}\n")
        if args.channel is not None:
            margin = float(result.worst_margin_db[index])
            out.write(f"channel {format_frequency(float(result.channels_hz[index]))}: "
                      f"{'PASS' if margin >= 0 else 'FAIL'}, worst margin {margin:+.1f} dB; whole plan: ")
        out.write(f"{result.summary.line()}\n")
        for warning in result.warnings:
            out.write(f"note: {warning}\n")
        out.write(_text_table(frame, args.top) + "\n")
        out.write(
            "Levels are estimates from the mixer model; emission limits are set by local rules and "
            "licensed practice - check against them.\n"
        )
    if args.fail_on_spur and not result.summary.worst_margin_db >= 0:  # a NaN never passes
        return 1
    return 0


def channel_index(text: str, plan, result) -> int:
    """The channel of a sweep nearest ``--channel`` (text such as "98.1 MHz"); refused outside the range."""
    from .units import parse_frequency

    f_hz = parse_frequency(text, "--channel")
    first, last = float(result.channels_hz[0]), float(result.channels_hz[-1])
    step = plan.rf.step_hz or 0.0
    if not first - step / 2 <= f_hz <= last + step / 2:
        raise MixchartError(f"--channel: {text!r} is invalid; the tuning range is "
                            f"{format_frequency(first)} to {format_frequency(last)}")
    return result.nearest_channel(f_hz)


def _plan_header(plan, result) -> str:
    """What was judged, in one line: the requirement and the plan's key numbers."""
    from .requirements import resolve_limits

    limits = resolve_limits(plan.requirement, plan.direction)
    texts = limits.texts[1:] if plan.direction == "up" else limits.texts
    given = "requirement" in plan.model_fields_set
    req = "; ".join(texts) + ("" if given else f" (no requirement in the plan: the default min_rejection_db "
                                              f"{plan.requirement.min_rejection_db:g} dB)")
    lo = (f"{plan.lo.side}-side tracking LO" if plan.lo.mode == "tracking"
          else f"fixed LO {format_frequency(float(plan.lo.fixed_hz))}")
    return (f"judged against: {req} | {plan.direction}-conversion, {plan.rf.n_channels} channel(s) "
            f"{format_frequency(float(result.channels_hz[0]))} to {format_frequency(float(result.channels_hz[-1]))}, "
            f"{lo}, IF {format_frequency(plan.if_.center_hz)} ({format_frequency(plan.if_.bandwidth_hz)} wide), "
            f"order {plan.max_order}")


def _cmd_check(args: argparse.Namespace) -> int:
    from .context import build_context
    from .models.chain import ChainPlan

    plan, base = _load_any(args)
    if isinstance(plan, ChainPlan):
        from .chains.setup import set_up

        setup = set_up(plan, base)  # every stage built, the wanted signal carried through the chain
        print(f"ok: {plan.name!r}: {plan.rf.n_channels} channel(s), {len(plan.chain)} stages "
              f"({' -> '.join(setup.names)}), direction {plan.direction}")
        return 0
    build_context(plan, base)  # filters and level tables load too
    print(f"ok: {plan.name!r}: {plan.rf.n_channels} channel(s), order {plan.max_order}, direction {plan.direction}")
    return 0


def _cmd_schema(args: argparse.Namespace) -> int:
    from .models.chain import chain_json_schema
    from .plan import plan_json_schema

    json.dump(plan_json_schema() if args.layout == 1 else chain_json_schema(), sys.stdout, indent=2)
    sys.stdout.write("\n")
    return 0


def _cmd_migrate(args: argparse.Namespace) -> int:
    from .models import dumps_any, load_any, migrate_v1, save_any, stage_names
    from .models.chain import ChainPlan

    plan = load_any(args.plan)
    if isinstance(plan, ChainPlan):
        raise MixchartError(f"plan: {args.plan!r} is layout version 2 already; nothing to migrate")
    chain = migrate_v1(plan)
    if Path(args.output).resolve() == Path(args.plan).resolve():
        raise MixchartError(f"-o: {args.output!r} is the input file; write the new layout to another file")
    dumps_any(chain)  # serialisable before anything is written
    path = save_any(chain, args.output)
    print(f"wrote {path} (layout version 2: {' -> '.join(stage_names(chain))})")
    return 0


def _cmd_serve(args: argparse.Namespace) -> int:
    from .serve import serve

    plan_path = Path(args.plan) if args.plan else example_path(args.example)
    _load_any(args)  # refuse a bad plan before starting anything (a chain is the chain planner's)
    return serve(plan_path, port=args.port)


def _cmd_snapshot(args: argparse.Namespace) -> int:
    from .models.chain import ChainPlan
    from .report import write_report

    plan, base = _load_any(args)
    if isinstance(plan, ChainPlan):
        from .report_chain import write_chain_report

        print(f"wrote {write_chain_report(plan, args.output, base_dir=base)}")
        return 0
    path = write_report(plan, args.output, base_dir=base)
    print(f"wrote {path}")
    return 0


def build_parser() -> argparse.ArgumentParser:
    """The argument parser (exposed for documentation and tests)."""
    parser = argparse.ArgumentParser(
        prog="mixchart",
        description="Mixer frequency planning: spurious products and responses, levels and margins.",
    )
    sub = parser.add_subparsers(dest="command", required=True, metavar="COMMAND")

    def plan_args(p: argparse.ArgumentParser) -> None:
        p.add_argument("plan", nargs="?", help="plan JSON file (default: a built-in example)")
        p.add_argument("--example", default=DEFAULT_EXAMPLE, choices=sorted({**EXAMPLES, **CHAIN_EXAMPLES}),
                       help="built-in example when no plan is given")

    p = sub.add_parser("sweep", help="evaluate a plan across its tuning range and print the results")
    plan_args(p)
    p.add_argument("--format", choices=["text", "json", "csv"], default="text")
    p.add_argument("--rows", choices=["worst", "hits"], default="worst",
                   help="worst case per product (default) or every failing row")
    p.add_argument("--channel",
                   help="show every product/response of the channel nearest this frequency, e.g. '98.1 MHz'")
    p.add_argument("--top", type=int, default=25, help="rows in the text table (default 25)")
    p.add_argument("--fail-on-spur", action="store_true", help="exit 1 when any margin is negative")
    p.set_defaults(func=_cmd_sweep)

    p = sub.add_parser("check", help="validate a plan file (and the filter and table files it names)")
    plan_args(p)
    p.set_defaults(func=_cmd_check)

    p = sub.add_parser("schema", help="print the plan file's JSON Schema")
    p.add_argument("--layout", type=int, choices=[1, 2], default=2,
                   help="plan layout version: 2, a chain of stages (default); 1, one conversion")
    p.set_defaults(func=_cmd_schema)

    p = sub.add_parser("migrate", help="rewrite a version-1 plan as a one-mixer chain (layout version 2)")
    p.add_argument("plan", help="the version-1 plan file")
    p.add_argument("-o", "--output", required=True, help="the version-2 plan file to write")
    p.set_defaults(func=_cmd_migrate)

    p = sub.add_parser("serve", help="open the planning chart in the browser (Voila on 127.0.0.1)")
    plan_args(p)
    p.add_argument("--port", type=int, default=8866)
    p.set_defaults(func=_cmd_serve)

    p = sub.add_parser("snapshot", help="write a standalone HTML report (chart, tables, plan) that opens offline")
    plan_args(p)
    p.add_argument("-o", "--output", default="mixchart-report.html", help="output HTML file")
    p.set_defaults(func=_cmd_snapshot)
    return parser


def main(argv: Sequence[str] | None = None) -> int:
    """Run the command line.

    Parameters
    ----------
    argv : sequence of str, optional
        Arguments (default: ``sys.argv[1:]``).

    Returns
    -------
    int
        Exit status.
    """
    parser = build_parser()
    args = parser.parse_args(argv)
    if getattr(args, "top", 1) is not None and getattr(args, "top", 1) < 1:
        parser.error(f"--top: {args.top} is invalid; give a whole number >= 1")
    try:
        return int(args.func(args))
    except MixchartError as exc:
        print(f"mixchart: error: {exc}", file=sys.stderr)
        return 2
    except BrokenPipeError:  # e.g. piped into head
        return 0


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
