"""Tests of the data-quality checks on synthetic signals with known faults.

Thresholds under test are common practice (see engine.io.quality); expected counts come
from the construction of each signal or from elementary trigonometry, named below.
"""

from __future__ import annotations

import re
import time

import numpy as np
import pytest

from engine.io import read_recording
from engine.io.quality import (CLIP_MIN_SHARE, DEFAULT_MIN_SAMPLES, check_channel,
                               check_quality)
from engine.io.wav import write_wav
from engine.recording import Channel, Recording

FS = 10240.0
N = 20480


def sine(amplitude=1.0, f_hz=97.0, n=N, phase=0.3):
    return amplitude * np.sin(2 * np.pi * f_hz * np.arange(n) / FS + phase)


def codes(findings):
    return [(f.code, f.severity) for f in findings]


def count_in(message: str) -> int:
    """The sample count a clipping message reports ("... N samples (p %) sit ...")."""
    return int(re.search(r"(\d+) samples \(", message).group(1))


def test_clean_signal_has_no_findings(rng):
    x = sine(0.4) + rng.normal(0, 0.02, N)
    assert check_channel(Channel(x, "g", full_scale=1.0)) == []
    assert check_channel(Channel(x, "g")) == []  # without a full scale either


def test_clipped_sine_count_matches_trigonometry():
    # A sine of amplitude A clipped at ±1 spends the fraction 1 - (2/π)·arcsin(1/A) of
    # its time at the limit (inverse of |sin θ| > 1/A over a period; elementary
    # trigonometry).  With 105.6 samples per period nearly every plateau is a run of
    # 3 or more samples.
    amplitude = 1.25
    x = np.clip(sine(amplitude), -1.0, 1.0)
    found = check_channel(Channel(x, "V", "DE-H", full_scale=1.0), index=2, source="p.wav")
    assert codes(found) == [("clipping", "warning")]
    assert found[0].channel == 2 and found[0].message.startswith("p.wav: channel 2 (DE-H)")
    expected = N * (1.0 - 2.0 / np.pi * np.arcsin(1.0 / amplitude))
    assert count_in(found[0].message) == pytest.approx(expected, rel=0.02)


def test_isolated_full_scale_samples_are_not_clipping():
    x = sine(0.5)
    x[[100, 5000, 9000]] = 1.0  # single spikes, no run of 3
    assert check_channel(Channel(x, "g", full_scale=1.0)) == []


def test_8_bit_top_code_counts_as_full_scale(tmp_path):
    # The largest 8-bit code is 127/128 of full scale (99.2 %), below the 99.9 % level;
    # a clipped 8-bit recording must still be flagged on its positive side.
    x = np.clip(sine(1.5), -1.0, 127 / 128)
    x[x < 0] *= 0.5  # only the positive half clips
    path = write_wav(tmp_path / "u8.wav", Recording(FS, [Channel(x, "g")]), bits=8,
                     sample_format="int")
    rec = read_recording(path)
    assert codes(rec.quality) == [("clipping", "warning")]
    expected = N / 2 * (1.0 - 2.0 / np.pi * np.arcsin(1.0 / 1.5))  # one half-wave only
    assert count_in(rec.quality[0].message) == pytest.approx(expected, rel=0.05)


def test_clipping_without_full_scale_uses_own_extremes():
    x = np.clip(sine(1.0), -0.8, 0.8)  # flat tops at the channel's own max and min
    found = check_channel(Channel(x, "mm/s"))
    assert codes(found) == [("clipping", "warning")]
    assert "own maximum or minimum" in found[0].message
    # a few short plateaus below CLIP_MIN_SHARE of the samples are not reported
    y = sine(0.5)
    y[1000:1004] = y.max() + 0.1
    assert 4 < CLIP_MIN_SHARE * N
    assert check_channel(Channel(y, "mm/s")) == []


def test_nan_and_inf_are_errors_with_a_count(rng):
    x = sine(0.3) + rng.normal(0, 0.01, N)
    x[[3, 30, 300]] = np.nan
    x[400] = np.inf
    found = check_channel(Channel(x, "g", full_scale=1.0))
    assert codes(found) == [("non_finite", "error")]
    assert "4 of 20480 samples" in found[0].message
    all_nan = check_channel(Channel(np.full(N, np.nan), "g"))
    assert codes(all_nan) == [("non_finite", "error")]


@pytest.mark.parametrize("x,full_scale", [
    (np.zeros(N), 1.0),
    (np.full(N, 0.37), None),  # exactly constant, any level: dead channel, no bias finding
    (1e-12 * np.sin(np.arange(N)), 1.0),  # 2e-12 peak-to-peak < 1e-9 of full scale
])
def test_flat_channel_is_an_error(x, full_scale):
    found = check_channel(Channel(x, "g", full_scale=full_scale), index=0)
    assert codes(found) == [("flat", "error")]


def test_tiny_signal_without_full_scale_is_not_flat():
    # without a full scale only an exactly constant channel is dead
    assert check_channel(Channel(1e-12 * sine(), "g")) == []


def test_biased_sensor_is_a_dc_offset_warning(rng):
    x = 0.3 + sine(0.02) + rng.normal(0, 0.002, N)  # 30 % of full scale bias, small signal
    found = check_channel(Channel(x, "V", full_scale=1.0))
    assert codes(found) == [("dc_offset", "warning")]
    assert "mean 0.3" in found[0].message


def test_small_bias_is_judged_against_full_scale():
    x = 0.05 + sine(0.01)  # mean > 3 std but only 5 % of full scale
    assert check_channel(Channel(x, "V", full_scale=1.0)) == []
    assert codes(check_channel(Channel(x, "V"))) == [("dc_offset", "warning")]


def test_short_and_empty_channels():
    found = check_channel(Channel(sine(0.5, n=100), "g"))
    assert codes(found) == [("too_short", "error")] and "100 samples" in found[0].message
    assert check_channel(Channel(sine(0.5, n=100), "g"), min_samples=64) == []
    assert DEFAULT_MIN_SAMPLES == 256
    assert codes(check_channel(Channel(np.array([]), "g"))) == [("too_short", "error")]


def test_check_quality_numbers_each_channel(rng):
    good = sine(0.4) + rng.normal(0, 0.01, N)
    bad = good.copy()
    bad[10] = np.nan
    rec = Recording(FS, [Channel(good, "g", "a"), Channel(np.zeros(N), "g", "b"),
                         Channel(bad, "g", "c")], source="survey.wav")
    found = check_quality(rec)
    assert [(f.code, f.channel) for f in found] == [("flat", 1), ("non_finite", 2)]
    assert all(f.message.startswith("survey.wav: channel") for f in found)
    rec.quality = found
    assert rec.errors(1) == [found[0]]


def test_checks_are_vectorised(rng):
    # Guard against per-sample Python loops: 2 million samples must take well under a
    # second (a Python loop over them takes several seconds).
    x = np.clip(rng.normal(0, 0.4, 2_000_000), -1.0, 1.0)
    start = time.perf_counter()
    found = check_channel(Channel(x, "g", full_scale=1.0))
    assert time.perf_counter() - start < 1.0
    assert [f.code for f in found] == ["clipping"]
