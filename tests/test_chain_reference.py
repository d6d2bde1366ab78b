"""The chain engine against a brute-force plain-Python reference (tests/reference_chain.py).

On hypothesis-generated two- and three-mixer chains (with filters, amplifiers and ADCs among
them), the engine without pruning finds exactly the reference's bands at the output of every
channel, with the same levels and margins; with pruning it still finds every band the reference
finds within :data:`~mixchart.chains.setup.PRUNE_HEADROOM_DB` of its limit (or beyond it), with
the same levels.  The reference shares only the filter responses and the level tables with the
engine; both have their own tests against outside sources.
"""

from __future__ import annotations

import math
from collections import Counter

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from reference_chain import reference_paths

from mixchart.chains.forward import forward_block, path_texts
from mixchart.chains.setup import PRUNE_HEADROOM_DB, set_up
from mixchart.errors import PlanError
from mixchart.levels import FLOOR_DBC
from mixchart.models import chain_from_dict

MHz = 1e6


def engine_paths(plan, *, prune: bool):
    """{channel index: [(path, level dBc, margin dB)]} from the engine's forward sweep (one block)."""
    setup = set_up(plan)
    n = setup.channels_hz.size
    fwd = forward_block(setup, slice(0, n), prune=prune)
    texts, _ = path_texts(setup, fwd.history)
    out = {}
    for c in range(n):
        rows = []
        for r in range(1, fwd.flow.n_rows):
            if np.isfinite(fwd.flow.level_dbm[r, c]):
                rows.append((texts[r], float(fwd.level_dbc[r, c]), float(fwd.margin_db[r, c])))
        out[c] = rows
    return out


def keyed(rows, tol_db=1e-7):
    """A multiset of (path, level rounded to the tolerance) for comparing two lists of rows."""
    return Counter((path, round(level / tol_db)) for path, level, _ in rows if math.isfinite(level))


def assert_same_rows(got, want, *, only_within: float | None = None):
    for c in want:
        w = [r for r in want[c] if only_within is None or r[2] < only_within]
        g = got[c]
        levels = {}
        for path, level, margin in g:
            levels.setdefault(path, []).append((level, margin))
        for path, level, margin in w:
            assert path in levels, f"channel {c}: {path!r} ({level:.2f} dBc) missing from the engine"
            if level < FLOOR_DBC:
                continue  # below the level floor a band is nothing (the table clips drives 1000 dB off)
            best = min(levels[path], key=lambda lm: abs(lm[0] - level))
            assert abs(best[0] - level) <= 1e-7 and (abs(best[1] - margin) <= 1e-7 or best[1] == margin), (
                f"channel {c}: {path!r}: engine {best} vs reference ({level}, {margin})")
        if only_within is None:
            assert len(g) == len(w), f"channel {c}: the engine has {len(g)} bands, the reference {len(w)}"


def _filter(draw, centre_hz, width_hz):
    kind = draw(st.sampled_from(["butterworth", "tuned"]))
    if kind == "tuned":
        return {"kind": "tuned", "f_center_hz": centre_hz, "q_loaded": draw(st.floats(3, 60)),
                "stages": draw(st.integers(1, 3))}
    return {"kind": "butterworth", "response": "bandpass", "order": draw(st.integers(1, 5)),
            "f_center_hz": centre_hz, "bandwidth_hz": width_hz * draw(st.floats(1.0, 4.0))}


@st.composite
def chains(draw, n_mixers: int):
    """An invented receiver chain of ``n_mixers`` conversions (tracking or fixed LOs), a few channels."""
    f0 = draw(st.floats(30 * MHz, 900 * MHz))
    step = draw(st.floats(0.1 * MHz, 5 * MHz))
    n_ch = draw(st.integers(1, 3))
    bw = draw(st.floats(10e3, 200e3))
    order = draw(st.integers(2, 4))
    stages = []
    if draw(st.booleans()):
        stages.append({"kind": "filter", "filter": {"kind": "tuned", "q_loaded": draw(st.floats(5, 80)),
                                                    "stages": draw(st.integers(1, 3)), "tracks_channel": True}})
    if draw(st.booleans()):
        stages.append({"kind": "amplifier", "gain_db": draw(st.floats(0, 25)), "oip3_dbm": draw(st.floats(10, 40)),
                       "oip2_dbm": draw(st.floats(20, 60))})
    f_in = f0
    fixed_first = draw(st.booleans()) and n_ch == 1
    for k in range(n_mixers):
        ratio = draw(st.floats(0.05, 0.6)) if k else draw(st.floats(0.05, 2.0))
        if_c = max(f_in * ratio, 1.5 * MHz)
        if_bw = max(2.5 * bw, if_c * draw(st.floats(0.002, 0.05)))
        side = draw(st.sampled_from(["high", "low"])) if f_in > 1.2 * if_c + bw else "high"
        lo = {"mode": "tracking", "side": side}
        if k == 0 and fixed_first:
            lo = {"mode": "fixed", "fixed_hz": f_in + if_c if side == "high" else f_in - if_c}
        stages.append({"kind": "mixer", "lo": lo, "if": {"center_hz": if_c, "bandwidth_hz": if_bw},
                       "max_order": draw(st.integers(2, order)),
                       "mixer": {"topology": draw(st.sampled_from(["double_balanced", "single_balanced",
                                                                    "single_ended"]))}})
        if draw(st.booleans()) or k == n_mixers - 1:
            stages.append({"kind": "filter", "filter": _filter(draw, if_c, if_bw)})
        f_in = if_c
    if draw(st.booleans()):
        # an ADC sampling the last IF in its own zone (fs chosen so that the IF sits mid-zone)
        zone = draw(st.integers(1, 3))
        fs = f_in / ((zone - 0.5) / 2)
        stages.append({"kind": "adc", "sample_rate_hz": fs, "nyquist_zone": zone,
                       "harmonics_dbc": [draw(st.floats(-90, -50)) for _ in range(draw(st.integers(1, 3)))]})
    return {
        "schema_version": 2, "name": "generated chain", "direction": "down",
        "rf": {"start_hz": f0, "stop_hz": f0 + (n_ch - 1) * step, "step_hz": step},
        "signal": {"bandwidth_hz": bw, "level_dbm": draw(st.floats(-90, -10))},
        "max_order": order,
        "requirement": {"output_spur_dbc": draw(st.floats(-90, -30)), "response_rejection_db": 60},
        "chain": stages,
    }


def _plan_or_skip(data):
    try:
        return chain_from_dict(data), set_up(chain_from_dict(data))
    except PlanError:
        return None, None  # a generated chain the wanted signal cannot pass (refused, tested elsewhere)


@pytest.mark.parametrize("n_mixers", [2, 3])
@settings(max_examples=25, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(data=st.data())
def test_without_pruning_the_engine_finds_exactly_the_reference_bands(n_mixers, data):
    plan, _ = _plan_or_skip(data.draw(chains(n_mixers)))
    if plan is None:
        return
    assert_same_rows(engine_paths(plan, prune=False), reference_paths(plan))


@pytest.mark.parametrize("n_mixers", [2, 3])
@settings(max_examples=25, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(data=st.data())
def test_pruning_keeps_every_band_within_the_headroom_of_its_limit(n_mixers, data):
    plan, _ = _plan_or_skip(data.draw(chains(n_mixers)))
    if plan is None:
        return
    assert_same_rows(engine_paths(plan, prune=True), reference_paths(plan), only_within=PRUNE_HEADROOM_DB)


def test_the_scanner_example_matches_the_reference_channel_by_channel():
    from pathlib import Path

    from mixchart.models import load_any

    path = Path(__file__).parents[1] / "mixchart" / "examples" / "chains" / "scanner_double_conversion.json"
    plan = load_any(path)
    small = chain_from_dict({**plan.to_dict(), "rf": {"start_hz": 100e6, "stop_hz": 500e6, "step_hz": 200e6}})
    want = reference_paths(small)
    assert_same_rows(engine_paths(small, prune=False), want)
    assert_same_rows(engine_paths(small, prune=True), want, only_within=PRUNE_HEADROOM_DB)
    assert sum(len(v) for v in want.values()) > 1000  # a real test: thousands of bands per channel
