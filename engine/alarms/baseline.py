"""Alarm levels learnt from a point's first healthy runs (statistical baseline).

Two methods, applied band by band to the values of the baseline runs:

* ``sigma`` — alert = mean + k·σ, danger = mean + danger_k·σ, with σ the sample
  standard deviation (``ddof=1``).  For Gaussian values a run of the healthy machine
  exceeds mean + 3σ with probability 1 − Φ(3) = 0.135 % (one-sided: only high values
  alarm), about one false alert in 740 runs; mean + 6σ is exceeded with probability
  about 1e-9.  Hence the defaults k = 3 and danger_k = 6.  Band amplitudes are not
  always Gaussian (narrow bands are closer to Rayleigh or log-normal, with a longer
  upper tail), so the real false-alarm rate may be higher; more baseline runs give a
  steadier σ.
* ``ratio`` — alert = alert_ratio · mean, danger = danger_ratio · mean.  The defaults
  2.5× (+8 dB) and 5× (+14 dB) over the normal level are common practice for narrow
  bands, whose normal level varies too little from run to run for σ to be a useful
  scale.

Each band needs at least :data:`MIN_BASELINE_RUNS` finite values (a mean and σ from
fewer runs say little about the machine's normal spread; common practice).  The levels
are statistics of this machine's past, not a judgement of its condition: a machine
that was already faulty during the baseline gets levels that accept the fault.

References
----------
.. [1] M. Abramowitz, I. A. Stegun, Handbook of Mathematical Functions (1964),
   Table 26.1 — the normal probability function: 1 − Φ(3) = 0.00135.
"""

from __future__ import annotations

import math
from collections.abc import Mapping, Sequence
from dataclasses import replace

import numpy as np

from ..errors import InputError
from .plan import AlarmPlan

MIN_BASELINE_RUNS = 5
METHODS = ("sigma", "ratio")


def _positive(value, name: str) -> float:
    try:
        v = float(value)
    except (TypeError, ValueError):
        raise InputError(f"baseline: {name} must be a number, got {value!r}") from None
    if not (math.isfinite(v) and v > 0):
        raise InputError(f"baseline: {name} must be a positive number, got {value!r}")
    return v


def band_statistics(template: AlarmPlan, runs_values: Sequence[Mapping[str, float]]
                    ) -> dict[str, tuple[int, float, float]]:
    """Count of finite values, mean and sample σ (ddof=1) of each band of a plan.

    Returns
    -------
    dict of str to (n, mean, sigma)
        In each band's unit and scale; NaN mean/σ when n < 2.
    """
    out = {}
    for b in template.bands:
        vals = []
        for i, run in enumerate(runs_values):
            try:
                vals.append(float(run.get(b.name, math.nan)))
            except (TypeError, ValueError):
                raise InputError(f"baseline: run {i + 1}: band {b.name!r}: value must be a "
                                 f"number, got {run.get(b.name)!r}") from None
        v = np.asarray(vals, dtype=float)
        v = v[np.isfinite(v)]
        n = int(v.size)
        mean = float(v.mean()) if n else math.nan
        sigma = float(v.std(ddof=1)) if n >= 2 else math.nan
        out[b.name] = (n, mean, sigma)
    return out


def baseline_plan(template: AlarmPlan, runs_values: list[dict[str, float]], *,
                  method: str = "sigma", k: float = 3.0, danger_k: float = 6.0,
                  alert_ratio: float = 2.5, danger_ratio: float = 5.0,
                  name: str | None = None) -> AlarmPlan:
    """A plan with the template's bands and levels learnt from baseline runs.

    Parameters
    ----------
    template : AlarmPlan
        Bands to keep (names, measures, edges, units); their levels are replaced.
    runs_values : list of dict
        One dict per baseline run: band name → value in the band's unit and scale
        (as :func:`engine.alarms.measure.measure_plan` gives); NaN values and missing
        bands are skipped.
    method : str, keyword-only
        ``sigma`` or ``ratio`` (see the module notes).
    k, danger_k : float
        Multiples of σ above the mean for alert and danger (sigma method).
    alert_ratio, danger_ratio : float
        Multiples of the mean for alert and danger (ratio method).
    name : str, optional
        Name of the new plan; default the template's with " (baseline)".

    Returns
    -------
    AlarmPlan
        Origin ``"baseline of N runs (method)"``; the note gives each band's count,
        mean and σ.

    Raises
    ------
    InputError
        Fewer than :data:`MIN_BASELINE_RUNS` finite values for a band; a σ of zero
        (sigma method) or a mean of zero (ratio method); factors out of order.
    """
    template.validate(source=f"baseline template {template.name!r}")
    if method not in METHODS:
        raise InputError(f"baseline: method {method!r} is not known; expected one of "
                         + ", ".join(METHODS))
    if method == "sigma":
        k, danger_k = _positive(k, "k"), _positive(danger_k, "danger_k")
        if not k < danger_k:
            raise InputError(f"baseline: k {k:g} must be below danger_k {danger_k:g}")
    else:
        alert_ratio = _positive(alert_ratio, "alert_ratio")
        danger_ratio = _positive(danger_ratio, "danger_ratio")
        if not 1.0 < alert_ratio < danger_ratio:
            raise InputError(f"baseline: alert_ratio {alert_ratio:g} must be above 1 and "
                             f"below danger_ratio {danger_ratio:g}")
    runs = list(runs_values)
    stats = band_statistics(template, runs)
    bands, lines = [], []
    for b in template.bands:
        n, mean, sigma = stats[b.name]
        pre = f"baseline: band {b.name!r}:"
        if n < MIN_BASELINE_RUNS:
            raise InputError(f"{pre} {n} run(s) with a value; a baseline needs at least "
                             f"{MIN_BASELINE_RUNS}")
        if method == "sigma":
            if not sigma > 0:
                raise InputError(f"{pre} the {n} values do not vary (σ = 0); use the ratio "
                                 "method")
            alert, danger = mean + k * sigma, mean + danger_k * sigma
        else:
            if not mean > 0:
                raise InputError(f"{pre} the mean of the {n} values is {mean:g}; the ratio "
                                 "method needs a positive mean")
            alert, danger = alert_ratio * mean, danger_ratio * mean
        if not alert > 0:
            raise InputError(f"{pre} the alert level mean + k·σ = {alert:g} is not positive")
        bands.append(replace(b, alert=float(alert), danger=float(danger)))
        unit = "" if b.unit == "1" else f" {b.unit}"
        lines.append(f"{b.name}: n={n}, mean={mean:.6g}{unit}, σ={sigma:.6g}{unit}")
    rule = (f"alert = mean + {k:g}σ, danger = mean + {danger_k:g}σ" if method == "sigma"
            else f"alert = {alert_ratio:g} × mean, danger = {danger_ratio:g} × mean")
    note = (f"Statistical baseline ({rule}). " + "; ".join(lines)
            + ". Levels learnt from this machine's own runs; they do not replace the "
            "manufacturer's limits or the site's standards.")
    plan = AlarmPlan(name=name or f"{template.name} (baseline)", bands=tuple(bands),
                     origin=f"baseline of {len(runs)} runs ({method})", note=note)
    plan.validate(source="baseline plan")
    return plan
