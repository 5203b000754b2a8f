"""Tests of the delimited-text reader and writer (CSV, TSV, whitespace columns)."""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from engine.errors import InputError
from engine.io import read_recording
from engine.io.csvfile import read_csv, write_csv
from engine.recording import Channel, Recording


def write(tmp_path, name: str, text: str):
    path = tmp_path / name
    path.write_text(text, encoding="utf-8")
    return path


def test_comma_with_time_column(tmp_path):
    fs = 1000.0
    lines = ["time,accel_x,accel_y"] + [f"{i / fs!r},{0.5 * i},{-i}" for i in range(300)]
    rec = read_csv(write(tmp_path, "a.csv", "\n".join(lines)))
    assert rec.fs_hz == pytest.approx(fs, rel=1e-12)
    assert [c.name for c in rec.channels] == ["accel_x", "accel_y"]
    np.testing.assert_array_equal(rec.channels[0].samples, 0.5 * np.arange(300))
    assert rec.quality == [] and rec.channels[1].unit == "g"


def test_semicolon_with_decimal_comma_and_comments_anywhere(tmp_path):
    text = ("# exported from a data logger\n"
            "Zeit;Kanal 1;Kanal 2\n"
            "# start of data\n"
            "0,000;1,5;-2,25\n"
            "\n"
            "0,001;2,5;3\n"
            "   # a comment in the middle\n"
            "0,002;-0,5;1e-3\n"
            "# end\n")
    rec = read_csv(write(tmp_path, "de.csv", text), time_column="Zeit", input_unit="m/s2")
    assert rec.fs_hz == pytest.approx(1000.0)
    assert [c.name for c in rec.channels] == ["Kanal 1", "Kanal 2"]
    np.testing.assert_array_equal(rec.channels[0].samples, [1.5, 2.5, -0.5])
    np.testing.assert_array_equal(rec.channels[1].samples, [-2.25, 3.0, 1e-3])
    assert rec.channels[0].unit == "m/s2"


@pytest.mark.parametrize("sep", ["\t", "   ", " \t "])
def test_tab_and_whitespace_columns(tmp_path, sep):
    text = sep.join(["t", "a", "b"]) + "\n" + "\n".join(
        sep.join([f"{i / 512!r}", f"{i}", f"{2 * i}"]) for i in range(64))
    rec = read_csv(write(tmp_path, "w.tsv", text))
    assert rec.fs_hz == pytest.approx(512.0)
    np.testing.assert_array_equal(rec.channels[1].samples, 2.0 * np.arange(64))


def test_tab_with_decimal_comma(tmp_path):
    text = "time\tv\n0\t0,5\n0,5\t1,25\n1\t-3,5\n"
    rec = read_csv(write(tmp_path, "t.txt", text))
    assert rec.fs_hz == pytest.approx(2.0)
    np.testing.assert_array_equal(rec.channels[0].samples, [0.5, 1.25, -3.5])


def test_single_column_needs_a_sample_rate(tmp_path):
    path = write(tmp_path, "one.csv", "velocity\n1.0\n2.0\n3.5\n")
    with pytest.raises(InputError, match="one.csv: no time column.*--sample-rate"):
        read_csv(path)
    rec = read_csv(path, sample_rate_hz=100.0, input_unit="mm/s")
    assert rec.fs_hz == 100.0 and rec.channels[0].name == "velocity"
    np.testing.assert_array_equal(rec.channels[0].samples, [1.0, 2.0, 3.5])


def test_time_column_by_index_and_in_milliseconds(tmp_path):
    text = "stamp,x\n" + "\n".join(f"{2 * i},{i}" for i in range(10))
    path = write(tmp_path, "idx.csv", text)
    assert read_csv(path, time_column=0).fs_hz == pytest.approx(0.5)  # seconds
    ms = write(tmp_path, "ms.csv", text.replace("stamp", "time_ms"))
    assert read_csv(ms).fs_hz == pytest.approx(500.0)  # 2 ms steps
    with pytest.raises(InputError, match="idx.csv: no column named 'clock'.*'stamp', 'x'"):
        read_csv(path, time_column="clock")
    with pytest.raises(InputError, match="idx.csv: time column 5 does not exist"):
        read_csv(path, time_column=5)


def test_rounded_time_text_is_not_uneven(tmp_path):
    # 25.6 kHz written to the microsecond: steps alternate 39 µs / 40 µs, which is the
    # rounding of the text, not an uneven clock.  The rate comes from the whole span.
    fs = 25600.0
    n = 5000
    text = "time,a\n" + "\n".join(f"{i / fs:.6f},{float(np.sin(i))!r}" for i in range(n))
    rec = read_csv(write(tmp_path, "us.csv", text))
    assert rec.quality == []
    assert rec.fs_hz == pytest.approx(fs, rel=1e-5)


def test_uneven_time_warns(tmp_path):
    t = np.arange(400) / 1000.0
    t[200:] += 0.0005  # one step half as long again
    text = "t,x\n" + "\n".join(f"{float(v)!r},1.0" for v in t)
    rec = read_csv(write(tmp_path, "jitter.csv", text))
    assert [(q.code, q.severity) for q in rec.quality] == [("uneven_time", "warning")]
    assert "jitter.csv" in rec.quality[0].message and "50" in rec.quality[0].message
    assert rec.fs_hz == pytest.approx(1000.0)  # from the median step


def test_time_that_goes_back_is_an_error(tmp_path):
    path = write(tmp_path, "back.csv", "time,x\n0.0,1\n0.1,2\n# note\n0.05,3\n0.2,4\n")
    with pytest.raises(InputError, match="back.csv: line 5: time in column 'time' does not increase"):
        read_csv(path)
    dup = write(tmp_path, "dup.csv", "time,x\n0.0,1\n0.0,2\n")
    with pytest.raises(InputError, match="dup.csv: line 3"):
        read_csv(dup)


def test_time_and_sample_rate_must_agree(tmp_path):
    path = write(tmp_path, "agree.csv", "time,x\n0,1\n0.01,2\n0.02,3\n")
    assert read_csv(path, sample_rate_hz=100.0).fs_hz == pytest.approx(100.0)
    with pytest.raises(InputError, match="agree.csv: time column 'time' gives 100 Hz but 200 Hz"):
        read_csv(path, sample_rate_hz=200.0)


@pytest.mark.parametrize("text,fragment", [
    ("time,x\n0,1\n0.1,2,3\n", "line 3 has 3 columns; expected 2"),
    ("time,x\n0,1\n0.1,\n", "line 3, column 2 ('x') is empty"),
    ("# c\ntime;x\n0;1\n0,1;abc\n", "line 4, column 2 ('x'): 'abc' is not a number"),
    ("time,x\n0,1\n0.1,inf\n", "line 3, column 2 ('x'): 'inf' is not a number"),
    ("time,x\n0,1\n0.1,1.234.5\n", "'1.234.5' is not a number"),
    ("0.0,1.0\n0.1,2.0\n", "line 1 holds numbers; expected a header row"),
    ("time,,x\n0,1,2\n", "column 2 has no name"),
    ("time,x\n", "no data rows"),
    ("# only comments\n\n", "no header row"),
    ("time,x\n0,1\n", "at least two are needed"),
    ("time,x\nnan,1\n1,2\n", "line 2: time column 'time' holds nan"),
    ("time\n0\n1\n", "only a time column"),
])
def test_bad_text_raises_naming_file_and_place(tmp_path, text, fragment):
    path = write(tmp_path, "bad_input.csv", text)
    with pytest.raises(InputError) as err:
        read_csv(path)
    assert "bad_input.csv" in str(err.value) and fragment in str(err.value)


def test_nan_literal_becomes_nan_and_is_caught_by_the_quality_check(tmp_path):
    rows = [f"{i / 1000!r},{'NaN' if i == 7 else ('nan' if i == 9 else float(np.sin(i)))}"
            for i in range(512)]
    path = write(tmp_path, "gaps.csv", "time,x\n" + "\n".join(rows))
    x = read_csv(path).channels[0].samples
    assert np.isnan(x[7]) and np.isnan(x[9]) and np.isfinite(np.delete(x, [7, 9])).all()
    rec = read_recording(path)
    assert [(q.code, q.severity, q.channel) for q in rec.quality] == [("non_finite", "error", 0)]
    assert "2 of 512" in rec.quality[0].message


def test_quoted_header_names(tmp_path):
    path = write(tmp_path, "q.csv", '"time","DE H"\n0,1\n0.5,2\n')
    rec = read_csv(path)
    assert rec.channels[0].name == "DE H" and rec.fs_hz == pytest.approx(2.0)


@pytest.mark.parametrize("delimiter", [",", ";", "\t"])
@pytest.mark.parametrize("with_time", [True, False])
def test_write_read_round_trip_is_exact(tmp_path, rng, delimiter, with_time):
    data = rng.normal(0.0, 3.0, size=(3, 700))
    data[1, 5] = np.nan
    rec = Recording(12800.0, [Channel(d, "g", f"p{i}") for i, d in enumerate(data)], "mem")
    path = write_csv(tmp_path / "rt.csv", rec, with_time=with_time, delimiter=delimiter)
    back = read_csv(path, sample_rate_hz=None if with_time else 12800.0)
    assert back.fs_hz == pytest.approx(12800.0, rel=1e-12)
    assert [c.name for c in back.channels] == ["p0", "p1", "p2"]
    for want, ch in zip(data, back.channels):
        np.testing.assert_array_equal(ch.samples, want)  # NaN compares equal here


def test_write_csv_refuses_names_holding_the_delimiter(tmp_path):
    rec = Recording(10.0, [Channel(np.zeros(3), "g", "a,b")])
    with pytest.raises(InputError, match="n.csv: channel name 'a,b'"):
        write_csv(tmp_path / "n.csv", rec)


def test_read_recording_for_text_suffixes(tmp_path):
    for suffix in (".csv", ".tsv", ".txt"):
        path = write(tmp_path, "s" + suffix, "t\tx\n" + "\n".join(f"{i / 300!r}\t{i % 7}"
                                                                 for i in range(300)))
        rec = read_recording(path, channel_names=["DE-A"])
        assert rec.channels[0].name == "DE-A" and rec.fs_hz == pytest.approx(300.0)
        assert [q.code for q in rec.quality] == []
    with pytest.raises(InputError, match="s.txt: a variable name applies to .mat files only"):
        read_recording(tmp_path / "s.txt", variable="x")


# --- property test ---------------------------------------------------------------------

finite = st.floats(allow_nan=False, allow_infinity=False, width=64)


@settings(max_examples=80, deadline=None,
          suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(data=st.data(), n_cols=st.integers(1, 4), n_rows=st.integers(1, 30),
       delimiter=st.sampled_from([",", ";", "\t", " "]), decimal_comma=st.booleans())
def test_property_values_read_back_equal(tmp_path, data, n_cols, n_rows, delimiter,
                                         decimal_comma):
    if delimiter == ",":
        decimal_comma = False  # a decimal comma needs another delimiter
    values = np.array(data.draw(st.lists(st.lists(finite, min_size=n_cols, max_size=n_cols),
                                         min_size=n_rows, max_size=n_rows)))

    def cell(v: float) -> str:
        text = repr(float(v))  # shortest text that reads back to the same float
        return text.replace(".", ",") if decimal_comma else text

    names = [f"a{j}" for j in range(n_cols)]
    lines = [delimiter.join(names)] + [delimiter.join(cell(v) for v in row) for row in values]
    path = write(tmp_path, "prop.csv", "\n".join(lines) + "\n")
    rec = read_csv(path, sample_rate_hz=1000.0)
    assert [c.name for c in rec.channels] == names
    got = np.column_stack([c.samples for c in rec.channels])
    np.testing.assert_array_equal(got, values)
