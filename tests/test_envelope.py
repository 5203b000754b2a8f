"""Envelope spectrum: analytic signal against scipy, physics of modulation, a bearing
fault built from first principles, and the Case Western Reserve University Bearing
Data Center recordings."""

from pathlib import Path

import numpy as np
import pytest
import scipy.signal

from engine.bandfilter import band_waveform
from engine.envelope import (ENVELOPE_SETTINGS, analytic_signal, auto_band, defect_matches,
                             envelope_signal, envelope_spectrum)
from engine.errors import InputError
from engine.io import read_recording
from engine.peaks import find_peaks
from engine.simulate import Impacts, MachineSignal, synthesize
from engine.spectrum import SpectrumSettings, compute_spectrum

FS = 25600.0
CWRU = Path(__file__).resolve().parents[2] / "shared" / "data" / "cwru"
# Defect frequencies of the drive-end bearing as multiples of shaft speed (the data
# center's table, copied in ../shared/data/README.md).
CWRU_DE = {"ftf": 0.39828, "bsf2": 4.7135, "bpfo": 3.5848, "bpfi": 5.4152}
needs_cwru = pytest.mark.skipif(not CWRU.is_dir(), reason=f"Case Western Reserve University "
                                f"Bearing Data Center files not found in {CWRU} (shared data "
                                "folder absent)")


@pytest.mark.parametrize("n", [4096, 4097])
def test_analytic_signal_matches_scipy_hilbert(rng, n):
    # scipy.signal.hilbert as reference implementation (even and odd lengths).
    x = rng.standard_normal(n)
    np.testing.assert_allclose(analytic_signal(x, FS), scipy.signal.hilbert(x),
                               rtol=1e-12, atol=1e-12)


def test_band_analytic_signal_is_hilbert_of_the_band_passed_waveform(rng):
    # scipy.signal.hilbert of engine.bandfilter's brick-wall band (itself checked
    # against the DFT) as reference.
    x = rng.standard_normal(8192)
    band = (2000.0, 3500.0)
    ref = scipy.signal.hilbert(band_waveform(x, FS, band))
    np.testing.assert_allclose(analytic_signal(x, FS, band_hz=band), ref, atol=1e-12)


def test_envelope_of_an_amplitude_modulated_carrier():
    # Amplitude modulation: (1 + m cos 2π fm t) cos 2π fc t has the envelope
    # 1 + m cos 2π fm t, so its envelope spectrum holds one line at fm of peak
    # amplitude m (Randall & Antoni 2011; fm = 50 Hz lies on line 160).
    t = np.arange(int(FS * 16)) / FS
    m, fm, fc = 0.3, 50.0, 4000.0
    x = 2.0 * (1 + m * np.cos(2 * np.pi * fm * t)) * np.cos(2 * np.pi * fc * t)
    res = envelope_spectrum(x, FS, band_hz=(3000.0, 5000.0))
    assert res.auto is False and res.kurtogram is None and res.band_hz == (3000.0, 5000.0)
    s = res.spectrum
    assert s.unit == "g" and s.scale == "peak" and s.fmax_hz == 500.0 and s.lines == 1600
    k = int(round(fm / s.resolution_hz))
    assert s.amplitude[k] == pytest.approx(2.0 * m, rel=2e-3)
    assert find_peaks(s, count=1)[0].frequency_hz == pytest.approx(fm, abs=0.01)
    # The carrier's envelope is otherwise flat: nothing else within 40 dB.
    others = np.delete(s.amplitude, np.arange(k - 3, k + 4))
    assert others[3:].max() < 0.01 * s.amplitude[k]
    env, fs_env = envelope_signal(x, FS, band_hz=(3000.0, 5000.0))
    assert fs_env == pytest.approx(1280.0)  # 2.56 × Fmax (common practice)
    # The decimated envelope itself: a cosine of amplitude 2m about zero.
    assert (env.max() - env.min()) / 2 == pytest.approx(2.0 * m, rel=5e-3)
    assert abs(env.mean()) < 1e-3


@pytest.fixture(scope="module")
def outer_race():
    """Outer-race fault from first principles (engine.simulate): an impact train at
    BPFO with 1 % random slip rings a 3.5 kHz resonance (Randall & Antoni 2011),
    under a strong 1× and white noise whose power in the 3–4 kHz band equals the
    impacts' there (0 dB SNR)."""
    rpm, bpfo_order, band = 1500.0, 3.5848, (3000.0, 4000.0)
    imp = Impacts(order=bpfo_order, amplitude_g=1.0, resonance_hz=3500.0, damping=0.05,
                  slip=0.01)
    clean = synthesize(MachineSignal(rpm=rpm, bearing_impacts=[imp], seed=3), fs_hz=FS,
                       duration_s=10.0).channels[0].samples
    impact_power = np.mean(band_waveform(clean, FS, band) ** 2)
    noise_rms = np.sqrt(impact_power * (FS / 2) / (band[1] - band[0]))

    def record(impacts):
        sig = MachineSignal(rpm=rpm, orders={1.0: (5.0, 0.0)}, bearing_impacts=impacts,
                            noise_g_rms=noise_rms, seed=3)
        return synthesize(sig, fs_hz=FS, duration_s=10.0).channels[0].samples

    x, healthy = record([imp]), record([])
    # The premise: in the band, noise power equals impact power (0 dB, within 5 %).
    noise_band = np.mean(band_waveform(healthy, FS, band) ** 2)
    assert noise_band == pytest.approx(impact_power, rel=0.05)
    return x, healthy, bpfo_order * rpm / 60.0


def test_synthetic_outer_race_fault_is_found(outer_race):
    x, _, bpfo_hz = outer_race
    res = envelope_spectrum(x, FS)
    assert res.auto is True
    # Antoni (2007): the kurtogram's best band holds the resonance the impacts ring.
    lo, hi = res.kurtogram.best_band_hz
    assert lo <= 3500.0 <= hi
    assert res.band_hz[0] <= 3500.0 <= res.band_hz[1]
    # Randall & Antoni (2011): the envelope spectrum shows BPFO and its harmonics.
    top = find_peaks(res.spectrum, count=1)[0]
    assert top.frequency_hz == pytest.approx(bpfo_hz, rel=0.01)
    match = defect_matches(res.spectrum, {"bpfo": bpfo_hz})[0]
    assert 1 in match.harmonics and 2 in match.harmonics
    assert match.snr_db > 6.0
    assert res.kurtosis_in_band > 0.3  # impulsive band (Antoni 2006: 0 for noise)


def test_healthy_twin_shows_no_outer_race_defect(outer_race):
    # Same 1× and noise without impacts: no BPFO evidence (Randall & Antoni 2011).
    _, healthy, bpfo_hz = outer_race
    res = envelope_spectrum(healthy, FS, band_hz=(3000.0, 4000.0))
    assert defect_matches(res.spectrum, {"bpfo": bpfo_hz})[0].harmonics_found < 2
    assert abs(res.kurtosis_in_band) < 0.1


def _envelope_of(lines_hz_amp, seconds=16.0):
    t = np.arange(int(1280 * seconds)) / 1280.0
    env = sum(a * np.cos(2 * np.pi * f * t + 0.4 * i) for i, (f, a) in enumerate(lines_hz_amp))
    noise = 0.002 * np.random.default_rng(5).standard_normal(t.size)
    return compute_spectrum(env + noise, 1280.0, settings=ENVELOPE_SETTINGS)


def test_defect_matches_follow_one_slipping_fundamental():
    # Slip moves every harmonic by the same fraction (Randall & Antoni 2011: 1–2 %):
    # lines at 1.5 % below h · f are all found, with the 1st harmonic's amplitude.
    f0 = 87.0
    s = _envelope_of([(h * f0 * 0.985, 0.1 / h) for h in range(1, 5)])
    m = defect_matches(s, {"bpfo": f0})[0]
    assert m.harmonics == (1, 2, 3, 4) and m.harmonics_found == 4
    assert m.amplitude == pytest.approx(0.1, rel=0.02)
    np.testing.assert_allclose(m.matched_frequencies, [h * f0 * 0.985 for h in range(1, 5)],
                               atol=0.05)
    # Unrelated lines, one in each window but at slips of −1.5, +1.8 and −0.5 %: no
    # common fundamental explains more than one of them.
    s2 = _envelope_of([(f0 * 0.985, 0.1), (2 * f0 * 1.018, 0.1), (3 * f0 * 0.995, 0.1)])
    assert defect_matches(s2, {"bpfo": f0})[0].harmonics_found == 1
    # Outside the tolerance nothing counts.
    s3 = _envelope_of([(f0 * 1.04, 0.1)])
    assert defect_matches(s3, {"bpfo": f0})[0].harmonics_found == 0


def test_narrow_band_is_reported_and_bad_inputs_rejected(rng):
    x = rng.standard_normal(int(FS * 4))
    res = envelope_spectrum(x, FS, band_hz=(3000.0, 3400.0),
                            settings=SpectrumSettings(fmax_hz=500.0, lines=400,
                                                      scale="peak"))
    assert any("narrower than twice" in w for w in res.warnings)
    with pytest.raises(InputError, match="acceleration"):
        envelope_spectrum(x, FS, band_hz=(3000.0, 4000.0), unit="mm/s")
    with pytest.raises(InputError, match="band_hz"):
        envelope_spectrum(x, FS, band_hz=(3000.0, 20000.0))
    with pytest.raises(InputError, match="amplitude spectrum"):
        defect_matches(compute_spectrum(x, FS, settings=SpectrumSettings(scale="psd")),
                       {"bpfo": 100.0})
    band, kg = auto_band(x, FS, min_bandwidth_hz=2000.0)
    assert band[1] - band[0] >= 2000.0 and kg.levels.size > 2


def _cwru(number: int):
    name = {97: "normal_load0_97.mat", 105: "12k_drive_end_inner_race_007_load0_105.mat",
            130: "12k_drive_end_outer_race_007_load0_130.mat"}[number]
    rec = read_recording(CWRU / name, variable=f"X{number:03d}_DE_time", sample_rate_hz=12000)
    res = envelope_spectrum(rec.channels[0].samples, rec.fs_hz)
    return res, rec.rpm / 60.0


@needs_cwru
@pytest.mark.parametrize("number,defect", [(130, "bpfo"), (105, "bpfi")])
def test_cwru_fault_records_show_their_defect(number, defect):
    # Case Western Reserve University Bearing Data Center, drive-end channel at 12 kHz:
    # the outer-race record (130) shows BPFO = 3.5848 × shaft and the inner-race record
    # (105) BPFI = 5.4152 × shaft (data center's table) among the 3 largest envelope
    # peaks, within 1.5 % (real bearings slip 1–2 %; the file's rpm is approximate).
    res, shaft_hz = _cwru(number)
    assert res.auto is True
    target = CWRU_DE[defect] * shaft_hz
    top3 = [p.frequency_hz for p in find_peaks(res.spectrum, count=3)]
    assert any(abs(f / target - 1.0) <= 0.015 for f in top3), (top3, target)
    match = defect_matches(res.spectrum, {defect: target})[0]
    assert match.harmonics_found >= 2


@needs_cwru
def test_cwru_healthy_record_shows_no_bearing_defect():
    # Case Western Reserve University Bearing Data Center, normal baseline (97): no
    # defect family of the drive-end bearing has 2 or more harmonics above 6 dB.
    res, shaft_hz = _cwru(97)
    matches = defect_matches(res.spectrum, {k: v * shaft_hz for k, v in CWRU_DE.items()})
    assert [m.harmonics_found for m in matches if m.harmonics_found >= 2] == []
