"""The standalone HTML report of a chain plan: the frequency plan, the end-to-end plane, the worst paths.

One self-contained page (BokehJS inline, so it opens offline) for a design meeting: the verdict and
the stage that limits it, the chain stage by stage, the wanted signal's frequency, sense and level at
every node, the warnings, the end-to-end plane at the worst channel, the worst paths (each with its
stage and path) and the plan JSON.  Every piece of user text is escaped; the plan JSON appears only
as escaped text inside a ``<pre>``.
"""

from __future__ import annotations

import os
from datetime import UTC, datetime
from pathlib import Path

import numpy as np

from . import __version__
from .app_chain import end_to_end_figure
from .chains import analyse_chain
from .chart_style import CATEGORIES, CLOSE_DB, VERDICT_COLOURS
from .elements.registry import kind_of
from .errors import MixchartError
from .fileio import atomic_write_text
from .models.chain import ChainPlan, stage_names
from .models.loading import dumps_any
from .report import _CSS, _bokeh_components, _e
from .units import format_frequency

__all__ = ["chain_report_html", "write_chain_report", "TOP_PATHS"]

#: Paths listed one by one (every failing one is listed; the rest past this are counted).
TOP_PATHS = 40


def _span(low: float, high: float) -> str:
    if abs(high - low) <= 1e-9 * max(abs(high), 1.0):
        return format_frequency(low, 7)
    return f"{format_frequency(low, 7)} to {format_frequency(high, 7)}"


def _stage_words(spec) -> str:
    kind = spec.kind
    if kind == "filter":
        f = spec.filter
        return f"{f.kind} {getattr(f, 'response', '')}".strip()
    if kind == "mixer":
        lo = spec.lo
        lo_text = (f"fixed LO {format_frequency(lo.fixed_hz)}" if lo.mode == "fixed"
                   else f"{lo.side}-side tracking LO")
        return (f"fed at its {spec.input_port.upper()} port, {lo_text}, IF {format_frequency(spec.if_.center_hz)} "
                f"({format_frequency(spec.if_.bandwidth_hz)} wide), {spec.mixer.topology.replace('_', '-')}")
    if kind == "amplifier":
        return f"gain {spec.gain_db:g} dB"
    if kind == "adc":
        return f"{format_frequency(spec.sample_rate_hz)} sampling, Nyquist zone {spec.nyquist_zone}"
    return ""


def _category(margin: float) -> str:
    return "violates" if margin < 0 else "close" if margin < CLOSE_DB else "clear"


def _paths_table(result) -> str:
    paths = result.paths
    shown = paths[(paths["margin_db"] < CLOSE_DB) | (np.arange(len(paths)) < TOP_PATHS)]
    rows = []
    for r in shown.itertuples(index=False):
        colour = CATEGORIES[_category(r.margin_db)][1]
        rej = f"{r.rejection_db:.1f}" if r.kind == "response" else ""
        rows.append(f'<tr><td style="color:{colour};font-weight:700">{r.margin_db:+.1f}</td><td>{_e(r.kind)}</td>'
                    f"<td>{_e(r.stage)}</td><td>{_e(format_frequency(r.channel_hz, 7))}</td>"
                    f"<td>{_e(_span(r.f_low_hz, r.f_high_hz))}</td><td>{r.level_dbc:.1f}</td><td>{rej}</td>"
                    f"<td>{_e(r.limit)}</td><td>{r.n_failing_channels}</td><td>{_e(r.path)}</td></tr>")
    rest = len(paths) - len(shown)
    tail = (f'<tr><td colspan="10">… and {rest} more paths, each clear of its limit by {CLOSE_DB:g} dB or more'
            "</td></tr>") if rest else ""
    head = ("<tr><th>margin dB</th><th>kind</th><th>stage</th><th>worst channel</th><th>band</th><th>level dBc</th>"
            "<th>rej. dB</th><th>limit</th><th>failing channels</th><th>path</th></tr>")
    return f'<table class="worst"><thead>{head}</thead><tbody>{"".join(rows)}{tail}</tbody></table>'


def chain_report_html(plan: ChainPlan, *, base_dir: str | os.PathLike[str] | None = None) -> str:
    """Render the standalone HTML report of a chain plan (see the module docstring).

    Raises
    ------
    MixchartError
        If the chain cannot be analysed (a stage the wanted signal cannot pass, a bad file).
    """
    from bokeh.embed import components
    from bokeh.resources import INLINE

    result = analyse_chain(plan, base_dir=base_dir)
    s = result.summary
    index = int(np.argmin(result.worst_margin_db))
    fig, _ = end_to_end_figure(result, index, width=718, height=360)
    fig.sizing_mode = "fixed"
    script, div = components(fig)
    resources = INLINE.clone(components=_bokeh_components([fig]))
    verdict = "PASS" if s.worst_margin_db >= 0 else "FAIL"
    names = stage_names(plan)
    stages = "".join(f"<tr><th>{i}</th><td>{_e(names[i])}</td><td>{_e(kind_of(spec).words)}</td>"
                     f"<td>{_e(_stage_words(spec))}</td></tr>" for i, spec in enumerate(plan.chain))
    nodes = "".join(
        f"<tr><td>{_e(n.after)}</td><td>{_e(_span(n.f_low_hz, n.f_high_hz))}</td><td>{_e(n.sense)}</td>"
        f"<td>{'' if n.lo_low_hz != n.lo_low_hz else _e(_span(n.lo_low_hz, n.lo_high_hz))}</td>"
        f"<td>{n.level_dbm:.1f} dBm</td></tr>" for n in result.nodes.itertuples(index=False))
    warns = "".join(f"<li>{_e(w)}</li>" for w in result.warnings) or "<li>none</li>"
    body = [f"<h1>{_e(plan.name)}</h1>"]
    if plan.notes:
        body.append(f'<p class="notes">{_e(plan.notes)}</p>')
    body += [
        f'<section class="cards"><div class="card" style="--state:{VERDICT_COLOURS[verdict]}">'
        f'<span class="state">{verdict}</span><p class="line">{_e(s.line()[len(verdict) + 2:])}</p>'
        f"<p class=\"line\">Limited by <b>{_e(s.limiting_stage)}</b>: {_e(s.worst_path)} at "
        f"{_e(format_frequency(s.worst_channel_hz))}.</p></div></section>",
        f"<h2>The chain</h2><table class=\"words\"><tbody>{stages}</tbody></table>",
        "<h2>Frequency plan</h2><p class=note>The wanted signal at every node: its frequency range over the tuning "
        "range, its spectral sense and level, and each mixer's LO.</p>"
        "<table class=\"words\"><thead><tr><th>after</th><th>wanted signal</th><th>sense</th><th>LO</th>"
        f"<th>level</th></tr></thead><tbody>{nodes}</tbody></table>",
        f"<h2>Warnings</h2><ul class=warn>{warns}</ul>",
        f"<h2>End to end at {_e(format_frequency(float(result.channels_hz[index])))} (the worst channel)</h2>"
        "<p class=note>A snapshot: pan, zoom and hover work, nothing is recomputed. Each path within "
        f"{CLOSE_DB:g} dB of its limit is its line from chain input to chain output; it crosses the final "
        "passband where the chain hears it.</p>",
        f'<div class="chart">{div}</div>',
        "<h2>Worst paths</h2>", _paths_table(result),
        '<p class="caution">Caution: levels here are estimates from the stage models and the filters as described, '
        "meant to guide spurious-emission and spurious-response decisions. Emission limits are set by local rules "
        "and licensed practice; check the plan, and the built hardware, against them.</p>",
        f'<h2>Plan JSON</h2><pre id="plan-json">{_e(dumps_any(plan))}</pre>',
        f"<footer class=meta>Generated {datetime.now(UTC).strftime('%Y-%m-%d %H:%M UTC')} by mixchart "
        f"{_e(__version__)}.</footer>",
    ]
    return ("<!DOCTYPE html>\n<html lang=\"en\"><head><meta charset=\"utf-8\">"
            f"<meta name=\"viewport\" content=\"width=device-width, initial-scale=1\"><title>{_e(plan.name)} · mixchart"
            f"</title><style>{_CSS}</style>{resources.render_css()}{resources.render_js()}{script}</head>"
            "<body>\n" + "\n".join(body) + "\n</body></html>\n")


def write_chain_report(plan: ChainPlan, path: str | os.PathLike[str], *,
                       base_dir: str | os.PathLike[str] | None = None) -> Path:
    """Write :func:`chain_report_html` to ``path`` atomically."""
    text = chain_report_html(plan, base_dir=base_dir)
    return atomic_write_text(Path(path), text, error=MixchartError, field="output")
