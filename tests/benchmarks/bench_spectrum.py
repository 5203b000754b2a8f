"""Averaged spectrum against a bare batched FFT of the same frames.

3200 lines, Hann, 67 % overlap, 50 averages of a 25.6 kHz recording: our whole call
(framing, window, mean removal, FFT, averaging, scaling) against ``scipy.fft.rfft`` of
the same already-windowed frames.  Target: at most 1.5×.

Run: ``python -m tests.benchmarks.bench_spectrum``
"""

from __future__ import annotations

import sys

import numpy as np
import scipy.fft

from engine.spectrum import SpectrumSettings, compute_spectrum
from engine.windows import get_window
from tests.benchmarks._timing import best_of, report


def main() -> int:
    fs, lines, overlap, averages = 25600.0, 3200, 0.67, 50
    n = int(2.56 * lines)
    step = int(round(n * (1 - overlap)))
    samples = n + (averages - 1) * step
    x = np.random.default_rng(1).standard_normal(samples)
    cfg = SpectrumSettings(lines=lines, window="hann", overlap=overlap, averages=averages)
    frames = np.lib.stride_tricks.sliding_window_view(x, n)[::step][:averages] * get_window("hann", n)

    def ours():
        compute_spectrum(x, fs, settings=cfg)

    def bare():
        scipy.fft.rfft(frames, axis=-1)

    ours(), bare()
    ok = report(f"spectrum {lines} lines × {averages} averages", best_of(ours, 200),
                best_of(bare, 200), 1.5, ref_name="bare rfft")
    return 0 if ok else 1


if __name__ == "__main__":
    sys.exit(main())
