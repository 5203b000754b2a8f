"""Timing helpers shared by the benchmarks (run on demand, never in the test suite)."""

from __future__ import annotations

import time


def best_of(func, repeat: int = 7) -> float:
    """Best wall time of ``repeat`` calls, seconds (the least disturbed run)."""
    best = float("inf")
    for _ in range(repeat):
        t0 = time.perf_counter()
        func()
        best = min(best, time.perf_counter() - t0)
    return best


def report(name: str, ours: float, reference: float, target: float, *, ref_name: str) -> bool:
    """Print one benchmark line with the ratio against the reference; True when met."""
    ratio = ours / reference
    ok = ratio <= target
    print(f"{name}: ours {ours * 1e3:.2f} ms, {ref_name} {reference * 1e3:.2f} ms, "
          f"ratio {ratio:.2f} (target ≤ {target:g}) {'met' if ok else 'NOT met'}")
    return ok
