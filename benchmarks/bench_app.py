"""App benchmark: control change -> sources updated, and key press -> repaint in Voila.

Run from the repository root::

    python benchmarks/bench_app.py                 # Python side and browser (about 1.5 minutes)
    python benchmarks/bench_app.py --no-browser    # Python side only (about 20 s)
    python benchmarks/bench_app.py --profile       # also cProfile one plan change at order 15

What it measures (targets from the issue):

1. Python side, the FM example at max order 7 and 15: time from setting a
   widget's ``.value`` (which runs the real handlers) until every source is
   updated and the update is serialised into comm messages, median and p90 of
   ``--n-python`` changes, for

   * a plan change: the requirement slider alternating 70/73 dB and the signal
     level slider alternating -30/-25 dBm (evaluate + table + widgets + chart);
   * a channel change: the channel slider alternating two channels (view only).

   Target: median <= 30 ms at order 7 and <= 60 ms at order 15.  Each widget's
   ``send`` is replaced by a counter that JSON-encodes the message as the
   kernel would (so the encoding cost is in the time) and counts messages and
   bytes.  The same changes run against the stock ``jupyter_bokeh.BokehModel``
   (one PATCH-DOC per changed property) and our ``BatchedBokehModel`` (one
   PATCH-DOC per refresh) in the same run; the ratios are printed.  A breakdown
   times ``evaluate``, ``chart_data`` and ``update_chart`` + serialisation alone.
2. Browser: Voila serves notebooks/planner.ipynb with the FM example at order
   7 and at order 15 (one server each, started and stopped here); headless
   Debian Chromium presses ArrowRight on the channel slider ``--n-browser``
   times and ``tests/browser/helpers.measure_key_to_repaint`` times key press ->
   the last repaint of the tuning plane, the output plane or the margin plot
   (whichever repaints last), split into key -> first document change (Python
   + comm both ways) and change -> repaint (BokehJS).  The same for the
   requirement slider (a plan change) and for Ctrl+Z / Ctrl+Shift+Z.
   Target: key press -> repaint median <= 120 ms.

This is a script, not a test: it prints tables and exits 0 (1 if a target is missed).
"""

from __future__ import annotations

import argparse
import json
import os
import shutil
import statistics
import subprocess
import sys
import tempfile
import time
from collections.abc import Callable
from contextlib import contextmanager, nullcontext
from pathlib import Path
from typing import Any

REPO = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(REPO))
BROWSER_TESTS = REPO / "tests" / "browser"

from mixchart import app as app_module  # noqa: E402
from mixchart.analysis import evaluate  # noqa: E402
from mixchart.app import PlannerApp, PlanState, example_plan  # noqa: E402
from mixchart.chart import chart_data, update_chart  # noqa: E402
from mixchart.plan import save_plan  # noqa: E402

ORDERS = (7, 15)
TARGET_PY_MS = {7: 30.0, 15: 60.0}
TARGET_KEY_MS = 120.0
NOTEBOOK = REPO / "notebooks" / "planner.ipynb"
#: A press is timed to the last repaint of any of these (a plan change repaints all three).
FIGURES = ("tuning_plane", "output_plane", "margin_plot")


# ----------------------------------------------------------------------------- statistics


def median(xs: list[float]) -> float:
    return statistics.median(xs)


def p90(xs: list[float]) -> float:
    xs = sorted(xs)
    return xs[min(len(xs) - 1, round(0.9 * (len(xs) - 1)))]


# ----------------------------------------------------------------------------- Python side


class SendCounter:
    """Replaces a widget's ``send``: JSON-encodes each message as the kernel does and counts it."""

    def __init__(self) -> None:
        self.messages = 0
        self.bytes = 0
        self.patches = 0  # PATCH-DOC messages (a header message starts each)

    def __call__(self, content: dict[str, Any], buffers: list[Any] | None = None) -> None:
        text = json.dumps({"method": "custom", "content": content})
        self.messages += 1
        self.bytes += len(text) + sum(len(memoryview(b).cast("B")) for b in (buffers or ()))
        payload = content.get("payload")
        if isinstance(payload, str) and '"msgtype"' in payload and '"PATCH-DOC"' in payload:
            self.patches += 1

    def reset(self) -> None:
        self.messages = self.bytes = self.patches = 0


def _stock_model_class() -> type:
    """The stock jupyter_bokeh widget, with a no-op ``batch()`` so PlannerApp can use it."""
    from jupyter_bokeh import BokehModel

    class StockBokehModel(BokehModel):
        def batch(self):  # same interface as BatchedBokehModel
            return nullcontext()

    return StockBokehModel


@contextmanager
def widget_model(kind: str):
    """Build PlannerApps with the stock or the batched Bokeh widget inside this block."""
    if kind == "batched":
        yield
        return
    original = app_module.BatchedBokehModel
    app_module.BatchedBokehModel = _stock_model_class()
    try:
        yield
    finally:
        app_module.BatchedBokehModel = original


def make_app(order: int, kind: str) -> tuple[PlannerApp, SendCounter]:
    plan, folder = example_plan("fm_receiver")
    plan = plan.with_changes({"max_order": order})
    with widget_model(kind):
        app = PlannerApp(PlanState(plan, folder))
    counter = SendCounter()
    app.bokeh.send = counter
    return app, counter


def time_changes(app: PlannerApp, counter: SendCounter, widget: Any, values: tuple, n: int) -> dict[str, float]:
    """Set ``widget.value`` n times, alternating ``values``; time each and count what was sent."""
    widget.value = values[-1]  # start from a known state (not counted)
    counter.reset()
    times = []
    for i in range(n):
        t0 = time.perf_counter()
        widget.value = values[i % len(values)]
        times.append((time.perf_counter() - t0) * 1e3)
    return {
        "median_ms": median(times),
        "p90_ms": p90(times),
        "msgs": counter.messages / n,
        "patches": counter.patches / n,
        "kb": counter.bytes / n / 1024,
    }


CHANGES: dict[str, Callable[[PlannerApp], tuple[Any, tuple]]] = {
    "plan: requirement 70/73 dB": lambda a: (a.controls.requirement, (73.0, 70.0)),
    "plan: signal -30/-25 dBm": lambda a: (a.controls.sig_level, (-25.0, -30.0)),
    "view: channel 100/101": lambda a: (a.controls.channel, (101, 100)),
}


def time_history(app: PlannerApp, counter: SendCounter, n: int) -> dict[str, dict[str, float]]:
    """Time Undo and Redo clicks: n requirement changes first, then n undos, then n redos."""
    for i in range(n):
        app.controls.requirement.value = 40.0 + i  # each a new plan change
    out = {}
    for name, button in (("undo", app.controls.undo), ("redo", app.controls.redo)):
        counter.reset()
        times = []
        for _ in range(n):
            t0 = time.perf_counter()
            button.click()
            times.append((time.perf_counter() - t0) * 1e3)
        out[name] = {"median_ms": median(times), "p90_ms": p90(times), "msgs": counter.messages / n,
                     "patches": counter.patches / n, "kb": counter.bytes / n / 1024}
    return out


def python_side(n: int) -> tuple[list[str], bool]:
    lines, ok = [], True
    head = (
        f"{'order':>5}  {'change':<28} {'widget':<8} {'median ms':>9} {'p90 ms':>7} "
        f"{'msgs/upd':>8} {'PATCH-DOC':>9} {'KB/upd':>7}"
    )
    lines += ["Python side: widget .value -> every source updated and serialised "
              f"({n} changes each; comm send JSON-encodes, no socket)", head, "-" * len(head)]
    ratios = []
    for order in ORDERS:
        results: dict[tuple[str, str], dict[str, float]] = {}
        for kind in ("batched", "stock"):
            app, counter = make_app(order, kind)
            for name, pick in CHANGES.items():
                widget, values = pick(app)
                results[(name, kind)] = r = time_changes(app, counter, widget, values, n)
                mark = ""
                if kind == "batched" and r["median_ms"] > TARGET_PY_MS[order]:
                    mark, ok = "  MISSES target", False
                lines.append(
                    f"{order:>5}  {name:<28} {kind:<8} {r['median_ms']:>9.1f} {r['p90_ms']:>7.1f} "
                    f"{r['msgs']:>8.1f} {r['patches']:>9.1f} {r['kb']:>7.1f}{mark}"
                )
            if kind == "batched":
                for name, r in time_history(app, counter, n).items():
                    mark = ""
                    if r["median_ms"] > TARGET_PY_MS[order]:
                        mark, ok = "  MISSES target", False
                    lines.append(
                        f"{order:>5}  {'history: ' + name + ' button':<28} {kind:<8} {r['median_ms']:>9.1f} "
                        f"{r['p90_ms']:>7.1f} {r['msgs']:>8.1f} {r['patches']:>9.1f} {r['kb']:>7.1f}{mark}"
                    )
        for name in CHANGES:
            b, s = results[(name, "batched")], results[(name, "stock")]
            ratios.append(
                f"{order:>5}  {name:<28} stock/batched: messages x{s['msgs'] / max(b['msgs'], 1e-9):.1f}, "
                f"PATCH-DOCs x{s['patches'] / max(b['patches'], 1e-9):.1f}, bytes x{s['kb'] / max(b['kb'], 1e-9):.2f}, "
                f"time x{s['median_ms'] / b['median_ms']:.2f}"
            )
        lines.append("")
    lines += ["Stock jupyter_bokeh BokehModel against BatchedBokehModel, same changes, same run:"] + ratios
    lines += [f"Targets: median <= {TARGET_PY_MS[7]:.0f} ms at order 7, <= {TARGET_PY_MS[15]:.0f} ms at order 15 "
              "(batched widget, every change kind)."]
    return lines, ok


def breakdown(n: int) -> list[str]:
    """Where a plan change spends its time, each stage alone (median ms)."""
    lines = ["", "Breakdown of one plan change (median ms of each stage alone):"]
    head = f"{'order':>5} {'evaluate':>9} {'chart_data':>10} {'update+send':>11} {'whole change':>12}  sources' rows"
    lines += [head, "-" * len(head)]
    for order in ORDERS:
        app, counter = make_app(order, "batched")
        plans = [app.state.plan, app.state.plan.with_changes({"signal.level_dbm": -25.0})]
        folder = app.state.base_dir
        t_ev, t_cd, t_up = [], [], []
        evs = []
        for i in range(n):
            t0 = time.perf_counter()
            ev = evaluate(plans[i % 2], base_dir=folder)
            t_ev.append((time.perf_counter() - t0) * 1e3)
            evs.append(ev)
        datas = []
        for i in range(n):
            t0 = time.perf_counter()
            datas.append(chart_data(evs[i % 2], app.state.view))
            t_cd.append((time.perf_counter() - t0) * 1e3)
        for i in range(n):
            t0 = time.perf_counter()
            with app.bokeh.batch():
                update_chart(app.chart, datas[(i + 1) % 2])
            t_up.append((time.perf_counter() - t0) * 1e3)
        widget, values = CHANGES["plan: signal -30/-25 dBm"](app)
        whole = time_changes(app, counter, widget, values, n)["median_ms"]
        rows = ", ".join(f"{k} {len(next(iter(v.values())))}" for k, v in datas[0].sources.items())
        lines.append(f"{order:>5} {median(t_ev):>9.1f} {median(t_cd):>10.1f} {median(t_up):>11.1f} "
                     f"{whole:>12.1f}  {rows}")
    lines.append("(whole change - the three stages = table HTML, status, widget sync and traitlets.)")
    return lines


def profile_plan_change() -> list[str]:
    import cProfile
    import io
    import pstats

    app, _ = make_app(15, "batched")
    widget, values = CHANGES["plan: signal -30/-25 dBm"](app)
    prof = cProfile.Profile()
    prof.enable()
    for i in range(20):
        widget.value = values[i % 2]
    prof.disable()
    out = io.StringIO()
    pstats.Stats(prof, stream=out).sort_stats("cumulative").print_stats(30)
    return ["", "cProfile, 20 signal-level changes at order 15 (cumulative):", out.getvalue()]


# ----------------------------------------------------------------------------- browser


def browser_side(n: int) -> tuple[list[str], bool]:
    sys.path.insert(0, str(BROWSER_TESTS))
    import conftest as harness  # tests/browser/conftest.py: Chromium flags, page factory, Voila stop
    import helpers as bh  # tests/browser/helpers.py
    from playwright.sync_api import sync_playwright

    if not harness.CHROMIUM.exists():
        return [f"Browser: skipped, {harness.CHROMIUM} is missing"], True
    tmp = Path(tempfile.mkdtemp(prefix="mixchart-bench-"))
    servers: list[Any] = []
    lines = [
        "",
        f"Browser (Voila + headless Debian Chromium): key press -> last repaint, {n} presses each",
    ]
    head = (
        f"{'order':>5}  {'slider':<12} {'key->paint median':>17} {'p90':>6} {'key->change':>11} "
        f"{'change->paint':>13} {'doc changes':>11}   page load"
    )
    lines += [head, "-" * len(head)]
    ok = True
    try:
        with sync_playwright() as pw:
            browser = pw.chromium.launch(
                executable_path=str(harness.CHROMIUM), headless=True, args=harness.CHROMIUM_ARGS, timeout=60_000
            )
            try:
                for order in ORDERS:
                    plan, _ = example_plan("fm_receiver")
                    plan_path = save_plan(plan.with_changes({"max_order": order}), tmp / f"fm_order{order}.json")
                    server = start_voila(harness, NOTEBOOK, plan_path, tmp)
                    servers.append(server)
                    page = harness._new_page(browser, 60_000)
                    page.set_viewport_size({"width": 1600, "height": 1250})
                    t_load = bh.open_voila(page, server.url)
                    results = {}
                    # channel slider: a view change (no evaluate)
                    open_tab(page, "View")
                    bh.press_slider_key(page, ".mixchart-channel", "Home")
                    time.sleep(1.0)  # let the jump to channel 0 finish before timing
                    results["channel"] = bh.measure_key_to_repaint(
                        page, ".mixchart-channel", n, figure_name=FIGURES, key="ArrowRight", details=True
                    )
                    # requirement slider: a plan change (evaluate + everything)
                    open_tab(page, "Plan")
                    results["requirement"] = bh.measure_key_to_repaint(
                        page, ".mixchart-requirement", n, figure_name=FIGURES, key="ArrowRight", details=True
                    )
                    # Ctrl+Z / Ctrl+Shift+Z: one undo or redo step each (the requirement presses made the history)
                    for key, name in (("Control+z", "undo key"), ("Control+Shift+z", "redo key")):
                        results[name] = bh.measure_key_to_repaint(
                            page, "", max(n // 2, 1), figure_name=FIGURES, key=key, details=True,
                            focus_selector=".mixchart-status",
                        )
                    for name, samples in results.items():
                        k2p = [s["key_to_paint_ms"] for s in samples]
                        k2c = [s["key_to_change_ms"] for s in samples]
                        c2p = [s["change_to_paint_ms"] for s in samples]
                        nch = [s["n_changes"] for s in samples]
                        mark = ""
                        if median(k2p) > TARGET_KEY_MS:
                            mark, ok = "  MISSES target", False
                        lines.append(
                            f"{order:>5}  {name:<12} {median(k2p):>17.0f} {p90(k2p):>6.0f} {median(k2c):>11.0f} "
                            f"{median(c2p):>13.0f} {median(nch):>11.0f}   {t_load:.1f} s{mark}"
                        )
                    bad = bh.unexpected_console_errors(page)
                    if bad:
                        lines.append(f"       console errors: {bad[:3]}")
                    page.context.close()
                    harness._stop_server(server)
            finally:
                browser.close()
    finally:
        for server in servers:
            harness._stop_server(server)
        shutil.rmtree(tmp, ignore_errors=True)
    lines += [
        "key->change = keydown to the first Bokeh document change in the page (widget comm to the kernel,",
        "Python, comm back); change->paint = that change to the last repaint of the tuning plane, the output",
        "plane or the margin plot, whichever is last (BokehJS).",
        f"Target: key press -> repaint median <= {TARGET_KEY_MS:.0f} ms (channel, requirement, undo and redo keys).",
    ]
    return lines, ok


def open_tab(page, title: str) -> None:
    import re

    page.locator(".mixchart-app .lm-TabBar-tab").filter(has_text=re.compile(rf"^\s*{title}\s*$")).click()
    page.locator(".mixchart-app .lm-TabBar-tab.lm-mod-current").filter(has_text=title).wait_for()


def start_voila(harness, notebook: Path, plan_path: Path | None, tmp: Path):
    """Start Voila as tests/browser/conftest.py does (own process group; stopped by _stop_server).

    ``plan_path`` None serves the built-in example.
    """
    from mixchart.serve import voila_env, write_template  # the page template mixchart serve uses

    port = harness._free_port()
    log_path = tmp / f"voila-{port}.log"
    template_opts = write_template(tmp / f"template-{port}")
    env = {
        **os.environ,
        **voila_env(tmp / f"template-{port}"),
        "JUPYTER_PLATFORM_DIRS": "1",
        "JUPYTER_RUNTIME_DIR": str(tmp / "runtime"),
        "PYDEVD_DISABLE_FILE_VALIDATION": "1",
        "PYTHONUNBUFFERED": "1",
    }
    env.pop(harness.PLAN_ENV, None)
    if plan_path is not None:
        env[harness.PLAN_ENV] = str(plan_path)
    cmd = [sys.executable, "-m", "voila", str(notebook), "--no-browser", f"--port={port}",
           "--Voila.ip=127.0.0.1", "--show_tracebacks=True", *template_opts]
    with open(log_path, "wb") as log:
        proc = subprocess.Popen(cmd, cwd=notebook.parent, env=env, stdin=subprocess.DEVNULL, stdout=log,
                                stderr=subprocess.STDOUT, start_new_session=True)
    server = harness.VoilaServer(url=f"http://127.0.0.1:{port}/", port=port, notebook=notebook,
                                 log_path=log_path, proc=proc)
    deadline = time.monotonic() + 120
    while not harness._port_open(port):
        if proc.poll() is not None or time.monotonic() > deadline:
            harness._stop_server(server)
            raise RuntimeError(f"voila did not start; log:\n{server.log_text()}")
        time.sleep(0.1)
    return server


# ----------------------------------------------------------------------------- main


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--n-python", type=int, default=40, help="changes per Python-side row (>= 30)")
    parser.add_argument("--n-browser", type=int, default=25, help="key presses per browser row (>= 20)")
    parser.add_argument("--no-browser", action="store_true", help="skip the Voila/Chromium part")
    parser.add_argument("--profile", action="store_true", help="cProfile plan changes at order 15")
    args = parser.parse_args(argv)

    lines, ok = python_side(args.n_python)
    print("\n".join(lines), flush=True)
    print("\n".join(breakdown(args.n_python)), flush=True)
    if args.profile:
        print("\n".join(profile_plan_change()), flush=True)
    if not args.no_browser:
        blines, bok = browser_side(args.n_browser)
        print("\n".join(blines), flush=True)
        ok = ok and bok
    print("\nall targets met" if ok else "\nSOME TARGETS MISSED")
    return 0 if ok else 1


if __name__ == "__main__":
    sys.exit(main())
