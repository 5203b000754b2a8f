"""Write the small sample recordings of the invented Demo Works plant.

Run from the repository root: ``python sample_data/make_sample_data.py``.  Deterministic:
the same files come out every time.
"""

from __future__ import annotations

from dataclasses import replace
from pathlib import Path

from engine.demo_plant import demo_recording
from engine.io.csvfile import write_csv
from engine.io.wav import write_wav

HERE = Path(__file__).resolve().parent


def main() -> None:
    rec = demo_recording("P-101", "motor DE H", 16)
    write_wav(HERE / "p101-motor-de-h-week16.wav", rec, bits=32, sample_format="float")

    for week in (6, 15):
        rec = demo_recording("P-102", "pump DE V", week)
        # 24-bit PCM as a data collector writes it, full scale ±50 g.
        write_wav(HERE / f"p102-pump-de-v-week{week:02d}.wav", rec, bits=24,
                  sample_format="int", full_scale=50.0)

    rec = demo_recording("F-201", "fan DE H", 12, duration_s=1.0)
    write_csv(HERE / "f201-fan-de-h-week12.csv", rec, with_time=True)

    rec = demo_recording("B-301", "blower DE A", 11)
    # In volts from a 100 mV/g accelerometer, as a sound card records it.
    volts = replace(rec, channels=[replace(c, samples=c.samples * 0.1, unit="V")
                                   for c in rec.channels])
    write_wav(HERE / "b301-blower-de-a-week11-100mV-per-g.wav", volts, bits=32,
              sample_format="float")

    rec = demo_recording("M-501", "mixer DE H", 16)
    write_wav(HERE / "m501-mixer-de-h-runup-with-tach.wav", rec, bits=16,
              sample_format="int", full_scale=10.0)


if __name__ == "__main__":
    main()
