"""Data-quality checks run on every recording when it is read.

Each check looks at one channel's samples and returns :class:`~engine.recording.QualityFinding`
objects: ``error`` findings mean the channel cannot be analysed, ``warning`` findings
mean the analysis goes on and its result carries the caution.

=============  ========  ===============================================================
code           severity  rule
=============  ========  ===============================================================
``non_finite`` error     any NaN or infinite sample
``too_short``  error     fewer than ``min_samples`` samples
``flat``       error     peak-to-peak below 1e-9 of full scale, or exactly constant
                         (a dead channel: broken cable, sensor without supply)
``clipping``   warning   runs of 3 or more consecutive samples at the limit of the range
``dc_offset``  warning   \\|mean\\| > 3 × standard deviation, and > 10 % of full scale when
                         full scale is known (a sensor bias fault)
=============  ========  ===============================================================

The thresholds are common practice for vibration data screening, not values from a
standard; they are module constants so that callers can show them.

Clipping rule in detail: when the channel's full scale is known (integer PCM), a sample
is at the limit when it is at or beyond 99.9 % of \\|full scale\\|, or when it equals the
channel's own maximum (minimum) and that extreme is within 1 % of full scale.  The
second clause covers the top code of coarse integer formats: the largest 8-bit code,
127/128 of full scale, sits at 99.2 %.  Any run of 3 or more samples at the limit is
reported.  Without a full scale, a sample is at the limit when it equals the channel's
own maximum or minimum, and the finding needs such runs to make more than 0.1 % of the
samples, since a plateau at the extreme is then only an indication.

All checks are vectorised numpy reductions: a channel of 10 million samples is checked
in a small fraction of a second.
"""

from __future__ import annotations

import numpy as np

from ..recording import Channel, QualityFinding, Recording

#: Fewest samples a channel must have to be analysed (common practice: one 256-line
#: spectrum needs at least this many).
DEFAULT_MIN_SAMPLES = 256
#: A sample at or beyond this fraction of \|full scale\| is at the limit of the range.
CLIP_FRACTION_OF_FULL_SCALE = 0.999
#: The channel's own extreme counts as the limit when within this fraction of full scale.
CLIP_TOP_CODE_FRACTION = 0.99
#: Fewest consecutive samples at the limit that make a clipping run.
CLIP_MIN_RUN = 3
#: Without a full scale, clipping runs must make more than this share of the samples.
CLIP_MIN_SHARE = 0.001
#: Peak-to-peak below this fraction of full scale is a dead (flat) channel.
FLAT_FRACTION_OF_FULL_SCALE = 1e-9
#: \|mean\| above this many standard deviations suggests a sensor bias fault.
DC_SIGMA = 3.0
#: ... and, when full scale is known, \|mean\| above this fraction of it.
DC_FRACTION_OF_FULL_SCALE = 0.10


def check_quality(recording: Recording, *, min_samples: int = DEFAULT_MIN_SAMPLES
                  ) -> list[QualityFinding]:
    """Run every data-quality check on every channel of a recording.

    Parameters
    ----------
    recording : Recording
        The recording to check; it is not changed.
    min_samples : int, keyword-only
        Fewest samples per channel before ``too_short`` is reported.

    Returns
    -------
    list of QualityFinding
        In channel order; empty when every channel passes.

    Examples
    --------
    >>> import numpy as np
    >>> from engine.recording import Channel, Recording
    >>> rec = Recording(1000.0, [Channel(np.zeros(2000), "g", "ch1")], "demo")
    >>> [f.code for f in check_quality(rec)]
    ['flat']
    """
    findings: list[QualityFinding] = []
    for index, ch in enumerate(recording.channels):
        findings.extend(check_channel(ch, index=index, source=recording.source,
                                      min_samples=min_samples))
    return findings


def check_channel(channel: Channel, *, index: int | None = None, source: str = "",
                  min_samples: int = DEFAULT_MIN_SAMPLES) -> list[QualityFinding]:
    """Run the data-quality checks on one channel.

    Parameters
    ----------
    channel : Channel
        Samples in ``channel.unit``; ``channel.full_scale`` (same unit) enables the
        full-scale rules.
    index : int, optional, keyword-only
        Channel number stored in each finding (0-based).
    source : str, keyword-only
        File or description named in the messages.
    min_samples : int, keyword-only
        Fewest samples before ``too_short`` is reported.

    Returns
    -------
    list of QualityFinding
    """
    x = np.asarray(channel.samples, dtype=np.float64).reshape(-1)
    label = _label(channel, index, source)
    n = x.size
    found: list[QualityFinding] = []

    def add(code: str, severity: str, text: str) -> None:
        found.append(QualityFinding(code, severity, f"{label}: {text}", index))

    if n < min_samples:
        add("too_short", "error", f"{n} samples; at least {min_samples} are needed "
            "for analysis")
    if n == 0:
        return found

    finite = np.isfinite(x)
    n_bad = n - int(np.count_nonzero(finite))
    if n_bad:
        add("non_finite", "error", f"{n_bad} of {n} samples are NaN or infinite")
        x = x[finite]
        if x.size == 0:
            return found

    full_scale = None if channel.full_scale is None else abs(float(channel.full_scale))
    if full_scale is not None and not (np.isfinite(full_scale) and full_scale > 0):
        full_scale = None
    x_max, x_min = float(x.max()), float(x.min())
    ptp = x_max - x_min
    flat_limit = 0.0 if full_scale is None else FLAT_FRACTION_OF_FULL_SCALE * full_scale
    if ptp == 0.0 or ptp < flat_limit:
        add("flat", "error", f"peak-to-peak {ptp:.3g} {channel.unit}: the channel is "
            "constant (dead sensor, broken cable or no supply?)")
        return found

    n_clipped = _clipped_samples(x, x_max, x_min, full_scale)
    if full_scale is not None and n_clipped:
        add("clipping", "warning", f"{n_clipped} samples ({100.0 * n_clipped / x.size:.3g} %) "
            f"sit at full scale (±{full_scale:.6g} {channel.unit}) in runs of "
            f"{CLIP_MIN_RUN} or more; amplitudes are understated and the spectrum "
            "has false harmonics")
    elif full_scale is None and n_clipped > CLIP_MIN_SHARE * x.size:
        add("clipping", "warning", f"{n_clipped} samples ({100.0 * n_clipped / x.size:.3g} %) "
            f"sit at the channel's own maximum or minimum in runs of {CLIP_MIN_RUN} or "
            "more; the signal looks clipped")

    mean, std = _mean_std(x)
    biased = abs(mean) > DC_SIGMA * std
    if full_scale is not None:
        biased = biased and abs(mean) > DC_FRACTION_OF_FULL_SCALE * full_scale
    if biased:
        add("dc_offset", "warning", f"mean {mean:.4g} {channel.unit} is more than "
            f"{DC_SIGMA:g} × the standard deviation ({std:.3g}); check the sensor "
            "bias (an AC-coupled accelerometer should read about zero mean)")
    return found


def _label(channel: Channel, index: int | None, source: str) -> str:
    where = f"{source}: " if source else ""
    number = "" if index is None else f" {index}"
    name = f" ({channel.name})" if channel.name else ""
    return f"{where}channel{number}{name}"


def _mean_std(x: np.ndarray, block: int = 1 << 20) -> tuple[float, float]:
    """Mean and (population) standard deviation, summed in blocks so that no temporary
    as long as the channel is made (``x.std()`` would allocate one)."""
    mean = float(x.mean())
    total = 0.0
    for start in range(0, x.size, block):
        d = x[start:start + block] - mean
        total += float(np.dot(d, d))
    return mean, float(np.sqrt(total / x.size))


def _clipped_samples(x: np.ndarray, x_max: float, x_min: float,
                     full_scale: float | None) -> int:
    """Number of samples that lie in runs of ``CLIP_MIN_RUN`` or more at the limit."""
    if full_scale is not None:
        level = CLIP_FRACTION_OF_FULL_SCALE * full_scale
        high = x >= level
        low = x <= -level
        if x_max >= CLIP_TOP_CODE_FRACTION * full_scale:
            high |= x == x_max
        if x_min <= -CLIP_TOP_CODE_FRACTION * full_scale:
            low |= x == x_min
    else:
        high = x == x_max
        low = x == x_min
    return _samples_in_runs(high) + _samples_in_runs(low)


def _samples_in_runs(mask: np.ndarray, min_run: int = CLIP_MIN_RUN) -> int:
    """Total length of the runs of True in ``mask`` that are at least ``min_run`` long."""
    if not mask.any():
        return 0
    edges = np.diff(np.concatenate(([False], mask, [False])).view(np.int8))
    starts = np.flatnonzero(edges == 1)
    ends = np.flatnonzero(edges == -1)
    lengths = ends - starts
    return int(lengths[lengths >= min_run].sum())
