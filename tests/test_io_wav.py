"""Tests of the WAV reader and writer, and of read_recording's dispatch and options.

Byte layouts are built here from first principles (RIFF chunk = 4-byte id, 32-bit
little-endian size, body, pad byte when odd; 'fmt ' fields tag, channels, rate, byte
rate, block align, bits — IBM/Microsoft Multimedia Programming Interface and Data
Specifications 1.0, 1991, from memory), so that the reader is not checked only
against our own writer.
"""

from __future__ import annotations

import struct
import warnings

import numpy as np
import pytest
import scipy.io.wavfile
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from engine.errors import EngineWarning, InputError
from engine.io import SUFFIXES, read_recording
from engine.io.wav import read_wav, wav_info, write_wav
from engine.recording import Channel, Recording
from engine.units import parse_sensitivity

GUID_TAIL = bytes.fromhex("000000001000800000aa00389b71")  # KSDATAFORMAT_SUBTYPE_* tail


def chunk(cid: bytes, body: bytes) -> bytes:
    return cid + struct.pack("<I", len(body)) + body + (b"\x00" if len(body) % 2 else b"")


def fmt_body(tag=1, channels=1, fs=8000, bits=16, block_align=None, ext_tag=None):
    align = channels * bits // 8 if block_align is None else block_align
    body = struct.pack("<HHIIHH", tag, channels, fs, fs * align, align, bits)
    if ext_tag is not None:
        body += struct.pack("<HHI", 22, bits, 0) + struct.pack("<H", ext_tag) + GUID_TAIL
    return body


def riff(*chunks: bytes) -> bytes:
    body = b"WAVE" + b"".join(chunks)
    return b"RIFF" + struct.pack("<I", len(body)) + body


def pack_ints(frames: np.ndarray, bits: int) -> bytes:
    """Interleaved integer frames (n, channels) to bytes, one sample at a time."""
    out = bytearray()
    for v in frames.reshape(-1).tolist():
        if bits == 8:
            out += bytes([v + 128])  # 8-bit WAV is unsigned with offset 128
        else:
            out += (v & ((1 << bits) - 1)).to_bytes(bits // 8, "little")
    return bytes(out)


def expected_float(frames: np.ndarray, bits: int) -> np.ndarray:
    return frames.astype(np.float64) / 2.0 ** (bits - 1)


# --- round trips -----------------------------------------------------------------------

@pytest.mark.parametrize("sample_format,bits", [("int", 8), ("int", 16), ("int", 24),
                                                ("int", 32), ("float", 32), ("float", 64)])
@pytest.mark.parametrize("n_ch", [1, 2, 3, 6])
def test_write_read_round_trip_is_exact(tmp_path, rng, sample_format, bits, n_ch):
    n = 1001  # odd, so that 8- and 24-bit mono data chunks need a pad byte
    if sample_format == "int":
        half = 2 ** (bits - 1)
        ints = rng.integers(-half, half, size=(n_ch, n))
        data = ints / float(half)  # exactly representable codes
    else:
        data = rng.uniform(-1.5, 1.5, size=(n_ch, n))
        if bits == 32:
            data = data.astype(np.float32).astype(np.float64)
    rec = Recording(25600.0, [Channel(d, "g", f"c{i}") for i, d in enumerate(data)], "mem")
    path = write_wav(tmp_path / "rt.wav", rec, bits=bits, sample_format=sample_format)
    info = wav_info(path)
    assert (info.channels, info.fs_hz, info.bits, info.n_frames) == (n_ch, 25600.0, bits, n)
    assert info.format == ("pcm" if sample_format == "int" else "float")
    assert not info.truncated
    back = read_wav(path, input_unit="g")
    assert back.fs_hz == 25600.0 and len(back.channels) == n_ch
    for want, ch in zip(data, back.channels):
        np.testing.assert_array_equal(ch.samples, want)
        assert ch.samples.dtype == np.float64
        assert ch.full_scale == (1.0 if sample_format == "int" else None)


@pytest.mark.parametrize("extensible", [True, False])
def test_extensible_and_plain_headers_read_alike(tmp_path, rng, extensible):
    data = rng.integers(-2**15, 2**15, size=(2, 300)) / 2.0**15
    rec = Recording(8000.0, [Channel(d, "g") for d in data])
    path = write_wav(tmp_path / "x.wav", rec, bits=16, sample_format="int",
                     extensible=extensible)
    assert wav_info(path).extensible is extensible
    np.testing.assert_array_equal(read_wav(path, input_unit="g").channels[1].samples, data[1])


# --- outside references ---------------------------------------------------------------

@pytest.mark.parametrize("dtype,divisor", [(np.int16, 2.0**15), (np.int32, 2.0**31),
                                           (np.float32, 1.0)])
def test_matches_scipy_wavfile(tmp_path, rng, dtype, divisor):
    # Reference: scipy.io.wavfile as reference for 16/32-bit integer and float WAV.
    if dtype is np.float32:
        raw = rng.uniform(-1, 1, size=(500, 3)).astype(np.float32)
    else:
        info = np.iinfo(dtype)
        raw = rng.integers(info.min, info.max, size=(500, 3), endpoint=True).astype(dtype)
    path = tmp_path / "ref.wav"
    scipy.io.wavfile.write(path, 11025, raw)
    fs_ref, ref = scipy.io.wavfile.read(path)
    ours = read_wav(path, input_unit="g")
    assert ours.fs_hz == fs_ref
    for c in range(3):
        np.testing.assert_array_equal(ours.channels[c].samples, ref[:, c] / divisor)
    # ... and scipy reads what we write.
    mine = write_wav(tmp_path / "ours.wav", ours, bits=np.dtype(dtype).itemsize * 8,
                     sample_format="float" if dtype is np.float32 else "int")
    fs2, back = scipy.io.wavfile.read(mine)
    assert fs2 == 11025
    np.testing.assert_array_equal(back, ref)


def test_24_bit_against_manual_byte_packing(tmp_path):
    # First principles: 24-bit PCM is 3-byte little-endian two's complement, full
    # scale 2**23; built here byte by byte with int.to_bytes.
    values = np.array([[0, 1], [-1, 2**23 - 1], [-2**23, 123456], [-654321, -2]])
    data = pack_ints(values, 24)
    path = tmp_path / "p24.wav"
    path.write_bytes(riff(chunk(b"fmt ", fmt_body(channels=2, bits=24, fs=48000)),
                          chunk(b"data", data)))
    rec = read_wav(path, input_unit="g")
    for c in range(2):
        np.testing.assert_array_equal(rec.channels[c].samples, values[:, c] / 2.0**23)
    assert rec.channels[0].samples[2] == -1.0  # -2**23 is negative full scale
    # our writer's packing gives the same bytes
    out = write_wav(tmp_path / "w24.wav", rec, bits=24, sample_format="int", extensible=False)
    assert out.read_bytes()[-len(data):] == data


def test_8_bit_is_unsigned_with_offset_128(tmp_path):
    path = tmp_path / "u8.wav"
    path.write_bytes(riff(chunk(b"fmt ", fmt_body(bits=8)),
                          chunk(b"data", bytes([0, 128, 255, 64, 192]))))
    samples = read_wav(path, input_unit="g").channels[0].samples
    np.testing.assert_array_equal(samples, [-1.0, 0.0, 127 / 128, -0.5, 0.5])


@pytest.mark.parametrize("ext_tag,bits,dtype", [(1, 16, "<i2"), (3, 32, "<f4"), (3, 64, "<f8")])
def test_extensible_subformats_from_bytes(tmp_path, ext_tag, bits, dtype):
    frames = np.array([[0.25, -0.5, 0.125], [-1.0, 0.75, 0.0]])
    raw = (frames * 2**15).astype(dtype) if ext_tag == 1 else frames.astype(dtype)
    path = tmp_path / "ext.wav"
    path.write_bytes(riff(chunk(b"fmt ", fmt_body(0xFFFE, 3, 16000, bits, ext_tag=ext_tag)),
                          chunk(b"data", raw.tobytes())))
    rec = read_wav(path, input_unit="m/s2")
    assert wav_info(path).extensible and rec.channels[2].unit == "m/s2"
    np.testing.assert_array_equal(np.array([c.samples for c in rec.channels]).T, frames)


def test_unknown_and_odd_chunks_are_skipped(tmp_path):
    values = np.array([[100], [-200], [300]])
    path = tmp_path / "chunks.wav"
    path.write_bytes(riff(
        chunk(b"LIST", b"INFOINAM\x05\x00\x00\x00pump\x00\x00"),
        chunk(b"junk", b"abc"),  # odd size: one pad byte follows
        chunk(b"data", pack_ints(values, 16)),  # data before fmt is allowed
        chunk(b"cue ", b"\x00" * 7),
        chunk(b"fmt ", fmt_body(bits=16, fs=1000)),
    ))
    rec = read_wav(path, input_unit="g")
    np.testing.assert_array_equal(rec.channels[0].samples, values[:, 0] / 2.0**15)
    assert rec.fs_hz == 1000.0 and rec.quality == []


def test_truncated_data_reads_whole_frames_and_warns(tmp_path):
    values = np.arange(-10, 10).reshape(10, 2)
    data = pack_ints(values, 16)[:-3]  # last frame cut in half, 9 whole frames left
    body = chunk(b"fmt ", fmt_body(channels=2, bits=16)) + b"data" + struct.pack("<I", 40) + data
    path = tmp_path / "cut.wav"
    path.write_bytes(b"RIFF" + struct.pack("<I", 4 + len(body)) + b"WAVE" + body)
    info = wav_info(path)
    assert info.truncated and info.n_frames == 9
    rec = read_recording(path)
    np.testing.assert_array_equal(rec.channels[1].samples, values[:9, 1] / 2.0**15)
    codes = [(q.code, q.severity) for q in rec.quality]
    assert ("truncated", "warning") in codes
    assert "cut.wav" in rec.quality[0].message


# --- bad input ---------------------------------------------------------------------------

GOOD_FMT = chunk(b"fmt ", fmt_body())
GOOD_DATA = chunk(b"data", b"\x01\x00\x02\x00")

BAD_FILES = {
    "not_riff": (b"RIFX" + riff(GOOD_FMT, GOOD_DATA)[4:], "RIFF"),
    "not_wave": (b"RIFF\x10\x00\x00\x00AVI " + GOOD_FMT, "WAVE"),
    "empty_file": (b"", "RIFF"),
    "no_fmt": (riff(GOOD_DATA), "'fmt '"),
    "no_data": (riff(GOOD_FMT), "'data'"),
    "zero_rate": (riff(chunk(b"fmt ", fmt_body(fs=0)), GOOD_DATA), "sample rate"),
    "zero_channels": (riff(chunk(b"fmt ", fmt_body(channels=0, block_align=0)), GOOD_DATA),
                      "channels"),
    "bits_12": (riff(chunk(b"fmt ", fmt_body(bits=12, block_align=2)), GOOD_DATA), "12 bits"),
    "data_size_0": (riff(GOOD_FMT, chunk(b"data", b"")), "empty"),
    "mu_law": (riff(chunk(b"fmt ", fmt_body(tag=7, bits=8)), GOOD_DATA), "mu-law"),
    "int_64": (riff(chunk(b"fmt ", fmt_body(bits=64)), chunk(b"data", b"\x00" * 8)),
               "integer PCM"),
    "float_16": (riff(chunk(b"fmt ", fmt_body(tag=3, bits=16)), GOOD_DATA), "IEEE float"),
    "block_align": (riff(chunk(b"fmt ", fmt_body(channels=2, block_align=3)), GOOD_DATA),
                    "block align"),
    "short_fmt": (riff(chunk(b"fmt ", b"\x01\x00\x01\x00"), GOOD_DATA), "at least 16"),
    "bad_guid": (riff(chunk(b"fmt ", fmt_body(0xFFFE, ext_tag=1)[:-1] + b"\x01"), GOOD_DATA),
                 "GUID"),
    "partial_frame_only": (riff(chunk(b"fmt ", fmt_body(channels=2)), chunk(b"data", b"\x01\x02")),
                           "no whole frame"),
}


@pytest.mark.parametrize("case", sorted(BAD_FILES))
def test_bad_files_raise_input_error_naming_the_file(tmp_path, case):
    content, fragment = BAD_FILES[case]
    path = tmp_path / f"bad_{case}.wav"
    path.write_bytes(content)
    with pytest.raises(InputError) as err:
        read_wav(path, input_unit="g")
    assert path.name in str(err.value) and fragment in str(err.value)
    with pytest.raises(InputError, match=case):
        read_recording(path)


def test_full_scale_scales_integer_pcm_and_is_refused_for_float(tmp_path):
    path = tmp_path / "v.wav"
    path.write_bytes(riff(GOOD_FMT, chunk(b"data", pack_ints(np.array([16384, -32768]), 16))))
    rec = read_wav(path, input_unit="V", full_scale=5.0)  # a ±5 V input range
    np.testing.assert_array_equal(rec.channels[0].samples, [2.5, -5.0])
    assert rec.channels[0].full_scale == 5.0
    with pytest.raises(InputError, match="v.wav.*positive"):
        read_wav(path, input_unit="V", full_scale=-1.0)
    fpath = write_wav(tmp_path / "f.wav", rec)  # float32 by default
    with pytest.raises(InputError, match="f.wav: full scale applies to integer PCM"):
        read_wav(fpath, input_unit="V", full_scale=5.0)


def test_write_wav_refuses_what_it_cannot_store(tmp_path):
    ok = Recording(1000.0, [Channel(np.zeros(10), "g")])
    with pytest.raises(InputError, match="w1.wav.*12-bit"):
        write_wav(tmp_path / "w1.wav", ok, bits=12, sample_format="int")
    with pytest.raises(InputError, match="w2.wav.*whole Hz"):
        write_wav(tmp_path / "w2.wav", Recording(999.5, [Channel(np.zeros(10), "g")]))
    with pytest.raises(InputError, match="w3.wav.*NaN"):
        write_wav(tmp_path / "w3.wav", Recording(1000.0, [Channel(np.full(4, np.nan), "g")]),
                  bits=16, sample_format="int")
    with pytest.raises(InputError, match="w4.wav.*same number"):
        write_wav(tmp_path / "w4.wav",
                  Recording(1000.0, [Channel(np.zeros(4), "g"), Channel(np.zeros(5), "g")]))


def test_write_wav_clips_beyond_full_scale_with_a_warning(tmp_path):
    rec = Recording(1000.0, [Channel(np.array([0.5, 1.5, -2.0]), "g")])
    with pytest.warns(EngineWarning, match="2 samples"):
        path = write_wav(tmp_path / "clip.wav", rec, bits=16, sample_format="int")
    np.testing.assert_array_equal(read_wav(path, input_unit="g").channels[0].samples,
                                  [0.5, 32767 / 32768, -1.0])


def test_wav_info_reads_the_header_only(tmp_path):
    # The data chunk declares a gigabyte that is not there: the header facts are still
    # available, from the bytes present, without reading samples.
    body = chunk(b"fmt ", fmt_body(channels=4, bits=32, tag=3, fs=51200))
    body += b"data" + struct.pack("<I", 2**30) + b"\x00" * 160
    path = tmp_path / "big.wav"
    path.write_bytes(riff(body))
    info = wav_info(path)
    assert (info.channels, info.fs_hz, info.bits, info.format) == (4, 51200.0, 32, "float")
    assert info.n_frames == 10 and info.truncated
    assert info.duration_s == pytest.approx(10 / 51200)


# --- property test ------------------------------------------------------------------------

@settings(max_examples=60, deadline=None,
          suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(n_ch=st.integers(1, 4), bits=st.sampled_from([8, 16, 24, 32]),
       n_frames=st.integers(1, 40), data=st.data())
def test_property_random_int_samples_round_trip_exactly(tmp_path, n_ch, bits, n_frames, data):
    half = 2 ** (bits - 1)
    flat = data.draw(st.lists(st.integers(-half, half - 1), min_size=n_ch * n_frames,
                              max_size=n_ch * n_frames))
    frames = np.array(flat, dtype=np.int64).reshape(n_frames, n_ch)
    path = tmp_path / "prop.wav"
    path.write_bytes(riff(chunk(b"fmt ", fmt_body(channels=n_ch, bits=bits, fs=4096)),
                          chunk(b"data", pack_ints(frames, bits))))
    rec = read_wav(path, input_unit="g")
    got = np.array([c.samples for c in rec.channels]).T
    np.testing.assert_array_equal(got, expected_float(frames, bits))
    again = read_wav(write_wav(tmp_path / "prop2.wav", rec, bits=bits, sample_format="int"),
                     input_unit="g")
    np.testing.assert_array_equal(np.array([c.samples for c in again.channels]).T, got)


# --- read_recording ---------------------------------------------------------------------

def test_read_recording_rejects_missing_folder_and_unknown_suffix(tmp_path):
    with pytest.raises(InputError, match="nothere.wav: no such file"):
        read_recording(tmp_path / "nothere.wav")
    folder = tmp_path / "survey.wav"
    folder.mkdir()
    with pytest.raises(InputError, match="survey.wav: is a folder"):
        read_recording(folder)
    odd = tmp_path / "trace.flac"
    odd.write_bytes(b"fLaC")
    with pytest.raises(InputError) as err:
        read_recording(odd)
    assert "trace.flac" in str(err.value) and all(s in str(err.value) for s in SUFFIXES)


def test_read_recording_applies_sensitivity_names_and_checks(tmp_path, rng):
    t = np.arange(4096) / 4096.0
    volts = 0.2 * np.sin(2 * np.pi * 50 * t)  # 0.2 V peak from a 100 mV/g sensor = 2 g
    rec = Recording(4096.0, [Channel(volts, "V"), Channel(rng.normal(0, 0.01, 4096), "V")])
    path = write_wav(tmp_path / "s.wav", rec, bits=32, sample_format="int", full_scale=5.0)
    got = read_recording(path, input_unit="V", full_scale=5.0,
                         sensitivity=parse_sensitivity("100mV/g"),
                         channel_names=["DE-H", "DE-V"])
    ch = got.channels[0]
    assert ch.unit == "g" and ch.name == "DE-H" and ch.sensitivity_v_per_unit == 0.1
    assert ch.full_scale == pytest.approx(50.0)  # ±5 V range / 0.1 V/g = ±50 g
    np.testing.assert_allclose(ch.samples, volts / 0.1, atol=5.0 / 2**31 / 0.1)
    assert got.quality == []
    with pytest.raises(InputError, match="s.wav.*input unit is g"):
        read_recording(path, sensitivity=(0.1, "g"))
    with pytest.raises(InputError, match="s.wav.*3 channel names"):
        read_recording(path, channel_names=["a", "b", "c"])
    with pytest.raises(InputError, match="s.wav.*4096 Hz"):
        read_recording(path, sample_rate_hz=12000.0)
    with pytest.raises(InputError, match="s.wav.*.mat files only"):
        read_recording(path, variable="x")
    with pytest.raises(InputError, match="s.wav.*text files"):
        read_recording(path, time_column="time")
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        assert read_recording(path, sample_rate_hz=4096.0).fs_hz == 4096.0
