"""Band values from first principles: sines of known amplitude, noise against
scipy.signal.welch, order bands that follow speed, envelope lines of a modulated
carrier."""

import dataclasses
import math

import numpy as np
import pytest
import scipy.signal

from engine.alarms.measure import MeasureInput, measure, measure_input_from_waveform, measure_plan
from engine.alarms.plan import AlarmPlan, Band
from engine.errors import InputError
from engine.levels import overall_levels
from engine.spectrum import SpectrumSettings, compute_spectrum

FS = 2560.0
G_N = 9.80665  # standard gravity, m/s² (CGPM 1901, ISO 80000-3)


def sine(f_hz, amp, seconds=8.0, fs=FS):
    t = np.arange(int(fs * seconds)) / fs
    return amp * np.sin(2 * np.pi * f_hz * t)


def spectrum_of(x, unit_in, *, lines=800, window="hann", fs=FS):
    return compute_spectrum(x, fs, unit_in=unit_in,
                            settings=SpectrumSettings(lines=lines, window=window))


def band(measure_, low=None, high=None, *, unit="mm/s", scale="rms", basis="hz", **kw):
    return Band("b", measure_, alert=1.0, danger=2.0, unit=unit, scale=scale, low=low,
                high=high, basis=basis, **kw)


def test_sine_on_a_line_reads_its_rms_and_peak():
    # A sine of amplitude A has RMS A/√2 (first principles); 100 Hz is line 80 at
    # 1.25 Hz spacing, so every window reads it without scalloping loss.
    a = 5.0
    inp = MeasureInput(velocity=spectrum_of(sine(100.0, a), "mm/s"))
    assert measure(band("band_rms", 90, 110), inp) == pytest.approx(a / math.sqrt(2), rel=0.01)
    assert measure(band("band_peak", 90, 110, scale="peak"), inp) == pytest.approx(a, rel=0.01)
    assert measure(band("band_peak", 90, 110, scale="pp"), inp) == pytest.approx(2 * a, rel=0.01)
    assert measure(band("band_peak", 90, 110), inp) == pytest.approx(a / math.sqrt(2), rel=0.01)
    # derived peak of a band RMS: √2·RMS = A for a sine
    assert measure(band("band_rms", 90, 110, scale="peak"), inp) == pytest.approx(a, rel=0.01)
    # a band that holds no part of the tone reads (almost) nothing
    assert measure(band("band_rms", 200, 300), inp) < 1e-6 * a


def test_sine_between_lines_band_rms_exact_band_peak_needs_flat_top():
    # Midway between lines (100.625 Hz) a Hann window's largest line is 1.42 dB low
    # (Harris 1978, Table 1, scalloping loss) but the band RMS, the sum of line powers
    # over the ENBW (Heinzel et al. 2002, eq. 26), is exact when the lobe is inside.
    a = 3.0
    x = sine(100.625, a)
    hann = MeasureInput(velocity=spectrum_of(x, "mm/s"))
    assert measure(band("band_rms", 90, 110), hann) == pytest.approx(a / math.sqrt(2), rel=0.01)
    peak = measure(band("band_peak", 90, 110, scale="peak"), hann)
    assert peak / a == pytest.approx(10 ** (-1.42 / 20), abs=0.005)
    flat = MeasureInput(velocity=spectrum_of(x, "mm/s", window="flat-top"))
    assert measure(band("band_peak", 90, 110, scale="peak"), flat) == pytest.approx(a, rel=0.01)
    assert measure(band("band_rms", 90, 110), flat) == pytest.approx(a / math.sqrt(2), rel=0.01)


def test_units_are_converted_by_integration_from_the_acceleration_spectrum():
    # 1 g peak at 100 Hz: velocity g_n/ω = 15.61 mm/s peak = 11.04 mm/s RMS,
    # displacement 2·g_n/ω² = 49.68 µm pp (first principles); 1 in = 25.4 mm exactly.
    omega = 2 * np.pi * 100.0
    acc = MeasureInput(acceleration=spectrum_of(sine(100.0, 1.0), "g"))
    assert measure(band("band_rms", 90, 110), acc) == pytest.approx(
        G_N * 1e3 / omega / math.sqrt(2), rel=0.01)
    assert measure(band("band_peak", 90, 110, unit="in/s", scale="peak"), acc) == pytest.approx(
        G_N * 1e3 / omega / 25.4, rel=0.01)
    assert measure(band("band_peak", 90, 110, unit="um", scale="pp"), acc) == pytest.approx(
        2 * G_N * 1e6 / omega**2, rel=0.01)
    assert measure(band("band_peak", 90, 110, unit="m/s2", scale="peak"), acc) == pytest.approx(
        G_N, rel=0.01)


def test_acceleration_bands_prefer_the_acceleration_spectrum():
    v = spectrum_of(sine(100.0, 10.0), "mm/s")
    a = v.converted("g")
    b = band("band_rms", 90, 110, unit="g")
    from_velocity = measure(b, MeasureInput(velocity=v))
    # differentiating: a = ω·v (first principles), 10 mm/s peak at 100 Hz = 0.6406 g peak
    assert from_velocity == pytest.approx(10e-3 * 2 * np.pi * 100 / G_N / math.sqrt(2), rel=0.01)
    doubled = dataclasses.replace(a, mean_square=4 * a.mean_square)
    assert measure(b, MeasureInput(velocity=v, acceleration=doubled)) == pytest.approx(
        2 * from_velocity, rel=1e-9)


def test_noise_band_rms_equals_the_integral_of_welchs_psd(rng):
    # scipy.signal.welch as reference: the band RMS is the square root of the PSD
    # integrated over the band's lines (Welch 1967; same frames, Hann, 50 % overlap).
    x = rng.standard_normal(int(FS * 20))
    spec = spectrum_of(x, "mm/s", lines=1600)
    f, psd = scipy.signal.welch(x, FS, window="hann", nperseg=4096, noverlap=2048,
                                detrend="constant", scaling="density")
    for lo, hi in [(100.0, 400.0), (10.0, 1000.0), (523.0, 547.5)]:
        sel = (f >= lo) & (f <= hi)
        expected = math.sqrt(psd[sel].sum() * (f[1] - f[0]))
        got = measure(band("band_rms", lo, hi), MeasureInput(velocity=spec))
        assert got == pytest.approx(expected, rel=0.01)
        assert got == pytest.approx(expected, rel=1e-6)


def test_order_band_follows_speed():
    # 1× of a shaft at rpm is rpm/60 Hz (first principles).
    a = 4.0
    one_x = band("band_rms", 0.9, 1.1, basis="order")
    fixed = band("band_rms", 18.0, 22.0)
    for rpm in (1200.0, 1800.0, 2975.0):
        spec = spectrum_of(sine(rpm / 60.0, a), "mm/s")
        inp = MeasureInput(velocity=spec, rpm=rpm)
        assert measure(one_x, inp) == pytest.approx(a / math.sqrt(2), rel=0.01)
        in_fixed = measure(fixed, inp)
        if rpm == 1200.0:
            assert in_fixed == pytest.approx(a / math.sqrt(2), rel=0.01)
        else:
            assert in_fixed < 1e-3 * a
    spec = spectrum_of(sine(20.0, a), "mm/s")
    assert math.isnan(measure(one_x, MeasureInput(velocity=spec, rpm=math.nan)))
    assert math.isnan(measure(one_x, MeasureInput(velocity=spec, rpm=0.0)))
    # 50 × at 1480 rpm is 1233 Hz, above this spectrum's Fmax of 1000 Hz: not measurable
    high = band("band_rms", 45, 50, basis="order")
    assert math.isnan(measure(high, MeasureInput(velocity=spec, rpm=1480.0)))


def test_overall_from_the_run_or_from_the_spectrum():
    # The ISO broadband level of engine.levels (Parseval over the record) against the
    # spectrum's 10–1000 Hz band RMS: both read a 100 Hz sine's RMS.
    x = sine(100.0, 1.0)
    lv = overall_levels(x, FS, unit_in="g", rpm=1480.0)
    spec = spectrum_of(x, "g")
    inp = MeasureInput(acceleration=spec, overall_velocity_mm_s=lv.velocity_rms_mm_s)
    iso = band("overall")
    explicit = band("overall", 10.0, 1000.0)
    assert measure(iso, inp) == lv.velocity_rms_mm_s
    assert measure(explicit, inp) == pytest.approx(lv.velocity_rms_mm_s, rel=0.01)
    assert measure(band("overall", unit="in/s", scale="peak"), inp) == pytest.approx(
        lv.velocity_rms_mm_s * math.sqrt(2) / 25.4, rel=1e-12)
    assert math.isnan(measure(iso, MeasureInput(acceleration=spec)))


def envelope_input(f_line, amp, *, window="flat-top", defect_hz=None):
    # A spectrum in g standing in for an envelope spectrum: Fmax 500 Hz, 1600 lines.
    fs = 1280.0
    spec = compute_spectrum(sine(f_line, amp, seconds=12.0, fs=fs), fs, unit_in="g",
                            settings=SpectrumSettings(lines=1600, window=window))
    return MeasureInput(envelope=spec, defect_hz=defect_hz or {})


def test_defect_amplitude_within_slip_of_the_defect_frequency():
    # Randall & Antoni 2011: the defect line slips 1–2 % from its kinematic frequency.
    b = band("defect", unit="g", scale="peak", defect="bpfo")
    for slip in (-0.015, 0.0, 0.012, 0.019):
        inp = envelope_input(100.0 * (1 + slip), 0.03, defect_hz={"bpfo": 100.0})
        assert measure(b, inp) == pytest.approx(0.03, rel=0.01)
    # a line 5 % away is not the defect's: only leakage far below the line is read
    far = envelope_input(105.0, 0.03, defect_hz={"BPFO": 100.0})
    assert measure(b, far) < 1e-4 * 0.03
    assert math.isnan(measure(b, envelope_input(100.0, 0.03, defect_hz={"bpfi": 100.0})))
    assert math.isnan(measure(b, envelope_input(100.0, 0.03, defect_hz={"bpfo": math.nan})))
    assert math.isnan(measure(b, envelope_input(100.0, 0.03, defect_hz={"bpfo": 499.0})))
    assert math.isnan(measure(b, MeasureInput(defect_hz={"bpfo": 100.0})))
    rms = band("defect", unit="m/s2", scale="rms", defect="bpfo")
    assert measure(rms, envelope_input(100.0, 0.03, defect_hz={"bpfo": 100.0})) == pytest.approx(
        0.03 * G_N / math.sqrt(2), rel=0.01)


def test_envelope_of_a_modulated_carrier():
    # x = A(1 + m·cos 2πf_m t)·sin 2πf_c t has the envelope A(1 + m·cos 2πf_m t): an
    # envelope line of amplitude A·m at f_m (first principles of amplitude modulation;
    # the demodulation of Randall & Antoni 2011).
    fs, amp, m, f_m = 25600.0, 2.0, 0.25, 87.3
    t = np.arange(int(fs * 4)) / fs
    x = amp * (1 + m * np.cos(2 * np.pi * f_m * t)) * np.sin(2 * np.pi * 4000.0 * t)
    env_settings = SpectrumSettings(fmax_hz=500.0, lines=800, window="flat-top", scale="peak")
    inp = measure_input_from_waveform(x, fs, unit_in="g", rpm=1480.0,
                                      defect_hz={"bpfo": 86.5},
                                      settings=SpectrumSettings(lines=3200),
                                      envelope_settings=env_settings,
                                      envelope_band_hz=(3000.0, 5000.0))
    assert inp.envelope is not None and inp.envelope.unit == "g"
    plan = AlarmPlan("env", (
        Band("BPFO", "defect", 0.1, 0.2, unit="g", scale="peak", defect="bpfo"),
        Band("env band", "envelope_rms", 0.1, 0.2, unit="g", low=80.0, high=95.0),
        Band("env peak", "envelope_peak", 0.1, 0.2, unit="g", scale="peak"),
        Band("env all", "envelope_rms", 0.1, 0.2, unit="g"),
        Band("crest", "crest_factor", 3, 6, unit="1", scale=""),
        Band("kurt", "kurtosis", 3, 6, unit="1", scale=""),
        Band("overall", "overall", 1, 2),
    ))
    values = measure_plan(plan, inp)
    assert list(values) == list(plan.band_names)
    assert values["BPFO"] == pytest.approx(amp * m, rel=0.01)
    assert values["env peak"] == pytest.approx(amp * m, rel=0.01)
    assert values["env band"] == pytest.approx(amp * m / math.sqrt(2), rel=0.01)
    assert values["env all"] == pytest.approx(amp * m / math.sqrt(2), rel=0.01)
    lv = overall_levels(x, fs, unit_in="g", rpm=1480.0)
    assert values["crest"] == lv.crest_factor and values["kurt"] == lv.kurtosis
    assert values["overall"] == lv.velocity_rms_mm_s
    for b in plan.bands:
        assert measure(b, inp) == values[b.name]


def test_input_from_a_velocity_waveform_has_no_envelope():
    inp = measure_input_from_waveform(sine(100.0, 5.0), FS, unit_in="mm/s", rpm=1480.0)
    assert inp.envelope is None
    assert any("not an acceleration" in w for w in inp.warnings)
    assert measure(band("band_rms", 90, 110), inp) == pytest.approx(5 / math.sqrt(2), rel=0.01)
    assert math.isnan(measure(band("envelope_rms", unit="g"), inp))


def test_not_measurable_gives_nan_and_bad_input_an_error():
    spec = spectrum_of(sine(100.0, 1.0), "mm/s")
    inp = MeasureInput(velocity=spec, crest_factor=4.2, kurtosis=math.inf)
    assert math.isnan(measure(band("band_rms", 90, 110), MeasureInput()))
    assert math.isnan(measure(band("band_rms", 900, 1100), inp))  # above Fmax 1000 Hz
    assert math.isnan(measure(band("band_rms", 100.1, 100.2), inp))  # holds no line
    assert measure(band("crest_factor", unit="1", scale=""), inp) == 4.2
    assert math.isnan(measure(band("kurtosis", unit="1", scale=""), inp))
    with pytest.raises(InputError, match="envelope spectrum must be in an acceleration unit"):
        measure(band("envelope_rms", unit="g"), MeasureInput(envelope=spec))
    with pytest.raises(InputError, match="band 'b': low 110 must be below high 90"):
        measure(band("band_rms", 110, 90), inp)
