"""Tests of the MATLAB .mat reader: v5 files written with scipy.io.savemat, v7.3 files
written with h5py in MATLAB's own layout, and a Case Western Reserve University
Bearing Data Center recording when the shared data folder is present."""

from __future__ import annotations

from pathlib import Path

import h5py
import numpy as np
import pytest
import scipy.io

from engine.errors import EngineWarning, InputError
from engine.io import read_recording
from engine.io.matfile import read_mat

CWRU_NORMAL = Path("/work/shared/data/cwru/normal_load0_97.mat")


def write_v73(path: Path, variables: dict[str, np.ndarray]) -> None:
    """Write a MATLAB v7.3 file as MATLAB does (layout from memory of MATLAB's files:
    HDF5 with a 512-byte user block that starts with the text header, every array
    stored column-major — so transposed as HDF5 sees it — with a MATLAB_class
    attribute)."""
    classes = {np.dtype("float64"): "double", np.dtype("float32"): "single",
               np.dtype("int16"): "int16", np.dtype("uint16"): "uint16"}
    with h5py.File(path, "w", userblock_size=512) as f:
        for name, value in variables.items():
            if isinstance(value, str):
                codes = np.array([[ord(c)] for c in value], dtype=np.uint16)
                ds = f.create_dataset(name, data=codes)
                ds.attrs["MATLAB_class"] = np.bytes_("char")
                continue
            a = np.atleast_2d(np.asarray(value))
            ds = f.create_dataset(name, data=a.T)
            ds.attrs["MATLAB_class"] = np.bytes_(classes[a.dtype])
        f.create_group("settings").attrs["MATLAB_class"] = np.bytes_("struct")
    header = b"MATLAB 7.3 MAT-file, Platform: GLNXA64, Created on: Mon Jan  6 10:00:00 2025 HDF5 schema 1.00 ."
    with open(path, "r+b") as f:
        f.write(header.ljust(116) + b"\x00" * 8 + b"\x00\x02IM")


def sine(n=2048, fs=1000.0, f=31.0):
    return np.sin(2 * np.pi * f * np.arange(n) / fs)


def test_v5_vector_with_fs_and_rpm(tmp_path):
    x = sine()
    path = tmp_path / "pump.mat"
    scipy.io.savemat(path, {"accel": x[:, None], "fs": 1000.0, "Motor_RPM": 1480,
                            "note": "DE horizontal"})
    rec = read_mat(path)
    assert rec.fs_hz == 1000.0 and rec.rpm == 1480.0 and rec.source == str(path)
    assert [c.name for c in rec.channels] == ["accel"] and rec.channels[0].unit == "g"
    np.testing.assert_array_equal(rec.channels[0].samples, x)


@pytest.mark.parametrize("fs_name", ["fs", "Fs", "sample_rate", "sampling_rate", "SampleRate"])
def test_sample_rate_variable_names(tmp_path, fs_name):
    path = tmp_path / "r.mat"
    scipy.io.savemat(path, {"x": sine()[None, :], fs_name: np.array([[2560.0]])})
    rec = read_mat(path, input_unit="mm/s")
    assert rec.fs_hz == 2560.0 and rec.channels[0].unit == "mm/s" and rec.rpm is None
    assert rec.n_samples == 2048  # a 1×N row vector is one channel


def test_matrix_orientations_give_channels(tmp_path):
    a = np.column_stack([sine(), 2 * sine(), 3 * sine()])  # N×3
    path = tmp_path / "m.mat"
    scipy.io.savemat(path, {"cols": a, "rows": a.T, "fs": 1000.0})
    by_cols = read_mat(path, variable="cols")
    by_rows = read_mat(path, variable="rows")
    assert [c.name for c in by_cols.channels] == ["cols_1", "cols_2", "cols_3"]
    for j in range(3):
        np.testing.assert_array_equal(by_cols.channels[j].samples, a[:, j])
        np.testing.assert_array_equal(by_rows.channels[j].samples, a[:, j])


def test_integer_arrays_are_read_as_stored_values(tmp_path):
    counts = (1000 * sine()).astype(np.int16)
    path = tmp_path / "i.mat"
    scipy.io.savemat(path, {"counts": counts[:, None]})
    rec = read_mat(path, sample_rate_hz=1000.0)
    assert rec.channels[0].samples.dtype == np.float64
    np.testing.assert_array_equal(rec.channels[0].samples, counts.astype(float))


def test_variable_choice_errors_list_the_candidates(tmp_path):
    path = tmp_path / "two.mat"
    scipy.io.savemat(path, {"DE_time": sine()[:, None], "FE_time": sine()[:, None],
                            "fs": 1000.0, "label": "pump"})
    with pytest.raises(InputError) as err:
        read_mat(path)
    text = str(err.value)
    assert "two.mat" in text and "DE_time" in text and "FE_time" in text and "--variable" in text
    with pytest.raises(InputError, match=r"two.mat: no variable named 'BA_time'.*DE_time"):
        read_mat(path, variable="BA_time")
    with pytest.raises(InputError, match="two.mat: variable 'label' is char"):
        read_mat(path, variable="label")
    assert read_mat(path, variable="FE_time").channels[0].name == "FE_time"
    tiny = tmp_path / "tiny.mat"
    scipy.io.savemat(tiny, {"x": np.arange(10.0), "fs": 1.0})  # fewer than 16 samples
    with pytest.raises(InputError, match="tiny.mat: no numeric array of at least 16"):
        read_mat(tiny)


def test_sample_rate_must_be_known(tmp_path):
    path = tmp_path / "nofs.mat"
    scipy.io.savemat(path, {"x": sine()[:, None]})
    with pytest.raises(InputError, match="nofs.mat: no sample rate.*give --sample-rate"):
        read_mat(path)
    assert read_mat(path, sample_rate_hz=5000.0).fs_hz == 5000.0
    with pytest.raises(InputError, match="nofs.mat: sample rate.*positive"):
        read_mat(path, sample_rate_hz=0.0)
    both = tmp_path / "both.mat"
    scipy.io.savemat(both, {"x": sine()[:, None], "fs": 1000.0, "Fs": 2000.0})
    with pytest.raises(InputError, match="both.mat: the file's sample-rate variables disagree"):
        read_mat(both)
    one = tmp_path / "one.mat"
    scipy.io.savemat(one, {"x": sine()[:, None], "fs": 1000.0})
    with pytest.warns(EngineWarning, match="one.mat: sample rate 2000 Hz given"):
        assert read_mat(one, sample_rate_hz=2000.0).fs_hz == 2000.0


def test_shapes_that_are_not_signals(tmp_path):
    path = tmp_path / "shape.mat"
    scipy.io.savemat(path, {"sq": np.ones((20, 20)), "cx": (1 + 1j) * sine()[:, None],
                            "fs": 100.0})
    with pytest.raises(InputError, match="shape.mat: variable 'sq' is square"):
        read_mat(path, variable="sq")
    with pytest.raises(InputError, match="shape.mat: variable 'cx' holds complex"):
        read_mat(path, variable="cx")


def test_not_a_mat_file(tmp_path):
    path = tmp_path / "junk.mat"
    path.write_bytes(b"this is not a MATLAB file at all" * 10)
    with pytest.raises(InputError, match="junk.mat: not a readable MATLAB"):
        read_mat(path)
    with pytest.raises(InputError, match="junk.mat"):
        read_recording(path, sample_rate_hz=1000.0)


def test_v73_in_matlab_layout_reads_like_v5(tmp_path):
    x = sine(4096)
    a = np.column_stack([x, -x]).astype(np.float32)
    v73 = tmp_path / "run73.mat"
    write_v73(v73, {"vib": a, "Fs": np.array(4096.0), "shaftRPM": np.array(1460.0),
                    "unit": "g"})
    with h5py.File(v73, "r") as f:
        assert f["vib"].shape == (2, 4096)  # column-major: HDF5 sees MATLAB's 4096×2 as 2×4096
    v5 = tmp_path / "run5.mat"
    scipy.io.savemat(v5, {"vib": a, "Fs": 4096.0, "shaftRPM": 1460.0, "unit": "g"})
    got73, got5 = read_mat(v73), read_mat(v5)
    assert got73.fs_hz == got5.fs_hz == 4096.0 and got73.rpm == got5.rpm == 1460.0
    assert len(got73.channels) == 2
    for c73, c5, want in zip(got73.channels, got5.channels, a.T):
        np.testing.assert_array_equal(c73.samples, want.astype(np.float64))
        np.testing.assert_array_equal(c5.samples, c73.samples)


def test_v73_vector_and_missing_variable(tmp_path):
    path = tmp_path / "vec73.mat"
    write_v73(path, {"x": sine()[:, None], "y": sine()[None, :]})
    with pytest.raises(InputError, match="vec73.mat: several variables.*x, y"):
        read_mat(path, sample_rate_hz=1000.0)
    rec = read_mat(path, variable="y", sample_rate_hz=1000.0)
    np.testing.assert_array_equal(rec.channels[0].samples, sine())
    with pytest.raises(InputError, match="vec73.mat: no variable named 'z'"):
        read_mat(path, variable="z", sample_rate_hz=1000.0)


def test_read_recording_dispatches_mat_with_full_scale(tmp_path):
    path = tmp_path / "clip.mat"
    x = np.clip(2.0 * sine(), -1.0, 1.0)  # clipped at ±1 (the declared range)
    scipy.io.savemat(path, {"x": x[:, None], "fs": 1000.0})
    rec = read_recording(path, full_scale=1.0)
    assert rec.channels[0].full_scale == 1.0
    assert [q.code for q in rec.quality] == ["clipping"]
    with pytest.raises(InputError, match="clip.mat: a time column applies"):
        read_recording(path, time_column=0)


@pytest.mark.skipif(not CWRU_NORMAL.exists(),
                    reason="Case Western Reserve University Bearing Data Center files are "
                           "not in /work/shared/data/cwru (shared data folder absent)")
def test_cwru_normal_baseline_recording():
    # Source: Case Western Reserve University Bearing Data Center, record 97 (normal
    # baseline, 0 hp): variable X097_DE_time, 1796 rpm stored in X097RPM, 12 kHz
    # stated by the data center (not stored in the file).
    rec = read_recording(CWRU_NORMAL, variable="X097_DE_time", sample_rate_hz=12000)
    assert rec.rpm == 1796.0
    assert rec.fs_hz == 12000.0 and rec.n_samples > 200_000
    assert len(rec.channels) == 1 and rec.channels[0].name == "X097_DE_time"
    assert rec.errors() == []
    # healthy accelerometer: near-zero mean and well under 1 g RMS (loose bounds, common
    # practice for a healthy rolling bearing; record 97 reads about 0.07 g)
    x = rec.channels[0].samples
    assert abs(x.mean()) < 0.1 and 0.01 < x.std() < 1.0
