"""Textbook results of receiver and transmitter design, checked through the chain engine.

Each check runs :func:`mixchart.chains.analyse_chain` on a small invented plan (demo numbers:
the frequencies, gains and intercepts below describe no real product) and compares what it
reports with an outside source named beside the check:

* the superheterodyne image relations ``f_image = f_RF ± 2·f_IF`` and, for a double
  conversion, the second image ``2·IF2`` from the first IF (any receiver text; from memory);
* the rule for a first IF that keeps the image out of a fixed preselector, ``IF > (f2 - f1)/2``
  (a standard rule of receiver design; from memory);
* the filter formula: a Butterworth band-pass ``|H|² = 1/(1 + Ω^(2n))`` under the band-pass
  transform ``s -> (s² + ω0²)/(s·B)``, evaluated independently with ``scipy.signal.buttap``,
  ``lp2bp`` and ``freqs``;
* sampling: numpy FFTs of a sampled tone, and of a tone through a memoryless polynomial
  (the simulation is the source: where each harmonic folds and at what level);
* the power series ``y = a1·x + a2·x² + a3·x³`` (Razavi, *RF Microelectronics*, 2nd ed., sec.
  2.2, from memory): HD2 = P_out - OIP2 - 6.02 dB, HD3 = 2·(P_out - OIP3) - 9.54 dB, checked by
  a numpy two-tone test (to set the intercepts) and a one-tone test (to read the harmonics);
* the spectral sense of a conversion, from the sign of ``d f_out / d f_in`` (derived by hand);
* the composition of levels along a cascade: a later (1,1) conversion is linear in its input,
  so it keeps a band's level relative to the wanted signal (derived by hand), with the level
  tables from :func:`mixchart.mixer_model.build_table`, whose own tests check them.
"""

from __future__ import annotations

import math
import re

import numpy as np
import pytest
from scipy import signal

from mixchart.chains import analyse_chain
from mixchart.mixer_model import MixerSpec, build_table
from mixchart.models.chain import chain_from_dict

ALL_FAIL = {"response_rejection_db": 300.0, "output_spur_dbc": -300.0}  # every cell fails: .hits lists them all


def chain(stages, *, start_hz, stop_hz=None, step_hz=None, bandwidth_hz=12.5e3, level_dbm=-60.0, max_order=3,
          requirement=None, **extra):
    """An invented receiver plan (layout version 2) around ``stages``."""
    rf = {"start_hz": start_hz, "stop_hz": start_hz if stop_hz is None else stop_hz}
    if step_hz is not None:
        rf["step_hz"] = step_hz
    return chain_from_dict({"schema_version": 2, "name": "invented test receiver", "direction": "down", "rf": rf,
                            "signal": {"bandwidth_hz": bandwidth_hz, "level_dbm": level_dbm},
                            "max_order": max_order, "requirement": requirement or ALL_FAIL, "chain": stages,
                            **extra})


def rows(frame, prefix):
    """The rows of a paths/hits table whose path starts with ``prefix``, by channel."""
    out = frame[frame["path"].str.startswith(prefix)].sort_values("channel_hz")
    assert len(out), f"no path starting {prefix!r}; paths: {sorted(set(frame['path']))[:20]}"
    return out


def centre(frame):
    return 0.5 * (frame["f_low_hz"].to_numpy() + frame["f_high_hz"].to_numpy())


def butterworth_bp_loss_db(f_hz, f0_hz, bw_hz, order):
    """Loss of a Butterworth band-pass, dB: scipy's prototype and transform (the outside formula)."""
    b, a = signal.zpk2tf(*signal.buttap(order))
    b, a = signal.lp2bp(b, a, wo=2 * np.pi * f0_hz, bw=2 * np.pi * bw_hz)
    _, h = signal.freqs(b, a, worN=2 * np.pi * np.atleast_1d(np.asarray(f_hz, dtype=float)))
    return -20.0 * np.log10(np.abs(h))


def nearest_edge(low, high, f0):
    """The point of each band [low, high] nearest f0 (where a monotone band-pass loses least)."""
    return np.where(high < f0, high, np.where(low > f0, low, f0))


# ================================================================ 1. the second image of a double conversion
IF1_HZ, IF2_HZ = 45e6, 455e3  # invented demo IFs
PRESEL = {"kind": "butterworth", "response": "bandpass", "order": 3, "f_center_hz": 145e6, "bandwidth_hz": 10e6,
          "max_atten_db": 300}
IF1_FILTER = {"kind": "butterworth", "response": "bandpass", "order": 4, "f_center_hz": IF1_HZ,
              "bandwidth_hz": 200e3, "max_atten_db": 300}
IF2_BW_HZ = 15e3


def double_conversion(lo2_side):
    lo2 = IF1_HZ - IF2_HZ if lo2_side == "low" else IF1_HZ + IF2_HZ
    return chain([{"kind": "filter", "name": "preselector", "filter": PRESEL},
                  {"kind": "mixer", "lo": {"side": "high"}, "if": {"center_hz": IF1_HZ, "bandwidth_hz": 30e3}},
                  {"kind": "filter", "name": "first-IF filter", "filter": IF1_FILTER},
                  {"kind": "mixer", "lo": {"mode": "fixed", "fixed_hz": lo2},
                   "if": {"center_hz": IF2_HZ, "bandwidth_hz": IF2_BW_HZ}}],
                 start_hz=144e6, stop_hz=146e6, step_hz=0.5e6)


@pytest.fixture(scope="module", params=["low", "high"])
def second_image(request):
    return request.param, analyse_chain(double_conversion(request.param))


def test_second_image_sits_two_second_ifs_from_the_channel(second_image):
    # Source: superheterodyne image relations (from memory): a low-side LO2 = IF1 - IF2 hears
    # IF1 - 2·IF2 at the first IF; through a high-side LO1 = RF + IF1 that is RF + 2·IF2 at RF.  A
    # high-side LO2 = IF1 + IF2 hears IF1 + 2·IF2, i.e. RF - 2·IF2 at RF.
    side, result = second_image
    im = rows(result.hits, "image of mixer 2 (second image, at RF)")
    assert len(im) == 5  # every channel
    ch = im["channel_hz"].to_numpy()
    expected = ch + (2 * IF2_HZ if side == "low" else -2 * IF2_HZ)
    np.testing.assert_allclose(centre(im), expected, rtol=0, atol=1e-3)  # measured: 0 Hz off
    # a CW interferer: the band is the final (second-IF) passband carried back, 15 kHz wide
    np.testing.assert_allclose(im["f_high_hz"] - im["f_low_hz"], IF2_BW_HZ, rtol=0, atol=1e-3)
    assert set(im["stage"]) == {"mixer 2"}


def test_second_image_rejection_is_the_first_if_filters_loss_at_two_second_ifs(second_image):
    # Source: Butterworth band-pass |H|² = 1/(1 + Ω^2n) with s -> (s² + ω0²)/(s·B), via scipy
    # (buttap, lp2bp, freqs).  The image takes the (1,1) conversion as the wanted does, so its
    # rejection is the filters' loss on it less their loss on the wanted: at the first IF the band
    # IF1 ∓ 2·IF2 (its edge nearest IF1; the wanted sits at IF1, 0 dB), at RF the preselector on
    # the RF band (nearest edge) less the preselector on the channel.
    side, result = second_image
    im = rows(result.hits, "image of mixer 2 (second image, at RF)")
    ch = im["channel_hz"].to_numpy()
    half = IF2_BW_HZ / 2
    if_edge = IF1_HZ - 2 * IF2_HZ + half if side == "low" else IF1_HZ + 2 * IF2_HZ - half
    rf_edge = nearest_edge(im["f_low_hz"].to_numpy(), im["f_high_hz"].to_numpy(), 145e6)
    expected = (butterworth_bp_loss_db(if_edge, IF1_HZ, 200e3, 4)[0]
                + butterworth_bp_loss_db(rf_edge, 145e6, 10e6, 3) - butterworth_bp_loss_db(ch, 145e6, 10e6, 3))
    assert expected.min() > 70  # the check has teeth: order 4 at 4.4 half-bandwidths
    np.testing.assert_allclose(im["rejection_db"], expected, rtol=0, atol=1e-6)  # measured: < 4e-9 dB


def test_first_image_sits_two_first_ifs_above_the_channel(second_image):
    # Source: image = f_RF + 2·f_IF for a high-side LO (from memory); its rejection is the
    # preselector's (Butterworth, scipy) at that band less its loss at the channel.
    _, result = second_image
    im = rows(result.hits, "image of mixer 1:")
    ch = im["channel_hz"].to_numpy()
    np.testing.assert_allclose(centre(im), ch + 2 * IF1_HZ, rtol=0, atol=1e-3)
    expected = (butterworth_bp_loss_db(im["f_low_hz"].to_numpy(), 145e6, 10e6, 3)
                - butterworth_bp_loss_db(ch, 145e6, 10e6, 3))
    np.testing.assert_allclose(im["rejection_db"], expected, rtol=0, atol=1e-6)  # measured: < 1e-11 dB


# ================================================================ 2. the choice of first IF
F1_HZ, F2_HZ = 400e6, 440e6  # invented tuning range = the preselector's passband
STOP_DB = 60.0


def one_conversion(if_hz, side):
    presel = {"kind": "brickwall", "response": "bandpass", "f_center_hz": (F1_HZ + F2_HZ) / 2,
              "bandwidth_hz": F2_HZ - F1_HZ, "stop_atten_db": STOP_DB}  # under the 80 dB default floor
    return chain([{"kind": "filter", "name": "preselector", "filter": presel},
                  {"kind": "mixer", "lo": {"side": side}, "if": {"center_hz": if_hz, "bandwidth_hz": 20e3}}],
                 start_hz=F1_HZ, stop_hz=F2_HZ, step_hz=1e6, bandwidth_hz=10e3)


@pytest.mark.parametrize("side", ["high", "low"])
def test_if_above_half_the_preselector_band_keeps_every_image_out(side):
    # Source: receiver-design rule (from memory): with a fixed preselector f1..f2 the image
    # f ± 2·IF leaves the band for every channel only if IF > (f2 - f1)/2.  100 kHz above it
    # (more than a quarter of the 20 kHz IF passband, so the whole image band is outside):
    # every channel's image takes the stopband, 60 dB.
    result = analyse_chain(one_conversion((F2_HZ - F1_HZ) / 2 + 100e3, side))
    im = rows(result.hits, "image of mixer 1")
    assert len(im) == 41
    sign = 1 if side == "high" else -1
    np.testing.assert_allclose(centre(im), im["channel_hz"] + sign * 2 * ((F2_HZ - F1_HZ) / 2 + 100e3), atol=1e-3)
    np.testing.assert_allclose(im["rejection_db"], STOP_DB, rtol=0, atol=1e-9)


@pytest.mark.parametrize("side", ["high", "low"])
def test_if_below_half_the_preselector_band_lets_the_edge_channels_image_in(side):
    # Same rule: 100 kHz below (f2 - f1)/2 the channel at f1 (high-side LO: image f1 + 2·IF =
    # f2 - 200 kHz) or at f2 (low side: f2 - 2·IF = f1 + 200 kHz) hears its image in the passband,
    # 0 dB; every other channel (1 MHz raster) still has it in the stopband.
    result = analyse_chain(one_conversion((F2_HZ - F1_HZ) / 2 - 100e3, side))
    im = rows(result.hits, "image of mixer 1")
    edge = F1_HZ if side == "high" else F2_HZ
    at_edge = im[im["channel_hz"] == edge]
    np.testing.assert_allclose(at_edge["rejection_db"], 0.0, atol=1e-9)
    assert F1_HZ <= float(centre(at_edge)[0]) <= F2_HZ
    np.testing.assert_allclose(im[im["channel_hz"] != edge]["rejection_db"], STOP_DB, atol=1e-9)


# ================================================================ 3. ADC aliases through the chain
FS_HZ = 100e6  # invented sample rate
N_FFT = 2000  # 50 kHz bins: every frequency below is a whole number of bins (coherent, no window)
HD_DBC = (-60.0, -70.0)  # invented converter HD2, HD3
RF_HZ = 437.3e6  # invented channel (its mixer sum product does not fold onto the wanted)


def if_sampling(if_hz, zone, side, anti_alias=None):
    stages = [{"kind": "mixer", "lo": {"side": side}, "if": {"center_hz": if_hz, "bandwidth_hz": 1e6}}]
    if anti_alias is not None:
        stages.append({"kind": "filter", "name": "anti-alias", "filter": anti_alias})
    stages.append({"kind": "adc", "sample_rate_hz": FS_HZ, "nyquist_zone": zone, "harmonics_dbc": list(HD_DBC),
                   "input_bandwidth_hz": 260e6,
                   # a 0 dB channel filter over the whole first zone: every folded band reaches the output
                   "channel_filter": {"kind": "brickwall", "response": "lowpass", "f_edge_hz": FS_HZ / 2,
                                      "max_atten_db": 200}})
    return chain(stages, start_hz=RF_HZ, bandwidth_hz=100e3, level_dbm=-40.0, max_order=5)


def sampled_spectrum(y):
    """|rfft| of a record sampled at FS_HZ, DC left out; (frequencies, magnitudes)."""
    mag = np.abs(np.fft.rfft(y))
    mag[0] = 0.0
    return np.fft.rfftfreq(y.size, 1 / FS_HZ), mag


def tone(f_hz):
    return np.cos(2 * np.pi * f_hz * np.arange(N_FFT) / FS_HZ)


def peak_hz(f_hz):
    freqs, mag = sampled_spectrum(tone(f_hz))
    return float(freqs[np.argmax(mag)])


ADC_CASES = [  # (IF, zone, LO side, expected sense at the output): low side keeps, high side inverts
    (70e6, 2, "low", "inverted"),
    (130e6, 3, "low", "normal"),
    (70e6, 2, "high", "normal"),
]


@pytest.mark.parametrize(("if_hz", "zone", "side", "sense"), ADC_CASES)
def test_wanted_signal_folds_into_the_first_zone(if_hz, zone, side, sense):
    # Source: a numpy FFT of cos(2π·f·n/fs): the tone appears at |f - k·fs| in [0, fs/2], and a tone
    # moved up by δ appears moved down in an even zone (its sense turns over).
    result = analyse_chain(if_sampling(if_hz, zone, side))
    node = result.nodes.iloc[-1]
    assert node["kind"] == "adc"
    folded = peak_hz(if_hz)
    assert node["f_low_hz"] == node["f_high_hz"] == pytest.approx(folded, abs=1e-3)
    assert folded == pytest.approx(abs(if_hz - round(if_hz / FS_HZ) * FS_HZ))
    adc_flips = peak_hz(if_hz + 1e6) < folded  # simulated: the even zone turns the spectrum over
    assert adc_flips == (zone % 2 == 0)
    mixer_flips = side == "high"  # IF = LO - RF falls as RF rises (derived by hand)
    assert node["sense"] == ("inverted" if adc_flips ^ mixer_flips else "normal") == sense
    assert result.nodes.iloc[1]["sense"] == ("inverted" if mixer_flips else "normal")


@pytest.mark.parametrize(("if_hz", "zone", "side", "sense"), ADC_CASES)
def test_adc_harmonics_fold_where_and_as_strong_as_a_sampled_polynomial_says(if_hz, zone, side, sense):
    # Source: numpy FFT of y = x + a2·x² + a3·x³ sampled at fs, x a tone at the IF: a2 and a3 are set
    # so the analog harmonics are at HD2 and HD3 (power series: x² -> a2·A²/2 at 2f, x³ -> a3·A³/4 at
    # 3f, with 3·a3·A³/4 added to the fundamental); the simulation then says where each lands in the
    # first zone and at what level relative to the sampled fundamental.
    del sense
    hd2, hd3 = (10 ** (x / 20) for x in HD_DBC)
    a3 = 4 * hd3 / (1 - 3 * hd3)  # a3/4 = hd3·(1 + 3·a3/4), amplitude A = 1
    a2 = 2 * hd2 * (1 + 0.75 * a3)
    x = tone(if_hz)
    freqs, mag = sampled_spectrum(x + a2 * x**2 + a3 * x**3)
    top = np.argsort(mag)[::-1][:3]  # fundamental, HD2, HD3 (the three strongest lines; DC removed)
    sim_hz = freqs[top]
    sim_dbc = 20 * np.log10(mag[top] / mag[top[0]])
    result = analyse_chain(if_sampling(if_hz, zone, side), prune=False)
    assert float(result.nodes.iloc[-1]["f_low_hz"]) == pytest.approx(sim_hz[0], abs=1e-3)  # the wanted
    products = result.paths[result.paths["kind"] == "product"]
    for k, (f_sim, dbc_sim) in enumerate(zip(sim_hz[1:], sim_dbc[1:], strict=True), start=2):
        row = products[products["path"] == f"H{k}, alias in ADC"]
        assert len(row) == 1 and row["stage"].iloc[0] == "ADC"
        assert float(centre(row)[0]) == pytest.approx(f_sim, abs=1e-3)  # measured: within 1e-8 Hz
        assert float(row["level_dbc"].iloc[0]) == pytest.approx(dbc_sim, abs=1e-9)  # measured: < 2e-10 dB
        # the band is k times as wide as the signal (k·[f - B/2, f + B/2] folded as a whole)
        assert float(row["f_high_hz"].iloc[0] - row["f_low_hz"].iloc[0]) == pytest.approx(k * 100e3)


def _alias_bands(zone_w, f_fold, f_max):
    """Centre of each zone's alias of the first-zone frequency f_fold (k·fs ± f), up to f_max."""
    out = {}
    for z in range(1, 64):
        k, above = divmod(z, 2)
        f = k * FS_HZ + f_fold if above else k * FS_HZ - f_fold
        if f - 50e3 > f_max:
            break
        if z != zone_w:
            out[z] = f
    return out


@pytest.mark.parametrize(("if_hz", "zone", "side", "sense"), ADC_CASES)
def test_alias_responses_of_every_other_zone(if_hz, zone, side, sense):
    # Source: a numpy FFT of a tone at k·fs ± f_fold sampled at fs lands on f_fold (every zone aliases
    # with equal weight: 0 dB of rejection without an anti-alias filter); at RF the band sits where the
    # wanted conversion puts it, LO + f (low side) or LO - f (high side).
    del sense
    result = analyse_chain(if_sampling(if_hz, zone, side))
    f_fold = float(result.nodes.iloc[-1]["f_low_hz"])
    lo = RF_HZ - if_hz if side == "low" else RF_HZ + if_hz
    expected = _alias_bands(zone, f_fold, 260e6)
    assert len(expected) == 4
    for z, f_adc in expected.items():
        assert peak_hz(f_adc) == pytest.approx(f_fold, abs=1e-3)  # the simulation: it does fold onto the wanted
        row = rows(result.paths, f"alias zone {z} of ADC:")
        assert list(row["stage"]) == ["ADC"] and list(row["kind"]) == ["response"]
        assert float(centre(row)[0]) == pytest.approx(lo + f_adc if side == "low" else lo - f_adc, abs=1e-3)
        assert float(row["rejection_db"].iloc[0]) == pytest.approx(0.0, abs=1e-9)
    # no alias response claims the wanted zone, nor a zone beyond the input bandwidth
    named = {int(m.group(1)) for m in (re.match(r"alias zone (\d+) of ADC:", p) for p in result.paths["path"]) if m}
    assert named == set(expected)


def test_anti_alias_filter_sets_the_alias_rejection():
    # Source: Butterworth band-pass (scipy buttap/lp2bp/freqs): the zone-1, zone-3 and zone-4 aliases
    # of a 70 MHz IF (30, 130 and 170 MHz at the ADC input) take the anti-alias filter's loss at their
    # band's edge nearest its centre, less its loss on the wanted at its centre (0 dB).
    # Measured: within 2e-14 dB.
    aaf = {"kind": "butterworth", "response": "bandpass", "order": 5, "f_center_hz": 70e6, "bandwidth_hz": 30e6,
           "max_atten_db": 300}
    result = analyse_chain(if_sampling(70e6, 2, "low", anti_alias=aaf))
    for z, (low, high) in {1: (29.95e6, 30.05e6), 3: (129.95e6, 130.05e6), 4: (169.95e6, 170.05e6)}.items():
        row = rows(result.paths, f"alias zone {z} of ADC:")
        expected = butterworth_bp_loss_db(nearest_edge(low, high, 70e6), 70e6, 30e6, 5)[0]
        assert expected > 20
        assert float(row["rejection_db"].iloc[0]) == pytest.approx(expected, abs=1e-6)


# ================================================================ 4. amplifier harmonics
GAIN_DB, OIP2_DBM, OIP3_DBM = 20.0, 35.0, 25.0  # invented amplifier
R_OHM = 50.0
N_SIM = 4096
B1, B2 = 101, 117  # tone bins of the simulations: 2·B1, 3·B1, B1 + B2, 2·B1 - B2 all distinct and < N/2


def dbm(peak_volts):
    return 10 * np.log10(peak_volts**2 / (2 * R_OHM) / 1e-3)


def amplitude(p_dbm):
    return math.sqrt(2 * R_OHM * 1e-3 * 10 ** (p_dbm / 10))


def lines(y, *bins):
    """Amplitude of the lines at ``bins`` of a coherent record (rectangular window: exact)."""
    spec = np.abs(np.fft.rfft(y)) * 2 / y.size
    return [float(spec[b]) for b in bins]


def power_series(a, x):
    return a[0] * x + a[1] * x**2 + a[2] * x**3


def two_tone(a, p_in_dbm):
    """OIP2 and OIP3 (dBm) of the series measured by a simulated two-tone test at p_in_dbm per tone."""
    n = np.arange(N_SIM)
    x = amplitude(p_in_dbm) * (np.cos(2 * np.pi * B1 * n / N_SIM) + np.cos(2 * np.pi * B2 * n / N_SIM))
    fund, im2, im3 = lines(power_series(a, x), B1, B1 + B2, 2 * B1 - B2)
    p_f, p2, p3 = dbm(fund), dbm(im2), dbm(im3)
    return p_f + (p_f - p2), p_f + (p_f - p3) / 2


def series_for(gain_db, oip2_dbm, oip3_dbm):
    """a1, a2, a3 whose simulated two-tone intercepts are the given ones (scaled from a first guess)."""
    a = [10 ** (gain_db / 20), 1.0, -1.0]
    oip2, oip3 = two_tone(a, -60.0)
    a[1] *= 10 ** ((oip2 - oip2_dbm) / 20)  # IM2 grows with a2: OIP2 falls 1 dB per dB of a2
    a[2] *= 10 ** ((oip3 - oip3_dbm) / 10)  # IM3 grows with a3: OIP3 falls 1/2 dB per dB of a3
    return a


def one_tone_harmonics(a, p_in_dbm):
    n = np.arange(N_SIM)
    fund, h2, h3 = lines(power_series(a, amplitude(p_in_dbm) * np.cos(2 * np.pi * B1 * n / N_SIM)), B1, 2 * B1, 3 * B1)
    return 20 * np.log10(h2 / fund), 20 * np.log10(h3 / fund)


def test_simulated_two_tone_test_sets_the_intercepts():
    # Source: the definitions of OIP2/OIP3 (small-signal two-tone intercepts), simulated: set at -60 dBm
    # per tone, they hold 10 dB higher (the 2:1 and 3:1 slopes; measured: 1.6e-4 dB, the x³ term's own
    # compression of the fundamental).
    a = series_for(GAIN_DB, OIP2_DBM, OIP3_DBM)
    oip2, oip3 = two_tone(a, -50.0)
    assert oip2 == pytest.approx(OIP2_DBM, abs=1e-3) and oip3 == pytest.approx(OIP3_DBM, abs=1e-3)


AMP = {"kind": "amplifier", "name": "amp", "gain_db": GAIN_DB, "oip2_dbm": OIP2_DBM, "oip3_dbm": OIP3_DBM}
IF_MIXER = {"kind": "mixer", "lo": {"side": "low"}, "if": {"center_hz": 70e6, "bandwidth_hz": 1e6}}
WIDE = {"kind": "filter", "name": "wide", "filter": {"kind": "brickwall", "response": "lowpass", "f_edge_hz": 10e9,
                                                      "max_atten_db": 200}}  # 0 dB below 10 GHz: no brick-wall IF


@pytest.mark.parametrize("order", ["mixer, amplifier", "amplifier, mixer"])
def test_amplifier_harmonics_match_a_simulated_power_series(order):
    # Source: Razavi sec. 2.2 (from memory), checked by simulation: the one-tone harmonics of the
    # series whose simulated two-tone intercepts are OIP2/OIP3, at the amplifier's own drive in the
    # chain.  Before the mixer, the harmonic's (1,-1) conversion keeps its dBc (0 dBc in any table).
    stages = [IF_MIXER, AMP, WIDE] if order == "mixer, amplifier" else [AMP, IF_MIXER, WIDE]
    # a small drive (output 20-24 dB under the amplifier's own 0 dBm): the x³ term's compression of the
    # simulated fundamental, which the small-signal formulas leave out, stays under 3e-4 dB
    result = analyse_chain(chain(stages, start_hz=RF_HZ, bandwidth_hz=100e3, level_dbm=-40.0), prune=False)
    amp_node = result.nodes[result.nodes["after"] == "amp"].iloc[0]
    p_in = float(amp_node["level_dbm"]) - GAIN_DB
    hd2_sim, hd3_sim = one_tone_harmonics(series_for(GAIN_DB, OIP2_DBM, OIP3_DBM), p_in)
    p_out = p_in + GAIN_DB
    # the handbook formulas agree with the simulation
    assert hd2_sim == pytest.approx(p_out - OIP2_DBM - 20 * math.log10(2), abs=1e-3)
    assert hd3_sim == pytest.approx(2 * (p_out - OIP3_DBM) - 20 * math.log10(3), abs=1e-3)
    products = result.paths[result.paths["kind"] == "product"]
    suffix = ", then (1,-1) in mixer 1" if order == "amplifier, mixer" else ""
    for k, sim in ((2, hd2_sim), (3, hd3_sim)):
        row = products[products["path"] == f"H{k} in amp{suffix}"]
        assert len(row) == 1 and row["stage"].iloc[0] == "amp"
        assert float(row["level_dbc"].iloc[0]) == pytest.approx(sim, abs=1e-3)  # measured: 1.1e-4 and 2.7e-4 dB


def test_amplifier_harmonic_responses_are_input_referred():
    # Derived by hand from the same series: an interferer at P_u makes an H2 of 2·(P_u + G) - OIP2 - 6.02
    # dBm; it equals the wanted output P_w + G when P_u - P_w = (OIP2 - G - P_w + 6.02)/2, and for H3
    # (2·(OIP3 - G - P_w) + 9.54)/3.  Its input band is the wanted's over k (RF/2, RF/3 for a low-side LO
    # through the (1,-1) product: k·f - LO = IF).
    p_w = -20.0
    result = analyse_chain(chain([AMP, IF_MIXER, WIDE], start_hz=RF_HZ, bandwidth_hz=100e3, level_dbm=p_w))
    for k, expected in ((2, (OIP2_DBM - GAIN_DB - p_w + 20 * math.log10(2)) / 2),
                        (3, (2 * (OIP3_DBM - GAIN_DB - p_w) + 20 * math.log10(3)) / 3)):
        row = rows(result.paths, f"H{k} of amp: H{k} in amp, then (1,-1) in mixer 1")
        assert float(row["rejection_db"].iloc[0]) == pytest.approx(expected, abs=1e-9)
        assert float(centre(row)[0]) == pytest.approx(RF_HZ / k, abs=1e-3)


# ================================================================ 5. spectral sense through two conversions
@pytest.mark.parametrize(("side1", "side2", "after1", "after2", "summary"), [
    ("high", "low", "inverted", "inverted", "yes"),
    ("high", "high", "inverted", "normal", "no"),
    ("low", "low", "normal", "normal", "no"),
    ("low", "high", "normal", "inverted", "yes"),
])
def test_spectral_sense_through_two_conversions(side1, side2, after1, after2, summary):
    # Derived by hand: IF1 = LO1 - f (high side) has d IF1/d f = -1, f - LO1 (low side) +1; then
    # IF2 = IF1 - LO2 (low-side LO2) keeps the sign and LO2 - IF1 (high side) flips it.  The output
    # is inverted when exactly one conversion is high side.
    lo2 = IF1_HZ - IF2_HZ if side2 == "low" else IF1_HZ + IF2_HZ
    plan = chain([{"kind": "mixer", "lo": {"side": side1}, "if": {"center_hz": IF1_HZ, "bandwidth_hz": 30e3}},
                  {"kind": "filter", "name": "first-IF filter", "filter": IF1_FILTER},
                  {"kind": "mixer", "lo": {"mode": "fixed", "fixed_hz": lo2},
                   "if": {"center_hz": IF2_HZ, "bandwidth_hz": IF2_BW_HZ}}],
                 start_hz=144e6, stop_hz=146e6, step_hz=0.5e6)
    result = analyse_chain(plan)
    sense = dict(zip(result.nodes["after"], result.nodes["sense"], strict=True))
    assert (sense["chain input"], sense["mixer 1"], sense["first-IF filter"], sense["mixer 2"]) == (
        "normal", after1, after1, after2)
    assert result.summary.inverted == summary
    assert bool(result.channels["inverted"].all()) == (summary == "yes")
    assert bool(result.channels["inverted"].any()) == (summary == "yes")
    # the same sign by a finite difference of the conversion at channel 145 MHz's fixed LOs
    lo1 = 145e6 + IF1_HZ if side1 == "high" else 145e6 - IF1_HZ

    def f_out(f):
        return abs(abs(f - lo1) - lo2)

    slope = (f_out(145e6 + 1e3) - f_out(145e6 - 1e3)) / 2e3
    assert slope == pytest.approx(-1.0 if summary == "yes" else 1.0)


# ================================================================ 6. levels composed along a path
def test_levels_compose_along_a_two_mixer_path():
    # Derived by hand: mixer 1 makes its (m1,n1) product at table1[m1,n1] (at its drive P1) relative to
    # its wanted output; mixer 2 then makes (m2,n2) of that band at table2[m2,n2] at the band's own drive
    # relative to what the same conversion makes of the wanted, and a (1,1) conversion is linear
    # (table2[1,1] = 0 dBc at any drive).  So a path's level relative to the wanted output is
    # table1[m1,n1](P1) + table2[m2,n2](P1 - CL1 + table1[m1,n1](P1)) - table2[1,1]; the band is m2·m1
    # times as wide as the signal, centred at |m2·|m1·f ± n1·LO1| ± n2·LO2|.
    p1, bw, order = -25.0, 12.5e3, 4
    mixer2 = {"topology": "single_balanced", "balance_db": 25.0, "rf_harmonic_step_db": 15.0}
    plan = chain([{"kind": "mixer", "lo": {"side": "high"}, "if": {"center_hz": IF1_HZ, "bandwidth_hz": 30e3}},
                  {"kind": "mixer", "lo": {"mode": "fixed", "fixed_hz": IF1_HZ - IF2_HZ},
                   "if": {"center_hz": IF2_HZ, "bandwidth_hz": IF2_BW_HZ}, "mixer": mixer2},
                  {"kind": "filter", "name": "wide", "filter": WIDE["filter"]}],
                 start_hz=145e6, bandwidth_hz=bw, level_dbm=p1, max_order=order)
    result = analyse_chain(plan, prune=False)
    t1 = build_table(MixerSpec(), order, direction="down")
    t2 = build_table(MixerSpec(**mixer2), order, direction="down")
    lo1, lo2 = 145e6 + IF1_HZ, IF1_HZ - IF2_HZ
    step = re.compile(r"\((\d+),([+-]?)(\d+)\) in (mixer [12])")
    checked = 0
    for _, row in result.paths[result.paths["kind"] == "product"].iterrows():
        found = {name: (int(m), -1 if s == "-" else 1, int(n)) for m, s, n, name in step.findall(row["path"])}
        if not found or row["path"] != ", then ".join(f"({m},{'+-'[s < 0] if n else ''}{n}) in {name}"
                                                      for name, (m, s, n) in found.items()):
            continue  # an LO line, or a path through an LO line
        (m1, s1, n1) = found.get("mixer 1", (1, -1, 1))  # the path leaves the wanted signal at mixer 2
        (m2, s2, n2) = found["mixer 2"]
        l1 = float(t1.level_dbc_at(m1, n1, p1, floored=False))
        l2 = float(t2.level_dbc_at(m2, n2, p1 - t1.conversion_loss_db + l1, floored=False))
        assert row["level_dbc"] == pytest.approx(l1 + l2, abs=1e-9), row["path"]
        mid = abs(m2 * abs(m1 * 145e6 + s1 * n1 * lo1) + s2 * n2 * lo2)
        if row["f_low_hz"] > 0:  # a band that straddles 0 Hz folds onto itself: narrower
            assert row["f_high_hz"] - row["f_low_hz"] == pytest.approx(m1 * m2 * bw, abs=1e-3), row["path"]
            assert 0.5 * (row["f_low_hz"] + row["f_high_hz"]) == pytest.approx(mid, abs=1e-3), row["path"]
        checked += 1
    assert checked == 255  # every (m1,n1) x (m2,n2) of order <= 4 each, less the wanted itself
    # the case the textbook names: (2,1) in mixer 1, then (1,1) in mixer 2 sits at table1's (2,1) entry
    for path in ("(2,-1) in mixer 1, then (1,-1) in mixer 2", "(2,+1) in mixer 1, then (1,+1) in mixer 2"):
        row = result.paths[result.paths["path"] == path].iloc[0]
        assert row["level_dbc"] == pytest.approx(float(t1.level_dbc_at(2, 1, p1, floored=False)), abs=1e-9)
        assert row["f_high_hz"] - row["f_low_hz"] == pytest.approx(2 * bw, abs=1e-3)
