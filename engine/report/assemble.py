"""Report content from a plant archive: a report per machine or per survey.

:func:`machine_report` and :func:`survey_report` read an archive (never write it) and
fill a :class:`~engine.report.data.ReportData` that :func:`engine.report.render`
writes as PDF or HTML.

What a report shows
-------------------
* **Status** — one line per point: machine (tag and name), point, alarm state, ISO
  20816 zone and overall velocity of its latest run, the band that set the state, and
  a note (data quality, the leading finding, why there is no state).  A machine report
  takes each point's state now (:meth:`Archive.point_states`); a survey report the
  state of each point's latest run within the survey.
* **Trends** (:func:`engine.trends.trend`), for each point: the overall velocity; every
  band of the plan in force whose latest run is in alert or danger, or whose forecast
  is rising; and, for a bearing finding, the envelope line at its defect frequency
  (e.g. ``bpfo_g``).  Each with its alert and danger lines and forecast.
* **Forecasts** — the expected alert and danger dates of every trend that has levels
  and is rising (or is already above a level).
* **Spectra** — the velocity spectrum and the envelope spectrum of each reported
  finding's run, with the evidence frequencies marked by their source names
  (evidence in g was read on the envelope spectrum, the rest on the velocity
  spectrum) and the plan's bands with their own edges shaded, in Hz at the run's speed.
* **Findings** — of each point's latest run: those graded above "info", and all of a
  point in alert or danger (an alarm should not go out unexplained); most severe first.
* **Cautions** (:data:`engine.report.CAUTIONS`) and **notes**: the scope, the rules
  above in one sentence, the ISO note that zone limits are generic
  (:data:`engine.alarms.iso.GENERIC_NOTE`) and which plan each point uses.

A **survey** is one pass over the plant: runs taken within :data:`SURVEY_SPAN_DAYS` of
the survey's newest run.  The newest survey starts at the archive's newest run; each
older one at the newest run before the previous survey began (:func:`surveys`).
"""

from __future__ import annotations

import math
from collections.abc import Callable, Iterable
from dataclasses import dataclass
from datetime import UTC, datetime
from datetime import date as Date

import numpy as np

from ..alarms.iso import GENERIC_NOTE
from ..archive.derived_store import NO_DATA_AFTER_DAYS
from ..errors import InputError
from ..findings import SEVERITIES
from ..pipeline import plan_in_force
from . import CAUTIONS, ReportCancelled
from .data import ReportData, STATES, iso_date
from .output import is_cancelled
from .point_content import PointLatest, point_content, report_state, worst_state

#: A survey holds the runs taken within this many days of its newest run.
SURVEY_SPAN_DAYS = 3.0
_DAY = 86400.0

Progress = Callable[[int, int, str], None] | None

#: Sentence of the notes that says what the report chose to show.
SELECTION_NOTE = (
    "Trends: the overall velocity of every point, each alarm band in alert or danger or "
    "with a rising forecast, and the envelope line at the defect frequency of each "
    "bearing finding. Forecast table: the values with levels whose trend is rising or "
    "already above a level. Findings: those of each point's latest run graded above "
    "info, and all findings of a point in alert or danger. Spectra: the runs of those findings, "
    "with the evidence marked by source; the broadband overall band is not shaded (it "
    "spans the whole spectrum), its levels are on the overall-velocity trend.")


# -- machines and surveys ---------------------------------------------------------------
def machine_tags(arc) -> list[str]:
    """Every machine of the archive as ``TAG`` (``SITE/TAG`` when the plant has
    several sites), in the plant's order."""
    many = len(arc.plant.sites) > 1
    return [f"{s.name}/{t}" if many else t for s in arc.plant.sites.values()
            for t in s.machines]


def find_machine(arc, tag: str) -> tuple[str, str]:
    """The site and tag of a machine given by its tag (or ``SITE/TAG``).

    Raises
    ------
    InputError
        No such machine (the message lists the machines), or a tag used at more than
        one site (the message lists those sites).
    """
    text = str(tag).strip()
    if "/" in text:
        site, t = text.rsplit("/", 1)
        arc.plant.machine(site.strip(), t.strip())
        return site.strip(), t.strip()
    sites = [s.name for s in arc.plant.sites.values() if text in s.machines]
    if not sites:
        raise InputError(f"{arc.path}: no machine {text!r}; machines: "
                         + (", ".join(machine_tags(arc)) or "none yet"))
    if len(sites) > 1:
        raise InputError(f"{arc.path}: machine {text!r} is at more than one site: "
                         f"{', '.join(sites)}; give SITE/{text}")
    return sites[0], text


@dataclass(frozen=True)
class Survey:
    """One survey: its runs were taken from ``start_s`` to ``end_s`` (POSIX s, UTC)."""

    start_s: float
    end_s: float
    runs: int

    @property
    def label(self) -> str:
        """Its date, or first and last date when it spans days (ISO, UTC)."""
        a, b = iso_date(self.start_s), iso_date(self.end_s)
        return a if a == b else f"{a} to {b}"

    def holds(self, day: Date) -> bool:
        return Date.fromisoformat(iso_date(self.start_s)) <= day <= Date.fromisoformat(
            iso_date(self.end_s))


def surveys(arc) -> list[Survey]:
    """The archive's surveys, newest first (rule: module notes)."""
    times = np.sort(np.array([r.taken_s for r in arc.runs()], dtype=float))
    times = times[np.isfinite(times)][::-1]
    out: list[Survey] = []
    i = 0
    while i < times.size:
        end = float(times[i])
        j = i
        while j + 1 < times.size and times[j + 1] >= end - SURVEY_SPAN_DAYS * _DAY:
            j += 1
        out.append(Survey(start_s=float(times[j]), end_s=end, runs=j - i + 1))
        i = j + 1
    return out


def find_survey(arc, date: str | None = None) -> Survey:
    """The survey holding a run taken on ``date`` (ISO date, UTC), or the newest.

    Raises
    ------
    InputError
        The archive has no runs, the date is not an ISO date, or no survey has a run
        that day (the message lists the surveys).
    """
    found = surveys(arc)
    if not found:
        raise InputError(f"{arc.path}: no runs, so no survey to report")
    if date is None or str(date).strip() == "":
        return found[0]
    try:
        day = Date.fromisoformat(str(date).strip())
    except ValueError:
        raise InputError(f"survey date {date!r} is not an ISO date (YYYY-MM-DD)") from None
    for s in found:
        if s.holds(day):
            return s
    listed = ", ".join(s.label for s in found[:12]) + (", …" if len(found) > 12 else "")
    raise InputError(f"{arc.path}: no survey has runs on {day.isoformat()}; surveys: "
                     f"{listed}")


# -- the latest run of each point -------------------------------------------------------
def _no_state_note(arc, point: str, run_id: str, state: str) -> str:
    if state:
        return ""
    if not run_id:
        return "runs not analysed yet" if arc.runs(point) else "no runs"
    return ("not evaluated: no alarm plan" if plan_in_force(arc, point) is None
            else "not evaluated yet")


def latest_now(arc, point: str, entry: dict) -> PointLatest:
    """A point's latest run from :meth:`Archive.point_states`'s entry."""
    out = PointLatest(run_id=entry["run_id"], state=entry["state"], zone=entry["zone"],
                      overall_mm_s=entry["overall_mm_s"], taken_s=entry["taken_s"],
                      worst_band=entry["worst_band"], quality=entry["quality"])
    out.note = _no_state_note(arc, point, out.run_id, out.state)
    if out.run_id and out.state == "no data":
        out.note = f"latest run over {NO_DATA_AFTER_DAYS:g} days older than the newest"
    return out


def latest_in(arc, point: str, survey: Survey) -> PointLatest:
    """A point's latest analysed run within a survey (state as last evaluated)."""
    rows = arc.value_rows(point)
    n = rows["run_id"].size if rows else 0
    idx = np.flatnonzero((rows["taken_s"] >= survey.start_s) & (rows["taken_s"] <= survey.end_s)
                         ) if n else np.zeros(0, int)
    if not idx.size:
        ran = any(survey.start_s <= r.taken_s <= survey.end_s for r in arc.runs(point))
        return PointLatest(note="run not analysed yet" if ran else "no run in this survey")
    i = int(idx[-1])
    overall = rows.get("overall_velocity_mm_s")
    out = PointLatest(run_id=str(rows["run_id"][i]), state=str(rows["state"][i]),
                      zone=str(rows["zone"][i]),
                      overall_mm_s=float(overall[i]) if overall is not None else math.nan,
                      taken_s=float(rows["taken_s"][i]), worst_band=str(rows["worst_band"][i]),
                      quality=str(rows["quality"][i]))
    out.note = _no_state_note(arc, point, out.run_id, out.state)
    return out


# -- notes --------------------------------------------------------------------------------
def plan_notes(arc, points: list[str], labels: dict[str, str]) -> list[str]:
    """Sentences saying which alarm plan each point uses, points grouped by plan kind."""
    groups: dict[tuple[str, str], list[str]] = {}
    for p in points:
        plan = plan_in_force(arc, p)
        if plan is None:
            key = ("none", "")
        elif arc.plan(p) is None:
            key = ("default", plan.name)
        else:
            key = ("own", plan.origin)
        name = labels[p]
        if plan is not None and key[0] == "own" and plan.name not in (name, p):
            name += f" (plan \u201c{plan.name}\u201d)"
        groups.setdefault(key, []).append(name)
    out = []
    for (kind, what), names in groups.items():
        where = ", ".join(names)
        if kind == "own":
            out.append(f"Alarm plans of their own, levels from {what}: {where}.")
        elif kind == "default":
            out.append(f"The ISO 20816-3 default plan ({what}, generic limits): {where}.")
        else:
            out.append(f"No alarm plan, so no alarm state: {where}.")
    return out


# -- putting it together --------------------------------------------------------------
def _now_iso() -> str:
    return datetime.now(UTC).isoformat(timespec="seconds")


def _assemble(arc, *, title: str, scope: str, points: list[tuple[str, str, str]],
              latest: Callable[[str], PointLatest], scope_note: str,
              since_s: float | None, until_s: float | None, progress: Progress,
              cancel) -> ReportData:
    """The report of ``points`` = [(site, tag, point path)] in the order given."""
    many = len(arc.plant.sites) > 1
    total = len(points) + 1
    data = ReportData(title=title, plant=arc.plant_name, scope=scope,
                      generated_at=_now_iso(), status=[], trends=[], spectra=[],
                      findings=[], forecasts=[], cautions=list(CAUTIONS), notes=[])
    labels: dict[str, str] = {}
    extra: list[str] = []
    iso_judged = False
    for k, (site, tag, path) in enumerate(points):
        if is_cancelled(cancel):
            raise ReportCancelled(f"{arc.path}: report cancelled after {k} of "
                                  f"{len(points)} points; no file written")
        machine = arc.plant.machine(site, tag)
        label = f"{site}/{tag}" if many else tag
        part = point_content(arc, path, machine_label=label,
                             machine_name=str(machine.props.get("name", "") or ""),
                             latest=latest(path), plan=plan_in_force(arc, path),
                             since_s=since_s, until_s=until_s)
        labels[path] = f"{label} {arc.point(path).name}"
        iso_judged |= bool(part.row.zone) or machine.props.get("iso_group") in (1, 2)
        data.status.append(part.row)
        data.trends += part.trends
        data.forecasts += part.forecasts
        data.spectra += part.spectra
        data.findings += part.findings
        extra += part.notes
        if progress is not None:
            progress(k + 1, total, labels[path])
    data.findings.sort(key=lambda f: -SEVERITIES.index(f.severity)
                       if f.severity in SEVERITIES else 0)
    data.notes = [scope_note, SELECTION_NOTE]
    if iso_judged:
        data.notes.append(f"ISO 20816 zones and default levels: {GENERIC_NOTE}")
    data.notes += plan_notes(arc, [p for _, _, p in points], labels) + extra
    if progress is not None:
        progress(total, total, "notes")
    return data


def _check_since(since_s) -> float | None:
    if since_s is None:
        return None
    try:
        s = float(since_s)
    except (TypeError, ValueError):
        raise InputError(f"report: since_s must be seconds since 1970 UTC, got "
                         f"{since_s!r}") from None
    if not math.isfinite(s):
        raise InputError(f"report: since_s must be finite, got {since_s!r}")
    return s


def machine_report(arc, site: str, tag: str, *, since_s: float | None = None,
                   progress: Progress = None, cancel=None) -> ReportData:
    """The report of one machine: its points as they stand now.

    Parameters
    ----------
    arc : Archive
        Open for reading (nothing is written).
    site, tag : str
        The machine (see :func:`find_machine` to find the site of a tag).
    since_s : float, optional, keyword-only
        Trends show the runs taken at or after this time (POSIX s, UTC); forecasts
        are made from the whole history.
    progress : callable(done, total, text), optional, keyword-only
        Called after each point and once at the end.
    cancel : callable returning bool, or object with ``is_set()``, optional
        Checked before each point.

    Returns
    -------
    ReportData

    Raises
    ------
    InputError
        An unknown site or machine (the message lists the known ones), a bad
        ``since_s``.
    ReportCancelled
        When cancelled.
    """
    since = _check_since(since_s)
    machine = arc.plant.machine(site, tag)
    name = str(machine.props.get("name", "") or "")
    states = arc.point_states()
    points = [(site, tag, p.path) for p in machine.points.values()]
    where = "" if site == arc.plant_name or len(arc.plant.sites) == 1 else f", site {site}"
    scope_note = ("Status: the latest analysed run of each point, with the state of the "
                  "last evaluation" + (f"; trends from {iso_date(since)}" if since is not None
                                       else "") + ".")
    return _assemble(arc, title=f"Machine report {tag}",
                     scope=f"Machine {tag}" + (f" \u2014 {name}" if name else "") + where,
                     points=points, latest=lambda p: latest_now(arc, p, states[p]),
                     scope_note=scope_note, since_s=since, until_s=None,
                     progress=progress, cancel=cancel)


def survey_report(arc, *, date: str | None = None, machines: Iterable[str] | None = None,
                  progress: Progress = None, cancel=None) -> ReportData:
    """The report of one survey: every machine's points as that survey found them.

    Parameters
    ----------
    arc : Archive
        Open for reading (nothing is written).
    date : str, optional, keyword-only
        An ISO date (UTC) on which the survey took runs; default the newest survey
        (the runs within :data:`SURVEY_SPAN_DAYS` of the archive's newest run).
    machines : iterable of str, optional, keyword-only
        Tags (or ``SITE/TAG``) of the machines to include; default all.
    progress : callable(done, total, text), optional, keyword-only
    cancel : callable returning bool, or object with ``is_set()``, optional

    Returns
    -------
    ReportData
        Trends and forecasts use the runs up to the survey's newest run.

    Raises
    ------
    InputError
        No runs, a bad date or one without a survey (the surveys are listed), an
        unknown machine (the machines are listed).
    ReportCancelled
        When cancelled.
    """
    survey = find_survey(arc, date)
    chosen = [(s.name, t) for s in arc.plant.sites.values() for t in s.machines]
    if machines is not None:
        wanted = {find_machine(arc, m)
                  for m in ([machines] if isinstance(machines, str) else machines)}
        if not wanted:
            raise InputError("survey report: machines is empty; give at least one tag")
        chosen = [m for m in chosen if m in wanted]        # in the plant's order
    points = [(s, t, p.path) for s, t in chosen
              for p in arc.plant.machine(s, t).points.values()]
    first = datetime.fromtimestamp(survey.start_s, UTC)
    last = datetime.fromtimestamp(survey.end_s, UTC)
    scope_note = (f"Survey: the plant's {survey.runs} runs taken from {first:%Y-%m-%d %H:%M} to "
                  f"{last:%Y-%m-%d %H:%M} UTC (runs within {SURVEY_SPAN_DAYS:g} days of "
                  f"its newest). Status: each point's latest run in it; trends and "
                  f"forecasts use the runs up to {last:%Y-%m-%d %H:%M}.")
    scope = (f"Survey of {survey.label} \u2014 {len(chosen)} machine"
             f"{'s' if len(chosen) != 1 else ''}, {len(points)} points")
    return _assemble(arc, title=f"Survey report {survey.label}", scope=scope, points=points,
                     latest=lambda p: latest_in(arc, p, survey), scope_note=scope_note,
                     since_s=None, until_s=survey.end_s, progress=progress,
                     cancel=cancel)


# -- summaries ----------------------------------------------------------------------------
def state_counts(data: ReportData) -> dict[str, int]:
    """How many points of the report are in each state (every state of
    :data:`~engine.report.data.STATES`, zero included)."""
    counts = {s: 0 for s in STATES}
    for row in data.status:
        counts[report_state(row.state)] += 1
    return counts


def summary_line(data: ReportData) -> str:
    """One line: the number of points in each state, most urgent first, and the
    points in danger or alert."""
    counts = state_counts(data)
    order = ("danger", "alert", "bad data", "no data", "ok")
    parts = [f"{counts[s]} {s}" for s in order if counts[s]]
    n = len(data.status)
    head = f"{n} point{'s' if n != 1 else ''}: " + (", ".join(parts) if parts else "none")
    alarmed = [r for r in data.status if r.state in ("danger", "alert")]
    urgent = [f"{r.machine} {r.point} ({r.state})"
              for r in sorted(alarmed, key=lambda r: r.state != "danger")]
    if urgent:
        head += "; " + ", ".join(urgent[:6]) + (", \u2026" if len(urgent) > 6 else "")
    return head


def worst(data: ReportData) -> str:
    """The most urgent state in the report ("no data" when it has no points)."""
    return worst_state(r.state for r in data.status)


__all__ = ["SELECTION_NOTE", "SURVEY_SPAN_DAYS", "Survey", "find_machine", "find_survey",
           "latest_in", "latest_now", "machine_report", "machine_tags", "plan_notes",
           "state_counts", "summary_line", "survey_report", "surveys", "worst"]
