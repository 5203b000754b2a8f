"""Forecast of when a rising trend value reaches its alert and danger levels.

The ``recent`` latest runs of one value (NaN values dropped) are fitted by two models of
two parameters each, ``τ`` being days from the last run used: **linear**
``v = c0 + c1·τ`` (least squares, additive normal noise) and **exponential**
``v = exp(p0 + p1·τ)`` (unweighted least squares on ``ln v``: the maximum-likelihood fit
for multiplicative, lognormal noise — a fixed percentage scatter, as vibration levels
show; needs every value > 0, else only linear is tried).

**Model choice** — AICc ([1], ch. 2) on the same data in the value's own units: the
exponential model's log-likelihood in ``ln v`` is carried to ``v`` by the Jacobian term
``−Σ ln v``.  Both models have k = 3 parameters (two and the noise variance); the lower
AICc wins.  Within :data:`CLOSE_AICC` of each other the data cannot tell them apart
([1], ch. 2) and the model reaching the highest given level sooner is used: a forecast
that comes too late costs more than one too early.  AICc needs n ≥ k + 2, hence
:data:`MIN_POINTS` = 5.

**Direction** — t-statistic of the chosen model's slope against the one-sided 95 %
Student-t quantile with n − 2 dof (the slope's two-sided 90 % interval excludes zero):
rising above it, falling below minus it, flat otherwise.

**Intervals** — 90 %, model-based residual bootstrap ([2], ch. 6): modified (leverage-
adjusted, centred) residuals — of ``v`` for linear, of ``ln v`` for exponential — are
resampled onto the fitted line and refitted in closed form, all resamples at once; the
resampled parameters are widened about the fit by t(n − 2)/z at 95 % (our small-sample
correction: resamples spread like a normal law with the fitted noise, the exact law is
Student-t).  The 5th and 95th percentiles of the resampled crossing dates bound the
interval (a resample with slope ≤ 0 never crosses).  It is the uncertainty of the trend
given the model and the regime.  ``numpy.random.default_rng(seed)`` makes it repeat.

Dates after ``now_s + horizon_days`` are NaN ("beyond the horizon" in the reason).  A
last value at or above danger (alert, when there is no danger) gives "already above"
without a fit.  Times are seconds since 1970-01-01 UTC.

References
----------
.. [1] K. P. Burnham and D. R. Anderson, *Model Selection and Multimodel Inference*,
   2nd ed., Springer, 2002.
.. [2] A. C. Davison and D. V. Hinkley, *Bootstrap Methods and their Application*,
   Cambridge University Press, 1997.
"""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import dataclass, field
from datetime import UTC, datetime
from functools import partial

import numpy as np
from scipy.special import ndtri, stdtrit

from .errors import InputError

#: Fewest runs a forecast is made from: AICc with k = 3 parameters needs n ≥ k + 2.
MIN_POINTS = 5
#: Default number of most recent runs the fit uses.
RECENT_POINTS = 8
#: Two-sided coverage of every interval (and the one-sided slope test at (1 + 0.90)/2).
CONFIDENCE = 0.90
#: AICc difference below which the two models count as fitting equally well ([1]).
CLOSE_AICC = 2.0
#: Points on the plotted curve.
CURVE_POINTS = 120

_DAY_S = 86400.0
_Q_LOW = 100 * (1 - CONFIDENCE) / 2  # percentile of an interval's lower bound
_K = 3  # parameters of each model: two plus the noise variance
# Relative noise floor so that exact data gives a finite likelihood (1e-9 of the level).
_REL_FLOOR = 1e-9

_nan = math.nan


@dataclass
class Forecast:
    """Result of :func:`forecast`.

    Attributes
    ----------
    status : str
        "forecast", "flat", "falling", "too few points" or "already above".
    model, reason : str
        "linear", "exponential" ("" when no fit); plain sentences saying why, with the
        fit-quality numbers, or why there is no forecast.
    points_used : int
        Runs the fit used (valid runs seen, when no fit was made).
    slope_per_day, slope_t, r2 : float
        Chosen model's slope (linear: value unit/day; exponential: growth rate, 1/day),
        its t-statistic, and R² in the value's own units.  NaN without fit.
    alert_date_s, alert_low_s, alert_high_s, danger_date_s, danger_low_s, danger_high_s
        Expected date of reaching each level and its 90 % interval, s since 1970 UTC;
        NaN when none (no level, no rise, already above, beyond the horizon).
    curve_t_s, curve_value, curve_low, curve_high : numpy.ndarray
        Fitted and extrapolated curve (s since 1970 UTC, value unit) and its 90 % band.
    aicc_linear, aicc_exponential, rms_linear, rms_exponential : float
        AICc on the same data and RMS residual (value unit) of each model; NaN if not fitted.
    """

    status: str
    model: str
    reason: str
    points_used: int
    slope_per_day: float = _nan
    r2: float = _nan
    alert_date_s: float = _nan
    alert_low_s: float = _nan
    alert_high_s: float = _nan
    danger_date_s: float = _nan
    danger_low_s: float = _nan
    danger_high_s: float = _nan
    curve_t_s: np.ndarray = field(default_factory=partial(np.empty, 0))
    curve_value: np.ndarray = field(default_factory=partial(np.empty, 0))
    curve_low: np.ndarray = field(default_factory=partial(np.empty, 0))
    curve_high: np.ndarray = field(default_factory=partial(np.empty, 0))
    slope_t: float = _nan
    aicc_linear: float = _nan
    aicc_exponential: float = _nan
    rms_linear: float = _nan
    rms_exponential: float = _nan

    def as_dict(self) -> dict:
        """Plain dict for JSON and reports: dates as ISO-8601 strings ("" when none),
        other NaN numbers as None, curves as lists."""
        d: dict = {k: getattr(self, k) for k in ("status", "model", "reason", "points_used")}
        for k in ("slope_per_day", "r2", "slope_t", "aicc_linear", "aicc_exponential",
                  "rms_linear", "rms_exponential", *(f"{lv}_{p}_s" for lv in ("alert", "danger")
                                                     for p in ("date", "low", "high"))):
            x = float(getattr(self, k))
            d[k] = x if math.isfinite(x) else None
            if k.endswith("_s"):
                d[k[:-2]] = iso_date(x)
        for k in ("curve_t_s", "curve_value", "curve_low", "curve_high"):
            d[k] = [float(x) for x in getattr(self, k)]
        return d


def iso_date(time_s: float) -> str:
    """ISO-8601 UTC text of ``time_s`` (s since 1970), "" for NaN."""
    if not math.isfinite(time_s):
        return ""
    return datetime.fromtimestamp(time_s, tz=UTC).isoformat(timespec="seconds")


@dataclass
class _Fit:
    """One least-squares line in (τ days, y) with y = v or ln v."""

    beta: np.ndarray      # (2,) intercept at τ = 0, slope per day
    resid: np.ndarray     # (n,) residuals in y
    se_slope: float
    aicc: float
    rms_v: float          # RMS residual in the value's own units
    r2_v: float


def _line(tau: np.ndarray, y: np.ndarray, v: np.ndarray, log: bool) -> _Fit:
    n = tau.size
    X = np.column_stack([np.ones(n), tau])
    beta, *_ = np.linalg.lstsq(X, y, rcond=None)
    resid = y - X @ beta
    rss = float(resid @ resid)
    se = math.sqrt(rss / (n - 2) / float(((tau - tau.mean()) ** 2).sum()))
    floor = _REL_FLOOR if log else _REL_FLOOR * max(float(np.abs(v).mean()), 1e-300)
    var = max(rss / n, floor ** 2)  # maximum-likelihood noise variance
    loglik = -0.5 * n * (math.log(2.0 * math.pi * var) + 1.0)
    if log:
        loglik -= float(y.sum())  # Jacobian of ln: density of v = density of ln v / v
    aicc = -2.0 * loglik + 2 * _K + 2 * _K * (_K + 1) / (n - _K - 1)
    rv = v - (np.exp(X @ beta) if log else X @ beta)  # residuals in the value's unit
    tss = float(((v - v.mean()) ** 2).sum())
    r2 = 1.0 - float(rv @ rv) / tss if tss > 0 else _nan
    return _Fit(beta, resid, se, aicc, math.sqrt(float(rv @ rv) / n), r2)


def _bootstrap(tau: np.ndarray, fit: _Fit, n_boot: int, rng: np.random.Generator
               ) -> np.ndarray:
    """(n_boot, 2) refitted (intercept, slope) from resampled residuals."""
    n = tau.size
    X = np.column_stack([np.ones(n), tau])
    pinv = np.linalg.pinv(X)                        # (2, n)
    lev = np.einsum("ij,ji->i", X, pinv)            # leverages h_i
    mod = fit.resid / np.sqrt(np.clip(1.0 - lev, 1e-12, None))
    mod -= mod.mean()
    idx = rng.integers(0, n, size=(n_boot, n))
    ystar = (X @ fit.beta)[None, :] + mod[idx]
    boot = ystar @ pinv.T
    q = 0.5 + CONFIDENCE / 2  # widen by t/z: see the module docstring
    return fit.beta + (float(stdtrit(n - 2, q)) / float(ndtri(q))) * (boot - fit.beta)


def _crossing_days(beta: np.ndarray, level_y: float) -> np.ndarray:
    """τ (days) where intercept + slope·τ reaches ``level_y``; +inf when slope ≤ 0."""
    b0, b1 = np.atleast_2d(beta).T
    with np.errstate(divide="ignore", invalid="ignore"):
        tau = (level_y - b0) / b1
    return np.where(b1 > 0, tau, np.inf)


def _choose(lin: _Fit, expo: _Fit | None, n: int, top: float | None, top_name: str
            ) -> tuple[bool, str]:
    """Whether the exponential model is used, and the sentence that says why."""
    if expo is None:
        return False, (f"Linear fit (exponential not tried: a value is ≤ 0); RMS residual "
                       f"{lin.rms_v:.3g} in the value's unit.")
    nums = (f"AICc linear {lin.aicc:.1f}, exponential {expo.aicc:.1f} on the same {n} runs; "
            f"RMS residual {lin.rms_v:.3g} against {expo.rms_v:.3g} in the value's unit")
    if abs(lin.aicc - expo.aicc) < CLOSE_AICC and top is not None:
        ce = float(_crossing_days(expo.beta, math.log(top))[0]) if top > 0 else math.inf
        cl = float(_crossing_days(lin.beta, top)[0])
        if math.isfinite(min(ce, cl)):
            return ce < cl, (f"{'Exponential' if ce < cl else 'Linear'} fit: the models fit"
                             f" about equally well (AICc within {CLOSE_AICC:g}: {nums}), so"
                             f" the one reaching {top_name} sooner is used, the cautious choice.")
    use_exp = expo.aicc < lin.aicc
    return use_exp, f"{'Exponential' if use_exp else 'Linear'} fit, lower AICc ({nums})."


def _check_level(value, name: str) -> float | None:
    """``value`` as a finite float (None stays None), or InputError naming ``name``."""
    if value is None:
        return None
    try:
        v = float(value)
    except (TypeError, ValueError):
        raise InputError(f"forecast: {name} must be a number or None, got {value!r}") from None
    if not math.isfinite(v):
        raise InputError(f"forecast: {name} must be finite, got {value!r}")
    return v


def _inputs(times_s, values) -> tuple[np.ndarray, np.ndarray]:
    """Validated times and values, NaN values dropped, sorted by time."""
    try:
        t, v = np.asarray(times_s, dtype=float), np.asarray(values, dtype=float)
    except (TypeError, ValueError) as exc:
        raise InputError(f"forecast: times_s and values must be numbers ({exc})") from None
    if t.ndim != 1 or v.shape != t.shape:
        raise InputError(f"forecast: times_s and values must be one-dimensional and of the "
                         f"same length, got shapes {t.shape} and {v.shape}")
    if not np.isfinite(t).all():
        raise InputError("forecast: times_s holds NaN or infinite times; every run needs "
                         "a time in seconds since 1970 UTC")
    if np.isinf(v).any():
        raise InputError("forecast: values holds infinite values")
    keep = ~np.isnan(v)  # NaN = value not measurable for that run: dropped
    order = np.argsort(t[keep], kind="stable")
    return t[keep][order], v[keep][order]


def _level_dates(fit: _Fit, boot: np.ndarray, name: str, level: float, log: bool,
                 t_last: float, horizon_end: float, horizon: float) -> tuple[list[float], str]:
    """[date, low, high] (s, NaN beyond the horizon) of reaching ``level``, and a sentence."""
    ly = math.log(level) if log else level
    date = t_last + float(_crossing_days(fit.beta, ly)[0]) * _DAY_S
    sample = t_last + np.minimum(_crossing_days(boot, ly), 1e12) * _DAY_S
    raw = [date, *(float(x) for x in np.percentile(sample, [_Q_LOW, 100 - _Q_LOW]))]
    got = [x if x <= horizon_end else _nan for x in raw]
    day = [iso_date(x)[:10] for x in got]   # only dates within the horizon are printed
    if math.isnan(got[0]):
        text = f"{name.capitalize()} is beyond the horizon of {horizon:g} days"
        return got, text + (f" (90 % interval from {day[1]})." if not math.isnan(got[1]) else ".")
    upper = day[2] if not math.isnan(got[2]) else "beyond the horizon"
    return got, (f"{name.capitalize()} expected {day[0]}, {(date - t_last) / _DAY_S:.1f} days "
                 f"after the last run (90 % interval {day[1]} to {upper}).")


def _curve(res: Forecast, fit: _Fit, boot: np.ndarray, log: bool, t_first: float,
           t_last: float, horizon_end: float) -> None:
    """Fill the fitted curve and its 90 % band: to 1.2 × the latest date found (or the
    horizon); half the fitted span ahead when nothing is forecast."""
    ends = [x for x in (res.danger_high_s, res.danger_date_s, res.alert_high_s,
                        res.alert_date_s) if math.isfinite(x) and x > t_last]
    end = (t_last + 0.5 * (t_last - t_first) if res.status != "forecast"
           else t_last + 1.2 * (max(ends) - t_last) if ends else horizon_end)
    ct = np.linspace(t_first, max(min(end, horizon_end), t_last), CURVE_POINTS)
    ctau = (ct - t_last) / _DAY_S
    curve = fit.beta[0] + fit.beta[1] * ctau
    low, high = np.percentile(boot[:, :1] + boot[:, 1:] * ctau[None, :],
                              [_Q_LOW, 100 - _Q_LOW], axis=0)
    if log:
        curve, low, high = (np.exp(np.minimum(a, 700.0)) for a in (curve, low, high))
    res.curve_t_s, res.curve_value, res.curve_low, res.curve_high = ct, curve, low, high


def forecast(times_s, values, *, alert: float | None, danger: float | None,
             recent: int = RECENT_POINTS, now_s: float | None = None,
             horizon_days: float = 365.0, n_boot: int = 400, seed: int = 0,
             progress: Callable[[int, int, str], None] | None = None) -> Forecast:
    """Fit the recent trend of one value and forecast when it reaches alert and danger.

    Parameters
    ----------
    times_s, values : array_like, shape (n,)
        Time of each run, s since 1970-01-01 UTC (any order), and the value at it in its
        own unit (e.g. mm/s RMS); NaN values are dropped.
    alert, danger : float or None, keyword-only
        Levels in the value's unit, alert < danger; None when the point has none.
    recent : int, keyword-only
        Number of most recent valid runs the fit uses, ≥ MIN_POINTS.
    now_s, horizon_days : float, keyword-only
        Dates later than ``now_s`` (default: the last run) + ``horizon_days`` are NaN.
    n_boot, seed : int, keyword-only
        Bootstrap resamples (≥ 50) and the seed of its ``numpy.random.Generator``.
    progress : callable(done, total, text), optional, keyword-only
        Called after each of the three stages (validate, fit, bootstrap).

    Returns
    -------
    Forecast
        Status, chosen model and why, dates (s since 1970 UTC) with 90 % intervals, and
        the fitted curve with its band.

    Raises
    ------
    InputError
        Arrays of different length or not 1-D, non-finite times, infinite values,
        alert ≥ danger, ``recent`` < MIN_POINTS, ``horizon_days`` ≤ 0, ``n_boot`` < 50.

    Notes
    -----
    Method: module docstring.  A date before the last run means the fitted trend has
    passed that level although the last measured value has not.
    """
    report = progress if progress is not None else (lambda done, total, text: None)
    t_all, v_all = _inputs(times_s, values)
    alert_v, danger_v = _check_level(alert, "alert"), _check_level(danger, "danger")
    if alert_v is not None and danger_v is not None and not alert_v < danger_v:
        raise InputError(f"forecast: alert ({alert_v:g}) must be below danger ({danger_v:g})")
    for name, count, least in (("recent", recent, MIN_POINTS), ("n_boot", n_boot, 50)):
        if isinstance(count, bool) or not isinstance(count, (int, np.integer)) or count < least:
            raise InputError(f"forecast: {name} must be an integer ≥ {least}, got {count!r}")
    horizon = _check_level(horizon_days, "horizon_days")
    if horizon is None or horizon <= 0:
        raise InputError(f"forecast: horizon_days must be a positive number, got {horizon_days!r}")
    now = _check_level(now_s, "now_s")
    report(1, 3, "validated")

    n_valid = int(t_all.size)
    top = danger_v if danger_v is not None else alert_v
    top_name = "danger" if danger_v is not None else "alert"
    if n_valid and top is not None and v_all[-1] >= top:
        return Forecast("already above", "", f"The last value ({v_all[-1]:.4g}) is already at "
                        f"or above {top_name} ({top:.4g}); there is nothing to forecast.",
                        n_valid)
    t, v = t_all[-int(recent):], v_all[-int(recent):]
    n = int(t.size)
    distinct = int(np.unique(t).size)
    if n < MIN_POINTS or distinct < MIN_POINTS:
        what = f"{n} valid run(s)" if n < MIN_POINTS else f"{distinct} distinct run times"
        return Forecast("too few points", "", f"Only {what}; a forecast needs at least "
                        f"{MIN_POINTS}.", n)

    t_last = float(t[-1])
    tau = (t - t_last) / _DAY_S
    lin = _line(tau, v, v, log=False)
    expo = _line(tau, np.log(v), v, log=True) if bool((v > 0).all()) else None
    use_exp, why = _choose(lin, expo, n, top, top_name)
    fit = expo if use_exp else lin
    model = "exponential" if use_exp else "linear"
    slope = float(fit.beta[1])  # exact data (se = 0): any non-zero slope is certain
    t_stat = (slope / fit.se_slope if fit.se_slope > 0
              else math.copysign(math.inf, slope) if slope else 0.0)
    t_crit = float(stdtrit(n - 2, 0.5 + CONFIDENCE / 2))
    rate = f"growth {100 * slope:.3g} %/day" if use_exp else f"slope {slope:.4g} per day"
    if t_stat > t_crit:
        status = "forecast"
    else:
        status = "falling" if t_stat < -t_crit else "flat"
        why += (f" The trend is {status}: {rate}, t = {t_stat:.3g} against ±{t_crit:.3g} "
                f"(90 % interval of the slope {'below' if status == 'falling' else 'includes'}"
                f" zero); no crossing is forecast.")
    report(2, 3, "fitted")

    boot = _bootstrap(tau, fit, int(n_boot), np.random.default_rng(seed))
    horizon_end = (now if now is not None else t_last) + horizon * _DAY_S
    res = Forecast(status, model, why, n, slope_per_day=slope, r2=fit.r2_v, slope_t=t_stat,
                   aicc_linear=lin.aicc, rms_linear=lin.rms_v,
                   aicc_exponential=expo.aicc if expo else _nan,
                   rms_exponential=expo.rms_v if expo else _nan)
    notes: list[str] = []
    if status == "forecast":
        notes.append(f"Rising: {rate}, t = {t_stat:.3g} > {t_crit:.3g}.")
        for name, level in (("alert", alert_v), ("danger", danger_v)):
            if level is None or v[-1] >= level:
                notes.append(f"No {name} level given." if level is None
                             else f"Already above {name} at the last run.")
                continue
            got, text = _level_dates(fit, boot, name, level, use_exp, t_last, horizon_end,
                                     horizon)
            for part, x in zip(("date", "low", "high"), got):
                setattr(res, f"{name}_{part}_s", x)
            notes.append(text)
        notes.append("Interval: residual bootstrap of the fit, 90 %.")
    res.reason = " ".join([why, *notes])
    _curve(res, fit, boot, use_exp, float(t[0]), t_last, horizon_end)
    report(3, 3, "bootstrap done")
    return res
