"""Alarm plans, their ISO 20816-3 defaults and baselines, band values and alarm states.

Pure computation (no storage, no Qt):

* :mod:`.plan` — :class:`Band`, :class:`AlarmPlan`, validation and the plan file;
* :mod:`.iso` — ISO 20816-3 zone boundaries and the generic default plan;
* :mod:`.measure` — the value of each band for one run;
* :mod:`.evaluate` — states of runs (one, or a whole history) and the event log;
* :mod:`.baseline` — levels learnt from a point's first healthy runs.
"""

from .baseline import METHODS, MIN_BASELINE_RUNS, band_statistics, baseline_plan
from .evaluate import (BAD_DATA, NO_DATA, SEVERITY, STATES, BandState, Event, RunState,
                       evaluate_history, evaluate_run, state_changes, worst)
from .iso import (FOUNDATIONS, GENERIC_NOTE, GROUPS, ZONE_BOUNDARIES_MM_S, ZONE_MEANING,
                  ZONES, default_plan, zone_boundaries, zone_of)
from .measure import (DEFECT_TOLERANCE, SCALE_FROM_RMS, MeasureInput, measure,
                      measure_input_from_waveform, measure_plan)
from .plan import (BAND_SCALES, BASES, DEFECTS, FILE_FORMAT, FILE_VERSION, MEASURES,
                   AlarmPlan, Band, plan_to_toml, read_plan_file, write_plan_file)

__all__ = [
    "AlarmPlan", "BAD_DATA", "BAND_SCALES", "BASES", "Band", "BandState", "DEFECTS",
    "DEFECT_TOLERANCE", "Event", "FILE_FORMAT", "FILE_VERSION", "FOUNDATIONS",
    "GENERIC_NOTE", "GROUPS", "MEASURES", "METHODS", "MIN_BASELINE_RUNS", "MeasureInput",
    "NO_DATA", "RunState", "SCALE_FROM_RMS", "SEVERITY", "STATES", "ZONES",
    "ZONE_BOUNDARIES_MM_S", "ZONE_MEANING", "band_statistics", "baseline_plan",
    "default_plan", "evaluate_history", "evaluate_run", "measure",
    "measure_input_from_waveform", "measure_plan", "plan_to_toml", "read_plan_file",
    "state_changes", "worst", "write_plan_file", "zone_boundaries", "zone_of",
]
