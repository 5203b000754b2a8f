"""Fast kurtogram: cost of 10 s at 25.6 kHz, and how the cost grows with the record.

Target: under 1 s for 10 s at 25.6 kHz (256 000 samples, 7 levels), and no worse than
N log N growth: each quadrupling of the record (1 → 4 → 16 s) may cost at most
4 · log(4N)/log(N) times as much (about 4.5× at these lengths), the ratio an
N log N algorithm gives.
The reference of each ratio is the same call on the record a quarter as long, in
the same run.

Run: ``python -m tests.benchmarks.bench_kurtogram``
"""

from __future__ import annotations

import sys

import numpy as np

from engine.kurtogram import fast_kurtogram
from tests.benchmarks._timing import best_of, report

FS = 25600.0


def main() -> int:
    rng = np.random.default_rng(1)
    x = rng.standard_normal(int(FS * 16))
    fast_kurtogram(x[: int(FS)], FS)  # warm up (filter design, FFT plans)
    t10 = best_of(lambda: fast_kurtogram(x[: int(FS * 10)], FS), 5)
    ok = t10 < 1.0
    print(f"fast kurtogram, 10 s at 25.6 kHz (7 levels): {t10 * 1e3:.1f} ms "
          f"(target < 1000 ms) {'met' if ok else 'NOT met'}")
    times = {}
    for seconds in (1, 4, 16):
        times[seconds] = best_of(lambda s=seconds: fast_kurtogram(x[: int(FS * s)], FS), 9)
        print(f"  {seconds:>2} s: {times[seconds] * 1e3:.1f} ms")
    for small, big in ((1, 4), (4, 16)):
        n = FS * small
        n_log_n = 4.0 * np.log(4.0 * n) / np.log(n)
        ok &= report(f"kurtogram {big} s against {small} s", times[big], times[small],
                     n_log_n, ref_name=f"{small} s")
    return 0 if ok else 1


if __name__ == "__main__":
    sys.exit(main())
