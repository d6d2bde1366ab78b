"""The inverse search against brute force: a CW input carried forward through every path.

For hypothesis-generated two- and three-mixer chains and random input frequencies, the plain-
Python reference (tests/reference_chain.py, :func:`reference_tone`) carries a tone through every
stage every way and keeps the paths that land in the final passband.  The engine's responses of
that channel must hold, for each such path, a response band containing the tone with the same
path and a level at least the reference's: equal where no filter is met (the engine takes each
filter's least loss over the response band, the reference its loss at the tone, so the engine is
never the more optimistic).  Conversely, every engine response band holding the tone is a path
the tone really takes.
"""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from reference_chain import reference_tone
from test_chain_reference import _plan_or_skip, chains

from mixchart.chains.setup import set_up
from mixchart.chains.sweep import channel_rows
from mixchart.levels import FLOOR_DBC
from mixchart.models import chain_from_dict

TOL_DB = 1e-7


def _path_of(name: str) -> str:
    return name.split(": ", 1)[1] if ": " in name else name


def _without_filters(data: dict) -> dict:
    out = dict(data)
    out["chain"] = [s for s in data["chain"] if s["kind"] != "filter"]
    for s in out["chain"]:
        if s["kind"] == "adc":
            s.pop("channel_filter", None)
    return out


def check_tone(plan, f_hz: float, *, exact: bool) -> int:
    setup = set_up(plan)
    node_max = max(float(n.f_hz.max()) for n in setup.nodes)
    frame = channel_rows(setup, 0, prune=False)
    responses = frame[frame["kind"] == "response"]
    u = plan.signal.interferer_level_dbm if plan.signal.interferer_level_dbm is not None else plan.signal.level_dbm
    # below the level floor a path is nothing (the table clips drives 1000 dB off): not compared
    tone = reference_tone(plan, 0, f_hz, u)
    want = [(p, x) for p, x, _ in tone if x >= FLOOR_DBC]
    tol = 1e-9 * max(f_hz, node_max)
    holding = responses[(responses["f_low_hz"] - tol <= f_hz) & (responses["f_high_hz"] + tol >= f_hz)]
    got: dict[str, list[float]] = {}
    for name, level in zip(holding["path"], holding["level_dbc"], strict=True):
        if level < FLOOR_DBC - 50:
            continue
        got.setdefault(_path_of(name), []).append(float(level))
    for path, level in want:
        assert path in got, f"{f_hz:.6g} Hz: {path!r} ({level:.2f} dBc) is not among the engine's responses"
        best = max(got[path])
        assert best >= level - TOL_DB, f"{path!r}: engine {best} is more optimistic than the reference {level}"
        if exact:
            assert min(abs(g - level) for g in got[path]) <= TOL_DB, (path, got[path], level)
    ref_paths = {p for p, _, _ in tone}
    # the geometry the end-to-end plane draws: through the band's centre with the path's slope, the
    # line reaches the output frequency the tone really has
    out_at = {p: y for p, _, y in tone}
    for name, x0, y0, slope in zip(holding["path"], holding["x_hz"], holding["y_hz"], holding["freq_slope"],
                                   strict=True):
        path = _path_of(name)
        if path in out_at:
            y_line = y0 + slope * (f_hz - x0)
            assert abs(y_line - out_at[path]) <= 1e-6 * max(1.0, abs(out_at[path])) + 1e-3, (path, y_line, out_at[path])
    for path in got:
        assert path in ref_paths, f"{f_hz:.6g} Hz: the engine lists {path!r}, which the tone does not take"
    return len(want)


def _tone(data_draw, plan) -> float | None:
    setup = set_up(plan)
    ch = float(setup.channels_hz[0])
    half = 0.5 * plan.signal.bandwidth_hz
    top = max(float(n.f_hz.max()) for n in setup.nodes) * 3
    adc = [e for e in setup.elements if e.kind == "adc"]
    if adc:
        top = min(top, adc[0].f_max)
    f = data_draw(st.floats(1e5, top))
    # The co-channel rule: a response band that covers the wanted channel has no margin (it is the
    # wanted signal itself, or heard with it), as in the single-conversion engine.  A band as wide
    # as an IF passband can cover the channel and a tone beside it, so tones that near are left out.
    widest = max([half] + [s.if_.bandwidth_hz for s in plan.chain if s.kind == "mixer"])
    if abs(f - ch) <= 1.01 * widest:
        return None
    return f


@pytest.mark.parametrize("n_mixers", [2, 3])
@settings(max_examples=30, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(data=st.data())
def test_every_path_a_tone_takes_is_a_response_with_a_level_no_more_optimistic(n_mixers, data):
    plan, _ = _plan_or_skip(data.draw(chains(n_mixers)))
    if plan is None:
        return
    f = _tone(data.draw, plan)
    if f is not None:
        check_tone(plan, f, exact=False)


@pytest.mark.parametrize("n_mixers", [2, 3])
@settings(max_examples=30, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(data=st.data())
def test_without_filters_the_response_levels_equal_the_tone_s(n_mixers, data):
    raw = data.draw(chains(n_mixers))
    plan, _ = _plan_or_skip(_without_filters(raw))
    if plan is None:
        return
    f = _tone(data.draw, plan)
    if f is not None:
        check_tone(plan, f, exact=True)


def test_the_responses_found_for_tones_on_the_image_and_on_random_frequencies():
    """A fixed case that certainly has responses: a two-mixer receiver's images, by name."""
    plan = chain_from_dict({
        "schema_version": 2, "direction": "down",
        "rf": {"start_hz": "150 MHz", "stop_hz": "150 MHz"},
        "signal": {"bandwidth_hz": "25 kHz", "level_dbm": -60},
        "max_order": 4,
        "chain": [
            {"kind": "mixer", "lo": {"side": "high"}, "if": {"center_hz": "45 MHz", "bandwidth_hz": "100 kHz"}},
            {"kind": "mixer", "lo": {"side": "low"}, "if": {"center_hz": "455 kHz", "bandwidth_hz": "30 kHz"}},
        ]})
    # image of mixer 1 at RF + 2·45 MHz; image of mixer 2 at IF1 - 2·455 kHz, i.e. RF + 0.91 MHz at RF
    for f in (150e6 + 90e6, 150e6 + 0.91e6, 123.456e6, 47.7e6):
        check_tone(plan, f, exact=True)
    frame = channel_rows(set_up(plan), 0, prune=False)
    names = list(frame[frame["kind"] == "response"]["path"])
    assert any(n.startswith("image of mixer 1:") for n in names)
    assert any(n.startswith("image of mixer 2 (second image, at RF):") for n in names)
    assert np.isfinite(frame["margin_db"]).any()


def test_a_sample_clock_spur_makes_responses_beside_the_channel():
    """A clock spur at fs ± d: an input d from the channel is heard, 20·log10(f/fs) above the spur.

    An invented 915 MHz receiver sampling its 70 MHz IF at 100 MS/s (zone 2) with a -40 dBc clock
    spur 100 kHz out: inputs 100 kHz either side of the channel reach the channel at about
    -40 + 20·log10(70/100) = -43.1 dBc (Brannon, AN-756, from memory; the level rule is checked by
    simulation in tests/test_sampling.py), found both by the inverse search and by the tone.
    """
    plan = chain_from_dict({
        "schema_version": 2, "direction": "down", "rf": {"start_hz": "915 MHz", "stop_hz": "915 MHz"},
        "signal": {"bandwidth_hz": "20 kHz", "level_dbm": -60},
        "requirement": {"response_rejection_db": 70, "output_spur_dbc": -70},
        "chain": [{"kind": "mixer", "lo": {"side": "high"}, "if": {"center_hz": "70 MHz", "bandwidth_hz": "1 MHz"},
                   "mixer": {"lo_if_isolation_db": 40, "rf_if_isolation_db": 35, "lo_harmonic2_dbc": -30}},
                  {"kind": "adc", "sample_rate_hz": "100 MHz", "nyquist_zone": 2, "harmonics_dbc": [-300],
                   "passband_hz": "20 kHz", "input_bandwidth_hz": "200 MHz",
                   "clock_spurs": [{"offset_hz": "100 kHz", "level_dbc": -40}]}]})
    frame = channel_rows(set_up(plan), 0, prune=False)
    near = frame[(frame["kind"] == "response") & ((frame["f_low_hz"] - 915e6).abs() < 200e3)
                 & frame["path"].str.contains("clock")]
    assert len(near) == 2
    assert near["level_dbc"].max() == pytest.approx(-40 + 20 * np.log10(70.11 / 100), abs=0.02)
    for f in (915.1e6, 914.9e6):
        assert check_tone(plan, f, exact=False) >= 1
